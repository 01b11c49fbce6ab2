"""The app's verdicts, module view and sizing answer (DESIGN.md §3 verdict rules), without a browser.

Module-shaped results are made by hand from the invented synthetic Dataset of tests/synthetic.py
(one synthetic run per cell, concatenated along a new ``cell`` dimension, coolant outlet of cell k
= inlet of cell k+1), so the widget logic is tested apart from the simulation. One test runs a
real cut-short duty end to end.
"""

from __future__ import annotations

import html
import json
from pathlib import Path

import numpy as np
import pytest
import xarray as xr
from synthetic import SyntheticSizing, synthetic_dataset

import explorer
from explorer import plots
from explorer.app import widget as app_widget
from explorer.app.inputs import defaults, inputs_to_call, validate

ROOT = Path(__file__).resolve().parents[1]


def module_dataset(cells: int = 4, inlet_C: float = 25.0, rise_step_K: float = 2.0) -> xr.Dataset:
    """An invented module result: cell k is ``rise_step_K`` hotter than cell k-1 (warmer coolant)."""
    runs = [synthetic_dataset(rise_K=12.0 + rise_step_K * k) for k in range(cells)]
    ds = xr.concat(runs, dim="cell", data_vars="all", coords="minimal", compat="override",
                   combine_attrs="override")
    ds = ds.assign_coords(cell=np.arange(cells))
    for shared in ("voltage", "current", "power", "ocv", "step"):  # one series string
        ds[shared] = runs[0][shared]
    tau = ds["time"].values / ds["time"].values[-1]
    rise_per_cell = 0.8 * (1.0 - np.exp(-4.0 * tau))  # invented coolant rise per cell, K
    inlet = inlet_C + np.arange(cells)[:, None] * rise_per_cell[None, :]
    ds["coolant_inlet"] = (("cell", "time"), inlet, {"units": "degC", "long_name": "coolant in"})
    ds["coolant_outlet"] = (("cell", "time"), inlet + rise_per_cell[None, :],
                            {"units": "degC", "long_name": "coolant out"})
    ds["temperature_hottest"] = ds["temperature_core_max"].copy()
    ds["temperature_hottest"].attrs.update(long_name="hottest point anywhere in the cell")
    ds.attrs["module_cells"] = cells
    return ds


def _verdicts_landed() -> bool:
    check = explorer.Limits(temperature_max_C=45.0).check(synthetic_dataset())
    return "verdicts" in check and "warnings" in check


def _module_landed() -> bool:
    return hasattr(explorer, "simulate_module")


needs_verdicts = pytest.mark.skipif(not _verdicts_landed(),
                                    reason="Limits.check verdicts (contracts B) not landed yet")


@pytest.fixture
def fake_runs(monkeypatch):
    """Stand-ins for explorer.simulate / simulate_module that record which one ran."""
    calls = []

    def simulate(cell, duty, cooling=None, progress=None, **kwargs):
        calls.append(("simulate", cooling))
        return synthetic_dataset()

    def simulate_module(cell, duty, cooling, progress=None, **kwargs):
        calls.append(("simulate_module", cooling))
        return module_dataset(cooling.plate.cells_per_plate)

    monkeypatch.setattr(explorer, "simulate", simulate)
    monkeypatch.setattr(explorer, "simulate_module", simulate_module, raising=False)
    return calls


def _text(value: str) -> str:
    return html.unescape(value)


def _limit_rows(text: str) -> dict[str, str]:
    """The verdict table's rows, keyed by the first cell (the figure that governs the limit)."""
    table = text.split("<th>verdict</th></tr>")[1].split("</table>")[0]
    rows = [r for r in table.split("<tr>") if r]
    return {r.split("</td>")[0].removeprefix("<td>"): r for r in rows}


# ---------------------------------------------------------------------------------------------
# cells per plate and the module run


