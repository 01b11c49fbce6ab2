"""Results: the one place a run becomes an ``xarray.Dataset``, and its file I/O.

:func:`to_dataset` turns the stepper's :class:`~explorer.stepping.run.Record`
into the Dataset of the public contract (CF-style ``units`` and
``long_name`` on every variable); :func:`save` writes it to netCDF
atomically; :func:`open_results` reads it back; :func:`key_figures` gives the
numbers a design review asks for first.

The Dataset
-----------
Coordinates ``time`` (s), ``x`` and ``y`` (m, cell centres; 1 x 1 for the
``single`` layout). Variables:

=============================================  ===========  =======  ================================
name                                           dims         units    what
=============================================  ===========  =======  ================================
voltage, current, power, ocv                   time         V, A, W  terminal values; + on discharge
soc_mean                                       time         1        cell state of charge
soc, current_density                           time, y, x   1, A m-2 local (uniform unless distributed)
temperature                                    time, y, x   degC     through-thickness mean field
temperature_max / _min / _mean                 time         degC     of the mean field over the face
temperature_core_max                           time         degC     core estimate from generation
temperature_hottest / _coldest                 time         degC     anywhere in the cell (through
                                                                     the thickness included)
temperature_front_max / _min, _back_max / _min time         degC     face surface extremes
through_thickness_difference                   time         K        largest hottest - coldest
                                                                     through the thickness
heat_flux                                      time, y, x   W m-2    generated heat per face area
heat_total, heat_<source>                      time         W        irreversible, reversible,
                                                                     ohmic_electrolyte, ohmic_solid,
                                                                     collector, tab
heat_rejected, heat_to_<sink>                  time         W        into all sinks / each sink
heat_stored                                    time         J        relative to 0 degC
heat_generated_energy, heat_rejected_energy    time         J        running integrals (exact)
charge_delivered, energy_delivered             time         A h, W h running integrals
coolant_outlet                                 time         degC     with a coolant stream only
lithium                                        time         mol      at the ends of duty steps
step                                           time         1        index of the duty step
=============================================  ===========  =======  ================================

Attributes: tool version, cell name, file and SHA-256, every model setting
(electrochemistry, layout, grid, rods, duty, cooling, hydraulics as JSON),
``heat_capacity_J_per_K``, ``collector_resistance_ohm``,
``temperature_limit_C`` (data sheet), ``status`` ("completed", "cut_short",
"stopped", "failed") with ``status_message``, ``duty_step_ends`` (JSON: per
duty step, what ended it), and the ``caution``. :func:`run_warnings` turns a
status other than "completed" into the warning every verdict must carry.

``face_geometry`` (JSON, lengths in m, the cell model's conventions: origin at
the bottom-left corner of the coated face, a tab's ``position_m`` is its centre
along its edge) is what the field maps draw without the cell file:
``{"width_m", "height_m", "tabs": [{"name", "edge", "position_m", "width_m",
"free_length_m", "polarity", "material"}]}`` (:func:`face_geometry_attr` writes
it, :func:`face_geometry` reads it back as a :class:`FaceGeometry`).
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import xarray as xr

from explorer import __version__
from explorer.validators import InputError

CAUTION = (
    "Results inform design; they do not certify it. The model does not cover abuse, internal "
    "short circuits or thermal runaway. Temperature limits and margins come from the cell maker's "
    "data sheet, the applicable standards and local codes; sign-off belongs to qualified engineers."
)

_HEAT_LONG = {
    "irreversible": "irreversible (reaction overpotential) heat",
    "reversible": "reversible (entropic) heat",
    "ohmic_electrolyte": "Ohmic heat in the electrolyte",
    "ohmic_solid": "Ohmic heat in the electrode solid phase",
    "collector": "Joule heat in the current-collector foils",
    "tab": "Joule heat in the tabs and tab welds",
}


def _var(dims, data, units, long_name):
    return xr.Variable(dims, np.asarray(data, dtype=float), {"units": units, "long_name": long_name})


def _stacked(maps) -> np.ndarray:
    """``np.stack(maps)`` of equal-shaped maps: one concatenation, far cheaper for
    many small maps (the single layout's 1 x 1)."""
    first = np.asarray(maps[0])
    return np.concatenate(maps).reshape(len(maps), *first.shape) if first.ndim else np.stack(maps)


def _assemble(data: dict, coords: dict, attrs: dict) -> xr.Dataset:
    """``xr.Dataset(data, coords=coords, attrs=attrs)`` with the 1-D dimension coordinates'
    indexes made here (public ``xarray.Coordinates`` and ``PandasIndex``): the same Dataset
    as letting the constructor infer them, about 0.1 ms (a tenth of it) sooner on a short
    run. ``coords``: name -> (dim, values, attrs), each dimension coordinate of its own
    name. (A private shortcut into xarray's internals, tried earlier, saved 0.4 ms: not
    worth the dependency.)"""
    import pandas as pd
    from xarray.indexes import PandasIndex

    variables = {name: xr.Variable(dim, np.asarray(values), attrs)
                 for name, (dim, values, attrs) in coords.items()}
    indexes = {name: PandasIndex(pd.Index(v.values), name) for name, v in variables.items()}
    return xr.Dataset(data, coords=xr.Coordinates(variables, indexes=indexes), attrs=attrs)


def to_dataset(record, *, cell, grid, attrs: dict) -> xr.Dataset:
    """Build the results Dataset from a stepper record.

    ``attrs`` carries the model settings (electrochemistry, layout, duty,
    cooling, ...); the cell's identity, the tool version and the status are
    added here.
    """
    t = np.asarray(record.time)
    T = _stacked(record.temperature)
    area = grid.cell_area_m2
    heat_map = _stacked(record.heat_map) / area
    soc = np.asarray(record.soc)
    current = np.asarray(record.current)
    voltage = np.asarray(record.voltage)
    Tmax = T.max(axis=(1, 2))
    heat_vars = {f"heat_{k}": _var("time", v, "W", _HEAT_LONG[k]) for k, v in record.heat.items()}
    heat_total = sum(np.asarray(v) for v in record.heat.values())
    data = {
        "voltage": _var("time", voltage, "V", "terminal voltage"),
        "current": _var("time", current, "A", "cell current (positive on discharge)"),
        "power": _var("time", current * voltage, "W", "terminal power (positive on discharge)"),
        "ocv": _var("time", record.ocv, "V", "open-circuit voltage at the electrodes' state"),
        "soc_mean": _var("time", soc, "1", "state of charge"),
        "soc": _var(("time", "y", "x"), _field(record.soc_map, soc, T.shape), "1",
                    "local state of charge"),
        "current_density": _var(("time", "y", "x"),
                                _field(record.current_density, current / grid.area_m2, T.shape),
                                "A m-2", "current through the stack per unit face area"),
        "temperature": _var(("time", "y", "x"), T, "degC",
                            "cell temperature (through-thickness mean)"),
        "temperature_max": _var("time", Tmax, "degC",
                                "hottest point of the through-thickness-mean field over the face"),
        "temperature_min": _var("time", T.min(axis=(1, 2)), "degC",
                                "coldest point of the through-thickness-mean field over the face"),
        "temperature_mean": _var("time", T.mean(axis=(1, 2)), "degC",
                                 "area-mean of the through-thickness-mean temperature"),
        "temperature_core_max": _var("time", Tmax + np.asarray(record.core_difference), "degC",
                                     "hottest through-plane (core) temperature estimate from the "
                                     "local generation"),
        **_through_vars(record, Tmax, T.min(axis=(1, 2))),
        "heat_flux": _var(("time", "y", "x"), heat_map, "W m-2",
                          "generated heat per unit face area"),
        "heat_total": _var("time", heat_total, "W", "total generated heat"),
        **heat_vars,
        "heat_rejected": _var("time", record.heat_rejected, "W", "heat into all sinks"),
        "heat_stored": _var("time", record.stored_J, "J",
                            "heat stored in the cell (and fin) relative to 0 degC"),
        "heat_generated_energy": _var("time", record.heat_generated_J, "J",
                                      "heat generated since the start"),
        "heat_rejected_energy": _var("time", record.heat_rejected_J, "J",
                                     "heat rejected to the sinks since the start"),
        "charge_delivered": _var("time", np.asarray(record.charge_C) / 3600.0, "A h",
                                 "charge delivered since the start (positive on discharge)"),
        "energy_delivered": _var("time", np.asarray(record.electrical_J) / 3600.0, "W h",
                                 "electrical energy delivered since the start"),
        "lithium": _var("time", record.lithium_mol, "mol", "cyclable lithium in the electrodes (at the ends of duty steps)"),
        "step": xr.Variable("time", np.asarray(record.step, dtype=np.int32),
                            {"units": "1", "long_name": "index of the duty step"}),
    }
    for name, w in record.rejected_by_sink.items():
        data[f"heat_to_{name}"] = _var("time", w, "W", f"heat into the {name} sink")
    outlet = np.asarray(record.coolant_outlet, dtype=float)
    if np.isfinite(outlet).any():
        data["coolant_outlet"] = _var("time", outlet, "degC", "coolant temperature leaving this cell")
    coords = {
        "time": ("time", t, {"units": "s", "long_name": "time from the start of the duty"}),
        "x": ("x", grid.x, {"units": "m", "long_name": "position across the electrode width"}),
        "y": ("y", grid.y, {"units": "m", "long_name": "position along the electrode height"}),
    }
    if isinstance(attrs.get("inputs"), dict):  # the grid is chosen here, with the run
        attrs = {**attrs, "inputs": {**attrs["inputs"], "model": {
            **attrs["inputs"].get("model", {}), "grid": [grid.nx, grid.ny]}}}
    full_attrs = {
        "title": f"Pouch Thermal Explorer run: {cell.name}",
        "tool_version": __version__,
        "cell_name": cell.name,
        "cell_sha256": cell.sha256,
        "cell_file": Path(str(cell.source_path or "")).name,
        "temperature_limit_C": cell.temperature_max_C,
        "grid_nx": grid.nx,
        "grid_ny": grid.ny,
        **{k: (json.dumps(v) if isinstance(v, (dict, list, tuple)) else v)
           for k, v in attrs.items() if v is not None},
        "status": record.status,
        "status_message": record.message,
        "duty_step_ends": json.dumps(getattr(record, "step_ends", [])),
        "wall_time_s": record.wall_time_s,
        "steps_taken": record.steps_taken,
        "steps_rejected": record.steps_rejected,
        "caution": CAUTION,
        "Conventions": "CF-1.10",
        "kind": "module" if "module_cells" in attrs else "run",
    }
    return _assemble(data, coords, full_attrs)


# through-thickness variables: name -> (Record field, units, long_name)
THROUGH_VARIABLES = {
    "temperature_hottest": ("hottest", "degC",
                            "hottest point anywhere in the cell (core and faces included)"),
    "temperature_coldest": ("coldest", "degC",
                            "coldest point anywhere in the cell (core and faces included)"),
    "temperature_front_max": ("front_max", "degC", "hottest point of the front face surface"),
    "temperature_front_min": ("front_min", "degC", "coldest point of the front face surface"),
    "temperature_back_max": ("back_max", "degC", "hottest point of the back face surface"),
    "temperature_back_min": ("back_min", "degC", "coldest point of the back face surface"),
    "through_thickness_difference": (
        "through_difference", "K",
        "largest difference through the thickness (hottest minus coldest at one point of the "
        "face)"),
}


def _through_vars(record, Tmax, Tmin) -> dict:
    """The temperatures through the thickness; a record without them (a thermal model that
    reports none) gives the mean field's extremes and a zero difference."""
    n = len(record.time)
    core = Tmax + np.maximum(np.asarray(record.core_difference, dtype=float), 0.0)
    fallback = {"hottest": core, "coldest": Tmin, "front_max": Tmax, "front_min": Tmin,
                "back_max": Tmax, "back_min": Tmin, "through_difference": np.zeros(n)}
    out = {}
    for name, (key, units, long_name) in THROUGH_VARIABLES.items():
        values = getattr(record, key, None)
        out[name] = _var("time", values if values is not None and len(values) == n
                         else fallback[key], units, long_name)
    return out


def run_warnings(ds) -> list[str]:
    """What every verdict on this run must carry, in plain words: empty for a run that
    completed; otherwise when and why it ended early, and that its figures cover only the
    part of the duty that ran (contract A of the project notes)."""
    status = str(ds.attrs.get("status", "completed"))
    if status == "completed":
        return []
    message = str(ds.attrs.get("status_message", "")) or "no reason recorded"
    what = {"cut_short": "was cut short", "stopped": "was interrupted",
            "failed": "failed"}.get(status, f"ended with status {status!r}")
    t_end = float(ds["time"].values[-1]) if "time" in ds.coords and ds.sizes["time"] else 0.0
    return [f"the run {what} ({message}); every figure and verdict covers only the first "
            f"{t_end:.1f} s of the duty, not the whole duty"]


def _field(maps, uniform, shape) -> np.ndarray:
    """Recorded maps where the layout resolves them, else the uniform value broadcast."""
    if maps and all(m is not None for m in maps):
        return np.stack(maps)
    return np.broadcast_to(np.asarray(uniform, dtype=float)[:, None, None], shape)


def is_lumped(ds) -> bool:
    """True for a run with one temperature over the face (``layout="single"``).

    Read from the ``layout`` attribute; a Dataset without it counts as lumped
    when its grid is 1 x 1 and its face extremes never differ.
    """
    layout = ds.attrs.get("layout")
    if layout is not None:
        return str(layout) == "single"
    if ds.sizes.get("x", 1) * ds.sizes.get("y", 1) > 1:
        return False
    return bool(np.all(ds["temperature_max"].values == ds["temperature_min"].values))


def is_module(ds) -> bool:
    """True for a module Dataset (a ``cell`` dimension on the per-cell variables)."""
    return "cell" in ds.dims


def per_cell(ds, name: str) -> np.ndarray:
    """A time series as a (cells, time) float array; one row for a single-cell Dataset."""
    v = ds[name]
    if "cell" in v.dims:
        v = v.transpose("cell", ...)
        return np.asarray(v.values, dtype=float).reshape(v.sizes["cell"], -1)
    return np.asarray(v.values, dtype=float).reshape(1, -1)


def hottest_anywhere(ds) -> np.ndarray:
    """(cells, time) hottest point anywhere in each cell, core included.

    ``temperature_hottest`` where the Dataset has it; for one made without it
    (an older file), the higher of the mean field's maximum and the core estimate.
    """
    if "temperature_hottest" in ds:
        return per_cell(ds, "temperature_hottest")
    hot = per_cell(ds, "temperature_max")
    if "temperature_core_max" in ds:
        hot = np.fmax(hot, per_cell(ds, "temperature_core_max"))
    return hot


def coldest_anywhere(ds) -> np.ndarray:
    """(cells, time) coldest point anywhere in each cell (the mean field's minimum without it)."""
    return per_cell(ds, "temperature_coldest" if "temperature_coldest" in ds
                    else "temperature_min")


def _cell_label(ds, row: int):
    return int(ds["cell"].values[row]) if "cell" in ds.coords else row


def key_figures(ds: xr.Dataset) -> dict:
    """The figures a design review asks for first, as plain floats.

    ``peak_temperature_C`` is the hottest point anywhere in the cell (the core
    estimate and the faces included) and ``time_to_limit_s`` is when that same
    figure first reaches the data-sheet maximum (None: not reached).
    ``max_spread_K`` is the in-cell spread: hottest minus coldest point
    anywhere in the cell at one time (through the thickness included);
    ``max_face_spread_K`` spans the through-thickness-mean field over the
    face; ``max_through_thickness_K`` is the largest difference through the
    thickness at one point. A figure the run cannot see is NaN: both spreads
    on ``layout="single"`` (one temperature over the face). A module Dataset
    (a ``cell`` dimension) gives the worst cell's figures, ``worst_cell``
    (the cell with the peak) and ``cell_to_cell_K`` (largest difference
    between the cells' mean temperatures at one time).
    """
    t = ds["time"].values
    hot = hottest_anywhere(ds)
    spread = hot - coldest_anywhere(ds)
    face = per_cell(ds, "temperature_max") - per_cell(ds, "temperature_min")
    lumped = is_lumped(ds)
    limit = float(ds.attrs.get("temperature_limit_C", math.nan))
    over = (np.nonzero((hot >= limit).any(axis=0))[0] if math.isfinite(limit)
            else np.zeros(0, int))
    row, i_peak = np.unravel_index(int(np.nanargmax(hot)), hot.shape)
    through = (float(np.nanmax(per_cell(ds, "through_thickness_difference")))
               if "through_thickness_difference" in ds else math.nan)
    figures = {
        "peak_temperature_C": float(hot[row, i_peak]),
        "peak_time_s": float(t[i_peak]),
        "peak_mean_field_C": float(np.nanmax(per_cell(ds, "temperature_max"))),
        "max_spread_K": math.nan if lumped else float(np.nanmax(spread)),
        "max_face_spread_K": math.nan if lumped else float(np.nanmax(face)),
        "max_through_thickness_K": through,
        "time_to_limit_s": float(t[over[0]]) if len(over) else None,
        "end_soc": float(np.mean(per_cell(ds, "soc_mean")[:, -1])),
        "energy_delivered_Wh": _total(ds, "energy_delivered", "power", 1 / 3600.0),
        "charge_delivered_Ah": _total(ds, "charge_delivered", "current", 1 / 3600.0),
        "heat_generated_J": _total(ds, "heat_generated_energy", "heat_total"),
        "heat_rejected_J": _total(ds, "heat_rejected_energy", "heat_rejected"),
        "duration_s": float(t[-1] - t[0]),
        "end_voltage_V": float(ds["voltage"].values[-1]),
        "status": str(ds.attrs.get("status", "")),
    }
    if is_module(ds):
        mean = per_cell(ds, "temperature_mean")
        figures["worst_cell"] = _cell_label(ds, int(row))
        figures["cell_to_cell_K"] = float(np.nanmax(mean.max(axis=0) - mean.min(axis=0)))
    return figures


def _total(ds, running, rate, scale=1.0) -> float:
    """The final value of a running integral; for Datasets made elsewhere without it, the
    rate integrated with each value holding over the step that ends at it (the stepper's rule)."""
    # a module's cells: heat and energy add up over the string; the series charge is each cell's
    combine = np.mean if running == "charge_delivered" else np.sum
    if running in ds:
        return float(combine(per_cell(ds, running)[:, -1]))
    t = ds["time"].values.astype(float)
    if rate not in ds and rate == "power":
        rates = per_cell(ds, "current") * per_cell(ds, "voltage")
    else:
        rates = per_cell(ds, rate)
    return float(combine(np.sum(rates[:, 1:] * np.diff(t), axis=1))) * scale


def save(ds: xr.Dataset, path, *, light: bool = True, limits=None,
         field_interval_s: float | None = None) -> Path:
    """Write ``ds`` to netCDF atomically (temporary file in the same folder, then rename).

    Parameters
    ----------
    ds : xarray.Dataset
        A run, a module run, a sizing curve or a sweep.
    path : str or Path
        The netCDF file; its folder is created when missing.
    light : bool
        Compress (zlib) and, for runs, modules and sweeps, store the 2-D fields in float32
        and only every ``field_interval_s`` (on their own coordinate ``field_time``, with the
        first and last times and the time of the peak); the scalar traces keep every step
        in full precision, so the key figures and verdicts read back unchanged. ``False``
        writes every value as it is (compressed only).
    limits : explorer.Limits, optional
        Recorded as ``attrs["limits"]`` so a report rebuilt from the file holds the run
        against them (see :func:`limits_from`).
    field_interval_s : float, optional
        Time between stored fields; default about 1/60 of the run, on a 1-2-5 ladder.
    """
    from explorer.fileio import atomic_write

    out = ds.copy()
    out.attrs = {k: _attr(portable(v)) for k, v in ds.attrs.items()}
    if limits is not None:
        out.attrs["limits"] = json.dumps(limits.as_dict())
    kind = results_file_kind(ds)
    if "kind" not in out.attrs and kind in _KIND_ATTR:
        out.attrs["kind"] = _KIND_ATTR[kind](ds)
    lossy = light and kind in ("run", "sweep", "sizing curve")
    if lossy:
        out = _lighten(out, field_interval_s)
    encoding = {name: {"zlib": True, "complevel": 4, "shuffle": True}
                for name, v in out.variables.items() if v.dtype.kind in "fiu"}
    return atomic_write(path, lambda tmp: out.to_netcdf(tmp, engine="netcdf4",
                                                         encoding=encoding), parents=True)


def _attr(v):
    """netCDF attributes hold numbers, strings and arrays: booleans become 0/1, the rest JSON."""
    if isinstance(v, bool | np.bool_):
        return int(v)
    if isinstance(v, str | int | float | np.number):
        return v
    return json.dumps(v, default=str)


# results_file_kind -> the ``kind`` attribute a written file carries (contract G)
_KIND_ATTR = {
    "run": lambda ds: "module" if "cell" in ds.dims else "run",
    "sweep": lambda ds: "sweep",
    "sizing curve": lambda ds: "sizing_curve",
}

#: A run with at most this many steps keeps every field (unless an interval is asked for).
FIELD_FRAMES = 60
#: Variables stored as fields (every point of the face): decimated in time in a light file.
FIELD_DIMS = ("time", "y", "x")


def field_names(ds) -> list[str]:
    """The variables that hold a field over the face at each time (dims include time, y, x)."""
    return [n for n, v in ds.data_vars.items() if set(FIELD_DIMS) <= set(v.dims)]


def _lighten(ds: xr.Dataset, field_interval_s: float | None) -> xr.Dataset:
    """Fields in float32 on their own, coarser time base ``field_time``; traces untouched."""
    names = field_names(ds)
    if not names or ds.sizes.get("time", 0) == 0:
        return ds
    t = np.asarray(ds["time"].values, dtype=float)
    interval = field_interval(t, field_interval_s)
    keep = field_indices(t, interval, _peak_index(ds))
    if field_interval_s is None and t.size <= FIELD_FRAMES:  # few steps: keep every one
        keep = np.arange(t.size)
    out = ds.drop_vars(names)
    if keep.size == t.size:  # nothing dropped: the fields stay on `time`, in float32
        for name in names:
            out[name] = ds[name].astype(np.float32) if ds[name].dtype.kind == "f" else ds[name]
        return out
    for name in names:
        v = ds[name].isel(time=keep).rename(time="field_time")
        out[name] = v.astype(np.float32) if v.dtype.kind == "f" else v
    out = out.assign_coords(field_time=("field_time", t[keep], {
        "units": "s", "long_name": "times at which the fields are stored (every "
        "field_interval_s, plus the first and last times and the time of the peak)"}))
    out.attrs["field_interval_s"] = float(interval)
    out.attrs["field_storage"] = (
        f"fields ({', '.join(names)}) stored in float32 every {interval:g} s ({len(keep)} of "
        f"{t.size} times, on the coordinate field_time); the scalar traces keep every step")
    return out


_LADDER = (1, 2, 5)


def field_interval(t: np.ndarray, interval: float | None = None, frames: int = 60) -> float:
    """The time between stored fields: ``interval`` when given (> 0), else the smallest value
    of the 1-2-5 ladder (s) that gives at most about ``frames`` fields over the run."""
    if interval is not None:
        value = float(interval)
        if not (math.isfinite(value) and value > 0):
            raise InputError(f"save: `field_interval_s` must be a number > 0 s, got {interval!r}")
        return value
    duration = float(t[-1] - t[0]) if t.size > 1 else 0.0
    target = duration / max(frames - 1, 1)
    if target <= 0:
        return 1.0
    decade = 10.0 ** math.floor(math.log10(target))
    for step in (*_LADDER, 10):
        if step * decade >= target * (1 - 1e-9):
            return step * decade
    return 10 * decade  # pragma: no cover - the loop always returns


def field_indices(t: np.ndarray, interval: float, extra=()) -> np.ndarray:
    """Indices of ``t`` nearest to every multiple of ``interval``, plus the first, the last and
    ``extra`` (e.g. the time of the peak)."""
    if t.size == 0:
        return np.zeros(0, int)
    marks = np.arange(t[0], t[-1] + interval, interval)
    idx = np.clip(np.searchsorted(t, marks), 0, t.size - 1)
    before = np.clip(idx - 1, 0, t.size - 1)
    nearest = np.where(np.abs(t[before] - marks) <= np.abs(t[idx] - marks), before, idx)
    return np.unique(np.concatenate([[0, t.size - 1], nearest, np.asarray(extra, int)]))


def _peak_index(ds) -> list[int]:
    """The time index of the hottest point of the mean field (kept among the stored fields)."""
    if "temperature_max" not in ds or "time" not in ds["temperature_max"].dims:
        return []
    v = ds["temperature_max"]
    values = np.asarray(v.transpose(..., "time").values, dtype=float).reshape(-1, ds.sizes["time"])
    if not np.isfinite(values).any():
        return []
    return [int(np.nanargmax(np.nanmax(values, axis=0)))]


def field_view(ds: xr.Dataset) -> xr.Dataset:
    """``ds`` with its fields on ``time`` again: as it is when the fields have every step,
    else on the stored field times (every variable taken at those times), for the plots."""
    if "field_time" not in ds.dims:
        return ds
    names = [n for n, v in ds.data_vars.items() if "field_time" in v.dims]
    t = np.asarray(ds["time"].values, dtype=float)
    idx = np.clip(np.searchsorted(t, np.asarray(ds["field_time"].values, dtype=float)),
                  0, t.size - 1)
    out = ds.drop_vars([*names, "field_time"]).isel(time=idx)
    for name in names:
        v = ds[name].drop_vars("field_time").rename(field_time="time")
        out[name] = v.astype(float) if v.dtype.kind == "f" else v
    return out


def portable(value):
    """``value`` with every local absolute path reduced to its file name (in JSON too)."""
    if isinstance(value, str):
        if value[:1] in "[{":
            try:
                parsed = json.loads(value)
            except ValueError:
                return value
            cleaned = _portable(parsed)
            return value if cleaned == parsed else json.dumps(cleaned)
        return _portable(value)
    if isinstance(value, dict | list | tuple):
        return _portable(value)
    return value


def _portable(value):
    if isinstance(value, str):
        looks_absolute = (value.startswith("/") or value.startswith("~")
                          or (len(value) > 2 and value[1] == ":" and value[2] in "\\/"))
        if looks_absolute and "\n" not in value and len(value) < 4096:
            return value.replace("\\", "/").rstrip("/").rsplit("/", 1)[-1]
        return value
    if isinstance(value, dict):
        return {k: _portable(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_portable(v) for v in value]
    return value


def limits_from(ds):
    """The :class:`~explorer.Limits` a results file was held against, or None.

    Read from ``attrs["limits"]`` (JSON, contract G; written by :func:`save` with
    ``limits=``, by the scenario commands and by sweeps) or, for a sizing curve, from its
    ``limit_<name>`` attributes.
    """
    from explorer.limits import Limits

    raw = ds.attrs.get("limits")
    values: dict = {}
    if isinstance(raw, str) and raw.strip():
        try:
            values = json.loads(raw)
        except ValueError:
            values = {}
    elif isinstance(raw, dict):
        values = dict(raw)
    if not values:
        names = Limits.__dataclass_fields__
        values = {k[len("limit_"):]: v for k, v in ds.attrs.items()
                  if k.startswith("limit_") and k[len("limit_"):] in names}
    values = {k: float(v) for k, v in (values or {}).items()
              if isinstance(v, int | float | np.number) and not isinstance(v, bool)}
    if not values:
        return None
    try:
        return Limits(**values)
    except (InputError, TypeError):
        return None


# Words that mark a data note as one a reviewer must see (invented, template or assumed data).
NOTE_WORDS = ("invented", "template", "assumed", "fictional", "placeholder", "example")


def data_attrs(cell, steps=()) -> dict:
    """What a results file says about where its data come from (contract G).

    ``data_note`` (the cell file's own), ``data_notes`` (JSON list: every invented, template
    or assumed input: the cell, a load profile marked invented in its header),
    ``cell_file`` (the file name only) and ``cell_file_sha256``; ``cell_warnings`` (JSON list)
    when the cell carries warnings (e.g. an inconsistent geometry); ``cell_tables`` (JSON:
    field -> {"file": name only, "sha256"}) when the cell file names measured curve tables;
    ``face_geometry`` (JSON, m: :func:`face_geometry_attr`) so field maps draw its tabs.
    """
    extra = getattr(cell, "extra", {}) or {}
    note = str(extra.get("data_note", "") or "")
    name = Path(str(getattr(cell, "source_path", "") or "")).name
    notes = []
    if _marked(note):
        notes.append(f"cell {cell.name} ({name or 'built in Python'}): {note}")
    notes += _provenance_notes(cell, extra)
    for step in steps if isinstance(steps, list | tuple) else [steps]:  # a duty: one or a list
        step = getattr(step, "step", step)
        source = str(getattr(step, "source", "") or "")
        header = _file_header(source) if source else ""
        if _marked(header):
            notes.append(f"load profile {Path(source).name}: {header}")
    out = {"data_note": note, "data_notes": json.dumps(notes),
           "cell_file": name, "cell_file_sha256": str(getattr(cell, "sha256", "") or "")}
    warnings = extra.get("warnings")
    if warnings:
        out["cell_warnings"] = json.dumps([str(w) for w in warnings])
    tables = extra.get("tables")
    if isinstance(tables, dict) and tables:  # measured curves: which file, which content
        out["cell_tables"] = json.dumps({
            str(key): {"file": Path(str(t.get("file") or t.get("path") or "")).name,
                       "sha256": str(t.get("sha256", ""))}
            for key, t in tables.items() if isinstance(t, dict)})
    face = face_geometry_attr(cell)
    if face is not None:
        out[FACE_GEOMETRY] = face
    return out


# ---------------------------------------------------------------------------------------------
# the face geometry a results file carries, so its field maps draw the cell's own tabs

#: The attribute holding the face geometry (JSON; lengths in m).
FACE_GEOMETRY = "face_geometry"
_EDGES = ("bottom", "top", "left", "right")  # as explorer.cell.model.EDGES (no cell import here)


@dataclass(frozen=True)
class FaceTab:
    """A tab as the field maps draw it (lengths in m; ``position_m``: centre along its edge)."""

    name: str
    edge: str
    position_m: float
    width_m: float
    free_length_m: float
    polarity: str
    material: str = ""


@dataclass(frozen=True)
class FaceGeometry:
    """The coated face (m) and its tabs, read from a results file (:func:`face_geometry`);
    offers what :func:`explorer.plots.face_outline` reads of a cell's ``geometry``."""

    width_m: float
    height_m: float
    tabs: tuple[FaceTab, ...] = ()


def face_geometry_attr(cell) -> str | None:
    """The ``face_geometry`` attribute of ``cell`` (compact JSON, lengths in m rounded to
    0.1 um: a few hundred bytes), or None for an object without a geometry."""
    g = getattr(cell, "geometry", None)
    if g is None:
        return None
    try:
        data = {"width_m": _round_m(g.width_m), "height_m": _round_m(g.height_m),
                "tabs": [{"name": str(t.name), "edge": str(t.edge),
                          "position_m": _round_m(t.position_m), "width_m": _round_m(t.width_m),
                          "free_length_m": _round_m(t.free_length_m),
                          "polarity": str(t.polarity), "material": str(t.material)}
                         for t in g.tabs]}
    except (AttributeError, TypeError, ValueError):  # not a cell geometry: nothing to record
        return None
    return json.dumps(data, separators=(",", ":"))


def _round_m(value) -> float:
    return round(float(value), 7)


def face_geometry(ds) -> FaceGeometry | None:
    """The face geometry recorded in ``ds.attrs["face_geometry"]``, or None when the file has
    none (written before it was recorded). Raises :class:`InputError` naming the field when
    the attribute is there but malformed."""
    raw = ds.attrs.get(FACE_GEOMETRY)
    if raw is None:
        return None
    where = f"results attribute `{FACE_GEOMETRY}`"
    try:
        data = json.loads(raw) if isinstance(raw, str | bytes) else raw
    except ValueError as exc:
        raise InputError(f"{where}: not JSON ({exc})") from None
    if not isinstance(data, dict):
        raise InputError(f"{where}: expected a JSON object, got {type(data).__name__}")
    tabs = data.get("tabs", [])
    if not isinstance(tabs, list):
        raise InputError(f"{where}: `tabs` must be a list, got {type(tabs).__name__}")
    return FaceGeometry(width_m=_length(data, "width_m", where, positive=True),
                        height_m=_length(data, "height_m", where, positive=True),
                        tabs=tuple(_face_tab(t, f"{where}, tab {k}")
                                   for k, t in enumerate(tabs)))


def _face_tab(tab, where: str) -> FaceTab:
    if not isinstance(tab, dict):
        raise InputError(f"{where}: expected a JSON object, got {type(tab).__name__}")
    edge = tab.get("edge")
    if edge not in _EDGES:
        raise InputError(f"{where}: `edge` = {edge!r}; expected one of {', '.join(_EDGES)}")
    return FaceTab(name=str(tab.get("name", "")), edge=edge,
                   position_m=_length(tab, "position_m", where),
                   width_m=_length(tab, "width_m", where, positive=True),
                   free_length_m=_length(tab, "free_length_m", where),
                   polarity=str(tab.get("polarity", "")), material=str(tab.get("material", "")))


def _length(data: dict, key: str, where: str, positive: bool = False) -> float:
    value = data.get(key)
    ok = isinstance(value, int | float) and not isinstance(value, bool) and math.isfinite(value)
    if not ok or value < 0 or (positive and value == 0):
        kind = "a positive" if positive else "a non-negative"
        raise InputError(f"{where}: `{key}` = {value!r}; expected {kind} length in m")
    return float(value)


def _marked(text: str) -> bool:
    low = text.lower()
    return any(word in low for word in NOTE_WORDS)


def _provenance_notes(cell, extra) -> list[str]:
    """A note for a cell whose values come (in part) from a template (built cells carry a
    per-value provenance mapping)."""
    prov = extra.get("provenance")
    if not isinstance(prov, dict):
        return []
    template = sorted(k for k, v in prov.items() if "template" in str(v).lower())
    if not template:
        return []
    shown = ", ".join(template[:6]) + (", ..." if len(template) > 6 else "")
    return [f"cell {cell.name}: {len(template)} value(s) from a chemistry template ({shown})"]


def _file_header(path: str, lines: int = 5) -> str:
    """The comment lines at the top of a text file (where demo data say they are invented)."""
    try:
        with open(path, encoding="utf-8", errors="replace") as fh:
            head = [fh.readline() for _ in range(lines)]
    except OSError:
        return ""
    text = " ".join(h.strip().lstrip("#").strip() for h in head if h.lstrip().startswith("#"))
    return text[:300]


def run_inputs(cell, steps, cooling_description: dict, *, electrochemistry, layout,
               start_soc, start_temperature_C, output_interval_s=None, rod_grid=None,
               mesh=None) -> dict:
    """The inputs of a run as a JSON-able mapping (contract G): numbers keep their unit in the
    key's suffix; files are named by their file name only."""
    g = cell.geometry
    cell_in = {
        "name": cell.name,
        "file": Path(str(cell.source_path or "")).name,
        "sha256": cell.sha256,
        "data_note": (getattr(cell, "extra", {}) or {}).get("data_note", ""),
        "nominal_capacity_Ah": cell.nominal_capacity_Ah,
        "voltage_min_V": cell.voltage_min_V,
        "voltage_max_V": cell.voltage_max_V,
        "temperature_max_C": cell.temperature_max_C,
        "width_mm": g.width_m * 1e3,
        "height_mm": g.height_m * 1e3,
        "thickness_mm": g.stack_thickness_m * 1e3,
    }
    duty = [portable(getattr(s, "step", s).describe()) for s in steps]
    model = {"electrochemistry": electrochemistry, "layout": layout,
             "output_interval_s": output_interval_s or "auto"}
    if rod_grid is not None:
        model["rods"] = list(rod_grid)
    if mesh:
        model["rod_mesh"] = dict(mesh)
    return {"cell": cell_in, "duty": duty, "cooling": portable(cooling_description),
            "model": model, "start": {"soc": start_soc, "temperature_C": start_temperature_C}}


def open_any(path) -> tuple[xr.Dataset, str]:
    """Load any of the tool's netCDF files: ``(ds, kind)`` with kind from
    :func:`results_file_kind` ("run", "sweep", "sizing curve", "sweep cache entry" or
    "foreign"). Raises :class:`~explorer.validators.InputError` for a missing or unreadable
    file."""
    path = Path(path)
    try:
        found = path.is_file()
    except (OSError, ValueError):  # a name the OS refuses (too long, NUL byte)
        found = False
    if not found:
        raise InputError(f"{path}: no such results file")
    try:
        with xr.open_dataset(path, engine="netcdf4") as ds:
            ds = ds.load()
    except Exception as exc:  # a file netCDF cannot decode is not ours, whatever the decoder
        # raised (OSError, ValueError, KeyError, ... depending on the damage)
        text = " ".join(str(exc).split())[:200]
        raise InputError(f"{path}: not a results file this tool can read "
                         f"({type(exc).__name__}: {text})") from None
    return ds, results_file_kind(ds)


class ResultsKindError(InputError):
    """A readable netCDF file that is not a single-run results file; ``kind`` says what it is."""

    def __init__(self, path, kind: str):
        self.path, self.kind = str(path), kind
        super().__init__(f"{path} is {kind}; expected a single-run results file (written by "
                         "`python -m explorer run` or `demo`, or explorer.results.save)")


# What the tool's other netCDF files are, in words for an error message.
_OTHER_KINDS = {
    "sweep": "a sweep results file (written by `python -m explorer sweep`)",
    "sweep cache entry": "a sweep cache entry (one case of a sweep, kept to resume it)",
    "sizing curve": "a sizing-curve file (written by `python -m explorer size`)",
    "foreign": "a netCDF file this tool did not write (it lacks the `time` coordinate and the "
               "`voltage` and `temperature_max` variables of a run)",
}


def results_file_kind(ds: xr.Dataset) -> str:
    """Which of the tool's files ``ds`` was read from, told apart by what only each carries:
    "run" (one cell or a module), "sweep", "sweep cache entry", "sizing curve" or "foreign"."""
    if "case_status" in ds and "axes" in ds.attrs:
        return "sweep"
    if "case_status" in ds.attrs or "cache_key" in ds.attrs:
        return "sweep cache entry"
    if "value" in ds.dims and "feasible" in ds and "time" not in ds.dims:
        return "sizing curve"
    if "time" in ds.coords and "voltage" in ds and "temperature_max" in ds:
        return "run"
    return "foreign"


def open_results(path) -> xr.Dataset:
    """Load a saved run (all variables into memory, all attributes kept).

    A light file (see :func:`save`) keeps its fields on the coordinate ``field_time``;
    :func:`field_view` puts them back on ``time`` for the plots.

    Raises :class:`~explorer.validators.InputError` for a missing or unreadable
    file, and :class:`ResultsKindError` (naming what the file is) for a sweep,
    a sizing curve, a sweep cache entry or a netCDF file the tool did not write.
    """
    ds, kind = open_any(path)
    if kind != "run":
        raise ResultsKindError(path, _OTHER_KINDS[kind])
    return ds
