"""Size one cooling design parameter against the design limits.

:func:`size_cooling` finds, for one design parameter (``vary``, any name of
``cooling.parameters()``: a flow, an inlet temperature, a fin or TIM
thickness...), the value inside ``bounds`` at the boundary of the region
where every limit is met: the smallest flow, the highest inlet, the thinnest
fin that still meets the limits.

The search (:func:`find_boundary`) works on the worst scaled margin of all
limits (positive = every limit met):

1. evaluate a few points across the bounds (the ends included; geometric
   spacing when the bounds span a factor of four or more, since thermal
   figures tend to vary with the reciprocal of a flow or a conductance);
2. decide from these samples which way the margin grows (more flow helps,
   a warmer inlet hurts — read from the data, not assumed);
3. starting from the best end, walk to the first sample that fails: that
   pair brackets the boundary of the feasible region that contains the best
   end (the conservative choice when the figures are not monotone);
4. shrink the bracket by false position with the Illinois modification and
   a bisection safeguard until it is narrower than ``rtol`` of the value, and
   return the bracket's feasible end, so a re-run at the returned value meets
   the limits.

Figures that do not change monotonically over the evaluated points are
reported (``SizingResult.monotone`` and ``.turning_points``), never hidden.
"""

from __future__ import annotations

import json
import logging
import math
from dataclasses import dataclass, field

import numpy as np
import xarray as xr

from explorer.limits import UNITS, Limits
from explorer.validators import InputError

log = logging.getLogger(__name__)

# Changes of a scaled margin smaller than this (1 mK, or 1e-3 of a hydraulic
# limit) are noise of the time stepping, not a change of trend.
TREND_ATOL = 1e-3


class SizingError(InputError):
    """A sizing request that cannot be carried out (bad bounds, failed runs)."""


# --------------------------------------------------------------------------- the 1-D search


@dataclass
class Boundary:
    """Outcome of :func:`find_boundary`.

    ``kind`` is "boundary" (a bracket was found and refined), "all_met" (every
    evaluated value meets the limits: the boundary lies outside the bounds)
    or "none_met" (no evaluated value does).
    """

    value: float
    feasible: bool
    kind: str
    increasing: bool  # the margin grows with the value
    values: np.ndarray  # every evaluated value, sorted
    margins: np.ndarray  # the margin at each
    bracket: tuple[float, float] | None = None  # (feasible, failing) after refinement
    islands: list = field(default_factory=list)  # other feasible intervals seen (non-monotone)


def sample_points(lo: float, hi: float, samples: int, spacing: str = "auto") -> np.ndarray:
    """The first evaluation points: ``samples`` values from ``lo`` to ``hi`` inclusive."""
    if spacing not in ("auto", "linear", "geometric"):
        raise InputError(f"size_cooling: `spacing` must be 'auto', 'linear' or 'geometric', "
                         f"got {spacing!r}")
    geometric = spacing == "geometric" or (spacing == "auto" and lo > 0 and hi / lo >= 4.0)
    if geometric:
        if lo <= 0:
            raise InputError(f"size_cooling: geometric spacing needs bounds > 0, got lo={lo!r}")
        return np.geomspace(lo, hi, samples)
    return np.linspace(lo, hi, samples)


def turning_points(values, y, atol: float = TREND_ATOL) -> list[float]:
    """Values at which the trend of ``y`` over sorted ``values`` reverses.

    Steps smaller than ``atol`` count as flat and do not reverse a trend.
    """
    values = np.asarray(values, dtype=float)
    y = np.asarray(y, dtype=float)
    ok = np.isfinite(y)
    values, y = values[ok], y[ok]
    d = np.diff(y)
    sign = np.where(np.abs(d) <= atol, 0, np.sign(d))
    points, last = [], 0
    for i, s in enumerate(sign):
        if s == 0:
            continue
        if last and s != last:
            points.append(float(values[i]))
        last = s
    return points


