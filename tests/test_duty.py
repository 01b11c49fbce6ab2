"""Duty steps: constructors, resolution against a cell, and bad profile input."""

from types import SimpleNamespace

import pytest

from explorer import duty
from explorer.validators import InputError

CELL = SimpleNamespace(name="t", nominal_capacity_Ah=10.0, voltage_min_V=2.8, voltage_max_V=4.2)


def test_discharge_resolves_c_rate_and_default_voltage_end():
    r = duty.resolve(duty.discharge(c_rate=2.0), CELL)
    assert r.kind == "current" and r.value == pytest.approx(20.0)
    assert [(e.quantity, e.threshold, e.direction) for e in r.ends] == [("voltage", 2.8, "below")]


def test_charge_is_negative_and_ends_at_upper_limit():
    r = duty.resolve(duty.charge(current_A=5.0), CELL)
    assert r.value == pytest.approx(-5.0)
    assert r.ends[-1].quantity == "voltage" and r.ends[-1].direction == "above"


def test_user_voltage_end_replaces_the_cell_limit():
    r = duty.resolve(duty.discharge(c_rate=1, end_voltage_V=3.3, end_soc=0.2), CELL)
    assert sorted(e.quantity for e in r.ends) == ["soc", "voltage"]
    assert [e.threshold for e in r.ends if e.quantity == "voltage"] == [3.3]


def test_hold_voltage_defaults():
    r = duty.resolve(duty.hold_voltage(), CELL)
    assert r.value == 4.2
    assert r.ends[-1].quantity == "current" and r.ends[-1].threshold == pytest.approx(0.5)


def test_power_step_and_rest_and_repeat():
    assert duty.resolve(duty.discharge(power_W=100), CELL).kind == "power"
    assert duty.rest(60).max_duration_s() == 60
    steps = duty.repeat([duty.discharge(c_rate=1), duty.rest(10)], times=3)
    assert len(steps) == 6 and steps[-1].label == "rest #3"


@pytest.mark.parametrize("kwargs", [{}, {"c_rate": 1, "current_A": 2}, {"c_rate": -1},
                                    {"c_rate": float("nan")}, {"c_rate": "fast"}])
def test_bad_constant_steps(kwargs):
    with pytest.raises(InputError) as err:
        duty.discharge(**kwargs)
    assert "duty.discharge" in str(err.value)


def test_hold_outside_window():
    with pytest.raises(InputError, match="outside the cell"):
        duty.resolve(duty.hold_voltage(5.0), CELL)


def _csv(tmp_path, text):
    p = tmp_path / "load.csv"
    p.write_text(text)
    return p


def test_profile_reads_units_and_holds_values(tmp_path):
    p = _csv(tmp_path, "time [min],power [kW]\n0,0.1\n1,0.2\n2,0\n")
    s = duty.profile_csv(p)
    assert s.profile_time_s == (0.0, 60.0, 120.0)
    assert s.profile_value == (100.0, 200.0, 0.0)
    r = duty.resolve(s, CELL)
    assert r.load_at(59.9) == 100.0 and r.load_at(60.0) == 200.0
    assert r.next_breakpoint(0.0) == 60.0
    assert s.max_duration_s() == 120.0


@pytest.mark.parametrize("text, match", [
    ("time [s]\n0\n1\n", "exactly one of"),
    ("time [s],current\n0,1\n1,1\n", "unit in brackets"),
    ("time [s],current [furlong]\n0,1\n1,1\n", "unknown unit"),
    ("time [s],current [A]\n0,1\n0,2\n", "increase strictly"),
    ("time [s],current [A]\n0,1\n1,nan\n", "finite"),
    ("time [s],current [A]\n0,1\n1,abc\n", "not a number"),
    ("time [s],current [A]\n0,1\n", "at least two rows"),
    ("current [A],power [W]\n0,1\n1,1\n", "time"),
])
def test_bad_profiles_name_file_and_problem(tmp_path, text, match):
    p = _csv(tmp_path, text)
    with pytest.raises(InputError, match=match) as err:
        duty.profile_csv(p)
    assert str(p) in str(err.value)


