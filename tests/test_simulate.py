"""End-to-end runs through ``explorer.simulate``: the Dataset contract, conservation, end
conditions located without overshoot, clean stops."""

import math

import numpy as np
import pytest

import explorer
from explorer import duty
from explorer.inplane.sinks import FaceSink, Sinks
from explorer.results import key_figures, open_results, save

DEMOS = sorted(explorer.cell.list_demo_cells())


@pytest.fixture(scope="module")
def cell():
    return explorer.load_cell(DEMOS[0])


@pytest.fixture(scope="module")
def discharge_1c(cell):
    return explorer.simulate(cell, duty.discharge(c_rate=1.0), layout="single")


def _integral(ds, name):
    t = ds.time.values
    return float(np.sum(ds[name].values[1:] * np.diff(t)))


def test_dataset_contract(discharge_1c, cell):
    ds = discharge_1c
    for name, dims, units in [("voltage", ("time",), "V"), ("current", ("time",), "A"),
                              ("temperature", ("time", "y", "x"), "degC"),
                              ("soc", ("time", "y", "x"), "1"),
                              ("heat_flux", ("time", "y", "x"), "W m-2"),
                              ("heat_total", ("time",), "W"),
                              ("temperature_max", ("time",), "degC"),
                              ("temperature_min", ("time",), "degC")]:
        assert ds[name].dims == dims
        assert ds[name].attrs["units"] == units and ds[name].attrs["long_name"]
    assert ds.sizes["x"] == 1 and ds.sizes["y"] == 1  # single layout: 1 x 1 grid
    for key in ("tool_version", "cell_name", "cell_sha256", "electrochemistry", "layout",
                "heat_capacity_J_per_K", "status"):
        assert key in ds.attrs
    assert ds.attrs["status"] == "completed"
    assert len(ds.attrs["cell_sha256"]) == 64
    split = sum(ds[f"heat_{k}"] for k in ("irreversible", "reversible", "ohmic_electrolyte",
                                          "ohmic_solid", "collector", "tab"))
    np.testing.assert_allclose(split, ds.heat_total, rtol=1e-12, atol=1e-12)
    assert float(ds.current[1]) > 0  # positive on discharge


def test_end_voltage_located_without_overshoot(discharge_1c, cell):
    """The lower voltage limit ends the step within 1 mV (issue requirement)."""
    v_end = float(discharge_1c.voltage[-1])
    assert abs(v_end - cell.voltage_min_V) <= 1e-3


def test_adiabatic_energy_balance(discharge_1c):
    """First law for a closed adiabatic body: generated heat = C dT (within 0.5 %)."""
    ds = discharge_1c
    generated = _integral(ds, "heat_total")
    stored = ds.attrs["heat_capacity_J_per_K"] * float(ds.temperature_mean[-1] - ds.temperature_mean[0])
    assert generated == pytest.approx(stored, rel=5e-3)


def test_electrical_energy_plus_heat_equals_ocv_energy(discharge_1c, cell):
    """Energy conservation (Bernardi, Pawlikowski & Newman 1985, eq. for q = I(U - V) - I T dU/dT):
    electrical work + (heat - reversible heat) = the integral of I * OCV, within 1 %."""
    ds = discharge_1c
    electrical = _integral(ds, "power")
    irreversible = _integral(ds, "heat_total") - _integral(ds, "heat_reversible")
    ocv_energy = float(np.sum((ds.current * ds.ocv).values[1:] * np.diff(ds.time.values)))
    assert electrical + irreversible == pytest.approx(ocv_energy, rel=1e-2)


def test_charge_passed_equals_soc_change(discharge_1c, cell):
    """Charge conservation: the charge passed equals the SOC change times the usable capacity."""
    ds = discharge_1c
    charge_Ah = _integral(ds, "current") / 3600
    dsoc = float(ds.soc_mean[0] - ds.soc_mean[-1])
    assert charge_Ah == pytest.approx(dsoc * cell.derived.theoretical_capacity_Ah, rel=1e-3)