def find_boundary(margin, lo: float, hi: float, *, samples: int = 5, rtol: float = 0.005,
                  spacing: str = "auto", max_evaluations: int = 40,
                  on_sampled=None, integer: bool = False) -> Boundary:
    """Find the boundary of the feasible region of ``margin(value) >= 0`` in ``[lo, hi]``.

    Parameters
    ----------
    margin : callable
        ``margin(value) -> float``, positive where the limits are met.
    lo, hi : float
        The bounds, ``lo < hi``.
    samples : int
        Points evaluated first (ends included), at least 3.
    rtol : float
        Relative width of the final bracket (0.005 = 0.5 % of the value).
    max_evaluations : int
        Hard cap on evaluations of ``margin``.
    on_sampled : callable, optional
        Called with no arguments once the first samples are evaluated (the
        sizing uses it to narrow the cell positions it runs while refining).
    integer : bool
        The value is a whole number (a count of channels or cells): samples
        are rounded and the bracket is refined to neighbouring integers.

    Returns
    -------
    Boundary
        See the class. In the "boundary" case ``value`` is the feasible end of
        a bracket narrower than ``rtol * |value|``.

    Examples
    --------
    >>> b = find_boundary(lambda q: 45.0 - (25.0 + 30.0 / q), 0.5, 10.0)
    >>> round(b.value, 2), b.feasible, b.increasing
    (1.5, True, True)
    """
    if samples < 3:
        raise InputError(f"size_cooling: `samples` must be >= 3, got {samples!r}")
    if not rtol > 0:
        raise InputError(f"size_cooling: `rtol` must be > 0, got {rtol!r}")
    seen: dict[float, float] = {}

    def f(x: float) -> float:
        x = float(x)
        if x not in seen:
            if len(seen) >= max_evaluations:
                raise SizingError(f"size_cooling: no convergence within {max_evaluations} "
                                  "evaluations; raise `max_evaluations` or `rtol`")
            value = float(margin(x))
            if math.isnan(value):
                raise SizingError(f"size_cooling: the margin at {x:g} is NaN")
            seen[x] = value
        return seen[x]

    xs = sample_points(lo, hi, samples, spacing)
    if integer:
        xs = np.unique(np.round(xs))
        if xs.size < 2:
            raise InputError(f"size_cooling: an integer parameter needs bounds at least 1 "
                             f"apart, got [{lo:g}, {hi:g}]")
    ms = np.array([f(x) for x in xs])
    if on_sampled is not None:
        on_sampled()
    # Direction from the data: compare the ends, fall back on the overall slope.
    increasing = bool(ms[-1] > ms[0]) if ms[-1] != ms[0] else bool(np.polyfit(xs, ms, 1)[0] >= 0)

    def outcome(value, feasible, kind, bracket=None, islands=()):
        vals = np.array(sorted(seen))
        return Boundary(float(value), feasible, kind, increasing, vals,
                        np.array([seen[v] for v in vals]), bracket, list(islands))

    met = ms >= 0.0
    if met.all():
        # Everything meets: the cheapest end (the smaller margin) is the answer.
        return outcome(xs[0] if increasing else xs[-1], True, "all_met")
    if not met.any():
        return outcome(xs[int(np.argmax(ms))], False, "none_met")

    # Anchor at the feasible sample nearest the best end; walk toward the cheap side.
    order = list(range(len(xs)))[::-1] if increasing else list(range(len(xs)))
    anchor = next(i for i in order if met[i])
    step = -1 if increasing else 1
    i = anchor
    while 0 <= i + step < len(xs) and met[i + step]:
        i += step
    a, b = float(xs[i]), float(xs[i + step])  # a meets, b fails
    islands = _islands(xs, met, skip=(min(i, anchor), max(i, anchor)))
    a, b = _refine_integer(f, a, b) if integer else _refine(f, seen, a, b, rtol)
    return outcome(a, True, "boundary", bracket=(a, b), islands=islands)


def _islands(xs, met, skip) -> list[tuple[float, float]]:
    """Feasible runs of samples other than the one the boundary was taken from."""
    runs, start = [], None
    for k, m in enumerate(list(met) + [False]):
        if m and start is None:
            start = k
        if not m and start is not None:
            if not (start <= skip[0] <= k - 1 or start <= skip[1] <= k - 1):
                runs.append((float(xs[start]), float(xs[k - 1])))
            start = None
    return runs


def _refine_integer(f, a: float, b: float) -> tuple[float, float]:
    """Bisect a bracket of whole numbers (``a`` meets, ``b`` fails) to neighbours."""
    while abs(b - a) > 1:
        m = float(math.floor(0.5 * (a + b)))
        m = m if m != a else m + 1.0
        if f(m) >= 0.0:
            a = m
        else:
            b = m
    return a, b


