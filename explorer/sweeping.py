"""Design sweeps: the cartesian product of design parameters, run on Dask.

:func:`sweep` runs :func:`explorer.simulate` for every combination of the
values in ``axes`` (:func:`explorer.simulate_module` where the design's
coolant runs along several cells) and gathers one summary per case into a
Dataset with one dimension per axis.

Execution
    By default a local Dask cluster on the loopback interface (two worker
    processes, one thread each, no dashboard) runs the cases. It starts in
    the background while the first cases run in this process, so the first
    results come at once; it is kept for the next sweep of this process and
    closed at exit (or by :func:`close_local_cluster`; a sweep stopped by
    Ctrl-C closes it too). A sweep of one case runs here. Workers import the
    package and load the coolants' property tables (:func:`warm_worker`)
    before the first case. A scheduler address (``"tcp://host:8786"``,
    several machines: same code) or a ``distributed.Client`` uses a running
    cluster; ``scheduler="serial"`` runs in this process.
    Worker processes start by running the main script again, so a plain
    script that calls :func:`sweep` outside ``if __name__ == "__main__":``
    cannot have them: the default then runs the cases in this process and
    logs a warning saying how to get the workers. (A Dask cluster of threads
    instead is no faster than this process: the cases hold the GIL.)
Cache
    With ``cache_dir`` every case that ran to a result ("completed", or
    "cut_short" with that status kept) is written there at once through
    :func:`explorer.fileio.atomic_write`, netCDF named by a SHA-256 key of the
    cell file's hash, the duty, ``cooling.describe()`` of the case's design,
    the model settings and the tool version; the key is stored inside the
    entry too, and a SHA-256 checksum beside it (the entry takes its name
    only once the checksum is written). An entry that cannot be read, holds another key or another
    status is treated as missing: the case runs again and the entry is
    overwritten. A sweep that was interrupted resumes from the cache: only the
    missing cases run. Failed and stopped cases are never cached. Temporary
    files of a sweep killed mid-write are removed on the next start.
Failures and Ctrl-C
    A case that raises is recorded (``case_status`` "failed" and
    ``case_message`` with the reason) and the sweep goes on; a case lost with
    its Dask worker is retried by Dask, then recorded "failed". Ctrl-C stops
    the sweep: it returns what it has, the case that was running and those
    not yet run marked "stopped" (attribute ``status`` "stopped").
Traces
    Time traces (voltage, current, temperatures, heat, SOC) are linearly
    resampled onto one uniform time base from 0 to the longest case's end,
    spaced by ``trace_interval_s`` (default: the runs' output interval), and
    padded with NaN after each case's own end. Fields (``temperature``,
    ``soc``, ``heat_flux`` over y, x) are kept only with ``keep_fields=True``.
"""

from __future__ import annotations

import ast
import atexit
import contextlib
import dataclasses
import hashlib
import itertools
import json
import logging
import math
import os
import sys
import threading
import time
from pathlib import Path

import numpy as np
import xarray as xr

from explorer.limits import UNITS as LIMIT_UNITS
from explorer.limits import Limits
from explorer.sizing import parameter_unit, run_hydraulics
from explorer.validators import InputError, OutputError

log = logging.getLogger(__name__)

# Model settings that may also be swept (numbers passed straight to simulate).
SETTING_AXES = ("start_soc", "start_temperature_C")
# Time traces kept per case; a module case (several cells on one coolant path) gives one
# trace of the module: its hottest cell's maximum, coldest cell's minimum, the mean over the
# cells, the heat summed over them, the coolant leaving the last cell (ENVELOPE).
TRACES = {
    "voltage": ("V", "terminal voltage"),
    "current": ("A", "cell current (positive on discharge)"),
    "power": ("W", "terminal power (positive on discharge)"),
    "soc_mean": ("1", "state of charge (a module: mean over its cells)"),
    "temperature_hottest": ("degC", "hottest point anywhere in the cell, core and faces included "
                                    "(a module: its hottest cell)"),
    "temperature_coldest": ("degC", "coldest point anywhere in the cell (a module: its coldest "
                                    "cell)"),
    "temperature_max": ("degC", "hottest point of the through-thickness-mean field over the "
                                "face (a module: its hottest cell)"),
    "temperature_min": ("degC", "coldest point of the through-thickness-mean field over the "
                                "face (a module: its coldest cell)"),
    "temperature_mean": ("degC", "area-mean temperature (a module: mean over its cells)"),
    "temperature_core_max": ("degC", "hottest core temperature estimate"),
    "through_thickness_difference": ("K", "largest difference through the thickness"),
    "heat_total": ("W", "total generated heat (a module: all its cells)"),
    "heat_rejected": ("W", "heat into all sinks (a module: all its cells)"),
    "coolant_outlet": ("degC", "coolant temperature leaving the cell (a module: its last cell)"),
}
ENVELOPE = {"temperature_hottest": np.nanmax, "temperature_max": np.nanmax,
            "temperature_core_max": np.nanmax, "through_thickness_difference": np.nanmax,
            "temperature_coldest": np.nanmin, "temperature_min": np.nanmin,
            "temperature_mean": np.nanmean, "soc_mean": np.nanmean, "heat_total": np.nansum,
            "heat_rejected": np.nansum, "coolant_outlet": lambda a, axis: a[-1]}
# Series a limits check reads: a module case keeps them per cell (so the check sees each cell).
CHECK_SERIES = ("temperature_hottest", "temperature_coldest", "temperature_max",
                "temperature_min", "temperature_mean", "temperature_core_max",
                "through_thickness_difference", "coolant_outlet")