def test_lithium_conserved(discharge_1c):
    """Cyclable lithium in the solid phase is constant: what leaves one electrode enters the other."""
    li = discharge_1c.lithium.values
    li = li[np.isfinite(li)]
    assert len(li) >= 2
    assert np.max(np.abs(li - li[0])) <= 1e-6 * li[0]


def test_slow_discharge_delivers_computed_capacity(cell):
    """A C/20 discharge delivers the cell's computed capacity within 2 % (Faraday's law on the
    stoichiometry windows; issue requirement)."""
    ds = explorer.simulate(cell, duty.discharge(c_rate=0.05), layout="single",
                           output_interval_s=600.0)
    assert key_figures(ds)["charge_delivered_Ah"] == pytest.approx(
        cell.derived.theoretical_capacity_Ah, rel=0.02)


def test_cc_cv_charge_ends_at_end_current(cell):
    ds = explorer.simulate(cell, duty.cc_cv_charge(1.0, end_c_rate=0.05), layout="single",
                           start_soc=0.3)
    assert ds.attrs["status"] == "completed"
    end_current = 0.05 * cell.nominal_capacity_Ah
    assert abs(float(ds.current[-1])) == pytest.approx(end_current, rel=2e-3)
    cv = ds.where(ds.step == 1, drop=True)
    np.testing.assert_allclose(cv.voltage, cell.voltage_max_V, atol=1e-6)


def test_lumped_convective_cooling_follows_the_exponential(cell):
    """Lumped capacitance (Incropera & DeWitt, Fundamentals of Heat and Mass Transfer, §5.2,
    eq. 5.6): a warm body at rest cools as exp(-h A t / (rho V c)); within 1 %."""
    h, ambient, T0 = 15.0, 20.0, 45.0
    sinks = Sinks(faces={f: FaceSink(h, ambient) for f in ("front", "back")})
    ds = explorer.simulate(cell, duty.rest(1800), sinks, layout="single", start_soc=0.5,
                           start_temperature_C=T0, output_interval_s=2.0)
    area = 2 * cell.geometry.width_m * cell.geometry.height_m
    tau = ds.attrs["heat_capacity_J_per_K"] / (h * area)
    expected = ambient + (T0 - ambient) * np.exp(-ds.time.values / tau)
    # within 1 % of the initial excess temperature, over six time constants
    assert ds.time.values[-1] > 5 * tau
    np.testing.assert_allclose(ds.temperature_mean.values, expected, rtol=0,
                               atol=1e-2 * (T0 - ambient))


def test_undeliverable_power_stops_cleanly_and_keeps_results(cell):
    ds = explorer.simulate(cell, duty.discharge(power_W=1e6), layout="single")
    assert ds.attrs["status"] in ("failed", "stopped")
    assert "power" in ds.attrs["status_message"]
    assert ds.sizes["time"] >= 1


def test_temperature_end_condition(cell):
    ds = explorer.simulate(cell, duty.discharge(c_rate=2.0, end_temperature_C=30.0),
                           layout="single")
    assert float(ds.temperature_max[-1]) == pytest.approx(30.0, abs=1e-2)


def test_save_and_open_round_trip(discharge_1c, tmp_path):
    path = save(discharge_1c, tmp_path / "run.nc", light=False)  # every value, exactly
    back = open_results(path)
    assert back.attrs == discharge_1c.attrs
    for name in discharge_1c.data_vars:
        np.testing.assert_array_equal(back[name].values, discharge_1c[name].values)
        assert back[name].attrs == discharge_1c[name].attrs
    assert not list(tmp_path.glob("*.part"))


@pytest.mark.parametrize("kwargs, match", [
    ({"electrochemistry": "p3d"}, "electrochemistry"),
    ({"layout": "grid"}, "layout"),
    ({"start_soc": 1.5}, "start_soc"),
    ({"start_temperature_C": math.nan}, "start_temperature_C"),
])
def test_bad_settings(cell, kwargs, match):
    with pytest.raises(explorer.validators.InputError, match=match):
        explorer.simulate(cell, duty.discharge(c_rate=1), **kwargs)


