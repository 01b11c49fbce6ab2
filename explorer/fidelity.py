"""Fidelity check: would the fuller models give the same verdict at this design point?

The cheap models (SPMe through the cell, one averaged rod over the face, the
default grid) stay within a few millivolts and a fraction of a kelvin of the
fuller ones on thin cells with good collectors; thick electrodes, high rates,
cold starts and large cells are where they stop being enough.
:func:`check_fidelity` re-runs one design point with the fuller models, one
change at a time so each difference has one cause:

* ``"dfn"``: the DFN through the cell (when the run was SPM or SPMe);
* ``"distributed"``: a grid of rods over the face (when the run was averaged;
  ``"averaged"`` when it was ``single``);
* ``"finer grid"``: twice the in-plane grid in each direction.

The same duty, cooling, start state and (for a module) the whole coolant path
are run. Each fuller run is watched against the wall-time cap ``max_wall_s``
(for the whole check): from its first part of the duty the run's total cost is
estimated, and a run that would not fit is stopped and listed in ``skipped``
with the estimate, never left to run on.

The result is a Dataset over ``variant`` ("as run" first) with the figures the
verdicts read (peak and core temperature, in-cell and cell-to-cell spread), the
end SOC spread, and the voltage difference to the run as made. Against
``limits``, a difference that exceeds the run's margin to a limit (signed: the
fuller model's figure lands on the other side of the limit) means the verdict
could flip (DESIGN.md section 3, rule 6). :func:`summary`,
:func:`text_table` and :func:`html_table` present it; :func:`attach` stores the
summary on the checked run.

Examples
--------
>>> import explorer                                                       # doctest: +SKIP
>>> cell = explorer.load_cell("rack_lfp_26ah")                            # doctest: +SKIP
>>> fid = explorer.check_fidelity(cell, explorer.duty.discharge(c_rate=0.5),
...                               explorer.cooling.convection(10.0, 25.0),
...                               limits=explorer.Limits(temperature_max_C=45.0))  # doctest: +SKIP
>>> print(explorer.fidelity.text_table(explorer.fidelity.summary(fid)))   # doctest: +SKIP
"""

from __future__ import annotations

import html
import json
import logging
import math
import time

import numpy as np
import xarray as xr

from explorer.limits import Limits
from explorer.validators import InputError, short_repr

log = logging.getLogger(__name__)

AS_RUN = "as run"
#: The fuller variants in the order they are shown.
VARIANTS = ("dfn", "averaged", "distributed", "finer grid")
#: Compared figures: name -> (units, long name, the limit it is judged against or None).
FIGURES = {
    "peak_temperature": ("degC", "hottest point anywhere in the cell (core included), worst "
                         "cell", "temperature_max_C"),
    "core_temperature": ("degC", "hottest core (mid-thickness) temperature estimate",
                         "core_temperature_max_C"),
    "in_cell_spread": ("K", "largest in-cell spread (hottest minus coldest point at one time)",
                       "spread_K"),
    "cell_to_cell_spread": ("K", "largest difference between the cells' mean temperatures "
                            "(NaN: not a module)", "cell_to_cell_K"),
    "end_soc_spread": ("1", "spread of the local state of charge at the end (over the face, "
                       "and over the cells of a module)", None),
    "voltage_rms_difference": ("V", "RMS voltage difference to the run as made, over the time "
                               "both cover", None),
    "voltage_max_difference": ("V", "largest voltage difference to the run as made, over the "
                               "time both cover", None),
}
#: Words for the figures in tables.
LABELS = {"peak_temperature": "peak temperature", "core_temperature": "core temperature",
          "in_cell_spread": "in-cell spread", "cell_to_cell_spread": "cell-to-cell spread",
          "end_soc_spread": "end SOC spread", "voltage_rms_difference": "voltage, RMS difference",
          "voltage_max_difference": "voltage, largest difference"}
# Wall time of a fuller run relative to the run as made, for the order the variants run in
# (cheap first, so a slow one cannot starve them); the cap itself uses the measured cost.
_COST_GUESS = {"finer grid": 3.0, "averaged": 2.0, "dfn": 15.0, "distributed": 25.0}
# Part of the duty (by simulated time) after which a run's total cost is estimated.
_PROBE_FRACTION = 0.05
_MODULE_KEYS = ("output_interval_s", "mesh")  # what simulate_module takes beyond the common ones


