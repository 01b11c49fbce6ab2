"""The words of a report: what was run, the inputs table, the assumptions, the settings.

Everything here reads a results Dataset's attributes (contract G of the project notes:
``inputs``, ``data_notes``, ``limits``, ``cooling``, ``duty``, ``hydraulics``...) and returns
plain text or rows; :mod:`explorer.report` turns them into HTML. Numbers are rounded to four
significant figures and carry their unit, read from the name's suffix (``flow_L_min`` ->
"flow", "L/min").
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping

import numpy as np

from explorer.limits import figure_and_margin  # noqa: F401  (the report's name for it)

# name suffix -> unit shown (longest first: "_W_m2K" before "_K")
UNIT_SUFFIXES = (
    ("_W_m2K", "W/(m² K)"), ("_W_mK", "W/(m K)"), ("_W_K", "W/K"), ("_L_min", "L/min"),
    ("_J_per_K", "J/K"), ("_kg_s", "kg/s"), ("_kg_m3", "kg/m³"), ("_J_kgK", "J/(kg K)"),
    ("_uohm", "µΩ"), ("_ohm", "Ω"), ("_kPa", "kPa"), ("_Pa", "Pa"), ("_Ah", "Ah"),
    ("_Wh", "Wh"), ("_mm", "mm"), ("_um", "µm"), ("_m", "m"), ("_C", "°C"), ("_K", "K"),
    ("_kW", "kW"), ("_W", "W"), ("_V", "V"), ("_A", "A"), ("_s", "s"), ("_J", "J"),
)

ELECTROCHEMISTRY_WORDS = {
    "spm": "SPM (single particle model, no electrolyte)",
    "spme": "SPMe (single particle model with electrolyte)",
    "dfn": "DFN (Doyle–Fuller–Newman porous-electrode model)",
}
LAYOUT_WORDS = {
    "single": "single: one rod and one cell temperature, no collectors",
    "averaged": "averaged: one rod at the area-mean state, coupled to the 2-D collector and "
                "thermal fields",
    "distributed": "distributed: a grid of rods coupled through the collector potentials and "
                   "the local temperature",
}


# names whose words alone would be ambiguous or terse
LABELS = {"tim_W_mK": ("TIM conductivity", "W/(m K)"), "tim_mm": ("TIM thickness", "mm"),
          "fin_contact_W_m2K": ("fin contact coefficient", "W/(m² K)"),
          "c_rate": ("C-rate", "C"), "soc": ("SOC", ""), "rib_mm": ("rib between channels", "mm"),
          "wall_mm": ("plate wall", "mm"), "length_mm": ("plate length", "mm"),
          "output_interval_s": ("output interval", "s"), "start_soc": ("start SOC", ""),
          # a cell's width and height are its coated area (the cell file's [geometry])
          "width_mm": ("coated width", "mm"), "height_mm": ("coated height", "mm"),
          "thickness_mm": ("thickness (whole cell)", "mm")}


def split_unit(name: str) -> tuple[str, str]:
    """``flow_L_min`` -> ("flow", "L/min"); a name without a unit suffix keeps its words."""
    if name in LABELS:
        return LABELS[name]
    for suffix, unit in UNIT_SUFFIXES:
        if name.endswith(suffix) and len(name) > len(suffix):
            return name[: -len(suffix)].replace("_", " "), unit
    return name.replace("_", " "), ""


def number(value, digits: int = 4) -> str:
    """A number rounded to ``digits`` significant figures (no float noise), else its text."""
    if isinstance(value, bool | np.bool_):
        return "yes" if value else "no"
    if isinstance(value, int | np.integer):
        return str(int(value))
    if isinstance(value, float | np.floating):
        v = float(value)
        if not math.isfinite(v):
            return "—"
        if v == int(v) and abs(v) < 1e9:
            return str(int(v))
        return f"{v:.{digits}g}"
    return str(value)


def parse(value):
    """An attribute as Python data: JSON strings parsed, anything else as it is."""
    if isinstance(value, str) and value[:1] in "[{":
        try:
            return json.loads(value)
        except ValueError:
            return value
    return value


def recorded_inputs(ds) -> dict | None:
    """``ds.attrs["inputs"]`` (contract G) as a mapping, or None for a file without it."""
    value = parse(ds.attrs.get("inputs"))
    return value if isinstance(value, Mapping) else None


def data_notes(ds) -> list[str]:
    """Every invented, template or assumed input the results file names."""
    notes = parse(ds.attrs.get("data_notes", "[]"))
    out = [str(n) for n in notes] if isinstance(notes, list) else []
    note = str(ds.attrs.get("data_note", "") or "")
    if not out and any(w in note.lower() for w in ("invented", "template", "assumed")):
        out.append(f"cell {ds.attrs.get('cell_name', '')}: {note}")
    return out


# --------------------------------------------------------------------------- words


def duty_words(step: Mapping) -> str:
    """One duty step in words, e.g. "2C discharge (constant current) to 2.8 V"."""
    kind = str(step.get("kind", "step"))
    label = str(step.get("label", "") or "")
    c_rate, value = step.get("c_rate"), step.get("value")
    if kind == "current":
        if c_rate is not None:
            amount = f"{number(abs(float(c_rate)))}C"
            sign = float(c_rate)
        else:
            amount = f"{number(abs(float(value or 0.0)))} A"
            sign = float(value or 0.0)
        text = f"{amount} {'charge' if sign < 0 else 'discharge'} (constant current)"
    elif kind == "power":
        text = f"{number(abs(float(value or 0.0)))} W constant power " \
               f"{'charge' if float(value or 0.0) < 0 else 'discharge'}"
    elif kind == "voltage":
        text = f"voltage hold at {number(value)} V" if value is not None else \
            "voltage hold at the cell's upper limit"
    elif kind == "rest":
        text = "rest"
    elif kind == "profile":
        what = step.get("profile_quantity", "load")
        src = str(step.get("source", "") or "").replace("\\", "/").rsplit("/", 1)[-1]
        text = f"{what} profile{f' {src}' if src else ''}"
        if step.get("profile_samples"):
            text += (f" ({step['profile_samples']} samples over "
                     f"{number(step.get('profile_duration_s', math.nan))} s)")
    else:
        text = label or kind
    given = [e for e in step.get("ends", []) or [] if isinstance(e, Mapping)]
    timed = [e for e in given if e.get("quantity") == "time"]
    ends = [_end_words(e) for e in given if e.get("quantity") != "time"]
    # the voltage window ends a step that has no end of its own (explorer.duty.resolve);
    # otherwise it only guards it, and reaching it cuts the duty short
    guard = kind == "profile" or (kind in ("current", "power") and bool(given)
                                  and not step.get("window_end"))
    if step.get("default_limit", False) and kind in ("current", "power", "profile") \
            and not guard:
        ends.append("the cell's voltage window")
    if timed:  # the step's own clock: "rest for 900 s", "... for 600 s or until ..."
        text += " for " + " or ".join(f"{number(e.get('threshold'))} s" for e in timed)
    if ends:
        text += (" or" if timed else "") + " until " + " or ".join(ends)
    if guard and (step.get("default_limit", False) or kind == "profile"):
        text += " (the cell's voltage window guards it: reaching it cuts the duty short)"
    return text


def _end_words(end: Mapping) -> str:
    quantity = str(end.get("quantity", ""))
    threshold = end.get("threshold")
    unit = {"voltage": "V", "current": "A", "soc": "", "temperature": "°C",
            "time": "s"}.get(quantity, "")
    shown = f"{100 * float(threshold):.0f} %" if quantity == "soc" and threshold is not None \
        else f"{number(threshold)} {unit}".strip()
    word = {"time": "after", "voltage": "voltage", "current": "current", "soc": "SOC",
            "temperature": "temperature"}.get(quantity, quantity)
    if quantity == "time":
        return f"{word} {shown}"
    direction = "falls to" if end.get("direction") == "below" else "rises to"
    return f"{word} {direction} {shown}"


def cooling_words(desc) -> str:
    """A cooling design in words and its main numbers."""
    if not isinstance(desc, Mapping):
        return str(desc)
    kind = str(desc.get("kind", "cooling"))
    if kind == "adiabatic":
        return "none (adiabatic cell)"
    if kind == "combined":
        return "; plus ".join(cooling_words(p) for p in desc.get("parts", []))
    if kind == "convection":
        return (f"convection on both faces, h = {number(desc.get('h_W_m2K'))} W/(m² K) to "
                f"{number(desc.get('ambient_C'))} °C")
    if kind == "tab_cooling":
        return (f"tab cooling to a bus bar at {number(desc.get('busbar_C'))} °C "
                f"({number(desc.get('conductance_W_K'))} W/K per tab)")
    plate = desc.get("plate", {})
    plate_text = _plate_words(plate) if isinstance(plate, Mapping) else ""
    if kind == "edge_plate":
        fin = desc.get("fin_mm")
        fin_text = (f", through a {number(fin)} mm {desc.get('fin_material', '')} fin "
                    f"(contact {number(desc.get('fin_contact_W_m2K'))} W/(m² K))") if fin else ""
        return (f"edge cold plate under the {desc.get('edge', '?')} edge{fin_text}; "
                f"{plate_text}")
    if kind == "face_plate":
        return (f"face cold plate on the {desc.get('face', '?')} face (interface "
                f"{number(desc.get('tim_mm'))} mm at {number(desc.get('tim_W_mK'))} W/(m K)); "
                f"{plate_text}")
    return kind.replace("_", " ")


def _plate_words(plate: Mapping) -> str:
    if plate.get("kind") == "fixed_sink":
        return f"plate held at {number(plate.get('temperature_C'))} °C"
    return (f"{plate.get('coolant', '?')} at {number(plate.get('flow_L_min'))} L/min, inlet "
            f"{number(plate.get('inlet_C'))} °C, {number(plate.get('channels'))} channels "
            f"{number(plate.get('channel_width_mm'))} × {number(plate.get('channel_height_mm'))} "
            "mm")


def what_was_run(ds) -> list[tuple[str, str]]:
    """(what, in words and numbers) rows of the report's first screen."""
    a = ds.attrs
    inputs = recorded_inputs(ds) or {}
    cell = inputs.get("cell", {}) if isinstance(inputs.get("cell"), Mapping) else {}
    rows = []
    cell_text = str(a.get("cell_name", cell.get("name", "?")))
    file_name = a.get("cell_file") or cell.get("file")
    if file_name:
        cell_text += f" (file {file_name})"
    if cell:
        cell_text += (f": {number(cell.get('nominal_capacity_Ah'))} Ah nominal, "
                      f"{number(cell.get('voltage_min_V'))}–{number(cell.get('voltage_max_V'))} V, "
                      f"coated area {number(cell.get('width_mm'))} × "
                      f"{number(cell.get('height_mm'))} mm, {number(cell.get('thickness_mm'))} "
                      "mm thick")
    limit = a.get("temperature_limit_C")
    if limit is not None:
        cell_text += f"; data-sheet maximum {number(limit)} °C"
    rows.append(("Cell", cell_text))
    duty = parse(inputs.get("duty", a.get("duty", [])))
    if isinstance(duty, list) and duty:
        rows.append(("Duty", "; then ".join(duty_words(s) if isinstance(s, Mapping) else str(s)
                                          for s in duty)))
    cooling = parse(inputs.get("cooling", a.get("cooling")))
    if cooling is not None:
        rows.append(("Cooling", cooling_words(cooling)))
    chem = str(a.get("electrochemistry", "")).lower()
    layout = str(a.get("layout", "")).lower()
    model = ELECTROCHEMISTRY_WORDS.get(chem, chem or "?")
    model += f"; layout {LAYOUT_WORDS.get(layout, layout or '?')}"
    if "grid_nx" in a and layout != "single":
        model += f"; in-plane grid {a['grid_nx']} × {a['grid_ny']}"
    rods = parse(a.get("rods"))
    if layout == "distributed" and isinstance(rods, list):
        model += f", {' × '.join(str(r) for r in rods)} rods"
    if "module_cells" in a:
        model += f"; a module of {a['module_cells']} cells along one coolant path, run coupled"
    rows.append(("Model", model))
    if "start_soc" in a:
        rows.append(("Start", f"SOC {100 * float(a['start_soc']):.0f} %, "
                              f"{number(a.get('start_temperature_C'))} °C uniform, at rest"))
    return rows


