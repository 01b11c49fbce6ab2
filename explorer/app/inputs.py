"""The app's inputs as plain data: the field table, validation, and the mapping onto the public API.

Nothing here touches a widget, so every rule is unit-testable:

* :data:`FIELDS` — every input with its label, unit, default, bounds or choices and when it applies;
* :func:`validate` — field name -> error text for the inputs that apply (empty when all is well);
* :func:`inputs_to_call` — the inputs turned into the public calls (``explorer.load_cell``,
  ``explorer.duty.*``, ``explorer.cooling.*``, ``explorer.Limits``) ready for ``explorer.simulate``;
* :func:`save_inputs` / :func:`load_inputs` — the inputs as a scenario file (``explorer.scenario``'s
  TOML: the file ``python -m explorer run`` runs).

Examples
--------
>>> from explorer.app.inputs import defaults, inputs_to_call       # doctest: +SKIP
>>> call = inputs_to_call({**defaults(), "cooling": "edge_plate", "flow_L_min": 1.5})  # doctest: +SKIP
>>> ds = call.run()                                                 # doctest: +SKIP
"""

from __future__ import annotations

import json
import logging
import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from explorer.validators import InputError

logger = logging.getLogger(__name__)

__all__ = [
    "FIELDS",
    "FILE_FORMAT",
    "Call",
    "Field",
    "InputsFileError",
    "applies",
    "cell_files",
    "defaults",
    "is_cell",
    "inputs_to_call",
    "inputs_to_tables",
    "load_inputs",
    "save_inputs",
    "validate",
]

FILE_FORMAT = "pouch-explorer-app-inputs"
FILE_VERSION = 1


@dataclass(frozen=True)
class Field:
    """One app input.

    ``kind`` is "number", "choice", "text" or "flag". ``low``/``high`` bound a number (``open_low``
    excludes ``low`` itself). ``when`` maps another field's name to the values for which this one
    applies (all must hold); inputs that do not apply are neither shown nor validated.
    """

    label: str
    kind: str
    default: object
    unit: str = ""
    low: float | None = None
    high: float | None = None
    open_low: bool = False
    choices: tuple = ()  # (value, label) pairs for a choice
    when: dict = field(default_factory=dict)
    group: str = ""
    help: str = ""


_PLATES = ("face_plate", "edge_plate")