class _OverBudget(KeyboardInterrupt):
    """Raised from a run's progress callback to stop it cleanly (the stepper keeps its records)."""


# --------------------------------------------------------------------------- the check


def check_fidelity(cell, duty, cooling, electrochemistry: str = "spme", layout: str = "averaged",
                   start_soc: float = 1.0, start_temperature_C: float = 25.0, *,
                   limits: Limits | None = None, module: bool = False, grid=None,
                   max_wall_s: float = 60.0, base: xr.Dataset | None = None, progress=None,
                   **simulate_kwargs) -> xr.Dataset:
    """Re-run one design point with the fuller models and compare.

    Parameters
    ----------
    cell, duty, cooling, electrochemistry, layout, start_soc, start_temperature_C, grid
        The design point, as :func:`explorer.simulate` takes them.
    limits : Limits, optional
        The design limits; with them each figure's difference is set against
        the run's margin to its limit, and the verdict is said to be able to
        flip when the difference exceeds that margin so that the fuller figure
        lands on the other side of the limit (a fuller figure further from the
        limit leaves the verdict as it is, however large the difference).
    module : bool
        Run every cell on the coolant path (:func:`explorer.simulate_module`);
        gives the cell-to-cell spread. The fuller layout then runs the worst
        cell alone against the same cell on the layout as run, and adds the
        difference to the module's figures (a grid of rods in every cell
        would cost the cells times the rods).
    max_wall_s : float
        Cap on the wall time of the fuller runs together, s. A fuller run
        whose estimated cost does not fit in what is left is stopped and
        listed under ``skipped`` in the summary.
    base : xarray.Dataset, optional
        The run as made, when it exists already (e.g. the answer of a sizing);
        otherwise it is run here first (not counted in ``max_wall_s``).
    progress : callable, optional
        Called as ``progress(variant, fraction)`` while the fuller runs go
        (``fraction`` of the duty's expected length, 0..1).
    **simulate_kwargs
        Passed on to every run (``position``, ``output_interval_s``, ``mesh``,
        ``rods``).

    Returns
    -------
    xarray.Dataset
        Dimension ``variant`` ("as run", then the fuller variants run). Per
        variant: ``peak_temperature``, ``core_temperature`` (degC),
        ``in_cell_spread``, ``cell_to_cell_spread`` (K, NaN when not a
        module), ``end_soc_spread`` (1), ``voltage_rms_difference``,
        ``voltage_max_difference`` (V, against "as run"), ``duration`` (s),
        ``wall_time`` (s), ``status`` and ``setting`` (text). Attributes:
        ``verdict_could_flip`` ("yes", "no", "not evaluated"),
        ``fidelity_summary`` (JSON, see :func:`summary`), ``fidelity_message``.
    """
    from explorer.simulate import _choice

    limits = _check_limits(limits)
    max_wall_s = _check_wall(max_wall_s)
    module = _check_flag("module", module)
    if progress is not None and not callable(progress):
        raise InputError(f"check_fidelity: `progress` must be a function called as "
                         f"progress(variant, fraction), or None, got {short_repr(progress)}")
    electrochemistry = _choice("electrochemistry", electrochemistry, ("spm", "spme", "dfn"))
    layout = _choice("layout", layout, ("single", "averaged", "distributed"))
    cell = _load(cell)
    common = {"electrochemistry": electrochemistry, "layout": layout, "start_soc": start_soc,
              "start_temperature_C": start_temperature_C, "grid": grid, **simulate_kwargs}
    if base is None:
        base = _run(cell, duty, cooling, common, module)
    elif not isinstance(base, xr.Dataset) or "voltage" not in base:
        raise InputError(f"check_fidelity: `base` must be the results Dataset of the run as made "
                         f"(from explorer.simulate or simulate_module), got {short_repr(base)}")
    runs, skipped = {AS_RUN: base}, []
    plan, not_needed = _plan(base, common)
    skipped.extend(not_needed)
    deadline = time.perf_counter() + max_wall_s
    expected = _duration(base)
    for name, changes in sorted(plan, key=lambda p: _COST_GUESS[p[0]]):
        alone = module and "layout" in changes and "cell" in base.dims and base.sizes["cell"] > 1
        left = deadline - time.perf_counter()
        guess = _COST_GUESS[name] * float(base.attrs.get("wall_time_s", 0.0) or 0.0)
        if left <= 0.0:
            skipped.append({"variant": name, "reason": f"no wall time left of max_wall_s = "
                            f"{max_wall_s:g} s (a run like this takes about {guess:.1f} s)"})
            continue
        watch = _Watch(name, left, expected, max_wall_s, progress)
        if alone:  # a grid of rods in every cell costs the cells times the rods: the worst cell
            ds = _worst_cell_alone(cell, duty, cooling, common, changes, base, watch)
        else:
            ds = _run(cell, duty, cooling, {**common, **changes}, module, progress=watch)
        if watch.reason is not None:
            skipped.append({"variant": name, "reason": watch.reason})
            continue
        if ds.attrs.get("status") == "stopped":  # a real Ctrl-C: keep what the check has
            skipped.append({"variant": name, "reason": "interrupted by the user"})
            break
        runs[name] = ds
    fid = _dataset(runs, cell, module)
    fid.attrs["skipped"] = json.dumps(skipped)
    fid.attrs["max_wall_s"] = max_wall_s
    return judge(fid, limits)


