"""Calibrate a few cell parameters to measured test curves: ``explorer.calibrate``.

A data-sheet cell (:func:`explorer.cell.from_datasheet`) or any cell file is a
starting point. Given a few lab tests -- time, current, terminal voltage and,
when measured, the surface temperature -- :func:`calibrate` runs each test
with its own current and rig conditions and fits a chosen few parameters
(:data:`PARAMETERS`) by bounded nonlinear least squares
(``scipy.optimize.least_squares``, trust-region reflective). Scales and other
positive parameters are fitted in log space.

What is run
    Each test is the measured current (a profile, piecewise constant between
    the points where it changes) from ``start_soc`` and ``start_temperature_C``,
    with convection from both faces to the rig's ``ambient_C`` through an
    effective coefficient ``h_W_m2K`` (a lab rig: a climate chamber or a
    fixture, not a cold plate). The model is SPMe on the ``averaged`` layout on
    a coarse 4 x 4 in-plane grid: the collector and tab resistance (which does
    not depend on the grid) is in series, so the fitted contact resistance is
    what is left. A small lab cell could use ``layout="single"`` too (no
    collectors, one temperature; the ``resistance`` parameter then has no
    effect and is refused).
Residuals
    Voltage differences in units of ``voltage_scale_V`` and surface-temperature
    differences (hottest point of the front face) in units of
    ``temperature_scale_K``, at up to ``max_points`` times per test.
Uncertainty
    From the Jacobian at the solution: covariance ``s^2 (J^T J)^-1`` with
    ``s^2`` the residual sum of squares over (points - parameters) -- the usual
    linearised estimate (e.g. Bates & Watts, *Nonlinear Regression Analysis and
    Its Applications*, 1988, ch. 2). It is one standard deviation of the log
    of the value (so ``value * exp(+-sigma)``), valid when the model can match
    the data and the residuals are independent; a parameter at a bound has no
    meaningful uncertainty (the result says so).
"""

from __future__ import annotations

import copy
import logging
import math
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from explorer.validators import InputError, OutputError, short_repr

__all__ = ["calibrate", "Calibration", "LabTest", "load_test", "PARAMETERS", "DEFAULT_FIT",
           "apply_parameters", "cmd_calibrate", "Parameter"]

log = logging.getLogger(__name__)


@dataclass(frozen=True)
class Parameter:
    """One parameter :func:`calibrate` can fit."""

    name: str
    description: str
    unit: str  # of the reported value ("x" for a scale: a factor on the cell file's values)
    display: float  # reported value = SI value / display (mohm: 1e-3)
    low: float  # default bounds, SI
    high: float
    in_file: bool = True  # written into the cell file (the rig's coefficient is not)
    needs_temperature: bool = False


PARAMETERS = {
    "resistance": Parameter(
        "resistance", "series contact resistance at the tab welds (both polarities)", "mohm",
        1e-3, 1e-6, 0.05),
    "diffusivity": Parameter(
        "diffusivity", "scale of both electrodes' solid diffusivity", "x", 1.0, 0.01, 100.0),
    "rate_constant": Parameter(
        "rate_constant", "scale of both electrodes' reaction rate constant", "x", 1.0, 0.01,
        100.0),
    "electrolyte": Parameter(
        "electrolyte", "scale of the electrolyte transport (effective conductivity and "
        "diffusivity, through the Bruggeman exponents)", "x", 1.0, 0.1, 10.0),
    "heat_capacity": Parameter(
        "heat_capacity", "whole-cell heat capacity", "J/K", 1.0, 1.0, 1e6,
        needs_temperature=True),
    "rig_h": Parameter(
        "rig_h", "effective surface heat-transfer coefficient of the test rig (both faces)",
        "W/(m2 K)", 1.0, 0.5, 2000.0, in_file=False, needs_temperature=True),
}
DEFAULT_FIT = ("resistance", "diffusivity", "rate_constant")
#: natural convection in still air, a few to 25 W/(m^2 K) (Incropera & DeWitt, Fundamentals
#: of Heat and Mass Transfer, table 1.1); the rig's coefficient when a test does not state it
DEFAULT_RIG_H = 10.0
#: record points (and at least as many time steps) of each test run
STEPS_PER_TEST = 300


# ------------------------------------------------------------------------------------------
# tests


