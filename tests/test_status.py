"""Run status: what ended each duty step, and a status other than "completed" whenever the duty
did not run to its natural end (contract A of the project notes). Logic checks: the expected
outcomes hold by construction of the duties on the invented demo cell `van_nmc_66ah`."""

import json
from pathlib import Path

import pytest

import explorer
from explorer import duty
from explorer.results import run_warnings

ROOT = Path(__file__).parents[1]
ROUTE = ROOT / "demo_cells" / "profiles" / "van_city_route.csv"


@pytest.fixture(scope="module")
def cell():
    return explorer.load_cell(ROOT / "demo_cells" / "van_nmc_66ah.toml")


def _ends(ds):
    return json.loads(ds.attrs["duty_step_ends"])


def test_a_profile_cut_short_by_the_voltage_window_says_when_and_why(cell):
    """From 100 % SOC the route's first regenerative pulse (at 70 s, invented profile) lifts the
    terminal voltage to the cell's upper limit: the duty stops there."""
    ds = explorer.simulate(cell, duty.profile_csv(ROUTE), layout="single", start_soc=1.0)
    assert ds.attrs["status"] == "cut_short"
    t_end = float(ds.time[-1])
    assert 70.0 <= t_end < 80.0
    message = ds.attrs["status_message"]
    assert f"t = {t_end:.1f} s" in message
    assert "upper limit 4.2 V" in message and "were left" in message
    end, = _ends(ds)
    assert end["ended_by"] == "safety_limit" and end["quantity"] == "voltage"
    assert end["threshold"] == pytest.approx(4.2)
    warnings = run_warnings(ds)
    assert len(warnings) == 1 and "cut short" in warnings[0] and f"{t_end:.1f} s" in warnings[0]


def test_the_same_profile_from_90_percent_completes(cell):
    ds = explorer.simulate(cell, duty.profile_csv(ROUTE), layout="single", start_soc=0.9)
    assert ds.attrs["status"] == "completed"
    assert float(ds.time[-1]) == pytest.approx(1800.0)
    end, = _ends(ds)
    assert end["ended_by"] == "profile_end" and end["time_s"] == pytest.approx(1800.0)
    assert run_warnings(ds) == []


def test_a_plain_discharge_to_the_lower_limit_completes(cell):
    ds = explorer.simulate(cell, duty.discharge(c_rate=1.0), layout="single")
    assert ds.attrs["status"] == "completed"
    end, = _ends(ds)
    assert (end["ended_by"], end["quantity"], end["threshold"]) == ("end_condition", "voltage",
                                                                     2.8)


def test_own_end_conditions_and_time_ends_complete(cell):
    steps = [duty.discharge(c_rate=1.0, end_soc=0.7), duty.rest(120),
             duty.discharge(c_rate=1.0, end_time_s=300)]
    ds = explorer.simulate(cell, steps, layout="single")
    assert ds.attrs["status"] == "completed"
    assert [e["ended_by"] for e in _ends(ds)] == ["end_condition", "time", "time"]
    assert _ends(ds)[0]["quantity"] == "soc"


def test_a_step_with_its_own_end_cut_short_by_the_window(cell):
    """An SOC end below what 2C can reach before 2.8 V: the window is a safety limit here."""
    ds = explorer.simulate(cell, duty.discharge(c_rate=2.0, end_soc=0.01), layout="single")
    assert ds.attrs["status"] == "cut_short"
    assert "its own end (soc below 0.01) was not reached" in ds.attrs["status_message"]
    assert _ends(ds)[0]["ended_by"] == "safety_limit"


def test_a_repeat_not_completed_is_cut_short_and_names_what_did_not_run(cell):
    """2C for 1500 s takes about 83 % of the charge; the second cycle reaches 2.8 V first."""
    d = duty.repeat([duty.discharge(c_rate=2.0, end_time_s=1500), duty.rest(60)], times=3)
    ds = explorer.simulate(cell, d, layout="single")
    assert ds.attrs["status"] == "cut_short"
    ends = _ends(ds)
    assert [e["ended_by"] for e in ends] == ["time", "time", "safety_limit", "not_run",
                                             "not_run", "not_run"]
    assert ends[2]["label"] == "discharge #2"
    message = ds.attrs["status_message"]
    assert "discharge #2" in message and "the 3 later duty step(s) did not run" in message
    assert run_warnings(ds)


def test_a_cc_cv_charge_with_a_temperature_end_completes(cell):
    """The CC part's own end is the upper limit even when it also watches a temperature."""
    ds = explorer.simulate(cell, duty.cc_cv_charge(1.0, end_temperature_C=80.0), layout="single",
                           start_soc=0.3)
    assert ds.attrs["status"] == "completed"
    assert [e["ended_by"] for e in _ends(ds)] == ["end_condition", "end_condition"]


def test_a_step_already_at_its_own_end_keeps_the_note(cell):
    ds = explorer.simulate(cell, duty.charge(c_rate=1.0), layout="single", start_soc=1.0)
    assert ds.attrs["status"] == "completed"
    assert "ended at once" in ds.attrs["status_message"]


def test_ctrl_c_stops_with_the_results_so_far(cell):
    def progress(t, index):
        if t > 100.0:
            raise KeyboardInterrupt

    ds = explorer.simulate(cell, [duty.discharge(c_rate=1.0), duty.rest(60)], layout="single",
                           progress=progress)
    assert ds.attrs["status"] == "stopped"
    assert [e["ended_by"] for e in _ends(ds)] == ["interrupted", "not_run"]
    assert "interrupted" in run_warnings(ds)[0]


def test_run_warnings_without_a_status_is_empty():
    import xarray as xr

    assert run_warnings(xr.Dataset()) == []