def _check_limits(limits):
    if limits is not None and not isinstance(limits, Limits):
        raise InputError(f"check_fidelity: `limits` must be an explorer.Limits or None, got "
                         f"{type(limits).__name__}")
    return limits


def _check_wall(value) -> float:
    ok = isinstance(value, int | float | np.integer | np.floating) and not isinstance(value, bool)
    if not ok or not (math.isfinite(float(value)) and float(value) > 0.0):
        raise InputError(f"check_fidelity: `max_wall_s` must be a number of seconds > 0, got "
                         f"{short_repr(value)}")
    return float(value)


def _check_flag(name, value) -> bool:
    if not isinstance(value, bool | np.bool_):
        raise InputError(f"check_fidelity: `{name}` must be True or False, got "
                         f"{short_repr(value)}")
    return bool(value)


def _load(cell):
    from explorer.cell import load_cell

    return load_cell(cell) if isinstance(cell, str) or hasattr(cell, "__fspath__") else cell


def _run(cell, duty, cooling, options, module, progress=None) -> xr.Dataset:
    """One run of the design point (a module run when ``module``)."""
    options = {k: v for k, v in options.items() if v is not None or k != "grid"}
    if module:
        from explorer.module import simulate_module

        keep = {"electrochemistry", "layout", "start_soc", "start_temperature_C", "grid",
                *_MODULE_KEYS}
        options = {k: v for k, v in options.items() if k in keep}
        return simulate_module(cell, duty, cooling, progress=progress, **options)
    from explorer.simulate import simulate

    return simulate(cell, duty, cooling, progress=progress, **options)


class _Alone:
    """A layout variant of a module run on its worst cell alone: the fuller layout's run of
    that cell and the same cell on the layout as run (both with the cells upstream taken as
    equal to it), whose difference is added to the module's figures."""

    def __init__(self, fuller, pair, position):
        self.fuller, self.pair, self.position = fuller, pair, position
        self.attrs = fuller.attrs


def _worst_cell_alone(cell, duty, cooling, common, changes, base, watch):
    from explorer.results import key_figures

    k = int(key_figures(base)["worst_cell"])
    options = {**common, "position": k}
    pair = _run(cell, duty, cooling, options, False, progress=watch)
    if watch.reason is not None or pair.attrs.get("status") == "stopped":
        return pair
    watch.next_run()
    fuller = _run(cell, duty, cooling, {**options, **changes}, False, progress=watch)
    return fuller if watch.reason is not None else _Alone(fuller, pair, k)


def _plan(base, common) -> tuple[list, list]:
    """The fuller variants to run (name, changed settings) and those not needed (with why)."""
    plan, not_needed = [], []
    if common["electrochemistry"] != "dfn":
        plan.append(("dfn", {"electrochemistry": "dfn"}))
    else:
        not_needed.append({"variant": "dfn", "reason": "the run is the DFN already"})
    fuller = {"single": "averaged", "averaged": "distributed"}.get(common["layout"])
    if fuller is not None:
        plan.append((fuller, {"layout": fuller}))
    else:
        not_needed.append({"variant": "distributed", "reason": "the run is distributed already"})
    if common["layout"] == "single":
        not_needed.append({"variant": "finer grid", "reason": "layout 'single' has no in-plane "
                           "grid (the 'averaged' variant resolves the face)"})
    else:
        nx, ny = _grid_of(base)
        plan.append(("finer grid", {"grid": (2 * nx, 2 * ny)}))
    return plan, not_needed