@dataclass
class LabTest:
    """One measured test: the curves and the rig conditions it was run in.

    ``current_A`` is positive on discharge. ``start_temperature_C`` defaults to
    the first measured temperature, else ``ambient_C``. ``h_W_m2K`` is the rig's
    effective surface coefficient (default :data:`DEFAULT_RIG_H`; fit it with
    ``"rig_h"`` when temperatures are measured).
    """

    name: str
    time_s: np.ndarray
    current_A: np.ndarray
    voltage_V: np.ndarray
    temperature_C: np.ndarray | None = None
    ambient_C: float = 25.0
    start_soc: float = 1.0
    start_temperature_C: float | None = None
    h_W_m2K: float | None = None

    def __post_init__(self):
        where = f"test {self.name!r}"
        arrays = {}
        for key in ("time_s", "current_A", "voltage_V", "temperature_C"):
            v = getattr(self, key)
            if v is None:
                continue
            a = np.asarray(v, dtype=float).ravel()
            if not np.all(np.isfinite(a)):
                raise InputError(f"{where}: `{key}` must hold finite numbers")
            arrays[key] = a
            setattr(self, key, a)
        n = len(arrays["time_s"])
        if n < 3:
            raise InputError(f"{where}: needs at least three points, got {n}")
        for key, a in arrays.items():
            if len(a) != n:
                raise InputError(f"{where}: `{key}` has {len(a)} values, `time_s` has {n}")
        if np.any(np.diff(self.time_s) <= 0):
            raise InputError(f"{where}: `time_s` must increase strictly")
        if not 0.0 <= float(self.start_soc) <= 1.0:
            raise InputError(f"{where}: `start_soc` must be within 0..1, got {self.start_soc!r}")
        charge = float(np.sum(np.diff(self.time_s) * self.current_A[:-1]))
        dv = float(self.voltage_V[-1] - self.voltage_V[0])
        if charge * dv > 0 and abs(dv) > 0.05:  # discharging raises it, or charging lowers it
            raise InputError(
                f"{where}: the voltage {'rises' if dv > 0 else 'falls'} by {abs(dv):.2f} V "
                f"while the net current is {'discharge' if charge > 0 else 'charge'} by this "
                "tool's convention (current positive on discharge); flip the current's sign "
                "(in a CSV file: `# current_sign = -1`)")
        if self.start_temperature_C is None:
            self.start_temperature_C = (float(self.temperature_C[0]) if self.temperature_C
                                        is not None else float(self.ambient_C))

    @property
    def duration_s(self) -> float:
        return float(self.time_s[-1] - self.time_s[0])


_SETTINGS = {"ambient_c": "ambient_C", "start_soc": "start_soc", "current_sign": "current_sign",
             "start_temperature_c": "start_temperature_C", "h_w_m2k": "h_W_m2K", "name": "name"}


def load_test(path, **overrides) -> LabTest:
    """A test from a CSV file: ``time_s``, ``current_A`` (positive on discharge),
    ``voltage_V`` and optionally ``temperature_C`` (any unit suffix of
    :mod:`explorer.csvdata`). Rig conditions come from ``# key = value`` comment
    lines (``ambient_C``, ``start_soc``, ``start_temperature_C``, ``h_W_m2K``,
    ``name``; ``current_sign = -1`` for a cycler that counts discharge negative) or from
    the keyword ``overrides``.
    """
    from explorer.csvdata import check_path, read_curves, read_settings

    path = check_path(path, "calibration.load_test")
    data = read_curves(path, required=("time_s", "current_A", "voltage_V"),
                       optional=("temperature_C",), where="calibration.load_test",
                       what="test curve", min_rows=3)
    kw = {"name": path.stem}
    for key, text in read_settings(path).items():
        if key not in _SETTINGS:
            continue
        attr = _SETTINGS[key]
        if attr == "name":
            kw[attr] = text.strip().strip('"')
            continue
        try:
            kw[attr] = float(text)
        except ValueError:
            raise InputError(f"{path}: setting `{attr} = {short_repr(text)}` is not a "
                             "number") from None
        if not math.isfinite(kw[attr]):
            raise InputError(f"{path}: setting `{attr}` must be finite, got {text!r}")
    kw.update(overrides)
    sign = kw.pop("current_sign", 1.0)
    if sign not in (1.0, -1.0):
        raise InputError(f"{path}: setting `current_sign` must be 1 or -1, got {sign!r}")
    try:
        return LabTest(time_s=data["time_s"], current_A=sign * data["current_A"],
                       voltage_V=data["voltage_V"], temperature_C=data.get("temperature_C"),
                       **kw)
    except InputError as exc:
        raise InputError(f"{path}: {exc}") from None


def _tests(tests) -> list[LabTest]:
    if isinstance(tests, LabTest | str | Path):
        tests = [tests]
    try:
        items = list(tests)
    except TypeError:
        raise InputError(f"calibrate: `tests` must be a list of LabTest or CSV paths, got "
                         f"{type(tests).__name__}") from None
    if not items:
        raise InputError("calibrate: `tests` is empty; give at least one measured test")
    out = []
    for t in items:
        if isinstance(t, LabTest):
            out.append(t)
        elif isinstance(t, str | Path):
            out.append(load_test(t))
        else:
            raise InputError(f"calibrate: each test must be a LabTest or a CSV path, got "
                             f"{type(t).__name__} {short_repr(t)}")
    names = [t.name for t in out]
    for i, n in enumerate(names):  # unique names: rows of the report
        if names.count(n) > 1:
            out[i].name = f"{n} #{names[:i + 1].count(n)}"
    return out