FIELDS: dict[str, Field] = {
    # --- cell and duty
    "cell": Field("Cell", "text", "van_nmc_66ah", group="Cell and duty",
                  help="a bundled demo cell name or the path of a cell TOML file"),
    "duty": Field("Duty", "choice", "discharge", group="Cell and duty", choices=(
        ("discharge", "Continuous discharge"), ("fast_charge", "Fast charge (CC-CV)"),
        ("profile", "Load profile (CSV)"))),
    "discharge_c_rate": Field("Discharge rate", "number", 1.0, "C", 0.0, 20.0, True,
                              when={"duty": ("discharge",)}, group="Cell and duty"),
    "charge_c_rate": Field("Charge rate (CC)", "number", 2.0, "C", 0.0, 10.0, True,
                           when={"duty": ("fast_charge",)}, group="Cell and duty"),
    "charge_end_c_rate": Field("CV ends at", "number", 0.05, "C", 0.0, 1.0, True,
                               when={"duty": ("fast_charge",)}, group="Cell and duty"),
    "profile_path": Field("Profile CSV", "text", "", when={"duty": ("profile",)},
                          group="Cell and duty",
                          help="columns `time [s]` and `current [A]` or `power [W]`"),
    # --- cooling
    "cooling": Field("Cooling", "choice", "edge_plate", group="Cooling", choices=(
        ("adiabatic", "None (adiabatic)"), ("convection", "Convection on both faces"),
        ("face_plate", "Cold plate under a face"), ("edge_plate", "Cold plate at an edge"))),
    "h_W_m2K": Field("Heat transfer coefficient", "number", 10.0, "W/(m² K)", 0.0, 1e5, True,
                     when={"cooling": ("convection",)}, group="Cooling"),
    "ambient_C": Field("Ambient", "number", 25.0, "°C", -40.0, 80.0,
                       when={"cooling": ("convection",)}, group="Cooling"),
    "coolant": Field("Coolant", "choice", "water", group="Cooling", when={"cooling": _PLATES},
                     choices=(("water", "Water"), ("eg50", "Ethylene glycol 50 %"),
                              ("pg30", "Propylene glycol 30 %"))),
    "flow_L_min": Field("Coolant flow", "number", 2.0, "L/min", 0.0, 100.0, True,
                        when={"cooling": _PLATES}, group="Cooling"),
    "inlet_C": Field("Coolant inlet", "number", 25.0, "°C", -30.0, 80.0,
                     when={"cooling": _PLATES}, group="Cooling"),
    "cells_per_plate": Field("Cells sharing the coolant", "number", 1, "", 1.0, 200.0,
                             when={"cooling": _PLATES}, group="Cooling",
                             help="cells one after another along the plate's coolant path; more "
                                  "than one runs the whole module"),
    "plate_face": Field("Plate face", "choice", "back", when={"cooling": ("face_plate",)},
                        group="Cooling", choices=(("back", "back"), ("front", "front"),
                                                  ("both", "both faces"))),
    "plate_edge": Field("Plate edge", "choice", "bottom", when={"cooling": ("edge_plate",)},
                        group="Cooling", choices=(("bottom", "bottom"), ("top", "top"),
                                                  ("left", "left"), ("right", "right"))),
    "fin_mm": Field("Fin thickness, 0 = none", "number", 0.5, "mm", 0.0, 10.0,
                    when={"cooling": ("edge_plate",)}, group="Cooling"),
    "tim_W_mK": Field("TIM conductivity", "number", 3.0, "W/(m K)", 0.0, 500.0, True,
                      when={"cooling": _PLATES}, group="Cooling"),
    "tim_mm": Field("TIM thickness", "number", 0.5, "mm", 0.0, 20.0, True,
                    when={"cooling": _PLATES}, group="Cooling"),
    "tab_cooling": Field("Tab cooling", "flag", False, group="Cooling"),
    "tab_conductance_W_K": Field("Tab conductance to busbar", "number", 0.5, "W/K", 0.0, 1e3, True,
                                 when={"tab_cooling": (True,)}, group="Cooling"),
    "busbar_C": Field("Busbar", "number", 25.0, "°C", -40.0, 80.0,
                      when={"tab_cooling": (True,)}, group="Cooling"),
    # --- model
    "electrochemistry": Field("Electrochemistry", "choice", "spme", group="Model", choices=(
        ("spm", "SPM"), ("spme", "SPMe"), ("dfn", "DFN (P2D)"))),
    "layout": Field("Layout", "choice", "averaged", group="Model", choices=(
        ("single", "single rod, one temperature"), ("averaged", "averaged rod + 2-D fields"),
        ("distributed", "grid of rods"))),
    "grid": Field("In-plane grid", "choice", "coarse", group="Model", choices=(
        ("coarse", "coarse, ~200 cells (fast)"), ("standard", "standard (the simulator's default)"),
        ("fine", "fine, ~6,000 cells"))),
    "start_soc_pct": Field("Start SOC", "number", 100.0, "%", 0.0, 100.0, group="Model"),
    "start_temperature_C": Field("Start temperature", "number", 25.0, "°C", -40.0, 80.0,
                                 group="Model"),
    # --- limits and sizing
    "limit_temperature_C": Field("Max temperature anywhere in the cell", "number", 45.0, "°C",
                                 -40.0, 150.0, group="Limits",
                                 help="held against the hottest point anywhere in the cell, the "
                                      "core estimate included"),
    "limit_spread_K": Field("Max in-cell spread", "number", 5.0, "K", 0.0, 100.0, True,
                            group="Limits", help="hottest minus coldest point anywhere in the "
                                                 "cell at one time (not seen on layout 'single')"),
    "limit_cell_to_cell_K": Field("Max cell-to-cell difference, 0 = none", "number", 0.0, "K",
                                  0.0, 100.0, group="Limits",
                                  help="largest difference between the cells' mean temperatures "
                                       "at one time (a module figure)"),
    "size_vary": Field("Size", "choice", "flow_L_min", group="Sizing", choices=(
        ("flow_L_min", "coolant flow (L/min)"), ("inlet_C", "coolant inlet (°C)"),
        ("fin_mm", "fin thickness (mm)"), ("tim_W_mK", "TIM conductivity (W/(m K))"),
        ("tim_mm", "TIM thickness (mm)"), ("h_W_m2K", "heat transfer coefficient (W/(m² K))"))),
    "size_low": Field("from", "number", 0.2, "", None, None, group="Sizing"),
    "size_high": Field("to", "number", 5.0, "", None, None, group="Sizing"),
}

# sizing: which design parameter each cooling kind can vary (the design's parameters() decides
# at run time; this table only filters the menu)
SIZE_CHOICES = {
    "adiabatic": (),
    "convection": ("h_W_m2K",),
    "face_plate": ("flow_L_min", "inlet_C", "tim_W_mK", "tim_mm"),
    "edge_plate": ("flow_L_min", "inlet_C", "fin_mm", "tim_W_mK", "tim_mm"),
}


def defaults() -> dict:
    """A fresh dict of every input at its default."""
    return {name: f.default for name, f in FIELDS.items()}


