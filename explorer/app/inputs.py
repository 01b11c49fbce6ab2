"""The app's inputs as plain data: the field table, validation, and the mapping onto the public API.

Nothing here touches a widget, so every rule is unit-testable:

* :data:`FIELDS` — every input with its label, unit, default, bounds or choices and when it applies;
* :func:`validate` — field name -> error text for the inputs that apply (empty when all is well);
* :func:`inputs_to_call` — the inputs turned into the public calls (``explorer.load_cell``,
  ``explorer.duty.*``, ``explorer.cooling.*``, ``explorer.Limits``) ready for ``explorer.simulate``;
* :func:`save_inputs` / :func:`load_inputs` — the app's scenario file (JSON or TOML, our own format).

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
    "defaults",
    "inputs_to_call",
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


def _cell_error(value) -> str | None:
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


def validate(values: dict, check_files: bool = True) -> dict[str, str]:
    """Return field name -> error message for every applicable input that is wrong.

    Parameters
    ----------
    values : dict
        Input name -> value (missing names take their defaults).
    check_files : bool
        Also load the cell file and parse the profile CSV (a real check: the loader's own errors
        are shown next to the field).
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
    sinks = [float(values[k]) for k in _sink_fields(values)]
    if sinks and float(values["limit_temperature_C"]) <= min(sinks):
        errors["limit_temperature_C"] = (
            f"the limit {float(values['limit_temperature_C']):g} °C is not above the coldest coolant/"
            f"ambient ({min(sinks):g} °C); no cooling can meet it")
    if applies("cells_per_plate", values) and not float(values["cells_per_plate"]).is_integer():
        errors["cells_per_plate"] = (f"expected a whole number of cells, got "
                                     f"{float(values['cells_per_plate']):g}")
    if float(values["size_low"]) >= float(values["size_high"]):
        errors["size_high"] = (f"expected `to` > `from` ({float(values['size_low']):g}), got "
                               f"{float(values['size_high']):g}")
    if not errors:
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

    cell = _load_cell(values["cell"].strip())
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
    """Write the inputs to ``path`` (``.json`` or ``.toml``) atomically and return the path."""
    path = Path(path)
    values = {**defaults(), **values}
    unknown = sorted(set(values) - set(FIELDS))
    if unknown:
        raise InputsFileError(f"{path}: unknown input(s) {unknown}; expected names from FIELDS")
    if path.suffix.lower() == ".json":
        text = json.dumps({"format": FILE_FORMAT, "version": FILE_VERSION, "inputs": values},
                          indent=2) + "\n"
    elif path.suffix.lower() == ".toml":
        text = _to_toml(values)
    else:
        raise InputsFileError(f"{path}: expected a file name ending in .json or .toml, got "
                              f"{path.suffix or 'no suffix'!r}")
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise InputsFileError(f"{path}: the folder {str(folder)!r} does not exist")
    from explorer.fileio import atomic_write_text

    return atomic_write_text(path, text)


def _toml_value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int | float):
        return repr(float(value)) if isinstance(value, float) else str(value)
    return json.dumps(str(value), ensure_ascii=False)  # a JSON string is a valid TOML basic string


def _to_toml(values: dict) -> str:
    lines = ["# Pouch Thermal Explorer: inputs of the notebook app", f'format = "{FILE_FORMAT}"',
             f"version = {FILE_VERSION}", "", "[inputs]"]
    group = None
    for name, f in FIELDS.items():
        if f.group != group:
            group = f.group
            lines.append(f"# {group}")
        unit = f"  # {f.unit}" if f.unit else ""
        lines.append(f"{name} = {_toml_value(values[name])}{unit}")
    return "\n".join(lines) + "\n"


def load_inputs(path) -> dict:
    """Read a scenario file written by :func:`save_inputs`; return the full inputs dict.

    Raises :class:`InputsFileError` naming the file, the field, the value and what was expected.
    Inputs missing from the file take their defaults; unknown ones are an error.
    """
    path = Path(path)
    if not path.is_file():
        raise InputsFileError(f"{path}: file not found; expected an app inputs file (.json or .toml)")
    raw = path.read_bytes()
    try:
        if path.suffix.lower() == ".json":
            doc = json.loads(raw.decode("utf-8"))
        elif path.suffix.lower() == ".toml":
            doc = tomllib.loads(raw.decode("utf-8"))
        else:
            raise InputsFileError(f"{path}: expected a .json or .toml file, got {path.suffix!r}")
    except (json.JSONDecodeError, tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise InputsFileError(f"{path}: cannot parse the file ({exc})") from None
    if not isinstance(doc, dict) or doc.get("format") != FILE_FORMAT:
        got = doc.get("format") if isinstance(doc, dict) else type(doc).__name__
        raise InputsFileError(f"{path}: field `format`: expected {FILE_FORMAT!r}, got {got!r}")
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
