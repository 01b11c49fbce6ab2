"""Calibration to measured curves (explorer.calibrate, `python -m explorer calibrate`).

Round trip (issue 11): synthetic "measured" curves from a demo cell with known changed
parameters plus seeded Gaussian noise; the calibration recovers the changes within 3 of its
reported standard deviations, and the uncertainty shrinks as tests are added. The reported
uncertainty is the linearised least-squares estimate, covariance s^2 (J^T J)^-1 (Bates &
Watts, Nonlinear Regression Analysis and Its Applications, 1988, sec. 2.3). The curves are
made by the same model (explorer.calibration_bench.synthetic_tests), so this checks the fit
and its error estimate, not the physics. Short partial discharges keep it fast.
"""

from __future__ import annotations

import math
import tomllib

import numpy as np
import pytest

import explorer
from explorer.calibration import LabTest, calibrate, load_test
from explorer.calibration_bench import TRUE_CHANGES, synthetic_tests
from explorer.cell.datasheet import read_provenance
from explorer.cli import main
from explorer.validators import InputError

NOISE_V = 0.002


@pytest.fixture(scope="module")
def measured():
    """Two short discharges (1C and 3C to 70 % SOC) of the van cell with known changes."""
    return synthetic_tests("van_nmc_66ah", c_rates=(1.0, 3.0), end_soc=0.7, noise_V=NOISE_V,
                           noise_K=0.1, seed=11)


@pytest.fixture(scope="module")
def fits(measured):
    one = calibrate("van_nmc_66ah", measured[:1], fit=list(TRUE_CHANGES), max_points=40)
    both = calibrate("van_nmc_66ah", measured, fit=list(TRUE_CHANGES), max_points=40)
    return one, both


def test_round_trip_recovers_the_changes_within_three_sigma(fits):
    for cal in fits:
        assert cal.status == "converged"
        for name, true in TRUE_CHANGES.items():
            off = abs(math.log(cal.values[name] / true))
            assert off <= 3 * cal.sigma_log[name] + 1e-9, (name, cal.values[name], true,
                                                           cal.sigma_log[name])
        # the residuals are the noise: RMS within a factor 1.5 of its standard deviation
        for row in cal.rms:
            assert NOISE_V * 1e3 / 1.5 < row["voltage_rms_mV"] < NOISE_V * 1e3 * 1.5


def test_uncertainty_shrinks_as_tests_are_added(fits):
    one, both = fits
    for name in TRUE_CHANGES:
        assert both.sigma_log[name] < one.sigma_log[name]


def test_report_carries_correlations_rms_and_a_residual_figure(fits):
    cal = fits[1]
    c = cal.correlation
    assert c.shape == (3, 3) and np.allclose(np.diag(c), 1.0) and np.allclose(c, c.T)
    assert np.all(np.abs(c) <= 1.0 + 1e-9)
    assert [r["test"] for r in cal.rms] == ["1C", "3C"]
    text = cal.summary()
    assert "correlations" in text and "RMS error per test" in text and "mohm" in text
    fig = cal.figure()
    assert len(fig.data) == 2 * 4  # per test: measured, model, voltage and temperature residual
    assert cal.to_dict()["parameters"][0]["parameter"] == "resistance"


def test_the_calibrated_file_marks_fitted_values_and_loads(fits, tmp_path):
    cal = fits[1]
    path = cal.write(tmp_path / "calibrated.toml")
    cell = explorer.load_cell(path)
    prov = read_provenance(path.read_text())
    assert prov["tabs.negative.weld_resistance"].startswith("fitted")
    assert prov["negative.diffusivity"].startswith("fitted")
    assert prov["positive.rate_constant"].startswith("fitted")
    assert prov["separator.porosity"].startswith("template")
    base = explorer.load_cell("van_nmc_66ah")
    ratio = cell.negative.diffusivity_m2_s / base.negative.diffusivity_m2_s
    assert ratio == pytest.approx(cal.values["diffusivity"], rel=1e-5)
    assert "calibrated to 2 test curve(s)" in cell.extra["data_note"]


def test_thermal_parameters_from_surface_temperature():
    """Heat capacity and the rig's coefficient from a 2C discharge's surface temperature
    (voltage parameters as generated); both recovered within 3 sigma."""
    base = explorer.load_cell("van_nmc_66ah")
    true = {"heat_capacity": 1.3 * base.derived.heat_capacity_J_K, "rig_h": 25.0}
    tests = synthetic_tests(base, c_rates=(2.0,), changes=true, end_soc=0.3, seed=5,
                            noise_K=0.05)
    cal = calibrate(base, tests, fit=["heat_capacity", "rig_h"], max_points=40)
    for name, v in true.items():
        assert abs(math.log(cal.values[name] / v)) <= 3 * cal.sigma_log[name] + 1e-9
    assert "rig_h" not in tomllib.loads(cal.text).get("thermal", {})


