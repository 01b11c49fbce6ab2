"""Duty cycles: what the cell is asked to do, step by step.

A duty is one :class:`Step` or a list of them. Steps hold a current, a
terminal power or a terminal voltage, or follow a recorded profile, until the
first of their end conditions is met. Currents and powers are positive on
discharge.

>>> from explorer import duty
>>> d = duty.discharge(c_rate=1.0)                       # CC to the lower voltage limit
>>> d = [duty.charge(c_rate=2.0), duty.hold_voltage(end_c_rate=0.05), duty.rest(600)]
>>> d = duty.repeat([duty.discharge(c_rate=1), duty.rest(300)], times=3)

Public constructors: :func:`discharge`, :func:`charge`, :func:`hold_voltage`,
:func:`rest`, :func:`profile_csv`, :func:`repeat`, :func:`cc_cv_charge`.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field, replace

import numpy as np

from explorer.validators import InputError, check_integer, short_repr

QUANTITIES = ("voltage", "current", "soc", "temperature", "time")
# Upper bounds that keep a duty meaningful and its resolved values finite: no cell is run at
# more than 100 C (common practice: high-power cells are rated to tens of C at most), and a
# repeated cycle is a list held in memory.
MAX_C_RATE = 100.0
MAX_REPEATS = 10_000
MAX_REPEATED_STEPS = 100_000


@dataclass(frozen=True)
class End:
    """Stop the step when ``quantity`` crosses ``threshold`` going ``direction``.

    ``quantity`` is one of ``QUANTITIES``; time counts from the step's start;
    temperature is the hottest point of the face (degC); current is the
    magnitude of the cell current (A). ``origin`` says who asked for it:
    "own" (the step's own end, reaching it completes the step) or "window"
    (the cell's voltage window guarding a step that has other ends of its own:
    reaching it cuts the duty short).
    """

    quantity: str
    threshold: float
    direction: str  # "below" | "above"
    origin: str = "own"  # "own" | "window"

    def crossed(self, value: float) -> bool:
        return value <= self.threshold if self.direction == "below" else value >= self.threshold

    def distance(self, value: float) -> float:
        """Signed distance to the threshold, positive while not yet crossed."""
        return value - self.threshold if self.direction == "below" else self.threshold - value


@dataclass(frozen=True)
class Step:
    """One duty step. Build steps with the module's functions, not directly.

    ``kind`` is "current", "power", "voltage", "rest" or "profile".
    ``value`` is A, W or V (positive discharge); ``c_rate`` (signed) is
    resolved against the cell's nominal capacity at run time. A voltage step
    with ``value`` None holds the cell's upper limit (charging) .
    ``profile_time_s``/``profile_value`` hold a recorded profile (piecewise
    constant from each sample to the next) of ``profile_quantity``.
    ``ends`` are explicit end conditions; ``default_limit`` says whether the
    cell's voltage window also ends the step (it does unless the user gave a
    voltage end of their own). The window is the step's own end when the step
    has no other end of its own, or when ``window_end`` says so (the CC part
    of a CC-CV charge); otherwise it is a safety limit that cuts the duty short.
    """

    kind: str
    value: float | None = None
    c_rate: float | None = None
    ends: tuple[End, ...] = ()
    default_limit: bool = True
    end_c_rate: float | None = None  # voltage holds: end current as a C-rate
    profile_time_s: tuple[float, ...] = ()
    profile_value: tuple[float, ...] = ()
    profile_quantity: str = ""
    label: str = ""
    source: str = ""  # file a profile came from
    window_end: bool = False  # the voltage window is this step's own end whatever else it has

    def describe(self) -> dict:
        d = {k: v for k, v in asdict(self).items()
             if v not in (None, (), "") and k != "window_end"}
        d.pop("profile_time_s", None)
        d.pop("profile_value", None)
        if self.window_end:
            d["window_end"] = True
        if self.profile_time_s:
            d["profile_samples"] = len(self.profile_time_s)
            d["profile_duration_s"] = self.profile_time_s[-1]
        d["ends"] = [{k: v for k, v in asdict(e).items() if k != "origin"} for e in self.ends]
        return d

    def max_duration_s(self) -> float:
        """The step's time end condition (inf when none)."""
        t = [e.threshold for e in self.ends if e.quantity == "time"]
        if self.kind == "profile":
            t.append(self.profile_time_s[-1])
        return min(t) if t else math.inf


