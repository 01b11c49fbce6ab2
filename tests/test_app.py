"""The notebook app without a browser: inputs, validation, runs, in-place figure updates, files.

The mapping checks use the real public API (cell loader, duty, cooling, Limits). Widget logic that
only needs *a* result uses the invented synthetic Dataset of tests/synthetic.py through a stand-in
for ``explorer.simulate``; one test runs the real simulation end to end.
"""

from __future__ import annotations

import html
import json

import numpy as np
import pytest
from synthetic import SyntheticSizing, synthetic_dataset

import explorer
from explorer.app import inputs as app_inputs
from explorer.app.inputs import InputsFileError, defaults, inputs_to_call, validate


@pytest.fixture
def fake_simulate(monkeypatch):
    """Replace explorer.simulate by a counter returning synthetic results (rise grows per call)."""
    calls = []

    def simulate(cell, duty, cooling=None, progress=None, **kwargs):
        calls.append({"cell": cell, "duty": duty, "cooling": cooling, **kwargs})
        if progress is not None:
            progress(10.0, 0)
        return synthetic_dataset(rise_K=10.0 + 5.0 * len(calls))

    monkeypatch.setattr(explorer, "simulate", simulate, raising=False)
    return calls


# ---------------------------------------------------------------------------------------------
# the pure mapping


def test_defaults_map_onto_the_public_api():
    call = inputs_to_call(defaults())
    assert call.cell.name and call.cell.nominal_capacity_Ah > 0
    assert call.duty.kind == "current" and call.duty.c_rate == pytest.approx(1.0)
    params = call.cooling.parameters()
    assert params["flow_L_min"] == 2.0 and params["inlet_C"] == 25.0 and params["fin_mm"] == 0.5
    assert params["tim_W_mK"] == 3.0 and params["tim_mm"] == 0.5
    nx, ny = call.simulate_kwargs.pop("grid")
    assert call.simulate_kwargs == {"electrochemistry": "spme", "layout": "averaged",
                                    "start_soc": 1.0, "start_temperature_C": 25.0}
    # coarse grid: about 200 near-square cells over the face (our own resolution choice)
    g = call.cell.geometry
    assert 150 <= nx * ny <= 250
    assert (g.width_m / nx) / (g.height_m / ny) == pytest.approx(1.0, abs=0.3)
    assert "grid" not in inputs_to_call({**defaults(), "grid": "standard"}).simulate_kwargs
    assert call.limits.temperature_max_C == 45.0 and call.limits.spread_K == 5.0
    # one hour at 1C from full (the C-rate's definition: current = C-rate x capacity; common practice)
    assert call.expected_duration_s() == pytest.approx(3600.0)


def test_other_duties_and_coolings():
    v = {**defaults(), "duty": "fast_charge", "charge_c_rate": 2.0, "charge_end_c_rate": 0.1,
         "start_soc_pct": 10.0, "cooling": "convection", "h_W_m2K": 15.0, "ambient_C": 30.0}
    call = inputs_to_call(v)
    cc, cv = call.duty
    assert cc.kind == "current" and cc.c_rate == pytest.approx(-2.0)  # negative = charge
    assert cv.kind == "voltage" and cv.end_c_rate == pytest.approx(0.1)
    assert call.cooling.parameters()["h_W_m2K"] == 15.0
    assert call.simulate_kwargs["start_soc"] == pytest.approx(0.1)
    face = inputs_to_call({**defaults(), "cooling": "face_plate", "plate_face": "both",
                           "coolant": "eg50", "tab_cooling": True, "busbar_C": 28.0})
    p = face.cooling.parameters()
    assert p["busbar_C"] == 28.0 and p["flow_L_min"] == 2.0 and "fin_mm" not in p
    nofin = inputs_to_call({**defaults(), "fin_mm": 0.0})
    assert "fin_mm" not in nofin.cooling.parameters()
    assert inputs_to_call({**defaults(), "cooling": "adiabatic"}).cooling is None


