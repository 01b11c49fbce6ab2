"""The fidelity check: the same design point on the fuller models, and whether a verdict could
flip.

Outside facts the checks rest on:
- Reduced models with an electrolyte correction (SPMe) agree with the full porous-electrode
  model (DFN) to within a few millivolts at moderate rates and room temperature, and drift
  apart at high rates and low temperatures, where transport in the electrolyte limits the cell
  (Marquis, Sulzer, Timms, Please & Chapman, "An asymptotic derivation of a single particle
  model with electrolyte", J. Electrochem. Soc. 166 (2019) A3693 -- from memory; DESIGN.md
  section 5 states the few-millivolt figure as a fact of the trade: common practice).
- With collector foils far more conductive than the electrodes, the distributed layout
  collapses to the averaged one (common practice, DESIGN.md section 5): a thin 26 Ah LFP cell
  at 0.5C is such a case.
The demo cells are invented data.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

import explorer
from explorer import cooling, duty, fidelity
from explorer.fidelity import check_fidelity, judge
from explorer.limits import Limits
from explorer.validators import InputError

COARSE = {"grid": (8, 6), "rods": (3, 2)}  # coarse, but still a face resolved by several rods


@pytest.fixture(scope="module")
def mild():
    """0.5C from 25 degC, convection at 25 degC, on the LFP demo cell."""
    cell = explorer.load_cell("rack_lfp_26ah")
    return check_fidelity(cell, duty.discharge(c_rate=0.5), cooling.convection(10.0, 25.0),
                          limits=Limits(temperature_max_C=45.0, spread_K=5.0), **COARSE)


@pytest.fixture(scope="module")
def harsh():
    """3C from 0 degC, convection at 0 degC, on the high-energy NMC demo cell; the run as made
    is the SPM, which completes (the SPMe leaves its validity there, see below)."""
    cell = explorer.load_cell("van_nmc_66ah")
    return check_fidelity(cell, duty.discharge(c_rate=3.0), cooling.convection(10.0, 0.0),
                          electrochemistry="spm", start_temperature_C=0.0, **COARSE)


def _diff(fid, variant, name):
    return float(fid[name].sel(variant=variant) - fid[name].sel(variant="as run"))


def test_mild_case_agrees(mild):
    assert [str(v) for v in mild["variant"].values] == ["as run", "dfn", "distributed",
                                                        "finer grid"]
    assert set(mild["status"].values) == {"completed"}
    # SPMe against DFN: a few millivolts at most (here well under 5 mV)
    assert float(mild["voltage_rms_difference"].sel(variant="dfn")) < 5e-3
    # averaged against distributed: the same peak within 0.5 K
    assert abs(_diff(mild, "distributed", "peak_temperature")) < 0.5
    assert mild.attrs["verdict_could_flip"] == "no"
    assert "would not flip" in mild.attrs["fidelity_message"]
    assert np.isnan(mild["cell_to_cell_spread"]).all()  # one cell: not a module
    # only the distributed layout resolves the SOC over the face
    assert float(mild["end_soc_spread"].sel(variant="as run")) == 0.0
    assert float(mild["end_soc_spread"].sel(variant="distributed")) > 0.0


def test_dataset_units_and_summary(mild):
    for name in fidelity.FIGURES:
        assert mild[name].attrs["units"] and mild[name].attrs["long_name"]
    assert mild["peak_temperature"].attrs["units"] == "degC"
    assert mild["voltage_rms_difference"].attrs["units"] == "V"
    s = fidelity.summary(mild)
    assert s["verdict_could_flip"] == "no" and s["variants"][0] == "as run"
    assert s["skipped"] == []
    keys = {"figure", "unit", "as_run", "fuller", "difference", "margin", "could_flip"}
    assert all(keys <= set(r) for r in s["rows"])
    peak = next(r for r in s["rows"] if r["variant"] == "dfn"
                and r["figure"] == "peak_temperature")
    assert peak["margin"] == pytest.approx(45.0 - float(mild["peak_temperature"][0]))
    json.dumps(s)  # JSON-able
    text = fidelity.text_table(s)
    assert "peak temperature" in text and "verdict could flip: no" in text
    page = fidelity.html_table(s)
    assert page.startswith("<div") and "<table>" in page and " id=" not in page


def test_attach_and_read_back(mild, tmp_path):
    """A run carries the check as an attribute, through a netCDF file and back."""
    cell = explorer.load_cell("rack_lfp_26ah")
    run = explorer.simulate(cell, duty.discharge(c_rate=1.0, end_time_s=60.0), layout="single")
    assert fidelity.from_attrs(run) is None
    fidelity.attach(run, mild)
    run.to_netcdf(tmp_path / "run.nc")
    back = explorer.open_results(tmp_path / "run.nc")
    assert fidelity.from_attrs(back) == fidelity.summary(mild)
    back.attrs["fidelity_summary"] = "{not json"
    assert fidelity.from_attrs(back) is None


def test_harsh_case_differs_more_and_the_verdict_can_flip(mild, harsh):
    dfn_rms = float(harsh["voltage_rms_difference"].sel(variant="dfn"))
    assert dfn_rms > 5e-3 and dfn_rms > 3 * float(mild["voltage_rms_difference"].sel(
        variant="dfn"))
    peak = _diff(harsh, "dfn", "peak_temperature")
    assert abs(peak) > 0.5  # larger than the mild case's bound
    assert harsh.attrs["verdict_could_flip"] == "not evaluated"  # no limits given
    as_run = float(harsh["peak_temperature"].sel(variant="as run"))
    # a margin smaller than the difference: the verdict could flip
    tight = judge(harsh, Limits(temperature_max_C=as_run + abs(peak) / 2))
    assert tight.attrs["verdict_could_flip"] == "yes"
    assert "could flip" in tight.attrs["fidelity_message"]
    flagged = [r for r in fidelity.summary(tight)["rows"] if r["could_flip"]]
    assert any(r["variant"] == "dfn" and r["figure"] == "peak_temperature" for r in flagged)
    assert "COULD FLIP" in fidelity.text_table(fidelity.summary(tight))
    # a margin larger than every difference: it would not
    widest = max(abs(_diff(harsh, v, "peak_temperature"))
                 for v in [str(x) for x in harsh["variant"].values[1:]])
    loose = judge(harsh, Limits(temperature_max_C=as_run + 2 * widest + 1.0))
    assert loose.attrs["verdict_could_flip"] == "no"


def test_a_run_outside_its_models_validity_is_flagged():
    """The SPMe at 3C from 0 degC depletes the electrolyte and stops; the DFN runs on: the runs
    end apart and the verdict could flip."""
    cell = explorer.load_cell("van_nmc_66ah")
    fid = check_fidelity(cell, duty.discharge(c_rate=3.0), cooling.convection(10.0, 0.0),
                         start_temperature_C=0.0, limits=Limits(temperature_max_C=55.0),
                         max_wall_s=30.0, grid=(6, 4), rods=(2, 2))
    assert str(fid["status"].sel(variant="as run").values) != "completed"
    assert str(fid["status"].sel(variant="dfn").values) == "completed"
    assert fid.attrs["verdict_could_flip"] == "yes"
    assert "ended 'completed' where the run as made ended" in fid.attrs["fidelity_message"]


def test_wall_time_cap_skips_with_a_reason():
    cell = explorer.load_cell("rack_lfp_26ah")
    d, c = duty.discharge(c_rate=1.0), cooling.convection(10.0, 25.0)
    base = explorer.simulate(cell, d, c, grid=(6, 4))
    fid = check_fidelity(cell, d, c, base=base, grid=(6, 4), max_wall_s=1e-6,
                         limits=Limits(temperature_max_C=45.0))
    assert [str(v) for v in fid["variant"].values] == ["as run"]
    s = fidelity.summary(fid)
    assert {x["variant"] for x in s["skipped"]} == {"dfn", "distributed", "finer grid"}
    assert all("max_wall_s" in x["reason"] for x in s["skipped"])
    assert s["verdict_could_flip"] == "not evaluated"
    assert "Not run: dfn" in s["message"]


def test_a_dfn_run_is_not_rerun_as_dfn():
    cell = explorer.load_cell("bus_power_12ah")
    fid = check_fidelity(cell, duty.discharge(c_rate=1.0, end_time_s=300.0), None,
                         electrochemistry="dfn", layout="single")
    assert [str(v) for v in fid["variant"].values] == ["as run", "averaged"]
    reasons = {x["variant"]: x["reason"] for x in fidelity.summary(fid)["skipped"]}
    assert "DFN already" in reasons["dfn"] and "no in-plane grid" in reasons["finer grid"]


def test_module_check_gives_the_cell_to_cell_spread():
    cell = explorer.load_cell("rack_lfp_26ah")
    plate = cooling.cold_plate("eg50", flow_L_min=0.5, inlet_C=25.0, cells_per_plate=3,
                               length_mm=3 * cell.geometry.width_m * 1e3)
    fid = check_fidelity(cell, duty.discharge(c_rate=1.0, end_time_s=240.0),
                         cooling.face_plate(plate), layout="single", module=True,
                         limits=Limits(temperature_max_C=45.0, cell_to_cell_K=3.0))
    assert [str(v) for v in fid["variant"].values] == ["as run", "dfn", "averaged"]
    assert np.isfinite(fid["cell_to_cell_spread"].sel(variant=["as run", "dfn"])).all()
    assert float(fid["cell_to_cell_spread"].sel(variant="as run")) > 0.0
    assert "module of 3 cells" in str(fid["setting"].sel(variant="dfn").values)
    # the fuller layout runs the worst cell alone (a grid of rods in every cell costs the
    # cells times the rods); its difference is added to the module's figures
    worst = int(explorer.results.key_figures(
        explorer.simulate_module(cell, duty.discharge(c_rate=1.0, end_time_s=240.0),
                                 cooling.face_plate(plate), layout="single"))["worst_cell"])
    assert f"worst cell {worst} alone" in str(fid["setting"].sel(variant="averaged").values)
    assert np.isnan(float(fid["cell_to_cell_spread"].sel(variant="averaged")))
    assert np.isfinite(float(fid["peak_temperature"].sel(variant="averaged")))


@pytest.mark.parametrize("kwargs, match", [
    ({"max_wall_s": -1.0}, "max_wall_s"), ({"max_wall_s": True}, "max_wall_s"),
    ({"limits": {"temperature_max_C": 45}}, "limits"), ({"module": "yes"}, "module"),
    ({"progress": 3}, "progress"), ({"electrochemistry": "p2d"}, "electrochemistry"),
    ({"base": "run.nc"}, "base"),
])
def test_bad_arguments_are_input_errors(kwargs, match):
    with pytest.raises(InputError, match=match):
        check_fidelity("rack_lfp_26ah", duty.discharge(c_rate=1.0), None, **kwargs)


@pytest.mark.parametrize("fuller, margin, flips", [
    (44.5, 0.5, False),   # 0.3 K hotter than run, 0.5 K margin: still met
    (45.2, 0.5, True),    # 1.0 K hotter: over the limit on the fuller model
    (43.0, 0.5, False),   # 1.7 K cooler: further inside the limit, however large the change
    (46.0, -0.5, False),  # not met as run and hotter still: stays not met
    (44.0, -0.5, True),   # not met as run, the fuller model is inside the limit
])
def test_could_flip_means_the_fuller_figure_crosses_the_limit(fuller, margin, flips):
    """Verdict rule 6 of the design (a difference exceeding the margin), signed: every limit is
    an upper bound, so the fuller model's margin is the margin less the difference."""
    import xarray as xr

    as_run = 45.0 - margin  # limit 45 degC
    fid = xr.Dataset({"peak_temperature": ("variant", [as_run, fuller])},
                     coords={"variant": ["as run", "dfn"]})
    row = fidelity._row(fid, "dfn", "peak_temperature", "degC", ("temperature_max_C", margin))
    assert row["could_flip"] is flips