# ------------------------------------------------------------------------------------------
# parameters <-> cell file


def _parse(text, unit):
    from explorer.units import parse

    return parse(text, unit)


def _fit_names(fit) -> list[str]:
    if fit is None:
        return list(DEFAULT_FIT)
    if isinstance(fit, str):
        fit = [f.strip() for f in fit.split(",") if f.strip()]
    try:
        names = list(fit)
    except TypeError:
        names = [fit]
    bad = [n for n in names if not isinstance(n, str) or n not in PARAMETERS]
    if bad or not names:
        raise InputError(f"calibrate: `fit` {short_repr(bad or names)}: expected one or more of "
                         f"{', '.join(PARAMETERS)}")
    if len(set(names)) != len(names):
        raise InputError(f"calibrate: `fit` names a parameter twice: {names}")
    return names


def current_values(data: dict, cell) -> dict:
    """The values the cell file gives each parameter (scales are 1)."""
    from explorer.cell.datasheet import series_resistance_ohm

    return {"resistance": series_resistance_ohm(data), "diffusivity": 1.0,
            "rate_constant": 1.0, "electrolyte": 1.0,
            "heat_capacity": cell.derived.heat_capacity_J_K, "rig_h": DEFAULT_RIG_H}


def _electrolyte_band(data: dict) -> tuple[float, float]:
    """Scales of eps**b that keep every Bruggeman exponent within the cell file's band."""
    lo, hi = 0.0, math.inf
    for region in ("negative", "positive", "separator"):
        eps, b = float(data[region]["porosity"]), float(data[region]["bruggeman"])
        # b' = b + ln(s) / ln(eps) within 0.5..5 (schema check of `bruggeman`)
        lo = max(lo, eps ** (5.0 - b))
        hi = min(hi, eps ** (0.5 - b))
    return lo, hi


def apply_parameters(data: dict, values: dict) -> tuple[dict, dict]:
    """A copy of the cell mapping with ``values`` set; returns (mapping, changed paths ->
    parameter name). Scales multiply the mapping's own values."""
    from explorer.cell.datasheet import _fmt, set_series_resistance

    d = copy.deepcopy(data)
    changed = {}
    for name, v in values.items():
        if name == "resistance":
            set_series_resistance(d, v)
            changed.update({f"tabs.{n}.weld_resistance": name for n in d["tabs"]})
        elif name in ("diffusivity", "rate_constant"):
            unit = "m^2/s" if name == "diffusivity" else "m^2.5/mol^0.5/s"
            for e in ("negative", "positive"):
                base = _parse(d[e][name], unit)
                d[e][name] = f"{base * v:.7g} {unit}"
                changed[f"{e}.{name}"] = name
        elif name == "electrolyte":
            for region in ("negative", "positive", "separator"):
                eps, b = float(d[region]["porosity"]), float(d[region]["bruggeman"])
                b_new = b + math.log(v) / math.log(eps)
                d[region]["bruggeman"] = round(b_new, 9)
                changed[f"{region}.bruggeman"] = name
                if region != "separator":  # keep the solid's (1 - eps)**b unchanged
                    sigma = _parse(d[region]["solid_conductivity"], "S/m")
                    sigma *= (1 - eps) ** b / (1 - eps) ** b_new
                    d[region]["solid_conductivity"] = f"{sigma:.7g} S/m"
                    changed[f"{region}.solid_conductivity"] = name
        elif name == "heat_capacity":
            d.setdefault("thermal", {})["heat_capacity"] = _fmt(v, "J/K")
            changed["thermal.heat_capacity"] = name
    return d, changed


# ------------------------------------------------------------------------------------------
# running one test


def _segments(t: np.ndarray, current: np.ndarray, tol_A: float):
    """The measured current as a few constant pieces: a new piece starts where the current
    moves more than ``tol_A`` from the running piece's first value."""
    starts = [0]
    ref = current[0]
    for i in range(1, len(current) - 1):
        if abs(current[i] - ref) > tol_A:
            starts.append(i)
            ref = current[i]
    times = [float(t[i] - t[0]) for i in starts] + [float(t[-1] - t[0])]
    values = []
    for k, i in enumerate(starts):
        j = starts[k + 1] if k + 1 < len(starts) else len(current) - 1
        values.append(float(np.mean(current[i:max(j, i + 1)])))
    values.append(values[-1])
    return tuple(times), tuple(values)


