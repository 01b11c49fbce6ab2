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

How the run ended (``Record.status``, contract A of the project notes):
"completed" when every duty step ended by its own end condition (or its
profile's end); "cut_short" when a safety limit the step did not ask for
ended it (the cell's voltage window on a profile or on a step with other
ends of its own, the temperature cap), and the duty stops there; "stopped"
on Ctrl-C; "failed" when the solver cannot go on (a step that fails down to
``dt_min``, a step size stuck at ``dt_min`` over tolerance, a start that
fails, a terminal voltage outside the physical band). ``Record.step_ends``
says, per duty step, what ended it.
"""

from __future__ import annotations

import logging
import math
import time as _time
from dataclasses import dataclass, field

import numpy as np

from explorer.duty import End, ResolvedStep
from explorer.rod.base import Control, RodStepError
from explorer.validators import InputError, short_repr

log = logging.getLogger(__name__)

# How close a located end condition must come to its threshold (in the quantity's unit).
END_TOLERANCE = {"voltage": 1e-3, "soc": 1e-4, "temperature": 1e-2}
CURRENT_RELATIVE_TOLERANCE = 1e-3  # of the end current
HEAT_KEYS = ("irreversible", "reversible", "ohmic_electrolyte", "ohmic_solid")
POINTS_PER_STEP = 120
AUTO_INTERVAL_S = (0.5, 60.0)  # bounds of the automatic output spacing
AUTO_PROFILE_RECORDS = 5000  # a denser profile is recorded on a regular time base instead
MAX_RECORDS = 200_000  # a requested output interval may not ask for more records than this
# What a thermal model's linear algebra raises when its matrix is broken (e.g. a design's
# conductances overflow to inf): the run fails with a status rather than a traceback.
THERMAL_ERRORS = (RuntimeError, ArithmeticError, np.linalg.LinAlgError)


@dataclass
class Settings:
    output_interval_s: float | None = None  # None: about POINTS_PER_STEP records per duty step
    dt_min_s: float = 1e-3
    dt_first_s: float = 1.0  # first step after a load change
    voltage_tolerance_V: float = 1e-3  # step-size control: local error in the voltage
    current_tolerance: float = 0.01  # ... in the current of a voltage hold, relative
    voltage_change_V: float = 0.05  # largest voltage change in one step (keeps knees resolved)
    # physical bounds: the hottest point of the face above the cap cuts the run short; a
    # terminal voltage outside the band is a non-physical state (the run fails, unrecorded)
    temperature_cap_C: float = 150.0
    voltage_band_V: tuple[float, float] = (0.0, math.inf)
    # steps accepted at the smallest size with the error over tolerance, within one duty step:
    # beyond this the step size has collapsed (the solution changes faster than it can follow)
    forced_steps_max: int = 200
    # heat into the thermal step: the trapezoidal mean over the step (second order), or the
    # value at the step's end (first order; kept for comparison in the stepper bench)
    heat_trapezoid: bool = True


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
    status: str = "completed"  # "completed" | "cut_short" | "stopped" | "failed"
    message: str = ""
    step_ends: list = field(default_factory=list)  # per duty step: what ended it (dicts)
    notes: list = field(default_factory=list)  # what the user should know about the run
    wall_time_s: float = 0.0
    steps_taken: int = 0
    steps_rejected: int = 0


def _ladder(dt: float) -> float:
    """``dt`` rounded down to a rung of a sqrt(2) ladder: few distinct step sizes, so the
    thermal model's factorisations (cached per step size) are reused."""
    return 2.0 ** (math.floor(2.0 * math.log2(dt) + 1e-9) / 2.0)


def _as_asked(dt: float) -> float:
    """``dt`` as the error control asks for it (a thermal model with nothing to reuse)."""
    return dt


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
    if not t2 > t1:  # steps below the clock's resolution: no line to extrapolate
        return None
    return abs(y - (y2 + (y2 - y1) * (t - t2) / (t2 - t1)))


def _nice_ceiling(x: float) -> float:
    """The smallest of 1, 2, 5 times a power of ten that is >= ``x`` (> 0)."""
    k = 10.0 ** math.floor(math.log10(x))
    return next(m * k for m in (1.0, 2.0, 5.0, 10.0) if m * k >= x * (1 - 1e-12))


def step_end(index, step: ResolvedStep, ended_by, quantity=None, threshold=None,
             time_s=None) -> dict:
    """One entry of ``Record.step_ends`` (contract A): what ended duty step ``index``."""
    return {"index": index, "label": step.step.label, "ended_by": ended_by,
            "quantity": quantity, "threshold": threshold, "time_s": time_s}


def output_interval(value, where="simulate") -> float | None:
    """``output_interval_s`` as given to simulate: None (automatic) or a number > 0."""
    if value is None:
        return None
    if isinstance(value, bool | str | bytes) or not isinstance(value, int | float | np.number):
        raise InputError(f"{where}: `output_interval_s` must be None or a number of seconds "
                         f"> 0, got {type(value).__name__} {short_repr(value)}")
    if not value > 0:
        raise InputError(f"{where}: `output_interval_s` must be > 0, got {short_repr(value)}")
    return float(value)


def check_output_interval(steps: list[ResolvedStep], output_interval_s, where="simulate"):
    """Refuse an output interval that would record more than ``MAX_RECORDS`` points over the
    duty's expected length (the same rough guess that sets the automatic spacing)."""
    if output_interval_s is None:
        return
    expected = sum(s.expected_duration_s for s in steps)
    n = expected / output_interval_s
    if n > MAX_RECORDS:
        raise InputError(
            f"{where}: `output_interval_s` = {output_interval_s:g} s would record about "
            f"{n:,.0f} points over the duty's expected {expected:,.0f} s (at most "
            f"{MAX_RECORDS:,}); choose output_interval_s >= {expected / MAX_RECORDS:.3g} s, or "
            "leave it None for the automatic spacing")


class _Stop(Exception):
    def __init__(self, status, message, end=None):
        super().__init__(message)
        self.status, self.message, self.end = status, message, end


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
    rec = stepper.rec
    rec.step_ends = [step_end(i, s, "not_run") for i, s in enumerate(steps)]
    wall = _time.perf_counter()
    index = 0
    try:
        stepper.start(start_soc, start_temperature_C, steps[0] if steps else None)
        for index, step in enumerate(steps):
            rec.step_ends[index] = stepper.run_step(index, step)
    except _Stop as stop:
        rec.status, rec.message = stop.status, stop.message
        if stop.end is not None:
            rec.step_ends[index] = stop.end
        left = len(steps) - index - 1
        if left:
            rec.message += f"; the {left} later duty step(s) did not run"
    except KeyboardInterrupt:
        rec.status = "stopped"
        rec.message = f"interrupted by the user at t = {stepper.t:.1f} s"
        if steps:
            rec.step_ends[index] = step_end(index, steps[index], "interrupted", time_s=stepper.t)
    else:
        rec.message = f"all {len(steps)} duty step(s) ran to their end conditions"
    stepper.finish()
    if rec.notes:
        rec.message = "; ".join([rec.message, *rec.notes])
    rec.wall_time_s = _time.perf_counter() - wall
    return rec


_THROUGH = ("hottest", "coldest", "front_max", "front_min", "back_max", "back_min",
            "through_difference", "core_difference")


def _settle_through(rec, thermal) -> None:
    """The recorded through-thickness figures with the slab's settling lag (the runs start at
    one temperature; the quasi-steady profile would show a cell at rest hotter than it is).
    Models without ``through_settling`` keep their figures as recorded."""
    settling = getattr(thermal, "through_settling", None)
    if settling is None or not rec.time or len(rec.hottest) != len(rec.time):
        return
    from explorer.inplane.throughplane import settle_extremes

    info = settling()
    if info["tau_s"] <= 0.0:
        return
    figures = {k: getattr(rec, k) for k in _THROUGH if len(getattr(rec, k)) == len(rec.time)}
    # the (equal-shaped) fields as one array: per-record numpy calls cost more than the work
    fields = np.concatenate(rec.temperature).reshape(len(rec.temperature), -1)
    mean_max = fields.max(axis=1).tolist()
    mean_min = fields.min(axis=1).tolist()
    settled = settle_extremes(rec.time, mean_max, mean_min, figures, info["tau_s"],
                              info["cooled"])
    for key in figures:
        setattr(rec, key, settled[key].tolist())


class _Trial:
    """One attempted step: the rod's result and, once taken, the thermal step.

    ``heat``, ``heat_map``, ``tab_heat``, ``collector`` and their total ``generated`` are the
    heat fed to the thermal step (see :meth:`_Stepper._heat_of`); ``end`` the rod's heat at
    the step's end, the start of the next step's trapezoid; ``rejected`` the sink flows at
    the new state (recorded), ``rejected_J_per_s`` their total mean over the step (the
    running integral)."""

    __slots__ = ("dt", "rod", "thermal", "rejected", "heat_map", "tab_heat", "heat", "t_max",
                 "collector", "generated", "end", "rejected_J_per_s", "stored_J")


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
        # running integrals: heat generated, heat rejected (J), charge (C), work (J)
        self.integrals = [0.0, 0.0, 0.0, 0.0]
        self.joule_total = float(self.joule.sum())
        self.uniform = np.ones(shape)  # the rod's heat spread uniformly, per unit
        self.tab_joule = dict(coupling.tab_joule_W_per_A2)
        self.field_rods = bool(getattr(rod, "field_temperature", False))
        self.t = 0.0
        self.prev = None  # the rod's result at the last accepted step (recorded or not)
        self.cap_end = End("temperature", settings.temperature_cap_C, "above", "cap")
        self.fresh = True  # the current trial starts a new load: no trapezoid over the step
        self.rod_T = None  # the rod's temperature at the current state (cached)
        self.rod_T_rate = None  # its rate of change over the last accepted step (per s)
        self.last_heat = None  # the rod's heat at the last accepted step (_Trial.end)
        # a thermal model that reports many recorded states at once (looked up on its class,
        # so a wrapper forwarding attributes keeps the per-state path): states are kept and
        # their figures taken in one call when the run ends
        self.batch = getattr(type(thermal), "recorded_figures", None) is not None
        # the hottest mean temperature of a state in one call where the model offers it
        # (looked up on its class likewise); else from its temperature field
        self.max_T = getattr(type(thermal), "max_temperature_C", None)
        self.kept_states = []
        # a thermal model that factorises per step size (the 2-D field) keeps the steps on a
        # ladder of sizes, so its factorisations are reused; one that does not (the lumped
        # cell) takes the step the error control asks for (up to a third longer)
        self.rung = (_ladder if getattr(thermal, "factorises_per_step_size", True)
                     else _as_asked)
        self.rows = []  # one tuple per record (see _record), into the Record at the end
        # a fitted thermal model (exponential fitting: its slowest mode exact on any step), or
        # one stepping a fitted model for several cells, reports the flows at the new state
        # (recorded); the heat rejected over the step is then what the first law leaves
        self.fitted = any(getattr(m, "fitted", None) is True
                          for m in (thermal, getattr(thermal, "model", None)))

    # -- state ------------------------------------------------------------------------------
    def start(self, soc, temperature_C, first_step=None):
        """The initial state and its record. Nothing is computed yet when this fails, so a
        start the models cannot make is an InputError (never a record without a voltage)."""
        self.t = 0.0
        self.rod_T = self.rod_T_rate = None
        try:
            self.T_state = self.thermal.initial_state(temperature_C)
            T = self.thermal.temperature_C(self.T_state)
            problem = None if np.all(np.isfinite(T)) else "its temperatures are not finite"
        except THERMAL_ERRORS as exc:
            problem = f"{type(exc).__name__}: {exc}"
        if problem is not None:
            raise InputError(f"simulate: could not start: the thermal model of the cell and its "
                             f"`cooling` failed at {temperature_C:g} degC ({problem}); a "
                             "conductance or size of the cooling design is probably out of range")
        self.rod_state = self.rod.initial_state(soc, temperature_C + 273.15)
        # a zero-current step of zero length would need the rod's OCV; take a tiny rest step
        try:
            res = self.rod.solve_step(self.rod_state, 1e-6, self._rod_temperature(),
                                      Control("current", 0.0), self.R)
            problem = self._unphysical(res.voltage_V)
        except RodStepError as exc:
            res, problem = None, str(exc)
        if problem is not None:
            raise InputError(f"simulate: could not start: the cell model failed at rest at "
                             f"`start_soc` {soc:g} and `start_temperature_C` {temperature_C:g} "
                             f"degC ({problem}); the cell's parameters are outside what the "
                             "electrochemical model can solve at this state")
        zero = np.zeros(self.thermal.grid.shape)
        self.prev = res
        self.last_heat = None
        self.stored_now = self.thermal.stored_J(self.T_state) if self.fitted else 0.0
        self._record(0, res, zero, {}, {k: 0.0 for k in HEAT_KEYS}, {}, 0.0, boundary=True)

    def _unphysical(self, voltage_V) -> str | None:
        """Why a terminal voltage is non-physical (None when it is not)."""
        lo, hi = self.s.voltage_band_V
        if not math.isfinite(voltage_V):
            return "non-physical state: the terminal voltage is not a finite number"
        if not lo <= voltage_V <= hi:
            return (f"non-physical state: the terminal voltage would be {voltage_V:.4g} V, "
                    f"outside the sane band {lo:g} to {hi:g} V")
        return None

    def _record(self, index, res, heat_map, tab_heat, heat, rejected, collector,
                boundary=False):
        """Keep one record: a row of references now (nothing here is changed later), the
        Record's lists filled from the rows by :meth:`finish`."""
        field = self.field_rods
        self.rows.append((
            self.t, index, res.voltage_V, res.current_A, res.ocv_V, res.soc, heat_map, heat,
            collector, sum(tab_heat.values()) if tab_heat else 0.0, rejected,
            getattr(res, "soc_map", None) if field else None,
            getattr(res, "current_density_map", None) if field else None,
            *self.integrals,
            # cyclable lithium is a conservation check, not a trace: taken where steps end
            self.rod.lithium_mol(res.state) if boundary else math.nan))
        if self.batch:  # states are not changed in place: keep a reference, figures at the end
            self.kept_states.append(self.T_state)
        else:
            self._record_thermal(heat_map)

    def _record_thermal(self, heat_map):
        """The thermal figures of the current state, one state at a time (any thermal model)."""
        r = self.rec
        T = self.thermal.temperature_C(self.T_state)
        r.temperature.append(np.array(T, dtype=float, copy=True))
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

    def finish(self, chunk=256):
        """Fill the Record from the rows kept, and the thermal figures of the states kept for
        a batch, in chunks of ``chunk`` records (bounded memory on long records); then let the
        through-thickness figures settle (:func:`_settle_through`)."""
        self._fill_thermal(chunk)
        _settle_through(self.rec, self.thermal)

    def _fill_thermal(self, chunk):
        self._fill_rows()
        states, self.kept_states = self.kept_states, []
        if not self.batch or not states:
            return
        r = self.rec
        scalars = ("core_difference", "hottest", "coldest", "front_max", "front_min",
                   "back_max", "back_min", "through_difference", "coolant_outlet", "stored_J")
        shape = self.thermal.grid.shape
        for i in range(0, len(states), chunk):
            part = states[i:i + chunk]  # one concatenation: far cheaper than stacking
            fig = self.thermal.recorded_figures(
                np.concatenate(part).reshape(len(part), -1),
                np.concatenate(r.heat_map[i:i + chunk]).reshape(len(part), *shape))
            r.temperature.extend(fig["temperature"])
            for key in scalars:
                getattr(r, key).extend(fig[key].tolist())

    def _fill_rows(self):
        rows, self.rows = self.rows, []
        if not rows:
            return
        r = self.rec
        (time, step, voltage, current, ocv, soc, heat_map, heat, collector, tab, rejected,
         soc_map, current_density, generated, rejected_J, charge, work, lithium) = zip(*rows)
        for lst, values in ((r.time, time), (r.step, step), (r.voltage, voltage),
                            (r.current, current), (r.ocv, ocv), (r.soc, soc),
                            (r.heat_map, heat_map), (r.heat["collector"], collector),
                            (r.heat["tab"], tab), (r.soc_map, soc_map),
                            (r.current_density, current_density),
                            (r.heat_generated_J, generated), (r.heat_rejected_J, rejected_J),
                            (r.charge_C, charge), (r.electrical_J, work),
                            (r.lithium_mol, lithium)):
            lst.extend(values)
        gets = [h.get for h in heat]
        for k in HEAT_KEYS:
            r.heat[k].extend([get(k, 0.0) for get in gets])
        r.heat_rejected.extend([float(sum(d.values())) for d in rejected])
        names = list(dict.fromkeys(name for d in rejected for name in d))
        for name in names:
            r.rejected_by_sink[name] = [d.get(name, 0.0) for d in rejected]

    # -- one duty step ------------------------------------------------------------------------
    def run_step(self, index, step: ResolvedStep) -> dict:
        """Run one duty step; return how it ended (``step_end``), or raise ``_Stop`` when the
        duty must stop here (a safety limit, the temperature cap, the solver giving up)."""
        s = self.s
        t0 = self.t
        self.index, self.step = index, step  # for a failure deep in a trial's thermal step
        self.needs_field = any(e.quantity == "temperature" for e in step.ends)
        interval, grid = self._spacing(step)  # longest step; record time base (None: every step)
        wanted = min(s.dt_first_s, interval)  # the step size the error control asks for
        t_end = t0 + step.step.max_duration_s()
        prev_voltage = self.prev.voltage_V
        last_load = None
        hist = []  # (t, y) accepted since the last load change; y is what the control leaves free
        watch_current = step.kind == "voltage"
        forced = 0  # steps accepted at the smallest size with the error over tolerance
        fixed = None if step.kind == "profile" else self._control(step, 0.0)
        while True:
            if self.t >= t_end - 1e-9:
                return self._ran_its_time(index, step, t0)
            t_in = self.t - t0
            # land on step ends, profile breakpoints and the record's time base
            limit = t_end
            if grid:
                limit = min(limit, t0 + (math.floor(t_in / grid + 1e-9) + 1) * grid)
            if step.kind == "profile":
                limit = min(limit, t0 + step.next_breakpoint(t_in))
            # the longest step is taken as it is, not the rung below it: one step size more
            # to factorise per duty step, and a fifth fewer steps on a long one
            dt = min(interval if wanted >= interval else self.rung(wanted), limit - self.t)
            if dt <= 1e-9:  # an output time within round-off: skip to the next one
                dt = min(wanted, limit - self.t + (grid or interval))
            control = fixed or self._control(step, t_in)
            # a load change jumps the voltage by the Ohmic drop whatever dt is: not an error
            fresh = self.fresh = control.value != last_load
            if fresh:
                hist = []
            trial = self._try(control, dt, index)
            if trial is None:
                self.rec.steps_rejected += 1
                wanted = dt / 4.0
                if wanted < s.dt_min_s:
                    raise self._failed(index, step, self._failure_message(step, control))
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
            forced += too_big
            if forced > s.forced_steps_max:
                raise self._failed(index, step, self._collapse_message(step, err, tol))
            crossed = self._crossed(step, trial, t0) or self._over_cap(trial)
            if crossed:
                end, trial = self._locate_first(step, crossed, control, trial, t0, index)
                self._accept(trial, index, boundary=True)
                return self._ended_by(index, step, end, t0)
            last = self.t + trial.dt >= t_end - 1e-9
            on_base = grid is None or _on_grid(self.t + trial.dt - t0, grid)
            self._accept(trial, index, boundary=last, record=last or on_base)
            hist.append((self.t, y))
            prev_voltage = trial.rod.voltage_V
            last_load = control.value
            grow = 1.5 if err is None or err < 0.25 * tol else min(1.5, 0.9 * math.sqrt(tol / err))
            # growth starts from the rung asked for (or the step taken, if longer), not from the
            # unrounded request: compounding that made the step try the next rung up whenever a
            # few small growths added up, and a step twice as long doubles the error estimate, so
            # at an error over half the tolerance the try was rejected and paid for a solve
            # never below dt_min: a step forced there is counted above, not shrunk to nothing
            wanted = max(min(max(self.rung(wanted), dt) * grow, interval), s.dt_min_s)

    def _spacing(self, step: ResolvedStep):
        """(longest step, record time base or None for every step) for a duty step."""
        s = self.s
        if s.output_interval_s:
            return s.output_interval_s, s.output_interval_s
        interval = min(max(step.expected_duration_s / POINTS_PER_STEP, AUTO_INTERVAL_S[0]),
                       AUTO_INTERVAL_S[1])
        samples = len(step.step.profile_time_s)
        if step.kind == "profile" and samples > AUTO_PROFILE_RECORDS:  # keep the record bounded
            return interval, _nice_ceiling(step.step.profile_time_s[-1] / AUTO_PROFILE_RECORDS)
        return interval, None

    # -- how a step ended ----------------------------------------------------------------------
    def _ran_its_time(self, index, step, t0) -> dict:
        """The step reached its time end: the profile's last time or its own `end_time_s`."""
        if step.kind == "profile" and step.step.profile_time_s[-1] <= step.step.max_duration_s():
            return step_end(index, step, "profile_end", "time", step.step.profile_time_s[-1],
                            self.t)
        return step_end(index, step, "time", "time", step.step.max_duration_s(), self.t)

    def _ended_by(self, index, step, end: End, t0) -> dict:
        """The entry for a step ended by ``end``; a limit it did not ask for stops the duty."""
        if end.origin == "own":
            if self.t - t0 < 1e-2:  # e.g. a charge started at the upper voltage limit
                unit = {"voltage": " V", "temperature": " degC", "current": " A"}.get(
                    end.quantity, "")
                self.rec.notes.append(
                    f"duty step {step.step.label!r} ended at once: {end.quantity} was already "
                    f"{end.direction} {end.threshold:g}{unit} when it started")
            return step_end(index, step, "end_condition", end.quantity, end.threshold, self.t)
        ended_by = "temperature_cap" if end.origin == "cap" else "safety_limit"
        entry = step_end(index, step, ended_by, end.quantity, end.threshold, self.t)
        raise _Stop("cut_short", self._cut_message(step, end, t0), entry)

    def _cut_message(self, step, end: End, t0) -> str:
        if end.origin == "cap":
            why = (f"the hottest point of the face reached the temperature cap "
                   f"{end.threshold:g} degC (Settings.temperature_cap_C)")
        else:
            side = "lower" if end.direction == "below" else "upper"
            why = (f"the terminal voltage reached the cell's {side} limit {end.threshold:g} V, "
                   "a safety limit this step did not ask for")
        ran = self.t - t0
        total = step.step.max_duration_s()
        if math.isfinite(total):
            left = f"{total - ran:.1f} s of the step's {total:g} s were left"
        else:
            own = ", ".join(f"{e.quantity} {e.direction} {e.threshold:g}" for e in step.own_ends)
            left = f"its own end ({own}) was not reached"
        return (f"cut short at t = {self.t:.1f} s, {ran:.1f} s into duty step "
                f"{step.step.label!r}: {why}; {left}")

    def _failed(self, index, step, message) -> _Stop:
        return _Stop("failed", message, step_end(index, step, "solver", time_s=self.t))

    def _collapse_message(self, step, err, tol) -> str:
        return (f"stopped at t = {self.t:.1f} s in duty step {step.step.label!r}: the time step "
                f"collapsed: {self.s.forced_steps_max} steps at the smallest size "
                f"({self.s.dt_min_s:g} s) missed the error tolerance (last {err or 0:.3g} against "
                f"{tol:.3g}); the solution changes faster than the model can follow")

    def _control(self, step: ResolvedStep, t_in: float) -> Control:
        if step.kind == "rest":
            return Control("current", 0.0)
        if step.kind == "profile":
            return Control(step.step.profile_quantity, step.load_at(t_in))
        return Control(step.kind, step.value)

    def _state_temperature(self):
        """The rod's temperature at the current state: the field (degC) for a grid of rods,
        else the area mean (K).

        One rod stands for reactions spread uniformly over the face, so its Arrhenius
        factors belong at the area mean of the temperature; a heat-weighted mean would
        lean toward the tab corners, where the extra heat is collector Joule heat rather
        than electrochemistry, and would overstate the rod's kinetics and transport.
        """
        return (self.thermal.temperature_C(self.T_state) if self.field_rods
                else self.thermal.mean_temperature_C(self.T_state) + 273.15)

    def _rod_temperature(self, dt=0.0):
        """What the rod is given for a step of ``dt``: the temperature at the step's end,
        extrapolated along the last accepted step's rate of change.

        The rod's step is implicit (its state at the step's end), and so is the heat it
        returns, which the trapezoid pairs with the next step's: given the temperature at
        the step's start instead, kinetics and transport lag the warming cell by a step, a
        first-order error: it was nearly all of the 0.1-0.2 % by which an adiabatic 1C
        temperature rise on the default steps exceeded the one on 0.5 s steps (with the rod
        held at one temperature the heat differed by under 0.01 %; extrapolated, the rise
        now does too, stepper bench). The first step after a load change is not
        extrapolated (the heat, and so the rate, jumps there).
        """
        if self.rod_T is None:  # once per accepted state, not per trial
            self.rod_T = self._state_temperature()
        rate = self.rod_T_rate
        if rate is None or self.fresh:
            return self.rod_T
        return self.rod_T + rate * dt

    def _try(self, control, dt, index) -> _Trial | None:
        try:
            res = self.rod.solve_step(self.rod_state, dt, self._rod_temperature(dt), control,
                                      self.R)
        except RodStepError as exc:
            log.debug("rod step failed at t=%.3f dt=%.3g: %s", self.t, dt, exc)
            self._last_error = str(exc)
            return None
        problem = self._unphysical(res.voltage_V)
        if problem is not None:  # retried with a shorter step; never recorded
            self._last_error = problem
            return None
        tr = _Trial()
        tr.dt, tr.rod, tr.heat, tr.thermal = dt, res, res.heat_W, None
        if self.needs_field:
            self._thermal_step(tr)
        return tr

    def _heat_of(self, tr: _Trial) -> None:
        """The heat a trial feeds its thermal step, which is also what the record shows.

        Heat enters the thermal step as the trapezoidal mean of its values at the step's
        start and end (second order in dt), except on the first step after a load change,
        whose start value belongs to the old load: that one takes the end value. The record
        holds the same mean, so the heat traces are the mean over the step that ends at each
        record time (as the rejected heat is), and summing them over the steps gives the
        heat generated.
        """
        res = tr.rod
        heat = res.heat_W
        # a grid of rods brings its own maps (the test is on the rod first: cheaper)
        field = self.field_rods and getattr(res, "heat_map_W", None) is not None
        tr.end = ((heat, res.heat_map_W, res.tab_heat_W, res.collector_W) if field
                  else (heat, res.current_A ** 2))
        last = None if self.fresh or not self.s.heat_trapezoid else self.last_heat
        if last is not None:
            new, old = heat.get, last[0].get  # bound once: this runs every step
            heat = {k: 0.5 * (new(k, 0.0) + old(k, 0.0)) for k in HEAT_KEYS}
        tr.heat = heat
        part = heat.get
        q_rod = (part("irreversible", 0.0) + part("reversible", 0.0)
                 + part("ohmic_electrolyte", 0.0) + part("ohmic_solid", 0.0))
        if field:
            if last is None:
                tr.heat_map, tr.tab_heat, tr.collector = tr.end[1:]
            else:
                tr.heat_map = 0.5 * (res.heat_map_W + last[1])
                tr.tab_heat = {k: 0.5 * (v + last[2].get(k, 0.0))
                               for k, v in res.tab_heat_W.items()}
                tr.collector = 0.5 * (res.collector_W + last[3])
        else:
            I2 = tr.end[1] if last is None else 0.5 * (tr.end[1] + last[1])
            tr.heat_map = self.uniform * (q_rod / self.n_cells)
            if self.joule_total:
                tr.heat_map += I2 * self.joule
                tr.tab_heat = {k: I2 * v for k, v in self.tab_joule.items()}
            else:
                tr.tab_heat = {k: I2 * v for k, v in self.tab_joule.items()} if self.tab_joule else {}
            tr.collector = I2 * self.joule_total
        tr.generated = q_rod + tr.collector + (sum(tr.tab_heat.values()) if tr.tab_heat else 0.0)

    def _thermal_step(self, tr: _Trial) -> None:
        """The thermal step for a trial; deferred until a trial is accepted unless an end
        condition on temperature has to be watched (saves factorisations for trial dts)."""
        self._heat_of(tr)
        try:
            tr.thermal, tr.rejected = self.thermal.step(self.T_state, tr.heat_map, tr.dt,
                                                        tr.tab_heat or None)
            if self.fitted:
                tr.stored_J = self.thermal.stored_J(tr.thermal)
                tr.rejected_J_per_s = tr.generated - (tr.stored_J - self.stored_now) / tr.dt
            else:
                tr.rejected_J_per_s = sum(tr.rejected.values())
            if self.max_T is not None:
                tr.t_max = self.max_T(self.thermal, tr.thermal)
            else:
                tr.t_max = float(self.thermal.temperature_C(tr.thermal).max())
            # NaN and +inf show in t_max, -inf in the stored heat
            finite = math.isfinite(tr.t_max) and math.isfinite(tr.rejected_J_per_s) and (
                self.fitted or math.isfinite(float(self.thermal.temperature_C(tr.thermal).min())))
            problem = None if finite else "the temperatures are no longer finite numbers"
        except THERMAL_ERRORS as exc:
            problem = f"{type(exc).__name__}: {exc}"
        if problem is not None:
            raise self._failed(self.index, self.step,
                               f"stopped at t = {self.t:.1f} s in duty step "
                               f"{self.step.step.label!r}: the thermal model failed ({problem}); "
                               "a conductance or size of the cooling design is probably out "
                               "of range")

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

    def _crossed(self, step, tr, t0) -> list[End]:
        # time ends are met by landing exactly on t_end
        return [end for end in step.ends
                if end.quantity != "time" and end.crossed(self._value(end, tr, t0))]

    def _over_cap(self, tr: _Trial) -> list[End]:
        """[the cap] when the trial's hottest point passes the temperature cap. The trial's
        thermal step is taken here (acceptance needs it anyway); locating the crossing then
        watches the field on every trial."""
        if not math.isfinite(self.cap_end.threshold):
            return []
        if tr.thermal is None:
            self._thermal_step(tr)
        t_max = tr.t_max
        if not self.cap_end.crossed(t_max):
            return []
        tr.t_max = t_max
        self.needs_field = True
        return [self.cap_end]

    def _locate_first(self, step, crossed, control, tr, t0, index):
        """Locate the end met first: when another end is already past its threshold at the
        located point, it was met earlier, so locate that one instead."""
        end = crossed[0]
        tr = self._locate(step, end, control, tr, t0, index)
        for _ in range(len(step.ends)):
            earlier = [e for e in self._crossed(step, tr, t0) if e is not end
                       and e.distance(self._value(e, tr, t0)) < -self._tolerance(e)]
            if not earlier:
                break
            end = earlier[0]
            tr = self._locate(step, end, control, tr, t0, index)
        return end, tr

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
        # from the last accepted step, which a thinned-out record may not hold
        p = self.prev
        if end.quantity == "voltage":
            return end.distance(p.voltage_V)
        if end.quantity == "current":
            return end.distance(abs(p.current_A))
        if end.quantity == "soc":
            return end.distance(p.soc)
        if end.quantity == "temperature":
            return end.distance(float(np.max(self.thermal.temperature_C(self.T_state))))
        return None

    def _accept(self, tr: _Trial, index, boundary=False, record=True):
        if tr.thermal is None:
            self._thermal_step(tr)
        res = tr.rod
        dt = tr.dt
        sums = self.integrals
        sums[0] += tr.generated * dt
        sums[1] += tr.rejected_J_per_s * dt
        sums[2] += res.current_A * dt
        sums[3] += res.current_A * res.voltage_V * dt
        self.t += tr.dt
        self.prev = tr.rod
        self.rod_state = tr.rod.state
        self.T_state = tr.thermal
        start, self.rod_T = self.rod_T, self._state_temperature()
        self.rod_T_rate = None if start is None else (self.rod_T - start) / dt
        if self.fitted:
            self.stored_now = tr.stored_J
        self.rec.steps_taken += 1
        self.last_heat = tr.end
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
