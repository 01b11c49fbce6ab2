"""Plots read the results Dataset faithfully: data, units, limits and the design point.

Most checks use the invented synthetic Dataset of tests/synthetic.py (built exactly to the results
contract); one check runs the real simulation when it is available.
"""

from __future__ import annotations

import numpy as np
import plotly.colors
import pytest
from synthetic import SyntheticSizing, synthetic_dataset

from explorer import plots
from explorer.results import hottest_anywhere

LIMITS = {"temperature_max_C": 45.0, "spread_K": 5.0}


@pytest.fixture(scope="module")
def ds():
    return synthetic_dataset()


HEAT_SUMS = ("heat_irreversible", "heat_reversible", "heat_ohmic_electrolyte", "heat_ohmic_solid",
             "heat_collector", "heat_tab")


def _hlines(fig) -> list[float]:
    return sorted(float(s.y0) for s in fig.layout.shapes if s.y0 == s.y1)


def test_field_matches_dataset_in_mm_with_equal_aspect(ds):
    fig = plots.field_figure(ds, "temperature", index=7)
    heat, spot = fig.data[0], fig.layout.annotations[0]
    np.testing.assert_allclose(np.asarray(heat.z), ds["temperature"].isel(time=7).values)
    # m -> mm by the SI prefix (BIPM, The International System of Units, 9th ed. 2019, Table 7)
    np.testing.assert_allclose(heat.x, ds["x"].values * 1e3)
    np.testing.assert_allclose(heat.y, ds["y"].values * 1e3)
    assert fig.layout.yaxis.scaleanchor == "x" and fig.layout.yaxis.scaleratio == 1
    assert "(mm)" in fig.layout.xaxis.title.text and "(mm)" in fig.layout.yaxis.title.text
    assert "°C" in heat.colorbar.title.text
    field = ds["temperature"].isel(time=7)
    j, i = np.unravel_index(int(np.argmax(field.values)), field.shape)
    assert spot.x == pytest.approx(ds["x"].values[i] * 1e3)
    assert spot.y == pytest.approx(ds["y"].values[j] * 1e3)
    assert spot.text.startswith("hottest") and "°C" in spot.text
    # by default the colours fit the picture shown, so the spread at that time uses all of them
    assert heat.zmin == pytest.approx(float(field.min()))
    assert heat.zmax == pytest.approx(float(field.max()))
    # "run": one colour range for every frame, so colours compare across time
    run = plots.field_figure(ds, "temperature", index=7, color_range="run").data[0]
    assert run.zmin == pytest.approx(float(ds["temperature"].min()))
    assert run.zmax == pytest.approx(float(ds["temperature"].max()))
    fixed = plots.field_figure(ds, "temperature", index=7, color_range=(20.0, 50.0)).data[0]
    assert (fixed.zmin, fixed.zmax) == (20.0, 50.0)
    with pytest.raises(ValueError, match="color_range"):
        plots.field_figure(ds, "temperature", color_range="all")


def test_field_scale_is_perceptually_uniform_cividis(ds):
    # cividis: Nuñez, Anderton & Renslow, PLOS ONE 13 (2018) e0199239, readable with colour-vision
    # deficiency and in grey-scale print; plotly ships the published table.
    heat = plots.field_figure(ds, animate=False).data[0]
    expected = plotly.colors.get_colorscale("cividis")
    assert [c[1] for c in heat.colorscale] == [c[1] for c in expected]


def test_field_frames_and_slider(ds):
    fig = plots.field_figure(ds, max_frames=10)
    assert 2 <= len(fig.frames) <= 10
    assert fig.frames[-1].name == str(ds.sizes["time"] - 1)  # the last time is always a frame
    last = fig.frames[-1].data[0]
    np.testing.assert_allclose(np.asarray(last.z), ds["temperature"].isel(time=-1).values)
    assert len(fig.layout.sliders[0].steps) == len(fig.frames)
    # default first picture: the time of the peak temperature
    assert fig.layout.meta["index"] == int(np.argmax(ds["temperature_max"].values))
    assert plots.field_figure(ds, animate=False).frames == ()