def _refine(f, seen: dict, a: float, b: float, rtol: float) -> tuple[float, float]:
    """Shrink the bracket (``a`` meets, ``b`` fails) to ``rtol`` of the value.

    Brent's method locates the root of the margin; the tightest pair of
    evaluated points around it is then taken from ``seen`` (feasible end
    nearest the failing side), bisected further if still too wide.
    """
    from scipy.optimize import brentq

    lo, hi = sorted((a, b))
    brentq(f, lo, hi, xtol=1e-12 * (hi - lo), rtol=0.25 * rtol, full_output=True, disp=False)
    toward_b = 1.0 if b > a else -1.0
    while True:
        inside = [x for x in seen if lo <= x <= hi]
        a = max((x for x in inside if seen[x] >= 0.0), key=lambda x: toward_b * x)
        fails = [x for x in inside if seen[x] < 0.0 and toward_b * (x - a) > 0]
        b = min(fails, key=lambda x: toward_b * x)
        if abs(b - a) <= rtol * max(abs(a), abs(b), 1e-12):
            return a, b
        f(0.5 * (a + b))


# --------------------------------------------------------------------------- sizing a design


@dataclass
class SizingResult:
    """The outcome of :func:`size_cooling`.

    Attributes
    ----------
    value : float
        The design value found (in the unit of ``vary``).
    feasible : bool
        Whether ``value`` meets every limit.
    dataset : xarray.Dataset
        The run at ``value`` (the cell position with the worst margin).
    curve : xarray.Dataset
        Every evaluated value (dimension ``value``) with ``temperature_max_C``,
        ``spread_K``, each limit's figure, each margin and ``worst_margin``.
    margins : dict
        Limit name -> margin at ``value`` (limit minus figure, positive = met).
    figures : dict
        Figure name -> value at ``value`` (worst over the checked positions).
    hydraulics : dict
        ``design.hydraulics()`` at ``value`` ({} for designs without a plate).
    increasing : bool
        Whether larger values help (the margin grows with the value), read from the runs.
    monotone : bool
        Whether every limit's figure changed monotonically over the evaluated values.
    turning_points : dict
        Figure name -> values where its trend reverses (empty when monotone).
    message : str
        What was found, in words.
    """

    vary: str
    bounds: tuple[float, float]
    limits: Limits
    value: float
    feasible: bool
    dataset: xr.Dataset
    curve: xr.Dataset
    margins: dict
    figures: dict
    hydraulics: dict
    design: object
    increasing: bool
    monotone: bool
    turning_points: dict
    message: str
    kind: str
    position: int | None
    evaluations: int

    def table(self) -> str:
        """A plain-text table: the design value, each limit with figure and margin, hydraulics."""
        lines = [f"{self.vary} = {self.value:.4g}  "
                 f"({'meets the limits' if self.feasible else 'DOES NOT meet the limits'})"]
        lines.append(f"{'limit':<24}{'limit value':>12}{'figure':>12}{'margin':>12}  unit")
        for name, margin in self.margins.items():
            lines.append(f"{name:<24}{getattr(self.limits, name):>12.4g}"
                         f"{self.figures[name]:>12.4g}{margin:>12.4g}  {UNITS[name]}")
        dp = self.hydraulics.get("pressure_drop_Pa")
        pump = self.hydraulics.get("pump_power_W")
        if dp is not None:
            lines.append(f"{'pressure drop':<24}{dp / 1e3:>36.4g}  kPa")
        if pump is not None:
            lines.append(f"{'pump power':<24}{pump:>36.4g}  W")
        for warning in self.hydraulics.get("warnings", []) or []:
            lines.append(f"warning: {warning}")
        where = "" if self.position is None else f"; worst cell position {self.position}"
        lines.append(f"{self.evaluations} runs{where}")
        lines.append(self.message)
        return "\n".join(lines)

    def __repr__(self) -> str:
        state = "feasible" if self.feasible else "infeasible"
        return (f"<SizingResult {self.vary}={self.value:.4g} ({state}, {self.evaluations} runs, "
                f"monotone={self.monotone})>")

    def _repr_html_(self) -> str:
        import html

        return f"<pre>{html.escape(self.table())}</pre>"