def _grid_of(ds) -> tuple[int, int]:
    if "grid_nx" in ds.attrs and "grid_ny" in ds.attrs:
        return int(ds.attrs["grid_nx"]), int(ds.attrs["grid_ny"])
    return int(ds.sizes.get("x", 1)), int(ds.sizes.get("y", 1))


def _duration(ds) -> float:
    t = np.asarray(ds["time"].values, dtype=float)
    return float(t[-1] - t[0]) if t.size > 1 else 0.0


class _Watch:
    """A run's progress callback that stops it when its cost will not fit the time left.

    After the first ``_PROBE_FRACTION`` of the duty (by simulated time) the total
    wall time is estimated by proportion; a run that would overrun is stopped
    then, and any run is stopped when the time left is used up.
    """

    def __init__(self, name, left_s, expected_s, max_wall_s, progress):
        self.name, self.left, self.expected = name, left_s, expected_s
        self.max_wall_s, self.progress = max_wall_s, progress
        self.start = time.perf_counter()
        self.estimated = False
        self.reason = None

    def __call__(self, t_s, step_index=None):
        used = time.perf_counter() - self.start
        fraction = t_s / self.expected if self.expected > 0 else 0.0
        if self.progress is not None:
            self.progress(self.name, min(1.0, fraction))
        if used > self.left:
            self._stop(f"stopped after {used:.1f} s at t = {t_s:.0f} s of about "
                       f"{self.expected:.0f} s of duty: the wall-time cap max_wall_s = "
                       f"{self.max_wall_s:g} s was used up")
        if not self.estimated and fraction >= _PROBE_FRACTION:
            self.estimated = True
            total = used / fraction
            if total > self.left:
                self._stop(f"would take about {total:.0f} s (estimated from its first "
                           f"{t_s:.0f} s of {self.expected:.0f} s of duty, {used:.1f} s of wall "
                           f"time), more than the {self.left:.0f} s left of max_wall_s = "
                           f"{self.max_wall_s:g} s; raise max_wall_s or use a coarser grid")

    def next_run(self):
        """Watch a second run of the same variant on the time that is left."""
        self.left -= time.perf_counter() - self.start
        self.start = time.perf_counter()
        self.estimated = False

    def _stop(self, reason):
        self.reason = reason
        log.info("fidelity check: %s %s", self.name, reason)
        raise _OverBudget(reason)


# --------------------------------------------------------------------------- figures


def _figures(ds) -> dict:
    """The compared figures of one run (NaN where the run cannot see one)."""
    from explorer.limits import run_figures

    f = run_figures(ds)

    def num(name):
        v = f.get(name)
        return math.nan if v is None else float(v)

    return {"peak_temperature": num("temperature_max_C"),
            "core_temperature": num("core_temperature_max_C"),
            "in_cell_spread": num("spread_K"),
            "cell_to_cell_spread": num("cell_to_cell_K"),
            "end_soc_spread": _end_soc_spread(ds)}


def _end_soc_spread(ds) -> float:
    """Largest minus smallest local SOC at the end, over the face and over the cells."""
    values = []
    for name in ("soc", "soc_mean"):
        if name in ds:
            v = ds[name].isel(time=-1).values
            values.append(np.ravel(np.asarray(v, dtype=float)))
    if not values:
        return math.nan
    v = np.concatenate(values)
    v = v[np.isfinite(v)]
    return float(v.max() - v.min()) if v.size else math.nan


def _voltage_difference(a, b) -> tuple[float, float]:
    """(RMS over time, largest) of ``b - a`` over the time both runs cover."""
    ta, va = np.asarray(a["time"].values, float), np.asarray(a["voltage"].values, float)
    tb, vb = np.asarray(b["time"].values, float), np.asarray(b["voltage"].values, float)
    end = min(ta[-1], tb[-1])
    t = np.union1d(ta[ta <= end], tb[tb <= end])
    if t.size < 2:
        return math.nan, math.nan
    d = np.interp(t, tb, vb) - np.interp(t, ta, va)
    span = t[-1] - t[0]
    rms = math.sqrt(float(np.trapezoid(d * d, t)) / span) if span > 0 else abs(float(d[0]))
    return rms, float(np.max(np.abs(d)))


