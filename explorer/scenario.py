"""Scenario files (TOML, this tool's own layout) and the ``run``/``size``/``sweep`` commands.

A scenario names a cell, a duty, a cooling design, the model settings, the
design limits, and what to size or sweep. Tables and keys:

.. code-block:: toml

    [scenario]
    name = "Van module, edge plate"         # free text
    cell = "van_nmc_66ah"                   # demo name, or a cell file relative to this file

    [model]                                 # keywords of explorer.simulate
    electrochemistry = "spme"
    layout = "averaged"
    grid = [8, 12]
    start_soc = 1.0
    start_temperature_C = 25.0

    [[duty]]                                # one table per step, in order
    step = "discharge"                      # a function of explorer.duty
    c_rate = 2.0                            # ... and its keywords
    [[duty]]
    step = "rest"
    seconds = 600

    [cooling]                               # design = a function of explorer.cooling
    design = "edge_plate"
    edge = "bottom"
    fin_mm = 0.5
    [cooling.plate]                         # the plate of a face/edge design
    kind = "cold_plate"                     # or "fixed_sink"
    coolant = "eg50"
    flow_L_min = 3.0
    inlet_C = 25.0
    [[cooling.with]]                        # further designs on the same cell (combined)
    design = "tab_cooling"
    busbar_C = 30.0

    [limits]                                # fields of explorer.Limits
    temperature_max_C = 45.0
    spread_K = 5.0

    [size]                                  # for `size`
    vary = "flow_L_min"
    bounds = [0.5, 12.0]                    # optional (default: sizing.DESIGN_PARAMETERS)

    [sweep]                                 # for `sweep`
    cache = "cache"                         # optional, relative to this file
    [sweep.axes]
    flow_L_min = [1.0, 2.0, 4.0]

    [app]                                   # how the notebook app shows it (the commands
    grid = "coarse"                         # ignore this table)

The same format is written by the app's "Save inputs", read back by its "Load inputs", run by
``python -m explorer run`` and built from Python with :func:`save`.

Every problem is reported as an :class:`~explorer.validators.InputError`
naming the file, the field, the value and what was expected.

The command functions (``cmd_run``, ``cmd_size``, ``cmd_sweep``) return exit
codes: 0 done (and every limit met), 1 done but a limit is not met, the
sizing found no feasible value or a case failed, 2 bad input.
"""

from __future__ import annotations

import inspect
import json
import logging
import math
import os
import sys
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from explorer.limits import Limits
from explorer.validators import InputError, clip

log = logging.getLogger(__name__)

# Step functions of explorer.duty a scenario may use.
DUTY_STEPS = ("discharge", "charge", "hold_voltage", "rest", "profile_csv", "cc_cv_charge",
              "repeat")
DESIGNS = ("convection", "face_plate", "edge_plate", "tab_cooling")
PLATES = ("cold_plate", "fixed_sink")
MODEL_KEYS = ("electrochemistry", "layout", "start_soc", "start_temperature_C", "grid",
              "position", "output_interval_s", "mesh")
TABLES = ("scenario", "model", "duty", "cooling", "limits", "size", "sweep", "app")
SIZE_KEYS = ("vary", "bounds", "samples", "rtol", "spacing", "max_evaluations", "positions",
             "resolution", "cheaper", "module")
SWEEP_KEYS = ("axes", "cache", "keep_fields", "trace_interval_s")


class ScenarioError(InputError):
    """A problem in a scenario file (the message names file, field, value, expectation)."""


@dataclass
class Scenario:
    """A loaded scenario: everything the commands need, validated."""

    path: Path
    name: str
    description: str
    cell: object
    duty: list
    cooling: object
    model: dict = field(default_factory=dict)
    limits: Limits | None = None
    size: dict | None = None
    sweep: dict | None = None
    tables: dict = field(default_factory=dict)  # the file's own tables, as read


# --------------------------------------------------------------------------- loading


def load_scenario(path) -> Scenario:
    """Read and validate a scenario file.

    Parameters
    ----------
    path : str or Path
        The TOML file.

    Returns
    -------
    Scenario

    Raises
    ------
    ScenarioError
        Naming the file, the field, the value and what was expected.
    """
    path = Path(path)
    where = str(path)
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise ScenarioError(f"{where}: no such scenario file") from None
    except (OSError, ValueError) as exc:  # a folder, no permission, a NUL in the name
        raise ScenarioError(f"{where}: cannot read the scenario file "
                            f"({getattr(exc, 'strerror', None) or exc})") from None
    try:
        text = data.decode("utf-8-sig")  # a leading byte-order mark is harmless
    except UnicodeDecodeError as exc:
        raise ScenarioError(f"{where}: not UTF-8 text (byte {exc.start}: "
                            f"{data[exc.start:exc.start + 1]!r}); save the file as UTF-8") from None
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ScenarioError(f"{where}: not valid TOML ({exc})") from None
    return _from_tables(where, path, raw)


