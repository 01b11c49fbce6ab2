"""The time stepper: drives a rod model and a thermal model through a duty.

Per time step (operator splitting, the thermal field lagging one step):

1. the rod advances at the thermal model's mean temperature, with the
   collector and tab resistance in series, under the step's control;
2. its heat (spread uniformly) plus the collector Joule map times I^2 and
   the tab Joule heat go into one implicit thermal step;
3. end conditions are checked; a crossing is located by re-taking the step
   with a shorter dt (Illinois false position) to within the tolerances in
   ``END_TOLERANCE``, so no end condition is overshot.

Steps adapt to a local error estimate (the second difference of the voltage,
or of the current in a voltage hold) and never exceed the output interval, on whose multiples the stepper lands so the record is on a
regular time base (plus the exact moments steps end). A failed rod solve
retries with a quarter of the step; below ``dt_min`` the run stops cleanly
with what it computed and a status saying when and why. Ctrl-C does the same.
"""

from __future__ import annotations

import logging
import math
import time as _time
from dataclasses import dataclass, field

import numpy as np

from explorer.duty import End, ResolvedStep
from explorer.rod.base import Control, RodStepError

log = logging.getLogger(__name__)

# How close a located end condition must come to its threshold (in the quantity's unit).
END_TOLERANCE = {"voltage": 1e-3, "soc": 1e-4, "temperature": 1e-2}
CURRENT_RELATIVE_TOLERANCE = 1e-3  # of the end current
HEAT_KEYS = ("irreversible", "reversible", "ohmic_electrolyte", "ohmic_solid")
POINTS_PER_STEP = 120
AUTO_INTERVAL_S = (0.5, 60.0)  # bounds of the automatic output spacing


@dataclass
class Settings:
    output_interval_s: float | None = None  # None: about POINTS_PER_STEP records per duty step
    dt_min_s: float = 1e-3
    dt_first_s: float = 1.0  # first step after a load change
    voltage_tolerance_V: float = 1e-3  # step-size control: local error in the voltage
    current_tolerance: float = 0.01  # ... in the current of a voltage hold, relative
    voltage_change_V: float = 0.05  # largest voltage change in one step (keeps knees resolved)


@dataclass
class Record:
    """What the stepper computed, one entry per recorded time."""

    time: list = field(default_factory=list)
    step: list = field(default_factory=list)
    voltage: list = field(default_factory=list)
    current: list = field(default_factory=list)
    ocv: list = field(default_factory=list)
    soc: list = field(default_factory=list)
    temperature: list = field(default_factory=list)  # (ny, nx) arrays
    heat_map: list = field(default_factory=list)  # (ny, nx) W per grid cell
    heat: dict = field(default_factory=dict)  # source -> list of W
    heat_rejected: list = field(default_factory=list)
    rejected_by_sink: dict = field(default_factory=dict)
    core_difference: list = field(default_factory=list)  # max K
    # through the thickness (degC): hottest and coldest point anywhere in the cell, the face
    # extremes, and the largest hottest-minus-coldest through the thickness at one point (K)
    hottest: list = field(default_factory=list)
    coldest: list = field(default_factory=list)
    front_max: list = field(default_factory=list)
    front_min: list = field(default_factory=list)
    back_max: list = field(default_factory=list)
    back_min: list = field(default_factory=list)
    through_difference: list = field(default_factory=list)
    coolant_outlet: list = field(default_factory=list)
    soc_map: list = field(default_factory=list)  # (ny, nx) or None where SOC is uniform
    current_density: list = field(default_factory=list)  # (ny, nx) A m-2 or None if uniform
    stored_J: list = field(default_factory=list)
    # running integrals over every step taken (exact even where the record is decimated)
    heat_generated_J: list = field(default_factory=list)
    heat_rejected_J: list = field(default_factory=list)
    charge_C: list = field(default_factory=list)
    electrical_J: list = field(default_factory=list)
    lithium_mol: list = field(default_factory=list)
    status: str = "completed"
    message: str = ""
    notes: list = field(default_factory=list)  # what the user should know about the run
    wall_time_s: float = 0.0
    steps_taken: int = 0
    steps_rejected: int = 0


