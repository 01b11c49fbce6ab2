"""Size one cooling design parameter against the design limits.

:func:`size_cooling` finds, for one design parameter (``vary``, any name of
``cooling.parameters()``: a flow, an inlet temperature, a fin or interface
thickness...), the cheapest value inside ``bounds`` that meets every limit.

What is cheap is declared, not inferred: :data:`DESIGN_PARAMETERS` gives
every design parameter the direction that costs less (less flow, a warmer
inlet, a thinner fin or interface layer, fewer channels, a lower interface
conductivity...), its default bounds with their unit and the resolution its
answer is rounded to. The margins of the figures only say where the limits
are met; a spread that grows with flow, say, does not make more flow cheaper.

The search (:func:`find_boundary`) works on the worst scaled margin of all
limits (positive = every limit met), on the values the resolution allows
(whole multiples of it inside the bounds, so every evaluated value is a
rounded one and every reported margin is that of a run at the answer):

1. evaluate a few values across the bounds (the ends included; geometric
   spacing when the bounds span a factor of four or more, since thermal
   figures tend to vary with the reciprocal of a flow or a conductance):
   three when each evaluation is a module run or several cell positions,
   five for one cell (``samples="auto"``);
2. walk them from the cheap end toward the expensive end to the first one
   that meets the limits. If it is the cheap end itself, that is the answer
   ("limited by the lower/upper bound"); if none does, the answer is the
   best evaluated value ("none met");
3. otherwise that value and the cheaper one before it bracket the boundary;
   shrink the bracket until the two are one resolution step apart. The
   margin is smooth in the parameter, so each probe comes from the points
   evaluated nearest the boundary (a quadratic through three, else a secant,
   else false position on the bracket), rounded to the feasible side so the
   next probe, one step cheaper, usually closes it; a bisection follows two
   slow steps. The answer meets the limits and one step cheaper does not;
   a module sizing typically takes five to seven runs.

``size_cooling(..., check_fidelity=True)`` then checks the answer on the
fuller models (:func:`explorer.check_fidelity`).

Figures that do not change monotonically over the evaluated values are
reported (``SizingResult.monotone`` and ``.turning_points``), and feasible
values more expensive than a failing stretch are named, never hidden.

A design whose coolant serves several cells one after another is judged as a
module (:func:`explorer.simulate_module`, when present): the worst cell and
the cell-to-cell figure of the whole module, every evaluation.
"""

from __future__ import annotations

import json
import logging
import math
from dataclasses import dataclass, field

import numpy as np
import xarray as xr

from explorer.limits import UNITS, Limits
from explorer.validators import InputError, check_integer, short_repr

log = logging.getLogger(__name__)

# Changes of a scaled margin smaller than this (1 mK, or 1e-3 of a hydraulic
# limit) are noise of the time stepping, not a change of trend.
TREND_ATOL = 1e-3
BOUND_NAMES = {"lower": "lower bound", "higher": "upper bound"}
SPACINGS = ("auto", "linear", "geometric")
# First samples at most: each is a full simulation, and a typo (10**9) must not allocate them.
MAX_SAMPLES = 1000


class SizingError(InputError):
    """A sizing request that cannot be carried out (bad bounds, a plate that does not fit,
    failed runs)."""


# --------------------------------------------------------------------------- design parameters


def _check_cheaper(cheaper, where) -> str:
    if not isinstance(cheaper, str) or cheaper not in ("lower", "higher"):
        raise InputError(f"{where}: `cheaper` must be 'lower' or 'higher', "
                         f"got {short_repr(cheaper)}")
    return cheaper


def _check_spacing(spacing) -> str:
    if not isinstance(spacing, str) or spacing not in SPACINGS:
        raise InputError(f"size_cooling: `spacing` must be 'auto', 'linear' or 'geometric', "
                         f"got {short_repr(spacing)}")
    return spacing


def _check_count(name: str, value, low: int, high: int | None = None) -> int:
    """A whole-number search setting, the error prefixed like the other sizing errors."""
    try:
        return check_integer(name, value, low, high)
    except InputError as exc:
        raise InputError(f"size_cooling: {exc}") from None


@dataclass(frozen=True)
class DesignParameter:
    """What sizing needs to know about one design parameter.

    Attributes
    ----------
    name : str
        The parameter's name in ``cooling.parameters()``.
    unit : str
        Its unit in words (``"L/min"``, ``"degC"``, ``"mm"``...).
    cheaper : {"lower", "higher"}
        Which direction costs less.
    bounds : (float, float)
        Default sizing bounds, in ``unit``.
    resolution : float
        The step the answer is rounded to, in ``unit`` (in the safe direction:
        the answer meets the limits, one step cheaper does not).
    label : str
        A short description for tables and the app.
    """

    name: str
    unit: str
    cheaper: str
    bounds: tuple[float, float]
    resolution: float
    label: str

    def __post_init__(self):
        _check_cheaper(self.cheaper, self.name)
        lo, hi = self.bounds
        if not (lo < hi and self.resolution > 0):
            raise InputError(f"DesignParameter {self.name!r}: expected lo < hi and a "
                             f"resolution > 0, got bounds {self.bounds!r}, resolution "
                             f"{self.resolution!r}")

    @property
    def cheap_bound(self) -> float:
        """The default bound that costs less."""
        return self.bounds[0] if self.cheaper == "lower" else self.bounds[1]


def _p(name, unit, cheaper, bounds, resolution, label):
    return DesignParameter(name, unit, cheaper, (float(bounds[0]), float(bounds[1])),
                           float(resolution), label)