def _from_tables(where: str, path: Path, raw: dict) -> Scenario:
    """The validated scenario of the file's tables (``path`` anchors relative file names)."""
    _unknown(where, "", raw, TABLES)
    head = _table(where, raw, "scenario", required=True)
    _unknown(where, "scenario", head, ("name", "description", "cell"))
    if "cell" not in head:
        raise ScenarioError(f"{where}: `scenario.cell` is missing; expected a demo cell name or "
                            "a cell file path")
    cell = _load_cell(where, path, head["cell"])
    model = _model(where, _table(where, raw, "model"))
    duty = _duty(where, path, raw.get("duty"))
    cooling = _cooling(where, raw["cooling"]) if "cooling" in raw else None
    limits = _limits(where, raw["limits"]) if "limits" in raw else None
    size = _size(where, raw["size"]) if "size" in raw else None
    sweep = _sweep(where, path, raw["sweep"]) if "sweep" in raw else None
    return Scenario(path=path, name=str(head.get("name", path.stem)),
                    description=str(head.get("description", "")), cell=cell, duty=duty,
                    cooling=cooling, model=model, limits=limits, size=size, sweep=sweep,
                    tables=raw)


def _table(where, raw, name, required=False) -> dict:
    value = raw.get(name)
    if value is None:
        if required:
            raise ScenarioError(f"{where}: the table `[{name}]` is missing")
        return {}
    if not isinstance(value, dict):
        raise ScenarioError(f"{where}: `{name}` must be a table `[{name}]`, got {value!r}")
    return value


def _unknown(where, prefix, table, allowed) -> None:
    for key in table:
        if key not in allowed:
            name = f"{prefix}.{key}" if prefix else key
            raise ScenarioError(f"{where}: unknown field `{name}`; expected one of "
                                f"{', '.join(allowed)}")


def _load_cell(where, path, value):
    from explorer.cell import load_cell

    if not isinstance(value, str) or not value.strip():
        raise ScenarioError(f"{where}: `scenario.cell` = {value!r}; expected a demo cell name "
                            "or a cell file path")
    candidate = Path(value)
    if candidate.suffix or "/" in value or "\\" in value:
        candidate = candidate if candidate.is_absolute() else path.parent / candidate
    else:
        candidate = value
    try:
        return load_cell(candidate)
    except InputError as exc:  # the cell file's own problems, under the scenario's name
        raise ScenarioError(f"{where}: `scenario.cell` = {value!r}: {exc}") from None


def _model(where, table) -> dict:
    _unknown(where, "model", table, MODEL_KEYS)
    model = dict(table)
    if "grid" in model:
        grid = model["grid"]
        if not (isinstance(grid, list) and len(grid) == 2 and all(isinstance(v, int) for v in grid)):
            raise ScenarioError(f"{where}: `model.grid` = {grid!r}; expected two whole numbers "
                                "[nx, ny]")
        model["grid"] = tuple(grid)
    for key in ("start_soc", "start_temperature_C", "output_interval_s"):
        if key in model:
            _number(where, f"model.{key}", model[key])
    from explorer.simulate import ELECTROCHEMISTRY, LAYOUTS

    for key, choices in (("electrochemistry", ELECTROCHEMISTRY), ("layout", LAYOUTS)):
        if key in model and (not isinstance(model[key], str)
                             or model[key].lower() not in choices):
            raise ScenarioError(f"{where}: `model.{key}` = {model[key]!r}; expected one of "
                                f"{', '.join(map(repr, choices))}")
    if "position" in model and (isinstance(model["position"], bool)
                                or not isinstance(model["position"], int) or model["position"] < 0):
        raise ScenarioError(f"{where}: `model.position` = {model['position']!r}; expected a whole "
                            "number >= 0 (0 = the first cell the coolant meets)")
    if "mesh" in model:
        model["mesh"] = _mesh(where, model["mesh"])
    return model


def _mesh(where, mesh) -> dict:
    """``[model.mesh]``: a table of whole numbers (the rod model checks the keys and minimums)."""
    if not isinstance(mesh, dict) or not all(
            isinstance(v, int) and not isinstance(v, bool) and 0 < v <= 1000 for v in mesh.values()):
        raise ScenarioError(f"{where}: `model.mesh` = {mesh!r}; expected a table of whole "
                            "numbers from 1 to 1000, e.g. `mesh = {shells = 10, negative = 10}`")
    return mesh


def _number(where, name, value) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise ScenarioError(f"{where}: `{name}` = {value!r}; expected a finite number")
    return float(value)