class _Runner:
    """Runs the tests on a cell mapping and returns the residual vector."""

    def __init__(self, data, tests, names, settings, source):
        from explorer import duty

        self.data, self.tests, self.names = data, tests, names
        self.s = settings
        self.source = source
        self.steps = []
        self.points = []
        for t in tests:
            tol = max(2e-3 * float(np.max(np.abs(t.current_A))), 1e-4)
            pt, pv = _segments(t.time_s, t.current_A, tol)
            self.steps.append(duty.Step("profile", profile_time_s=pt, profile_value=pv,
                                        profile_quantity="current", label=t.name,
                                        source=t.name))
            n = len(t.time_s)
            idx = np.unique(np.linspace(0, n - 1, min(n, settings["max_points"])).round()
                            .astype(int))
            self.points.append(idx)
        self.evaluations = 0
        self.last_runs = []

    def cell(self, values: dict):
        from explorer.cell.loader import cell_from_dict

        d, _ = apply_parameters(self.data, {k: v for k, v in values.items()
                                            if PARAMETERS[k].in_file})
        return cell_from_dict(d, self.source)

    def run(self, values: dict, test: LabTest, step):
        import dataclasses

        import explorer

        cell = self.cell(values)
        # a window wider than the data sheet's: a test near a limit runs to its end with
        # parameters that are still off (the fit needs the whole curve)
        wide = dataclasses.replace(cell, voltage_min_V=max(0.5, cell.voltage_min_V - 0.4),
                                   voltage_max_V=cell.voltage_max_V + 0.3)
        h = values.get("rig_h", test.h_W_m2K if test.h_W_m2K is not None else DEFAULT_RIG_H)
        cooling = explorer.cooling.convection(h, test.ambient_C)
        # a regular, short record interval caps the steps: the same step sequence from one
        # evaluation to the next keeps the residuals smooth in the parameters, and implicit
        # Euler at 1/300 of the test stays well within a millivolt (coarser steps put mV of
        # step-sequence noise on the curves and bias the fit)
        # on a rung of the stepper's sqrt(2) ladder, so that one step spans one interval
        interval = 2.0 ** (math.floor(2.0 * math.log2(max(0.5, test.duration_s
                                                          / STEPS_PER_TEST))) / 2.0)
        return explorer.simulate(
            wide, step, cooling, electrochemistry=self.s["electrochemistry"],
            layout=self.s["layout"], grid=self.s["grid"] if self.s["layout"] != "single"
            else None, start_soc=test.start_soc,
            start_temperature_C=test.start_temperature_C, output_interval_s=interval)

    def residuals(self, values: dict) -> np.ndarray:
        self.evaluations += 1
        parts, runs = [], []
        for test, step, idx in zip(self.tests, self.steps, self.points):
            ds = self.run(values, test, step)
            model = _model_curves(ds, test, idx)
            runs.append((test, idx, model, ds.attrs.get("status", "")))
            parts.append((model["voltage_V"] - test.voltage_V[idx]) / self.s["voltage_scale_V"])
            if test.temperature_C is not None and self.s["use_temperature"]:
                parts.append((model["temperature_C"] - test.temperature_C[idx])
                             / self.s["temperature_scale_K"])
        self.last_runs = runs
        return np.concatenate(parts)


def _model_curves(ds, test: LabTest, idx) -> dict:
    """Model voltage and surface temperature at the test's times ``idx``; past the end of a
    run that stopped early the last values hold."""
    t = ds["time"].values
    when = test.time_s[idx] - test.time_s[0]
    out = {"voltage_V": np.interp(when, t, ds["voltage"].values)}
    name = "temperature_front_max" if "temperature_front_max" in ds else "temperature_max"
    out["temperature_C"] = np.interp(when, t, ds[name].values)
    out["ended_s"] = float(t[-1])
    return out


# ------------------------------------------------------------------------------------------
# the result


