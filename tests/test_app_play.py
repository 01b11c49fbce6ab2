"""Playing a run in the app: only the figures of the shown tab follow the time.

Driven without a browser, as a front end would: the output tab is chosen by setting the ``Tab``'s
``selected_index`` and the time by setting the slider's value. The results are the invented
synthetic Dataset (tests/synthetic.py) through test_app's stand-in for ``explorer.simulate``; one
test runs the real simulation on the app's coarse default grid. What is compared is wiring (the
figure shows the Dataset's values at the slider's time), so the values are compared with the
Dataset itself, not with any reference.
"""

from __future__ import annotations

import numpy as np
import pytest
import test_app
import test_app_verdicts

import explorer

fake_simulate = test_app.fake_simulate  # stand-in runs: rise 15 K, then 20 K ... (invented)
fake_runs = test_app_verdicts.fake_runs  # the same with a module run


def _select(app, title: str) -> None:
    """Show the output tab titled ``title`` (as a click on it does)."""
    titles = [app.output_tabs.get_title(k) for k in range(len(app.output_tabs.children))]
    app.output_tabs.selected_index = titles.index(title)


def _z(live) -> np.ndarray:
    return np.array(live.figure.data[0].z, dtype=float)


def _marker_x(app) -> float:
    xs = {s.x0 for s in app.fig_traces.figure.layout.shapes if s.name == "time marker"}
    assert len(xs) == 1, xs  # one marker, drawn on every panel of the traces
    return xs.pop()


def _minutes(ds, index: int) -> float:
    """The traces' time axis for the synthetic hour-long run is in minutes."""
    return float(ds["time"].values[index]) / 60.0


def _shows(live, ds, variable: str, index: int) -> bool:
    return np.allclose(_z(live), ds[variable].isel(time=index).values)


def test_the_time_moves_the_shown_tab_only(fake_simulate):
    app = explorer.explore()
    ds = app.run()
    assert app.output_tabs.get_title(app.output_tabs.selected_index) == "Temperature"  # default
    peak = app.time_slider.value
    assert _shows(app.fig_heat_flux, ds, "heat_flux", peak)
    assert _marker_x(app) == pytest.approx(_minutes(ds, peak))
    flux_updates, traces_updates = app.fig_heat_flux.updates, app.fig_traces.updates

    app.time_slider.value = 3
    assert _shows(app.fig_temperature, ds, "temperature", 3)
    assert "(4 of 41)" in app.time_label.value
    # hidden tabs: not touched at all
    assert app.fig_heat_flux.updates == flux_updates and app.fig_traces.updates == traces_updates
    assert _shows(app.fig_heat_flux, ds, "heat_flux", peak)
    assert _marker_x(app) == pytest.approx(_minutes(ds, peak))

    # shown: brought to the current time at once, in one update
    _select(app, "Traces")
    assert _marker_x(app) == pytest.approx(_minutes(ds, 3))
    assert app.fig_traces.updates == traces_updates + 1
    # now the traces follow and the temperature map waits
    app.time_slider.value = 7
    assert _marker_x(app) == pytest.approx(_minutes(ds, 7))
    assert _shows(app.fig_temperature, ds, "temperature", 3)
    _select(app, "SOC and heat")
    assert _shows(app.fig_heat_flux, ds, "heat_flux", 7)
    assert app.fig_heat_flux.updates == flux_updates + 1
    _select(app, "Temperature")
    assert _shows(app.fig_temperature, ds, "temperature", 7)
    # showing a tab again at the same time changes nothing
    before = app.fig_temperature.updates
    _select(app, "Summary")
    _select(app, "Temperature")
    assert app.fig_temperature.updates == before


def test_play_on_one_tab_then_switch(fake_simulate):
    app = explorer.explore()
    ds = app.run()
    app.play_interval_s = 0.0
    app.time_slider.value = 0
    traces_updates = app.fig_traces.updates
    temperature_updates = app.fig_temperature.updates
    app.play.value = True  # plays to the end in its thread, then stops
    app._play_thread.join(30)
    last = ds.sizes["time"] - 1
    assert not app.play.value and app.time_slider.value == last
    assert app.fig_temperature.updates > temperature_updates + 1  # several pictures shown
    assert _shows(app.fig_temperature, ds, "temperature", last)
    assert app.fig_traces.updates == traces_updates
    _select(app, "Traces")
    assert _marker_x(app) == pytest.approx(_minutes(ds, last))


def test_a_new_run_colours_and_a_picked_cell_reach_every_tab(fake_simulate):
    app = explorer.explore()
    first = app.run()
    app.time_slider.value = 2  # the hidden tabs stay at the peak
    second = app.run()  # hotter (the stand-in's rise grows per run)
    peak = app.time_slider.value
    assert float(second["temperature"].max()) > float(first["temperature"].max())
    assert _shows(app.fig_temperature, second, "temperature", peak)
    assert _shows(app.fig_heat_flux, second, "heat_flux", peak)
    assert _marker_x(app) == pytest.approx(_minutes(second, peak))
    hottest = [tr for tr in app.fig_traces.figure.data
               if tr.y is not None and np.allclose(tr.y, second["temperature_max"].values)]
    assert hottest
    # a colour range over the whole run reaches the hidden SOC-and-heat tab too
    app.color_mode.value = "run"
    flux = app.fig_heat_flux.figure.data[0]
    values = second["heat_flux"].values
    assert flux.zmin <= float(values.min()) and flux.zmax >= float(values.max())
    # and the time still waits for the tab to be shown
    app.time_slider.value = 5
    assert _shows(app.fig_heat_flux, second, "heat_flux", peak)
    _select(app, "SOC and heat")
    assert _shows(app.fig_heat_flux, second, "heat_flux", 5)
    assert flux.zmax >= float(values.max())  # still the run's range


def test_a_cell_picked_in_the_module_tab_reaches_the_hidden_maps(fake_runs):
    app = explorer.explore(cells_per_plate=4)
    ds = app.run()
    _select(app, "Module")
    app.time_slider.value = 4  # no time-tied figure on the Module tab
    app.cell_select.value = 0  # the maps open on that cell's own peak
    view, k = ds.isel(cell=0), app.time_slider.value
    assert _shows(app.fig_temperature, view, "temperature", k)
    assert _shows(app.fig_heat_flux, view, "heat_flux", k)
    assert _marker_x(app) == pytest.approx(_minutes(view, k))


def test_real_run_plays_on_the_shown_tab():
    # the app's default inputs (SPMe, averaged layout, coarse grid), one hour at 1C
    app = explorer.explore()
    ds = app.run()
    assert ds is not None, app.last_error
    n = ds.sizes["time"]
    marker = _marker_x(app)
    app.time_slider.value = n // 3
    assert _shows(app.fig_temperature, ds, "temperature", n // 3)
    assert _marker_x(app) == marker
    _select(app, "Traces")
    assert _marker_x(app) != marker
    _select(app, "Temperature")