def test_cells_per_plate_input_maps_onto_the_cold_plate():
    call = inputs_to_call({**defaults(), "cells_per_plate": 6})
    assert call.cooling.plate.cells_per_plate == 6 and call.module
    assert not inputs_to_call(defaults()).module
    errors = validate({**defaults(), "cells_per_plate": 2.5})
    assert "cells_per_plate" in errors and "whole number" in errors["cells_per_plate"]
    assert "cells_per_plate" in validate({**defaults(), "cells_per_plate": 0})
    # without a plate there is no coolant path to share: the input neither applies nor checks
    assert validate({**defaults(), "cooling": "convection", "cells_per_plate": 0}) == {}
    assert not inputs_to_call({**defaults(), "cooling": "convection", "cells_per_plate": 5}).module


def test_cell_to_cell_limit_input():
    assert getattr(inputs_to_call(defaults()).limits, "cell_to_cell_K", None) is None  # 0 = none
    try:
        limits = inputs_to_call({**defaults(), "limit_cell_to_cell_K": 3.0}).limits
    except TypeError:
        pytest.skip("Limits(cell_to_cell_K=...) (contracts B) not landed yet")
    assert limits.cell_to_cell_K == 3.0


def test_module_figure_per_cell_peaks_and_coolant_along_the_plate():
    ds = module_dataset(cells=5)
    fig = plots.module_figure(ds, limits={"temperature_max_C": 45.0, "cell_to_cell_K": 3.0})
    traces = {tr.name.split(" (")[0]: tr for tr in fig.data}
    peaks = traces["peak of each cell"]
    np.testing.assert_allclose(peaks.x, np.arange(5))
    np.testing.assert_allclose(peaks.y, ds["temperature_hottest"].max("time").values)
    coolant = next(tr for tr in fig.data if tr.name.startswith("coolant at the module's peak"))
    i = int(np.argmax(ds["temperature_hottest"].max("cell").values))
    expected = np.concatenate([[ds["coolant_inlet"].values[0, i]], ds["coolant_outlet"].values[:, i]])
    np.testing.assert_allclose(coolant.y, expected)
    assert np.all(np.diff(coolant.y) >= 0.0)  # the coolant only warms along a heated plate
    c2c = next(tr for tr in fig.data if tr.name.startswith("cell-to-cell"))
    means = ds["temperature_mean"].values
    np.testing.assert_allclose(c2c.y, means.max(axis=0) - means.min(axis=0))
    limit_lines = [s for s in fig.layout.shapes if s.line.dash == "dash"]
    assert {float(s.y0) for s in limit_lines} == {45.0, 3.0}
    with pytest.raises(ValueError, match="cell"):
        plots.module_figure(synthetic_dataset())


def test_module_run_shows_the_module_view(fake_runs):
    app = explorer.explore(cells_per_plate=4)
    ds = app.run()
    assert ds is not None, app.last_error
    assert [c[0] for c in fake_runs] == ["simulate_module"]
    assert fake_runs[0][1].plate.cells_per_plate == 4
    # the Module tab: one point per cell, the table and the cell-to-cell figure
    peaks = next(tr for tr in app.fig_module.figure.data if tr.name.startswith("peak of each cell"))
    np.testing.assert_allclose(peaks.y, ds["temperature_hottest"].max("time").values)
    text = _text(app.module_text.value)
    assert "4 cells along the coolant" in text and "Cell-to-cell difference" in text
    assert "no cell-to-cell limit set" in text
    # the other tabs show the hottest cell (the last one here: the coolant is warmest there)
    hottest = 3
    assert app.cell_select.value == hottest and app.cell_select.layout.display is None
    k = app.time_slider.value
    np.testing.assert_allclose(np.asarray(app.fig_temperature.figure.data[0].z),
                               ds["temperature"].isel(cell=hottest, time=k).values)
    summary = _text(app.summary.value)
    assert "the worst of the 4 cells" in summary and "the figures show cell 3" in summary
    figures = explorer.results.key_figures(ds)  # the module's: its worst cell, cell-to-cell
    assert f"{figures['peak_temperature_C']:.2f}" in summary
    assert f"{figures['cell_to_cell_K']:.2f}" in summary
    # another cell picked in the Module tab reaches the field figures
    app.cell_select.value = 0
    np.testing.assert_allclose(np.asarray(app.fig_temperature.figure.data[0].z),
                               ds["temperature"].isel(cell=0, time=app.time_slider.value).values)
    app.time_slider.value = 2
    np.testing.assert_allclose(np.asarray(app.fig_temperature.figure.data[0].z),
                               ds["temperature"].isel(cell=0, time=2).values)
    # pinning a module compares through one cell
    app.pin("module")
    assert {tr.name for tr in app.fig_compare.figure.data} == {"module"}
    # back to one cell: simulate again, the Module tab says so
    app.set_inputs(cells_per_plate=1)
    app.run()
    assert [c[0] for c in fake_runs] == ["simulate_module", "simulate"]
    assert "One cell was run" in app.module_text.value
    assert not app.fig_module.figure.data  # the earlier module's figure is gone
    assert app.cell_select.layout.display == "none"