@dataclass
class Calibration:
    """What :func:`calibrate` found. Values in SI (resistance in ohm); see :meth:`summary`."""

    parameters: list[str]
    values: dict
    initial: dict
    sigma_log: dict  # one standard deviation of ln(value)
    correlation: np.ndarray
    rms: list  # per test: {"test", "points", "voltage_rms_mV", "temperature_rms_K"}
    cell: object
    text: str  # the calibrated cell file
    status: str  # "converged" | "not converged"
    message: str
    evaluations: int
    wall_s: float
    at_bound: list = field(default_factory=list)
    curves: list = field(default_factory=list)  # per test: times, measured and model curves

    def interval(self, name: str, k: float = 1.0) -> tuple[float, float]:
        """``value * exp(-+k sigma)``: the k-sigma band of a parameter."""
        v, s = self.values[name], self.sigma_log[name]
        return v * math.exp(-k * s), v * math.exp(k * s)

    def to_dict(self) -> dict:
        rows = []
        for n in self.parameters:
            p = PARAMETERS[n]
            lo, hi = self.interval(n)
            rows.append({"parameter": n, "description": p.description, "unit": p.unit,
                         "initial": self.initial[n] / p.display,
                         "value": self.values[n] / p.display,
                         "sigma_relative": self.sigma_log[n],
                         "one_sigma_low": lo / p.display, "one_sigma_high": hi / p.display,
                         "at_bound": n in self.at_bound})
        return {"parameters": rows, "correlation": np.round(self.correlation, 4).tolist(),
                "rms": self.rms, "status": self.status, "message": self.message,
                "evaluations": self.evaluations, "wall_s": round(self.wall_s, 2)}

    def summary(self) -> str:
        """Plain-text table of the fitted values, their uncertainty, correlations, RMS."""
        lines = [f"calibration {self.status} ({self.evaluations} evaluations, "
                 f"{self.wall_s:.1f} s): {self.message}", ""]
        lines.append(f"{'parameter':15s} {'initial':>11s} {'fitted':>11s} {'1 sigma':>9s}  "
                     "unit")
        for n in self.parameters:
            p = PARAMETERS[n]
            flag = "  (at a bound: no uncertainty)" if n in self.at_bound else ""
            lines.append(f"{n:15s} {self.initial[n] / p.display:11.4g} "
                         f"{self.values[n] / p.display:11.4g} "
                         f"{100 * self.sigma_log[n]:8.2g}%  {p.unit}{flag}")
        if len(self.parameters) > 1:
            lines += ["", "correlations:"]
            for i, a in enumerate(self.parameters):
                for j in range(i + 1, len(self.parameters)):
                    lines.append(f"  {a} / {self.parameters[j]}: {self.correlation[i, j]:+.2f}")
        lines += ["", "RMS error per test:"]
        for r in self.rms:
            temp = (f", temperature {r['temperature_rms_K']:.2f} K"
                    if r["temperature_rms_K"] is not None else "")
            run = ("" if r.get("run_status") in ("completed", None) else
                   f"; the model run {r['run_status']} at {r['run_ended_s']:.0f} s of "
                   f"{r['duration_s']:.0f} s, later points compare with its last values")
            lines.append(f"  {r['test']}: voltage {r['voltage_rms_mV']:.1f} mV{temp} "
                         f"({r['points']} points{run})")
        return "\n".join(lines)

    def __repr__(self) -> str:
        vals = ", ".join(f"{n}={self.values[n] / PARAMETERS[n].display:.4g}"
                         for n in self.parameters)
        return f"<Calibration {self.status}: {vals}>"

    def _repr_html_(self) -> str:
        import html

        return f"<pre>{html.escape(self.summary())}</pre>"

    def write(self, path) -> Path:
        """Write the calibrated cell file (atomically); returns the path."""
        from explorer.fileio import atomic_write_text

        return atomic_write_text(Path(path), self.text)

    def figure(self):
        """Plotly figure: measured and model voltage per test, and the residuals (voltage and,
        when measured, surface temperature) against time."""
        from plotly.subplots import make_subplots

        has_t = any(c["temperature_C"] is not None for c in self.curves)
        rows = 3 if has_t else 2
        titles = ["terminal voltage: measured (points) and calibrated model (lines)",
                  "voltage residual, model - measured"]
        if has_t:
            titles.append("surface temperature residual, model - measured")
        fig = make_subplots(rows=rows, cols=1, shared_xaxes=True, subplot_titles=titles,
                            vertical_spacing=0.08)
        palette = ["#1f5fa8", "#c8553d", "#2a9d8f", "#8d6cab", "#e09f3e", "#4a4e69"]
        for k, c in enumerate(self.curves):
            color = palette[k % len(palette)]
            t = c["time_s"] / 60.0
            fig.add_scatter(x=t, y=c["voltage_measured_V"], mode="markers", row=1, col=1,
                            marker={"size": 4, "color": color}, name=f"{c['test']} measured",
                            legendgroup=c["test"])
            fig.add_scatter(x=t, y=c["voltage_model_V"], mode="lines", row=1, col=1,
                            line={"color": color}, name=f"{c['test']} model",
                            legendgroup=c["test"])
            fig.add_scatter(x=t, y=1e3 * (c["voltage_model_V"] - c["voltage_measured_V"]),
                            mode="lines+markers", marker={"size": 3}, line={"color": color},
                            row=2, col=1, showlegend=False, legendgroup=c["test"])
            if has_t and c["temperature_C"] is not None:
                fig.add_scatter(x=t, y=c["temperature_model_C"] - c["temperature_C"],
                                mode="lines+markers", marker={"size": 3},
                                line={"color": color}, row=3, col=1, showlegend=False,
                                legendgroup=c["test"])
        fig.update_yaxes(title_text="V", row=1, col=1)
        fig.update_yaxes(title_text="mV", row=2, col=1)
        if has_t:
            fig.update_yaxes(title_text="K", row=3, col=1)
        fig.update_xaxes(title_text="time (min)", row=rows, col=1)
        fig.update_layout(height=260 * rows + 80, template="plotly_white",
                          title="Calibration residuals")
        return fig


