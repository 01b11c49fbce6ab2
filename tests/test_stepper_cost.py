"""The lighter stepper (issue 15 item 4) records what the one-state-at-a-time path records.
No timing here: the cost per step is in ``python -m explorer.bench --only stepper``."""

import numpy as np
import pytest

import explorer
from explorer import duty
from explorer.inplane.grid import Grid
from explorer.simulate import cell_pieces
from explorer.stepping.run import Settings, run

FIGURES = ("core_difference", "hottest", "coldest", "front_max", "front_min", "back_max",
           "back_min", "through_difference", "coolant_outlet", "stored_J")


class _Forward:
    """Forwards every member to the model: the stepper does not see a batch-capable class,
    so it takes the thermal figures one recorded state at a time."""

    def __init__(self, model):
        self.model = model

    def __getattr__(self, name):
        return getattr(self.model, name)


@pytest.fixture(scope="module")
def cell():
    return explorer.load_cell("van_nmc_66ah")


@pytest.mark.parametrize("layout", ["single", "averaged"])
def test_batched_record_equals_the_per_state_record(cell, layout):
    """An edge plate with a fin sheet, tab cooling and a coolant warming along the plate
    (every kind of figure), a discharge and a rest: the same record either way."""
    plate = explorer.cooling.cold_plate(coolant="water", flow_L_min=1.0, inlet_C=20.0,
                                        cells_per_plate=4)
    design = (explorer.cooling.edge_plate(plate, edge="bottom", fin_mm=0.5)
              + explorer.cooling.tab_cooling(conductance_W_K=1.0, busbar_C=30.0))
    g = cell.geometry
    grid = (Grid.single(g.width_m, g.height_m) if layout == "single"
            else Grid(g.width_m, g.height_m, 6, 4))
    steps = [duty.resolve(s, cell) for s in (duty.discharge(c_rate=2.0, end_time_s=600.0),
                                             duty.rest(300.0))]
    records = []
    for wrap in (False, True):
        rod, thermal, coupling, _, _ = cell_pieces(cell, "spme", layout, grid,
                                                   design.sinks(cell, grid, position=3))
        rec = run(rod, _Forward(thermal) if wrap else thermal, steps, start_soc=1.0,
                  start_temperature_C=25.0, coupling=coupling, settings=Settings())
        assert rec.status == "completed"
        records.append(rec)
    batched, single = records
    np.testing.assert_allclose(batched.time, single.time, rtol=0, atol=1e-12)
    np.testing.assert_allclose(np.stack(batched.temperature), np.stack(single.temperature),
                               rtol=1e-12, atol=1e-9)
    for name in FIGURES:
        np.testing.assert_allclose(getattr(batched, name), getattr(single, name),
                                   rtol=1e-12, atol=1e-9, err_msg=name)
    assert np.isfinite(batched.coolant_outlet).all()


def test_trapezoid_setting_switches_the_heat_integration(cell):
    """``Settings.heat_trapezoid=False`` feeds the step's end value (the first-order scheme
    the bench compares against): the recorded heat then differs from the trapezoidal run's
    while both close the first law (generated = C dT, adiabatic)."""
    steps = [duty.resolve(duty.discharge(c_rate=1.0, end_time_s=1200.0), cell)]
    g = cell.geometry
    out = []
    for trapezoid in (True, False):
        rod, thermal, coupling, _, _ = cell_pieces(cell, "spme", "single",
                                                   Grid.single(g.width_m, g.height_m), None)
        rec = run(rod, thermal, steps, start_soc=1.0, start_temperature_C=25.0,
                  coupling=coupling, settings=Settings(heat_trapezoid=trapezoid))
        rise = rec.stored_J[-1] - rec.stored_J[0]
        assert rec.heat_generated_J[-1] == pytest.approx(rise, rel=1e-9)
        out.append(rec.heat_generated_J[-1])
    assert out[0] != pytest.approx(out[1], rel=1e-4)


@pytest.mark.parametrize("model", ["spm", "spme"])
def test_batched_rod_step_equals_the_rod_by_rod_steps(cell, model):
    """The distributed layout's vectorised step of a group of rods gives, rod for rod, what
    the model's own step gives (states, voltage, SOC, heat) to round-off."""
    from explorer.rod import RodParameters, make_rod
    from explorer.rod.base import Control

    params = RodParameters.from_cell(cell)
    rod = make_rod(model, params)
    rng = np.random.default_rng(1)
    rods = 7
    T = rng.uniform(285.0, 320.0, rods)
    current = rng.uniform(-2.0, 3.0, rods) * params.capacity_Ah
    states = np.array([rod.initial_state(s, 298.15) for s in rng.uniform(0.3, 0.95, rods)])
    for _ in range(3):  # away from rest, so the particles and the salt carry gradients
        states = np.array([rod.solve_step(x, 30.0, t, Control("current", i)).state
                           for x, t, i in zip(states, T, current, strict=True)])
    batch = rod.solve_current_batch(states, 17.0, T, current)
    for k in range(rods):
        one = rod.solve_step(states[k], 17.0, T[k], Control("current", current[k]))
        np.testing.assert_allclose(batch.states[k], one.state, rtol=1e-12, atol=1e-9)
        assert batch.voltage_V[k] == pytest.approx(one.voltage_V, abs=1e-12)
        assert batch.soc[k] == pytest.approx(one.soc, abs=1e-12)
        for key, value in one.heat_W.items():
            assert batch.heat_W[key][k] == pytest.approx(value, rel=1e-10, abs=1e-12)


def test_patch_solver_gives_what_solve_gives(cell):
    """The distributed layout's collector fields from the per-patch responses (solved once)
    equal a full solve of the same current density, to round-off."""
    from explorer.inplane.collector import CollectorNetwork
    from explorer.stepping.distributed import patch_index

    g = cell.geometry
    grid = Grid(g.width_m, g.height_m, 12, 8)
    network = CollectorNetwork(cell, grid)
    patch = patch_index(grid, 3, 2)
    cells = np.bincount(patch.ravel(), minlength=6)
    currents = np.random.default_rng(2).uniform(-5.0, 20.0, 6)
    fast = network.patch_solver(patch, cells)(currents)
    full = network.solve((currents / (cells * grid.cell_area_m2))[patch])
    for key in ("drop_V", "joule_W", "negative", "positive"):
        np.testing.assert_allclose(fast[key], full[key], rtol=1e-10,
                                   atol=1e-12 * np.abs(full[key]).max(), err_msg=key)
    for tab, heat in full["tab_joule_W"].items():
        assert fast["tab_joule_W"][tab] == pytest.approx(heat, rel=1e-10)
    assert fast["current_A"] == pytest.approx(full["current_A"], rel=1e-12)