FIELDS = ("temperature", "soc", "heat_flux")
SUMMARY = {
    "peak_temperature_C": ("degC", "hottest point anywhere in the cell over the duty, core and "
                                   "faces included (a module: its hottest cell)"),
    "worst_cell": ("1", "position of the cell with that peak along the coolant path (0 = first "
                        "the coolant meets; a single-cell case: the position that was run)"),
    "cell_to_cell_K": ("K", "largest difference between the cells' mean temperatures at one "
                            "time (NaN: one cell was run)"),
    "cells_run": ("1", "cells run in the case: every cell on the coolant path (a module), or 1"),
    "max_spread_K": ("K", "largest in-cell spread, hottest minus coldest point anywhere at one "
                          "time (NaN: not seen on layout 'single')"),
    "core_temperature_max_C": ("degC", "hottest core temperature estimate"),
    "coolant_outlet_max_C": ("degC", "hottest coolant outlet"),
    "end_soc": ("1", "state of charge at the end"),
    "energy_delivered_Wh": ("Wh", "energy delivered (positive on discharge)"),
    "heat_generated_J": ("J", "heat generated"),
    "heat_rejected_J": ("J", "heat rejected into the sinks"),
    "duration_s": ("s", "duration of the run"),
    "end_voltage_V": ("V", "terminal voltage at the end"),
    "time_to_limit_s": ("s", "time to the cell's data-sheet temperature limit (NaN: never)"),
    "pressure_drop_kPa": ("kPa", "plate pressure drop"),
    "pump_power_W": ("W", "pump power"),
}
CACHE_FORMAT = 3  # bump when the cached case layout changes
# Case statuses that are a result of the design and may be cached (contracts A): a cut-short
# run is what that design does; a stopped or failed one says nothing about it.
CACHEABLE = ("completed", "cut_short")
NOT_RUN = "not run: the sweep was stopped before this case"
# The default local cluster: loopback only, two single-threaded worker processes, no
# dashboard; the scheduler's small HTTP server (health, metrics) takes a free port.
LOCAL_CLUSTER = {"n_workers": 2, "threads_per_worker": 1, "processes": True, "host": "127.0.0.1",
                 "dashboard_address": "127.0.0.1:0", "scheduler_kwargs": {"dashboard": False}}


@dataclasses.dataclass
class _Case:
    index: tuple  # position in the axes grid
    values: dict  # axis name -> value
    design: object  # the cooling design of this case (None: adiabatic)
    settings: dict  # simulate keywords of this case
    key: str = ""
    module: bool = False  # run every cell on the coolant path (explorer.simulate_module)


def sweep(cell, duty, cooling, axes: dict, scheduler=None, keep_fields: bool = False,
          cache_dir=None, progress: bool = True, *, limits: Limits | None = None,
          trace_interval_s: float | None = None, **simulate_kwargs) -> xr.Dataset:
    """Run every combination of ``axes`` and return one Dataset with a dimension per axis.

    Parameters
    ----------
    cell : Cell
        From :func:`explorer.load_cell`.
    duty : Step or list of Step
        From :mod:`explorer.duty`.
    cooling : cooling design or None
        From :mod:`explorer.cooling`; the swept design parameters are changed
        with ``cooling.replace(name=value)``.
    axes : dict
        Axis name -> list of values. A name is one of ``cooling.parameters()``
        or a model setting in ``SETTING_AXES`` (``start_soc``,
        ``start_temperature_C``).
    scheduler : None, "serial", str or distributed.Client
        None uses this process's local cluster on loopback (started on first
        use, the first cases running here meanwhile; kept until exit);
        "serial" runs in this process; a string is the address of a running
        Dask scheduler.
    keep_fields : bool
        Also keep the fields over (y, x) on the common time base.
    cache_dir : path, optional
        Folder for the per-case cache (created when missing). Only cases that
        ran to a result are cached; a damaged or foreign entry is recomputed.
    progress : bool
        Show a progress bar (tqdm).
    limits : Limits, optional
        Adds, per case and limit, ``margin_<name>`` and ``verdict_<name>`` from
        :meth:`Limits.check` (a figure the run cannot see is "not evaluated",
        margin NaN, with the reason in ``case_warnings``) and ``meets_limits``
        (1 only when every limit was evaluated and met on a case that completed
        its duty).
    trace_interval_s : float, optional
        Spacing of the common time base of the traces.
    **simulate_kwargs
        Passed to :func:`explorer.simulate` for every case. A case whose
        design runs its coolant along more than one cell
        (``cooling.positions_to_check()`` has more than one entry) runs the
        whole module with :func:`explorer.simulate_module` instead and is
        judged by its worst cell and its cell-to-cell difference (DESIGN.md
        §3); ``position=k`` here runs only cell ``k`` instead.

    Returns
    -------
    xarray.Dataset
        Summary figures (``peak_temperature_C``, ``max_spread_K``, ``end_soc``,
        ``energy_delivered_Wh``, ``heat_rejected_J``, ``pressure_drop_kPa``,
        ``pump_power_W``, ...), ``case_status`` and ``case_message`` over the
        axes; traces over the axes and ``time``; fields when asked for.
        ``attrs["status"]`` is "stopped" after Ctrl-C, else "completed";
        ``attrs["cases_failed"]`` counts the cases without a full result
        (failed or stopped).
    """
    if limits is not None and not isinstance(limits, Limits):
        raise InputError(f"sweep: `limits` must be an explorer.Limits, got {type(limits).__name__}")
    if trace_interval_s is not None and not (isinstance(trace_interval_s, (int, float))
                                             and trace_interval_s > 0):
        raise InputError(f"sweep: `trace_interval_s` must be a number > 0, got "
                         f"{trace_interval_s!r}")
    axes = _check_axes(axes, cooling, simulate_kwargs)
    cases = _cases(cell, duty, cooling, axes, simulate_kwargs, keep_fields)
    cache = _open_cache(cache_dir)

    results: dict[tuple, xr.Dataset] = {}
    for case in cases:
        hit = _read_cache(cache, case.key)
        if hit is not None:
            results[case.index] = hit
    todo = [c for c in cases if c.index not in results]
    log.info("sweep: %d cases, %d from the cache, %d to run", len(cases), len(results), len(todo))

    from tqdm.auto import tqdm

    bar = tqdm(total=len(cases), initial=len(results), disable=not progress, desc="sweep",
               unit="case")

    def done(case, result):
        results[case.index] = result
        if cache is not None and result.attrs.get("case_status") in CACHEABLE:
            try:
                _write_cache(cache, case.key, result)
            except OutputError as exc:  # the result is here; only the resume loses it
                log.warning("sweep: case %s not cached (%s); the sweep goes on", case.values,
                            exc)
        bar.update(1)

    if todo and scheduler is None and _main_reruns_sweep():
        log.warning(
            "sweep: this script calls sweep() outside an `if __name__ == \"__main__\":` block; "
            "Dask worker processes run the script again on start, so they cannot be used: the "
            "%d cases run one after another in this process. Put the call under `if __name__ "
            "== \"__main__\":` to run them in parallel, or pass scheduler=\"serial\".", len(todo))
        scheduler = "serial"
    if len(todo) == 1 and scheduler is None:
        scheduler = "serial"  # no cluster to start for one case
    stopped = False
    try:
        if todo:
            _execute(cell, duty, todo, scheduler, keep_fields, done)
    except (KeyboardInterrupt, _Stopped):
        stopped = True
        log.warning("sweep stopped: %d of %d cases have a result; the others are marked "
                    "'stopped'%s", sum(r.attrs.get("case_status") in CACHEABLE
                                       for r in results.values()), len(cases),
                    "; the cached ones are kept for the next run" if cache is not None else "")
    finally:
        bar.close()
    return _assemble(cell, duty, cooling, axes, cases, results, limits, keep_fields,
                     trace_interval_s, simulate_kwargs, scheduler, stopped)