def _ladder(dt: float) -> float:
    """``dt`` rounded down to a rung of a sqrt(2) ladder: few distinct step sizes, so the
    thermal model's factorisations (cached per step size) are reused."""
    return 2.0 ** (math.floor(2.0 * math.log2(dt) + 1e-9) / 2.0)


def _on_grid(t, interval) -> bool:
    k = round(t / interval)
    return k >= 1 and abs(t - k * interval) <= 1e-9 * max(1.0, t)


def _extrapolation_error(hist, t, y):
    """Distance of ``y`` at ``t`` from the line through the last two accepted points.

    For a first-order implicit scheme this second difference is of the order of
    the local truncation error (``y'' dt^2``), which makes it the step-size
    control's error estimate; None until two points since the last load change.
    """
    if len(hist) < 2:
        return None
    (t1, y1), (t2, y2) = hist[-2], hist[-1]
    return abs(y - (y2 + (y2 - y1) * (t - t2) / (t2 - t1)))


class _Stop(Exception):
    def __init__(self, status, message):
        super().__init__(message)
        self.status, self.message = status, message


@dataclass
class Coupling:
    """What ties the rod to the in-plane models (the averaged layout; zeros for single)."""

    series_resistance_ohm: float = 0.0
    joule_map_W_per_A2: np.ndarray | None = None  # (ny, nx) collector foils
    tab_joule_W_per_A2: dict = field(default_factory=dict)


def run(rod, thermal, steps: list[ResolvedStep], *, start_soc: float, start_temperature_C: float,
        coupling: Coupling | None = None, settings: Settings | None = None,
        progress=None) -> Record:
    """Run ``steps`` and return the :class:`Record` (never raises for solver trouble)."""
    coupling = coupling or Coupling()
    settings = settings or Settings()
    stepper = _Stepper(rod, thermal, coupling, settings, progress)
    wall = _time.perf_counter()
    stepper.start(start_soc, start_temperature_C)
    try:
        for index, step in enumerate(steps):
            stepper.run_step(index, step)
    except _Stop as stop:
        stepper.rec.status, stepper.rec.message = stop.status, stop.message
    except KeyboardInterrupt:
        stepper.rec.status = "stopped"
        stepper.rec.message = f"interrupted by the user at t = {stepper.t:.1f} s"
    else:
        stepper.rec.message = f"all {len(steps)} duty step(s) ran to their end conditions"
    if stepper.rec.notes:
        stepper.rec.message = "; ".join([stepper.rec.message, *stepper.rec.notes])
    stepper.rec.wall_time_s = _time.perf_counter() - wall
    return stepper.rec


class _Trial:
    __slots__ = ("dt", "rod", "thermal", "rejected", "heat_map", "tab_heat", "heat", "t_max",
                 "collector")


