"""Turning a step's control (current, terminal power or terminal voltage) into a current.

Used by the reduced models, whose end-of-step terminal voltage is a cheap
scalar function ``V(I)`` once the step's linear parts are known. The DFN
solves the control equation inside its Newton system instead.
"""

from __future__ import annotations

import math

from explorer.rod.base import RodStepError
from explorer.validators import InputError

__all__ = ["KINDS", "check_control", "solve_current"]

KINDS = ("current", "power", "voltage")


def check_control(control):
    """Validate a :class:`~explorer.rod.base.Control`; return ``(kind, value)``."""
    kind = getattr(control, "kind", None)
    value = getattr(control, "value", None)
    if kind not in KINDS:
        raise InputError(f"`control.kind`: expected one of {', '.join(map(repr, KINDS))}, "
                         f"got {kind!r}")
    try:
        value = float(value)
    except (TypeError, ValueError):
        raise InputError(f"`control.value`: expected a number, got {value!r}") from None
    if not math.isfinite(value):
        raise InputError(f"`control.value`: expected a finite number, got {value!r}")
    if kind == "voltage" and value <= 0:
        raise InputError(f"`control.value`: expected a positive terminal voltage in V, got {value!r}")
    return kind, value


def solve_current(voltage_of, kind, value, guess, scale, tol_V=1e-9, max_iter=60):
    """Current (A, positive on discharge) that meets the control.

    Parameters
    ----------
    voltage_of : callable
        ``voltage_of(I) -> terminal voltage``; returns NaN when ``I`` drives the
        state outside its physical range (empty or full particle surface, no salt).
    kind, value : str, float
        The control.
    guess : float
        Starting current (e.g. the previous step's).
    scale : float
        A current typical of the cell (its 1C value), for finite differences and tolerances.

    Notes
    -----
    ``V(I)`` decreases with ``I``. For voltage control the root is bracketed as
    soon as two iterates straddle it and Newton steps leaving the bracket are
    replaced by bisection; steps into the infeasible range are halved. For power
    control ``I V(I) = P`` has two roots below the cell's maximum power; Newton
    started from ``P / V(0)`` approaches the smaller (stable) one monotonically.
    """
    if kind == "current":
        return value
    h = 1e-6 * scale
    if kind == "voltage":
        def g(i):
            return voltage_of(i) - value
        start = guess
    else:
        def g(i):
            return i * voltage_of(i) - value
        v0 = voltage_of(0.0)
        if not math.isfinite(v0):
            raise RodStepError("the state is outside its physical range even at zero current")
        start = value / v0
    i = start
    gi = g(i)
    n_bad = 0
    while not math.isfinite(gi):
        i *= 0.5
        n_bad += 1
        if n_bad > 60:
            raise RodStepError(f"no feasible current found for {kind} control at {value!r}")
        gi = g(i)
    lo, hi = -math.inf, math.inf  # bracket for voltage control (g decreasing)
    for _ in range(max_iter):
        if kind == "voltage":
            if gi > 0:
                lo = max(lo, i)
            else:
                hi = min(hi, i)
        gp = g(i + h)
        d = (gp - gi) / h if math.isfinite(gp) else (gi - g(i - h)) / h
        if not math.isfinite(d) or d == 0.0:
            raise RodStepError(f"{kind} control: the voltage does not respond to the current")
        if kind == "power" and d <= 0.0:  # past the peak of I V(I)
            raise RodStepError(f"power control: {value:g} W is beyond the power the cell can "
                               "deliver at this state")
        step = -gi / d
        i_new = i + step
        if kind == "voltage" and math.isfinite(lo) and math.isfinite(hi) and not lo < i_new < hi:
            i_new = 0.5 * (lo + hi)
        g_new = g(i_new)
        tries = 0
        while not math.isfinite(g_new):
            i_new = 0.5 * (i + i_new)
            tries += 1
            if tries > 60:
                raise RodStepError(f"{kind} control: every trial current leaves the physical range")
            g_new = g(i_new)
        converged = abs(i_new - i) <= 1e-12 * scale + 1e-12 * abs(i_new)
        i, gi = i_new, g_new
        # power residual in W; divided by the current it is a voltage error
        tol = tol_V if kind == "voltage" else tol_V * max(abs(i), 1e-9 * scale)
        if abs(gi) <= tol or converged:
            return i
    raise RodStepError(f"{kind} control at {value:g}: the current did not converge "
                       f"in {max_iter} iterations (last {i:.6g} A)")
