"""The one CSV reader of curves (explorer.csvdata): unit suffixes, SI conversion, clear errors.

Unit factors are definitions (SI brochure, BIPM 2019: 1 min = 60 s, 1 h = 3600 s,
0 degC = 273.15 K); nothing here is physics.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from explorer.csvdata import read_curves, read_settings
from explorer.validators import InputError


def _csv(tmp_path, text, name="curve.csv"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


@pytest.mark.parametrize("header, row, expected", [
    ("time_s,current_A,voltage_V,temperature_C", "60,2,3.7,25",
     {"time_s": 60.0, "current_A": 2.0, "voltage_V": 3.7, "temperature_C": 25.0}),
    ("time_min,current_mA,voltage_mV,temperature_K", "1,2000,3700,298.15",
     {"time_s": 60.0, "current_A": 2.0, "voltage_V": 3.7, "temperature_C": 25.0}),
    ("Time_h,Power_kW", "0.5,1.5", {"time_s": 1800.0, "power_W": 1500.0}),
    ("time_ms,temperature_degC", "500,-5", {"time_s": 0.5, "temperature_C": -5.0}),
])
def test_suffix_units_convert_to_si(tmp_path, header, row, expected):
    p = _csv(tmp_path, f"{header}\n0,{','.join(['0'] * (row.count(',') + 1))}\n{row}\n")
    # the first row is all zeros: strictly increasing time needs the second row later
    names = tuple(expected)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # suffix headers read without any warning
        data = read_curves(p, required=names[:1], optional=names[1:])
    for name, value in expected.items():
        assert data[name][-1] == pytest.approx(value, rel=1e-12, abs=1e-9)
    assert set(data) == set(expected)


def test_optional_columns_absent_and_other_columns_ignored(tmp_path):
    p = _csv(tmp_path, "step,time_s,cycle_no,voltage_V\n1,0,1,4.1\n1,10,1,4.0\n")
    data = read_curves(p, required=("time_s", "voltage_V"), optional=("temperature_C",))
    assert set(data) == {"time_s", "voltage_V"}
    np.testing.assert_array_equal(data["voltage_V"], [4.1, 4.0])


def test_bracketed_headers_read_with_a_future_warning_naming_the_new_form(tmp_path):
    p = _csv(tmp_path, "time [min],current [A]\n0,1\n1,2\n")
    with pytest.warns(FutureWarning, match=r"`time \[min\]` -> `time_min`.*`current_A`"):
        data = read_curves(p, required=("time_s", "current_A"))
    np.testing.assert_array_equal(data["time_s"], [0.0, 60.0])
    # a FutureWarning, not a UserWarning: the test run's "UserWarning is an error" rule and
    # a user's filters for UserWarning leave it alone
    assert not issubclass(FutureWarning, UserWarning)


@pytest.mark.parametrize("text, match", [
    ("time_s,voltage_V\n0,4.1\n10,abc\n", r"line 3: column `voltage_V` value 'abc' is not a number"),
    ("time_s,voltage_V\n0,4.1\n10\n", r"line 3: column `voltage_V` value \(missing\)"),
    ("time_s,voltage_V\n0,4.1\n10,inf\n", r"line 3: column `voltage_V` is 'inf'; expected a finite"),
    ("time_s,voltage_V\n0,4.1\n0,4.0\n", r"line 3: times must increase strictly"),
    ("time_s,voltage_furlong\n0,4.1\n1,4.0\n", r"column `voltage_furlong` has unknown unit 'furlong'"),
    ("time_s,voltage\n0,4.1\n1,4.0\n", r"header 'voltage' must state its unit as a suffix, e.g. `voltage_V`"),
    ("time_s,current_A\n0,4.1\n1,4.0\n", r"no `voltage_V` column"),
    ("time_s,voltage_V\n0,4.1\n", r"at least two rows"),
    ("time_s,voltage_V,voltage_mV\n0,4.1,4100\n1,4,4000\n", r"two `voltage` columns"),
    ("time_s,voltage_V,temperature_K\n0,4,-3\n1,4,4\n", r"line 2: column `temperature_K` is '-3', below absolute zero"),
])
def test_bad_content_names_file_line_column_value(tmp_path, text, match):
    p = _csv(tmp_path, text)
    with pytest.raises(InputError, match=match) as err:
        read_curves(p, required=("time_s", "voltage_V"), optional=("temperature_C",))
    assert str(p) in str(err.value)


def test_comments_keep_file_line_numbers_and_settings_are_read(tmp_path):
    p = _csv(tmp_path, "# rig: climate chamber (invented)\n# ambient_C = 25\n# Start_SOC=1.0\n"
                       "\ntime_s,voltage_V\n0,4.1\n5,x\n")
    assert read_settings(p) == {"ambient_c": "25", "start_soc": "1.0"}
    with pytest.raises(InputError, match="line 7: column `voltage_V`"):
        read_curves(p, required=("time_s", "voltage_V"))


def test_unknown_requested_name_and_bad_path(tmp_path):
    with pytest.raises(InputError, match="unknown column name 'speed_kmh'"):
        read_curves(_csv(tmp_path, "time_s\n0\n1\n"), required=("speed_kmh",))
    with pytest.raises(InputError, match="cannot read"):
        read_curves(tmp_path / "missing.csv")
    with pytest.raises(InputError, match="`path` must be a file path"):
        read_curves(3.0)


def test_a_long_file_reads_in_one_pass(tmp_path):
    n = 20_000
    p = _csv(tmp_path, "time_s,current_A\n" + "".join(f"{i},{i % 5}\n" for i in range(n)))
    data = read_curves(p, required=("time_s", "current_A"))
    assert data["time_s"].shape == (n,) and data["current_A"][7] == 2.0