def applies(name: str, values: dict) -> bool:
    """Whether input ``name`` matters for the current ``values``."""
    return all(_among(values.get(other), allowed) for other, allowed in FIELDS[name].when.items())


def _among(value, allowed) -> bool:
    """``value in allowed`` for a text or flag value; False for anything else (an array, a list)."""
    return isinstance(value, str | bool) and value in allowed


# ---------------------------------------------------------------------------------------------
# validation


def _number_error(name: str, f: Field, value) -> str | None:
    if isinstance(value, bool) or value is None or (isinstance(value, str) and not value.strip()):
        return f"expected a number{f' in {f.unit}' if f.unit else ''}, got {value!r}"
    try:
        v = float(value)
    except (TypeError, ValueError):
        return f"expected a number{f' in {f.unit}' if f.unit else ''}, got {value!r}"
    if not math.isfinite(v):
        return f"expected a finite number, got {value!r}"
    unit = f" {f.unit}" if f.unit else ""
    if f.low is not None and (v <= f.low if f.open_low else v < f.low):
        op = ">" if f.open_low else "≥"
        hi = f" and ≤ {f.high:g}" if f.high is not None else ""
        return f"expected a value {op} {f.low:g}{hi}{unit}, got {v:g}"
    if f.high is not None and v > f.high:
        return f"expected a value ≤ {f.high:g}{unit}, got {v:g}"
    return None


def is_cell(value) -> bool:
    """Whether ``value`` is a built cell (an ``explorer.Cell``), which the app accepts as it is."""
    from explorer.cell import Cell

    return isinstance(value, Cell)


def cell_files(folder=".") -> list[Path]:
    """The cell files (``*.toml`` with a ``[cell]`` and a ``[geometry]`` table) in ``folder``;
    scenario and other TOML files are left out."""
    found = []
    try:
        candidates = sorted(Path(folder).glob("*.toml"))
    except OSError:
        return found
    for path in candidates:
        try:
            text = path.read_text(encoding="utf-8", errors="replace")[:200_000]
        except OSError:
            continue
        lines = {line.strip() for line in text.splitlines()}
        if "[cell]" in lines and "[geometry]" in lines:
            found.append(path)
    return found


def _cell_error(value) -> str | None:
    if is_cell(value):
        return None
    if not isinstance(value, str) or not value.strip():
        return "expected a demo cell name or the path of a cell file"
    try:
        _load_cell(value.strip())
    except (ValueError, OSError) as exc:  # InputError / CellFileError are ValueErrors
        return str(exc)
    return None


def _profile_error(value) -> str | None:
    if not isinstance(value, str) or not value.strip():
        return "expected the path of a load profile CSV file"
    path = Path(value.strip()).expanduser()
    if not path.is_file():
        return f"file {str(path)!r} not found"
    try:
        _duty().profile_csv(path)
    except (ValueError, OSError) as exc:
        return str(exc)
    return None


def validate(values: dict, check_files: bool = True, check_design: bool = True) -> dict[str, str]:
    """Return field name -> error message for every applicable input that is wrong.

    Parameters
    ----------
    values : dict
        Input name -> value (missing names take their defaults).
    check_files : bool
        Also load the cell file and parse the profile CSV (a real check: the loader's own errors
        are shown next to the field).
    check_design : bool
        Also build the duty and the cooling with the public constructors (their own checks, e.g.
        a coolant's liquid range; the first build loads the coolant's properties).
    """
    values = {**defaults(), **values}
    errors: dict[str, str] = {}
    unknown = sorted(set(values) - set(FIELDS))
    for name in unknown:
        errors[name] = f"unknown input; expected one of {', '.join(FIELDS)}"
    for name, f in FIELDS.items():
        if not applies(name, values):
            continue
        value = values[name]
        if f.kind == "number":
            message = _number_error(name, f, value)
        elif f.kind == "choice":
            valid = [c[0] for c in f.choices]
            message = None if _among(value, valid) else \
                f"expected one of {', '.join(map(repr, valid))}, got {value!r}"
        elif f.kind == "flag":
            message = None if isinstance(value, bool) else f"expected true or false, got {value!r}"
        elif name == "cell" and is_cell(value):
            message = None
        else:
            message = None if isinstance(value, str) else f"expected text, got {value!r}"
        if message:
            errors[name] = message
    if check_files:  # the files are checked whatever else is wrong
        if "cell" not in errors:
            message = _cell_error(values["cell"])
            if message:
                errors["cell"] = message
        if "duty" not in errors and values["duty"] == "profile" and "profile_path" not in errors:
            message = _profile_error(values["profile_path"])
            if message:
                errors["profile_path"] = message
    if errors:
        return errors
    # the cross-field rules, once every single field is valid (each names the field to change)
    if values["duty"] == "discharge" and float(values["start_soc_pct"]) <= 0.0:
        errors["start_soc_pct"] = "a discharge needs a start SOC above 0 %"
    if values["duty"] == "fast_charge" and float(values["start_soc_pct"]) >= 100.0:
        errors["start_soc_pct"] = "a charge needs a start SOC below 100 %"
    sinks = {k: float(values[k]) for k in _sink_fields(values)}
    limit = float(values["limit_temperature_C"])
    if sinks and limit <= min(sinks.values()):
        # shown next to the sink temperature that causes it (the inlet, ambient or busbar)
        for name, value in sinks.items():
            if value >= limit:
                errors[name] = (f"{value:g} °C is not below the temperature limit {limit:g} °C "
                                "(Limits tab); no cooling can meet it")
    if applies("cells_per_plate", values) and not float(values["cells_per_plate"]).is_integer():
        errors["cells_per_plate"] = (f"expected a whole number of cells, got "
                                     f"{float(values['cells_per_plate']):g}")
    if float(values["size_low"]) >= float(values["size_high"]):
        errors["size_high"] = (f"expected `to` > `from` ({float(values['size_low']):g}), got "
                               f"{float(values['size_high']):g}")
    if not errors and check_design:
        errors.update(_design_errors(values))
    return errors