@needs_verdicts
def test_module_cell_to_cell_verdict(fake_runs):
    app = explorer.explore(cells_per_plate=4, limit_cell_to_cell_K=1.0)
    ds = app.run()
    check = app._limits.check(ds)
    figure = check["figures"]["cell_to_cell_K"]
    assert figure > 1.0  # cells 2 K apart in rise (invented), so the 1 K limit is not met
    assert check["verdicts"]["cell_to_cell_K"] == "not met"
    text = _text(app.module_text.value)
    assert f"{figure:.3g} K" in text and "limit 1 K: <b style='color:#B2182B'>NOT met" in text
    assert "NOT met" in _text(app.summary.value)


# ---------------------------------------------------------------------------------------------
# verdicts


@needs_verdicts
def test_single_layout_spread_is_not_evaluated():
    ds = synthetic_dataset(layout="single")
    limits = explorer.Limits(temperature_max_C=45.0, spread_K=5.0)
    text = _text(app_widget.limits_html(ds, limits))
    row = next(r for k, r in _limit_rows(text).items() if "spread" in k)
    assert "not evaluated (" in row and "met</td>" not in row and "single" in row
    assert "not every limit could be evaluated" in text


@needs_verdicts
def test_single_layout_run_in_the_app_says_not_evaluated(fake_runs, monkeypatch):
    monkeypatch.setattr(explorer, "simulate",
                        lambda *a, progress=None, **k: synthetic_dataset(layout="single"))
    app = explorer.explore(layout="single")
    app.run()
    summary = _text(app.summary.value)
    assert "not evaluated (" in summary and "every limit met" not in summary


@needs_verdicts
def test_temperature_limit_label_names_the_hottest_point_anywhere():
    text = _text(app_widget.limits_html(synthetic_dataset(), explorer.Limits(temperature_max_C=45.0)))
    (first,) = _limit_rows(text)
    assert "anywhere" in first and "core" in first


@needs_verdicts
def test_cut_short_warning_beside_every_verdict():
    ds = synthetic_dataset()
    ds.attrs.update(status="cut_short",
                    status_message="t = 1234 s: the cell reached its lower voltage limit "
                                   "during the profile (invented)",
                    duty_step_ends=json.dumps([{"index": 0, "label": "profile",
                                                "ended_by": "safety_limit", "quantity": "voltage",
                                                "threshold": 2.7, "time_s": 1234.0}]))
    limits = explorer.Limits(temperature_max_C=45.0, spread_K=20.0)
    warnings = limits.check(ds)["warnings"]
    assert warnings
    text = _text(app_widget.limits_html(ds, limits))
    assert "Every verdict on this run carries this warning" in text
    for w in warnings:
        assert w in text
    rows = _limit_rows(text).values()
    assert len(rows) == 2 and all("⚠ see warning" in r for r in rows)


@needs_verdicts
@pytest.mark.skipif(not (ROOT / "demo_cells" / "profiles" / "van_city_route.csv").is_file(),
                    reason="demo_cells/profiles/van_city_route.csv missing")