class _Stepper:
    def __init__(self, rod, thermal, coupling, settings, progress):
        self.rod, self.thermal, self.c, self.s = rod, thermal, coupling, settings
        self.progress = progress
        self.rec = Record(heat={k: [] for k in (*HEAT_KEYS, "collector", "tab")})
        shape = thermal.grid.shape
        self.n_cells = shape[0] * shape[1]
        self.joule = (coupling.joule_map_W_per_A2 if coupling.joule_map_W_per_A2 is not None
                      else np.zeros(shape))
        self.R = coupling.series_resistance_ohm
        self.needs_field = False
        self.integrals = np.zeros(4)  # heat generated, heat rejected (J), charge (C), work (J)
        self.joule_total = float(self.joule.sum())
        self.field_rods = bool(getattr(rod, "field_temperature", False))

    # -- state ------------------------------------------------------------------------------
    def start(self, soc, temperature_C):
        self.t = 0.0
        self.T_state = self.thermal.initial_state(temperature_C)
        self.rod_state = self.rod.initial_state(soc, temperature_C + 273.15)
        # a zero-current step of zero length would need the rod's OCV; take a tiny rest step
        res = self.rod.solve_step(self.rod_state, 1e-6, self._rod_temperature(),
                                  Control("current", 0.0), self.R)
        zero = np.zeros(self.thermal.grid.shape)
        self._record(0, res, zero, {}, {k: 0.0 for k in HEAT_KEYS}, {}, 0.0, boundary=True)

    def _record(self, index, res, heat_map, tab_heat, heat, rejected, collector,
                boundary=False):
        r = self.rec
        T = self.thermal.temperature_C(self.T_state)
        r.time.append(self.t)
        r.step.append(index)
        r.voltage.append(res.voltage_V)
        r.current.append(res.current_A)
        r.ocv.append(res.ocv_V)
        r.soc.append(res.soc)
        r.temperature.append(np.array(T, dtype=float, copy=True))
        r.heat_map.append(heat_map)
        for k in HEAT_KEYS:
            r.heat[k].append(heat.get(k, 0.0))
        r.heat["collector"].append(collector)
        r.soc_map.append(getattr(res, "soc_map", None))
        r.current_density.append(getattr(res, "current_density_map", None))
        r.heat["tab"].append(sum(tab_heat.values()) if tab_heat else 0.0)
        r.heat_rejected.append(float(sum(rejected.values())))
        for name, w in rejected.items():
            r.rejected_by_sink.setdefault(name, [0.0] * (len(r.time) - 1)).append(w)
        for lst in r.rejected_by_sink.values():
            if len(lst) < len(r.time):
                lst.append(0.0)
        core = self.thermal.core_temperature_C(self.T_state, heat_map)
        r.core_difference.append(float(np.max(core) - np.max(T)))
        through = getattr(self.thermal, "through_thickness_C", None)
        if through is not None:
            tt = through(self.T_state, heat_map)
        else:  # a thermal model without surface temperatures: the mean field and the core
            tt = {"front": T, "back": T, "hottest": np.maximum(core, T), "coldest": T}
        r.hottest.append(float(np.max(tt["hottest"])))
        r.coldest.append(float(np.min(tt["coldest"])))
        r.front_max.append(float(np.max(tt["front"])))
        r.front_min.append(float(np.min(tt["front"])))
        r.back_max.append(float(np.max(tt["back"])))
        r.back_min.append(float(np.min(tt["back"])))
        r.through_difference.append(float(np.max(tt["hottest"] - tt["coldest"])))
        outlet = self.thermal.coolant_outlet_C(self.T_state)
        r.coolant_outlet.append(math.nan if outlet is None else outlet)
        r.stored_J.append(self.thermal.stored_J(self.T_state))
        r.heat_generated_J.append(self.integrals[0])
        r.heat_rejected_J.append(self.integrals[1])
        r.charge_C.append(self.integrals[2])
        r.electrical_J.append(self.integrals[3])
        # cyclable lithium is a conservation check, not a trace: taken where duty steps end
        r.lithium_mol.append(self.rod.lithium_mol(res.state) if boundary else math.nan)

    # -- one duty step ------------------------------------------------------------------------
    def run_step(self, index, step: ResolvedStep):
        s = self.s
        t0 = self.t
        self.needs_field = any(e.quantity == "temperature" for e in step.ends)
        interval = s.output_interval_s or min(max(step.expected_duration_s / POINTS_PER_STEP,
                                                  AUTO_INTERVAL_S[0]), AUTO_INTERVAL_S[1])
        wanted = min(s.dt_first_s, interval)  # the step size the error control asks for
        t_end = t0 + step.step.max_duration_s()
        prev_voltage = self.rec.voltage[-1]
        last_load = None
        hist = []  # (t, y) accepted since the last load change; y is what the control leaves free
        watch_current = step.kind == "voltage"
        while True:
            if self.t >= t_end - 1e-9:
                return
            t_in = self.t - t0
            # land on step ends, profile breakpoints and (when asked for) output times
            limit = t_end
            if s.output_interval_s:
                limit = min(limit, t0 + (math.floor(t_in / interval + 1e-9) + 1) * interval)
            if step.kind == "profile":
                limit = min(limit, t0 + step.next_breakpoint(t_in))
            dt = min(_ladder(wanted), limit - self.t)
            if dt <= 1e-9:  # an output time within round-off: skip to the next one
                dt = min(wanted, limit - self.t + interval)
            control = self._control(step, t_in)
            # a load change jumps the voltage by the Ohmic drop whatever dt is: not an error
            fresh = control.value != last_load
            if fresh:
                hist = []
            trial = self._try(control, dt, index)
            if trial is None:
                self.rec.steps_rejected += 1
                wanted = dt / 4.0
                if wanted < s.dt_min_s:
                    raise _Stop("failed", self._failure_message(step, control))
                continue
            y = trial.rod.current_A if watch_current else trial.rod.voltage_V
            tol = (s.current_tolerance * max(abs(y), 1e-6) if watch_current
                   else s.voltage_tolerance_V)
            err = _extrapolation_error(hist, self.t + dt, y)
            dV = abs(trial.rod.voltage_V - prev_voltage)
            too_big = (err is not None and err > tol) or (not fresh and dV > s.voltage_change_V)
            if too_big and dt > 4 * s.dt_min_s:
                self.rec.steps_rejected += 1
                shrink = 0.5 if err is None or err <= tol else max(0.2, 0.9 * math.sqrt(tol / err))
                wanted = dt * shrink
                continue
            end = self._crossed(step, trial, t0)
            if end is not None:
                trial = self._locate(step, end, control, trial, t0, index)
                self._accept(trial, index, boundary=True)
                if self.t - t0 < 1e-2:  # e.g. a charge started at the upper voltage limit
                    unit = {"voltage": " V", "temperature": " degC", "current": " A"}.get(
                        end.quantity, "")
                    self.rec.notes.append(
                        f"duty step {step.step.label!r} ended at once: {end.quantity} was already "
                        f"{end.direction} {end.threshold:g}{unit} when it started")
                return
            last = self.t + trial.dt >= t_end - 1e-9
            on_base = s.output_interval_s is None or _on_grid(self.t + trial.dt - t0, interval)
            self._accept(trial, index, boundary=last, record=last or on_base)
            hist.append((self.t, y))
            prev_voltage = trial.rod.voltage_V
            last_load = control.value
            grow = 1.5 if err is None or err < 0.25 * tol else min(1.5, 0.9 * math.sqrt(tol / err))
            wanted = min(max(wanted, dt) * grow, interval)

    def _control(self, step: ResolvedStep, t_in: float) -> Control:
        if step.kind == "rest":
            return Control("current", 0.0)
        if step.kind == "profile":
            return Control(step.step.profile_quantity, step.load_at(t_in))
        return Control(step.kind, step.value)

    def _rod_temperature(self):
        """What the rod is given: the field (degC) for a grid of rods, else the mean (K).

        One rod stands for reactions spread uniformly over the face, so its Arrhenius
        factors belong at the area mean of the temperature; a heat-weighted mean would
        lean toward the tab corners, where the extra heat is collector Joule heat rather
        than electrochemistry, and would overstate the rod's kinetics and transport.
        """
        if self.field_rods:
            return self.thermal.temperature_C(self.T_state)
        return self.thermal.mean_temperature_C(self.T_state) + 273.15

    def _try(self, control, dt, index) -> _Trial | None:
        try:
            res = self.rod.solve_step(self.rod_state, dt, self._rod_temperature(), control, self.R)
        except RodStepError as exc:
            log.debug("rod step failed at t=%.3f dt=%.3g: %s", self.t, dt, exc)
            self._last_error = str(exc)
            return None
        if not np.isfinite(res.voltage_V):
            self._last_error = "the rod returned a non-finite voltage"
            return None
        tr = _Trial()
        tr.dt, tr.rod, tr.heat, tr.thermal = dt, res, res.heat_W, None
        if self.needs_field:
            self._thermal_step(tr)
        return tr

    def _thermal_step(self, tr: _Trial) -> None:
        """The thermal step for a trial; deferred until a trial is accepted unless an end
        condition on temperature has to be watched (saves factorisations for trial dts)."""
        res = tr.rod
        if getattr(res, "heat_map_W", None) is not None:  # a grid of rods brings its own fields
            tr.heat_map, tr.tab_heat, tr.collector = res.heat_map_W, res.tab_heat_W, res.collector_W
        else:
            I2 = res.current_A ** 2
            q_rod = sum(tr.heat.get(k, 0.0) for k in HEAT_KEYS)
            tr.heat_map = np.full(self.thermal.grid.shape, q_rod / self.n_cells)
            if self.joule_total:
                tr.heat_map += I2 * self.joule
            tr.tab_heat = {k: I2 * v for k, v in self.c.tab_joule_W_per_A2.items()}
            tr.collector = I2 * self.joule_total
        tr.thermal, tr.rejected = self.thermal.step(self.T_state, tr.heat_map, tr.dt,
                                                    tr.tab_heat or None)
        if self.needs_field:
            tr.t_max = float(np.max(self.thermal.temperature_C(tr.thermal)))

    def _value(self, end: End, tr: _Trial, t0: float) -> float:
        q = end.quantity
        if q == "voltage":
            return tr.rod.voltage_V
        if q == "current":
            return abs(tr.rod.current_A)
        if q == "soc":
            return tr.rod.soc
        if q == "temperature":
            return tr.t_max
        return self.t + tr.dt - t0

    def _crossed(self, step, tr, t0) -> End | None:
        for end in step.ends:
            if end.quantity == "time":
                continue  # handled by landing exactly on t_end
            if end.crossed(self._value(end, tr, t0)):
                return end
        return None

    def _tolerance(self, end: End) -> float:
        if end.quantity == "current":
            return CURRENT_RELATIVE_TOLERANCE * abs(end.threshold)
        return END_TOLERANCE[end.quantity]

    def _locate(self, step, end, control, tr_hi, t0, index) -> _Trial:
        """Shorten the step until ``end`` is met within tolerance (Illinois false position)."""
        tol = self._tolerance(end)
        g_hi = end.distance(self._value(end, tr_hi, t0))  # <= 0: crossed
        if abs(g_hi) <= tol:
            return tr_hi
        lo, g_lo = 0.0, self._distance_now(end, t0)
        hi = tr_hi.dt
        best = tr_hi
        side = 0
        for _ in range(60):
            if g_lo is None or not math.isfinite(g_lo) or g_lo - g_hi <= 0:
                dt = 0.5 * (lo + hi)
            else:
                dt = hi - g_hi * (hi - lo) / (g_hi - g_lo)
                dt = min(max(dt, lo + 0.02 * (hi - lo)), hi - 0.02 * (hi - lo))
            tr = self._try(control, dt, index)
            if tr is None:  # past a limit the rod cannot reach: treat as crossed
                hi, g_hi = dt, -math.inf
                continue
            g = end.distance(self._value(end, tr, t0))
            if abs(g) <= tol:
                return tr
            if g > 0:
                lo, g_lo = dt, g
                if side == +1:
                    g_hi *= 0.5
                side = +1
            else:
                hi, g_hi, best = dt, g, tr
                if side == -1 and g_lo is not None:
                    g_lo *= 0.5
                side = -1
            if hi - lo < self.s.dt_min_s:
                break
        return best

    def _distance_now(self, end, t0):
        r = self.rec
        if end.quantity == "voltage":
            return end.distance(r.voltage[-1])
        if end.quantity == "current":
            return end.distance(abs(r.current[-1]))
        if end.quantity == "soc":
            return end.distance(r.soc[-1])
        if end.quantity == "temperature":
            return end.distance(float(np.max(r.temperature[-1])))
        return None

    def _accept(self, tr: _Trial, index, boundary=False, record=True):
        if tr.thermal is None:
            self._thermal_step(tr)
        res = tr.rod
        generated = (sum(tr.heat.get(k, 0.0) for k in HEAT_KEYS) + tr.collector
                     + sum(tr.tab_heat.values()))
        dt = tr.dt
        self.integrals += (generated * dt, sum(tr.rejected.values()) * dt, res.current_A * dt,
                           res.current_A * res.voltage_V * dt)
        self.t += tr.dt
        self.rod_state = tr.rod.state
        self.T_state = tr.thermal
        self.rec.steps_taken += 1
        if record:
            self._record(index, tr.rod, tr.heat_map, tr.tab_heat, tr.heat, tr.rejected,
                         tr.collector, boundary)
        if self.progress is not None:
            self.progress(self.t, index)

    def _failure_message(self, step, control) -> str:
        what = {"current": f"a current of {control.value:.4g} A",
                "power": f"a power of {control.value:.4g} W",
                "voltage": f"a terminal voltage of {control.value:.4g} V"}[control.kind]
        reason = getattr(self, "_last_error", "the solver did not converge")
        return (f"stopped at t = {self.t:.1f} s in duty step {step.step.label!r}: the cell "
                f"could not sustain {what} ({reason})")