# constructor argument -> the app input it comes from, where the names differ
_ARGUMENT_FIELDS = {"conductance_W_K": "tab_conductance_W_K", "face": "plate_face",
                    "edge": "plate_edge", "c_rate": "discharge_c_rate"}


def _design_errors(values) -> dict[str, str]:
    """The public constructors' own checks (a coolant's liquid range...), on the field they name,
    so that inputs :func:`validate` accepts also build."""
    try:
        if values["duty"] != "profile":
            _make_duty(values)
        _make_cooling(values)
    except (ValueError, TypeError) as exc:  # InputError, or a constructor's own slip
        message = str(exc) or type(exc).__name__
        named = [n for n in FIELDS if f"`{n}`" in message]
        named += [f for a, f in _ARGUMENT_FIELDS.items() if f"`{a}`" in message]
        return {(named[0] if named else "cooling"): message}
    return {}


def _sink_fields(values) -> list[str]:
    names = []
    if values["cooling"] == "convection":
        names.append("ambient_C")
    if values["cooling"] in _PLATES:
        names.append("inlet_C")
    if values["tab_cooling"]:
        names.append("busbar_C")
    return names


# ---------------------------------------------------------------------------------------------
# the mapping onto the public API


def _duty():
    from explorer import duty

    return duty


def _cooling():
    from explorer import cooling

    return cooling


_CELL_CACHE: dict = {}


def _load_cell(name: str):
    """``explorer.load_cell`` with a small cache keyed on the file's path and modification time."""
    from explorer import load_cell

    if is_cell(name):
        return name
    path = Path(name).expanduser()
    key = (str(path.resolve()), path.stat().st_mtime_ns) if path.is_file() else (name, None)
    if key not in _CELL_CACHE:
        if len(_CELL_CACHE) > 16:
            _CELL_CACHE.clear()
        _CELL_CACHE[key] = load_cell(str(path) if path.is_file() else name)
    return _CELL_CACHE[key]


@dataclass
class Call:
    """The public-API objects the inputs stand for; :meth:`run` hands them to ``explorer.simulate``."""

    cell: object
    duty: object
    cooling: object
    simulate_kwargs: dict
    limits: object
    inputs: dict

    @property
    def module(self) -> bool:
        """Whether more than one cell shares the coolant path (the run is the whole module)."""
        v = self.inputs
        return applies("cells_per_plate", v) and int(float(v["cells_per_plate"])) > 1

    def run(self, progress=None):
        """Run ``explorer.simulate`` (one cell) or ``explorer.simulate_module`` (the cells sharing
        the coolant path) with these objects (blocking) and return the Dataset."""
        import explorer

        run = explorer.simulate_module if self.module else explorer.simulate
        return run(self.cell, self.duty, self.cooling, progress=progress, **self.simulate_kwargs)

    def size(self, vary: str, bounds: tuple[float, float], **kwargs):
        """Run ``explorer.size_cooling`` for ``vary`` within ``bounds`` against :attr:`limits`."""
        from explorer import size_cooling

        return size_cooling(self.cell, self.duty, self.cooling, vary=vary, bounds=bounds,
                            limits=self.limits, **self.simulate_kwargs, **kwargs)

    def check_fidelity(self, base=None, **kwargs):
        """Run ``explorer.check_fidelity`` on this design point against :attr:`limits`: the run
        as made (``base``, run here when None) set against the fuller models; a module's worst
        cell when several cells share the coolant. ``kwargs``: ``max_wall_s``, ``progress``."""
        import explorer

        return explorer.check_fidelity(self.cell, self.duty, self.cooling, limits=self.limits,
                                       module=self.module, base=base, **self.simulate_kwargs,
                                       **kwargs)

    def expected_duration_s(self) -> float | None:
        """A rough duration for the progress bar (None when the duty gives no good guess)."""
        v = self.inputs
        soc = float(v["start_soc_pct"]) / 100.0
        if v["duty"] == "discharge":
            return 3600.0 * soc / float(v["discharge_c_rate"])
        if v["duty"] == "fast_charge":
            return 3600.0 * (1.0 - soc) / float(v["charge_c_rate"]) * 1.3
        return None