def _write_csv(test: LabTest, path):
    lines = [f"# ambient_C = {test.ambient_C}", "# start_soc = 1.0",
             "time_s,current_A,voltage_V,temperature_C"]
    lines += [f"{t:g},{i:.6g},{v:.6f},{c:.4f}" for t, i, v, c in
              zip(test.time_s, test.current_A, test.voltage_V, test.temperature_C)]
    path.write_text("\n".join(lines) + "\n")
    return path


def test_data_sheet_and_two_curves_to_a_calibrated_cell_that_runs(measured, tmp_path,
                                                                   capsys):
    """The 'done when' of issue 11: data sheet -> cell file -> calibrate (CLI) -> demo."""
    sheet = tmp_path / "sheet.toml"
    sheet.write_text((explorer.cell.loader.DEMO_DIR / "datasheets" / "van_nmc_66ah_sheet.toml")
                     .read_text())
    assert main(["new-cell", str(sheet), "--out", str(tmp_path / "cell.toml")]) == 0
    csvs = [_write_csv(t, tmp_path / f"dis_{t.name}.csv") for t in measured]
    out = tmp_path / "cell_calibrated.toml"
    code = main(["calibrate", str(tmp_path / "cell.toml"), *map(str, csvs), "--fit",
                 "resistance", "--out", str(out)])
    assert code == 0, capsys.readouterr().err
    assert (tmp_path / "cell_calibrated_residuals.html").exists()
    cell = explorer.load_cell(out)
    assert read_provenance(out.read_text())["tabs.positive.weld_resistance"].startswith("fitted")
    ds = explorer.simulate(out, explorer.duty.discharge(c_rate=1.0, end_soc=0.8), grid=(4, 4))
    assert ds.attrs["status"] == "completed" and ds.attrs["cell_name"] == cell.name
    assert main(["demo", "--cell", str(out), "--out", str(tmp_path / "demo"),
                 "--c-rate", "1"]) == 0


def test_load_test_reads_settings_and_units(tmp_path):
    p = tmp_path / "pulse.csv"
    p.write_text("# ambient_C = 10\n# start_soc = 0.5\n# name = pulse 10 s\n"
                 "time_min,current_mA,voltage_mV\n0,0,3700\n1,5000,3650\n2,5000,3640\n")
    t = load_test(p)
    assert t.name == "pulse 10 s" and t.ambient_C == 10.0 and t.start_soc == 0.5
    assert t.start_temperature_C == 10.0
    np.testing.assert_allclose(t.current_A, [0, 5, 5])
    np.testing.assert_allclose(t.voltage_V, [3.7, 3.65, 3.64])
    p.write_text("# ambient_C = warm\ntime_s,current_A,voltage_V\n0,1,4\n1,1,4\n2,1,4\n")
    with pytest.raises(InputError, match="ambient_C = 'warm'.*not a number"):
        load_test(p)


@pytest.mark.parametrize("kwargs, match", [
    ({"fit": ["resistance", "colour"]}, "expected one or more of"),
    ({"fit": "heat_capacity"}, "needs measured temperatures"),
    ({"fit": "resistance", "layout": "single"}, "needs the collectors"),
    ({"fit": "diffusivity", "bounds": {"diffusivity": (2.0, 1.0)}}, "are empty"),
])
def test_bad_calibration_arguments(kwargs, match):
    t = LabTest("t", np.arange(5.0), np.ones(5), np.full(5, 4.0))
    with pytest.raises(InputError, match=match):
        calibrate("van_nmc_66ah", [t], **kwargs)


def test_a_test_with_mismatched_columns_is_refused():
    with pytest.raises(InputError, match="`voltage_V` has 4 values"):
        LabTest("t", np.arange(5.0), np.ones(5), np.ones(4))


def test_electrolyte_transport_scale_round_trip():
    """One parameter: the electrolyte transport (eps**b through the Bruggeman exponents)."""
    tests = synthetic_tests("van_nmc_66ah", c_rates=(2.0,), changes={"electrolyte": 0.7},
                            end_soc=0.7, seed=2, temperature=False)
    cal = calibrate("van_nmc_66ah", tests, fit="electrolyte", max_points=40)
    assert abs(math.log(cal.values["electrolyte"] / 0.7)) <= 3 * cal.sigma_log["electrolyte"]
    prov = read_provenance(cal.text)
    assert prov["separator.bruggeman"].startswith("fitted")
    assert prov["negative.solid_conductivity"].startswith("fitted")  # compensated, see module


def test_a_discharge_counted_negative_is_caught_and_can_be_flipped(tmp_path):
    p = tmp_path / "cycler.csv"
    rows = "".join(f"{t},-10,{4.1 - 0.001 * t:.4f}\n" for t in range(0, 300, 10))
    p.write_text("time_s,current_A,voltage_V\n" + rows)
    with pytest.raises(InputError, match="current positive on discharge"):
        load_test(p)
    p.write_text("# current_sign = -1\ntime_s,current_A,voltage_V\n" + rows)
    assert load_test(p).current_A[0] == 10.0
