"""The module along the plate (explorer.simulate_module) and the plate's fit and hydraulics.

Sources:
* First law for a steady-flow control volume, the coolant's energy balance
  q = m_dot c_p (T_out - T_in): Incropera & DeWitt, *Fundamentals of Heat and
  Mass Transfer*, 6th ed. (2007), eq. 8.34. The coolant has no heat capacity
  of its own in the model (transit time neglected), so it holds at every time.
* Water's density and specific heat at 25 degC and 1 atm from CoolProp's
  reference equation of state (``CoolProp.CoolProp.PropsSI``), a reference
  library outside the project.
* The brute-force check is an independent path: single cells run one after
  another through the ordinary single-cell stepper and thermal model, each fed
  the previous cell's recorded coolant outlet history as its inlet.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

import explorer
from explorer import cooling
from explorer import duty as duties
from explorer.inplane.grid import Grid
from explorer.validators import InputError

ROOT = Path(__file__).resolve().parents[1]
GRID = (12, 8)


@pytest.fixture(scope="module")
def cell():
    return explorer.load_cell(ROOT / "demo_cells" / "van_nmc_66ah.toml")


def _plate_design(cell, cells, flow_L_min=1.0, coolant="water"):
    """A face plate along +x whose 13 channels (12 mm pitch) all lie under the 160 mm tall
    cell, so each cell's stream carries the plate's whole flow; long enough for the cells."""
    along_mm = cell.geometry.width_m * 1e3
    plate = cooling.cold_plate(coolant, flow_L_min=flow_L_min, inlet_C=25.0, channels=13,
                               cells_per_plate=cells, length_mm=cells * along_mm)
    return cooling.face_plate(plate, face="back")


DUTY = duties.discharge(c_rate=2.0, end_time_s=900.0)


@pytest.fixture(scope="module")
def module_run(cell):
    design = _plate_design(cell, 4)
    return design, explorer.simulate_module(cell, DUTY, design, grid=GRID)


# -- the Dataset ------------------------------------------------------------------------
def test_contract_layout(module_run):
    design, ds = module_run
    assert ds.attrs["status"] == "completed"
    assert ds.attrs["module_cells"] == 4
    assert list(ds["cell"].values) == [0, 1, 2, 3]
    assert ds["temperature"].dims == ("cell", "time", "y", "x")
    assert ds["temperature"].shape[2:] == (GRID[1], GRID[0])
    for name in ("temperature_max", "temperature_min", "temperature_mean", "temperature_hottest",
                 "temperature_coldest", "temperature_core_max", "heat_total", "heat_rejected",
                 "soc_mean", "coolant_inlet", "coolant_outlet"):
        assert ds[name].dims == ("cell", "time"), name
    for name in ("voltage", "current", "time"):
        assert ds[name].dims == ("time",), name
    for name, v in ds.variables.items():
        assert "units" in v.attrs and "long_name" in v.attrs, name
    json.loads(ds.attrs["hydraulics"])
    assert json.loads(ds.attrs["inputs"])["model"]["grid"] == list(GRID)  # the cells' own grid
    # the coolant warms along the path, so the cells run warmer one after another
    peak = ds["temperature_hottest"].max("time").values
    assert np.all(np.diff(peak) > 0)
    # the hottest point anywhere is never below the mean field's or the core's
    assert np.all(ds["temperature_hottest"] >= ds["temperature_max"] - 1e-9)
    assert np.all(ds["temperature_hottest"] >= ds["temperature_core_max"] - 1e-9)


def test_first_law_along_the_coolant(cell, module_run):
    """Heat into the coolant from all cells = m_dot c_p (T_out - T_in) (Incropera & DeWitt
    eq. 8.34) within 0.5 %, with m_dot c_p from CoolProp directly; cell k's outlet is cell
    k+1's inlet; and the module's heat generated = stored + rejected."""
    from CoolProp.CoolProp import PropsSI

    _, ds = module_run
    T_K, p = 298.15, 101325.0
    m_cp = 1.0 / 60000.0 * PropsSI("D", "T", T_K, "P", p, "Water") * PropsSI("C", "T", T_K, "P",
                                                                               p, "Water")
    into = ds["heat_to_back"].sum("cell").values
    rise = ds["coolant_outlet"].isel(cell=-1).values - 25.0
    busy = into > 0.05 * into.max()
    assert busy.sum() > 10
    np.testing.assert_allclose(m_cp * rise[busy], into[busy], rtol=5e-3)
    np.testing.assert_allclose(ds["coolant_inlet"].isel(cell=0).values, 25.0, atol=1e-9)
    np.testing.assert_allclose(ds["coolant_outlet"].values[:-1], ds["coolant_inlet"].values[1:],
                               atol=1e-9)
    # whole module: generated - rejected = stored (running integrals, to round-off)
    stored = ds["heat_stored"].sum("cell").values
    net = ds["heat_generated_energy"].values - ds["heat_rejected_energy"].values
    np.testing.assert_allclose(stored - stored[0], net, rtol=1e-6, atol=1e-6 * abs(net).max())


# -- against single cells run one after another -----------------------------------------
class _InletHistory:
    """The ordinary single-cell thermal model with a coolant inlet that follows a recorded
    history (test adapter: the state carries the time, the inlet is set before each step)."""

    def __init__(self, model, times, inlet):
        self.model, self.times, self.inlet = model, np.asarray(times), np.asarray(inlet)
        self.grid = model.grid
        self.heat_capacity_J_per_K = model.heat_capacity_J_per_K

    def _inlet_at(self, t):
        return float(np.interp(t, self.times, self.inlet))

    def initial_state(self, temperature_C):
        self.model.set_coolant_inlet_C(self._inlet_at(0.0))
        return (self.model.initial_state(temperature_C), 0.0)

    def step(self, state, heat_W, dt, tab_heat_W=None):
        x, t = state
        self.model.set_coolant_inlet_C(self._inlet_at(t + dt))  # backward Euler: the new time
        new, rejected = self.model.step(x, heat_W, dt, tab_heat_W)
        return (new, t + dt), rejected

    def through_settling(self):  # takes no state
        return self.model.through_settling()

    def __getattr__(self, name):  # every other member on the wrapped state
        member = getattr(self.model, name)
        return lambda state, *args: member(state[0], *args)


def _brute_force(cell, design, cells, layout):
    from explorer.simulate import cell_pieces
    from explorer.stepping.run import Settings, run

    g = cell.geometry
    grid = Grid.single(g.width_m, g.height_m) if layout == "single" else Grid(
        g.width_m, g.height_m, *GRID)
    steps = [duties.resolve(s, cell) for s in duties.as_steps(DUTY)]
    times, inlet = np.array([0.0, 1e6]), np.array([25.0, 25.0])
    out = []
    for _ in range(cells):
        sinks = design.sinks(cell, grid, position=0)
        rod, thermal, coupling, _, _ = cell_pieces(cell, "spme", layout, grid, sinks)
        rec = run(rod, _InletHistory(thermal, times, inlet), steps, start_soc=1.0,
                  start_temperature_C=25.0, coupling=coupling, settings=Settings())
        assert rec.status == "completed"
        t = np.asarray(rec.time)
        T = np.stack(rec.temperature)
        out.append((t, T.max(axis=(1, 2)), np.asarray(rec.coolant_outlet)))
        times, inlet = t, np.asarray(rec.coolant_outlet)
    return out


@pytest.mark.parametrize("layout", ["averaged", "single"])
def test_against_cells_run_one_after_another(cell, layout):
    """Three positions: the module against single cells run one after another, each fed the
    previous cell's recorded coolant outlet history, within 0.05 K."""
    design = _plate_design(cell, 3)
    ds = explorer.simulate_module(cell, DUTY, design, layout=layout, grid=GRID)
    brute = _brute_force(cell, design, 3, layout)
    t = ds["time"].values
    for k, (tb, Tmax, outlet) in enumerate(brute):
        assert np.max(np.abs(ds["temperature_max"].isel(cell=k).values
                             - np.interp(t, tb, Tmax))) < 0.05
        assert np.max(np.abs(ds["coolant_outlet"].isel(cell=k).values
                             - np.interp(t, tb, outlet))) < 0.05
    # the cells do differ by more than the tolerance, or the check would say nothing
    assert float(ds["temperature_max"].isel(cell=-1).max() - ds["temperature_max"].isel(
        cell=0).max()) > 0.1