class _Stopped(Exception):
    """A case came back "stopped" (Ctrl-C caught inside the run): the sweep stops too."""


# --------------------------------------------------------------------------- cases and keys


def _check_axes(axes, cooling, simulate_kwargs) -> dict:
    if not isinstance(axes, dict) or not axes:
        raise InputError(f"sweep: `axes` must be a non-empty dict name -> list of values, got "
                         f"{axes!r}")
    params = dict(cooling.parameters()) if cooling is not None else {}
    valid = sorted(params) + list(SETTING_AXES)
    out = {}
    for name, values in axes.items():
        if name not in params and name not in SETTING_AXES:
            raise InputError(f"sweep: axis `{name}` is not a parameter of the cooling design nor "
                             f"a swept setting; expected one of {valid}")
        if name in simulate_kwargs:
            raise InputError(f"sweep: `{name}` is both an axis and a fixed setting; give it once")
        try:
            arr = np.asarray(values, dtype=float).ravel()
        except (TypeError, ValueError):
            raise InputError(f"sweep: axis `{name}` must be a list of numbers, got "
                             f"{values!r}") from None
        if arr.size == 0:
            raise InputError(f"sweep: axis `{name}` has no values")
        if not np.isfinite(arr).all():
            raise InputError(f"sweep: axis `{name}` must hold finite numbers, got {values!r}")
        if np.unique(arr).size != arr.size:
            raise InputError(f"sweep: axis `{name}` repeats a value: {values!r}")
        out[name] = arr
    return out


def _cases(cell, duty, cooling, axes, simulate_kwargs, keep_fields) -> list[_Case]:
    names = list(axes)
    base = {"cell": _cell_key(cell), "duty": _duty_key(duty), "fields": bool(keep_fields),
            "format": CACHE_FORMAT}
    from explorer import __version__

    base["version"] = __version__
    cases = []
    for index in itertools.product(*(range(len(axes[n])) for n in names)):
        values = {n: float(axes[n][i]) for n, i in zip(names, index)}
        design_values = {n: v for n, v in values.items() if n not in SETTING_AXES}
        settings = dict(simulate_kwargs)
        settings.update({n: v for n, v in values.items() if n in SETTING_AXES})
        design = cooling
        if design_values:
            try:
                design = cooling.replace(**design_values)
            except (ValueError, TypeError) as exc:
                raise InputError(f"sweep: the case {design_values} is not a valid design: "
                                 f"{exc}") from None
        module = _runs_module(design, settings)
        key_data = {**base, "cooling": design.describe() if design is not None else None,
                    "settings": settings, "module": module}
        key = hashlib.sha256(json.dumps(key_data, sort_keys=True, default=str).encode())
        cases.append(_Case(index, values, design, settings, key.hexdigest(), module))
    return cases


def _runs_module(design, settings: dict) -> bool:
    """Whether a case runs the whole module: its design has a coolant path along more than
    one cell (DESIGN.md §3 rule 3), and no single `position` (or `rods`, which only
    explorer.simulate takes) was asked for."""
    if design is None or "position" in settings or "rods" in settings:
        return False
    positions = getattr(design, "positions_to_check", None)
    return positions is not None and len(list(positions())) > 1


def _cell_key(cell) -> str:
    sha = getattr(cell, "sha256", "")
    if sha:
        return sha
    # A cell built in code has no file: hash its full definition instead.
    return hashlib.sha256(repr(dataclasses.asdict(cell)).encode()).hexdigest()


def _duty_key(duty) -> list:
    from explorer.duty import as_steps

    out = []
    for step in as_steps(duty):
        d = step.describe()
        if step.profile_time_s:
            samples = np.asarray([step.profile_time_s, step.profile_value], dtype=float)
            d["profile_sha256"] = hashlib.sha256(samples.tobytes()).hexdigest()
        out.append(d)
    return out


# --------------------------------------------------------------------------- running a case


def _simulate(cell, duty, module: bool = False, **kwargs):
    if module:
        from explorer.module import simulate_module

        return simulate_module(cell, duty, **kwargs)
    from explorer.simulate import simulate

    return simulate(cell, duty, **kwargs)


def run_case(cell, duty, design, settings: dict, keep_fields: bool = False,
             module: bool = False) -> xr.Dataset:
    """Run one case and reduce it to what a sweep keeps (never raises on a failed run).

    ``module``: run every cell on the design's coolant path
    (:func:`explorer.simulate_module`) instead of one cell.

    Returns a small Dataset: the traces over ``time``, the summary figures as
    0-d variables, the fields when ``keep_fields``, and ``case_status`` /
    ``case_message`` in its attributes.
    """
    wall, cpu = time.perf_counter(), time.process_time()
    try:
        ds = _simulate(cell, duty, cooling=design, **settings, **({"module": True} if module
                                                                  else {}))
        out = reduce_run(ds, keep_fields)
    except Exception as exc:  # one bad case must not stop the sweep
        log.warning("sweep case %s failed: %s", settings, exc)
        return _failed(f"{type(exc).__name__}: {exc}")
    out.attrs.update(case_wall_s=time.perf_counter() - wall, case_cpu_s=time.process_time() - cpu)
    return out