def _call(where, name, fn, kwargs, skip=()):
    """Call a public constructor with the file's keywords, naming the field on failure."""
    params = [p for p in inspect.signature(fn).parameters if p not in skip]
    for key in kwargs:
        if key not in params:
            raise ScenarioError(f"{where}: unknown field `{name}.{key}`; expected one of "
                                f"{', '.join(params)}")
    try:
        return fn(**kwargs)
    except InputError as exc:
        raise ScenarioError(f"{where}: `{name}`: {exc}") from None
    except TypeError as exc:
        raise ScenarioError(f"{where}: `{name}`: {exc}") from None


def _duty(where, path, steps) -> list:
    if steps is None:
        raise ScenarioError(f"{where}: no duty; expected at least one `[[duty]]` table with "
                            f"`step` = one of {', '.join(DUTY_STEPS)}")
    if not isinstance(steps, list) or not steps:
        raise ScenarioError(f"{where}: `duty` must be an array of tables `[[duty]]`, got "
                            f"{steps!r}")
    out = []
    for i, step in enumerate(steps):
        out.extend(_step(where, path, f"duty[{i}]", step))
    return out


def _kind(where, name, table, key, choices):
    """``(kind, other keys)`` of a table whose ``key`` names one of ``choices``."""
    if not isinstance(table, dict):
        raise ScenarioError(f"{where}: `{name}` must be a table, got {table!r}")
    kind = table.get(key)
    if kind not in choices:
        raise ScenarioError(f"{where}: `{name}.{key}` = {kind!r}; expected one of "
                            f"{', '.join(choices)}")
    return kind, {k: v for k, v in table.items() if k != key}


def _step(where, path, name, step) -> list:
    from explorer import duty as duty_mod

    kind, kwargs = _kind(where, name, step, "step", DUTY_STEPS)
    if kind == "repeat":
        _unknown(where, name, kwargs, ("times", "steps"))
        inner = kwargs.get("steps")
        if not isinstance(inner, list) or not inner:
            raise ScenarioError(f"{where}: `{name}.steps` = {inner!r}; expected a list of step "
                                "tables")
        body = [s for j, t in enumerate(inner) for s in _step(where, path, f"{name}.steps[{j}]", t)]
        return _call(where, name, duty_mod.repeat, {"steps": body, "times": kwargs.get("times")})
    if kind == "profile_csv" and isinstance(kwargs.get("path"), str):
        p = Path(kwargs["path"])
        kwargs["path"] = p if p.is_absolute() else path.parent / p
    result = _call(where, name, getattr(duty_mod, kind), kwargs)
    return list(result) if isinstance(result, list) else [result]


def _cooling(where, table):
    if not isinstance(table, dict):
        raise ScenarioError(f"{where}: `cooling` must be a table `[cooling]`, got {table!r}")
    extra = table.get("with", [])
    if not isinstance(extra, list):
        raise ScenarioError(f"{where}: `cooling.with` must be an array of tables "
                            f"`[[cooling.with]]`, got {extra!r}")
    main = _design(where, "cooling", {k: v for k, v in table.items() if k != "with"})
    parts = [_design(where, f"cooling.with[{i}]", t) for i, t in enumerate(extra)]
    if not parts:
        return main
    from explorer import cooling as cooling_mod

    return _call(where, "cooling", lambda: cooling_mod.combine(main, *parts), {})


def _design(where, name, table):
    from explorer import cooling as cooling_mod

    kind, kwargs = _kind(where, name, table, "design", DESIGNS)
    if kind in ("face_plate", "edge_plate"):
        if "plate" not in kwargs:
            raise ScenarioError(f"{where}: `{name}.plate` is missing; a {kind} needs a "
                                f"`[{name}.plate]` table with `kind` = one of {', '.join(PLATES)}")
        kwargs["plate"] = _plate(where, f"{name}.plate", kwargs["plate"])
    return _call(where, name, getattr(cooling_mod, kind), kwargs)


def _plate(where, name, table):
    from explorer import cooling as cooling_mod

    if not isinstance(table, dict):
        raise ScenarioError(f"{where}: `{name}` must be a table, got {table!r}")
    kind = table.get("kind", "cold_plate")
    if kind not in PLATES:
        raise ScenarioError(f"{where}: `{name}.kind` = {kind!r}; expected one of "
                            f"{', '.join(PLATES)}")
    kwargs = {k: v for k, v in table.items() if k != "kind"}
    return _call(where, name, getattr(cooling_mod, kind), kwargs)


def _limits(where, table) -> Limits:
    if not isinstance(table, dict):
        raise ScenarioError(f"{where}: `limits` must be a table `[limits]`, got {table!r}")
    return _call(where, "limits", Limits, table)