def test_one_cell_design_matches_simulate(cell):
    """A design without a coolant path is a module of one cell, the same run as simulate."""
    design = cooling.convection(20.0, 25.0)
    ds = explorer.simulate_module(cell, DUTY, design, grid=GRID)
    one = explorer.simulate(cell, DUTY, design, grid=GRID)
    assert ds.sizes["cell"] == 1 and ds.attrs["module_cells"] == 1
    assert "coolant_inlet" not in ds
    np.testing.assert_allclose(ds["temperature_max"].isel(cell=0).values,
                               one["temperature_max"].values, atol=1e-9)
    np.testing.assert_allclose(ds["voltage"].values, one["voltage"].values, atol=1e-12)


def test_voltage_hold_holds_the_mean_cell_voltage(cell, module_run):
    design, _ = module_run
    hold = [duties.discharge(c_rate=1.0, end_time_s=300.0),
            duties.hold_voltage(3.9, end_time_s=120.0)]
    ds = explorer.simulate_module(cell, hold, design, grid=GRID, start_soc=0.8)
    held = ds["step"].values == 1
    np.testing.assert_allclose(ds["voltage"].values[held][1:], 3.9, atol=1e-6)


# -- the thermal pieces -----------------------------------------------------------------
def test_step_series_equals_cell_after_cell(cell):
    """One multi-right-hand-side step of three cells = three ordinary steps, each cell's
    inlet set to the previous cell's new outlet (to round-off)."""
    from explorer.inplane.thermal import PlaneThermal

    design = _plate_design(cell, 3)
    g = Grid(cell.geometry.width_m, cell.geometry.height_m, *GRID)
    model = PlaneThermal(cell, g, design.sinks(cell, g, position=0))
    rng = np.random.default_rng(1)
    states = np.array([model.initial_state(25.0 + k) for k in range(3)])
    heat = rng.uniform(0.0, 0.05, size=(3, *g.shape))
    new, flows = model.step_series(states, heat, 7.0)
    t_in = 25.0
    for k in range(3):
        model.set_coolant_inlet_C(t_in)
        x, f = model.step(states[k], heat[k], 7.0)
        np.testing.assert_allclose(new[k], x, rtol=1e-10, atol=1e-10)
        assert flows[k] == pytest.approx(f, rel=1e-9, abs=1e-12)
        t_in = model.coolant_outlet_C(x)
    model.set_coolant_inlet_C(25.0)
    if hasattr(model, "through_thickness_C"):
        both = model.through_thickness_series(new, heat)
        for k in range(3):
            one = model.through_thickness_C(new[k], heat[k])
            for key, v in one.items():
                np.testing.assert_allclose(both[key][k], v, rtol=1e-12, atol=1e-12)