class InputsError(InputError):
    """The inputs are not valid; ``.errors`` maps field name -> message."""

    def __init__(self, errors: dict[str, str], where: str = "app inputs"):
        self.errors = dict(errors)
        lines = [f"{where}: {len(errors)} problem(s)"]
        lines += [f"  `{name}` ({FIELDS[name].label if name in FIELDS else '?'}): {msg}"
                  for name, msg in errors.items()]
        super().__init__("\n".join(lines))


def inputs_to_call(values: dict, check_files: bool = True) -> Call:
    """Turn app inputs into the public-API objects for ``explorer.simulate``.

    Parameters
    ----------
    values : dict
        Input name -> value (see :data:`FIELDS`; missing names take their defaults).
    check_files : bool
        Passed to :func:`validate`.

    Returns
    -------
    Call
        ``cell`` from ``explorer.load_cell``, ``duty`` from ``explorer.duty``, ``cooling`` from
        ``explorer.cooling`` (None when adiabatic), ``simulate_kwargs`` (electrochemistry, layout,
        start_soc, start_temperature_C) and ``limits`` (``explorer.Limits``).

    Raises
    ------
    InputsError
        When any applicable input is invalid (all problems listed).
    """
    values = {**defaults(), **values}
    errors = validate(values, check_files=check_files)
    if errors:
        raise InputsError(errors)
    from explorer import Limits

    cell = _load_cell(values["cell"] if is_cell(values["cell"]) else values["cell"].strip())
    return Call(
        cell=cell,
        duty=_make_duty(values),
        cooling=_make_cooling(values),
        simulate_kwargs={
            "electrochemistry": values["electrochemistry"],
            "layout": values["layout"],
            **_grid(values["grid"], cell),
            "start_soc": float(values["start_soc_pct"]) / 100.0,
            "start_temperature_C": float(values["start_temperature_C"]),
        },
        limits=_make_limits(Limits, values),
        inputs=values,
    )


def _make_limits(limits_class, v: dict):
    """``explorer.Limits`` from the limit inputs; a cell-to-cell limit of 0 means none."""
    extra = {}
    if float(v["limit_cell_to_cell_K"]) > 0.0:
        extra["cell_to_cell_K"] = float(v["limit_cell_to_cell_K"])
    return limits_class(temperature_max_C=float(v["limit_temperature_C"]),
                        spread_K=float(v["limit_spread_K"]), **extra)


GRID_CELLS = {"coarse": 200, "fine": 6000}  # target control volumes; "standard" = simulate's own


def _grid(choice: str, cell) -> dict:
    """``grid=(nx, ny)`` of near-square control volumes for the chosen resolution ({} = default)."""
    if choice not in GRID_CELLS:
        return {}
    g = cell.geometry
    n = GRID_CELLS[choice]
    nx = max(2, round(math.sqrt(n * g.width_m / g.height_m)))
    ny = max(2, round(n / nx))
    return {"grid": (nx, ny)}


def _make_duty(v: dict):
    duty = _duty()
    if v["duty"] == "discharge":
        return duty.discharge(c_rate=float(v["discharge_c_rate"]))
    if v["duty"] == "fast_charge":
        return [duty.charge(c_rate=float(v["charge_c_rate"])),
                duty.hold_voltage(end_c_rate=float(v["charge_end_c_rate"]))]
    return duty.profile_csv(Path(v["profile_path"].strip()).expanduser())


def _make_cooling(v: dict):
    cooling = _cooling()
    kind = v["cooling"]
    design = None
    if kind == "convection":
        design = cooling.convection(float(v["h_W_m2K"]), float(v["ambient_C"]))
    elif kind in _PLATES:
        plate = cooling.cold_plate(coolant=v["coolant"], flow_L_min=float(v["flow_L_min"]),
                                   inlet_C=float(v["inlet_C"]),
                                   cells_per_plate=int(float(v["cells_per_plate"])))
        tim = {"tim_W_mK": float(v["tim_W_mK"]), "tim_mm": float(v["tim_mm"])}
        if kind == "face_plate":
            design = cooling.face_plate(plate, face=v["plate_face"], **tim)
        else:
            fin = float(v["fin_mm"])
            design = cooling.edge_plate(plate, edge=v["plate_edge"], fin_mm=fin if fin > 0 else None,
                                        **tim)
    if v["tab_cooling"]:
        tabs = cooling.tab_cooling(conductance_W_K=float(v["tab_conductance_W_K"]),
                                   busbar_C=float(v["busbar_C"]))
        design = tabs if design is None else design + tabs
    return design


