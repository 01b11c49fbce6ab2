"""Verdicts: what each limit is held against, and "not evaluated" where the run cannot see it.

The verdict rules are the design's (DESIGN.md §3): a cell-temperature limit is held against
the hottest point anywhere in the cell (the through-plane core estimate included); a figure
the model cannot see (a spread over the face on one lumped temperature, a cell-to-cell figure
on one cell) is "not evaluated", never "met"; a module is judged by its worst cell.

The runs use the invented demo cell ``van_nmc_66ah`` (invented data, see its file). The
physics of the through-thickness temperatures is checked against the plane wall with
generation in tests/test_thermal.py; here only how the figures are used.
"""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

import explorer
from explorer.limits import Limits, verdict_lines
from explorer.results import key_figures

RUN = dict(electrochemistry="spm", grid=(6, 4), output_interval_s=30.0)


@pytest.fixture(scope="module")
def cell():
    return explorer.load_cell("van_nmc_66ah")


@pytest.fixture(scope="module")
def duty():
    return explorer.duty.discharge(c_rate=2.0, end_time_s=900.0)


@pytest.fixture(scope="module")
def one_face(cell, duty):
    """Back face on a cold plate, front face free: the core runs well above the mean field."""
    plate = explorer.cooling.cold_plate(coolant="water", flow_L_min=2.0, inlet_C=25.0)
    return explorer.simulate(cell, duty, explorer.cooling.face_plate(plate, face="back"),
                             layout="averaged", **RUN)


def _between(ds):
    """A limit above the mean field's hottest point and below the hottest point anywhere."""
    mean_field = float(ds["temperature_max"].max())
    hottest = float(ds["temperature_hottest"].max())
    assert hottest - mean_field > 0.5  # the case this file is about: the core is over
    return 0.5 * (mean_field + hottest)


# --------------------------------------------------------------------------- the hottest point


def test_dataset_has_the_temperatures_through_the_thickness(one_face):
    ds = one_face
    for name in ("temperature_hottest", "temperature_coldest", "temperature_front_max",
                 "temperature_front_min", "temperature_back_max", "temperature_back_min",
                 "through_thickness_difference"):
        assert ds[name].dims == ("time",) and "long_name" in ds[name].attrs
    assert "anywhere" in ds["temperature_hottest"].attrs["long_name"]
    assert "mean" in ds["temperature_max"].attrs["long_name"]
    # the hottest point anywhere is never below the mean field nor the core estimate ...
    assert (ds.temperature_hottest >= ds.temperature_max - 1e-9).all()
    assert (ds.temperature_hottest >= ds.temperature_core_max - 1e-9).all()
    # ... and the coldest never above the mean field's coldest point
    assert (ds.temperature_coldest <= ds.temperature_min + 1e-9).all()
    # the cooled (back) face is colder than the free front face
    assert float(ds.temperature_back_min[-1]) < float(ds.temperature_front_min[-1])


def test_core_over_the_limit_is_not_met_in_the_api(one_face):
    limit = _between(one_face)
    check = Limits(temperature_max_C=limit).check(one_face)
    hottest = float(one_face["temperature_hottest"].max())
    assert check["figures"]["temperature_max_C"] == pytest.approx(hottest)
    assert check["verdicts"]["temperature_max_C"] == "not met"
    assert check["margins"]["temperature_max_C"] == pytest.approx(limit - hottest)
    assert not check["met"] and check["worst"] == "temperature_max_C"
    # the mean field alone would have passed it
    assert check["figures"]["mean_field_max_C"] < limit
    lines = verdict_lines(Limits(temperature_max_C=limit), check)
    assert lines[0].startswith("temperature_max_C: NOT met")
    assert "hottest point anywhere in the cell (core estimate and faces included)" in lines[0]
    # the margin is printed to the shown figure's decimals: limit - shown figure = shown margin
    shown = f"{hottest:.4g}"
    decimals = len(shown.split(".")[1]) if "." in shown else 0
    assert f"margin {limit - hottest:+.{min(decimals, 3)}f} K" in lines[0] and shown in lines[0]


def test_time_to_limit_follows_the_hottest_point(one_face):
    limit = _between(one_face)
    ds = one_face.copy()
    ds.attrs["temperature_limit_C"] = limit
    fig = key_figures(ds)
    hot = ds["temperature_hottest"].values
    assert fig["peak_temperature_C"] == pytest.approx(hot.max())
    first = float(ds["time"].values[np.argmax(hot >= limit)])
    assert fig["time_to_limit_s"] == pytest.approx(first)
    assert fig["peak_mean_field_C"] < limit