def size_cooling(cell, duty, cooling, vary: str, bounds, limits: Limits, *, positions=None,
                 samples: int = 5, rtol: float = 0.005, spacing: str = "auto",
                 max_evaluations: int = 40, strict: bool = False,
                 **simulate_kwargs) -> SizingResult:
    """Find the value of one design parameter at the boundary of the limits.

    Parameters
    ----------
    cell : Cell
        From :func:`explorer.load_cell`.
    duty : Step or list of Step
        From :mod:`explorer.duty`.
    cooling : cooling design
        From :mod:`explorer.cooling`; ``vary`` must be one of its ``parameters()``.
    vary : str
        The parameter to size, e.g. ``"flow_L_min"``, ``"inlet_C"``, ``"fin_mm"``.
    bounds : (float, float)
        ``(lo, hi)`` in the unit of ``vary``, ``lo < hi``.
    limits : Limits
        What must be met.
    positions : list of int, optional
        Cell positions along the coolant path to check (default:
        ``cooling.positions_to_check()``). All are run at the first samples;
        only the positions that are worst next to the boundary are run while
        refining, and the answer is re-checked at every position (searching
        again with all of them if another one fails there).
    samples, rtol, spacing, max_evaluations
        Search settings, see :func:`find_boundary`.
    strict : bool
        Raise :class:`SizingError` when the bounds do not bracket the boundary
        (all values meet, or none does) instead of reporting it in the result.
    **simulate_kwargs
        Passed to :func:`explorer.simulate` (electrochemistry, layout, grid...).

    Returns
    -------
    SizingResult

    Examples
    --------
    >>> import explorer
    >>> from explorer import cooling, duty
    >>> cell = explorer.load_cell("van_nmc_66ah")                          # doctest: +SKIP
    >>> plate = cooling.cold_plate("eg50", flow_L_min=4.0, inlet_C=30.0, cells_per_plate=12)
    >>> design = cooling.edge_plate(plate, edge="bottom", fin_mm=1.0)
    >>> res = explorer.size_cooling(cell, duty.discharge(c_rate=1.5), design, vary="fin_mm",
    ...                             bounds=(0.2, 3.0),
    ...                             limits=explorer.Limits(temperature_max_C=45, spread_K=5),
    ...                             grid=(12, 8))                             # doctest: +SKIP
    >>> print(res.table())                                                  # doctest: +SKIP
    """
    if not isinstance(limits, Limits):
        raise InputError(f"size_cooling: `limits` must be an explorer.Limits, got "
                         f"{type(limits).__name__}")
    lo, hi = _check_bounds(bounds)
    params = _parameters(cooling)
    if vary not in params:
        raise InputError(f"size_cooling: `vary` = {vary!r} is not a parameter of this cooling "
                         f"design; expected one of {sorted(params)}")
    if positions is None:
        positions = list(cooling.positions_to_check()) if hasattr(cooling, "positions_to_check") \
            else [None]
    positions = list(positions) or [None]
    # Both ends must be valid designs (the design validates its own inputs).
    for end in (lo, hi):
        _replace(cooling, vary, end)
    limits.check_reachable(_coldest_sink(cooling, vary, lo, hi), where="size_cooling")

    runner = _Runner(cell, duty, cooling, vary, limits, positions, simulate_kwargs)
    integer = _is_integer(cooling, vary, lo, hi)
    search = {"samples": samples, "rtol": rtol, "spacing": spacing,
              "max_evaluations": max_evaluations, "integer": integer}
    outcome = find_boundary(runner.margin, lo, hi, on_sampled=runner.choose_positions, **search)
    if len(runner.active) < len(positions):
        outcome = _recheck_all_positions(runner, outcome, lo, hi, search)
    if strict and outcome.kind != "boundary":
        raise SizingError(_message(outcome, vary, lo, hi, runner, limits))
    worst = runner.worst(outcome.value, positions)
    design = _replace(cooling, vary, outcome.value)
    curve = runner.curve()
    names = ["temperature_max_C", "spread_K", *limits.names()]
    tps = {name: turning_points(curve["value"].values, curve[name].values)
           for name in dict.fromkeys(names) if name in curve}
    return SizingResult(
        vary=vary, bounds=(lo, hi), limits=limits, value=outcome.value, feasible=worst["met"],
        dataset=runner.dataset(outcome.value, worst["position"]), curve=curve, margins=worst["margins"],
        figures=worst["figures"], hydraulics=runner.hydraulics(outcome.value), design=design,
        increasing=outcome.increasing, monotone=not any(tps.values()), turning_points={k: v for k, v in tps.items() if v},
        message=_message(outcome, vary, lo, hi, runner, limits, tps),
        kind=outcome.kind, position=worst["position"], evaluations=runner.runs)