# --------------------------------------------------------------------------- inputs table


def input_rows(ds, given=None) -> list[tuple[str, str, str, str]]:
    """(group, input, value, unit) rows: the inputs recorded in the file (contract G), or,
    for a file without them, what its settings say; ``given`` (the app's own inputs mapping)
    adds a group "given in the app"."""
    rows: list[tuple[str, str, str, str]] = []
    inputs = recorded_inputs(ds)
    if inputs is not None:
        cell = inputs.get("cell", {})
        if isinstance(cell, Mapping):
            rows.append(("cell", "cell", str(cell.get("name", "?")), ""))
            rows += [("cell", *r) for r in _flat(cell, skip=("name", "sha256"))]
        for k, step in enumerate(parse(inputs.get("duty", [])) or []):
            if isinstance(step, Mapping):
                group = f"duty step {k + 1}"
                rows.append((group, "duty", duty_words(step), ""))
                skip = ("kind", "ends", "label", "default_limit", "window_end") + \
                    (("value",) if step.get("kind") == "rest" else ())
                rows += [(group, *r) for r in _flat(step, skip=skip)]
        cooling = inputs.get("cooling")
        if isinstance(cooling, Mapping):
            rows += _cooling_rows(cooling)
        for group in ("model", "start"):
            part = inputs.get(group)
            if isinstance(part, Mapping):
                rows += [(group, *r) for r in _flat(part)]
    else:
        rows.append(("cell", "cell", str(ds.attrs.get("cell_name", "?")), ""))
        duty = parse(ds.attrs.get("duty", []))
        for k, step in enumerate(duty if isinstance(duty, list) else []):
            if isinstance(step, Mapping):
                rows.append((f"duty step {k + 1}", "duty", duty_words(step), ""))
        cooling = parse(ds.attrs.get("cooling"))
        if isinstance(cooling, Mapping):
            rows += _cooling_rows(cooling)
        for key in ("electrochemistry", "layout", "start_soc", "start_temperature_C"):
            if key in ds.attrs:
                rows.append(("model", *_named_value(key, ds.attrs[key])))
    if isinstance(given, Mapping):
        for key, value in given.items():
            value = parse(value)
            if isinstance(value, Mapping):
                rows += [("given in the app", f"{key}.{n}", v, u) for n, v, u in
                         _flat_raw(value)]
            else:
                rows.append(("given in the app", str(key), _plain(value), ""))
    return rows