def _setting(ds) -> str:
    nx, ny = _grid_of(ds)
    text = f"{ds.attrs.get('electrochemistry', '?')}, {ds.attrs.get('layout', '?')}"
    if ds.attrs.get("layout") != "single":
        text += f", grid {nx}x{ny}"
    if ds.attrs.get("layout") == "distributed":
        text += f", rods {'x'.join(map(str, json.loads(ds.attrs.get('rods', '[]'))))}"
    if "cell" in ds.dims:
        text += f", module of {ds.sizes['cell']} cells"
    return text


def _row_of(ds, base) -> dict:
    """The compared figures of one variant's run, against the run as made."""
    if isinstance(ds, _Alone):
        return _row_alone(ds, base)
    row = _figures(ds)
    row["voltage_rms_difference"], row["voltage_max_difference"] = (
        (0.0, 0.0) if ds is base else _voltage_difference(base, ds))
    row.update({"duration": _duration(ds), "status": str(ds.attrs.get("status", "")),
                "wall_time": float(ds.attrs.get("wall_time_s", math.nan)),
                "setting": _setting(ds)})
    return row


def _row_alone(alone: _Alone, base) -> dict:
    """The module's figures plus the fuller layout's difference on its worst cell alone."""
    module, fuller, pair = _figures(base), _figures(alone.fuller), _figures(alone.pair)
    row = {name: module[name] + fuller[name] - pair[name]
           for name in ("peak_temperature", "core_temperature", "in_cell_spread")}
    row["cell_to_cell_spread"] = math.nan  # one cell run: not seen
    row["end_soc_spread"] = fuller["end_soc_spread"]
    row["voltage_rms_difference"], row["voltage_max_difference"] = _voltage_difference(
        alone.pair, alone.fuller)
    wall = sum(float(d.attrs.get("wall_time_s", 0.0)) for d in (alone.pair, alone.fuller))
    row.update({"duration": _duration(alone.fuller), "wall_time": wall,
                "status": str(alone.fuller.attrs.get("status", "")),
                "setting": f"{_setting(alone.fuller)}, worst cell {alone.position} alone "
                           f"against its {alone.pair.attrs.get('layout')} run (the "
                           "difference added to the module's figures)"})
    return row


def _dataset(runs: dict, cell, module: bool) -> xr.Dataset:
    names = [AS_RUN] + [v for v in VARIANTS if v in runs]
    base = runs[AS_RUN]
    rows = {name: _row_of(runs[name], base) for name in names}
    data = {}
    for fig, (units, long_name, _) in FIGURES.items():
        data[fig] = ("variant", np.array([rows[n][fig] for n in names]),
                     {"units": units, "long_name": long_name})
    for key, units, long_name in (("duration", "s", "length of the run"),
                                  ("wall_time", "s", "wall time of the run(s)")):
        data[key] = ("variant", np.array([rows[n][key] for n in names], dtype=float),
                     {"units": units, "long_name": long_name})
    data["status"] = ("variant", np.array([rows[n]["status"] for n in names]),
                      {"long_name": "how the run ended"})
    data["setting"] = ("variant", np.array([rows[n]["setting"] for n in names]),
                       {"long_name": "model, layout and grid of the run"})
    out = xr.Dataset(data, coords={"variant": ("variant", np.array(names),
                                               {"long_name": "model variant"})})
    out.attrs.update({"kind": "fidelity", "cell_name": getattr(cell, "name", ""),
                      "module": int(module),
                      "status_message_as_run": str(base.attrs.get("status_message", ""))})
    return out


# --------------------------------------------------------------------------- verdicts