# Cheaper directions: less flow, a warmer coolant or sink, thinner and fewer parts, a lower
# (cheaper) interface conductivity, fewer plates per module (common practice; the first five
# are those the design brief names). Bounds and resolutions are typical design ranges for pouch
# modules (common practice, order of magnitude).
DESIGN_PARAMETERS: dict[str, DesignParameter] = {p.name: p for p in (
    # cold plate
    _p("flow_L_min", "L/min", "lower", (0.1, 20.0), 0.05, "coolant flow through the plate"),
    _p("inlet_C", "degC", "higher", (5.0, 45.0), 0.5, "coolant inlet temperature"),
    _p("channels", "channels", "lower", (1, 40), 1, "parallel channels in the plate"),
    _p("channel_width_mm", "mm", "lower", (2.0, 30.0), 0.5, "channel width"),
    _p("channel_height_mm", "mm", "lower", (1.0, 10.0), 0.5, "channel height (plate depth)"),
    _p("rib_mm", "mm", "lower", (0.5, 10.0), 0.5, "rib between channels"),
    _p("wall_mm", "mm", "lower", (0.5, 5.0), 0.1, "top wall over the channels"),
    _p("length_mm", "mm", "lower", (100.0, 2000.0), 10.0, "channel flow length"),
    _p("roughness_um", "um", "higher", (0.0, 50.0), 0.5, "channel roughness (rougher: "
       "less finishing)"),
    _p("cells_per_plate", "cells", "higher", (1, 24), 1, "cells one plate serves (more: "
       "fewer plates)"),
    _p("bends", "bends", "lower", (0, 10), 1, "return bends along each channel"),
    _p("pump_efficiency", "1", "lower", (0.2, 0.9), 0.05, "pump efficiency"),
    # fixed sink, convection
    _p("temperature_C", "degC", "higher", (5.0, 45.0), 0.5, "sink temperature"),
    _p("h_W_m2K", "W/(m2 K)", "lower", (5.0, 5000.0), 1.0, "heat transfer coefficient"),
    _p("conductance_W_mK", "W/(m K)", "lower", (1.0, 1000.0), 0.5,
       "sink conductance per metre of edge"),
    _p("ambient_C", "degC", "higher", (5.0, 45.0), 0.5, "ambient temperature"),
    # interface and fin
    _p("tim_W_mK", "W/(m K)", "lower", (0.5, 10.0), 0.1, "interface conductivity"),
    _p("tim_mm", "mm", "lower", (0.05, 3.0), 0.05, "interface layer thickness"),
    _p("faces_per_plate", "faces", "higher", (1, 2), 1, "cell faces one plate serves"),
    _p("fin_mm", "mm", "lower", (0.1, 3.0), 0.05, "fin thickness"),
    _p("fin_contact_W_m2K", "W/(m2 K)", "lower", (200.0, 20000.0), 50.0,
       "cell face to fin contact coefficient"),
    _p("foot_mm", "mm", "lower", (1.0, 30.0), 0.5, "contact width on the plate"),
    # tab cooling
    _p("conductance_W_K", "W/K", "lower", (0.1, 20.0), 0.05, "tab to busbar conductance"),
    _p("busbar_C", "degC", "higher", (5.0, 45.0), 0.5, "busbar temperature"),
)}


def design_parameter(name: str) -> DesignParameter:
    """The :class:`DesignParameter` of ``name``.

    A combined design's prefixed name (``"edge_plate.tim_mm"``) gives the
    entry of its own name (``"tim_mm"``), renamed.

    >>> design_parameter("flow_L_min").cheaper
    'lower'
    >>> design_parameter("edge_plate.tim_mm").name
    'edge_plate.tim_mm'
    """
    if not isinstance(name, str):
        raise InputError(f"design_parameter: expected a parameter name, got {name!r}")
    own = name.rsplit(".", 1)[-1]
    if own not in DESIGN_PARAMETERS:
        raise InputError(f"design_parameter: no sizing entry for `{name}`; known parameters: "
                         f"{', '.join(sorted(DESIGN_PARAMETERS))} (or give `cheaper`, `bounds` "
                         "and `resolution` to size_cooling)")
    p = DESIGN_PARAMETERS[own]
    return p if own == name else DesignParameter(name, p.unit, p.cheaper, p.bounds,
                                                 p.resolution, p.label)


# --------------------------------------------------------------------------- the 1-D search


@dataclass
class Boundary:
    """Outcome of :func:`find_boundary`.

    ``kind`` is "limits" (the limits decide: ``value`` meets them, one step
    cheaper does not), "lower bound" / "upper bound" (the cheap end meets the
    limits: the bound decides) or "none met" (no evaluated value does;
    ``value`` is the best evaluated).
    """

    value: float
    feasible: bool
    kind: str
    cheaper: str
    increasing: bool  # the margin grows with the value (read from the samples; for reports)
    values: np.ndarray  # every evaluated value, sorted
    margins: np.ndarray  # the margin at each
    bracket: tuple[float, float] | None = None  # (answer, the failing value one step cheaper)
    islands: list = field(default_factory=list)  # other feasible stretches seen (not monotone)
    resolution: float = 0.0


class _Lattice:
    """The values a parameter can take: whole multiples of ``step`` inside ``[lo, hi]``."""

    def __init__(self, lo: float, hi: float, step: float):
        if not (math.isfinite(step) and step > 0):
            raise InputError(f"size_cooling: `resolution` must be a number > 0, got {step!r}")
        self.step = step
        self.k_lo = math.ceil(lo / step - 1e-9)
        self.k_hi = math.floor(hi / step + 1e-9)
        if self.k_hi <= self.k_lo:
            raise InputError(f"size_cooling: the bounds [{lo:g}, {hi:g}] hold fewer than two "
                             f"values at resolution {step:g}; widen them or give a finer "
                             "`resolution`")
        self.digits = max(0, -math.floor(math.log10(step))) + 3

    def value(self, k: int) -> float:
        return round(k * self.step, self.digits)

    def index(self, x: float) -> int:
        return min(max(int(round(x / self.step)), self.k_lo), self.k_hi)


def sample_points(lo: float, hi: float, samples: int, spacing: str = "auto") -> np.ndarray:
    """The first evaluation points: ``samples`` values from ``lo`` to ``hi`` inclusive."""
    _check_spacing(spacing)
    samples = _check_count("samples", samples, 2, MAX_SAMPLES)
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