def test_soc_and_heat_flux_fields(ds):
    soc = plots.field_figure(ds, "soc", index=3, animate=False)
    np.testing.assert_allclose(np.asarray(soc.data[0].z), 100.0 * ds["soc"].isel(time=3).values)
    assert "%" in soc.data[0].colorbar.title.text
    q = plots.field_figure(ds, "heat_flux", index=-1, animate=False)
    np.testing.assert_allclose(np.asarray(q.data[0].z), ds["heat_flux"].isel(time=-1).values)
    assert "W/m²" in q.data[0].colorbar.title.text


def test_single_layout_field_is_one_cell():
    one = synthetic_dataset(layout="single")
    fig = plots.field_figure(one)
    assert np.asarray(fig.data[0].z).shape == (1, 1)
    assert fig.data[0].zmax > fig.data[0].zmin


def test_traces_carry_data_and_limit_lines(ds):
    fig = plots.traces_figure(ds, limits=LIMITS)
    by_name = {tr.name: tr for tr in fig.data}
    np.testing.assert_allclose(by_name["terminal voltage"].y, ds["voltage"].values)
    np.testing.assert_allclose(by_name["hottest point of the mean field"].y,
                               ds["temperature_max"].values)
    np.testing.assert_allclose(by_name["spread of the mean field over the face"].y,
                               ds["temperature_max"].values - ds["temperature_min"].values)
    # data-sheet limit from the attributes plus the user's two limits
    assert _hlines(fig) == sorted([5.0, 45.0, ds.attrs["temperature_limit_C"]])
    # a 1 h run is plotted in minutes (60 s per min)
    assert "min" in fig.layout.xaxis4.title.text
    np.testing.assert_allclose(by_name["terminal voltage"].x, ds["time"].values / 60.0)
    no_user = plots.traces_figure(ds)
    assert _hlines(no_user) == [ds.attrs["temperature_limit_C"]]


def test_limits_object_duck_typed(ds):
    class L:  # anything with the two attributes, like explorer.Limits
        temperature_max_C = 50.0
        spread_K = None

    assert plots.limit_values(ds, L()) == {"datasheet_C": 55.0, "temperature_max_C": 50.0}


def test_heat_split_stacks_to_the_total(ds):
    # The Bernardi split (Bernardi, Pawlikowski & Newman, J. Electrochem. Soc. 132 (1985) 5) adds up
    # to the total heat; the figure must show parts whose sum is the total line.
    fig = plots.heat_split_figure(ds)
    stacked = [tr for tr in fig.data if tr.stackgroup]
    signed = [tr for tr in fig.data if "signed" in (tr.name or "")]
    total = next(tr for tr in fig.data if tr.name.startswith("total generated"))
    parts = sum(np.asarray(tr.y) for tr in stacked) + sum(np.asarray(tr.y) for tr in signed)
    np.testing.assert_allclose(parts, np.asarray(total.y), rtol=1e-12)
    assert signed, "the synthetic reversible heat changes sign and must not be stacked"
    assert fig.layout.yaxis.title.text == "Heat (W)"


def test_comparison_overlays_each_scenario(ds):
    other = synthetic_dataset(rise_K=9.0)
    fig = plots.comparison_figure({"baseline": ds, "bigger plate": other}, limits=LIMITS)
    assert len(fig.data) == 2 * 3
    assert sorted({tr.name for tr in fig.data}) == ["baseline", "bigger plate"]
    hot = [tr for tr in fig.data if tr.yaxis in ("y", None) or tr.yaxis == "y1"]
    # the panel the temperature limit is drawn on shows the figure the verdict reads: the hottest
    # point anywhere in the cell, core included (DESIGN.md verdict rule 1)
    np.testing.assert_allclose(hot[1].y, hottest_anywhere(other)[0])
    assert 45.0 in _hlines(fig) and 5.0 in _hlines(fig)