# ---------------------------------------------------------------------------------------------
# the app's scenario file (our own format: a header and one flat table of inputs)


class InputsFileError(InputError):
    """A scenario file of the app that cannot be read; the message names the file and field."""


def save_inputs(values: dict, path) -> Path:
    """Write the inputs as a scenario file (``explorer.scenario``'s TOML) and return the path.

    The file is the one ``python -m explorer run`` runs and :func:`load_inputs` reads back: the
    inputs that apply, in the scenario's tables, plus an ``[app]`` table with what only the app
    shows (the grid choice, the sizing range when it is not part of a ``[size]``).
    """
    from explorer import scenario

    path = Path(path)
    values = {**defaults(), **values}
    unknown = sorted(set(values) - set(FIELDS))
    if unknown:
        raise InputsFileError(f"{path}: unknown input(s) {unknown}; expected names from FIELDS")
    if path.suffix.lower() != ".toml":
        raise InputsFileError(f"{path}: expected a scenario file name ending in .toml, got "
                              f"{path.suffix or 'no suffix'!r}")
    errors = validate(values, check_files=False)
    if errors:
        raise InputsError(errors, where=str(path))
    try:
        return scenario.save(path, **inputs_to_tables(values))
    except InputError as exc:
        raise InputsFileError(str(exc)) from None


def inputs_to_tables(values: dict) -> dict:
    """The keywords of :func:`explorer.scenario.save` for app inputs (those that apply)."""
    v = {**defaults(), **values}
    model = {"electrochemistry": v["electrochemistry"], "layout": v["layout"],
             "start_soc": float(v["start_soc_pct"]) / 100.0,
             "start_temperature_C": float(v["start_temperature_C"])}
    if v["grid"] in GRID_CELLS:
        model["grid"] = list(_grid(v["grid"], _load_cell(v["cell"].strip()))["grid"])
    if v["duty"] == "discharge":
        duty = [{"step": "discharge", "c_rate": float(v["discharge_c_rate"])}]
    elif v["duty"] == "fast_charge":
        duty = [{"step": "charge", "c_rate": float(v["charge_c_rate"])},
                {"step": "hold_voltage", "end_c_rate": float(v["charge_end_c_rate"])}]
    else:
        duty = [{"step": "profile_csv", "path": v["profile_path"].strip()}]
    limits = {"temperature_max_C": float(v["limit_temperature_C"]),
              "spread_K": float(v["limit_spread_K"])}
    if float(v["limit_cell_to_cell_K"]) > 0.0:
        limits["cell_to_cell_K"] = float(v["limit_cell_to_cell_K"])
    return {"cell": v["cell"].strip(), "duty": duty, "cooling": _cooling_table(v),
            "model": model, "limits": limits,
            "size": {"vary": v["size_vary"],
                     "bounds": [float(v["size_low"]), float(v["size_high"])]},
            "app": {"grid": v["grid"]}, "name": "app inputs"}


def _cooling_table(v: dict) -> dict | None:
    kind = v["cooling"]
    table = None
    if kind == "convection":
        table = {"design": "convection", "h_W_m2K": float(v["h_W_m2K"]),
                 "ambient_C": float(v["ambient_C"])}
    elif kind in _PLATES:
        table = {"design": kind, "tim_W_mK": float(v["tim_W_mK"]), "tim_mm": float(v["tim_mm"]),
                 "plate": {"kind": "cold_plate", "coolant": v["coolant"],
                           "flow_L_min": float(v["flow_L_min"]), "inlet_C": float(v["inlet_C"]),
                           "cells_per_plate": int(float(v["cells_per_plate"]))}}
        if kind == "face_plate":
            table["face"] = v["plate_face"]
        else:
            table["edge"] = v["plate_edge"]
            if float(v["fin_mm"]) > 0:
                table["fin_mm"] = float(v["fin_mm"])
    if v["tab_cooling"]:
        tabs = {"design": "tab_cooling", "conductance_W_K": float(v["tab_conductance_W_K"]),
                "busbar_C": float(v["busbar_C"])}
        if table is None:
            return tabs
        table["with"] = [tabs]
    return table