def find_boundary(margin, lo: float, hi: float, *, cheaper: str, resolution: float,
                  samples: int = 5, spacing: str = "auto", max_evaluations: int = 40,
                  on_sampled=None) -> Boundary:
    """The cheapest value in ``[lo, hi]`` with ``margin(value) >= 0``, to ``resolution``.

    Parameters
    ----------
    margin : callable
        ``margin(value) -> float``, positive where the limits are met.
    lo, hi : float
        The bounds, ``lo < hi``.
    cheaper : {"lower", "higher"}
        Which end costs less.
    resolution : float
        Only whole multiples of it inside the bounds are evaluated; the answer
        is one of them and, when the limits decide it, one step cheaper fails.
    samples : int
        Values evaluated first (ends included), at least 3.
    max_evaluations : int
        Hard cap on evaluations of ``margin``.
    on_sampled : callable, optional
        Called with no arguments once the first samples are evaluated (the
        sizing uses it to narrow the cell positions it runs while refining).

    Returns
    -------
    Boundary

    Examples
    --------
    >>> b = find_boundary(lambda q: 45.0 - (25.0 + 30.0 / q), 0.5, 10.0, cheaper="lower",
    ...                   resolution=0.05)
    >>> b.value, b.kind, b.bracket
    (1.5, 'limits', (1.5, 1.45))
    """
    _check_cheaper(cheaper, "find_boundary")
    _check_spacing(spacing)
    samples = _check_count("samples", samples, 3, MAX_SAMPLES)
    max_evaluations = _check_count("max_evaluations", max_evaluations, 1)
    lat = _Lattice(lo, hi, resolution)
    seen: dict[int, float] = {}

    def f(k: int) -> float:
        if k not in seen:
            if len(seen) >= max_evaluations:
                raise SizingError(f"size_cooling: no answer within {max_evaluations} "
                                  "evaluations; raise `max_evaluations` or `resolution`")
            value = float(margin(lat.value(k)))
            if math.isnan(value):
                raise SizingError(f"size_cooling: the margin at {lat.value(k):g} is NaN")
            seen[k] = value
        return seen[k]

    xs = sample_points(lat.value(lat.k_lo), lat.value(lat.k_hi), samples, spacing)
    ks = sorted({lat.index(x) for x in xs} | {lat.k_lo, lat.k_hi})
    for k in ks:
        f(k)
    if on_sampled is not None:
        on_sampled()
    ms = [seen[k] for k in ks]
    increasing = bool(ms[-1] > ms[0]) if ms[-1] != ms[0] else bool(np.polyfit(ks, ms, 1)[0] >= 0)
    order = ks if cheaper == "lower" else ks[::-1]  # cheap -> expensive

    def outcome(k, kind, bracket=None, islands=()):
        done = sorted(seen)
        return Boundary(lat.value(k), seen[k] >= 0.0, kind, cheaper, increasing,
                        np.array([lat.value(j) for j in done]), np.array([seen[j] for j in done]),
                        bracket, list(islands), resolution)

    met = [seen[k] >= 0.0 for k in order]
    if met[0]:
        return outcome(order[0], BOUND_NAMES[cheaper], islands=_islands(order, met, order[0], lat))
    if not any(met):
        return outcome(max(order, key=lambda k: seen[k]), "none met")
    j = met.index(True)
    # thermal figures go nearly linearly with the reciprocal of a flow or a conductance
    reciprocal = lat.k_lo > 0 and (spacing == "geometric" or (
        spacing == "auto" and lat.k_hi / lat.k_lo >= 4.0))
    fail, ok = _refine(f, order[j - 1], order[j], reciprocal)
    return outcome(ok, "limits", bracket=(lat.value(ok), lat.value(fail)),
                   islands=_islands(order, met, order[j], lat))


def _islands(order, met, anchor, lat) -> list[tuple[float, float]]:
    """Feasible stretches of samples other than the one holding ``anchor`` (sorted values)."""
    pairs = sorted(zip(order, met))
    runs, start = [], None
    for n, (_, m) in enumerate(pairs + [(None, False)]):
        if m and start is None:
            start = n
        if not m and start is not None:
            run = [pairs[i][0] for i in range(start, n)]
            if anchor not in run:
                runs.append((lat.value(run[0]), lat.value(run[-1])))
            start = None
    return runs


def _refine(f, fail: int, ok: int, reciprocal: bool = False) -> tuple[int, int]:
    """Shrink a bracket of lattice indices (``fail`` fails, ``ok`` meets) to neighbours.

    The margin is smooth in the parameter, so the next index comes from the
    points evaluated nearest the boundary (see :func:`_estimate_root`; against
    the reciprocal of the value when ``reciprocal``, indices > 0), rounded to
    the feasible side of the estimated root so the following probe, one step
    cheaper, usually closes the bracket. After two steps in a row that do not
    halve the bracket, a bisection follows (guaranteed progress).
    """
    points = {fail: f(fail), ok: f(ok)}
    weights = dict(points)  # the bracket ends' margins for false position (Illinois-scaled)
    slow, kept = 0, None  # steps in a row that did not halve the bracket; the end kept last
    while abs(ok - fail) > 1:
        width = abs(ok - fail)
        lo, hi = sorted((fail, ok))
        if slow >= 2:
            k = (fail + ok) // 2
        else:
            root = _estimate_root(points, weights, fail, ok, reciprocal)
            k = math.ceil(root) if ok > fail else math.floor(root)
        k = min(max(k, lo + 1), hi - 1)
        m = points[k] = f(k)
        if m >= 0.0:
            if kept == "fail":  # the same end kept twice: halve its weight (Illinois rule)
                weights[fail] /= 2.0
            ok, weights[k], kept = k, m, "fail"
        else:
            if kept == "ok":
                weights[ok] /= 2.0
            fail, weights[k], kept = k, m, "ok"
        slow = slow + 1 if abs(ok - fail) > width / 2 else 0
    return fail, ok