def test_real_cut_short_profile_shows_the_warning():
    app = explorer.explore(duty="profile", profile_path=str(ROOT / "demo_cells" / "profiles" / "van_city_route.csv"),
                           cell="van_nmc_66ah", start_soc_pct=100.0)
    ds = app.run()
    assert ds is not None, app.last_error
    if ds.attrs["status"] != "cut_short":
        pytest.skip(f"the profile run ended {ds.attrs['status']!r} (run status, contracts A)")
    summary = _text(app.summary.value)
    assert "Every verdict on this run carries this warning" in summary
    assert "⚠ see warning" in summary


def test_hydraulics_are_labelled_channels_only(fake_runs):
    app = explorer.explore()
    app.run()
    summary = _text(app.summary.value)
    assert "Pressure drop (kPa) — channels only" in summary
    assert "channels only" in app_widget._channels_only("Pump power (W)")


# ---------------------------------------------------------------------------------------------
# sizing


def test_sizing_bounds_follow_the_parameter():
    app = explorer.explore()
    for name in ("inlet_C", "fin_mm", "flow_L_min", "tim_W_mK"):
        app.rows["size_vary"].control.value = name  # as chosen in the menu
        low, high, unit, _ = app_widget.sizing_bounds(name)
        assert app.inputs()["size_low"] == low and app.inputs()["size_high"] == high
        assert unit and f"({unit})" in _text(app.rows["size_low"].label.value)
    low, high = app.inputs()["size_low"], app.inputs()["size_high"]
    assert app.errors == {} and low < high
    # the inlet temperature's bounds are temperatures, not the flow's 0.2-5
    i_low, i_high, _, _ = app_widget.sizing_bounds("inlet_C")
    assert i_low >= 0.0 and i_high > 5.0
    # a cooling that cannot vary the current choice moves the menu, and the bounds with it
    app.set_inputs(cooling="convection")
    assert app.inputs()["size_vary"] == "h_W_m2K"
    assert app.inputs()["size_low"] == app_widget.sizing_bounds("h_W_m2K")[0]
    # bounds given with the parameter are kept (a loaded file, explore(...) keywords)
    app = explorer.explore(size_vary="inlet_C", size_low=20.0, size_high=30.0)
    assert (app.inputs()["size_low"], app.inputs()["size_high"]) == (20.0, 30.0)
    app = explorer.explore(size_vary="inlet_C")
    assert app.inputs()["size_low"] == i_low


def test_sizing_answer_and_the_input_box(monkeypatch, fake_runs):
    class Sized(SyntheticSizing):  # the fields of explorer.sizing.SizingResult the app shows
        def __init__(self):
            super().__init__(vary="inlet_C")
            self.value, self.unit, self.resolution, self.limited_by = 31.5, "degC", 0.5, "limits"
            self.hydraulics = {"pressure_drop_Pa": 1800.0, "pump_power_W": 0.06}
            self.limits, self.module, self.warnings = None, None, []

    result = Sized()
    monkeypatch.setattr(explorer, "size_cooling", lambda *a, **k: result, raising=False)
    app = explorer.explore(size_vary="inlet_C")
    assert app.size() is result
    assert app.inputs()["inlet_C"] == 31.5  # the input box takes the sized value
    assert app.dataset is result.dataset  # and the figures show the sized run
    text = _text(app.sizing_text.value)
    unit = app_widget.sizing_bounds("inlet_C")[2]
    assert f"= 31.5 {unit}" in text and f"step of 0.5 {unit}" in text
    assert "limited by the limits" in text
    assert "Pressure drop (kPa) — channels only: 1.8" in text
    assert "Pump power (W) — channels only" in text
    result.limited_by = "upper bound"
    assert "limited by the upper bound, not by a limit" in _text(app_widget.sizing_html(result, None))
    result.limited_by = "none met"
    assert "no value meets the limits" in _text(app_widget.sizing_html(result, None))
    # a design judged as a module: the figures show the whole module at the sized value
    result.module = module_dataset(cells=3)
    app.set_inputs(cells_per_plate=3)
    app.size()
    assert app.dataset is result.module and "3 cells along the coolant" in app.module_text.value


# ---------------------------------------------------------------------------------------------
# end to end on the real simulation