def reduce_run(ds: xr.Dataset, keep_fields: bool = False) -> xr.Dataset:
    """The traces, summary figures and (optionally) fields of one run."""
    from explorer.results import is_module, key_figures, per_cell

    fig = key_figures(ds)
    hyd = run_hydraulics(ds) or {}
    module = is_module(ds)
    summary = {
        "peak_temperature_C": fig["peak_temperature_C"],
        "worst_cell": fig["worst_cell"] if module else _number(ds.attrs.get("cell_position")),
        "cell_to_cell_K": fig.get("cell_to_cell_K", math.nan),
        "cells_run": ds.sizes["cell"] if module else 1,
        "max_spread_K": fig["max_spread_K"],
        "core_temperature_max_C": _nanmax(ds, "temperature_core_max"),
        "coolant_outlet_max_C": _nanmax(ds, "coolant_outlet"),
        "end_soc": fig["end_soc"],
        "energy_delivered_Wh": fig["energy_delivered_Wh"],
        "heat_generated_J": fig["heat_generated_J"],
        "heat_rejected_J": fig["heat_rejected_J"],
        "duration_s": fig["duration_s"],
        "end_voltage_V": fig["end_voltage_V"],
        "time_to_limit_s": math.nan if fig["time_to_limit_s"] is None else fig["time_to_limit_s"],
        "pressure_drop_kPa": (hyd["pressure_drop_Pa"] / 1e3
                              if hyd.get("pressure_drop_Pa") is not None else math.nan),
        "pump_power_W": (float(hyd["pump_power_W"])
                         if hyd.get("pump_power_W") is not None else math.nan),
    }
    data = {name: ((), float(v)) for name, v in summary.items()}
    coords = {"time": ds["time"].values}
    for name in TRACES:
        if name not in ds:
            continue
        if module and "cell" in ds[name].dims:
            rows = per_cell(ds, name)
            data[name] = (("cell", "time"), rows) if name in CHECK_SERIES else \
                ("time", ENVELOPE[name](rows, axis=0))
        else:
            data[name] = ("time", np.asarray(ds[name].values, dtype=float))
    if module:
        coords["cell"] = ds["cell"].values
    if keep_fields:
        for name in FIELDS:
            if name in ds:
                field = ds[name]
                if "cell" in field.dims:  # a module: the field of its hottest cell
                    field = field.sel(cell=fig["worst_cell"])
                data[name] = (("time", "y", "x"), np.asarray(field.values, dtype=float))
        coords.update(x=ds["x"].values, y=ds["y"].values)
    status = str(ds.attrs.get("status", "completed"))
    message = str(ds.attrs.get("status_message", ""))
    attrs = {"case_status": status, "case_message": message,
             # what a limits check of this case reads (explorer.limits)
             "status": status, "status_message": message,
             "layout": str(ds.attrs.get("layout", "")),
             "hydraulics": json.dumps(hyd, default=str),
             # a number, or "auto" when simulate chose the spacing per duty step
             "output_interval_s": _number(ds.attrs.get("output_interval_s")),
             "hydraulics_warnings": json.dumps(list(hyd.get("warnings", []) or []))}
    if not attrs["layout"]:
        del attrs["layout"]  # unknown: explorer.results.is_lumped looks at the grid instead
    return xr.Dataset(data, coords=coords, attrs=attrs)


def _failed(message: str, status: str = "failed") -> xr.Dataset:
    return xr.Dataset(attrs={"case_status": status, "case_message": message})


def _number(value) -> float:
    """``value`` as a float; NaN for anything that is not a finite number (e.g. "auto")."""
    try:
        out = float(value)
    except (TypeError, ValueError):
        return math.nan
    return out if math.isfinite(out) else math.nan


def _nanmax(ds, name) -> float:
    if name not in ds:
        return math.nan
    v = np.asarray(ds[name].values, dtype=float)
    return float(np.nanmax(v)) if np.isfinite(v).any() else math.nan


# --------------------------------------------------------------------------- cache


def write_netcdf(ds: xr.Dataset, path) -> Path:
    """Write ``ds`` to netCDF atomically (via :func:`explorer.results.save`)."""
    from explorer.results import save

    return save(ds, path)


def _open_cache(cache_dir) -> Path | None:
    """The cache folder, created when missing, cleared of a killed sweep's temporary files."""
    if cache_dir is None:
        return None
    from explorer.fileio import remove_stale_temp

    cache = Path(cache_dir)
    try:
        cache.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(f"sweep: cannot create the cache folder {str(cache)!r} "
                          f"({exc.strerror or exc})") from None
    if not cache.is_dir():
        raise OutputError(f"sweep: `cache_dir` {str(cache)!r} is not a folder")
    remove_stale_temp(cache)
    return cache


def _read_cache(cache: Path | None, key: str) -> xr.Dataset | None:
    """The cached result of the case ``key``, or None when there is no sound entry for it."""
    if cache is None:
        return None
    path = cache / f"{key}.nc"
    if not path.is_file():
        return None
    # Damaged bytes inside a netCDF file can make the HDF5 open spin for ever: check the
    # entry's checksum (written beside it) before opening it at all.
    if _checksum(path) != _stored_checksum(path):
        log.warning("sweep cache entry %s does not match its checksum; the case runs again and "
                    "the entry is replaced", path)
        return None
    try:
        with _sigint_deferred(), xr.open_dataset(path, engine="netcdf4") as ds:
            entry = ds.load()
        problem = _cache_problem(entry, key)
    except Exception as exc:  # noqa: BLE001 - any unreadable entry is recomputed, not fatal
        problem = f"unreadable ({type(exc).__name__}: {exc})"
    if problem:
        log.warning("sweep cache entry %s %s; the case runs again and the entry is replaced",
                    path, problem)
        return None
    return entry


def _cache_problem(entry: xr.Dataset, key: str) -> str:
    """Why ``entry`` is not the sound cached result of case ``key`` ('' when it is)."""
    if entry.attrs.get("cache_key") != key:
        return "holds another case (its stored key differs)"
    if entry.attrs.get("case_status") not in CACHEABLE:
        return f"has status {entry.attrs.get('case_status')!r}"
    missing = [n for n in SUMMARY if n not in entry]
    if missing or "time" not in entry.coords or entry.sizes["time"] == 0:
        return f"is incomplete (missing {missing or ['time']})"
    return ""