def _size(where, table) -> dict:
    if not isinstance(table, dict):
        raise ScenarioError(f"{where}: `size` must be a table `[size]`, got {table!r}")
    _unknown(where, "size", table, SIZE_KEYS)
    if not isinstance(table.get("vary"), str):
        raise ScenarioError(f"{where}: `size.vary` = {table.get('vary')!r}; expected the name "
                            "of a cooling design parameter, e.g. \"flow_L_min\"")
    bounds = table.get("bounds")
    if bounds is None:  # the parameter's default bounds (explorer.sizing.DESIGN_PARAMETERS)
        return dict(table)
    if not (isinstance(bounds, list) and len(bounds) == 2):
        raise ScenarioError(f"{where}: `size.bounds` = {bounds!r}; expected [lo, hi]")
    for k, b in enumerate(bounds):
        _number(where, f"size.bounds[{k}]", b)
    if bounds[0] >= bounds[1]:
        raise ScenarioError(f"{where}: `size.bounds` = {bounds!r}; expected lo < hi")
    return dict(table)


def _sweep(where, path, table) -> dict:
    if not isinstance(table, dict):
        raise ScenarioError(f"{where}: `sweep` must be a table `[sweep]`, got {table!r}")
    _unknown(where, "sweep", table, SWEEP_KEYS)
    axes = table.get("axes")
    if not isinstance(axes, dict) or not axes:
        raise ScenarioError(f"{where}: `sweep.axes` = {axes!r}; expected a table "
                            "`[sweep.axes]` of name = [values]")
    for name, values in axes.items():
        if not isinstance(values, list) or not values:
            raise ScenarioError(f"{where}: `sweep.axes.{name}` = {values!r}; expected a "
                                "non-empty list of numbers")
        for k, v in enumerate(values):
            _number(where, f"sweep.axes.{name}[{k}]", v)
    out = {"axes": axes, "keep_fields": bool(table.get("keep_fields", False))}
    if "cache" in table:
        if not isinstance(table["cache"], str):
            raise ScenarioError(f"{where}: `sweep.cache` = {table['cache']!r}; expected a "
                                "folder path")
        cache = Path(table["cache"])
        out["cache_dir"] = cache if cache.is_absolute() else path.parent / cache
    if "trace_interval_s" in table:
        out["trace_interval_s"] = _number(where, "sweep.trace_interval_s",
                                          table["trace_interval_s"])
    return out


# --------------------------------------------------------------------------- writing


def save(path, *, cell, duty, cooling=None, model=None, limits=None, size=None, sweep=None,
         app=None, name=None, description=None) -> Path:
    """Write a scenario file from plain values; the same tables :func:`load_scenario` reads.

    Parameters
    ----------
    path : str or Path
        The TOML file to write (atomically; the folder must exist).
    cell : str or Path
        A demo cell name, or a cell file (written relative to the scenario's folder when it
        lies below it, so the pair can be moved together).
    duty : list of dict
        One table per step, e.g. ``[{"step": "discharge", "c_rate": 1.0}]``.
    cooling, model, size, sweep, app : dict, optional
        The ``[cooling]``, ``[model]``, ``[size]``, ``[sweep]`` and ``[app]`` tables.
    limits : explorer.Limits or dict, optional
    name, description : str, optional

    Returns
    -------
    Path

    Raises
    ------
    ScenarioError
        When the tables would not load (the file is then not written).

    Examples
    --------
    >>> save("van.toml", cell="van_nmc_66ah", duty=[{"step": "discharge", "c_rate": 1.0}],
    ...      cooling={"design": "convection", "h_W_m2K": 10.0, "ambient_C": 25.0},
    ...      limits={"temperature_max_C": 45.0})                   # doctest: +SKIP
    """
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    if path.suffix.lower() != ".toml":
        raise ScenarioError(f"{path}: a scenario file is TOML; expected a name ending in .toml")
    if not folder.is_dir():
        raise ScenarioError(f"{path}: the folder {str(folder)!r} does not exist")
    head = {"name": name or path.stem, "cell": _relative(str(cell), folder)}
    if description:
        head["description"] = description
    if isinstance(limits, Limits):
        limits = {k: v for k, v in limits.as_dict().items() if v is not None}
    tables = {"scenario": head, "model": model, "duty": duty, "cooling": cooling,
              "limits": limits, "size": size, "sweep": sweep, "app": app}
    tables = {k: _plain(v) for k, v in tables.items() if v}
    for step in tables.get("duty", []):
        if isinstance(step, dict) and isinstance(step.get("path"), str):
            step["path"] = _relative(step["path"], folder)
    _from_tables(str(path), path, tables)  # refuse what would not load, before writing
    from explorer.fileio import atomic_write_text

    return atomic_write_text(path, dumps(tables))


def dumps(tables: dict) -> str:
    """The TOML text of a scenario's tables, with this tool's header line."""
    import tomli_w

    return "# Pouch Thermal Explorer scenario (python -m explorer run <this file>)\n" + \
        tomli_w.dumps(tables)