def load_inputs(path, notes: list | None = None) -> dict:
    """Read a scenario file into the app's inputs; return the full inputs dict.

    Reads the scenario TOML of ``explorer.scenario`` (what :func:`save_inputs` and the command
    line write). What the app cannot show is an :class:`InputsFileError` that says so (several
    duty steps, a fixed-temperature plate, ...); settings the app leaves to its defaults (the
    output interval, a grid that is not one of its three) are appended to ``notes`` in words.
    Inputs missing from the file take their defaults.
    """
    from explorer import scenario

    path = Path(path)
    if not path.is_file():
        raise InputsFileError(f"{path}: file not found; expected a scenario file (.toml)")
    if path.suffix.lower() == ".json" or _legacy(path):
        return _load_legacy(path)
    try:
        sc = scenario.load_scenario(path)  # every problem named with the file and field
    except InputError as exc:
        raise InputsFileError(str(exc)) from None
    values = tables_to_inputs(sc.tables, str(path), sc.path.parent, sc.cell, notes)
    problems = [f"`{name}` = {values.get(name)!r}: {message}"
                for name, message in validate(values, check_files=False).items()]
    if problems:
        raise InputsFileError(f"{path}: the app cannot show these inputs:\n  "
                              + "\n  ".join(problems))
    return values


def tables_to_inputs(tables: dict, where: str, folder: Path, cell, notes=None) -> dict:
    """App inputs of a scenario's tables (validated already); :class:`InputsFileError` for
    what the app cannot show."""
    notes = [] if notes is None else notes
    v = defaults()
    head = tables["scenario"]
    v["cell"] = _absolute(head["cell"], folder)
    v.update(_duty_inputs(tables["duty"], where, folder))
    v.update(_cooling_inputs(tables.get("cooling"), where))
    model = tables.get("model", {})
    for key in model:
        if key not in ("electrochemistry", "layout", "start_soc", "start_temperature_C", "grid"):
            notes.append(f"`model.{key}` is not an app input; the app uses its own default")
    v["electrochemistry"] = model.get("electrochemistry", "spme").lower()
    v["layout"] = model.get("layout", "averaged").lower()
    v["start_soc_pct"] = 100.0 * float(model.get("start_soc", 1.0))
    v["start_temperature_C"] = float(model.get("start_temperature_C", 25.0))
    v["grid"] = _grid_choice(model.get("grid"), tables.get("app", {}).get("grid"), cell, notes)
    limits = tables.get("limits", {})
    extra = sorted(set(limits) - {"temperature_max_C", "spread_K", "cell_to_cell_K"})
    if extra:
        notes.append(f"limits {', '.join(extra)} are not app inputs; the app does not check them")
    v["limit_temperature_C"] = float(limits.get("temperature_max_C", v["limit_temperature_C"]))
    v["limit_spread_K"] = float(limits.get("spread_K", v["limit_spread_K"]))
    v["limit_cell_to_cell_K"] = float(limits.get("cell_to_cell_K", 0.0))
    size = tables.get("size", {})
    if size.get("vary") in dict(FIELDS["size_vary"].choices):
        v["size_vary"] = size["vary"]
    if size.get("bounds"):
        v["size_low"], v["size_high"] = (float(b) for b in size["bounds"])
    return v


def _absolute(name: str, folder: Path) -> str:
    """A file name of the scenario, relative to its folder, as the app (the working folder)
    needs it; a demo cell name as it is."""
    p = Path(name).expanduser()
    if not (p.suffix or "/" in name or "\\" in name) or p.is_absolute():
        return name
    return str(folder / p)


def _duty_inputs(steps: list, where: str, folder: Path) -> dict:
    kinds = [s.get("step") for s in steps]
    if kinds == ["discharge"] and set(steps[0]) <= {"step", "c_rate"}:
        return {"duty": "discharge", "discharge_c_rate": float(steps[0]["c_rate"])}
    if (kinds == ["charge", "hold_voltage"] and set(steps[0]) <= {"step", "c_rate"}
            and set(steps[1]) <= {"step", "end_c_rate"}):
        return {"duty": "fast_charge", "charge_c_rate": float(steps[0]["c_rate"]),
                "charge_end_c_rate": float(steps[1]["end_c_rate"])}
    if kinds == ["profile_csv"] and set(steps[0]) <= {"step", "path"}:
        return {"duty": "profile", "profile_path": _absolute(steps[0]["path"], folder)}
    raise InputsFileError(
        f"{where}: the duty ({' + '.join(map(str, kinds))}) is not one the app shows (one "
        "discharge at a C-rate, a CC-CV fast charge, or a load profile); run this scenario "
        "with `python -m explorer run`")


_PLATE_KEYS = {"kind", "coolant", "flow_L_min", "inlet_C", "cells_per_plate"}
_DESIGN_KEYS = {"design", "plate", "face", "edge", "fin_mm", "tim_W_mK", "tim_mm"}