def _write_cache(cache: Path, key: str, result: xr.Dataset) -> None:
    import dask

    entry = result.copy()
    entry.attrs.update(cache_key=key, cache_format=CACHE_FORMAT)
    # With a Dask client active, xarray guards netCDF writes with a lock held on the
    # scheduler: a round trip per entry, and a Ctrl-C caught inside it left later writes
    # waiting forever. The entry is in memory: a local lock is the right one.
    from explorer.fileio import TEMP_SUFFIX, atomic_write_text

    path = cache / f"{key}.nc"
    # Staged under a temporary name (removed as stale if the process dies) and put in place
    # after its checksum: an entry never shows without its checksum, whenever a kill or a
    # Ctrl-C comes.
    staged = cache / f".{path.name}.{os.getpid()}.staged{TEMP_SUFFIX}"
    try:
        with _sigint_deferred(), dask.config.set(scheduler="synchronous"):
            write_netcdf(entry, staged)
        atomic_write_text(_checksum_path(path), _checksum(staged) + "\n")
        os.replace(staged, path)
    except OSError as exc:
        raise OutputError(f"{path}: cannot write the cache entry ({exc.strerror or exc})") \
            from None
    finally:
        with contextlib.suppress(OSError):
            staged.unlink(missing_ok=True)


def _checksum_path(path: Path) -> Path:
    return path.with_name(path.name + ".sha256")


def _checksum(path: Path) -> str:
    """SHA-256 of a cache entry's bytes ('' when it cannot be read)."""
    import hashlib

    try:
        return hashlib.sha256(path.read_bytes()).hexdigest()
    except OSError:
        return ""


def _stored_checksum(path: Path) -> str | None:
    try:
        return _checksum_path(path).read_text(encoding="ascii").strip()
    except (OSError, UnicodeDecodeError):
        return None


# --------------------------------------------------------------------------- execution


def _execute(cell, duty, todo, scheduler, keep_fields, done) -> None:
    if isinstance(scheduler, str) and scheduler.lower() in ("serial", "local-serial"):
        _run_here(cell, duty, todo, keep_fields, done)
        return
    with _quiet_cluster_logs(scheduler is None):
        if scheduler is None:
            _execute_local(cell, duty, todo, keep_fields, done)
        else:
            _execute_dask(cell, duty, todo, scheduler, keep_fields, done)


def _run_here(cell, duty, cases, keep_fields, done) -> None:
    for case in cases:
        _finish(done, case, run_case(cell, duty, case.design, case.settings, keep_fields,
                                     case.module))


@contextlib.contextmanager
def _quiet_cluster_logs(quiet: bool):
    """Hide the start/stop chatter of a cluster this sweep owns (its warnings still show)."""
    if not quiet or log.isEnabledFor(logging.INFO):
        yield
        return
    # distributed gives its sub-loggers their own levels: quiet each of them.
    import distributed  # noqa: F401  (creates its loggers)

    names = ["distributed"] + [n for n in logging.root.manager.loggerDict
                               if n.startswith("distributed.")]
    saved = {n: logging.getLogger(n).level for n in names}
    for n in names:
        logging.getLogger(n).setLevel(logging.WARNING)
    try:
        yield
    finally:
        for n, level in saved.items():
            logging.getLogger(n).setLevel(level)


def _execute_local(cell, duty, todo, keep_fields, done) -> None:
    """The default: this process's local cluster, kept for later sweeps.

    While the cluster starts (a few seconds: worker processes import Dask and
    the package), the cases run here, one after another; the ones left when
    it is ready go to its workers. A cluster that cannot start leaves every
    case to this process (with a warning).
    """
    local = _local_cluster()
    queue = list(todo)
    try:
        while queue and not local.ready.is_set():
            case = queue.pop(0)
            _finish(done, case, run_case(cell, duty, case.design, case.settings, keep_fields,
                                         case.module))
        if not queue:
            return
        client = local.wait()
    except BaseException:  # Ctrl-C or a stopped case: the cluster goes (once it has started)
        _close_local()
        raise
    if client is None:
        log.warning("sweep: the local Dask cluster did not start (%s); the %d remaining cases "
                    "run in this process", local.error, len(queue))
        _run_here(cell, duty, queue, keep_fields, done)
        return
    try:
        _run_on_client(client, cell, duty, queue, keep_fields, done)
    except BaseException:
        # cancelled cases may still be running on the workers: a fresh cluster next time
        _close_local()
        raise


def _execute_dask(cell, duty, todo, scheduler, keep_fields, done) -> None:
    client, owned = _connect(scheduler)
    try:
        _run_on_client(client, cell, duty, todo, keep_fields, done)
    finally:
        if owned:
            client.close()


def _run_on_client(client, cell, duty, todo, keep_fields, done) -> None:
    from distributed import as_completed

    _warm_workers(client, _coolants(todo))
    futures = {}
    try:
        cell_f = client.scatter(cell, broadcast=True)  # ship the cell once, not per case
        for case in todo:
            fut = client.submit(run_case, cell_f, duty, case.design, case.settings, keep_fields,
                                case.module, pure=False)
            futures[fut] = case
        for fut in as_completed(futures):
            case = futures[fut]
            try:
                result = fut.result()
            except Exception as exc:  # e.g. a worker died too often: record it, keep going
                result = _failed(f"{type(exc).__name__}: {exc}")
            _finish(done, case, result)
    finally:
        for fut in futures:
            if not fut.done():  # finished ones are released with their references
                fut.cancel()


def _finish(done, case, result) -> None:
    """Hand a case's result on; a case stopped by Ctrl-C inside its run stops the sweep."""
    done(case, result)
    if result.attrs.get("case_status") == "stopped":
        raise _Stopped(result.attrs.get("case_message", ""))


@contextlib.contextmanager
def _sigint_deferred():
    """Hold a Ctrl-C back until the block ends, then raise it (main thread only).

    xarray's netCDF reads and writes take the process-wide HDF5 lock; a KeyboardInterrupt
    raised between its acquire and the code that releases it leaves the lock held, and the
    next read or write (the sweep's own stop path, the caller's save) waits for ever. A cache
    entry takes milliseconds: the interrupt comes right after it.
    """
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread():
        yield
        return
    caught = []
    old = signal.signal(signal.SIGINT, lambda signum, frame: caught.append(signum))
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, old)
        if caught and old is not signal.SIG_IGN:
            if callable(old):
                old(signal.SIGINT, None)  # Python's default handler raises KeyboardInterrupt
            else:
                raise KeyboardInterrupt