def test_profile_duty(tmp_path):
    csv = tmp_path / "drive.csv"
    csv.write_text("time [s],current [A]\n0,66\n600,-20\n900,0\n")  # invented profile
    call = inputs_to_call({**defaults(), "duty": "profile", "profile_path": str(csv)})
    assert call.duty.kind == "profile"
    assert call.expected_duration_s() is None


def test_validation_messages_name_field_value_and_expectation(tmp_path):
    errors = validate({**defaults(), "flow_L_min": -1.0, "inlet_C": "warm", "size_high": 0.1})
    assert "flow_L_min" in errors and "> 0" in errors["flow_L_min"] and "-1" in errors["flow_L_min"]
    assert "inlet_C" in errors and "'warm'" in errors["inlet_C"]
    # inputs that do not apply are not checked (convection h while an edge plate is chosen)
    assert "h_W_m2K" not in validate({**defaults(), "h_W_m2K": -5.0})
    assert "h_W_m2K" in validate({**defaults(), "cooling": "convection", "h_W_m2K": -5.0})
    e = validate({**defaults(), "size_low": 3.0, "size_high": 1.0})
    assert "size_high" in e
    # a limit at or below the coolant inlet can never be met: heat flows only from hot to cold
    # (second law; Incropera & DeWitt, Fundamentals of Heat and Mass Transfer, ch. 1, from memory)
    # the error stands next to the inlet that causes it, not on the Limits tab
    e = validate({**defaults(), "limit_temperature_C": 20.0, "inlet_C": 25.0})
    assert "limit_temperature_C" not in e and "inlet_C" in e
    assert "25" in e["inlet_C"] and "20" in e["inlet_C"]
    e = validate({**defaults(), "cell": str(tmp_path / "nope.toml")})
    assert "cell" in e and "nope.toml" in e["cell"]
    e = validate({**defaults(), "duty": "profile", "profile_path": str(tmp_path / "x.csv")})
    assert "profile_path" in e and "x.csv" in e["profile_path"]
    with pytest.raises(app_inputs.InputsError) as info:
        inputs_to_call({**defaults(), "flow_L_min": 0.0})
    assert "flow_L_min" in str(info.value) and "Coolant flow" in str(info.value)


def test_inputs_file_round_trip(tmp_path):
    """The inputs that apply come back from the scenario file (the others take defaults)."""
    values = {**defaults(), "cooling": "face_plate", "flow_L_min": 3.5, "tab_cooling": True,
              "cell": "van_nmc_66ah", "electrochemistry": "spm"}
    path = app_inputs.save_inputs(values, tmp_path / "s.toml")
    back = app_inputs.load_inputs(path)
    assert {k: v for k, v in back.items() if app_inputs.applies(k, back)} == \
        {k: v for k, v in values.items() if app_inputs.applies(k, values)}
    assert sorted(p.name for p in tmp_path.iterdir()) == ["s.toml"]  # atomic, no leftovers


def test_inputs_file_errors(tmp_path):
    p = tmp_path / "bad.json"
    p.write_text(json.dumps({"format": app_inputs.FILE_FORMAT, "version": 1,
                             "inputs": {"flow_lmin": 2.0, "flow_L_min": -3.0}}))
    with pytest.raises(InputsFileError) as info:
        app_inputs.load_inputs(p)
    text = str(info.value)
    assert "bad.json" in text and "inputs.flow_lmin" in text and "inputs.flow_L_min" in text
    assert "-3" in text
    p.write_text('{"format": "something else"}')
    with pytest.raises(InputsFileError, match="`format`"):
        app_inputs.load_inputs(p)
    t = tmp_path / "broken.toml"
    t.write_text('format = "x\n')
    with pytest.raises(InputsFileError, match="broken.toml: not valid TOML"):
        app_inputs.load_inputs(t)
    with pytest.raises(InputsFileError, match="not found"):
        app_inputs.load_inputs(tmp_path / "none.toml")
    with pytest.raises(InputsFileError, match="ending in .toml"):
        app_inputs.save_inputs(defaults(), tmp_path / "s.yaml")


# ---------------------------------------------------------------------------------------------
# the widget