def test_module_figures_show_the_worst_cell(ds):
    """A module Dataset (a `cell` dimension): the field and trace figures show the cell with the
    hottest point anywhere and say which; the heat split adds up the cells."""
    import xarray as xr

    other = synthetic_dataset(rise_K=9.0)
    per_cell = [v for v in ds.data_vars if "time" in ds[v].dims and v not in HEAT_SUMS]
    module = xr.concat([ds[per_cell], other[per_cell]], dim="cell")
    module = module.assign_coords(cell=[0, 1])
    for name in HEAT_SUMS:
        if name in ds:
            module[name] = ds[name]
    module.attrs = dict(ds.attrs)
    hot = hottest_anywhere(module)
    worst = int(np.argmax(hot.max(axis=1)))
    assert plots.worst_cell_view(module).attrs["shown_cell"] == worst
    fig = plots.field_figure(module, animate=False)
    np.testing.assert_allclose(np.asarray(fig.data[0].z),
                               module["temperature"].isel(cell=worst,
                                                          time=fig.layout.meta["index"]).values)
    split = plots.heat_split_figure(module)
    total = next(tr for tr in split.data if tr.name.startswith("total generated"))
    np.testing.assert_allclose(np.asarray(total.y),
                               ds["heat_total"].values + other["heat_total"].values)


def test_sizing_curve_design_point_and_limits():
    res = SyntheticSizing(limit_C=45.0)
    fig = plots.sizing_figure(res, limits=LIMITS)
    design = [tr for tr in fig.data if tr.name == "design point"]
    assert design[0].x[0] == pytest.approx(res.value)
    # the synthetic curve is 35 + 6/flow, so the design point sits on the 45 degC limit
    assert design[0].y[0] == pytest.approx(45.0, abs=0.6)
    assert fig.layout.xaxis2.title.text == "coolant flow through the plate (L/min)"
    assert 45.0 in _hlines(fig) and 5.0 in _hlines(fig)
    res.feasible = False
    assert "no value" in plots.sizing_figure(res).layout.title.text


def test_clear_errors(ds):
    with pytest.raises(ValueError, match="`temperature`"):
        plots.field_figure(ds.drop_vars("temperature"))
    with pytest.raises(ValueError, match="'pressure'"):
        plots.field_figure(ds, "pressure")
    with pytest.raises(TypeError, match="xarray.Dataset"):
        plots.traces_figure({"voltage": [1, 2]})
    with pytest.raises(ValueError, match=r"index.*\[0, 40\]"):
        plots.field_figure(ds, index=99)
    with pytest.raises(ValueError, match="unknown variable"):
        plots.comparison_figure([ds], variables=("pressure",))
    with pytest.raises(TypeError, match="size_cooling"):
        plots.sizing_figure(object())


def test_frame_indices_keep_ends():
    idx = plots.frame_indices(1000, 60)
    assert idx[0] == 0 and idx[-1] == 999 and len(idx) <= 60
    assert list(plots.frame_indices(5, 60)) == [0, 1, 2, 3, 4]


# ---------------------------------------------------------------------------------------------
# on a real run (SPMe, averaged layout, coarse grid: well under a second)


@pytest.fixture(scope="module")
def real():
    import explorer

    cell = explorer.load_cell("van_nmc_66ah")
    design = explorer.cooling.edge_plate(
        explorer.cooling.cold_plate(coolant="water", flow_L_min=2.0, inlet_C=25.0), fin_mm=0.5)
    ds = explorer.simulate(cell, explorer.duty.discharge(c_rate=2.0), design,
                           electrochemistry="spme", layout="averaged", grid=(12, 8))
    return cell, ds