def _plain(value):
    """Tuples as lists, numpy scalars as Python numbers: what the TOML writer takes."""
    if isinstance(value, dict):
        return {k: _plain(v) for k, v in value.items() if v is not None}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):
        return value.item()
    if isinstance(value, Path):
        return str(value)
    return value


def _relative(name: str, folder: Path) -> str:
    """A file as a path relative to ``folder`` (POSIX form), so that the scenario and its files
    move together and no local absolute path travels in a shared file: below the folder, or
    given as a relative path (``../profiles/route.csv``); an absolute path elsewhere as given."""
    candidate = Path(name).expanduser()
    if not (candidate.suffix or "/" in name or "\\" in name):
        return name  # a demo cell name
    try:
        return candidate.resolve().relative_to(folder.resolve()).as_posix()
    except ValueError:
        pass
    if not candidate.is_absolute() and candidate.exists():
        try:
            return Path(os.path.relpath(candidate.resolve(), folder.resolve())).as_posix()
        except ValueError:  # another drive
            pass
    return str(candidate.resolve()) if candidate.exists() else name


# --------------------------------------------------------------------------- commands


def _out_dir(scenario: Scenario, out) -> Path:
    return Path(out) if out is not None else scenario.path.parent


def _guard(fn):
    """Turn bad input into exit code 2 with the message on stderr."""

    def wrapper(*args, **kwargs):
        try:
            return fn(*args, **kwargs)
        except InputError as exc:
            print(f"error: {clip(str(exc), 2000)}", file=sys.stderr)
            log.debug("scenario command failed", exc_info=True)  # -v shows where
            return 2

    wrapper.__name__, wrapper.__doc__ = fn.__name__, fn.__doc__
    return wrapper


@_guard
def cmd_run(scenario, out=None) -> int:
    """Simulate a scenario and write ``<name>_run.nc`` into ``out`` (default: beside it).

    When the cooling puts more than one cell on one coolant path (a cold plate
    with ``cells_per_plate`` > 1 the coolant meets one cell after another),
    every cell on the path is run as one module (:func:`explorer.simulate_module`)
    and the verdict is the module's: its worst cell and its cell-to-cell spread
    (DESIGN.md §3 rule 3). Prints the key figures (a module's: the worst cell
    and the per-cell peaks), the limits with their margins, the pressure drop
    and pump power. Returns 0 (completed, limits met), 1 (a limit not met or
    the run failed) or 2 (bad input).
    """
    from explorer.module import module_cells
    from explorer.results import key_figures, run_warnings, save
    from explorer.sizing import run_hydraulics

    sc = load_scenario(scenario)
    cells = module_cells(sc.cooling)
    if cells > 1:
        ds, notes = _run_module(sc, cells)
    else:
        from explorer.simulate import simulate

        ds, notes = simulate(sc.cell, sc.duty, sc.cooling, **sc.model), []
    path = save(ds, _out_dir(sc, out) / f"{sc.path.stem}_run.nc", limits=sc.limits)
    fig = key_figures(ds)
    hyd = run_hydraulics(ds) or {}
    lines = [f"scenario: {sc.name}  ({sc.path})", f"cell: {sc.cell.name}",
             f"status: {ds.attrs.get('status')} {ds.attrs.get('status_message', '')}".rstrip()]
    lines += notes + _figure_lines(ds, fig)
    ok = ds.attrs.get("status") != "failed"
    if sc.limits is not None:
        check = sc.limits.check(ds, hyd)
        lines.append(_limits_table(sc.limits, check))
        sheet = sc.cell.temperature_max_C
        if sc.limits.temperature_max_C is not None and sc.limits.temperature_max_C > sheet:
            lines.append(f"note: `temperature_max_C` = {sc.limits.temperature_max_C:g} degC is "
                         f"above the cell's data-sheet maximum {sheet:g} degC")
        ok = ok and check["met"]
    else:  # no verdict to carry them: the run's own warnings
        lines += [f"warning: {w}" for w in run_warnings(ds)]
    lines += [f"warning: cell: {w}" for w in _cell_warnings(ds)]
    lines.extend(_hydraulics_lines(hyd))
    lines.append(f"wrote {path}")
    _print(lines)
    return 0 if ok else 1


