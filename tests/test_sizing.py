"""Limits and size_cooling: the boundary search, its reports and its checks.

The search logic is tested on functions with known roots (analytic, no
source needed beyond algebra) and on a cheap stand-in for the simulation: a
lumped cell on a coolant stream. The stand-in is INVENTED test scaffolding,
not a model of the product; the physics of the stand-in is the
lumped-capacitance solution (Incropera & DeWitt, Fundamentals of Heat and
Mass Transfer, 6th ed. 2007, §5.3, eq. 5.6 with a heat source) so its figures
are monotone in flow and inlet temperature. Real runs of explorer.simulate
are checked at the end (self-consistency of sizing: common practice).
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, fields, replace
from types import SimpleNamespace

import numpy as np
import pytest
import xarray as xr

import explorer.sizing as sizing
from explorer import duty
from explorer.limits import Limits, run_figures
from explorer.sizing import find_boundary, sample_points, size_cooling, turning_points
from explorer.validators import InputError

# --------------------------------------------------------------------------- stand-in (invented)

STANDIN_CELL = SimpleNamespace(name="stand-in cell (invented)", sha256="0" * 64,
                               source_path="", temperature_max_C=55.0)


@dataclass(frozen=True)
class StandInPlate:
    """A cold plate for the tests only (invented): conductance grows with flow**0.8."""

    flow_L_min: float = 2.0
    inlet_C: float = 25.0
    tim_W_mK: float = 3.0
    channels: int = 8
    cells_per_plate: int = 5
    fail_at_flow: float = -1.0  # a flow at which the stand-in run raises (failure tests)

    def parameters(self) -> dict:
        return {"flow_L_min": self.flow_L_min, "inlet_C": self.inlet_C,
                "tim_W_mK": self.tim_W_mK, "channels": float(self.channels)}

    def replace(self, **changes):
        for name, value in changes.items():
            if name not in self.parameters():
                raise InputError(f"stand-in: unknown parameter `{name}`; expected one of "
                                 f"{sorted(self.parameters())}")
            if name != "inlet_C" and not value > 0:
                raise InputError(f"stand-in: `{name}` must be > 0, got {value!r}")
            if name == "channels" and not float(value).is_integer():
                raise InputError(f"stand-in: `channels` must be a whole number, got {value!r}")
        return replace(self, **changes)

    def describe(self) -> dict:
        return {"kind": "stand-in plate", **{f.name: getattr(self, f.name) for f in fields(self)}}

    def positions_to_check(self) -> list[int]:
        return [0, self.cells_per_plate // 2, self.cells_per_plate - 1]

    def capacity_rate_W_K(self) -> float:
        return self.flow_L_min / 60e3 * 1000.0 * 4180.0 / self.cells_per_plate

    def conductance_W_K(self) -> float:
        film = 4.0 * self.flow_L_min ** 0.8 * self.channels / 8.0  # W/K, invented
        tim = 2.0 * self.tim_W_mK  # W/K, invented
        return 1.0 / (1.0 / film + 1.0 / tim)

    def hydraulics(self, heat_W=None) -> dict:
        dp = 2000.0 * self.flow_L_min ** 1.8  # Pa, invented
        return {"pressure_drop_Pa": dp, "pump_power_W": dp * self.flow_L_min / 60e3 / 0.5,
                "warnings": []}


def standin_simulate(cell, duty_, cooling=None, position=None, start_temperature_C=25.0,
                     heat_W=40.0, duration_s=1200.0, output_interval_s=20.0, **_):
    """Lumped cell with constant heat on a coolant stream: T - T_in = Q/UA (1 - exp(-t/tau))."""
    if cooling is not None and cooling.flow_L_min == cooling.fail_at_flow:
        raise RuntimeError("stand-in failure at this flow")
    t = np.arange(0.0, duration_s + 1e-9, output_interval_s)
    capacity = 900.0  # J/K, invented
    if cooling is None:
        ua, t_in = 1e-12, start_temperature_C
    else:
        ua = cooling.conductance_W_K()
        k = cooling.positions_to_check()[-1] if position is None else position
        # Upstream cells (alike) warm the coolant by their steady heat.
        t_in = cooling.inlet_C + k * heat_W / cooling.capacity_rate_W_K()
    tau = capacity / ua
    rise = (start_temperature_C - t_in) * np.exp(-t / tau) + heat_W / ua * (1 - np.exp(-t / tau))
    t_mean = t_in + rise
    rejected = ua * (t_mean - t_in)
    spread = 0.25 * np.abs(rise)  # invented shape
    hyd = cooling.hydraulics() if cooling is not None else {}
    data = {
        "voltage": ("time", 3.7 - 1e-4 * t), "current": ("time", np.full(t.size, 66.0)),
        "power": ("time", 66.0 * (3.7 - 1e-4 * t)), "soc_mean": ("time", 1 - t / 7200.0),
        "temperature_max": ("time", t_mean + spread / 2),
        "temperature_min": ("time", t_mean - spread / 2),
        "temperature_mean": ("time", t_mean),
        "temperature_core_max": ("time", t_mean + spread / 2 + 1.0),
        "heat_total": ("time", np.full(t.size, heat_W)), "heat_rejected": ("time", rejected),
    }
    # cumulative figures of the results contract (rates held over each step, as recorded)
    for name, rate, scale in (("energy_delivered", data["power"][1], 3600.0),
                              ("charge_delivered", data["current"][1], 3600.0),
                              ("heat_generated_energy", data["heat_total"][1], 1.0),
                              ("heat_rejected_energy", rejected, 1.0)):
        data[name] = ("time", np.concatenate([[0.0], np.cumsum(rate[1:] * np.diff(t))]) / scale)
    if cooling is not None:
        data["coolant_outlet"] = ("time", t_in + rejected / cooling.capacity_rate_W_K())
    return xr.Dataset(data, coords={"time": t, "x": [0.1], "y": [0.1]}, attrs={
        "status": "completed", "status_message": "", "temperature_limit_C": 55.0,
        "output_interval_s": output_interval_s, "hydraulics": json.dumps(hyd)})


class Counter:
    """Counts calls to the stand-in (and can interrupt after a number of them)."""

    def __init__(self, interrupt_after=None):
        self.calls = 0
        self.interrupt_after = interrupt_after

    def __call__(self, *args, **kwargs):
        if self.interrupt_after is not None and self.calls >= self.interrupt_after:
            raise KeyboardInterrupt("interrupted by the test")
        self.calls += 1
        return standin_simulate(*args, **kwargs)


@pytest.fixture
def standin(monkeypatch):
    """The stand-in simulation, cell positions one at a time (no module run)."""
    counter = Counter()
    monkeypatch.setattr(sizing, "_simulate", counter)
    monkeypatch.setattr(sizing, "_module_simulator", lambda: None)
    return counter


DUTY = duty.discharge(c_rate=1.0, end_time_s=1200.0)

# --------------------------------------------------------------------------- the search alone


def test_boundary_of_a_reciprocal_law():
    # margin = 45 - (25 + 31/q) is zero at q = 1.55 (algebra); on steps of 0.02 L/min the
    # cheapest value that meets is 1.56 and one step less, 1.54, fails
    b = find_boundary(lambda q: 45.0 - (25.0 + 31.0 / q), 0.5, 10.0, cheaper="lower",
                      resolution=0.02)
    assert b.kind == "limits" and b.feasible and b.increasing
    assert b.value == pytest.approx(1.56)
    assert b.bracket[1] == pytest.approx(1.54)


def test_boundary_of_a_decreasing_law():
    # a warmer inlet is cheaper and hurts: margin = 45 - (T + 10) is zero at T = 35;
    # on steps of 0.3 K the warmest that meets is 34.8 and 35.1 fails
    b = find_boundary(lambda T: 45.0 - (T + 10.0), 10.0, 40.0, cheaper="higher", resolution=0.3)
    assert not b.increasing and b.kind == "limits"
    assert b.value == pytest.approx(34.8)
    assert b.bracket[1] == pytest.approx(35.1)


def test_all_met_returns_the_cheap_end_and_none_met_the_best():
    b = find_boundary(lambda q: 10.0 - 1.0 / q, 1.0, 5.0, cheaper="lower", resolution=0.1)
    assert b.kind == "lower bound" and b.value == 1.0 and b.feasible
    b = find_boundary(lambda q: 10.0 - 1.0 / q, 1.0, 5.0, cheaper="higher", resolution=0.1)
    assert b.kind == "upper bound" and b.value == 5.0 and b.feasible
    b = find_boundary(lambda q: -10.0 + 1.0 * q, 1.0, 5.0, cheaper="lower", resolution=0.1)
    assert b.kind == "none met" and b.value == 5.0 and not b.feasible


def test_non_monotone_margin_takes_the_cheapest_region():
    # feasible only on [2, 4]: both ends fail; the walk from the cheap end finds its edge.
    # Steps of 0.15: 1.95 fails, 2.1 meets; 3.9 meets, 4.05 fails (algebra)
    def margin(x):
        return 1.0 - (x - 3.0) ** 2

    b = find_boundary(margin, 0.0, 10.0, cheaper="lower", resolution=0.15, spacing="linear")
    assert b.kind == "limits" and b.value == pytest.approx(2.1)
    assert turning_points(b.values, b.margins) != []
    b = find_boundary(margin, 0.0, 10.0, cheaper="higher", resolution=0.15, spacing="linear")
    assert b.kind == "limits" and b.value == pytest.approx(3.9)


def test_separate_feasible_region_is_reported():
    # met on [0, 1.2] and on [7.4, 10] (from the samples at 0, 2.5, 5, 7.5, 10)
    def margin(x):
        return max(1.2 - x, x - 7.4, -1.0)

    b = find_boundary(margin, 0.0, 10.0, cheaper="lower", resolution=0.1, spacing="linear")
    assert b.kind == "lower bound" and b.value == 0.0
    assert b.islands == [(7.5, 10.0)]
    b = find_boundary(margin, 0.0, 10.0, cheaper="higher", resolution=0.1, spacing="linear")
    assert b.kind == "upper bound" and b.value == 10.0
    assert b.islands == [(0.0, 0.0)]


def test_turning_points_and_flat_noise():
    assert turning_points([1, 2, 3, 4], [1, 2, 3, 4]) == []
    assert turning_points([1, 2, 3, 4], [1, 3, 2, 4]) == [2.0, 3.0]
    # steps below the tolerance are not a reversal
    assert turning_points([1, 2, 3], [1.0, 1.0 + 1e-5, 1.0]) == []


def test_sample_points_geometric_for_wide_bounds():
    pts = sample_points(0.5, 8.0, 5)
    np.testing.assert_allclose(pts, [0.5, 1.0, 2.0, 4.0, 8.0])
    np.testing.assert_allclose(sample_points(10.0, 30.0, 3), [10.0, 20.0, 30.0])


def test_search_bad_settings():
    kw = {"cheaper": "lower", "resolution": 0.1}
    with pytest.raises(InputError, match="samples"):
        find_boundary(lambda x: x, 0.0, 1.0, samples=2, **kw)
    with pytest.raises(InputError, match="spacing"):
        find_boundary(lambda x: x, 0.0, 1.0, spacing="log", **kw)
    with pytest.raises(InputError, match="geometric"):
        find_boundary(lambda x: x, -1.0, 1.0, spacing="geometric", **kw)
    with pytest.raises(InputError, match="cheaper"):
        find_boundary(lambda x: x, 0.0, 1.0, cheaper="less", resolution=0.1)
    with pytest.raises(InputError, match="fewer than two values"):
        find_boundary(lambda x: x, 0.01, 0.09, **kw)
    with pytest.raises(InputError, match="resolution"):
        find_boundary(lambda x: x, 0.0, 1.0, cheaper="lower", resolution=0.0)

# --------------------------------------------------------------------------- Limits


def test_limits_validation_messages():
    with pytest.raises(InputError, match="at least one"):
        Limits()
    with pytest.raises(InputError, match="kelvin"):
        Limits(temperature_max_C=318.15)
    with pytest.raises(InputError, match="spread_K"):
        Limits(spread_K=-1.0)
    with pytest.raises(InputError, match="must be a number"):
        Limits(temperature_max_C="45")
    with pytest.raises(InputError, match="limits below the inlet temperature"):
        Limits(temperature_max_C=20.0).check_reachable(25.0)


def test_limits_check_margins():
    ds = standin_simulate(STANDIN_CELL, DUTY, StandInPlate())
    lim = Limits(temperature_max_C=45.0, spread_K=5.0, pressure_drop_kPa=50.0)
    hyd = json.loads(ds.attrs["hydraulics"])
    out = lim.check(ds, hyd)
    fig = run_figures(ds, hyd)
    assert out["margins"]["temperature_max_C"] == pytest.approx(45.0 - fig["temperature_max_C"])
    assert out["margins"]["pressure_drop_kPa"] == pytest.approx(50.0 - hyd["pressure_drop_Pa"] / 1e3)
    assert out["met"] == all(m >= 0 for m in out["margins"].values())
    with pytest.raises(InputError, match="pump_power_W"):
        Limits(pump_power_W=1.0).check(ds, None)

# --------------------------------------------------------------------------- size_cooling, stand-in


def test_size_flow_is_self_consistent(standin):
    """Re-running at the value meets the limits; one resolution step less flow does not
    (self-consistency of sizing: common practice)."""
    lim = Limits(temperature_max_C=40.0, spread_K=5.0)
    plate = StandInPlate()
    res = size_cooling(STANDIN_CELL, DUTY, plate, "flow_L_min", (0.2, 10.0), lim)
    assert res.feasible and res.limited_by == "limits" and res.monotone and res.increasing
    assert res.resolution == 0.05 and res.unit == "L/min" and res.cheaper == "lower"
    assert res.value == pytest.approx(round(res.value / 0.05) * 0.05)  # on the resolution
    for k in plate.positions_to_check():
        ok = lim.check(standin_simulate(STANDIN_CELL, DUTY, plate.replace(flow_L_min=res.value),
                                        position=k))
        assert ok["met"]
    less = lim.check(standin_simulate(STANDIN_CELL, DUTY,
                                      plate.replace(flow_L_min=res.value - 0.05)))
    assert not less["met"]
    # the margins reported are those of the run at the answer itself
    at = lim.check(standin_simulate(STANDIN_CELL, DUTY, plate.replace(flow_L_min=res.value)))
    assert res.margins["temperature_max_C"] == pytest.approx(at["margins"]["temperature_max_C"])
    # the last cell (warmest coolant) is the worst; the curve spans the bounds
    assert res.position == plate.positions_to_check()[-1]
    assert res.curve["value"].min() == 0.2 and res.curve["value"].max() == 10.0
    assert {"temperature_max_C", "spread_K", "margin_temperature_max_C",
            "worst_margin"} <= set(res.curve.data_vars)
    assert res.hydraulics["pressure_drop_Pa"] > 0
    assert "meets the limits" in res.table()
    # refinement ran only the worst position, the answer was checked at all three
    assert standin.calls < 3 * res.curve.sizes["value"]


def test_size_inlet_is_self_consistent(standin):
    lim = Limits(temperature_max_C=40.0)
    plate = StandInPlate(flow_L_min=4.0)
    res = size_cooling(STANDIN_CELL, DUTY, plate, "inlet_C", (10.0, 35.0), lim)
    assert res.feasible and res.limited_by == "limits" and not res.increasing
    assert res.cheaper == "higher"
    assert lim.check(standin_simulate(STANDIN_CELL, DUTY, plate.replace(inlet_C=res.value)))["met"]
    warmer = plate.replace(inlet_C=res.value + res.resolution)
    assert not lim.check(standin_simulate(STANDIN_CELL, DUTY, warmer))["met"]


def test_size_whole_number_parameter(standin):
    """A count (channels) is sized to neighbouring whole numbers: n meets, n - 1 does not."""
    lim = Limits(temperature_max_C=42.0)
    plate = StandInPlate(flow_L_min=2.0)
    res = size_cooling(STANDIN_CELL, DUTY, plate, "channels", (2.0, 40.0), lim)
    assert res.feasible and res.limited_by == "limits"
    assert float(res.value).is_integer()
    worst = plate.positions_to_check()[-1]
    assert lim.check(standin_simulate(STANDIN_CELL, DUTY, plate.replace(channels=res.value),
                                      position=worst))["met"]
    assert not lim.check(standin_simulate(STANDIN_CELL, DUTY,
                                          plate.replace(channels=res.value - 1),
                                          position=worst))["met"]


def test_size_infeasible_reports_best(standin):
    lim = Limits(temperature_max_C=26.0)
    res = size_cooling(STANDIN_CELL, DUTY, StandInPlate(), "flow_L_min", (0.5, 2.0), lim)
    assert not res.feasible and res.limited_by == "none met"
    assert res.value == 2.0
    assert "none met" in res.message and "no value of `flow_L_min`" in res.message
    assert "sits on the upper bound" in res.message
    assert res.margins["temperature_max_C"] < 0


def test_size_all_met_and_strict(standin):
    res = size_cooling(STANDIN_CELL, DUTY, StandInPlate(), "flow_L_min", (2.0, 8.0),
                       Limits(temperature_max_C=60.0))
    assert "above the cell's data-sheet maximum 55" in res.message
    lim = Limits(temperature_max_C=54.0)
    res = size_cooling(STANDIN_CELL, DUTY, StandInPlate(), "flow_L_min", (2.0, 8.0), lim)
    assert res.feasible and res.limited_by == "lower bound" and res.value == 2.0
    assert "widen the bounds" in res.message and "limited by the lower bound" in res.table()
    with pytest.raises(sizing.SizingError, match="widen the bounds"):
        size_cooling(STANDIN_CELL, DUTY, StandInPlate(), "flow_L_min", (2.0, 8.0), lim,
                     strict=True)


def test_size_bad_inputs(standin):
    lim = Limits(temperature_max_C=40.0)
    plate = StandInPlate()
    with pytest.raises(InputError, match=r"`vary` = 'fin_mm' is not a parameter.*flow_L_min"):
        size_cooling(STANDIN_CELL, DUTY, plate, "fin_mm", (0.1, 2.0), lim)
    with pytest.raises(InputError, match="lo < hi"):
        size_cooling(STANDIN_CELL, DUTY, plate, "flow_L_min", (5.0, 1.0), lim)
    with pytest.raises(InputError, match="two numbers"):
        size_cooling(STANDIN_CELL, DUTY, plate, "flow_L_min", (5.0,), lim)
    with pytest.raises(InputError, match="not a valid design value"):
        size_cooling(STANDIN_CELL, DUTY, plate, "flow_L_min", (-1.0, 1.0), lim)
    with pytest.raises(InputError, match="limits below the inlet temperature"):
        size_cooling(STANDIN_CELL, DUTY, plate, "flow_L_min", (1.0, 5.0),
                     Limits(temperature_max_C=20.0))
    with pytest.raises(InputError, match="explorer.Limits"):
        size_cooling(STANDIN_CELL, DUTY, plate, "flow_L_min", (1.0, 5.0), {"spread_K": 5})
    with pytest.raises(InputError, match="cooling"):
        size_cooling(STANDIN_CELL, DUTY, None, "flow_L_min", (1.0, 5.0), lim)
    assert standin.calls == 0


def test_size_failed_run_names_the_value(standin):
    plate = StandInPlate(fail_at_flow=10.0)
    with pytest.raises(sizing.SizingError, match="flow_L_min` = 10"):
        size_cooling(STANDIN_CELL, DUTY, plate, "flow_L_min", (1.0, 10.0),
                     Limits(temperature_max_C=40.0))


def test_stand_in_energy_balance():
    """The stand-in itself obeys flow x cp x (outlet - inlet) = heat rejected (first law)."""
    plate = StandInPlate(cells_per_plate=1)
    ds = standin_simulate(STANDIN_CELL, DUTY, plate, position=0)
    lhs = plate.capacity_rate_W_K() * (ds["coolant_outlet"] - plate.inlet_C)
    np.testing.assert_allclose(lhs, ds["heat_rejected"], rtol=1e-12)
    assert math.isfinite(float(ds["temperature_max"].max()))

# --------------------------------------------------------------------------- real runs


@pytest.fixture(scope="module")
def van():
    from explorer.cell import load_cell

    return load_cell("van_nmc_66ah")


# Cheap real settings: averaged layout, SPM, coarse grid, a 25-minute 2C discharge.
REAL = {"electrochemistry": "spm", "layout": "averaged", "grid": (6, 4),
        "output_interval_s": 30.0}
REAL_DUTY = duty.discharge(c_rate=2.0, end_time_s=1500.0)


def _plate_design(**plate):
    from explorer import cooling

    return cooling.edge_plate(cooling.cold_plate("eg50", **{"flow_L_min": 2.0, "inlet_C": 25.0,
                                                            "cells_per_plate": 1, **plate}),
                              edge="bottom", fin_mm=1.0)


def _real_met(van, design, lim):
    from explorer.simulate import simulate

    return lim.check(simulate(van, REAL_DUTY, design, **REAL))["met"]


def test_real_fin_sizing_is_self_consistent(van):
    """Re-run at the value meets the limits; one resolution step (0.05 mm) thinner does not
    (self-consistency of sizing: common practice)."""
    lim = Limits(temperature_max_C=40.0)
    design = _plate_design()
    res = size_cooling(van, REAL_DUTY, design, "fin_mm", (0.2, 3.0), lim, **REAL)
    assert res.feasible and res.limited_by == "limits", res.message
    assert res.resolution == 0.05
    assert _real_met(van, design.replace(fin_mm=res.value), lim)
    assert not _real_met(van, design.replace(fin_mm=res.value - res.resolution), lim)
    # the hydraulic figures of the found design are reported
    assert res.hydraulics["pressure_drop_Pa"] > 0 and res.hydraulics["pump_power_W"] > 0
    assert res.dataset.attrs["status"] == "completed"
    # the Dataset returned is the run at the design value
    assert json.loads(res.dataset.attrs["cooling"])["fin_mm"] == pytest.approx(res.value)


def test_real_inlet_sizing_is_self_consistent(van):
    """Re-run at the value meets the limits; one resolution step (0.5 K) warmer does not
    (self-consistency of sizing: common practice)."""
    lim = Limits(temperature_max_C=45.0)
    design = _plate_design()
    res = size_cooling(van, REAL_DUTY, design, "inlet_C", (10.0, 40.0), lim, **REAL)
    assert res.feasible and res.limited_by == "limits" and res.cheaper == "higher", res.message
    assert _real_met(van, design.replace(inlet_C=res.value), lim)
    assert not _real_met(van, design.replace(inlet_C=res.value + res.resolution), lim)


def test_real_flow_sizing_is_self_consistent():
    """Four LFP cells in series on a face plate's coolant, run one position at a time
    (module=False): the smallest flow meets the limit at every cell position and one
    resolution step less does not (self-consistency; common practice)."""
    from explorer import cooling
    from explorer.cell import load_cell
    from explorer.simulate import simulate

    cell = load_cell("rack_lfp_26ah")
    plate = cooling.cold_plate("pg30", flow_L_min=1.0, inlet_C=35.0, cells_per_plate=4,
                               length_mm=700.0)
    design = cooling.face_plate(plate, face="back", tim_W_mK=1.0, tim_mm=1.5)
    kw = {**REAL, "grid": (4, 6), "start_temperature_C": 35.0}
    lim = Limits(temperature_max_C=38.0)
    d = duty.discharge(c_rate=2.0)
    res = size_cooling(cell, d, design, "flow_L_min", (0.05, 4.0), lim, module=False,
                       resolution=0.01, **kw)
    assert res.feasible and res.limited_by == "limits", res.message
    at = design.replace(flow_L_min=res.value)
    for k in design.positions_to_check():
        assert lim.check(simulate(cell, d, at, position=k, **kw))["met"]
    less = design.replace(flow_L_min=res.value - 0.01)
    assert not lim.check(simulate(cell, d, less, position=res.position, **kw))["met"]
    # the warmest coolant is at the last cell along the flow
    assert res.position == design.positions_to_check()[-1]


def test_real_coolant_energy_balance_at_the_design(van):
    """Flow x cp x (outlet - inlet) equals the heat the cell rejects into the coolant within 1 %
    (first law for the coolant stream, Incropera & DeWitt, Fundamentals of Heat and Mass
    Transfer, 6th ed. 2007, eq. 8.34: q = m_dot c_p (T_m,o - T_m,i))."""
    lim = Limits(temperature_max_C=40.0)
    design = _plate_design()
    res = size_cooling(van, REAL_DUTY, design, "fin_mm", (0.2, 3.0), lim, resolution=0.1,
                       **REAL)
    ds = res.dataset
    hyd = res.hydraulics
    rate = hyd["mass_flow_kg_s"] * hyd["specific_heat_J_kgK"]  # one cell on the plate
    into_coolant = ds["heat_to_bottom"][1:]  # the edge sink is the only one, on the coolant
    lhs = rate * (ds["coolant_outlet"][1:] - 25.0)
    np.testing.assert_allclose(lhs, into_coolant, rtol=0.01)
    assert float(into_coolant[-1]) > 1.0  # a real heat flow, not a trivial zero


def test_size_reports_non_monotone_figures(monkeypatch):
    """A figure that rises again with more flow is reported with where it turns."""

    def wavy(cell, duty_, cooling=None, **kw):
        ds = standin_simulate(cell, duty_, cooling, **kw)
        bump = 6.0 * np.exp(-((cooling.flow_L_min - 6.0) / 0.8) ** 2)  # invented bump
        return ds.assign(temperature_max=ds["temperature_max"] + bump)

    monkeypatch.setattr(sizing, "_simulate", wavy)
    monkeypatch.setattr(sizing, "_module_simulator", lambda: None)
    res = size_cooling(STANDIN_CELL, DUTY, StandInPlate(), "flow_L_min", (0.5, 10.0),
                       Limits(temperature_max_C=40.0), spacing="linear", samples=9)
    assert not res.monotone
    assert "temperature_max_C" in res.turning_points
    assert "not monotone" in res.message