def test_real_run_plots(real):
    cell, ds = real
    assert ds.attrs["status"] == "completed"
    fig = plots.field_figure(ds)
    k = fig.layout.meta["index"]
    np.testing.assert_allclose(np.asarray(fig.data[0].z), ds["temperature"].isel(time=k).values)
    # the coated area spans the cell's electrode width and height (cell-centred grid)
    x = np.asarray(fig.data[0].x)
    assert x[-1] + x[0] == pytest.approx(cell.geometry.width_m * 1e3)
    # the dotted line is the cell's data-sheet maximum
    assert cell.temperature_max_C in _hlines(plots.traces_figure(ds))
    # Bernardi et al. (1985): the heat sources add up to the total; the figure shows exactly that
    heat = plots.heat_split_figure(ds)
    parts = sum(np.asarray(tr.y) for tr in heat.data if tr.stackgroup or "signed" in (tr.name or ""))
    total = next(tr for tr in heat.data if tr.name.startswith("total generated"))
    np.testing.assert_allclose(parts, np.asarray(total.y), rtol=1e-9, atol=1e-9)


def test_field_drawn_to_the_cell_aspect_with_tabs_and_cooling_outlined(ds):
    import json

    import explorer

    cell = explorer.load_cell("van_nmc_66ah")  # invented demo cell: 240 x 160 mm, tabs on top
    fig = plots.field_figure(ds, "temperature", animate=False, cell=cell)
    g = cell.geometry
    width, height = g.width_m * 1e3, g.height_m * 1e3
    # the axes span the face (and the room for the tabs): equal scale, so true aspect
    x0, x1 = fig.layout.xaxis.range
    y0, y1 = fig.layout.yaxis.range
    assert x0 < 0 < width < x1 and y0 < 0 < height < y1
    assert fig.layout.yaxis.scaleanchor == "x" and fig.layout.yaxis.scaleratio == 1
    assert fig.layout.height >= 300  # not a strip of a heat map
    names = [s.name for s in fig.layout.shapes]
    assert "cell outline" in names and "cooled edge" in names
    tabs = [s for s in fig.layout.shapes if (s.name or "").startswith("tab ")]
    assert len(tabs) == len(g.tabs)
    for tab, shape in zip(g.tabs, tabs):  # top-edge tabs stand above the face at their place
        assert shape.y0 == pytest.approx(height)
        assert (shape.x0 + shape.x1) / 2 == pytest.approx(tab.position_m * 1e3)
    edge = next(s for s in fig.layout.shapes if s.name == "cooled edge")
    assert edge.y0 == edge.y1 < 0  # the plate under the bottom edge
    # a plate under a face: its footprint, dashed; cooled tabs are marked
    face = ds.copy()
    face.attrs["cooling"] = json.dumps({"kind": "combined", "parts": [
        {"kind": "face_plate", "face": "back"}, {"kind": "tab_cooling"}]})
    fig = plots.field_figure(face, "temperature", animate=False, cell=cell)
    footprint = next(s for s in fig.layout.shapes if s.name == "plate footprint")
    assert footprint.line.dash == "dash" and "back face" in fig.layout.xaxis.title.text
    assert all("cooled" in s.label.text for s in fig.layout.shapes
               if (s.name or "").startswith("tab "))


def test_uniform_soc_is_said_and_pinned_runs_share_one_colour_range(ds):
    assert plots.field_is_uniform(ds, "soc") == bool(
        np.all(np.ptp(ds["soc"].values, axis=(1, 2)) == 0))
    assert not plots.field_is_uniform(ds, "temperature")
    hotter = ds.copy()
    hotter["temperature"] = ds["temperature"] + 10.0
    lo, hi = plots.color_range({"a": ds, "b": hotter}, "temperature")
    assert lo == pytest.approx(float(ds["temperature"].min()))
    assert hi == pytest.approx(float(hotter["temperature"].max()))
    fig = plots.field_figure(ds, "temperature", color_range=(lo, hi), max_frames=5)
    assert all(fr.data[0].zmin == lo and fr.data[0].zmax == hi for fr in fig.frames)
