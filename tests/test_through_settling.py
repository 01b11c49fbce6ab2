"""The through-thickness figures settle from a flat start instead of jumping to the quasi-steady
parabola (a cell at rest must not read hotter than it is).

Reference: the slab 0 < x < d, insulated at x = 0, with a constant flux F at x = d from a uniform
start (Carslaw & Jaeger, Conduction of Heat in Solids, 2nd ed. 1959, section 3.3; the series is
quoted from memory):

    T - T_mean = (F d / k) [ (3 x^2 - d^2) / (6 d^2)
                            - (2 / pi^2) sum_n (-1)^n / n^2 exp(-n^2 t / tau) cos(n pi x / d) ]
                 (plus the uniform rise), tau = d^2 / (pi^2 alpha).

At the insulated face (the core of a one-face-cooled cell) the quasi-steady offset is F d / (6 k)
(cooling: F out of the slab); the settled figure must never fall below the exact one there.
"""

from __future__ import annotations

import numpy as np
import pytest

import explorer
from explorer.inplane.throughplane import settle, settle_extremes, settling_time_s


def _exact_fraction(s: np.ndarray, removed: bool = False) -> np.ndarray:
    """Developed fraction of the insulated-face offset after a flux step at s = t / tau = 0
    (``removed``: what is left of a fully developed offset after the flux is taken away)."""
    n = np.arange(1, 400)[:, None]
    left = (np.sum((-1.0) ** n / n**2 * np.exp(-n**2 * s[None, :]), axis=0)
            / (-np.pi**2 / 12.0))
    return left if removed else 1.0 - left


def test_settled_offset_stays_on_the_safe_side_of_the_slab_series():
    s = np.linspace(0.0, 6.0, 601)
    rising = settle(s, np.ones_like(s), 1.0)
    assert rising[0] == pytest.approx(0.0, abs=1e-12)  # a flat start
    assert np.all(rising >= _exact_fraction(s) - 1e-12)  # never below the exact core
    assert rising[-1] == pytest.approx(1.0, abs=0.01)  # settles to the parabola
    falling = settle(np.concatenate([s, 6.0 + s[1:]]),
                     np.concatenate([np.ones_like(s), np.zeros(len(s) - 1)]), 1.0)[len(s):]
    # the flux taken away from a developed profile: the core's offset decays slower than one
    # exponential of tau; the settled one (2 tau) never falls below it
    assert np.all(falling >= rising[-1] * _exact_fraction(s[1:], removed=True) - 1e-9)


def test_settling_time_is_the_slab_slowest_mode():
    # d = 10 mm, k = 0.5 W/(m K), rho c = 2.5e6 J/(m3 K): alpha = 2e-7, tau = 1e-4/(pi^2 2e-7)
    assert settling_time_s(0.01, 0.5, 2.5e6) == pytest.approx(1e-4 / (np.pi**2 * 2e-7))
    assert settling_time_s(0.0, 0.5, 2.5e6) == 0.0


def test_cooled_face_figures_stay_quasi_steady():
    t = np.array([0.0, 1.0, 2.0])
    figs = {"hottest": np.full(3, 26.0), "coldest": np.full(3, 22.0),
            "front_max": np.full(3, 26.0), "front_min": np.full(3, 26.0),
            "back_max": np.full(3, 22.0), "back_min": np.full(3, 22.0),
            "through_difference": np.full(3, 4.0)}
    out = settle_extremes(t, np.full(3, 25.0), np.full(3, 25.0), figs, 10.0,
                          {"front": False, "back": True})
    np.testing.assert_array_equal(out["back_min"], figs["back_min"])  # the cooled face
    assert out["front_max"][0] == pytest.approx(25.0, abs=1e-12)  # the adiabatic core
    assert out["hottest"][0] == pytest.approx(25.0, abs=1e-12)
    assert np.all(out["through_difference"] <= out["hottest"] - out["coldest"] + 1e-12)


@pytest.mark.parametrize("layout", ["averaged", "single"])
def test_a_cell_at_rest_does_not_read_hotter_than_it_starts(layout):
    """A uniform 25 degC cell resting on a 20 degC face plate: the hottest point starts at 25 degC
    (it cannot exceed its start without heat; the quasi-steady profile read 26.3 degC)."""
    plate = explorer.cooling.cold_plate(coolant="water", flow_L_min=1.0, inlet_C=20.0)
    ds = explorer.simulate("bus_power_12ah", explorer.duty.rest(60),
                           explorer.cooling.face_plate(plate, face="back"),
                           start_temperature_C=25.0, layout=layout, grid=(6, 8))
    hottest = ds["temperature_hottest"].values
    assert hottest[0] == pytest.approx(25.0, abs=1e-9)
    assert hottest.max() < 25.5  # the settled estimate leans to the safe side, a little
    check = explorer.Limits(temperature_max_C=26.0).check(ds)
    assert check["verdicts"]["temperature_max_C"] == "met"