def test_requested_output_interval_gives_a_regular_record(cell):
    """With `output_interval_s` the record sits on that time base (plus the step's end), and the
    running integrals stay exact: the first law still closes within 0.5 %."""
    ds = explorer.simulate(cell, duty.discharge(c_rate=1.0), layout="single",
                           output_interval_s=60.0)
    t = ds.time.values
    np.testing.assert_allclose(t[:-1], 60.0 * np.arange(len(t) - 1), atol=1e-6)
    rise = float(ds.temperature_mean[-1] - ds.temperature_mean[0])
    assert float(ds.heat_generated_energy[-1]) == pytest.approx(
        ds.attrs["heat_capacity_J_per_K"] * rise, rel=5e-3)
    assert key_figures(ds)["charge_delivered_Ah"] == pytest.approx(
        float(ds.soc_mean[0] - ds.soc_mean[-1]) * cell.derived.theoretical_capacity_Ah, rel=1e-3)


def test_cooled_averaged_run_closes_the_energy_balance(cell):
    """First law with every kind of sink on (edge plate with a fin sheet, coolant warming along
    the plate, tab cooling): generated = stored + rejected within 0.5 % (issue requirement)."""
    plate = explorer.cooling.cold_plate(coolant="water", flow_L_min=1.0, inlet_C=20.0,
                                        cells_per_plate=4)
    design = (explorer.cooling.edge_plate(plate, edge="bottom", fin_mm=0.5)
              + explorer.cooling.tab_cooling(conductance_W_K=1.0, busbar_C=30.0))
    ds = explorer.simulate(cell, duty.discharge(c_rate=2.0), design, layout="averaged",
                           grid=(12, 8))
    assert ds.attrs["status"] == "completed"
    generated = float(ds.heat_generated_energy[-1])
    stored = float(ds.heat_stored[-1] - ds.heat_stored[0])
    rejected = float(ds.heat_rejected_energy[-1])
    assert rejected > 0.1 * generated
    assert generated == pytest.approx(stored + rejected, rel=5e-3)
    # the collector heat sits where the current gathers: along each tab's edge the heat above
    # the face's minimum (the uniform electrochemical part) is well over twice its face mean.
    # This cell's tabs are on the left and right edges, so its top and bottom rows are equal by
    # symmetry: compare each tab's own edge with the face, never two rows that may tie.
    q = ds.heat_flux.isel(time=-1).values
    assert float(ds.heat_collector[-1]) > 0 and float(ds.heat_tab[-1]) > 0
    excess = q - q.min()
    strips = {"bottom": excess[0, :], "top": excess[-1, :], "left": excess[:, 0],
              "right": excess[:, -1]}
    for tab in cell.geometry.tabs:
        assert strips[tab.edge].max() > 2.0 * excess.mean(), tab.edge
    assert "coolant_outlet" in ds and float(ds.coolant_outlet[-1]) > 20.0


def test_plate_on_both_faces_shares_one_coolant(cell):
    """Both faces on one coolant circuit: first law closes (0.5 %), the coolant takes up what
    both faces give, and the through-plane core rise is the two-sided plane-wall value, a quarter
    of the one-sided one (Incropera & DeWitt §3.5: q L^2/8k against q L^2/2k)."""
    plate = explorer.cooling.cold_plate(coolant="water", flow_L_min=2.0, inlet_C=25.0,
                                        flow_direction="+x")
    runs = {face: explorer.simulate(cell, duty.discharge(c_rate=1.0, end_time_s=900),
                                    explorer.cooling.face_plate(plate, face=face),
                                    layout="averaged", grid=(12, 8))
            for face in ("back", "both")}
    both = runs["both"]
    generated = float(both.heat_generated_energy[-1])
    stored = float(both.heat_stored[-1] - both.heat_stored[0])
    assert generated == pytest.approx(stored + float(both.heat_rejected_energy[-1]), rel=5e-3)
    assert "heat_to_front+back" in both
    assert float(both.temperature_max[-1]) < float(runs["back"].temperature_max[-1])
    rise = {f: float((r.temperature_core_max - r.temperature_max)[-1]) for f, r in runs.items()}
    assert rise["both"] == pytest.approx(rise["back"] / 4, rel=0.1)