def test_core_over_the_limit_is_not_met_in_the_report(one_face):
    from explorer.report import limits_rows, render_report

    limit = _between(one_face)
    rows = limits_rows(one_face, Limits(temperature_max_C=limit))
    assert len(rows) == 1 and rows[0][4] == "NOT met"
    assert "hottest point anywhere in the cell" in rows[0][0]
    html = render_report(one_face, limits=Limits(temperature_max_C=limit))
    assert "NOT met" in html and "hottest point anywhere in the cell" in html


def test_demo_prints_the_hottest_anywhere_verdict(tmp_path, capsys):
    """The README quick start: a limit not met is an answer, the exit code stays 0."""
    from explorer.cli import main

    assert main(["demo", "--out", str(tmp_path)]) == 0
    out = capsys.readouterr().out
    ds = explorer.open_results(next(tmp_path.glob("*.nc")))
    hottest = float(ds["temperature_hottest"].max())
    limit = ds.attrs["temperature_limit_C"]
    line = next(ln for ln in out.splitlines() if ln.strip().startswith("temperature_max_C:"))
    assert ("NOT met" in line) == (hottest > limit)
    assert "hottest point anywhere in the cell" in line
    assert f"{hottest:.4g} degC" in line
    for words in ("over the face", "through the thickness", "in-cell spread"):
        assert words in out


# --------------------------------------------------------------------------- spreads


def test_in_cell_spread_spans_the_face_and_the_thickness(one_face):
    fig = key_figures(one_face)
    check = Limits(spread_K=1.0).check(one_face)
    spread = float((one_face.temperature_hottest - one_face.temperature_coldest).max())
    face = float((one_face.temperature_max - one_face.temperature_min).max())
    assert fig["max_spread_K"] == pytest.approx(spread)
    assert check["figures"]["spread_K"] == pytest.approx(spread)
    assert fig["max_face_spread_K"] == pytest.approx(face)
    assert check["figures"]["face_spread_K"] == pytest.approx(face)
    assert fig["max_through_thickness_K"] > 0
    assert spread >= max(face, fig["max_through_thickness_K"]) - 1e-9


@pytest.fixture(scope="module")
def single(cell, duty):
    return explorer.simulate(cell, duty, explorer.cooling.convection(60.0, 25.0),
                             layout="single", **{k: v for k, v in RUN.items() if k != "grid"})


def test_single_layout_spread_is_not_evaluated(single):
    check = Limits(temperature_max_C=80.0, spread_K=50.0).check(single)
    assert check["verdicts"]["spread_K"] == "not evaluated"
    assert check["margins"]["spread_K"] is None and check["figures"]["spread_K"] is None
    assert "single" in check["reasons"]["spread_K"]
    assert "lower bound" in check["reasons"]["spread_K"]  # it sees the thickness only
    assert check["verdicts"]["temperature_max_C"] == "met"
    assert check["met"] is False and check["not_evaluated"] == ("spread_K",)
    assert any("single" in w for w in check["warnings"])
    fig = key_figures(single)
    assert np.isnan(fig["max_spread_K"]) and np.isnan(fig["max_face_spread_K"])
    assert fig["max_through_thickness_K"] > 0
    lines = verdict_lines(Limits(spread_K=50.0), check)
    assert lines[0].startswith("spread_K: not evaluated")
    assert "NOT shown to be met" in lines[1]


def test_single_layout_spread_over_its_through_thickness_part_is_not_met(single):
    """The through-thickness difference is a lower bound of the in-cell spread: a limit
    below it is not met even though the spread over the face is not seen."""
    through = float(single["through_thickness_difference"].max())
    check = Limits(spread_K=0.5 * through).check(single)
    assert check["verdicts"]["spread_K"] == "not met"
    assert check["bounds"]["spread_K"] == pytest.approx(through)
    assert check["margins"]["spread_K"] == pytest.approx(-0.5 * through)


def test_same_design_on_the_default_layout_sees_the_spread(cell, duty):
    ds = explorer.simulate(cell, duty, explorer.cooling.convection(60.0, 25.0), **RUN)
    check = Limits(spread_K=50.0).check(ds)
    assert check["verdicts"]["spread_K"] == "met" and check["met"]


# --------------------------------------------------------------------------- module


@pytest.fixture(scope="module")
def two_cells(cell, duty):
    """A module-shaped Dataset by hand: two runs, the second less well cooled, on a `cell`
    dimension (what explorer.simulate_module returns)."""
    runs = [explorer.simulate(cell, duty, explorer.cooling.convection(h, 25.0), **RUN)
            for h in (80.0, 30.0)]
    assert np.allclose(runs[0].time, runs[1].time)
    runs[1] = runs[1].assign_coords(time=runs[0].time)
    shared = ["voltage", "current", "power"]
    module = xr.concat([r.drop_vars(shared) for r in runs], dim="cell", join="override",
                       combine_attrs="override")
    for name in shared:
        module[name] = runs[0][name]
    return module.assign_coords(cell=[0, 1]), runs