def _ends(where: str, *, voltage=None, voltage_direction="below", current_A=None, soc=None,
          soc_direction="below", temperature_C=None, time_s=None) -> tuple[End, ...]:
    ends = []
    if voltage is not None:
        ends.append(End("voltage", _positive(where, "end_voltage_V", voltage), voltage_direction))
    if current_A is not None:
        ends.append(End("current", _positive(where, "end_current_A", current_A), "below"))
    if soc is not None:
        s = _finite(where, "end_soc", soc)
        if not 0.0 <= s <= 1.0:
            raise InputError(f"{where}: `end_soc` must be within 0..1, got {soc!r}")
        ends.append(End("soc", s, soc_direction))
    if temperature_C is not None:
        ends.append(End("temperature", _finite(where, "end_temperature_C", temperature_C), "above"))
    if time_s is not None:
        ends.append(End("time", _positive(where, "end_time_s", time_s), "above"))
    return tuple(ends)


def _finite(where, name, value) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{where}: `{name}` must be a number, got {value!r}") from None
    if not math.isfinite(v):
        raise InputError(f"{where}: `{name}` must be finite, got {value!r}")
    return v


def _positive(where, name, value) -> float:
    v = _finite(where, name, value)
    if v <= 0:
        raise InputError(f"{where}: `{name}` must be > 0, got {value!r}")
    return v


def _label(where, label, default: str) -> str:
    """A step's label: a string (None gives the constructor's default)."""
    if label is None:
        return default
    if not isinstance(label, str):
        raise InputError(f"{where}: `label` must be a string, got {type(label).__name__} "
                         f"{short_repr(label)}")
    return label


def _c_rate_bound(where, name, value: float, given) -> None:
    if value > MAX_C_RATE:
        raise InputError(f"{where}: `{name}` must be at most {MAX_C_RATE:g} (C-rate), got "
                         f"{short_repr(given)}")


def _one_of(where, **given):
    chosen = {k: v for k, v in given.items() if v is not None}
    if len(chosen) != 1:
        names = ", ".join(f"`{k}`" for k in given)
        raise InputError(f"{where}: give exactly one of {names}; got {sorted(chosen) or 'none'}")
    (name, value), = chosen.items()
    return name, _positive(where, name, value)


def _constant(where, sign, c_rate, current_A, power_W, ends, label):
    name, value = _one_of(where, c_rate=c_rate, current_A=current_A, power_W=power_W)
    label = _label(where, label, where.rpartition(".")[2])
    if name == "c_rate":
        _c_rate_bound(where, "c_rate", value, c_rate)
        return Step("current", c_rate=sign * value, ends=ends, label=label,
                    default_limit=not any(e.quantity == "voltage" for e in ends))
    kind = "current" if name == "current_A" else "power"
    return Step(kind, value=sign * value, ends=ends, label=label,
                default_limit=not any(e.quantity == "voltage" for e in ends))


def discharge(c_rate=None, *, current_A=None, power_W=None, end_voltage_V=None, end_soc=None,
              end_temperature_C=None, end_time_s=None, end_current_A=None, label="discharge") -> Step:
    """Constant-current (``c_rate`` or ``current_A``) or constant-power (``power_W``) discharge.

    Ends at the cell's lower voltage limit unless ``end_voltage_V`` is given;
    the other ``end_*`` keywords add conditions (first met ends the step).
    """
    ends = _ends("duty.discharge", voltage=end_voltage_V, current_A=end_current_A, soc=end_soc,
                 temperature_C=end_temperature_C, time_s=end_time_s)
    return _constant("duty.discharge", +1.0, c_rate, current_A, power_W, ends, label)


def charge(c_rate=None, *, current_A=None, power_W=None, end_voltage_V=None, end_soc=None,
           end_temperature_C=None, end_time_s=None, end_current_A=None, label="charge") -> Step:
    """Constant-current or constant-power charge; magnitudes are given positive.

    Ends at the cell's upper voltage limit unless ``end_voltage_V`` is given.
    """
    ends = _ends("duty.charge", voltage=end_voltage_V, voltage_direction="above",
                 current_A=end_current_A, soc=end_soc, soc_direction="above",
                 temperature_C=end_temperature_C, time_s=end_time_s)
    return _constant("duty.charge", -1.0, c_rate, current_A, power_W, ends, label)