# ------------------------------------------------------------------------------------------
# the fit


def calibrate(cell, tests, fit=None, *, electrochemistry: str = "spme",
              layout: str = "averaged", grid=(4, 4), voltage_scale_V: float = 0.01,
              temperature_scale_K: float = 0.5, max_points: int = 120, initial=None,
              bounds=None, max_evaluations: int = 60, use_temperature=None, out=None,
              progress=None) -> Calibration:
    """Fit a few cell parameters to measured tests; see the module docstring.

    Parameters
    ----------
    cell : Cell, or a cell file path / demo-cell name
    tests : list of LabTest or CSV paths
        See :func:`load_test` for the CSV form and the rig settings.
    fit : list of str or "a,b,c", optional
        Names from :data:`PARAMETERS`; default :data:`DEFAULT_FIT` (a contact
        resistance, a solid-diffusivity scale and a rate-constant scale).
        ``heat_capacity`` and ``rig_h`` need measured temperatures.
    electrochemistry, layout, grid
        The model the tests are run on (``layout="single"`` leaves out the
        collectors, so it cannot fit ``resistance``).
    voltage_scale_V, temperature_scale_K : float
        How a voltage error weighs against a temperature error: 10 mV counts as
        much as 0.5 K by default.
    max_points : int
        Points of each test compared (evenly spread in the record).
    initial, bounds : dict, optional
        Start values and ``(low, high)`` bounds by name (SI, scales as factors).
    max_evaluations : int
        Model evaluations the optimiser may use (each runs every test once).
    use_temperature : bool, optional
        Whether measured temperatures enter the residuals. Default: when a thermal
        parameter (``heat_capacity``, ``rig_h``) is fitted -- otherwise a rig coefficient
        that is only guessed would pull the electrochemical parameters. Their RMS error is
        reported either way.
    out : str or Path, optional
        Write the calibrated cell file there.
    progress : callable(evaluation, values), optional

    Returns
    -------
    Calibration
        Fitted values, 1-sigma uncertainty, correlations, RMS per test, the
        calibrated cell and its file text (fitted values marked "fitted").
    """
    from scipy.optimize import least_squares

    from explorer.cell.datasheet import cell_data
    from explorer.simulate import _cell

    started = time.perf_counter()
    cell = _cell(cell)
    tests = _tests(tests)
    names = _fit_names(fit)
    if layout == "single" and "resistance" in names:
        raise InputError("calibrate: `resistance` (contact resistance at the tab welds) needs "
                         "the collectors: use layout='averaged' (the default)")
    if not any(t.temperature_C is not None for t in tests):
        need = [n for n in names if PARAMETERS[n].needs_temperature]
        if need:
            raise InputError(f"calibrate: fitting {', '.join(need)} needs measured "
                             "temperatures (a `temperature_C` column in at least one test)")
    from explorer.simulate import ELECTROCHEMISTRY, LAYOUTS
    from explorer.validators import check_choice, check_integer

    electrochemistry = check_choice("electrochemistry", electrochemistry, ELECTROCHEMISTRY)
    layout = check_choice("layout", layout, LAYOUTS)
    max_evaluations = check_integer("max_evaluations", max_evaluations, 1)
    if not (isinstance(max_points, int) and max_points >= 3):
        raise InputError(f"calibrate: `max_points` must be a whole number >= 3, got "
                         f"{short_repr(max_points)}")
    data, provenance = cell_data(cell)
    start = current_values(data, cell)
    for k, v in (initial or {}).items():
        if k not in PARAMETERS:
            raise InputError(f"calibrate: `initial` names unknown parameter {k!r}")
        start[k] = _positive(f"initial[{k!r}]", v)
    lo, hi = _bounds(names, start, data, bounds)
    x0 = np.array([math.log(min(max(start[n], lo[i] * 1.0001), hi[i] / 1.0001))
                   for i, n in enumerate(names)])
    settings = {"electrochemistry": electrochemistry, "layout": layout, "grid": grid,
                "voltage_scale_V": _positive("voltage_scale_V", voltage_scale_V),
                "temperature_scale_K": _positive("temperature_scale_K", temperature_scale_K),
                "max_points": max_points,
                "use_temperature": (any(PARAMETERS[n].needs_temperature for n in names)
                                    if use_temperature is None else bool(use_temperature))}
    runner = _Runner(data, tests, names, settings, cell.source_path or cell.name)
    cache: dict = {}

    def values_at(x):
        v = dict(start)
        v.update({n: math.exp(xi) for n, xi in zip(names, x)})
        return v

    def evaluate(x):
        """(residuals, runs) at x; each point is run once."""
        key = np.asarray(x, dtype=float).tobytes()
        if key not in cache:
            if len(cache) > 64:
                cache.clear()
            r = runner.residuals(values_at(x))
            cache[key] = (r, runner.last_runs)
            if progress is not None:
                progress(runner.evaluations, values_at(x))
        return cache[key]

    def fun(x):
        return evaluate(x)[0]

    step = 0.02  # in ln(value): far above the solver noise of a run, small against curvature

    def jac(x):
        r0 = fun(x)
        J = np.empty((len(r0), len(x)))
        for i in range(len(x)):
            xi = np.array(x, dtype=float)
            h = step if xi[i] + step <= math.log(hi[i]) else -step
            xi[i] += h
            J[:, i] = (fun(xi) - r0) / h
        return J

    res = least_squares(fun, x0, jac=jac, bounds=(np.log(lo), np.log(hi)), method="trf",
                        x_scale=1.0, max_nfev=max_evaluations, xtol=1e-4, ftol=1e-6)
    best = values_at(res.x)
    r, runner.last_runs = evaluate(res.x)
    J = jac(res.x)
    m, n = len(r), len(names)
    s2 = float(r @ r) / max(m - n, 1)
    cov = s2 * np.linalg.pinv(J.T @ J)
    sigma = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = cov / np.outer(sigma, sigma)
    corr = np.where(np.isfinite(corr), corr, 0.0)
    np.fill_diagonal(corr, 1.0)
    at_bound = [nm for i, nm in enumerate(names)
                if res.x[i] <= math.log(lo[i]) + 1e-6 or res.x[i] >= math.log(hi[i]) - 1e-6]
    runner.last_runs = evaluate(res.x)[1]
    rms, curves = _rms_and_curves(runner, settings)
    converged = res.status > 0
    status = "converged" if converged else "not converged"
    message = res.message if converged else (
        f"{res.message} (stopped after {runner.evaluations} evaluations; the values are the "
        "best found)")
    cal = Calibration(parameters=names, values={nm: best[nm] for nm in names},
                      initial={nm: start[nm] for nm in names},
                      sigma_log={nm: float(sigma[i]) for i, nm in enumerate(names)},
                      correlation=corr, rms=rms, cell=None, text="", status=status,
                      message=message, evaluations=runner.evaluations,
                      wall_s=time.perf_counter() - started, at_bound=at_bound, curves=curves)
    cal.text = _calibrated_text(cell, data, provenance, cal, tests, settings)
    from explorer.cell.loader import cell_from_text

    cal.cell = cell_from_text(cal.text, str(out) if out is not None else "<calibrated>")
    cal.cell.extra["cell_file_text"] = cal.text
    if out is not None:
        from explorer.cell.loader import load_cell

        cal.write(out)
        cal.cell = load_cell(out)
        cal.cell.extra["cell_file_text"] = cal.text
    log.info("calibration %s in %d evaluations, %.1f s", status, runner.evaluations,
             cal.wall_s)
    return cal