def _cooling_rows(cooling: Mapping, group: str = "cooling") -> list[tuple[str, str, str, str]]:
    kind = str(cooling.get("kind", "cooling"))
    if kind == "combined":
        return [r for k, part in enumerate(cooling.get("parts", []))
                for r in _cooling_rows(part, f"cooling part {k + 1}")]
    rows = [(group, "design", kind.replace("_", " "), "")]
    for key, value in cooling.items():
        if key in ("kind", "hydraulics_scope") or value is None:
            continue
        if isinstance(value, Mapping):  # the plate of a face/edge design
            rows.append((f"{group}: {key}", "kind", str(value.get("kind", key)).replace("_", " "),
                         ""))
            rows += [(f"{group}: {key}", *r) for r in _flat(value, skip=("kind",))]
        else:
            rows.append((group, *_named_value(key, value)))
    return rows


def _flat(mapping: Mapping, skip=(), prefix="") -> list[tuple[str, str, str]]:
    out = []
    for key, value in mapping.items():
        if key in skip or value is None or value == "" or value == [] or value == {}:
            continue
        if isinstance(value, Mapping):
            out += _flat(value, prefix=f"{prefix}{key}.")
        else:
            name, shown, unit = _named_value(key, value)
            out.append((prefix + name, shown, unit))
    return out


