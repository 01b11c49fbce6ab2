"""Spherical particle diffusion (explorer.rod.particle) against the series solution.

Reference: J. Crank, *The Mathematics of Diffusion*, 2nd ed., Oxford 1975, section 6.3,
the sphere of radius a, initially at zero concentration, with a constant flux F0 into its
surface: eq. (6.44) (form and equation number from memory)

    C(r, t) = F0 a / D { 3 D t / a^2 + r^2 / (2 a^2) - 3/10
                         - (2 a / r) sum_n exp(-D alpha_n^2 t) sin(r alpha_n) / (a^2 alpha_n^2 sin(a alpha_n)) },

with a alpha_n the positive roots of a alpha cot(a alpha) = 1 (i.e. tan x = x). At the
surface r = a this is

    C(a, t) = F0 a / D { 3 D t / a^2 + 1/5 - 2 sum_n exp(-D alpha_n^2 t) / (a alpha_n)^2 }.

The form is checked independently below: its volume average is the mass balance
3 F0 t / a exactly (the r^2 / 2a^2 - 3/10 term and every series term average to zero).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import brentq

from explorer.rod.particle import SphereShells


def _roots(m):
    """First m positive roots of tan x = x (x_n in (n pi, (n + 1/2) pi))."""
    f = lambda x: np.tan(x) - x  # noqa: E731
    return np.array([brentq(f, n * np.pi + 1e-9, (n + 0.5) * np.pi - 1e-9) for n in range(1, m + 1)])


ROOTS = _roots(300)


def crank_surface(F0, a, D, t):
    """Surface concentration of Crank (1975) eq. (6.44) at r = a."""
    return F0 * a / D * (3 * D * t / a**2 + 0.2 - 2 * np.sum(np.exp(-D * ROOTS**2 * t / a**2) / ROOTS**2))


def crank_profile(F0, a, D, t, r):
    """Crank (1975) eq. (6.44) at radii r > 0."""
    r = np.asarray(r, dtype=float)[:, None]
    x = ROOTS[None, :]
    series = np.sum(np.exp(-D * x**2 * t / a**2) * np.sin(r * x / a) / (x**2 * np.sin(x)), axis=1)
    r = r[:, 0]
    return F0 * a / D * (3 * D * t / a**2 + r**2 / (2 * a**2) - 0.3 - 2 * a / r * series)


A_RADIUS = 5e-6  # m, a typical graphite particle (invented test values)
DIFF = 1e-14  # m^2/s
FLUX_IN = 1e-5  # mol/m^2/s into the particle


def _simulate(n_shells, tau, n_steps):
    shells = SphereShells(n_shells)
    t_end = tau * A_RADIUS**2 / DIFF
    dt = t_end / n_steps
    c = np.zeros(n_shells)
    for _ in range(n_steps):
        c, surface = shells.step(c, -FLUX_IN, DIFF, A_RADIUS, dt)  # outward flux is negative
    return shells, c, surface, t_end


def test_series_form_satisfies_mass_balance():
    # Crank's profile averaged over the sphere volume must equal 3 F0 t / a (mass balance).
    t = 0.1 * A_RADIUS**2 / DIFF
    r = np.linspace(1e-9, A_RADIUS, 20001)
    c = crank_profile(FLUX_IN, A_RADIUS, DIFF, t, r)
    mean = np.trapezoid(c * 3 * r**2, r) / A_RADIUS**3
    assert mean == pytest.approx(3 * FLUX_IN * t / A_RADIUS, rel=1e-4)
    assert c[-1] == pytest.approx(crank_surface(FLUX_IN, A_RADIUS, DIFF, t), rel=1e-9)


@pytest.mark.parametrize("n_shells", [4, 10, 25])
def test_finite_volume_is_exactly_conservative(n_shells):
    # Mass balance (Crank 1975, the mean above): the average rises by 3 F0 t / a, to round-off.
    shells, c, _, t_end = _simulate(n_shells, 0.3, 50)
    assert shells.mean(c) == pytest.approx(3 * FLUX_IN * t_end / A_RADIUS, rel=1e-12)


class SurfaceConvergence:
    """Observed order of the surface concentration error against Crank (1975) eq. (6.44)."""

    expected_order = 2.0  # second-order finite volumes with an exact-gradient extrapolation
    meshes = (5, 10, 20, 40)
    tau = 1.0  # dimensionless time D t / a^2
    n_steps = 200

    def errors(self):
        exact = crank_surface(FLUX_IN, A_RADIUS, DIFF, self.tau * A_RADIUS**2 / DIFF)
        return np.array([abs(_simulate(n, self.tau, self.n_steps)[2] - exact) / exact
                         for n in self.meshes])

    def test_order(self):
        err = self.errors()
        order = np.log2(err[:-1] / err[1:])
        assert np.all(order > self.expected_order - 0.2), order
        assert err[-1] < self.tolerance


class TestQuasiSteady(SurfaceConvergence):
    """Late time: the transient has decayed and backward Euler is exact for the linear
    rise, so the error is the spatial one alone."""

    tau = 1.0
    n_steps = 200
    tolerance = 1e-4


class TestEarlyTime(SurfaceConvergence):
    """Early time (D t / a^2 = 0.05) with small steps so the time error stays below the
    spatial one on every mesh."""

    tau = 0.05
    n_steps = 3000
    tolerance = 1e-3


def test_too_few_shells_is_a_clear_error():
    with pytest.raises(ValueError, match="shells"):
        SphereShells(2)