def judge(fid: xr.Dataset, limits: Limits | None) -> xr.Dataset:
    """Set the could-flip verdict, summary and message of a check against ``limits``.

    No run is made: the figures stored in ``fid`` are set against the margins
    of the run as made (limit minus figure, as :meth:`Limits.check` gives them).
    Returns a copy.
    """
    _check_limits(limits)
    fid = fid.copy()
    names = [str(v) for v in fid["variant"].values]
    margins = {}
    if limits is not None:
        for fig, (_, _, limit) in FIGURES.items():
            value = float(fid[fig].sel(variant=AS_RUN))
            if limit in limits.names() and math.isfinite(value):
                margins[fig] = (limit, getattr(limits, limit) - value)
    rows = []
    for name in names[1:]:
        for fig, (units, _, _limit) in FIGURES.items():
            rows.append(_row(fid, name, fig, units, margins.get(fig)))
    statuses = {n: str(fid["status"].sel(variant=n).values) for n in names}
    ended_apart = [n for n in names[1:] if statuses[n] != statuses[AS_RUN]]
    skipped = json.loads(fid.attrs.get("skipped", "[]"))
    if limits is None or len(names) < 2:
        flip = "not evaluated"
    else:
        flip = "yes" if any(r["could_flip"] for r in rows) or ended_apart else "no"
    message = _message(fid, rows, flip, limits, ended_apart, statuses, skipped)
    summary_ = {"rows": rows, "verdict_could_flip": flip, "message": message,
                "variants": names, "skipped": skipped,
                "limits": None if limits is None else limits.as_dict(),
                "settings": {n: str(fid["setting"].sel(variant=n).values) for n in names},
                "status": statuses}
    fid.attrs.update({"verdict_could_flip": flip, "fidelity_message": message,
                      "fidelity_summary": json.dumps(summary_, allow_nan=False),
                      "limits": json.dumps(None if limits is None else limits.as_dict())})
    return fid


def _num(value):
    """A float for JSON (None for NaN)."""
    value = float(value)
    return value if math.isfinite(value) else None


def _row(fid, name, fig, units, margin) -> dict:
    fuller = float(fid[fig].sel(variant=name))
    voltage = fig.startswith("voltage_")
    as_run = math.nan if voltage else float(fid[fig].sel(variant=AS_RUN))
    difference = fuller if voltage else fuller - as_run
    limit, m = margin if margin is not None else (None, None)
    # every limit is an upper bound (figure <= limit): the fuller model's margin is m - difference,
    # and the verdict flips when that lands on the other side of the limit (a fuller figure
    # further from the limit, however different, leaves the verdict as it is)
    flip = (m is not None and math.isfinite(difference)
            and (m - difference < 0.0) != (m < 0.0))
    return {"variant": name, "figure": fig, "label": LABELS[fig], "unit": units,
            "as_run": None if voltage else _num(as_run), "fuller": None if voltage else
            _num(fuller), "difference": _num(difference), "limit": limit,
            "margin": None if m is None else _num(m), "could_flip": bool(flip)}


def _message(fid, rows, flip, limits, ended_apart, statuses, skipped) -> str:
    """The check in plain words."""
    parts = []
    ran = [str(v) for v in fid["variant"].values][1:]
    if not ran:
        parts.append("no fuller model was run")
    for name in ran:
        by = {r["figure"]: r for r in rows if r["variant"] == name}
        bits = []
        rms = by["voltage_rms_difference"]["difference"]
        if rms is not None:
            bits.append(f"voltage {_cell(rms, 'V', 3)} RMS")
        for fig in ("peak_temperature", "in_cell_spread", "cell_to_cell_spread"):
            d = by[fig]["difference"]
            if d is not None:
                bits.append(f"{LABELS[fig]} {d:+.3g} K")
        parts.append(f"{name}: " + (", ".join(bits) if bits else "no comparable figure"))
    text = "Against the run as made, " + "; ".join(parts) + "."
    for name in ended_apart:
        text += (f" The {name} run ended '{statuses[name]}' where the run as made ended "
                 f"'{statuses[AS_RUN]}'" + (f" ({fid.attrs['status_message_as_run']})"
                                            if statuses[AS_RUN] != "completed" else "") + ".")
    flips = [r for r in rows if r["could_flip"]]
    if flip == "yes":
        for r in flips:
            text += (f" {r['variant']}: the {r['label']} differs by {r['difference']:+.3g} "
                     f"{r['unit'].replace('degC', 'K')}, which puts it on the other side of "
                     f"`{r['limit']}` (margin {r['margin']:+.3g} as run, "
                     f"{r['margin'] - r['difference']:+.3g} on the fuller model).")
        text += " The verdict could flip: check this design point on the fuller model."
    elif flip == "no":
        m = [r for r in rows if r["margin"] is not None]
        smallest = min(m, key=lambda r: abs(r["margin"])) if m else None
        text += " No fuller figure lands on the other side of a limit"
        text += (f" (smallest margin {smallest['margin']:+.3g} on `{smallest['limit']}`)"
                 if smallest else "") + ": the verdict would not flip on the models run."
    elif limits is None:
        text += " No limits were given, so the verdict was not judged."
    for s in skipped:
        text += f" Not run: {s['variant']} ({s['reason']})."
    return text