def test_profile_runs_and_holds_each_sample(cell):
    """A recorded power profile: each sample holds until the next; the terminal power matches it
    at every recorded point, and the run ends at the profile's last time."""
    from pathlib import Path

    step = duty.profile_csv(Path(__file__).parents[1] / "demo_cells" / "profiles" / "van_city_route.csv")
    ds = explorer.simulate(cell, step, layout="single", start_soc=0.8)
    assert ds.attrs["status"] == "completed"
    assert float(ds.time[-1]) == pytest.approx(1800.0)
    tp, pv = np.asarray(step.profile_time_s), np.asarray(step.profile_value)
    t = ds.time.values[1:]
    demanded = pv[np.searchsorted(tp, t - 1e-9, side="right") - 1]  # the sample held over each step
    np.testing.assert_allclose(ds.power.values[1:], demanded, atol=1e-6 * np.abs(pv).max())


def test_soc_end_condition_is_located(cell):
    """End on SOC: located to 1e-4 (0.1 % of the SOC range) without running past it."""
    ds = explorer.simulate(cell, duty.discharge(c_rate=1.5, end_soc=0.5), layout="single")
    assert float(ds.soc_mean[-1]) == pytest.approx(0.5, abs=1e-4)


def test_adiabatic_averaged_run_stores_all_its_heat(cell):
    """First law for the 2-D field with collector and tab heat: generated = rise of the stored
    heat within 0.5 % (issue requirement), and the terminal voltage sits below the rod's by the
    collector drop I R (the averaged layout's series resistance)."""
    ds = explorer.simulate(cell, duty.discharge(c_rate=2.0, end_time_s=900), layout="averaged",
                           grid=(12, 8))
    generated = float(ds.heat_generated_energy[-1])
    assert generated == pytest.approx(float(ds.heat_stored[-1] - ds.heat_stored[0]), rel=5e-3)
    single = explorer.simulate(cell, duty.discharge(c_rate=2.0, end_time_s=60), layout="single",
                               output_interval_s=10.0)
    avg = explorer.simulate(cell, duty.discharge(c_rate=2.0, end_time_s=60), layout="averaged",
                            grid=(12, 8), output_interval_s=10.0)
    drop = float(avg.current[1]) * avg.attrs["collector_resistance_ohm"]
    assert float(single.voltage[1] - avg.voltage[1]) == pytest.approx(drop, rel=0.05)


def test_single_layout_with_a_fin_closes_the_energy_balance(cell):
    """The lumped model with an edge plate and fin sheet: generated = stored (cell and fin) +
    rejected within 0.5 % (first law)."""
    plate = explorer.cooling.cold_plate(coolant="water", flow_L_min=1.0, inlet_C=20.0)
    design = explorer.cooling.edge_plate(plate, edge="bottom", fin_mm=1.0)
    ds = explorer.simulate(cell, duty.discharge(c_rate=2.0), design, layout="single")
    generated = float(ds.heat_generated_energy[-1])
    stored = float(ds.heat_stored[-1] - ds.heat_stored[0])
    rejected = float(ds.heat_rejected_energy[-1])
    assert rejected > 0.05 * generated
    assert generated == pytest.approx(stored + rejected, rel=5e-3)
    # the fin's capacity counts too: more than the cell's heat capacity times the change
    change = float(ds.temperature_mean[-1] - ds.temperature_mean[0])
    assert abs(stored) > ds.attrs["heat_capacity_J_per_K"] * abs(change)


def test_cell_by_name_and_bad_cell():
    ds = explorer.simulate("bus_power_12ah", duty.discharge(c_rate=1.0, end_time_s=60),
                           layout="single")
    assert ds.attrs["cell_name"].startswith("Hybrid bus")
    with pytest.raises(explorer.validators.InputError, match="`cell` must be a Cell"):
        explorer.simulate(42, duty.discharge(c_rate=1.0))


def test_a_step_already_at_its_limit_ends_at_once_and_says_so(cell):
    ds = explorer.simulate(cell, duty.charge(c_rate=1.0), layout="single", start_soc=1.0)
    assert ds.attrs["status"] == "completed"
    assert float(ds.time[-1]) < 1e-2
    assert "ended at once: voltage was already above" in ds.attrs["status_message"]