@contextlib.contextmanager
def _sigint_ignored():
    """Start worker processes that ignore Ctrl-C (SIGINT ignored at their start stays ignored).

    Ctrl-C in a terminal reaches every process of the foreground group: workers hit
    mid-task leave the cluster unable to close, and the sweep hangs. With the workers deaf
    to it, only this process stops: it cancels the cases and closes the cluster. A Ctrl-C
    during the cluster's start-up (a second or two) is ignored too.
    """
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread():
        yield  # only the main thread may set handlers (and only it receives SIGINT)
        return
    old = signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, old)


def _main_reruns_sweep() -> bool:
    """Whether Dask worker processes started now would run this sweep call again.

    A worker process starts by running the main script again (as
    ``__mp_main__``; Python's "spawn" start). A plain script that calls
    :func:`sweep` outside ``if __name__ == "__main__":`` then starts a cluster
    inside each worker, and the workers fail to start. Notebooks, the REPL,
    ``python -c`` and ``python -m package`` (a ``__main__`` module) are not
    run again.
    """
    main = sys.modules.get("__main__")
    path = getattr(main, "__file__", None)
    if main is None or not path:
        return False
    spec = getattr(main, "__spec__", None)
    if spec is not None and (spec.name == "__main__" or spec.name.endswith(".__main__")):
        return False
    frame = sys._getframe(1)
    while frame is not None and not (frame.f_globals is vars(main)
                                     and frame.f_code.co_name == "<module>"):
        frame = frame.f_back
    if frame is None:  # not reached from the script's top-level code (e.g. another thread)
        return False
    try:
        tree = ast.parse(Path(frame.f_code.co_filename).read_text(encoding="utf-8"))
    except (OSError, SyntaxError, ValueError, UnicodeDecodeError):
        return True  # cannot tell: the cases run here, which always works
    return not _under_main_guard(tree, frame.f_lineno)


def _under_main_guard(tree: ast.AST, line: int) -> bool:
    """Whether ``line`` lies in the body of an ``if __name__ == "__main__":`` block."""
    for node in ast.walk(tree):
        if isinstance(node, ast.If) and _is_main_test(node.test) and node.body:
            if node.body[0].lineno <= line <= (node.body[-1].end_lineno or line):
                return True
    return False


def _is_main_test(test: ast.AST) -> bool:
    if not (isinstance(test, ast.Compare) and len(test.ops) == 1
            and isinstance(test.ops[0], ast.Eq)):
        return False
    sides = [test.left, test.comparators[0]]
    names = [s.id for s in sides if isinstance(s, ast.Name)]
    consts = [s.value for s in sides if isinstance(s, ast.Constant)]
    return names == ["__name__"] and consts == ["__main__"]


def _connect(scheduler):
    """(client, whether the client is ours to close) for a scheduler address or a Client."""
    try:
        from distributed import Client
    except ImportError:  # pragma: no cover - dask[distributed] is a dependency
        raise InputError("sweep: Dask distributed is needed for parallel sweeps "
                         "(pip install 'dask[distributed]'); or use scheduler='serial'") from None
    if isinstance(scheduler, Client):
        return scheduler, False
    if isinstance(scheduler, str):
        try:
            return Client(scheduler, timeout="10s"), True
        except (OSError, TimeoutError, ValueError) as exc:
            raise InputError(f"sweep: cannot reach the Dask scheduler at {scheduler!r} ({exc}); "
                             "expected the address of a running scheduler such as "
                             "'tcp://127.0.0.1:8786', or 'serial'") from None
    raise InputError(f"sweep: `scheduler` must be None, 'serial', an address string or a "
                     f"distributed.Client, got {scheduler!r}")


# --------------------------------------------------------------------------- workers


def _coolants(cases) -> list[str]:
    """The coolant names of the cases' designs (their property tables are loaded up front)."""
    names = set()

    def walk(d):
        if isinstance(d, dict):
            for k, v in d.items():
                if k == "coolant" and isinstance(v, str):
                    names.add(v)
                else:
                    walk(v)
        elif isinstance(d, (list, tuple)):
            for v in d:
                walk(v)

    for case in cases:
        if case.design is not None:
            walk(case.design.describe())
    return sorted(names)


def warm_worker(coolants=()) -> None:
    """Import what a case runs and load the coolants' property tables (in a Dask worker).

    Run on every worker before the first case, so that no case pays the
    imports (about a second per process) or the first property lookup.
    """
    import numpy as np

    import explorer.module  # noqa: F401
    import explorer.simulate  # noqa: F401
    from explorer.cooling.coolant import warm

    xr.Variable(("x",), np.zeros(1))  # xarray looks up its optional array types once
    for name in coolants:
        try:
            warm([name])
        except InputError:  # the case reports it
            pass


def _warm_workers(client, coolants) -> None:
    try:
        client.run(warm_worker, list(coolants))
    except Exception as exc:  # noqa: BLE001 - a worker that cannot warm up still runs cases
        log.debug("sweep: warming the workers failed (%s); the cases import on first use", exc)


class _LocalCluster:
    """The loopback cluster of this process, started in a background thread.

    The thread blocks SIGINT before it starts the cluster; the threads it
    creates and the worker processes they spawn inherit that mask, so Ctrl-C
    in a terminal (which reaches the whole process group) stops only this
    process's main thread: the workers never see it, and the sweep can
    cancel its cases and close the cluster. (Where threads cannot block
    signals, the cluster starts in the main thread with SIGINT ignored.)
    """

    def __init__(self):
        self.ready = threading.Event()
        self.cluster = self.client = self.error = None
        self._thread = None

    def start(self) -> None:
        import signal

        if hasattr(signal, "pthread_sigmask"):
            # the tracker's launch unblocks SIGINT in the thread that launches it: launch it
            # from here, before the thread blocks the signal
            from multiprocessing import resource_tracker

            resource_tracker.ensure_running()
            self._thread = threading.Thread(target=self._start, args=(True,), daemon=True,
                                            name="explorer-sweep-cluster-start")
            self._thread.start()
        else:  # pragma: no cover - Windows
            with _sigint_ignored():
                self._start(False)

    def _start(self, block_sigint: bool) -> None:
        try:
            if block_sigint:
                import signal

                signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT})
            from distributed import Client, LocalCluster

            self.cluster = LocalCluster(**LOCAL_CLUSTER, silence_logs=logging.WARNING)
            self.client = Client(self.cluster)
            _warm_workers(self.client, ())
        except Exception as exc:  # noqa: BLE001 - reported by the sweep, which goes on here
            self.error = f"{type(exc).__name__}: {exc}"
        finally:
            self.ready.set()

    def wait(self):
        """The client once the cluster is up (None if it failed to start)."""
        self.ready.wait()
        return self.client if self.error is None else None

    def alive(self) -> bool:
        return not self.ready.is_set() or (self.error is None and self.client is not None
                                           and self.client.status == "running")

    def close(self) -> None:
        if self._thread is not None:
            self._thread.join(timeout=START_TIMEOUT_S)
            if self._thread.is_alive():  # a start that hangs: its daemon thread ends with us
                log.warning("sweep: the local Dask cluster did not finish starting within %g s; "
                            "its workers end with this process", START_TIMEOUT_S)
                return
        with _quiet_cluster_logs(True):
            for thing in (self.client, self.cluster):
                if thing is not None:
                    with contextlib.suppress(Exception):
                        thing.close()