def test_explore_is_a_displayable_widget():
    import ipywidgets

    app = explorer.explore()
    assert isinstance(app, ipywidgets.VBox)
    assert app.dataset is None and app.errors == {}
    assert not app.run_button.disabled
    footer = app.children[-1].value
    assert explorer.results.CAUTION in footer
    # widgets' JSON state is what a notebook front end receives
    assert app.get_state()["children"]


def test_bad_input_shows_inline_error_and_does_not_run(fake_simulate):
    app = explorer.explore()
    app.set_inputs(flow_L_min="-2")
    assert "flow_L_min" in app.errors
    assert "> 0" in html.unescape(app.rows["flow_L_min"].error.value)
    assert app.run_button.disabled
    # the status names the field and its tab, and the tab holding the error is flagged
    assert "Coolant flow (Cooling)" in app.status.value
    assert app.input_tabs.get_title(1) == "⚠ Cooling" and app.input_tabs.get_title(0) == "Cell and duty"
    assert app.run() is None and fake_simulate == []
    assert "flow_L_min" in app.last_error
    # typing a good value clears the error and enables the button
    app.rows["flow_L_min"].control.value = "1.5"
    assert app.errors == {} and app.rows["flow_L_min"].error.value == ""
    assert not app.run_button.disabled
    # a field that does not apply is hidden
    assert app.rows["h_W_m2K"].box.layout.display == "none"
    app.set_inputs(cooling="convection")
    assert app.rows["h_W_m2K"].box.layout.display is None
    assert app.rows["flow_L_min"].box.layout.display == "none"


def test_run_updates_figures_in_place_and_matches_the_dataset(fake_simulate):
    app = explorer.explore(flow_L_min=1.5)
    fig = app.fig_temperature.figure
    ds = app.run()
    assert ds is not None and app.dataset is ds and len(fake_simulate) == 1
    assert fake_simulate[0]["cooling"].parameters()["flow_L_min"] == 1.5
    k = app.time_slider.value
    assert k == int(np.argmax(ds["temperature_max"].values)) and app.time_slider.max == ds.sizes["time"] - 1
    np.testing.assert_allclose(np.asarray(fig.data[0].z), ds["temperature"].isel(time=k).values)
    # the traces panel draws the mean field's hottest point (whatever its label says)
    same = [tr for tr in app.fig_traces.figure.data
            if tr.y is not None and len(tr.y) == ds.sizes["time"]
            and np.allclose(tr.y, ds["temperature_max"].values)]
    assert same and all("hottest" in tr.name for tr in same)
    heatmap = fig.data[0]
    # slider move: same figure, same trace object, new data
    app.time_slider.value = 3
    assert app.fig_temperature.figure is fig and fig.data[0] is heatmap
    np.testing.assert_allclose(np.asarray(fig.data[0].z), ds["temperature"].isel(time=3).values)
    # the other tabs follow the time when shown (tests/test_app_play.py: not before)
    app.output_tabs.selected_index = app._tab_figures.index([app.fig_soc, app.fig_heat_flux])
    np.testing.assert_allclose(np.asarray(app.fig_heat_flux.figure.data[0].z),
                               ds["heat_flux"].isel(time=3).values)
    # the synthetic run's SOC is one value over the face: explained, not drawn as a flat colour
    assert "one value over the face" in app.fig_soc.figure.layout.annotations[0].text
    app.output_tabs.selected_index = app._tab_figures.index([app.fig_traces])
    marker = [s for s in app.fig_traces.figure.layout.shapes if s.name == "time marker"]
    assert marker and marker[0].x0 == pytest.approx(float(ds["time"].values[3]) / 60.0)
    # a second run changes the data of the same figure objects
    ds2 = app.run()
    assert app.fig_temperature.figure is fig
    assert float(ds2["temperature"].max()) > float(ds["temperature"].max())
    np.testing.assert_allclose(np.asarray(fig.data[0].z),
                               ds2["temperature"].isel(time=app.time_slider.value).values)
    assert "Peak temperature" in app.summary.value and "margin" in app.summary.value
    assert app.progress.value == 1.0 and "done" in app.status.value