def _positive(name, v) -> float:
    try:
        x = float(v)
    except (TypeError, ValueError):
        x = math.nan
    if not (math.isfinite(x) and x > 0):
        raise InputError(f"calibrate: `{name}` must be a number > 0, got {short_repr(v)}")
    return x


def _bounds(names, start, data, bounds):
    lo, hi = [], []
    for n in names:
        p = PARAMETERS[n]
        a, b = p.low, p.high
        if n == "electrolyte":
            e_lo, e_hi = _electrolyte_band(data)
            a, b = max(a, e_lo), min(b, e_hi)
        if n == "heat_capacity":
            a, b = start[n] / 3.0, start[n] * 3.0
        if bounds and n in bounds:
            try:
                a, b = (_positive(f"bounds[{n!r}]", x) for x in bounds[n])
            except (TypeError, ValueError):
                raise InputError(f"calibrate: `bounds[{n!r}]` must be (low, high), got "
                                 f"{short_repr(bounds[n])}") from None
        if not a < b:
            raise InputError(f"calibrate: bounds of {n!r} ({a:g}, {b:g}) are empty")
        lo.append(a)
        hi.append(b)
    return np.array(lo), np.array(hi)


def _rms_and_curves(runner: _Runner, settings) -> tuple[list, list]:
    rms, curves = [], []
    for test, idx, model, status in runner.last_runs:
        dv = model["voltage_V"] - test.voltage_V[idx]
        row = {"test": test.name, "points": int(len(idx)),
               "voltage_rms_mV": float(1e3 * np.sqrt(np.mean(dv ** 2))),
               "temperature_rms_K": None, "run_status": status,
               "run_ended_s": model["ended_s"], "duration_s": test.duration_s}
        curve = {"test": test.name, "time_s": test.time_s[idx] - test.time_s[0],
                 "voltage_measured_V": test.voltage_V[idx], "voltage_model_V": model["voltage_V"],
                 "temperature_C": None, "temperature_model_C": None}
        if test.temperature_C is not None:
            dt = model["temperature_C"] - test.temperature_C[idx]
            row["temperature_rms_K"] = float(np.sqrt(np.mean(dt ** 2)))
            curve["temperature_C"] = test.temperature_C[idx]
            curve["temperature_model_C"] = model["temperature_C"]
        rms.append(row)
        curves.append(curve)
    return rms, curves