def _recheck_all_positions(runner, outcome, lo, hi, search):
    """After refining at one position, confirm the answer at all; search again if it fails."""
    runner.active = list(runner.positions)
    if runner.margin(outcome.value) >= 0.0 or not outcome.feasible:
        return outcome
    log.info("another cell position is worse at %g; searching again with all positions",
             outcome.value)
    return find_boundary(runner.margin, lo, hi, **search)


def _is_integer(cooling, vary, lo, hi) -> bool:
    """A whole-number parameter: integer bounds and value, and the design refuses a fraction."""
    current = cooling.parameters()[vary]
    if not all(float(v).is_integer() for v in (lo, hi, current)) or hi - lo < 1:
        return False
    try:
        cooling.replace(**{vary: lo + 0.5})
    except (ValueError, TypeError):
        return True
    return False


def _check_bounds(bounds) -> tuple[float, float]:
    try:
        lo, hi = (float(b) for b in bounds)
    except (TypeError, ValueError):
        raise InputError(f"size_cooling: `bounds` must be two numbers (lo, hi), got "
                         f"{bounds!r}") from None
    if not (math.isfinite(lo) and math.isfinite(hi)):
        raise InputError(f"size_cooling: `bounds` must be finite, got {bounds!r}")
    if lo >= hi:
        raise InputError(f"size_cooling: `bounds` must have lo < hi, got lo={lo:g}, hi={hi:g}")
    return lo, hi


def _parameters(cooling) -> dict:
    if cooling is None or not hasattr(cooling, "parameters"):
        raise InputError("size_cooling: `cooling` must be a design from explorer.cooling "
                         f"(with parameters() and replace()), got {cooling!r}")
    return dict(cooling.parameters())


def _replace(cooling, vary, value):
    try:
        return cooling.replace(**{vary: value})
    except (ValueError, TypeError) as exc:
        raise InputError(f"size_cooling: `{vary}` = {value:g} is not a valid design value: "
                         f"{exc}") from None


def _coldest_sink(cooling, vary, lo, hi) -> float:
    """Coldest coolant inlet, ambient or busbar temperature over the bounds (degC)."""
    temps = [v for k, v in cooling.parameters().items()
             if k.endswith("_C") and k != vary and v is not None]
    if vary.endswith("_C"):
        temps.append(lo)
    return min(temps) if temps else -math.inf


def _simulate(cell, duty, **kwargs):
    from explorer.simulate import simulate

    return simulate(cell, duty, **kwargs)


def _call_simulate(cell, duty, design, position, kwargs):
    kw = dict(kwargs)
    if position is not None:
        kw["position"] = position
    return _simulate(cell, duty, cooling=design, **kw)