def test_real_single_layout_spread_not_evaluated():
    app = explorer.explore(layout="single", discharge_c_rate=2.0)
    ds = app.run()
    assert ds is not None, app.last_error
    rows = _limit_rows(_text(app.summary.value))
    spread = next(r for k, r in rows.items() if "spread" in k)
    assert "not evaluated (" in spread
    assert "every limit met" not in _text(app.summary.value)


@pytest.mark.skipif(not _module_landed(), reason="explorer.simulate_module (contracts C) not landed")
def test_real_module_run_in_the_app():
    app = explorer.explore(cells_per_plate=3, flow_L_min=0.5, limit_cell_to_cell_K=5.0)
    ds = app.run()
    assert ds is not None, app.last_error
    assert ds.sizes["cell"] == 3
    # the coolant leaving cell k is the coolant reaching cell k+1 (contracts C)
    np.testing.assert_allclose(ds["coolant_inlet"].values[1:], ds["coolant_outlet"].values[:-1])
    # heat flows from the cells into the coolant, so it only warms along the plate and the cells
    # downstream run warmer (first law; Incropera & DeWitt, Fundamentals of Heat and Mass
    # Transfer, ch. 8, mean temperature along a heated duct -- from memory)
    peaks = next(tr for tr in app.fig_module.figure.data if tr.name.startswith("peak of each"))
    assert peaks.y[-1] > peaks.y[0]
    coolant = next(tr for tr in app.fig_module.figure.data
                   if tr.name.startswith("coolant at the module's peak"))
    assert np.all(np.diff(coolant.y) > 0.0)
    assert app.cell_select.value == int(np.argmax(peaks.y))
    # no SOC field in a module result: the panel says so instead of failing
    assert "no field recorded" in app.fig_soc.figure.layout.annotations[0].text
    text = _text(app.module_text.value)
    assert "limit 5 K:" in text
    summary = _text(app.summary.value)
    assert "cell-to-cell" in summary.lower() and "the worst of the 3 cells" in summary
    heat = {tr.name: tr for tr in app.fig_heat.figure.data}
    total = next(tr for name, tr in heat.items() if name.startswith("total generated"))
    np.testing.assert_allclose(total.y, ds["heat_total"].sum("cell").values)


@pytest.mark.skipif(not _module_landed(), reason="explorer.simulate_module (contracts C) not landed")
def test_real_module_sizing_in_the_app():
    app = explorer.explore(cells_per_plate=3, size_vary="inlet_C", limit_spread_K=10.0,
                           limit_temperature_C=40.0)
    low, high, unit, step = app_widget.sizing_bounds("inlet_C")
    assert (app.inputs()["size_low"], app.inputs()["size_high"]) == (low, high)
    result = app.size()
    assert result is not None, app.last_error
    assert result.vary == "inlet_C" and low <= result.value <= high
    # the answer sits on the parameter's step (rounded in the safe direction, contracts D)
    assert abs(result.value / step - round(result.value / step)) < 1e-6
    assert app.inputs()["inlet_C"] == pytest.approx(result.value)
    assert "cell" in app.dataset.dims and app.dataset.sizes["cell"] == 3  # the module is shown
    text = _text(app.sizing_text.value)
    assert f"{result.value:.6g} {unit}" in text and f"step of {step:g} {unit}" in text
    head = app_widget._LIMITED_BY[result.limited_by][0]
    assert head in text


# ---------------------------------------------------------------------------------------------
# display details seen in a browser (driven here without one)


def test_figure_on_a_newly_shown_tab_is_refitted_to_its_width():
    # a plotly figure first drawn on a hidden tab keeps plotly's 700 px default width until the
    # browser is asked to measure again: showing the tab sends a relayout with `autosize`
    from explorer.app.live import figure_widgets_available

    if not figure_widgets_available():
        pytest.skip("plotly FigureWidget needs the anywidget package")
    app = explorer.explore()
    sent = []
    app.fig_traces.figure.observe(lambda ch: sent.append(ch["new"]), names="_py2js_relayout")
    traces_tab = app._tab_figures.index([app.fig_traces])
    for _ in range(2):  # every time the tab is shown, not only the first
        sent.clear()
        app.output_tabs.selected_index = traces_tab
        assert any(m and m["relayout_data"].get("autosize") is True for m in sent)
        app.output_tabs.selected_index = 0