def hold_voltage(voltage_V=None, *, end_current_A=None, end_c_rate=None, end_time_s=None,
                 end_temperature_C=None, label="hold") -> Step:
    """Hold the terminal voltage (CV); ``voltage_V`` defaults to the cell's upper limit.

    Ends when the current magnitude falls to ``end_current_A`` (or
    ``end_c_rate`` times the nominal capacity; C/20 when neither is given) or
    at ``end_time_s``.
    """
    v = None if voltage_V is None else _positive("duty.hold_voltage", "voltage_V", voltage_V)
    label = _label("duty.hold_voltage", label, "hold")
    if end_current_A is not None and end_c_rate is not None:
        raise InputError("duty.hold_voltage: give `end_current_A` or `end_c_rate`, not both")
    if end_current_A is None and end_c_rate is None:
        end_c_rate = 0.05
    if end_c_rate is not None:
        given = end_c_rate
        end_c_rate = _positive("duty.hold_voltage", "end_c_rate", end_c_rate)
        _c_rate_bound("duty.hold_voltage", "end_c_rate", end_c_rate, given)
    ends = _ends("duty.hold_voltage", current_A=end_current_A, time_s=end_time_s,
                 temperature_C=end_temperature_C)
    return Step("voltage", value=v, ends=ends, end_c_rate=end_c_rate, default_limit=False,
                label=label)


def rest(seconds, *, label="rest") -> Step:
    """Open circuit for ``seconds``."""
    return Step("rest", value=0.0, ends=_ends("duty.rest", time_s=seconds), default_limit=False,
                label=_label("duty.rest", label, "rest"))


def cc_cv_charge(c_rate, *, end_c_rate=0.05, voltage_V=None, end_temperature_C=None) -> list[Step]:
    """A CC-CV charge: constant current to the upper limit, then hold until ``end_c_rate``."""
    cc = replace(charge(c_rate=c_rate, end_voltage_V=voltage_V,
                        end_temperature_C=end_temperature_C, label="charge CC"), window_end=True)
    cv = hold_voltage(voltage_V, end_c_rate=end_c_rate, end_temperature_C=end_temperature_C,
                      label="charge CV")
    return [cc, cv]


def repeat(steps, times: int) -> list[Step]:
    """The steps ``times`` times over (a cycle); at most ``MAX_REPEATS`` times and
    ``MAX_REPEATED_STEPS`` steps in all."""
    try:
        times = check_integer("times", times, 1, MAX_REPEATS)
    except InputError as exc:
        raise InputError(f"duty.repeat: {exc}") from None
    steps = as_steps(steps)
    if len(steps) * times > MAX_REPEATED_STEPS:
        raise InputError(f"duty.repeat: {len(steps)} step(s) `times` {times} makes "
                         f"{len(steps) * times:,} steps; at most {MAX_REPEATED_STEPS:,}")
    out = []
    for k in range(times):
        out.extend(replace(s, label=f"{s.label} #{k + 1}") for s in steps)
    return out


def profile_csv(path, *, end_voltage_V=None, end_temperature_C=None, end_soc=None,
                label=None) -> Step:
    """A recorded load profile from a CSV file.

    The file is read by :func:`explorer.csvdata.read_curves`: UTF-8 text (a
    byte-order mark is fine), ``#`` comment lines, a header naming each column
    with its unit as a suffix: ``time_s`` (also ``time_min``, ``time_h``) and
    either ``current_A`` (``current_mA``) or ``power_W`` (``power_kW``,
    ``power_mW``), positive on discharge. Headers with the unit in brackets
    (``time [s]``) are still read, with a FutureWarning naming the suffix form.
    Each value holds from its time to the next; the profile ends at the last
    time. The cell's voltage window guards it: reaching the window cuts the
    duty short (run status "cut_short").
    """
    from explorer.csvdata import check_path, read_curves

    path = check_path(path, "duty.profile_csv")
    label = _label("duty.profile_csv", label, "")
    data = read_curves(path, required=("time_s",), optional=("current_A", "power_W"),
                       where="duty.profile_csv", what="profile")
    load = [name for name in ("current_A", "power_W") if name in data]
    if len(load) != 1:
        raise InputError(f"{path}: the header needs exactly one of `current_A` or `power_W` "
                         f"(units as suffixes), found {load or 'neither'}")
    quantity = load[0].partition("_")[0]
    t = data["time_s"] - data["time_s"][0]
    if np.any(np.diff(t) <= 0):  # e.g. a first time of -3.6e16 s swallows the others
        raise InputError(f"{path}: times counted from the first one ({data['time_s'][0]:g} s) "
                         "do not increase strictly (the first time is too far from the others "
                         "for double precision); expected increasing times in seconds")
    ends = _ends(f"{path}", voltage=end_voltage_V, soc=end_soc, temperature_C=end_temperature_C)
    return Step("profile", ends=ends, profile_time_s=tuple(t.tolist()),
                profile_value=tuple(data[load[0]].tolist()), profile_quantity=quantity,
                label=label or path.stem, source=str(path),
                default_limit=end_voltage_V is None)


def as_steps(duty) -> list[Step]:
    """A duty (one step or a nested list of steps) as a flat list, checked."""
    if isinstance(duty, Step):
        return [duty]
    if isinstance(duty, (list, tuple)):
        out = []
        for item in duty:
            out.extend(as_steps(item))
        if not out:
            raise InputError("duty: the list of steps is empty")
        return out
    raise InputError(f"duty: expected a step from explorer.duty or a list of them, got "
                     f"{type(duty).__name__} {duty!r}")