def _named_value(key: str, value) -> tuple[str, str, str]:
    name, unit = split_unit(str(key))
    if isinstance(value, list):
        return name, " × ".join(number(v) for v in value), unit
    if key in ("start_soc", "soc") and isinstance(value, int | float) and \
            not isinstance(value, bool):  # a state of charge reads in % (as on the first screen)
        return name, number(100.0 * float(value)), "%"
    if isinstance(value, str):  # a word ("auto") has no unit
        return name, value, ""
    return name, _plain(value), unit


def _plain(value) -> str:
    if isinstance(value, list | tuple):
        return ", ".join(_plain(v) for v in value)
    if isinstance(value, Mapping):
        return ", ".join(f"{k} {_plain(v)}" for k, v in value.items())
    return number(value)


# --------------------------------------------------------------------------- assumptions


def assumptions(ds) -> list[str]:
    """What the model leaves out or assumes, for this run (plain sentences)."""
    a = ds.attrs
    layout = str(a.get("layout", "")).lower()
    chem = str(a.get("electrochemistry", "")).lower()
    out = [
        "Temperature field: the through-thickness mean over the face. The core (mid-thickness) "
        "temperature is an estimate from 1-D conduction through the thickness with the local "
        "heat generation (a plane wall), not a resolved 3-D field; the limits read the hottest "
        "point anywhere, this core estimate included.",
    ]
    if layout == "averaged":
        out.append("Layout averaged: one electrochemical rod at the area-mean state; current "
                   "density and SOC are uniform over the face, and the heat varies over it only "
                   "through the collector and tab Joule heat. Use the distributed layout to see "
                   "local current and SOC.")
    elif layout == "single":
        out.append("Layout single: one temperature for the whole face; spreads over the face "
                   "are not seen (those limits are 'not evaluated').")
    elif layout == "distributed":
        out.append("Layout distributed: a grid of rods, each at its patch's mean temperature; "
                   "finer detail within a patch is not resolved.")
    if chem == "spme":
        out.append("SPMe: valid at moderate rates (about up to 2–3C, common practice); at high "
                   "rates or low temperature electrolyte depletion makes it less accurate than "
                   "the DFN model — the fidelity check runs the fuller model.")
    elif chem == "spm":
        out.append("SPM: no electrolyte transport; underestimates the voltage drop and the heat "
                   "at higher rates.")
    cooling = parse(a.get("cooling"))
    hyd = parse(a.get("hydraulics")) if isinstance(parse(a.get("hydraulics")), Mapping) else {}
    scope = _find(cooling, "hydraulics_scope")
    if scope or hyd.get("pressure_drop_Pa") is not None:
        out.append(f"Hydraulics: {scope}." if scope else
                   "Pressure drop and pump power cover the plate's channels only: manifolds, "
                   "connectors, hoses and the rest of the loop are not included.")
    contacts = _contacts(cooling)
    if contacts:
        out.append("Contact and interface coefficients are assumed values, not measured: "
                   + ", ".join(contacts) + ".")
    if _find(cooling, "coolant"):
        out.append("Coolant properties from a property library at the bulk temperature; heat "
                   "transfer and friction from fully-developed-flow duct correlations (laminar "
                   "and turbulent Nusselt numbers).")
    cells_on_path = int(a.get("cells_on_coolant_path", 1) or 1)
    if "module_cells" in a:
        out.append("Module: cells in series carry one current; each cell's coolant inlet is "
                   "the previous cell's outlet at each time step (coolant transit time "
                   "neglected); cells are identical.")
    elif cells_on_path > 1:
        out.append(f"One cell of {cells_on_path} on the coolant path was run: the cells "
                   "upstream are taken to warm the coolant as this cell does; run the module "
                   "to judge the cell-to-cell spread.")
    out.append("Not modelled: abuse, internal short circuits, thermal runaway, gas generation, "
               "ageing, and cell-to-cell differences in manufacture.")
    return out