def test_limit_numbers_and_units_stay_on_one_line():
    text = app_widget.limits_html(synthetic_dataset(), explorer.Limits(temperature_max_C=45.0,
                                                                       spread_K=20.0))
    for row in _limit_rows(text).values():
        numbers = row.split("</td>")[1:4]  # limit, figure, margin
        assert all("white-space:nowrap" in cell for cell in numbers)


@needs_verdicts
def test_headline_met_points_at_the_warning_of_a_cut_short_run():
    ds = synthetic_dataset()
    limits = explorer.Limits(temperature_max_C=200.0)  # invented, far above the synthetic run
    if not limits.check(ds)["warnings"]:  # no warning: a plain "every limit met"
        assert "warning below" not in app_widget.limits_html(ds, limits)
    ds.attrs.update(status="cut_short", status_message="t = 1234 s: cut short (invented)",
                    duty_step_ends=json.dumps([{"index": 0, "label": "profile",
                                                "ended_by": "safety_limit", "quantity": "voltage",
                                                "threshold": 2.7, "time_s": 1234.0}]))
    if not limits.check(ds)["met"] or not limits.check(ds)["warnings"]:
        pytest.skip("the synthetic cut-short run is not 'met with a warning' here")
    head = _text(app_widget.limits_html(ds, limits)).split("</h4>")[0]
    assert "every limit met" in head and "⚠ read with the warning below" in head


def test_sizing_answer_names_the_parameter_as_the_size_menu_does():
    result = SyntheticSizing(vary="fin_mm")
    result.value, result.unit, result.resolution, result.limited_by = 1.55, "mm", 0.05, "limits"
    result.hydraulics, result.module, result.warnings = {}, None, []
    head = _text(app_widget.sizing_html(result, None)).split("</h4>")[0]
    assert head.startswith("<h4>Fin thickness = 1.55 mm")
    assert "0 = none" not in head


def test_placeholder_text_is_cleared_from_the_browser_when_results_arrive(fake_runs):
    # the browser merges a new layout into the old one: the placeholder's "Run to see ..." text
    # must be removed explicitly when the result's figure has no annotations (the heat split)
    from explorer.app.live import figure_widgets_available

    if not figure_widgets_available():
        pytest.skip("plotly FigureWidget needs the anywidget package")
    app = explorer.explore()
    fig = app.fig_heat.figure
    assert fig.layout.annotations  # the placeholder text
    sent = []
    fig.observe(lambda ch: sent.append(ch["new"]), names="_py2js_relayout")
    app.run()
    assert not fig.layout.annotations
    assert any(m and m["relayout_data"].get("annotations") == [] for m in sent)


def test_sizing_figure_title_names_the_parameter_with_its_unit():
    result = SyntheticSizing(vary="flow_L_min")
    title = plots.sizing_figure(result).layout.title.text  # the synthetic result is feasible
    assert "(L/min) = " in title and "flow_L_min" not in title


def test_field_title_says_mean_field_and_which_cell_of_a_module():
    # the temperature picture is the through-thickness mean; the limits hold the hottest point
    # anywhere (core included), so the title must not pass for that figure
    frame = plots.field_frame(synthetic_dataset(), "temperature", 0)
    assert "— through-thickness mean, hottest " in frame["title"]
    view, _ = app_widget.cell_view(module_dataset(cells=3), 1)
    assert " s, cell 1 — " in plots.field_frame(view, "temperature", 0)["title"]
    assert ", cell" not in plots.field_frame(synthetic_dataset(), "soc", 0)["title"]