class _Runner:
    """Runs the simulation per (value, position), caches figures, scores margins."""

    def __init__(self, cell, duty, cooling, vary, limits, positions, simulate_kwargs):
        self.cell, self.duty, self.cooling, self.vary = cell, duty, cooling, vary
        self.limits, self.positions = limits, list(positions)
        self.active = list(positions)
        self.kwargs = simulate_kwargs
        self.results: dict = {}  # (value, position) -> limits check
        self.datasets: dict = {}  # (value, position) -> Dataset, pruned as the search goes
        self._hydraulics: dict = {}
        self.runs = 0

    def hydraulics(self, value) -> dict:
        """The design's hydraulics at ``value`` (recorded by the run, or asked of the design)."""
        if value not in self._hydraulics:
            design = _replace(self.cooling, self.vary, value)
            h = design.hydraulics() if hasattr(design, "hydraulics") else {}
            self._hydraulics[value] = dict(h or {})
        return self._hydraulics[value]

    def _simulate(self, value, position):
        design = _replace(self.cooling, self.vary, value)
        try:
            ds = _call_simulate(self.cell, self.duty, design, position, self.kwargs)
        except InputError:
            raise
        except Exception as exc:  # report which design failed, not where inside
            raise SizingError(f"size_cooling: the run at `{self.vary}` = {value:g} "
                              f"(position {position}) failed: {exc}") from exc
        self.runs += 1
        if ds.attrs.get("status") == "failed":
            raise SizingError(f"size_cooling: the run at `{self.vary}` = {value:g} "
                              f"(position {position}) failed: "
                              f"{ds.attrs.get('status_message', '')}")
        return ds

    def run(self, value, position) -> dict:
        """The limits check of one run (simulated once, then cached)."""
        key = (value, position)
        if key not in self.results:
            ds = self._simulate(value, position)
            recorded = run_hydraulics(ds)
            if recorded is not None:
                self._hydraulics.setdefault(value, recorded)
            self.results[key] = self.limits.check(ds, self.hydraulics(value))
            self.datasets[key] = ds
            self._prune()
        return self.results[key]

    def dataset(self, value, position):
        """The run's Dataset; re-simulated if it was dropped to save memory."""
        key = (value, position)
        if key not in self.results:
            self.run(value, position)
        if key not in self.datasets:
            self.datasets[key] = self._simulate(value, position)
        return self.datasets[key]

    def _prune(self) -> None:
        """Keep full Datasets only where the answer can be: the best value and the feasible
        value nearest the boundary (fields of a fine grid are large)."""
        score: dict = {}
        for (v, _), check in self.results.items():
            score[v] = min(score.get(v, math.inf), check["worst_margin"])
        keep = {max(score, key=score.get)}
        feasible = [v for v in score if score[v] >= 0.0]
        if feasible:
            keep.add(min(feasible, key=score.get))
        for key in [k for k in self.datasets if k[0] not in keep]:
            del self.datasets[key]

    def worst(self, value, positions=None) -> dict:
        """Worst figures over positions (every figure is worse when larger)."""
        positions = self.active if positions is None else positions
        checks = {p: self.run(value, p) for p in positions}
        figures = {}
        for check in checks.values():
            for name, v in check["figures"].items():
                if v is not None:
                    figures[name] = max(v, figures.get(name, -math.inf))
                else:
                    figures.setdefault(name, None)
        margins = {name: getattr(self.limits, name) - figures[name] for name in self.limits.names()}
        scaled = self.limits.scaled_margins(margins)
        worst_position = min(checks, key=lambda p: checks[p]["worst_margin"])
        return {"figures": figures, "margins": margins, "scaled": min(scaled.values()),
                "met": min(scaled.values()) >= 0.0, "position": worst_position}

    def margin(self, value) -> float:
        return self.worst(value)["scaled"]

    def choose_positions(self) -> None:
        """Refine at the positions that are worst where the margin is nearest zero.

        Near the boundary the worst cell decides; the answer is re-checked at
        every position afterwards (see :func:`_recheck_all_positions`).
        """
        if len(self.positions) < 2:
            return
        values = sorted({v for v, _ in self.results})
        rows = {v: self.worst(v, self.positions) for v in values}
        met = [rows[v]["met"] for v in values]
        edges = [v for k, v in enumerate(values)
                 if (k > 0 and met[k] != met[k - 1]) or (k + 1 < len(values) and met[k] != met[k + 1])]
        nearest = edges or sorted(values, key=lambda v: abs(rows[v]["scaled"]))[:2]
        self.active = sorted({rows[v]["position"] for v in nearest},
                             key=self.positions.index)

    def curve(self) -> xr.Dataset:
        """Every value evaluated, as a Dataset over ``value``.

        The figures are the worst over the positions run at *every* value (the
        ones that decided the refinement), so the curve is consistent along
        ``value``; ``positions_checked`` counts all positions run at a value.
        """
        values = sorted({v for v, _ in self.results})
        ran = {v: [p for p in self.positions if (v, p) in self.results] for v in values}
        common = [p for p in self.positions if all(p in ran[v] for v in values)]
        rows = [self.worst(v, common) for v in values]
        data = {}
        names = list(dict.fromkeys(["temperature_max_C", "spread_K", *self.limits.names(),
                                    *rows[0]["figures"]]))
        for name in names:
            col = [r["figures"].get(name) for r in rows]
            if all(c is None for c in col):
                continue
            data[name] = ("value", np.array([np.nan if c is None else c for c in col]),
                          {"units": UNITS[name], "long_name": name.replace("_", " ")})
        for name in self.limits.names():
            data[f"margin_{name}"] = ("value", np.array([r["margins"][name] for r in rows]),
                                      {"units": UNITS[name].replace("degC", "K"),
                                       "long_name": f"margin on {name} (positive = met)"})
        data["worst_margin"] = ("value", np.array([r["scaled"] for r in rows]),
                                {"units": "1", "long_name": "worst scaled margin "
                                 "(K for temperatures, fraction for hydraulics)"})
        data["feasible"] = ("value", np.array([int(r["met"]) for r in rows], dtype="int8"),
                            {"units": "1", "long_name": "all limits met (1) or not (0)"})
        data["position"] = ("value", np.array([-1 if r["position"] is None else r["position"]
                                               for r in rows]),
                            {"units": "1", "long_name": "worst cell position (-1: single)"})
        data["positions_checked"] = ("value", np.array([len(ran[v]) for v in values]),
                                     {"units": "1", "long_name": "cell positions run"})
        curve = xr.Dataset(data, coords={"value": ("value", np.array(values),
                                                   {"long_name": self.vary,
                                                    "units": parameter_unit(self.vary)})})
        curve.attrs.update({"vary": self.vary, "positions": json.dumps(common),
                            **{f"limit_{k}": v for k, v in self.limits.as_dict().items()}})
        return curve