def _run_module(sc: Scenario, cells: int):
    """``(module Dataset, note lines)``: every cell on the coolant path of ``sc.cooling``.

    Model settings :func:`explorer.simulate_module` does not take: ``position``
    only picks which one cell stands for the plate in a single-cell run; the
    module runs that cell and all the others, so it is dropped with a printed
    note (the engineer loses nothing but the shortcut). Any other such setting
    would change the model, so dropping it would silently judge a different
    model than the file states: refused.
    """
    from explorer.module import simulate_module

    where = str(sc.path)
    takes = inspect.signature(simulate_module).parameters
    model = {k: v for k, v in sc.model.items() if k in takes}
    notes = []
    for key in sc.model:
        if key in takes:
            continue
        if key != "position":
            raise ScenarioError(f"{where}: `model.{key}` = {sc.model[key]!r} is not a setting of "
                                f"a module run; the cooling puts {cells} cells on one coolant "
                                "path, so `run` runs them all as one module; remove the key")
        notes.append(f"note: `model.position` = {sc.model[key]} is not used: the cooling puts "
                     f"{cells} cells on one coolant path and `run` runs them all as one module "
                     f"(cell {sc.model[key]} is in the per-cell table below)")
    print(f"running the module: {cells} cells along the coolant path, coupled (about {cells} "
          "times the time of one cell; Ctrl-C stops it and keeps what was computed)",
          file=sys.stderr, flush=True)
    ds = simulate_module(sc.cell, sc.duty, sc.cooling, progress=_module_progress(), **model)
    return ds, notes


def _module_progress(every_s: float = 10.0):
    """A progress callback for the stepper that prints a line on stderr every ``every_s`` of
    wall time, so that a long module run shows life."""
    import time

    start = last = time.perf_counter()

    def progress(t_s, step_index):
        nonlocal last
        now = time.perf_counter()
        if now - last >= every_s:
            last = now
            print(f"  module run: t = {t_s:.0f} s of the duty (step {step_index + 1}), "
                  f"{now - start:.0f} s", file=sys.stderr, flush=True)

    return progress


# key figure -> (unit, what it spans on a module Dataset)
_FIGURES = (("peak_temperature_C", "degC", "worst cell {worst_cell}"),
            ("max_spread_K", "K", "largest in any cell"),
            ("cell_to_cell_K", "K", "warmest minus coolest cell mean"),
            ("end_soc", "%", "mean over the cells"),
            ("energy_delivered_Wh", "Wh", "per cell"),
            ("heat_generated_J", "J", "all {cells} cells"),
            ("heat_rejected_J", "J", "all {cells} cells"),
            ("duration_s", "s", ""))


def _figure_lines(ds, fig: dict) -> list[str]:
    """The key figures, one a line; a module's say what they span and end with the per-cell
    table."""
    from explorer.results import is_module

    module = is_module(ds)
    lines = []
    if module:
        lines.append(f"module: {ds.sizes['cell']} cells along one coolant path, run coupled; "
                     f"worst cell {fig['worst_cell']} (0 = first the coolant meets), its "
                     f"hottest point {fig['peak_temperature_C']:.4g} degC at t = "
                     f"{fig['peak_time_s']:.0f} s")
    for key, unit, span in _FIGURES:
        if key not in fig:  # cell_to_cell_K: modules only
            continue
        value = fig[key] * (100.0 if unit == "%" else 1.0)
        if math.isfinite(value):
            text = f"{key:<24}{value:>12.4g}  {unit}"
            if module and span:
                text += f"  ({span.format(cells=ds.sizes['cell'], **fig)})"
            lines.append(text)
        else:  # a figure this layout cannot see (the spread on one lumped temperature)
            lines.append(f"{key:<24}{'-':>12}  {unit}  (not seen on layout "
                         f"{ds.attrs.get('layout', '?')!r})")
    return lines + (_cell_table(ds) if module else [])


def _cell_table(ds) -> list[str]:
    """One line per cell of a module: its hottest point, in-cell spread, peak mean and the
    coolant leaving it (the ``results`` helpers, as the report's module view reads them)."""
    import numpy as np

    from explorer.results import coldest_anywhere, hottest_anywhere, is_lumped, per_cell

    hot, cold = hottest_anywhere(ds), coldest_anywhere(ds)
    mean = per_cell(ds, "temperature_mean")
    outlet = per_cell(ds, "coolant_outlet") if "coolant_outlet" in ds else None
    lines = ["per cell, the highest over the run (cell 0 = first the coolant meets):",
             f"{'cell':>6}{'hottest degC':>14}{'in-cell K':>11}{'mean degC':>11}"
             f"{'coolant out degC':>18}"]
    for k, c in enumerate(ds["cell"].values):
        spread = "-" if is_lumped(ds) else f"{np.nanmax(hot[k] - cold[k]):.3g}"
        out = "-" if outlet is None else f"{np.nanmax(outlet[k]):.4g}"
        lines.append(f"{int(c):>6}{np.nanmax(hot[k]):>14.4g}{spread:>11}"
                     f"{np.nanmax(mean[k]):>11.4g}{out:>18}")
    return lines


def _cell_warnings(ds) -> list[str]:
    """The cell file's own warnings the run recorded (e.g. an OCV table that disagrees with
    the negative curve; ``results.data_attrs``), as the report shows them."""
    raw = ds.attrs.get("cell_warnings", "[]")
    try:
        value = json.loads(raw) if isinstance(raw, str) else list(raw)
    except (TypeError, ValueError):
        return [str(raw)]
    return [str(w) for w in value] if isinstance(value, list) else [str(value)]