def test_failed_run_shows_reason_and_keeps_previous(monkeypatch, fake_simulate):
    app = explorer.explore()
    first = app.run()

    def failing(*args, **kwargs):
        raise explorer.validators.InputError("simulate: the rod step failed at t = 12 s (invented)")

    monkeypatch.setattr(explorer, "simulate", failing)
    assert app.run() is None
    assert app.dataset is first and "rod step failed" in app.last_error
    assert "previous results" in app.status.value

    def failed_status(*args, **kwargs):
        ds = synthetic_dataset(status="failed")
        ds.attrs["status_message"] = "solver did not converge (invented)"
        return ds

    monkeypatch.setattr(explorer, "simulate", failed_status)
    assert app.run() is None and app.dataset is first
    assert "did not converge" in app.last_error


def test_background_run(fake_simulate):
    app = explorer.explore()
    app.start()
    app.wait(30)
    assert app.dataset is not None and len(fake_simulate) == 1
    assert not app.run_button.disabled


def test_pin_and_compare(fake_simulate):
    app = explorer.explore()
    with pytest.raises(ValueError, match="run first"):
        app.pin("nothing")
    app.run()
    app.pin("baseline")
    app.set_inputs(flow_L_min=4.0)
    app.run()
    app.scenario_name.value = "more flow"
    app.pin()
    assert list(app.pinned) == ["baseline", "more flow"]
    names = {tr.name for tr in app.fig_compare.figure.data}
    assert names == {"baseline", "more flow"}
    assert "more flow (Δ to first)" in app.compare_table.value
    assert app.pinned["more flow"][1]["flow_L_min"] == 4.0
    app.clear_pins()
    assert not app.pinned


def test_files_from_the_app(tmp_path, fake_simulate):
    app = explorer.explore(flow_L_min=3.0, cooling="edge_plate")
    path = app.save_inputs(tmp_path / "s.toml")
    other = explorer.explore()
    other.load_inputs(path)
    assert other.inputs()["flow_L_min"] == 3.0
    with pytest.raises(ValueError, match="run first"):
        app.export_report(tmp_path / "r.html")
    app.run()
    report = app.export_report(tmp_path / "r.html")
    text = html.unescape(report.read_text(encoding="utf-8"))
    assert explorer.results.CAUTION in text and "flow_L_min" in text
    # the file buttons report errors inline, never as a traceback
    app.file_path.value = str(tmp_path / "missing_dir" / "x.toml")
    app.file_buttons["Load inputs"].click()
    assert "not found" in app.file_status.value


def test_save_results_netcdf(tmp_path, fake_simulate):
    app = explorer.explore()
    app.run()
    nc = app.save_results(tmp_path / "run.nc")
    back = explorer.open_results(nc)
    np.testing.assert_allclose(back["temperature"].values, app.dataset["temperature"].values)


class _Sized(SyntheticSizing):
    """The synthetic sizing answer with the fields of explorer.sizing.SizingResult the app shows."""

    def __init__(self, vary="flow_L_min"):
        super().__init__(vary=vary)
        self.unit, self.resolution, self.limited_by = "L/min", 0.05, "limits"
        self.warnings, self.module, self.hydraulics = [], None, {}


def test_sizing_tab(monkeypatch, fake_simulate):
    seen = {}

    def size_cooling(cell, duty, cooling, vary, bounds, limits, **kwargs):
        seen.update(vary=vary, bounds=bounds, limits=limits, kwargs=kwargs)
        return _Sized()

    monkeypatch.setattr(explorer, "size_cooling", size_cooling, raising=False)
    app = explorer.explore(size_vary="flow_L_min", size_low=0.5, size_high=4.0)
    result = app.size()
    assert result is app.sizing and seen["vary"] == "flow_L_min" and seen["bounds"] == (0.5, 4.0)
    assert seen["limits"].temperature_max_C == 45.0
    assert callable(seen["kwargs"]["progress"])  # the app follows the sizing runs
    design = [tr for tr in app.fig_sizing.figure.data if tr.name == "design point"]
    assert design[0].x[0] == pytest.approx(result.value)
    assert app.dataset is result.dataset
    app.set_inputs(cooling="adiabatic")
    assert app.size_button.disabled