def test_comparison_axis_titles_fit_their_panels():
    # three 260 px panels: a one-line title longer than ~30 characters ran into the next panel
    fig = plots.comparison_figure({"a": synthetic_dataset(), "b": synthetic_dataset()})
    for axis in (fig.layout.yaxis, fig.layout.yaxis2, fig.layout.yaxis3):
        assert all(len(line) <= 30 for line in axis.title.text.split("<br>"))
    table = app_widget._compare_html({"a": synthetic_dataset(), "b": synthetic_dataset()})
    assert "class='pte-table'" in table  # padded columns, not run together


def test_single_layout_shows_no_field_picture(fake_runs, monkeypatch):
    # layout 'single' has one temperature over the face: a 1 x 1 "field" drew as a 1 mm square
    monkeypatch.setattr(explorer, "simulate",
                        lambda *a, progress=None, **k: synthetic_dataset(layout="single"))
    app = explorer.explore(layout="single")
    ds = app.run()
    assert ds is not None, app.last_error
    fig = app.fig_temperature.figure
    assert len(fig.data) == 0
    assert "one value over the face" in fig.layout.annotations[0].text
    app.set_time(0)  # the time slider leaves the placeholder alone
    assert len(fig.data) == 0 and app.time_label.value.startswith("t = ")


def test_compare_gives_no_difference_to_a_figure_not_evaluated():
    # a spread not evaluated (layout 'single') against an evaluated one: the second column must
    # read as its own figure, not "7.40 (not evaluated ...)"
    table = _text(app_widget._compare_html({"single": synthetic_dataset(layout="single"),
                                            "averaged": synthetic_dataset()}))
    spread_row = [r for r in table.split("<tr>") if r.startswith("<td>Largest in-cell spread")][0]
    first, second = spread_row.split("</td>")[1:3]
    assert "not evaluated" in first
    assert "not evaluated" not in second and "(" not in second


def test_single_layout_spread_is_drawn_as_a_lower_bound():
    # layout 'single' sees only the through-thickness difference; drawn beside the spread limit
    # as "in-cell spread" it passed for the figure the verdict calls not evaluated
    single, averaged = synthetic_dataset(layout="single"), synthetic_dataset()
    for ds in (single, averaged):  # the through-thickness extremes a real run records
        ds["temperature_hottest"] = ds["temperature_core_max"]
        ds["temperature_coldest"] = ds["temperature_min"]
    names = [tr.name for tr in plots.traces_figure(single).data]
    assert "in-cell spread (hottest − coldest anywhere)" not in names
    assert any("lower bound" in n for n in names)
    assert "in-cell spread (hottest − coldest anywhere)" in [
        tr.name for tr in plots.traces_figure(averaged).data]
    fig = plots.comparison_figure({"one": single, "two": averaged})
    spread = [tr for tr in fig.data if tr.yaxis == "y2"]
    assert [("lower bound" in tr.name, tr.line.dash) for tr in spread] == [(True, "dot"),
                                                                            (False, None)]


def test_traces_legend_has_room_under_the_title():
    # at notebook widths the legend wraps to two entries a row; it grew up over the title
    fig = plots.traces_figure(synthetic_dataset(), limits=explorer.Limits(temperature_max_C=45.0))
    entries = sum(1 for tr in fig.data if tr.showlegend is not False)
    assert fig.layout.margin.t >= 50 + 20 * -(-entries // 2)


def test_not_met_verdict_stays_on_one_line():
    text = app_widget.limits_html(synthetic_dataset(), explorer.Limits(temperature_max_C=0.0))
    (row,) = _limit_rows(text).values()
    assert "<span style='white-space:nowrap'><b style='color:#B2182B'>NOT met</b></span>" in row


def test_sizing_with_no_value_meeting_the_limits_says_best_evaluated():
    # "rounded in the safe direction" is only true of an answer; none met has none
    result = SyntheticSizing(vary="tim_W_mK")
    result.value, result.unit, result.resolution, result.limited_by = 8.0, "W/(m K)", 0.5, "none met"
    result.feasible, result.hydraulics, result.module, result.warnings = False, {}, None, []
    head = _text(app_widget.sizing_html(result, None)).split("</h4>")[0]
    assert head.startswith("<h4>Best evaluated: TIM conductivity = 8 W/(m K): ")
    assert "rounded" not in head and "NOT met" in head