START_TIMEOUT_S = 120.0  # longest wait for the local cluster's start when closing it
_LOCAL: _LocalCluster | None = None
_LOCAL_LOCK = threading.Lock()
_AT_EXIT: list = []  # non-empty once close_local_cluster is registered with atexit


def _local_cluster() -> _LocalCluster:
    """This process's local cluster: the running (or starting) one, else a new one."""
    global _LOCAL
    with _LOCAL_LOCK:
        if _LOCAL is not None and _LOCAL.alive():
            return _LOCAL
        old, _LOCAL = _LOCAL, None
    if old is not None:
        old.close()
    local = _LocalCluster()
    local.start()
    with _LOCAL_LOCK:
        _LOCAL = local
    if not _AT_EXIT:
        atexit.register(close_local_cluster)
        _AT_EXIT.append(True)
    return local


def _close_local() -> None:
    global _LOCAL
    with _LOCAL_LOCK:
        local, _LOCAL = _LOCAL, None
    if local is not None:
        local.close()


def close_local_cluster() -> None:
    """Close the local cluster kept by :func:`sweep` (also done at exit); a no-op without one."""
    _close_local()


# --------------------------------------------------------------------------- assembly


def _assemble(cell, duty, cooling, axes, cases, results, limits, keep_fields, trace_interval_s,
              simulate_kwargs, scheduler, stopped=False) -> xr.Dataset:
    names = list(axes)
    shape = tuple(len(axes[n]) for n in names)
    results = {c.index: results.get(c.index, _failed(NOT_RUN, "stopped")) for c in cases}
    # every case with traces, a stopped or cut-short one included (it keeps what it computed)
    ok = [results[c.index] for c in cases
          if "time" in results[c.index].dims and results[c.index].sizes["time"] > 0]
    data = {}
    for name, (unit, long) in SUMMARY.items():
        arr = np.full(shape, np.nan)
        for c in cases:
            r = results[c.index]
            if name in r:
                arr[c.index] = float(r[name].values)
        data[name] = (names, arr, {"units": unit, "long_name": long})
    status = np.empty(shape, dtype=object)
    message = np.empty(shape, dtype=object)
    for c in cases:
        status[c.index] = str(results[c.index].attrs["case_status"])
        message[c.index] = str(results[c.index].attrs.get("case_message", ""))
    data["case_status"] = (names, status.astype(str),
                           {"long_name": "completed | cut_short | stopped | failed"})
    data["case_message"] = (names, message.astype(str), {"long_name": "why a case stopped or failed"})
    warnings = np.empty(shape, dtype=object)
    checks = {c.index: _check_case(limits, results[c.index]) for c in cases}
    for c in cases:
        warnings[c.index] = json.dumps(_case_warnings(results[c.index], checks[c.index]))
    data["case_warnings"] = (names, warnings.astype(str), {
        "long_name": "what every verdict on the case must carry: an early end, figures the run "
                     "cannot see, limits not evaluated and why, hydraulics (JSON list)"})
    for name, long in (("case_wall_s", "wall time of the case's run"),
                       ("case_cpu_s", "CPU time of the case's run (its process)")):
        arr = np.full(shape, np.nan)
        for c in cases:
            arr[c.index] = float(results[c.index].attrs.get(name, np.nan))
        data[name] = (names, arr, {"units": "s", "long_name": long})
    if limits is not None:
        _add_verdicts(data, names, shape, limits, cases, checks, status)

    # Common time base for the traces, NaN-padded after each case's end.
    if ok:
        end = max(float(r["time"].values[-1]) for r in ok if "time" in r.coords)
        dt = trace_interval_s or _interval(ok)
        n = max(2, int(math.floor(end / dt + 1e-9)) + 1)
        time = np.arange(n) * dt
        if time[-1] < end - 1e-9:
            time = np.append(time, end)
    else:
        time = np.zeros(0)
    present = [t for t in TRACES if any(t in r for r in ok)]
    for name in present:
        arr = np.full((*shape, time.size), np.nan)
        for c in cases:
            r = results[c.index]
            if name in r:
                values = r[name].values
                if "cell" in r[name].dims:  # a module case: one trace of the module
                    values = ENVELOPE[name](r[name].transpose("cell", "time").values, axis=0)
                arr[c.index] = _resample(r["time"].values, values, time)
        unit, long = TRACES[name]
        data[name] = ([*names, "time"], arr, {"units": unit, "long_name": long})
    coords = {n: (n, axes[n], {"long_name": n, "units": parameter_unit(n)}) for n in names}
    coords["time"] = ("time", time, {"units": "s", "long_name": "time from the start of the duty "
                                     "(common base; NaN after a case's end)"})
    if keep_fields and ok:
        ref = next(r for r in ok if "temperature" in r)
        for name in (f for f in FIELDS if any(f in r for r in ok)):
            arr = np.full((*shape, time.size, ref.sizes["y"], ref.sizes["x"]), np.nan)
            for c in cases:
                r = results[c.index]
                if name in r:
                    arr[c.index] = _resample(r["time"].values, r[name].values, time)
            unit = {"temperature": "degC", "soc": "1", "heat_flux": "W m-2"}[name]
            data[name] = ([*names, "time", "y", "x"], arr, {"units": unit, "long_name": name})
        coords.update(x=("x", ref["x"].values, {"units": "m"}), y=("y", ref["y"].values,
                                                                   {"units": "m"}))
    from explorer import __version__
    from explorer.results import CAUTION, data_attrs

    n_failed = int(sum(s not in CACHEABLE for s in status.ravel()))
    n_stopped = int(sum(s == "stopped" for s in status.ravel()))
    n_cut = int(sum(s == "cut_short" for s in status.ravel()))
    summary = (f"{len(cases) - n_failed} of {len(cases)} cases have a result ({n_cut} cut short); "
               f"{n_failed - n_stopped} failed, {n_stopped} stopped")
    attrs = {
        "title": f"Pouch Thermal Explorer sweep: {cell.name}",
        "tool_version": __version__,
        "cell_name": cell.name,
        "cell_sha256": getattr(cell, "sha256", ""),
        "cell_file": getattr(cell, "source_path", ""),
        "temperature_limit_C": cell.temperature_max_C,
        "duty": json.dumps(_duty_key(duty), default=str),
        "cooling": json.dumps(cooling.describe() if cooling is not None else {"kind": "adiabatic"},
                              default=str),
        "axes": json.dumps({n: axes[n].tolist() for n in names}),
        "settings": json.dumps(simulate_kwargs, default=str),
        "limits": json.dumps(limits.as_dict() if limits is not None else {}),
        "cases": len(cases),
        "cases_failed": n_failed,  # without a full result: failed or stopped
        "cases_stopped": n_stopped,
        "status": "stopped" if stopped else "completed",
        "status_message": ("stopped by the user (Ctrl-C): " if stopped else "") + summary,
        "scheduler": scheduler if isinstance(scheduler, str) else
        ("local cluster" if scheduler is None else "client"),
        "time_base": "traces linearly resampled onto a uniform time base, NaN after each "
                     "case's end",
        "caution": CAUTION,
    }
    attrs.update(data_attrs(cell, duty))  # data notes, cell file name and hash (contract G)
    return xr.Dataset(data, coords=coords, attrs=attrs)