# ---------------------------------------------------------------------------------------------
# end to end on the real simulation (SPMe, averaged, coarse grid)


def test_real_run_and_sizing_end_to_end():
    app = explorer.explore(discharge_c_rate=2.0, fin_mm=1.0, size_vary="fin_mm", size_low=0.2,
                           size_high=3.0)
    app.check_fidelity = False  # the fuller-model check is seen in the browser test
    ds = app.run()
    assert ds is not None, app.last_error
    assert ds.attrs["status"] == "completed" and ds.attrs["layout"] == "averaged"
    k = app.time_slider.value
    np.testing.assert_allclose(np.asarray(app.fig_temperature.figure.data[0].z),
                               ds["temperature"].isel(time=k).values)
    figures = explorer.results.key_figures(ds)
    assert f"{figures['peak_temperature_C']:.2f}" in app.summary.value
    result = app.size()
    assert result is not None, app.last_error
    curve = [tr for tr in app.fig_sizing.figure.data if tr.name.startswith("hottest point")][0]
    order = np.argsort(result.curve["value"].values)
    np.testing.assert_allclose(curve.x, result.curve["value"].values[order])
    np.testing.assert_allclose(curve.y, result.curve["temperature_max_C"].values[order])
    assert result.vary == "fin_mm" and "fin thickness" in app.sizing_text.value
    assert "_C " not in app.sizing_text.value  # no raw identifiers such as temperature_max_C


def test_fidelity_check_and_messages_in_words():
    from explorer.app.widget import fidelity_html, human_text

    ds = synthetic_dataset()
    assert fidelity_html(ds) == ""  # no check made on this run
    row = {"variant": "dfn", "figure": "peak_temperature", "label": "peak temperature",
           "unit": "degC", "as_run": 44.0, "fuller": 44.6, "difference": 0.6, "margin": 1.0,
           "could_flip": False}
    ds.attrs["fidelity_summary"] = json.dumps({
        "rows": [row], "verdict_could_flip": "no", "variants": ["as run", "dfn"], "skipped": [],
        "message": "smallest margin +1 on `temperature_max_C`: the verdict would not flip"})
    text = fidelity_html(ds)
    assert "dfn" in text and "peak temperature" in text and "<table" in text
    assert "temperature_max_C" not in text and "hottest point anywhere" in text
    message = human_text("no value of `flow_L_min` meets: temperature_max_C 74.2 degC, "
                         "spread_K 32.9 K")
    assert message == ("no value of coolant flow meets: hottest point anywhere 74.2 °C, "
                       "in-cell spread 32.9 K")


def test_cell_picker_lists_demo_cells_and_cell_files_and_takes_a_cell_object(tmp_path,
                                                                             monkeypatch):
    demo = explorer.cell.list_demo_cells()
    source = next(iter(demo.values()))
    (tmp_path / "my_cell.toml").write_text(source.read_text())
    (tmp_path / "scenario.toml").write_text("[scenario]\nname = 'x'\n")  # not a cell file
    monkeypatch.chdir(tmp_path)
    app = explorer.explore()
    picker = app.rows["cell"].control
    values = [v for _, v in picker.menu.options]
    assert set(demo) <= set(values) and "my_cell.toml" in values
    assert "scenario.toml" not in values
    picker.menu.value = "my_cell.toml"
    assert app.inputs()["cell"] == "my_cell.toml" and "cell" not in app.errors
    picker.menu.value = ""  # another file: the path box
    picker.path.value = str(tmp_path / "missing.toml")
    assert "missing.toml" in app.errors["cell"]
    built = explorer.load_cell(next(iter(demo)))
    app.set_inputs(cell=built)
    assert app.inputs()["cell"] is built and "cell" not in app.errors
    assert inputs_to_call(app.inputs()).cell is built