@dataclass
class ResolvedStep:
    """A step with every C-rate and default resolved against a cell (SI)."""

    step: Step
    kind: str
    value: float  # A, W or V; 0 for rest; unused for profiles
    ends: list[End] = field(default_factory=list)
    expected_duration_s: float = 3600.0  # a rough guess, for choosing the output spacing

    def __post_init__(self):
        # arrays once: searching the Step's tuples would convert them on every call, which
        # made a long profile cost quadratic time
        self._tp = np.asarray(self.step.profile_time_s, dtype=float)
        self._pv = np.asarray(self.step.profile_value, dtype=float)

    def load_at(self, t_in_step: float) -> float:
        """Profile value at a time within the step (piecewise constant)."""
        tp = self._tp
        i = int(tp.searchsorted(t_in_step, side="right")) - 1
        return float(self._pv[min(max(i, 0), len(tp) - 1)])

    def next_breakpoint(self, t_in_step: float) -> float:
        tp = self._tp
        i = int(tp.searchsorted(t_in_step + 1e-9, side="right"))
        return float(tp[i]) if i < len(tp) else math.inf

    @property
    def own_ends(self) -> list[End]:
        return [e for e in self.ends if e.origin == "own"]


def resolve(step: Step, cell) -> ResolvedStep:
    """Turn C-rates into amperes and add the cell's voltage window as an end condition.

    The window is the step's own end ("own") for a constant-current or power step with no
    other end of its own (``discharge(c_rate=1)`` runs to the lower limit); on a profile, or
    on a step with ends of its own, it is a safety limit ("window") that cuts the duty short.
    A voltage end of the user's own must lie within the cell's window.
    """
    capacity = cell.nominal_capacity_Ah
    ends = list(step.ends)
    kind, value = step.kind, step.value
    _check_in_window(step, cell)
    if step.c_rate is not None:
        value = step.c_rate * capacity
    if kind == "voltage":
        value = cell.voltage_max_V if value is None else value
        if not cell.voltage_min_V <= value <= cell.voltage_max_V:
            raise InputError(f"duty.hold_voltage: `voltage_V` {value:g} V is outside the cell "
                             f"{cell.name!r} window {cell.voltage_min_V:g}-{cell.voltage_max_V:g} V")
        if step.end_c_rate is not None:
            ends.append(End("current", step.end_c_rate * capacity, "below"))
    if kind == "profile":  # a profile ends at its last time; the window only guards it
        ends.append(End("voltage", cell.voltage_min_V, "below", "window"))
        ends.append(End("voltage", cell.voltage_max_V, "above", "window"))
    elif step.default_limit and kind in ("current", "power") and value is not None:
        origin = "own" if step.window_end or not step.ends else "window"
        if value > 0:
            ends.append(End("voltage", cell.voltage_min_V, "below", origin))
        else:
            ends.append(End("voltage", cell.voltage_max_V, "above", origin))
    value = 0.0 if value is None else float(value)
    if not math.isfinite(value):  # e.g. a cell built in code with an absurd capacity
        raise InputError(f"duty step {step.label!r}: resolves to {value!r} against the cell "
                         f"{cell.name!r} (nominal capacity {capacity!r} A h); expected a finite "
                         "load")
    return ResolvedStep(step, kind, value, ends, _expected_duration(kind, value, step, cell))


def _check_in_window(step: Step, cell) -> None:
    """A voltage end outside the data-sheet window would run the cell where it must not go
    (or end the step at once): an error naming the step, the value and the window."""
    lo, hi = cell.voltage_min_V, cell.voltage_max_V
    for e in step.ends:
        if e.quantity == "voltage" and not lo <= e.threshold <= hi:
            raise InputError(f"duty step {step.label!r}: `end_voltage_V` {e.threshold:g} V is "
                             f"outside the cell {cell.name!r} window {lo:g}-{hi:g} V (data "
                             f"sheet); choose an end voltage within it")


def _expected_duration(kind, value, step, cell) -> float:
    """Full-window time at this load, or the step's own length; only sets the output spacing."""
    limit = step.max_duration_s()
    if kind == "current" and value:
        guess = cell.nominal_capacity_Ah * 3600.0 / abs(value)
    elif kind == "power" and value:
        mid = 0.5 * (cell.voltage_min_V + cell.voltage_max_V)
        guess = cell.nominal_capacity_Ah * mid * 3600.0 / abs(value)
    else:
        guess = 3600.0
    return min(guess, limit)