@_guard
def cmd_size(scenario, out=None, fidelity: bool = True) -> int:
    """Size the scenario's ``[size]`` parameter against its ``[limits]``.

    Writes ``<name>_size.nc`` (the run at the design value) and
    ``<name>_size_curve.nc`` (the figures against the value). With
    ``fidelity`` (the default) the answer is also checked on the fuller models
    (:func:`explorer.check_fidelity`); the run file carries the check's summary.
    Prints one line per run on stderr. Returns 0 when a feasible value was
    found, 1 when none in the bounds meets the limits, 2 for bad input.
    """
    import time

    from explorer.results import data_attrs, save
    from explorer.sizing import size_cooling

    sc = load_scenario(scenario)
    where = str(sc.path)
    if sc.size is None:
        raise ScenarioError(f"{where}: no `[size]` table; expected `vary` and `bounds`")
    if sc.limits is None:
        raise ScenarioError(f"{where}: no `[limits]` table; sizing needs limits to meet")
    if sc.cooling is None:
        raise ScenarioError(f"{where}: no `[cooling]` table; sizing varies a cooling design")
    options = {k: v for k, v in sc.size.items() if k not in ("vary", "bounds")}
    bounds = sc.size.get("bounds")
    vary = sc.size["vary"]

    start, runs, checked = time.perf_counter(), [], set()

    def progress(value, met, margin):  # one line per run, so a long sizing shows life
        runs.append(value)
        print(f"  run: {vary} = {value:.6g}: {'meets' if met else 'fails'} (worst margin "
              f"{margin:+.3g}; run {len(runs)}, {time.perf_counter() - start:.1f} s)",
              file=sys.stderr, flush=True)

    def fidelity_progress(variant, fraction):  # one line per fuller run of the check
        if variant not in checked:
            checked.add(variant)
            print(f"  fidelity check of the answer: {variant} run ("
                  f"{time.perf_counter() - start:.1f} s)", file=sys.stderr, flush=True)

    check = {"progress": fidelity_progress} if fidelity else False
    res = size_cooling(sc.cell, sc.duty, sc.cooling, vary, None if bounds is None else
                       tuple(bounds), sc.limits, on_evaluation=progress, check_fidelity=check,
                       **options, **sc.model)
    folder = _out_dir(sc, out)
    run = res.dataset if res.module is None else res.module  # the module run, all its cells
    run = run.copy()
    run.attrs["kind"] = "sizing"  # the run at the design value (contract G)
    run_path = save(run, folder / f"{sc.path.stem}_size.nc", limits=sc.limits)
    curve = res.curve.copy()
    curve.attrs.update({"design_value": res.value, "feasible": int(res.feasible),
                        "limited_by": res.limited_by, "unit": res.unit,
                        "message": res.message, "cell_name": sc.cell.name,
                        "cooling": json.dumps(res.design.describe(), default=str),
                        **data_attrs(sc.cell, sc.duty)})
    curve_path = save(curve, folder / f"{sc.path.stem}_size_curve.nc", limits=sc.limits)
    lines = [f"scenario: {sc.name}  ({sc.path})", f"cell: {sc.cell.name}", res.table()]
    if res.fidelity is not None:
        from explorer import fidelity as fid

        lines += ["", "fidelity check of the answer (the same design on the fuller models):",
                  fid.text_table(fid.summary(res.fidelity)), ""]
    _print([*lines, f"wrote {run_path}", f"wrote {curve_path}"])
    return 0 if res.feasible else 1


@_guard
def cmd_sweep(scenario, out=None, scheduler=None) -> int:
    """Sweep the scenario's ``[sweep.axes]``; writes ``<name>_sweep.nc``.

    ``scheduler``: None for a local Dask cluster, "serial", or the address of
    a running scheduler. Returns 0 when every case ran, 1 when a case failed,
    2 for bad input.
    """
    from explorer.results import data_attrs, save
    from explorer.sweeping import sweep

    sc = load_scenario(scenario)
    if sc.sweep is None:
        raise ScenarioError(f"{sc.path}: no `[sweep]` table; expected `[sweep.axes]`")
    options = {k: v for k, v in sc.sweep.items() if k != "axes"}
    # as `run`: every cell on a case's coolant path is judged; `model.position` only picks
    # the cell a single-cell run stands for, so a sweep would judge one cell of a module
    model = {k: v for k, v in sc.model.items() if k != "position"}
    notes = ([f"note: `model.position` = {sc.model['position']} is not used: each case runs "
              "every cell on its coolant path (as `run` does)"] if "position" in sc.model
             else [])
    ds = sweep(sc.cell, sc.duty, sc.cooling, sc.sweep["axes"], scheduler=scheduler,
               limits=sc.limits, **options, **model)
    ds.attrs.update({k: v for k, v in data_attrs(sc.cell, sc.duty).items()
                     if k not in ds.attrs or k == "cell_file"})
    path = save(ds, _out_dir(sc, out) / f"{sc.path.stem}_sweep.nc", limits=sc.limits)
    _print([f"scenario: {sc.name}  ({sc.path})", f"cell: {sc.cell.name}", *notes,
            sweep_table(ds), f"wrote {path}"])
    return 0 if ds.attrs["cases_failed"] == 0 else 1