def _estimate_root(points: dict, weights: dict, fail: int, ok: int, reciprocal: bool) -> float:
    """Where the margin crosses zero inside the bracket, as a (fractional) lattice index.

    A quadratic through the three evaluated points nearest the boundary (the
    smallest margins), else the secant of the two nearest, else false position
    on the bracket ends; the first estimate that falls inside the bracket wins.
    """
    lo, hi = sorted((fail, ok))
    u = (lambda k: 1.0 / k) if reciprocal else float  # the axis the margin is taken smooth on

    def back(x):  # from the axis to an index (None when off the axis' range)
        if not reciprocal:
            return x
        return 1.0 / x if x > 0.0 else None

    def inside(candidates):
        ks = [k for k in (back(x) for x in candidates) if k is not None and lo < k < hi]
        return min(ks, key=lambda k: abs(k - near[0])) if ks else None

    near = sorted(points, key=lambda k: abs(points[k]))
    if len(near) >= 3:
        xs, ys = [u(k) for k in near[:3]], [points[k] for k in near[:3]]
        with np.errstate(all="ignore"):
            coef = np.polyfit(xs, ys, 2)
            roots = [r.real for r in np.roots(coef) if abs(r.imag) <= 1e-12 * (1 + abs(r))]
        found = inside(roots) if np.all(np.isfinite(coef)) else None
        if found is not None:
            return found
    a, b = near[0], near[1]
    if points[a] != points[b]:
        found = inside([u(a) - points[a] * (u(b) - u(a)) / (points[b] - points[a])])
        if found is not None:
            return found
    w_fail, w_ok = weights[fail], weights[ok]
    found = inside([u(fail) + (u(ok) - u(fail)) * (-w_fail) / (w_ok - w_fail)])
    return (lo + hi) / 2.0 if found is None else found


# --------------------------------------------------------------------------- sizing a design