def _cooling_inputs(table, where: str) -> dict:
    out = {"cooling": "adiabatic", "tab_cooling": False}
    if not table:
        return out
    parts = [{k: v for k, v in table.items() if k != "with"}, *table.get("with", [])]
    main = [p for p in parts if p["design"] != "tab_cooling"]
    tabs = [p for p in parts if p["design"] == "tab_cooling"]
    shown = len(main) <= 1 and len(tabs) <= 1 and not (tabs and "tabs" in tabs[0])
    if shown and tabs:
        out.update(tab_cooling=True, tab_conductance_W_K=float(tabs[0].get("conductance_W_K", 2.0)),
                   busbar_C=float(tabs[0].get("busbar_C", 25.0)))
    if shown and main:
        part, plate = main[0], main[0].get("plate", {})
        if part["design"] == "convection":
            out.update(cooling="convection", h_W_m2K=float(part.get("h_W_m2K", 10.0)),
                       ambient_C=float(part.get("ambient_C", 25.0)))
        elif (part["design"] in _PLATES and plate.get("kind", "cold_plate") == "cold_plate"
              and set(plate) <= _PLATE_KEYS and set(part) <= _DESIGN_KEYS):
            out.update(cooling=part["design"], coolant=plate.get("coolant", "water"),
                       flow_L_min=float(plate.get("flow_L_min", FIELDS["flow_L_min"].default)),
                       inlet_C=float(plate.get("inlet_C", FIELDS["inlet_C"].default)),
                       cells_per_plate=int(plate.get("cells_per_plate", 1)),
                       tim_W_mK=float(part.get("tim_W_mK", FIELDS["tim_W_mK"].default)),
                       tim_mm=float(part.get("tim_mm", FIELDS["tim_mm"].default)))
            if part["design"] == "face_plate":
                out["plate_face"] = part.get("face", "back")
            else:
                out.update(plate_edge=part.get("edge", "bottom"),
                           fin_mm=float(part.get("fin_mm") or 0.0))
        else:
            shown = False
    if not shown:
        raise InputsFileError(
            f"{where}: the cooling ({' + '.join(p['design'] for p in parts)}, with its settings) "
            "is not one the app shows (convection, or a cold plate under a face or at an edge, "
            "optionally with tab cooling); run this scenario with `python -m explorer run`")
    return out


def _grid_choice(grid, app_choice, cell, notes: list) -> str:
    """The app's grid choice for a scenario's ``model.grid`` (nearest, with a note)."""
    if grid is None:
        return "standard" if app_choice in (None, "standard") else app_choice
    for choice in GRID_CELLS:
        if list(_grid(choice, cell)["grid"]) == list(grid):
            return choice
    n = grid[0] * grid[1]
    nearest = min(GRID_CELLS, key=lambda c: abs(math.log(GRID_CELLS[c] / n)))
    notes.append(f"`model.grid` = {list(grid)} is not one of the app's grids; shown on the "
                 f"{nearest} grid instead")
    return nearest


def _legacy(path: Path) -> bool:
    """A file in the app's earlier own format (a `format` key at the top)."""
    try:
        return tomllib.loads(path.read_text(encoding="utf-8")).get("format") == FILE_FORMAT
    except (tomllib.TOMLDecodeError, UnicodeDecodeError, OSError):
        return False


def _load_legacy(path: Path) -> dict:
    """Read a file of the app's earlier format (JSON or TOML with a flat ``[inputs]``)."""
    raw = path.read_bytes()
    try:
        if path.suffix.lower() == ".json":
            doc = json.loads(raw.decode("utf-8"))
        else:
            doc = tomllib.loads(raw.decode("utf-8"))
    except (json.JSONDecodeError, tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise InputsFileError(f"{path}: cannot parse the file ({exc})") from None
    if not isinstance(doc, dict) or doc.get("format") != FILE_FORMAT:
        got = doc.get("format") if isinstance(doc, dict) else type(doc).__name__
        raise InputsFileError(f"{path}: field `format`: expected {FILE_FORMAT!r}, got {got!r}; "
                              "save scenarios as .toml")
    if doc.get("version") != FILE_VERSION:
        raise InputsFileError(f"{path}: field `version`: expected {FILE_VERSION}, got "
                              f"{doc.get('version')!r}")
    inputs = doc.get("inputs")
    if not isinstance(inputs, dict):
        raise InputsFileError(f"{path}: field `inputs`: expected a table of inputs, got {inputs!r}")
    problems = []
    for name in inputs:
        if name not in FIELDS:
            problems.append(f"`inputs.{name}`: unknown input; expected one of {', '.join(FIELDS)}")
    values = {**defaults(), **{k: v for k, v in inputs.items() if k in FIELDS}}
    for name, message in validate(values, check_files=False).items():
        problems.append(f"`inputs.{name}` = {values.get(name)!r}: {message}")
    if problems:
        raise InputsFileError(f"{path}:\n  " + "\n  ".join(problems))
    return values