def _find(tree, key):
    """The first value of ``key`` anywhere in nested mappings/lists, else None."""
    if isinstance(tree, Mapping):
        if key in tree and tree[key] not in (None, ""):
            return tree[key]
        tree = list(tree.values())
    if isinstance(tree, list):
        for item in tree:
            found = _find(item, key)
            if found is not None:
                return found
    return None


def _contacts(tree, out=None) -> list[str]:
    out = [] if out is None else out
    if isinstance(tree, Mapping):
        for key, value in tree.items():
            if isinstance(value, Mapping | list):
                _contacts(value, out)
            elif value is not None and any(w in key for w in ("contact", "tim_", "conductance")):
                name, unit = split_unit(key)
                out.append(f"{name} {number(value)} {unit}".strip())
    elif isinstance(tree, list):
        for item in tree:
            _contacts(item, out)
    return out


# --------------------------------------------------------------------------- settings


def setting_rows(ds, skip=("caution", "inputs", "fidelity_summary", "data_notes")) -> list[
        tuple[str, str]]:
    """(setting, value) rows of every attribute, JSON flattened to dotted names, numbers
    rounded; absolute paths reduced to file names."""
    from explorer.results import portable

    rows = []
    for key in sorted(ds.attrs):
        if key in skip:
            continue
        value = parse(portable(ds.attrs[key]))
        if isinstance(value, Mapping):
            rows += [(f"{key}.{n}", f"{v} {u}".strip()) for n, v, u in _flat_raw(value)]
        elif isinstance(value, list) and value and all(isinstance(v, Mapping) for v in value):
            for k, item in enumerate(value):
                rows += [(f"{key}[{k}].{n}", f"{v} {u}".strip()) for n, v, u in _flat_raw(item)]
        else:
            rows.append((key, _plain(value)))
    return rows


def _flat_raw(mapping: Mapping, prefix="") -> list[tuple[str, str, str]]:
    """Like the inputs table, but keeping the names as stored (flow_L_min)."""
    out = []
    for key, value in mapping.items():
        if isinstance(value, Mapping):
            out += _flat_raw(value, prefix=f"{prefix}{key}.")
        elif isinstance(value, list) and value and all(isinstance(v, Mapping) for v in value):
            for k, item in enumerate(value):
                out += _flat_raw(item, prefix=f"{prefix}{key}[{k}].")
        else:
            out.append((prefix + str(key), _plain(value), ""))
    return out