@dataclass
class SizingResult:
    """The outcome of :func:`size_cooling`.

    Attributes
    ----------
    value : float
        The design value found (in the unit of ``vary``), a whole multiple of
        ``resolution``: the cheapest that meets every limit, the cheap bound,
        or (``limited_by == "none met"``) the best value evaluated.
    feasible : bool
        Whether ``value`` meets every limit.
    limited_by : str
        "limits" (one resolution step cheaper fails), "lower bound" / "upper
        bound" (the cheap bound meets the limits) or "none met".
    resolution, unit, cheaper
        The step of the answer, its unit, and which direction costs less.
    dataset : xarray.Dataset
        The run at ``value``: the worst cell (of the module run, or of the
        cell positions run).
    module : xarray.Dataset or None
        The whole module run at ``value`` (dimension ``cell``), when the
        design was judged as a module.
    curve : xarray.Dataset
        Every evaluated value (dimension ``value``) with ``temperature_max_C``,
        ``spread_K``, each limit's figure, each margin and ``worst_margin``.
    margins : dict
        Limit name -> margin at ``value`` (limit minus figure, positive =
        met), from the run at ``value`` itself.
    figures : dict
        Figure name -> value at ``value`` (worst over cells).
    hydraulics : dict
        ``design.hydraulics()`` at ``value`` ({} for designs without a plate);
        the plate's channels only (no manifolds, pipes or connectors).
    increasing : bool
        Whether larger values help (the margin grows with the value), read
        from the runs; reported, not used to decide what is cheap.
    monotone : bool
        Whether every limit's figure changed monotonically over the evaluated values.
    turning_points : dict
        Figure name -> values where its trend reverses (empty when monotone).
    position : int or None
        The worst cell (0 = first along the coolant).
    cells : int or None
        Cells in the module run (None when positions were run one at a time).
    warnings : list of str
        What a reviewer must see beside the answer (the run at ``value``).
    message : str
        What was found, in words.
    fidelity : xarray.Dataset or None
        The fidelity check of the answer (:func:`explorer.check_fidelity`)
        when ``size_cooling(..., check_fidelity=True)``; its summary is also
        in ``dataset.attrs["fidelity_summary"]``.
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
    limited_by: str
    resolution: float
    unit: str
    cheaper: str
    position: int | None
    evaluations: int
    module: xr.Dataset | None = None
    cells: int | None = None
    warnings: list = field(default_factory=list)
    fidelity: xr.Dataset | None = None

    @property
    def kind(self) -> str:
        """Deprecated name of :attr:`limited_by`."""
        return self.limited_by

    def table(self) -> str:
        """A plain-text table: the design value, each limit with figure and margin, hydraulics."""
        state = "meets the limits" if self.feasible else "DOES NOT meet the limits"
        lines = [f"{self.vary} = {self.value:.6g} {self.unit}  ({state}; {self._decided()})",
                 f"bounds {self.bounds[0]:g} to {self.bounds[1]:g} {self.unit}, resolution "
                 f"{self.resolution:g} {self.unit}, {self.cheaper} values cost less"]
        lines.append(f"{'limit':<24}{'limit value':>12}{'figure':>12}{'margin':>12}  unit")
        for name, margin in self.margins.items():
            lines.append(f"{name:<24}{getattr(self.limits, name):>12.4g}"
                         f"{_num(self.figures.get(name)):>12}{margin:>12.4g}  "
                         f"{UNITS.get(name, '')}")
        dp = self.hydraulics.get("pressure_drop_Pa")
        pump = self.hydraulics.get("pump_power_W")
        if dp is not None:
            lines.append(f"{'pressure drop':<24}{dp / 1e3:>36.4g}  kPa (channels only)")
        if pump is not None:
            lines.append(f"{'pump power':<24}{pump:>36.4g}  W (channels only)")
        for warning in [*(self.hydraulics.get("warnings", []) or []), *self.warnings]:
            lines.append(f"warning: {warning}")
        if self.cells is not None:
            where = f"{self.evaluations} module runs of {self.cells} cells"
            where += "" if self.position is None else f"; worst cell {self.position}"
        else:
            where = f"{self.evaluations} runs"
            where += "" if self.position is None else f"; worst cell position {self.position}"
        lines.append(where)
        lines.append(self.message)
        if self.fidelity is not None:
            lines.append(f"fidelity check of the answer: verdict could flip: "
                         f"{self.fidelity.attrs.get('verdict_could_flip')} (see .fidelity)")
        return "\n".join(lines)

    def _decided(self) -> str:
        if self.limited_by == "none met":
            return "none met, the best value evaluated"
        return f"limited by the {self.limited_by}"

    def __repr__(self) -> str:
        state = "feasible" if self.feasible else "infeasible"
        return (f"<SizingResult {self.vary}={self.value:.6g} {self.unit} ({state}, "
                f"{self._decided()}, {self.evaluations} runs, monotone={self.monotone})>")

    def _repr_html_(self) -> str:
        import html

        text = f"<pre>{html.escape(self.table())}</pre>"
        if self.fidelity is not None:
            from explorer.fidelity import html_table, summary

            text += html_table(summary(self.fidelity))
        return text


def size_cooling(cell, duty, cooling, vary: str, bounds=None, limits: Limits | None = None, *,
                 positions=None, samples: int | str = "auto", resolution: float | None = None,
                 cheaper: str | None = None, spacing: str = "auto", max_evaluations: int = 40,
                 strict: bool = False, module: bool | None = None, on_evaluation=None,
                 check_fidelity=False, rtol=None, **simulate_kwargs) -> SizingResult:
    """Find the cheapest value of one design parameter that meets the limits.

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
    bounds : (float, float), optional
        ``(lo, hi)`` in the unit of ``vary``, ``lo < hi``; default the
        parameter's bounds in :data:`DESIGN_PARAMETERS`.
    limits : Limits
        What must be met.
    positions : list of int, optional
        Deprecated. With a module run, restricts the limits check to these
        cells (the whole module still runs: each cell warms the next one's
        coolant). Without one, the cell positions along the coolant path to
        run one at a time (default ``cooling.positions_to_check()``): all at
        the first samples, the worst next to the boundary while refining, all
        again at the answer (searching again if another one fails there).
        Cells are numbered ``0 .. n-1`` along the coolant; an empty list is an error.
    samples, spacing, max_evaluations
        Search settings, see :func:`find_boundary` (``"auto"`` spacing is linear for a
        temperature in degC): ``3 <= samples <= 1000`` and ``max_evaluations >= 1`` whole
        numbers, ``spacing`` one of "auto", "linear", "geometric". ``samples="auto"``
        (the default) is 3 when one evaluation is a module run or several cell
        positions (the figures are smooth in the parameter, so the refinement
        needs few points), 5 for one cell.
    resolution, cheaper : optional
        Override the parameter's entry in :data:`DESIGN_PARAMETERS` (needed
        for a parameter that has none).
    strict : bool
        Raise :class:`SizingError` unless the limits decide the answer (the
        cheap bound meets them, or nothing does).
    module : bool, optional
        Judge the whole module with :func:`explorer.simulate_module` (default:
        when it is available and the coolant serves more than one cell);
        False runs cell positions one at a time.
    on_evaluation : callable, optional
        Called after every run as ``on_evaluation(value, met, worst_margin)``.
    check_fidelity : bool or dict
        Check the answer on the fuller models (:func:`explorer.check_fidelity`:
        DFN, the fuller layout, a finer grid, against the same limits) and set
        ``SizingResult.fidelity``; a dict gives its options (``max_wall_s``,
        ``progress``). Off by default (it costs a few fuller runs).
    rtol
        No longer used (the answer is refined to ``resolution``); accepted so
        older callers keep working.
    **simulate_kwargs
        Passed to :func:`explorer.simulate` (electrochemistry, layout, grid...).

    Returns
    -------
    SizingResult

    Raises
    ------
    InputError
        A bad argument (``vary``, ``bounds``, a search setting...), naming it, before any run.
    SizingError
        Bounds that hold no valid design, a plate too short for the cells it serves, or a
        failed run (naming the value).

    Examples
    --------
    >>> import explorer
    >>> from explorer import cooling, duty
    >>> cell = explorer.load_cell("van_nmc_66ah")                          # doctest: +SKIP
    >>> plate = cooling.cold_plate("eg50", flow_L_min=4.0, inlet_C=30.0, cells_per_plate=12)
    >>> design = cooling.edge_plate(plate, edge="bottom", fin_mm=1.0)
    >>> res = explorer.size_cooling(cell, duty.discharge(c_rate=1.5), design, vary="fin_mm",
    ...                             limits=explorer.Limits(temperature_max_C=45, spread_K=5),
    ...                             grid=(12, 8))                             # doctest: +SKIP
    >>> print(res.table())                                                  # doctest: +SKIP
    """
    if not isinstance(limits, Limits):
        raise InputError(f"size_cooling: `limits` must be an explorer.Limits, got "
                         f"{type(limits).__name__}")
    params = _parameters(cooling)
    if not isinstance(vary, str) or vary not in params:
        raise InputError(f"size_cooling: `vary` = {short_repr(vary)} is not a parameter of this "
                         f"cooling design; expected one of {sorted(params)}")
    samples, max_evaluations, spacing = _check_search(samples, max_evaluations, spacing, strict,
                                                      module, on_evaluation)
    fidelity_options = _check_fidelity_option(check_fidelity)
    module = None if module is None else bool(module)  # numpy's False is not `False`
    entry = _entry(vary, bounds, cheaper, resolution)
    lo, hi = _check_bounds(entry.bounds if bounds is None else bounds)
    lattice = _Lattice(lo, hi, entry.resolution)
    ends = (lattice.value(lattice.k_lo), lattice.value(lattice.k_hi))
    _check_fits(cell, cooling)
    for end in ends:  # both ends must be valid designs that fit the cells they serve
        _check_fits(cell, _replace(cooling, vary, end), f" at `{vary}` = {end:g}")
    limits.check_reachable(_coldest_sink(cooling, vary, lo, hi), where="size_cooling")
    as_module = _use_module(cooling, module)
    positions, cells = _positions(cooling, positions, as_module)
    if samples == "auto":  # a module run or several positions cost several cells each
        samples = 3 if as_module or len(positions) > 1 else 5

    runner = _Runner(cell, duty, cooling, vary, limits, positions, simulate_kwargs,
                     as_module=as_module, cells=cells, on_evaluation=on_evaluation)
    if spacing == "auto" and entry.unit == "degC":  # a ratio of Celsius values means nothing
        spacing = "linear"
    search = {"cheaper": entry.cheaper, "resolution": entry.resolution, "samples": samples,
              "spacing": spacing, "max_evaluations": max_evaluations}
    outcome = find_boundary(runner.margin, lo, hi, on_sampled=runner.choose_positions, **search)
    if len(runner.active) < len(positions):
        outcome = _recheck_all_positions(runner, outcome, lo, hi, search)
    if strict and outcome.kind != "limits":
        raise SizingError(_message(outcome, vary, lo, hi, runner, limits, entry))
    res = _result(runner, outcome, entry, (lo, hi))
    if fidelity_options is not None:
        _check_the_answer(res, runner, fidelity_options)
    return res


def _check_fidelity_option(value) -> dict | None:
    """``check_fidelity`` as the options of the check, or None for no check."""
    if isinstance(value, bool | np.bool_):
        return {} if value else None
    if isinstance(value, dict):
        unknown = set(value) - {"max_wall_s", "progress"}
        if not unknown:
            return dict(value)
    raise InputError(f"size_cooling: `check_fidelity` must be True, False or a dict of "
                     f"options (max_wall_s, progress), got {short_repr(value)}")


def _check_the_answer(res: SizingResult, runner, options: dict) -> None:
    """The fidelity check of the sized design, on the run already made at the answer."""
    from explorer.fidelity import attach, check_fidelity

    kwargs = dict(runner.kwargs)
    kwargs.pop("progress", None)  # the runs' own progress(t_s, step); the check has its own
    if not runner.as_module and res.position is not None:
        kwargs["position"] = res.position
    base = res.module if runner.as_module else res.dataset
    fid = check_fidelity(runner.cell, runner.duty, res.design, limits=runner.limits,
                         module=runner.as_module, base=base, **options, **kwargs)
    res.fidelity = fid
    for ds in (res.dataset, res.module):
        if ds is not None:
            attach(ds, fid)


def _result(runner, outcome, entry, bounds) -> SizingResult:
    vary, limits, value = runner.vary, runner.limits, outcome.value
    worst = runner.worst(value, runner.positions)
    curve = runner.curve()
    curve.attrs.update({"cheaper": entry.cheaper, "resolution": entry.resolution,
                        "limited_by": outcome.kind, "unit": entry.unit})
    names = ["temperature_max_C", "spread_K", *limits.names()]
    tps = {name: turning_points(curve["value"].values, curve[name].values)
           for name in dict.fromkeys(names) if name in curve}
    position = worst["position"]
    module_ds = ds = runner.dataset(value, None if runner.as_module else position)
    if runner.as_module and position is not None:
        ds = ds.isel(cell=position)
    elif not runner.as_module:
        module_ds = None
    for run in (ds, module_ds):  # the limits travel with the sized run (contract G)
        if run is not None:
            run.attrs["limits"] = json.dumps(limits.as_dict())
    return SizingResult(
        vary=vary, bounds=bounds, limits=limits, value=value, feasible=worst["met"],
        dataset=ds, curve=curve, margins=worst["margins"], figures=worst["figures"],
        hydraulics=runner.hydraulics(value), design=_replace(runner.cooling, vary, value),
        increasing=outcome.increasing, monotone=not any(tps.values()),
        turning_points={k: v for k, v in tps.items() if v},
        message=_message(outcome, vary, *bounds, runner, limits, entry, tps),
        limited_by=outcome.kind, resolution=entry.resolution, unit=entry.unit,
        cheaper=entry.cheaper, position=position, evaluations=runner.runs, module=module_ds,
        cells=runner.module_cells if runner.as_module else None, warnings=worst["warnings"])


def _check_search(samples, max_evaluations, spacing, strict, module, on_evaluation):
    """size_cooling's search settings checked before any run: (samples, max_evaluations,
    spacing); ``samples="auto"`` stays (chosen once the kind of run is known)."""
    if not (isinstance(samples, str) and samples == "auto"):
        samples = _check_count("samples", samples, 3, MAX_SAMPLES)
    max_evaluations = _check_count("max_evaluations", max_evaluations, 1)
    for name, value in (("strict", strict), ("module", module)):
        if not isinstance(value, bool | np.bool_) and not (name == "module" and value is None):
            allowed = "True or False" + (" (or None: automatic)" if name == "module" else "")
            raise InputError(f"size_cooling: `{name}` must be {allowed}, got {short_repr(value)}")
    if on_evaluation is not None and not callable(on_evaluation):
        raise InputError("size_cooling: `on_evaluation` must be a function called as "
                         f"on_evaluation(value, met, worst_margin), or None, got "
                         f"{short_repr(on_evaluation)}")
    return samples, max_evaluations, _check_spacing(spacing)


def _entry(vary, bounds, cheaper, resolution) -> DesignParameter:
    """The parameter's sizing entry, with the caller's overrides."""
    try:
        entry = design_parameter(vary)
    except InputError:
        if cheaper is None or resolution is None or bounds is None:
            raise InputError(f"size_cooling: `{vary}` has no entry in DESIGN_PARAMETERS; give "
                             "`cheaper` ('lower' or 'higher'), `bounds` and `resolution`") \
                from None
        entry = DesignParameter(vary, parameter_unit(vary), "lower", (0.0, 1.0), 1.0, vary)
    cheaper = _check_cheaper(entry.cheaper if cheaper is None else cheaper, "size_cooling")
    if resolution is not None:
        given = resolution
        try:
            if isinstance(given, bool):
                raise TypeError("a flag is not a step")
            resolution = float(given)
        except (TypeError, ValueError):
            raise InputError(f"size_cooling: `resolution` must be a number > 0 (in the unit of "
                             f"`vary`), got {short_repr(given)}") from None
        if not (math.isfinite(resolution) and resolution > 0):
            raise InputError(f"size_cooling: `resolution` must be a number > 0 (in the unit of "
                             f"`vary`), got {short_repr(given)}")
    return DesignParameter(entry.name, entry.unit, cheaper, entry.bounds,
                           entry.resolution if resolution is None else resolution, entry.label)


def _recheck_all_positions(runner, outcome, lo, hi, search):
    """After refining at some positions, confirm the answer at all; search again if it fails."""
    runner.active = list(runner.positions)
    if runner.margin(outcome.value) >= 0.0 or not outcome.feasible:
        return outcome
    log.info("another cell position is worse at %g; searching again with all positions",
             outcome.value)
    return find_boundary(runner.margin, lo, hi, **search)


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


def _check_fits(cell, design, where: str = "") -> None:
    """A plate too short for the cells it serves is an error for sizing, not a warning."""
    fits = getattr(design, "check_fits", None)
    if fits is None:
        return
    try:
        problems = fits(cell)
    except SizingError:
        raise
    except InputError as exc:
        problems = [str(exc)]
    if isinstance(problems, str):
        problems = [problems]
    if problems:
        raise SizingError(f"size_cooling: the design{where} does not fit the cells it serves: "
                          f"{'; '.join(map(str, problems))}")


def _coldest_sink(cooling, vary, lo, hi) -> float:
    """Coldest coolant inlet, ambient or busbar temperature over the bounds (degC)."""
    temps = [v for k, v in cooling.parameters().items()
             if k.endswith("_C") and k != vary and v is not None]
    if vary.endswith("_C"):
        temps.append(lo)
    return min(temps) if temps else -math.inf


def _cells_in_series(cooling) -> int:
    if hasattr(cooling, "cells_in_series"):
        return int(cooling.cells_in_series())
    if hasattr(cooling, "positions_to_check"):
        return max(cooling.positions_to_check()) + 1
    return 1


def _use_module(cooling, module) -> bool:
    if module is False:
        return False
    if module is True and _module_simulator() is None:
        raise InputError("size_cooling: `module=True` needs explorer.simulate_module, which "
                         "this version does not have")
    return _module_simulator() is not None and (module is True or _cells_in_series(cooling) > 1)


def _positions(cooling, positions, as_module):
    """(positions run one at a time, cells the module check keeps or None for all)."""
    if positions is None:
        if as_module:
            return [None], None
        positions = list(cooling.positions_to_check()) if hasattr(cooling, "positions_to_check") \
            else [None]
        return positions or [None], None
    cells = _check_positions(positions, _cells_in_series(cooling))
    return ([None], sorted(set(cells))) if as_module else (cells, None)


def _check_positions(positions, n: int) -> list[int]:
    """``positions`` as a non-empty list of whole numbers ``0..n-1`` (cells along the coolant)."""
    expected = (f"expected cells 0..{n - 1} along the coolant (a list of whole numbers, 0 = the "
                "first cell the coolant meets), or None")
    try:
        if isinstance(positions, str | bytes | dict):
            raise TypeError("not a list of cells")
        items = list(positions)
        if not items or not all(isinstance(p, int | float | np.integer | np.floating)
                                for p in items):
            raise TypeError("not a list of whole numbers")
        return [check_integer("positions", p, 0, n - 1) for p in items]
    except (TypeError, InputError):
        raise InputError(f"size_cooling: `positions` = {short_repr(positions)}; {expected}") \
            from None


def _simulate(cell, duty, **kwargs):
    from explorer.simulate import simulate

    return simulate(cell, duty, **kwargs)


# A stand-in may be set here (tests); otherwise explorer.simulate_module once it exists.
_simulate_module = None


def _module_simulator():
    if _simulate_module is not None:
        return _simulate_module
    try:
        from explorer.module import simulate_module
    except ImportError:
        return None
    return simulate_module


def _call_simulate(cell, duty, design, position, kwargs, as_module=False):
    kw = dict(kwargs)
    if as_module:
        kw.pop("position", None)  # the module runs every cell
        return _module_simulator()(cell, duty, cooling=design, **kw)
    if position is not None:
        kw["position"] = position
    return _simulate(cell, duty, cooling=design, **kw)


def _worst_cell(ds, cells=None) -> int | None:
    """The cell of a module run with the hottest point (among ``cells``)."""
    if "cell" not in ds.dims:
        return None
    name = "temperature_hottest" if "temperature_hottest" in ds else "temperature_max"
    peak = ds[name].max("time")
    ids = list(range(ds.sizes["cell"]))
    if cells is not None:
        peak, ids = peak.isel(cell=cells), list(cells)
    return ids[int(peak.argmax("cell"))]


class _Runner:
    """Runs the simulation per (value, position), caches figures, scores margins."""

    def __init__(self, cell, duty, cooling, vary, limits, positions, simulate_kwargs, *,
                 as_module=False, cells=None, on_evaluation=None):
        self.cell, self.duty, self.cooling, self.vary = cell, duty, cooling, vary
        self.limits, self.positions = limits, list(positions)
        self.active = list(positions)
        self.kwargs = simulate_kwargs
        self.as_module, self.cells = as_module, cells
        self.module_cells = _cells_in_series(cooling) if as_module else None
        self.on_evaluation = on_evaluation
        self.results: dict = {}  # (value, position) -> limits check
        self.datasets: dict = {}  # (value, position) -> Dataset, pruned as the search goes
        self._hydraulics: dict = {}
        self.cell_of: dict = {}  # (value, None) -> worst cell of a module run
        self.runs = 0

    def hydraulics(self, value) -> dict:
        """The design's hydraulics at ``value`` (recorded by the run, or asked of the design)."""
        if value not in self._hydraulics:
            design = _replace(self.cooling, self.vary, value)
            h = design.hydraulics() if hasattr(design, "hydraulics") else {}
            self._hydraulics[value] = dict(h or {})
        return self._hydraulics[value]

    def _where(self, position) -> str:
        return "module run" if self.as_module else f"position {position}"

    def _simulate(self, value, position):
        design = _replace(self.cooling, self.vary, value)
        try:
            ds = _call_simulate(self.cell, self.duty, design, position, self.kwargs,
                                self.as_module)
        except InputError:
            raise
        except Exception as exc:  # report which design failed, not where inside
            raise SizingError(f"size_cooling: the run at `{self.vary}` = {value:g} "
                              f"({self._where(position)}) failed: {exc}") from exc
        self.runs += 1
        if ds.attrs.get("status") == "failed":
            raise SizingError(f"size_cooling: the run at `{self.vary}` = {value:g} "
                              f"({self._where(position)}) failed: "
                              f"{ds.attrs.get('status_message', '')}")
        return ds

    def _check(self, ds, value) -> dict:
        """The limits check of one run; a limit the run cannot judge stops the sizing."""
        if self.cells is not None and "cell" in ds.dims:
            ds = ds.isel(cell=self.cells)
        check = self.limits.check(ds, self.hydraulics(value))
        missing = [n for n in self.limits.names() if check["margins"].get(n) is None]
        if missing:
            reasons = check.get("reasons", {})
            raise SizingError("size_cooling: cannot size against "
                              + "; ".join(f"`{n}` ({reasons.get(n, 'not evaluated')})"
                                          for n in missing))
        return check

    def run(self, value, position) -> dict:
        """The limits check of one run (simulated once, then cached)."""
        key = (value, position)
        if key not in self.results:
            ds = self._simulate(value, position)
            recorded = run_hydraulics(ds)
            if recorded is not None:
                self._hydraulics.setdefault(value, recorded)
            check = self._check(ds, value)
            if self.as_module:
                self.cell_of[key] = _worst_cell(ds, self.cells)
            self.results[key] = check
            self.datasets[key] = ds
            self._prune()
            if self.on_evaluation is not None:
                self.on_evaluation(value, bool(check["met"]), float(check["worst_margin"]))
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
                if isinstance(v, (int, float)) and not isinstance(v, bool):
                    figures[name] = max(v, figures.get(name, -math.inf))
                else:
                    figures.setdefault(name, None)
        # each limit's margin as the check gave it (a figure seen only in part carries its
        # bound's margin), the smallest over positions
        margins = {name: min(c["margins"][name] for c in checks.values())
                   for name in self.limits.names()}
        scaled = min(self.limits.scaled_margins(margins).values())
        worst_position = min(checks, key=lambda p: checks[p]["worst_margin"])
        warnings = list(dict.fromkeys(w for c in checks.values() for w in c.get("warnings", [])))
        return {"figures": figures, "margins": margins, "scaled": scaled,
                "met": all(c["met"] for c in checks.values()) and scaled >= 0.0,
                "position": self.cell_of.get((value, worst_position), worst_position),
                "warnings": warnings}

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
        edges = [v for k, v in enumerate(values) if (k > 0 and met[k] != met[k - 1])
                 or (k + 1 < len(values) and met[k] != met[k + 1])]
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
                          {"units": UNITS.get(name, "1"), "long_name": name.replace("_", " ")})
        for name in self.limits.names():
            data[f"margin_{name}"] = ("value", np.array([r["margins"][name] for r in rows]),
                                      {"units": UNITS.get(name, "1").replace("degC", "K"),
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
                            "module": int(self.as_module),
                            **{f"limit_{k}": v for k, v in self.limits.as_dict().items()}})
        return curve