def test_upstream_sinks_refused_for_series(cell):
    from explorer.inplane.thermal import PlaneThermal

    design = _plate_design(cell, 3)
    g = Grid(cell.geometry.width_m, cell.geometry.height_m, *GRID)
    model = PlaneThermal(cell, g, design.sinks(cell, g, position=2))
    x = model.initial_state(25.0)
    with pytest.raises(InputError, match="upstream_cells"):
        model.step_series(x[None, :], np.zeros((1, *g.shape)), 1.0)


# -- hydraulics honesty and fit -----------------------------------------------------------
def test_hydraulics_say_channels_only(cell):
    design = _plate_design(cell, 4)
    h = design.hydraulics(heat_W=20.0, cell=cell)
    assert h["pressure_drop_scope"] == "channels only"
    assert "channels only" in h["labels"]["pressure_drop_Pa"]
    assert "channels only" in h["labels"]["pump_power_W"]
    assert any("channels only" in n for n in h["notes"])
    assert "channels only" in design.describe()["hydraulics_scope"]
    assert "hydraulics_scope" not in cooling.convection(10.0, 25.0).describe()


def test_plate_too_short_for_its_cells(cell):
    """12 cells 240 mm wide along +x need 2880 mm of channel; a 500 mm plate is an error."""
    short = cooling.face_plate(cooling.cold_plate("water", 4.0, 25.0, cells_per_plate=12))
    with pytest.raises(InputError, match=r"500 mm long.*2880 mm"):
        short.check_fits(cell)
    with pytest.raises(InputError, match="length_mm"):
        (short + cooling.tab_cooling()).check_fits(cell)
    _plate_design(cell, 12).check_fits(cell)  # long enough: no error
    edge = cooling.edge_plate(cooling.cold_plate("water", 4.0, 25.0, cells_per_plate=200,
                                                 length_mm=100.0))
    with pytest.raises(InputError, match="through the stack"):
        edge.check_fits(cell)
    cooling.convection(10.0, 25.0).check_fits(cell)  # nothing to fit


def test_bad_inputs_are_clear_errors(cell):
    design = _plate_design(cell, 2)
    cases = [
        (dict(layout="3d"), "`layout`"),
        (dict(electrochemistry="p2d"), "`electrochemistry`"),
        (dict(output_interval_s=-1.0), "`output_interval_s`"),
        (dict(start_soc=1.5), "`start_soc`"),
    ]
    for kwargs, match in cases:
        with pytest.raises(InputError, match=match):
            explorer.simulate_module(cell, DUTY, design, grid=GRID, **kwargs)
    with pytest.raises(InputError, match="`cooling`"):
        explorer.simulate_module(cell, DUTY, "a cold plate", grid=GRID)
