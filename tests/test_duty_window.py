"""Duties against the cell's voltage window: end voltages outside the data-sheet window are
errors naming the step, the value and the window; the window is marked as the step's own end
or as a safety limit (contract A of the project notes). Logic checks on an invented cell."""

from types import SimpleNamespace

import pytest

import explorer
from explorer import duty
from explorer.validators import InputError

CELL = SimpleNamespace(name="invented", nominal_capacity_Ah=10.0, voltage_min_V=2.8,
                       voltage_max_V=4.2)


@pytest.mark.parametrize("make", [
    lambda: duty.discharge(c_rate=1, end_voltage_V=0),
    lambda: duty.discharge(c_rate=1, end_voltage_V=-1.0),
    lambda: duty.charge(c_rate=1, end_voltage_V=0.0),
])
def test_end_voltage_at_or_below_zero_is_always_an_error(make):
    with pytest.raises(InputError, match="`end_voltage_V` must be > 0"):
        make()


@pytest.mark.parametrize("step, value", [
    (duty.discharge(c_rate=1, end_voltage_V=1.0, label="deep"), "1"),
    (duty.discharge(c_rate=1, end_voltage_V=4.5, label="deep"), "4.5"),
    (duty.charge(c_rate=1, end_voltage_V=5.0, label="deep"), "5"),
    (duty.charge(c_rate=1, end_voltage_V=2.0, label="deep"), "2"),
])
def test_end_voltage_outside_the_window_names_step_value_and_window(step, value):
    with pytest.raises(InputError) as err:
        duty.resolve(step, CELL)
    text = str(err.value)
    assert "'deep'" in text and f"{value} V" in text and "2.8-4.2 V" in text


def test_profile_end_voltage_outside_the_window(tmp_path):
    p = tmp_path / "load.csv"
    p.write_text("time [s],current [A]\n0,1\n10,0\n")
    with pytest.raises(InputError, match="outside the cell 'invented' window"):
        duty.resolve(duty.profile_csv(p, end_voltage_V=2.0), CELL)


def test_end_voltages_at_the_window_edges_are_accepted():
    duty.resolve(duty.discharge(c_rate=1, end_voltage_V=2.8), CELL)
    duty.resolve(duty.charge(c_rate=1, end_voltage_V=4.2), CELL)


def test_simulate_refuses_an_end_voltage_outside_the_window():
    cell = explorer.load_cell("van_nmc_66ah")
    with pytest.raises(InputError, match="window 2.8-4.2 V"):
        explorer.simulate(cell, duty.discharge(c_rate=1, end_voltage_V=1.0), layout="single")


def _window(r):
    return [(e.direction, e.origin) for e in r.ends if e.quantity == "voltage"]


def test_window_is_the_own_end_of_a_step_with_no_other_end():
    assert _window(duty.resolve(duty.discharge(c_rate=1), CELL)) == [("below", "own")]
    assert _window(duty.resolve(duty.charge(power_W=30), CELL)) == [("above", "own")]


def test_window_is_a_safety_limit_on_a_step_with_ends_of_its_own():
    for step in (duty.discharge(c_rate=1, end_soc=0.2), duty.discharge(c_rate=1, end_time_s=60),
                 duty.charge(c_rate=1, end_temperature_C=45)):
        assert [o for _, o in _window(duty.resolve(step, CELL))] == ["window"]


def test_window_guards_a_profile_on_both_sides_even_with_an_own_voltage_end(tmp_path):
    p = tmp_path / "load.csv"
    p.write_text("time [s],current [A]\n0,1\n10,-1\n20,0\n")
    assert _window(duty.resolve(duty.profile_csv(p), CELL)) == [("below", "window"),
                                                                 ("above", "window")]
    r = duty.resolve(duty.profile_csv(p, end_voltage_V=3.0), CELL)
    assert [(e.threshold, e.origin) for e in r.ends if e.quantity == "voltage"] == [
        (3.0, "own"), (2.8, "window"), (4.2, "window")]


def test_cc_part_of_cc_cv_ends_at_the_limit_as_its_own_end():
    cc, cv = duty.cc_cv_charge(1.0, end_temperature_C=50.0)
    assert _window(duty.resolve(cc, CELL)) == [("above", "own")]
    assert _window(duty.resolve(cv, CELL)) == []  # a hold controls the voltage itself


def test_describe_is_unchanged_by_the_origin_marks():
    d = duty.discharge(c_rate=1, end_soc=0.2).describe()
    assert d["ends"] == [{"quantity": "soc", "threshold": 0.2, "direction": "below"}]
    assert "window_end" not in d