# --------------------------------------------------------------------------- presentation


def summary(fid: xr.Dataset) -> dict:
    """The check as a JSON-able dict (see the module docstring): ``rows`` (variant, figure,
    unit, as_run, fuller, difference, margin, could_flip...), ``verdict_could_flip``,
    ``message``, ``variants``, ``skipped``."""
    text = fid.attrs.get("fidelity_summary")
    if text is None:
        raise InputError("fidelity.summary: expected the Dataset of explorer.check_fidelity "
                         "(it has no `fidelity_summary` attribute)")
    return json.loads(text)


def attach(ds: xr.Dataset, fid: xr.Dataset) -> xr.Dataset:
    """Store the check's summary on the run it checked (``ds.attrs["fidelity_summary"]``)."""
    ds.attrs["fidelity_summary"] = fid.attrs["fidelity_summary"]
    return ds


def from_attrs(ds) -> dict | None:
    """The summary of a check stored on a run, or None (none stored, or unreadable)."""
    text = getattr(ds, "attrs", {}).get("fidelity_summary")
    if not text:
        return None
    try:
        value = json.loads(text)
    except (TypeError, ValueError):
        return None
    return value if isinstance(value, dict) and "rows" in value else None


# Below these a difference is round-off, not a model difference (V, K, SOC fraction).
_NOISE = {"V": 1e-9, "K": 1e-9, "degC": 0.0, "1": 1e-9}


def _cell(value, unit, digits=4) -> str:
    if value is None:
        return "-"
    if abs(value) < _NOISE.get(unit, 0.0):
        value = 0.0
    if unit == "V":
        return f"{value * 1e3:.{digits}g} mV"
    return f"{value:.{digits}g}"


def _unit(unit) -> str:
    return {"V": "", "1": ""}.get(unit, unit)


def _table_rows(s: dict) -> list[list[str]]:
    out = []
    for r in s["rows"]:
        if r["difference"] is None and r["as_run"] is None:
            continue  # a figure neither run sees
        unit = _unit(r["unit"])
        diff_unit = unit.replace("degC", "K")
        seen = r["difference"] is not None
        out.append([r["variant"], r["label"], _cell(r["as_run"], r["unit"]),
                    _cell(r["fuller"], r["unit"]),
                    f"{_cell(r['difference'], r['unit'].replace('degC', 'K'), 3)} "
                    f"{diff_unit}".strip() if seen else "-",
                    "-" if r["margin"] is None else f"{r['margin']:+.3g} {diff_unit}".strip(),
                    "COULD FLIP" if r["could_flip"] else ("no" if r["margin"] is not None
                                                          and seen else "")])
    return out


_HEAD = ["variant", "figure", "as run", "fuller", "difference", "margin", "verdict"]


def text_table(s: dict) -> str:
    """The check as a plain-text table, then the message."""
    rows = [_HEAD, *_table_rows(s)]
    widths = [max(len(r[i]) for r in rows) for i in range(len(_HEAD))]
    lines = ["  ".join(c.ljust(w) for c, w in zip(r, widths)).rstrip() for r in rows]
    lines.insert(1, "  ".join("-" * w for w in widths))
    lines.append(f"verdict could flip: {s['verdict_could_flip']}")
    lines.append(s["message"])
    return "\n".join(lines)


def html_table(s: dict) -> str:
    """The check as an HTML fragment (a table and the message; no ids, no scripts)."""
    e = html.escape
    head = "".join(f"<th>{e(h)}</th>" for h in _HEAD)
    body = []
    for r in _table_rows(s):
        style = ' style="color:#b00020;font-weight:bold"' if r[-1] == "COULD FLIP" else ""
        body.append("<tr>" + "".join(f"<td>{e(c)}</td>" for c in r[:-1])
                    + f"<td{style}>{e(r[-1])}</td></tr>")
    flip = e(s["verdict_could_flip"])
    return (f'<div class="fidelity-check"><p><b>Fidelity check</b> (verdict could flip: '
            f"{flip})</p><table><thead><tr>{head}</tr></thead><tbody>{''.join(body)}"
            f"</tbody></table><p>{e(s['message'])}</p></div>")