def parameter_unit(name: str) -> str:
    """The CF-style unit of a design parameter, read from its name's suffix."""
    for suffix, unit in (("_L_min", "L min-1"), ("_W_m2K", "W m-2 K-1"), ("_W_mK", "W m-1 K-1"),
                         ("_W_K", "W K-1"), ("_mm", "mm"), ("_kPa", "kPa"), ("_C", "degC"),
                         ("_K", "K"), ("_W", "W")):
        if name.endswith(suffix):
            return unit
    return "1"


def run_hydraulics(ds) -> dict | None:
    """The hydraulics a run recorded in its ``hydraulics`` attribute (None when absent)."""
    text = ds.attrs.get("hydraulics")
    if text is None:
        return None
    try:
        value = json.loads(text) if isinstance(text, str) else dict(text)
    except (TypeError, ValueError):
        return None
    return value if isinstance(value, dict) else None


def _message(outcome, vary, lo, hi, runner, limits, tps=None) -> str:
    value = outcome.value
    worst = runner.worst(value, runner.positions)
    figs = ", ".join(f"{n} {worst['figures'][n]:.4g} {UNITS[n]} (limit {getattr(limits, n):g}, "
                     f"margin {worst['margins'][n]:+.3g})" for n in limits.names())
    if outcome.kind == "none_met":
        msg = (f"no value of `{vary}` in [{lo:g}, {hi:g}] meets the limits; the best evaluated "
               f"is {value:.4g}: {figs}")
    elif outcome.kind == "all_met":
        end = "lo" if outcome.increasing else "hi"
        msg = (f"every evaluated value of `{vary}` in [{lo:g}, {hi:g}] meets the limits; the "
               f"boundary lies beyond the {end} bound, so the bound {value:.4g} is returned "
               f"(widen the bounds to find the boundary): {figs}")
    else:
        a, b = outcome.bracket
        better = "larger" if outcome.increasing else "smaller"
        msg = (f"`{vary}` = {value:.4g} meets the limits ({better} values help); "
               f"{b:.4g} does not: {figs}")
    if outcome.islands:
        spans = ", ".join(f"{a:.4g}..{b:.4g}" for a, b in outcome.islands)
        msg += f"; the limits are also met at {spans} (separate region, not monotone)"
    sheet = getattr(runner.cell, "temperature_max_C", None)
    for name in ("temperature_max_C", "core_temperature_max_C"):
        value = getattr(limits, name)
        if value is not None and sheet is not None and value > sheet:
            msg += (f"; note: `{name}` = {value:g} degC is above the cell's data-sheet maximum "
                    f"{sheet:g} degC")
    if tps:
        bad = {k: v for k, v in tps.items() if v}
        if bad:
            msg += "; not monotone: " + ", ".join(
                f"{k} turns at {', '.join(f'{x:.4g}' for x in v)}" for k, v in bad.items())
    return msg