def _calibrated_text(cell, data, provenance, cal: Calibration, tests, settings) -> str:
    from explorer.cell.datasheet import render

    file_values = {n: cal.values[n] for n in cal.parameters if PARAMETERS[n].in_file}
    new, changed = apply_parameters(data, file_values)
    origin = Path(cell.source_path).name if cell.source_path else cell.name
    prov = {}
    for table, content in new.items():
        items = ([(f"tabs.{n}.{k}") for n, t in content.items() for k in t]
                 if table == "tabs" else [f"{table}.{k}" for k in content]) \
            if isinstance(content, dict) else []
        for path in items:
            prov[path] = provenance.get(path) or f"template: as given in {origin}"
    names = ", ".join(t.name for t in tests)
    for path, pname in changed.items():
        lo, hi = cal.interval(pname)
        p = PARAMETERS[pname]
        prov[path] = (f"fitted: {pname} = {cal.values[pname] / p.display:.4g} {p.unit} "
                      f"(1 sigma {lo / p.display:.3g}..{hi / p.display:.3g}) to {names}")
    note = new["cell"].get("data_note", "")
    new["cell"]["data_note"] = (f"{note}; calibrated to {len(tests)} test curve(s) "
                                f"({names})").lstrip("; ")
    prov["cell.data_note"] = "derived"
    header = [f"Calibrated by explorer.calibrate from {origin} to {len(tests)} test(s): "
              f"{names}.",
              f"Model: {settings['electrochemistry'].upper()}, {settings['layout']} layout "
              "on a coarse grid, each test under its own current and rig conditions.",
              f"Status: {cal.status} ({cal.evaluations} evaluations).", "",
              "Fitted (value, one standard deviation):"]
    for n in cal.parameters:
        p = PARAMETERS[n]
        where = "" if p.in_file else " -- the rig's, not written into the cell"
        header.append(f"  {n}: {cal.values[n] / p.display:.4g} {p.unit} "
                      f"(+-{100 * cal.sigma_log[n]:.2g} %){where}")
    header.append("RMS error per test: " + "; ".join(
        f"{r['test']} {r['voltage_rms_mV']:.1f} mV" + (
            f", {r['temperature_rms_K']:.2f} K" if r["temperature_rms_K"] is not None else "")
        for r in cal.rms))
    header += ["", 'Each value says where it came from: "data sheet", "template" (as given in '
               "the cell the", 'calibration started from), "derived" or "fitted".',
               "Values that were not fitted are only as good as the cell they came from."]
    return render(new, prov, "\n".join(header))


# ------------------------------------------------------------------------------------------
# command line


def cmd_calibrate(cell: str, tests: list[str], fit: str | None = None,
                  out: str | None = None) -> int:
    """``python -m explorer calibrate CELL TEST.csv... [--fit a,b,c] [--out FILE]``.

    Writes the calibrated cell file (default ``<cell>_calibrated.toml`` in the
    current folder) and beside it the residual plots (``<out>_residuals.html``);
    prints the fitted values, their uncertainty, correlations and the RMS error
    per test. Exit 0 when the fit converged, 1 when it stopped before.
    """
    from explorer.cell import load_cell

    names = _fit_names(fit)  # a bad name is an error before anything runs
    c = load_cell(cell)
    target = Path(out) if out else Path(f"{Path(c.source_path).stem}_calibrated.toml")
    if c.source_path and target.resolve() == Path(c.source_path).resolve():
        raise OutputError(f"`--out` {target}: is the cell file being calibrated; choose "
                          "another file")
    loaded = [load_test(t) for t in tests]

    def progress(k, values):
        shown = ", ".join(f"{n}={values[n] / PARAMETERS[n].display:.4g}" for n in names)
        print(f"  evaluation {k}: {shown}", flush=True)

    print(f"calibrating {c.name!r} to {len(loaded)} test(s)...")
    cal = calibrate(c, loaded, fit=names, out=target, progress=progress)
    print(cal.summary())
    print(f"wrote {target}")
    figure = target.with_name(f"{target.stem}_residuals.html")
    try:
        from explorer.fileio import atomic_write_text

        atomic_write_text(figure, cal.figure().to_html(include_plotlyjs=True, full_html=True))
        print(f"wrote {figure}")
    except ImportError:  # plotly missing: the fit stands without the plots
        log.warning("plotly is not installed: no residual plots")
    return 0 if cal.status == "converged" else 1