def test_missing_profile_file(tmp_path):
    with pytest.raises(InputError, match="cannot read"):
        duty.profile_csv(tmp_path / "nope.csv")


def test_profile_comments_and_line_numbers(tmp_path):
    p = _csv(tmp_path, "# invented\n\ntime [s],current [A]\n0,1\n5,2\n5,3\n")
    with pytest.raises(InputError, match="line 6: times must increase"):
        duty.profile_csv(p)


def test_bundled_profile_reads():
    from pathlib import Path

    s = duty.profile_csv(Path(__file__).parents[1] / "demo_cells" / "profiles" / "van_city_route.csv")
    assert s.profile_quantity == "power" and s.profile_time_s[-1] == 1800.0
    assert min(s.profile_value) < 0 < max(s.profile_value)  # regenerative braking included


def test_profile_with_a_latin1_byte_names_file_and_line(tmp_path):
    p = tmp_path / "load.csv"
    p.write_bytes("# r\xe9sum\xe9 of the route\ntime [s],current [A]\n0,1\n1,1\n".encode("latin-1"))
    with pytest.raises(InputError) as err:
        duty.profile_csv(p)
    text = str(err.value)
    assert str(p) in text and "line 1" in text and "0xe9" in text and "UTF-8" in text


def test_profile_later_latin1_byte_gives_its_line(tmp_path):
    p = tmp_path / "load.csv"
    p.write_bytes(b"time [s],current [A]\n0,1\n1,1\xb5\n")
    with pytest.raises(InputError, match="line 3: byte 0xb5"):
        duty.profile_csv(p)


def test_profile_with_a_byte_order_mark_reads(tmp_path):
    p = tmp_path / "load.csv"
    p.write_bytes(b"\xef\xbb\xbftime [s],current [A]\n0,1\n1,2\n")
    assert duty.profile_csv(p).profile_value == (1.0, 2.0)


def test_profile_with_a_byte_order_mark_and_a_bad_header_does_not_blame_the_mark(tmp_path):
    p = tmp_path / "load.csv"
    p.write_bytes(b"\xef\xbb\xbftime [s],speed [km/h]\n0,1\n1,2\n")
    with pytest.raises(InputError) as err:
        duty.profile_csv(p)
    assert "\ufeff" not in str(err.value) and "exactly one of" in str(err.value)


def test_utf16_profile_says_so(tmp_path):
    p = tmp_path / "load.csv"
    p.write_bytes("time [s],current [A]\n0,1\n1,2\n".encode("utf-16"))
    with pytest.raises(InputError, match="UTF-16"):
        duty.profile_csv(p)


@pytest.mark.parametrize("header, scale_t, scale_v", [
    ("time_s,current_A", 1.0, 1.0),
    ("time_min,current_mA", 60.0, 1e-3),
    ("time_h,power_kW", 3600.0, 1e3),
    ("Time_s,Power_W", 1.0, 1.0),
])
def test_profile_headers_with_unit_suffixes(tmp_path, header, scale_t, scale_v):
    p = _csv(tmp_path, f"{header}\n0,1\n2,3\n")
    s = duty.profile_csv(p)
    assert s.profile_time_s == (0.0, 2 * scale_t)
    assert s.profile_value == pytest.approx((scale_v, 3 * scale_v))


def test_profile_suffix_with_unknown_unit(tmp_path):
    p = _csv(tmp_path, "time_s,current_furlong\n0,1\n1,1\n")
    with pytest.raises(InputError, match="unknown unit 'furlong'"):
        duty.profile_csv(p)


def test_profile_lookups_hold_each_sample_on_a_long_profile(tmp_path):
    n = 50_000
    p = _csv(tmp_path, "time_s,current_A\n" + "".join(f"{i},{i % 7}\n" for i in range(n)))
    r = duty.resolve(duty.profile_csv(p), CELL)
    assert r.load_at(12_345.5) == 12_345 % 7 and r.load_at(-1.0) == 0.0
    assert r.load_at(1e9) == (n - 1) % 7
    assert r.next_breakpoint(12_345.0) == 12_346.0 and r.next_breakpoint(n - 1.0) == float("inf")