def sweep_table(ds) -> str:
    """One line per case: the axis values, peak temperature, spread, hydraulics, status."""
    axes = list(json.loads(ds.attrs["axes"]))
    cols = [("peak_temperature_C", "hottest C"), ("max_spread_K", "in-cell K"),
            ("cell_to_cell_K", "cells K"), ("end_soc", "end SOC"),
            ("pressure_drop_kPa", "dp kPa"), ("pump_power_W", "pump W")]
    cols = [c for c in cols if c[0] in ds]
    head = "".join(f"{a:>14}" for a in axes) + "".join(f"{c[1]:>11}" for c in cols)
    head += "   meets" if "meets_limits" in ds else ""
    lines = ["hottest: hottest point anywhere in the worst cell (core included); in-cell: hottest "
             "minus coldest point in a cell; cells: warmest minus coolest cell mean; dp and pump: "
             "plate channels only", head + "   status"]
    stacked = ds[[c for c, _ in cols] + ["case_status"] +
                 (["meets_limits"] if "meets_limits" in ds else [])].stack(case=axes)
    for k in range(stacked.sizes["case"]):
        row = stacked.isel(case=k)
        text = "".join(f"{float(row[a]):>14.4g}" for a in axes)
        text += "".join(f"{float(row[c]):>11.4g}" for c, _ in cols)
        if "meets_limits" in ds:
            text += f"{'yes' if int(row['meets_limits']) else 'no':>8}"
        lines.append(text + f"   {row['case_status'].item()}")
    return "\n".join(lines)


def _limits_table(limits: Limits, check: dict) -> str:
    """The limits with figure, margin and verdict; then what each figure spans, why a limit
    was not evaluated, the overall verdict and the run's warnings."""
    from explorer.limits import LONG_NAMES, UNITS
    from explorer.report_parts import figure_and_margin

    lines = [f"{'limit':<24}{'limit value':>12}{'figure':>12}{'margin':>12}  {'unit':<6}verdict"]
    for name, margin in check["margins"].items():
        figure = check["figures"].get(name)
        bound = check.get("bounds", {}).get(name)
        shown = (f">={bound:.4g}" if bound is not None else "-")
        margin_shown = "-" if margin is None else format(margin, '.4g')
        if figure is not None and margin is not None:  # margin to the figure's decimals
            shown, margin_shown = figure_and_margin(figure, margin)
        elif figure is not None:
            shown = f"{figure:.4g}"
        verdict = {"met": "met", "not met": "NOT met"}.get(check["verdicts"][name],
                                                          "not evaluated")
        lines.append(f"{name:<24}{getattr(limits, name):>12.4g}{shown:>12}"
                     f"{margin_shown:>12}  "
                     f"{UNITS[name]:<6}{verdict}")
    for name in check["margins"]:
        cell = check.get("cells", {}).get(name)
        where = f" (worst: cell {cell})" if cell is not None else ""
        lines.append(f"  {name}: {LONG_NAMES[name]}{where}")
        if name in check["reasons"]:
            lines.append(f"    {check['reasons'][name]}")
    if check["met"]:
        lines.append("limits met")
    else:
        failed = [n for n, v in check["verdicts"].items() if v == "not met"]
        lines.append(f"LIMIT NOT MET: {', '.join(failed)}" if failed else
                     f"LIMITS NOT SHOWN TO BE MET (not evaluated: "
                     f"{', '.join(check['not_evaluated'])})")
    lines += [f"warning: {w}" for w in check.get("warnings", [])]
    return "\n".join(lines)


def _hydraulics_lines(hyd: dict) -> list[str]:
    lines = []
    if hyd.get("pressure_drop_Pa") is not None:
        lines.append(f"{'pressure drop':<24}{hyd['pressure_drop_Pa'] / 1e3:>12.4g}  kPa")
    if hyd.get("pump_power_W") is not None:
        lines.append(f"{'pump power':<24}{hyd['pump_power_W']:>12.4g}  W")
    lines.extend(f"warning: {w}" for w in hyd.get("warnings", []) or [])
    return lines


def _print(lines) -> None:
    from explorer.results import CAUTION

    print("\n".join(lines))
    print(f"note: {CAUTION}")