def parameter_unit(name: str) -> str:
    """The CF-style unit of a design parameter, read from its name's suffix."""
    for suffix, unit in (("_L_min", "L min-1"), ("_W_m2K", "W m-2 K-1"), ("_W_mK", "W m-1 K-1"),
                         ("_W_K", "W K-1"), ("_mm", "mm"), ("_um", "um"), ("_kPa", "kPa"),
                         ("_C", "degC"), ("_K", "K"), ("_W", "W")):
        if name.endswith(suffix):
            return unit
    return "1"


def _num(value) -> str:
    """A figure for tables and messages ("-" where the run has none)."""
    return "-" if value is None else f"{value:.4g}"


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


def _message(outcome, vary, lo, hi, runner, limits, entry, tps=None) -> str:
    value, unit = outcome.value, entry.unit
    worst = runner.worst(value, runner.positions)
    figs = ", ".join(f"{n} {_num(worst['figures'].get(n))} {UNITS.get(n, '')} (limit "
                     f"{getattr(limits, n):g}, margin {worst['margins'][n]:+.3g})"
                     for n in limits.names())
    if outcome.kind == "none met":
        msg = (f"none met: no value of `{vary}` in [{lo:g}, {hi:g}] {unit} meets the limits; "
               f"the best evaluated is {value:.6g} {unit}: {figs}")
        ends = {min(outcome.values): "lower", max(outcome.values): "upper"}
        if value in ends:
            msg += f"; it sits on the {ends[value]} bound (nothing beyond it was tried)"
    elif outcome.kind == "limits":
        _, fail = outcome.bracket
        msg = (f"`{vary}` = {value:.6g} {unit} is the cheapest value that meets the limits "
               f"({entry.cheaper} values cost less): at {value:.6g} {unit}, {figs}; one step "
               f"cheaper, {fail:.6g} {unit}, does not meet them")
        if value == (max if entry.cheaper == "lower" else min)(outcome.values):
            msg += "; it sits on the expensive bound (nothing beyond it was tried)"
    else:
        msg = (f"the limits are met at the cheap end: `{vary}` = {value:.6g} {unit}, limited by "
               f"the {outcome.kind} (the limits would allow cheaper; widen the bounds to find "
               f"how much): {figs}")
    if outcome.islands:
        spans = ", ".join(f"{a:.6g}..{b:.6g}" for a, b in outcome.islands)
        msg += f"; the limits are also met at {spans} {unit} (separate region, not monotone)"
    sheet = getattr(runner.cell, "temperature_max_C", None)
    for name in ("temperature_max_C", "core_temperature_max_C"):
        limit = getattr(limits, name)
        if limit is not None and sheet is not None and limit > sheet:
            msg += (f"; note: `{name}` = {limit:g} degC is above the cell's data-sheet maximum "
                    f"{sheet:g} degC")
    if tps:
        bad = {k: v for k, v in tps.items() if v}
        if bad:
            msg += "; not monotone: " + ", ".join(
                f"{k} turns at {', '.join(f'{x:.6g}' for x in v)}" for k, v in bad.items())
    return msg