def _check_case(limits: Limits | None, result: xr.Dataset) -> dict | None:
    """``limits.check`` of one case's kept series (None: no limits, or no result to check).

    A limit that does not apply to the design (e.g. a pressure drop without a
    plate) is "not evaluated" with the reason, rather than an error after the
    cases have run.
    """
    if limits is None or "time" not in result.dims or result.sizes["time"] == 0:
        return None
    hyd = run_hydraulics(result)
    try:
        return limits.check(result, hyd)
    except InputError:
        pass
    checks, errors = {}, {}
    for name, value in limits.as_dict().items():
        try:
            checks[name] = Limits(**{name: value}).check(result, hyd)
        except InputError as exc:
            errors[name] = str(exc)
    first = next(iter(checks.values()), None)
    out = {"margins": {}, "verdicts": {}, "reasons": dict(errors),
           "warnings": list(first["warnings"]) if first else [], "met": False}
    for name in limits.names():
        one = checks.get(name)
        out["margins"][name] = one["margins"][name] if one else None
        out["verdicts"][name] = one["verdicts"][name] if one else "not evaluated"
        if one and name in one["reasons"]:
            out["reasons"][name] = one["reasons"][name]
    return out


def _case_warnings(result: xr.Dataset, check: dict | None) -> list[str]:
    from explorer.results import run_warnings

    out = list(check["warnings"]) if check is not None else (
        run_warnings(result) if "time" in result.dims else [])
    if check is not None:
        out += [f"{name} not evaluated: {check['reasons'].get(name, '')}"
                for name, v in check["verdicts"].items() if v == "not evaluated"]
    out += json.loads(result.attrs.get("hydraulics_warnings", "[]"))
    return out


def _add_verdicts(data, names, shape, limits: Limits, cases, checks, status) -> None:
    """Per limit: margin (NaN: not evaluated or no result) and verdict; ``meets_limits``."""
    met = np.zeros(shape, dtype=bool)
    for name, value in limits.as_dict().items():
        margin = np.full(shape, np.nan)
        verdict = np.full(shape, "not evaluated", dtype=object)
        for c in cases:
            check = checks[c.index]
            if check is None:
                continue
            if check["margins"].get(name) is not None:
                margin[c.index] = check["margins"][name]
            verdict[c.index] = check["verdicts"][name]
        data[f"margin_{name}"] = (names, margin, {
            "units": LIMIT_UNITS[name].replace("degC", "K"),
            "long_name": f"margin on {name} = {value:g} {LIMIT_UNITS[name]} (positive = met; "
                         "NaN: not evaluated, see verdict_" + name + ")"})
        data[f"verdict_{name}"] = (names, verdict.astype(str), {
            "long_name": f"{name}: met | not met | not evaluated (explorer.Limits.check)"})
    for c in cases:
        check = checks[c.index]
        # a duty that did not run to its end (cut short, stopped) meets nothing here
        met[c.index] = bool(check is not None and check["met"] and status[c.index] == "completed")
    data["meets_limits"] = (names, met.astype("int8"), {
        "units": "1", "long_name": "every limit evaluated and met on a case that completed its "
                                   "duty (1), else 0"})


def _interval(results) -> float:
    vals = [float(r.attrs.get("output_interval_s", math.nan)) for r in results]
    vals = [v for v in vals if math.isfinite(v) and v > 0]
    if vals:
        return max(vals)
    # Fall back on the median recorded step of the longest case.
    longest = max(results, key=lambda r: r["time"].values[-1])
    return float(np.median(np.diff(longest["time"].values))) or 1.0


def _resample(t, y, time):
    """Linear interpolation of ``y`` (time first, any trailing dims) onto ``time``.

    NaN beyond the end of ``t``: the case had stopped by then.
    """
    t = np.asarray(t, dtype=float)
    y = np.asarray(y, dtype=float)
    # Event times can repeat a sample (a step ends and the next begins): keep the last.
    keep = np.append(np.diff(t) > 0, True)
    t, y = t[keep], y[keep]
    shape = (time.size, *y.shape[1:])
    if t.size == 1:
        out = np.full(shape, np.nan)
        out[np.isclose(time, t[0])] = y[0]
        return out
    i = np.clip(np.searchsorted(t, time, side="right") - 1, 0, t.size - 2)
    w = ((time - t[i]) / (t[i + 1] - t[i])).reshape((-1,) + (1,) * (y.ndim - 1))
    out = y[i] * (1.0 - w) + y[i + 1] * w
    out[time > t[-1] * (1 + 1e-12) + 1e-9] = np.nan
    return out