def test_cell_to_cell_on_one_cell_is_not_evaluated(one_face):
    check = Limits(temperature_max_C=90.0, cell_to_cell_K=3.0).check(one_face)
    assert check["verdicts"]["cell_to_cell_K"] == "not evaluated"
    assert "module" in check["reasons"]["cell_to_cell_K"]
    assert check["met"] is False


def test_module_is_judged_by_its_worst_cell(two_cells):
    module, runs = two_cells
    mean = np.stack([r["temperature_mean"].values for r in runs])
    expected = float((mean.max(axis=0) - mean.min(axis=0)).max())
    peaks = [float(r["temperature_hottest"].max()) for r in runs]
    limits = Limits(temperature_max_C=0.5 * sum(peaks), cell_to_cell_K=0.5 * expected)
    check = limits.check(module)
    assert check["figures"]["cell_to_cell_K"] == pytest.approx(expected)
    assert check["verdicts"]["cell_to_cell_K"] == "not met"
    assert check["figures"]["temperature_max_C"] == pytest.approx(max(peaks))
    assert check["cells"]["temperature_max_C"] == 1  # the less well cooled one
    assert check["verdicts"]["temperature_max_C"] == "not met"
    assert check["worst_cell"] in (None, 1)
    spreads = [Limits(spread_K=99.0).check(r)["figures"]["spread_K"] for r in runs]
    assert check["figures"]["spread_K"] == pytest.approx(max(spreads))
    fig = key_figures(module)
    assert fig["peak_temperature_C"] == pytest.approx(max(peaks))
    assert fig["worst_cell"] == 1 and fig["cell_to_cell_K"] == pytest.approx(expected)
    assert Limits(cell_to_cell_K=2.0 * expected).check(module)["verdicts"]["cell_to_cell_K"] \
        == "met"


# --------------------------------------------------------------------------- inputs, old files


def test_cell_to_cell_limit_is_validated():
    assert Limits(cell_to_cell_K=3.0).names() == ("cell_to_cell_K",)
    with pytest.raises(explorer.validators.InputError, match="cell_to_cell_K"):
        Limits(cell_to_cell_K=0.0)


def test_run_that_did_not_complete_carries_a_warning(one_face):
    ds = one_face.copy()
    ds.attrs.update(status="stopped", status_message="interrupted by the user at t = 300.0 s")
    check = Limits(temperature_max_C=90.0).check(ds)
    assert check["warnings"]
    assert any("verdict" in w or "stopped" in w or "interrupt" in w for w in check["warnings"])


def test_older_dataset_without_surface_temperatures(one_face):
    """A file made before the through-thickness variables: the hottest figure falls back on
    the higher of the mean field and the core estimate, and says so."""
    old = one_face.drop_vars(["temperature_hottest", "temperature_coldest",
                              "through_thickness_difference"])
    check = Limits(temperature_max_C=90.0).check(old)
    core = float(one_face["temperature_core_max"].max())
    assert check["figures"]["temperature_max_C"] == pytest.approx(core)
    assert any("older version" in w for w in check["warnings"])


def test_one_cell_of_a_shared_coolant_path_says_the_module_was_not_run():
    """DESIGN.md verdict rule 3: cells sharing a coolant path are judged as one module. A single
    cell of such a path (``simulate(position=k)``) carries a warning that says so; a design with
    one cell per path does not."""
    import explorer
    from explorer import cooling, duty

    cell = explorer.load_cell("van_nmc_66ah")
    short = duty.discharge(c_rate=1.0, end_time_s=60)
    limits = explorer.Limits(temperature_max_C=45.0)
    shared = cooling.edge_plate(cooling.cold_plate(coolant="water", flow_L_min=2.0, inlet_C=25.0,
                                                   cells_per_plate=4))
    one = explorer.simulate(cell, short, shared, grid=(6, 4), position=1)
    warnings = limits.check(one)["warnings"]
    assert any("position 1" in w and "of the 4" in w and "simulate_module" in w
               for w in warnings)
    alone = cooling.edge_plate(cooling.cold_plate(coolant="water", flow_L_min=2.0, inlet_C=25.0))
    ds = explorer.simulate(cell, short, alone, grid=(6, 4))
    assert not any("simulate_module" in w for w in limits.check(ds)["warnings"])
