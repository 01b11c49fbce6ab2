"""The notebook app: inputs on top, run controls, live figures in tabs, scenarios, files, caution.

:class:`ExplorerApp` is an ``ipywidgets.VBox``; display it in a notebook cell. It calls only the
public API through :mod:`explorer.app.inputs`. In a notebook the Run button works in a background
thread; :meth:`ExplorerApp.run` runs the current inputs now and blocks (for scripts and tests).

Verdicts come from ``explorer.Limits.check``: each limit is "met", "NOT met" or "not evaluated"
(with the reason), labelled with the figure that governs it, and the run's warnings (a duty cut
short) stand beside them. When several cells share the plate's coolant the run is the whole module
(``explorer.simulate_module``); the Module tab shows it and the other tabs show one of its cells.

The time slider and the play button move only the figures of the shown output tab (the field maps,
the traces' time marker); a tab's figures are brought to the current time when it is shown. A new
run, a picked cell and the colour range reach every tab at once.

Under the verdicts (Summary tab) "Check against fuller models" runs ``explorer.check_fidelity`` on
the run shown: the DFN, a grid of rods and a doubled grid, one change at a time, within a
wall-time cap (60 s by default, the box beside the button), and says whether a verdict could flip.
The check is stored on the run it checked (``explorer.fidelity.attach``), so it is shown, saved
and reported with that run only; a new run shows no check until it is checked.
"""

from __future__ import annotations

import html
import logging
import threading
import time
from collections import OrderedDict
from pathlib import Path

import ipywidgets as widgets
import numpy as np
import traitlets

from explorer import plots
from explorer.app import inputs as app_inputs
from explorer.app.inputs import FIELDS, SIZE_CHOICES, applies, inputs_to_call, validate
from explorer.app.live import LiveFigure, _in_kernel

logger = logging.getLogger(__name__)

__all__ = ["ExplorerApp", "cell_view", "fidelity_check_html", "limits_html", "module_html",
           "sizing_bounds", "sizing_html"]

_GROUPS = ("Cell and duty", "Cooling", "Model", "Limits")
_PANELS = ("Summary", "Temperature", "SOC and heat", "Traces", "Heat split", "Module", "Compare",
           "Sizing")
_ERROR_STYLE = "color:#B2182B;font-size:0.9em;white-space:pre-wrap"
_TIME_MARKER = "time marker"
DEFER_PREPARE: bool | None = None  # None: in a notebook kernel only (the benchmark sets True)
_NO_RUN_TO_CHECK = ("<span style='color:#555'>Run first: the check re-runs the run shown on the "
                    "fuller models</span>")
_NOT_RUN_HERE = ("<span style='color:#555'>results not run in this app (from a file) cannot be "
                 "checked here: run their inputs to check them</span>")
_FIELD_WIDTH_PX = 900  # the width the field maps are sized for (their height follows the cell)
FIDELITY_CAP_S = 60  # default wall-time cap of the app's fidelity check: long enough for the
# fuller models of a coarse-grid run (about 1 s on the defaults), short enough not to hold up a notebook


def _results():
    from explorer import results

    return results


def _esc(text) -> str:
    return html.escape(str(text), quote=False)


class _Row:
    """One input: label, control and the inline error next to it."""

    def __init__(self, name: str, f: app_inputs.Field, demo_cells: list[str]):
        self.name = name
        self.field = f
        unit = f" ({f.unit})" if f.unit else ""
        self.label = widgets.HTML(f"{_esc(f.label)}{_esc(unit)}",
                                  layout=widgets.Layout(width="210px"))
        style = {"description_width": "0px"}
        lay = widgets.Layout(width="240px")
        if f.kind == "number":
            self.control = widgets.Text(value=_fmt(f.default), continuous_update=True,
                                        layout=lay, style=style)
        elif f.kind == "choice":
            self.control = widgets.Dropdown(options=[(lab, val) for val, lab in f.choices],
                                            value=f.default, layout=lay, style=style)
        elif f.kind == "flag":
            self.control = widgets.Checkbox(value=bool(f.default), indent=False,
                                            layout=widgets.Layout(width="240px"))
        elif name == "cell":
            self.control = _CellPicker(demo_cells, str(f.default))
        else:
            self.control = widgets.Text(value=str(f.default), continuous_update=True,
                                        placeholder=f.help, layout=lay, style=style)
        if f.help:
            # on the picker's menu: a box with a tooltip fails to draw in ipywidgets 8's front end
            getattr(self.control, "menu", self.control).tooltip = f.help
        self.error = widgets.HTML("", layout=widgets.Layout(width="auto"))
        self.error.add_class("pte-error")
        self.box = widgets.HBox([self.label, self.control, self.error],
                                layout=widgets.Layout(align_items="center"))
        self.box.add_class(f"pte-row-{name}")

    def get(self):
        value = self.control.value
        if self.field.kind == "number":
            try:
                return float(value)
            except (TypeError, ValueError):
                return value  # validation reports it
        return value

    def set(self, value) -> None:
        if self.name == "cell":
            self.control.set(value)
        elif self.field.kind == "number":
            self.control.value = _fmt(value)
        elif self.field.kind == "flag":
            self.control.value = bool(value)
        else:
            self.control.value = value

    def show_error(self, message: str | None) -> None:
        self.error.value = f"<span style='{_ERROR_STYLE}'>⚠ {_esc(message)}</span>" if message else ""

    def visible(self, on: bool) -> None:
        self.box.layout.display = None if on else "none"


class _CellPicker(widgets.HBox):
    """The cell input: a menu of the demo cells and the cell files in the working folder, and a
    path box for any other cell file; ``value`` is the name, the path or a built Cell object."""

    value = traitlets.Any(allow_none=True)
    _OTHER = ""
    _OBJECT = "__cell_object__"

    def __init__(self, demo_cells, default: str):
        self._object = None
        options = [(f"{n} (demo, invented)", n) for n in demo_cells]
        options += [(f"{p.name} (this folder)", p.name) for p in app_inputs.cell_files(".")]
        options.append(("another cell file: its path →", self._OTHER))
        self.menu = widgets.Dropdown(options=options, layout=widgets.Layout(width="240px"))
        self.path = widgets.Text(placeholder="path of a cell .toml file",
                                 continuous_update=False, layout=widgets.Layout(width="240px"))
        self.menu.add_class("pte-cell-menu")
        self.path.add_class("pte-cell-path")
        super().__init__([self.menu, self.path])
        self.set(default)
        self.menu.observe(lambda ch: self._changed(), names="value")
        self.path.observe(lambda ch: self._changed(), names="value")

    def _changed(self) -> None:
        choice = self.menu.value
        self.path.layout.display = None if choice == self._OTHER else "none"
        if choice == self._OBJECT:
            self.value = self._object
        elif choice == self._OTHER:
            self.value = self.path.value.strip()
        else:
            self.value = choice

    def set(self, value) -> None:
        values = [v for _, v in self.menu.options]
        if app_inputs.is_cell(value):
            self._object = value
            label = f"{getattr(value, 'name', 'cell')} (built in Python)"
            options = [o for o in self.menu.options if o[1] != self._OBJECT]
            self.menu.options = [(label, self._OBJECT), *options]
            self.menu.value = self._OBJECT
        elif isinstance(value, str) and value in values and value != self._OTHER:
            self.menu.value = value
        else:
            self.menu.value = self._OTHER
            self.path.value = "" if value is None else str(value)
        self._changed()


def _fmt(value) -> str:
    if isinstance(value, float) and value.is_integer() and abs(value) < 1e15:
        return f"{value:.1f}"
    return str(value)


class ExplorerApp(widgets.VBox):
    """The notebook app (see the module docstring).

    Attributes
    ----------
    dataset : xarray.Dataset or None
        The last successful result.
    errors : dict
        Field name -> message of the current inputs (empty when the inputs are valid).
    last_error : str or None
        Why the last run, sizing or fidelity check failed (None after a success).
    pinned : OrderedDict
        Scenario name -> (Dataset, inputs) of the pinned runs.
    sizing : object or None
        The last result of :func:`explorer.size_cooling`.
    fidelity : xarray.Dataset or None
        The last :func:`explorer.check_fidelity` of the run shown (None after a new run).
    """

    def __init__(self, **initial):
        from explorer.cell import list_demo_cells

        try:
            demo = sorted(list_demo_cells())
        except (OSError, ValueError):  # no bundled cells: the user types a path
            demo = []
        self.dataset = None
        self.inputs_used: dict | None = None
        self.errors: dict[str, str] = {}
        self.last_error: str | None = None
        self.pinned: OrderedDict = OrderedDict()
        self.sizing = None
        self._limits = None
        self._cell = None  # the Cell object of the last run (its tabs outline the field maps)
        self._field_drawn: dict[str, bool] = {}
        self.check_fidelity = True  # the Sizing tab checks its answer on the fuller models
        self.runs_done = 0
        self._thread: threading.Thread | None = None
        self._suspend = False
        self._input_errors_shown = False
        self._busy = False
        self._time_index = 0
        self._marker_shape: list[int] = []
        # the time each time-tied figure shows: a figure on a hidden tab is left where it was
        # while the time moves, and brought to the current time when its tab is shown
        self._figure_time: dict[LiveFigure, int] = {}
        self._time_lock = threading.RLock()  # the play thread against tab switches and new runs
        self._time_follows_hidden_tabs = False  # the old path (every tab follows), for the bench

        self.rows = {name: _Row(name, f, demo) for name, f in FIELDS.items()}
        if "cell" in self.rows and demo and FIELDS["cell"].default not in demo:
            self.rows["cell"].set(demo[0])

        # run controls
        self.run_button = widgets.Button(description="Run", button_style="primary", icon="play",
                                         tooltip="run the current inputs")
        self.progress = widgets.FloatProgress(value=0.0, min=0.0, max=1.0,
                                              layout=widgets.Layout(width="260px"))
        self.status = widgets.HTML("")
        self.status.add_class("pte-status")
        self.run_button.add_class("pte-run")
        self.run_button.on_click(lambda _: self.start())

        # time controls shared by the field figures; the slider is made anew for each run's
        # number of samples (a slider created with another maximum sends End to a stale end)
        self.time_slider = self._new_slider(0)
        self._retired_slider = None
        self.play = widgets.ToggleButton(value=False, description="play", icon="play",
                                         tooltip="play the run in time; press again to pause",
                                         layout=widgets.Layout(width="90px"))
        self.play.add_class("pte-play")
        self.play.observe(lambda ch: self._play_toggled(ch["new"]), names="value")
        self.play_interval_s = 0.1
        self._play_thread: threading.Thread | None = None
        self.time_label = widgets.HTML("")
        self.time_label.add_class("pte-time-label")
        self.color_mode = widgets.Dropdown(
            options=[("fit each time", "frame"), ("fit the run", "run"),
                     ("same for pinned runs", "pinned")], value="frame",
            description="colours", layout=widgets.Layout(width="250px"),
            style={"description_width": "55px"},
            tooltip="colour range of the field maps: each picture's own spread, the whole run, or "
                    "one range over the pinned runs and this one (to compare them)")
        self.color_mode.add_class("pte-color-mode")
        self.color_mode.observe(lambda ch: self._colors_changed(), names="value")

        # figures: built after the app is on screen (``_prepare``); the tabs say so meanwhile
        self._ready = threading.Event()
        self._prepare_lock = threading.Lock()
        self._checked_files = False  # the first full validation loads the cell and the coolant
        self.prepare_s: float | None = None
        self.fig_temperature = self.fig_soc = self.fig_heat_flux = self.fig_traces = None
        self.fig_heat = self.fig_compare = self.fig_sizing = self.fig_module = None
        self.summary = widgets.HTML("")
        self.compare_table = widgets.HTML("")
        self.sizing_text = widgets.HTML("")
        self.sizing_text.add_class("pte-sizing-text")
        self.module_text = widgets.HTML("")
        self.cell_select = widgets.Dropdown(options=[], description="cell shown in the other tabs",
                                            style={"description_width": "initial"},
                                            layout=widgets.Layout(width="340px", display="none"))
        self.cell_select.observe(lambda ch: self._select_cell(ch["new"]), names="value")
        self._view = None  # the single-cell Dataset the field, trace and heat figures show

        # scenarios and files
        self.scenario_name = widgets.Text(value="", placeholder="scenario name",
                                          layout=widgets.Layout(width="220px"))
        self.pin_button = widgets.Button(description="Pin run", icon="thumb-tack",
                                         tooltip="keep the last run as a named scenario")
        self.clear_button = widgets.Button(description="Clear pins", icon="trash")
        self.pin_button.on_click(lambda _: self._guard(self.pin))
        self.pin_button.add_class("pte-pin")
        self.scenario_name.add_class("pte-scenario-name")
        self.clear_button.on_click(lambda _: self._guard(self.clear_pins))
        self.file_path = widgets.Text(value="scenario.toml", layout=widgets.Layout(width="300px"),
                                      placeholder="file path")
        buttons = {
            "Save inputs": lambda: self.save_inputs(self.file_path.value),
            "Load inputs": lambda: self.load_inputs(self.file_path.value),
            "Save results (.nc)": lambda: self.save_results(_with_suffix(self.file_path.value, ".nc")),
            "Export report (.html)": lambda: self.export_report(
                _with_suffix(self.file_path.value, ".html")),
        }
        self.file_buttons = {}
        for text, action in buttons.items():
            b = widgets.Button(description=text, layout=widgets.Layout(width="170px"))
            b.on_click(lambda _, a=action: self._guard(a))
            b.add_class("pte-" + text.split(" (")[0].lower().replace(" ", "-"))
            self.file_buttons[text] = b
        self.file_status = widgets.HTML("")
        self.file_status.add_class("pte-file-status")
        self.file_path.add_class("pte-file-path")

        # sizing controls (their inputs live in the Sizing tab)
        self.size_button = widgets.Button(description="Size", icon="sliders",
                                          tooltip="find the design value that meets the limits")
        self.size_button.add_class("pte-size")
        self.size_button.on_click(lambda _: self.start_sizing())

        # the fidelity check of the run shown (Summary tab, under its verdicts)
        self.fidelity = None  # the Dataset of the last check of the run shown
        self._check_base = None  # the app's run the check re-runs (None: no run of the app shown)
        self.fidelity_button = widgets.Button(
            description="Check against fuller models", icon="search", disabled=True,
            layout=widgets.Layout(width="250px"),
            tooltip="re-run the run shown with the DFN, a grid of rods and a doubled grid, one "
                    "change at a time: could a verdict flip?")
        self.fidelity_button.add_class("pte-check-fidelity")
        self.fidelity_button.on_click(lambda _: self.start_check())
        self.fidelity_cap = widgets.BoundedIntText(
            value=FIDELITY_CAP_S, min=5, max=3600, description="wall-time cap (s)",
            style={"description_width": "initial"}, layout=widgets.Layout(width="190px"),
            tooltip="a fuller model that would not finish within this is stopped and listed")
        self.fidelity_cap.add_class("pte-fidelity-cap")
        # beside the button: why it is off, or why the check failed
        self.fidelity_note = widgets.HTML(_NO_RUN_TO_CHECK)
        self.fidelity_note.add_class("pte-fidelity-note")
        self.fidelity_result = widgets.HTML("")
        self.fidelity_result.add_class("pte-fidelity-result")
        self._fidelity_box = widgets.VBox([
            widgets.HBox([self.fidelity_button, self.fidelity_cap, self.fidelity_note],
                         layout=widgets.Layout(align_items="center", margin="0.8em 0 0 0")),
            self.fidelity_result])
        self._fidelity_box.add_class("pte-fidelity-box")

        for row in self.rows.values():
            row.control.observe(self._on_change, names="value")
        self.rows["size_vary"].control.observe(lambda ch: self._vary_changed(), names="value")

        super().__init__(children=self._layout(), layout=widgets.Layout(width="100%"))
        self.add_class("pte-app")
        if "size_low" not in initial and "size_high" not in initial:
            self._apply_size_defaults(initial.get("size_vary", FIELDS["size_vary"].default))
        if initial:
            self.set_inputs(**initial)
        else:
            self._on_change()
        if DEFER_PREPARE if DEFER_PREPARE is not None else _in_kernel():
            # show the app now; the figures and the model load behind it
            self._preparing(0.05, "preparing the figures and the model (first use in this "
                                  "kernel) …")
            threading.Thread(target=self._prepare, name="explorer-app-prepare",
                             daemon=True).start()
        else:  # a script or a test: ready when explore() returns
            self._prepare()

    # -----------------------------------------------------------------------------------------
    # layout

    def _layout(self):
        caution = _esc(_results().CAUTION)
        header = widgets.HTML("<h3 style='margin:0.2em 0'>Pouch Thermal Explorer</h3>"
                              "<span style='color:#555'>heat, temperature and SOC over the face of a "
                              "pouch cell, and cooling sized against your limits</span>")
        groups = []
        for group in _GROUPS:
            rows = [r.box for r in self.rows.values() if r.field.group == group]
            groups.append(widgets.VBox(rows))
        self.input_tabs = widgets.Tab(children=groups)
        self.input_tabs.add_class("pte-inputs")
        for k, group in enumerate(_GROUPS):
            self.input_tabs.set_title(k, group)
        run_row = widgets.HBox([self.run_button, self.progress, self.status],
                               layout=widgets.Layout(align_items="center"))
        time_row = widgets.HBox([self.play, self.time_slider, self.time_label, self.color_mode],
                                layout=widgets.Layout(align_items="center"))
        self._time_row = time_row
        time_row.add_class("pte-time")
        self._panels = {name: widgets.VBox([widgets.HTML(
            "<p style='color:#777;margin:1em'>preparing the figures …</p>")])
            for name in _PANELS}
        self.output_tabs = widgets.Tab(children=list(self._panels.values()))
        for k, name in enumerate(self._panels):
            self.output_tabs.set_title(k, name)
        self._tab_figures: list[list] = [[] for _ in _PANELS]
        self.output_tabs.observe(lambda ch: self._tab_changed(ch["new"]), names="selected_index")
        self.output_tabs.selected_index = 1
        scenario_row = widgets.HBox([self.scenario_name, self.pin_button, self.clear_button])
        file_row = widgets.HBox([self.file_path, *self.file_buttons.values()])
        footer = widgets.HTML(f"<div style='border-top:1px solid #ccc;margin-top:0.8em;padding-top:"
                              f"0.4em;color:#333;font-size:0.9em'><b>Caution.</b> {caution}</div>")
        return [header, self.input_tabs, run_row, time_row, self.output_tabs, scenario_row,
                file_row, self.file_status, footer]

    def _build_figures(self) -> None:
        """Create the live figures and put them in their tabs (the heavy part of opening)."""
        self.fig_temperature = LiveFigure("Run to see the temperature field", height=460)
        self.fig_soc = LiveFigure("Run to see the SOC field", height=380)
        self.fig_heat_flux = LiveFigure("Run to see the heat generation field", height=380)
        self.fig_traces = LiveFigure("Run to see voltage, current and temperatures", height=760)
        self.fig_heat = LiveFigure("Run to see the heat split", height=440)
        self.fig_compare = LiveFigure("Pin two or more runs to compare them", height=640)
        self.fig_sizing = LiveFigure("Size the cooling to see the curve", height=520)
        self.fig_sizing.widget.add_class("pte-sizing-figure")
        self.fig_module = LiveFigure("Run with more than one cell sharing the coolant (Cooling tab) "
                                     "to see the module", height=820)
        sizing_rows = [r.box for r in self.rows.values() if r.field.group == "Sizing"]
        contents = {
            "Summary": ([self.summary, self._fidelity_box], []),
            "Temperature": ([self.fig_temperature.widget], [self.fig_temperature]),
            "SOC and heat": ([self.fig_soc.widget, self.fig_heat_flux.widget],
                             [self.fig_soc, self.fig_heat_flux]),
            "Traces": ([self.fig_traces.widget], [self.fig_traces]),
            "Heat split": ([self.fig_heat.widget], [self.fig_heat]),
            "Module": ([self.module_text, self.cell_select, self.fig_module.widget],
                       [self.fig_module]),
            "Compare": ([self.compare_table, self.fig_compare.widget], [self.fig_compare]),
            "Sizing": ([*sizing_rows, self.size_button, self.sizing_text, self.fig_sizing.widget],
                       [self.fig_sizing]),
        }
        for k, name in enumerate(_PANELS):
            children, figures = contents[name]
            self._panels[name].children = children
            self._tab_figures[k] = figures
        self._tab_changed(self.output_tabs.selected_index)

    def _preparing(self, fraction: float, text: str) -> None:
        self.progress.bar_style = "info"
        self.progress.value = fraction
        self.status.value = f"<span style='color:#555'>{_esc(text)}</span>"

    def _prepare(self) -> None:
        """Build the figures, check the inputs in full (loading the cell and the coolant) and
        load the simulation code; run once, in the background in a notebook."""
        with self._prepare_lock:
            if self._ready.is_set():
                return
            t0 = time.perf_counter()
            try:
                self._build_figures()
                self._preparing(0.5, "loading the cell and the coolant …")
                self._checked_files = True
                self._on_change()
                if not self.errors:  # warm: cell, coolant properties, solver, figure code
                    call = inputs_to_call(self.inputs())
                    if DEFER_PREPARE or _in_kernel():  # a user waits for the first click
                        self._preparing(0.7, "loading the simulation code …")
                        _warm_up(call)
            except Exception as exc:  # the app's boundary: say why, keep the app usable
                logger.debug("preparing the app failed", exc_info=True)
                self.status.value = (f"<span style='{_ERROR_STYLE}'>preparing the app failed: "
                                     f"{_esc(exc)}</span>")
            else:
                if not self._busy and not self.errors:
                    self.status.value = "ready: press Run"
                self.progress.value = 0.0
            finally:
                self.prepare_s = time.perf_counter() - t0
                self._ready.set()
                self.add_class("pte-ready")

    def _ensure_ready(self) -> None:
        if not self._ready.is_set():
            self._prepare()

    def _tab_changed(self, selected) -> None:
        """Show the figures of tab ``selected`` (brought to the current time first, in one
        update each) and mark the others hidden."""
        with self._time_lock:
            shown = self._tab_figures[selected] if selected is not None else []
            self._follow_time(shown)  # while still hidden: a plain figure is drawn once, below
            for k, figures in enumerate(self._tab_figures):
                for live in figures:
                    live.show(k == selected)
                    if k == selected:
                        _refit(live)

    # -----------------------------------------------------------------------------------------
    # inputs

    def inputs(self) -> dict:
        """The current inputs (numbers as floats where they parse)."""
        return {name: row.get() for name, row in self.rows.items()}

    def set_inputs(self, **values) -> None:
        """Set inputs by name (as if typed), then validate once."""
        unknown = sorted(set(values) - set(self.rows))
        if unknown:
            raise ValueError(f"ExplorerApp.set_inputs: unknown input(s) {unknown}; expected names "
                             f"from {', '.join(self.rows)}")
        self._suspend = True
        try:
            for name, value in values.items():
                self.rows[name].set(value)
        finally:
            self._suspend = False
        if "size_vary" in values and "size_low" not in values and "size_high" not in values:
            self._apply_size_defaults(values["size_vary"])
        self._on_change()

    def _on_change(self, change=None) -> None:
        if self._suspend:
            return
        values = self.inputs()
        for name, row in self.rows.items():
            row.visible(applies(name, values))
        self._update_size_menu(values)
        self._size_units(self.rows["size_vary"].get())
        # until the app is prepared, the quick checks only (the cell file and the coolant load then)
        self.errors = validate(self.inputs(), check_files=self._checked_files,
                               check_design=self._checked_files)
        for name, row in self.rows.items():
            row.show_error(self.errors.get(name))
        busy = self._busy
        self.run_button.disabled = bool(self.errors) or busy
        self.size_button.disabled = bool(self.errors) or busy or not SIZE_CHOICES[values["cooling"]]
        self._fidelity_controls()
        for k, group in enumerate(_GROUPS):  # flag the input tabs that hold an error
            bad = any(self.rows[n].field.group == group for n in self.errors if n in self.rows)
            self.input_tabs.set_title(k, f"⚠ {group}" if bad else group)
        if self.errors:
            where = ", ".join(f"{self.rows[n].field.label} ({self.rows[n].field.group})"
                              for n in self.errors if n in self.rows)
            self.status.value = (f"<span style='{_ERROR_STYLE}'>to fix before a run: "
                                 f"{_esc(where)}</span>")
            self._input_errors_shown = True
        elif self._input_errors_shown and not busy:
            self.status.value = ""
            self._input_errors_shown = False

    def _update_size_menu(self, values) -> None:
        allowed = SIZE_CHOICES.get(values["cooling"], ())
        control = self.rows["size_vary"].control
        options = [(lab, val) for val, lab in FIELDS["size_vary"].choices if val in allowed]
        if values["cooling"] == "edge_plate" or not options:
            options = options or [(lab, val) for val, lab in FIELDS["size_vary"].choices]
        if [o[1] for o in control.options] != [o[1] for o in options]:
            current = control.value
            self._suspend = True
            try:
                control.options = options
                control.value = current if current in [o[1] for o in options] else options[0][1]
            finally:
                self._suspend = False
            if control.value != current:
                self._apply_size_defaults(control.value)

    def _vary_changed(self) -> None:
        if not self._suspend:  # typed by the user; set_inputs and the menu handle their own
            self._apply_size_defaults(self.rows["size_vary"].get())
            self._on_change()

    def _apply_size_defaults(self, name: str) -> None:
        """Put the varied parameter's default bounds into the `from`/`to` fields."""
        low, high, _, _ = sizing_bounds(name)
        suspended, self._suspend = self._suspend, True
        try:
            self.rows["size_low"].set(low)
            self.rows["size_high"].set(high)
        finally:
            self._suspend = suspended
        self._size_units(name)

    def _size_units(self, name: str) -> None:
        unit = sizing_bounds(name)[2]
        for key in ("size_low", "size_high"):
            text = f"{_esc(FIELDS[key].label)}{f' ({_esc(unit)})' if unit else ''}"
            if self.rows[key].label.value != text:
                self.rows[key].label.value = text

    # -----------------------------------------------------------------------------------------
    # running

    def start(self) -> None:
        """Run the current inputs in a background thread (the Run button)."""
        if self._busy:
            return
        self._busy = True  # set before the thread starts so a second click is ignored
        self._thread = threading.Thread(target=self.run, name="explorer-app-run", daemon=True)
        self._thread.start()

    def wait(self, timeout: float | None = None) -> None:
        """Wait for a background run, sizing or fidelity check to finish."""
        if self._thread is not None:
            self._thread.join(timeout)

    def run(self):
        """Run the current inputs now (blocking); return the Dataset, or None when it did not run.

        Invalid inputs do not run (their errors are shown next to the fields). A run that raises
        or ends with status "failed" shows its reason and keeps the previous results.
        """
        self._ensure_ready()
        values = self._valid_inputs()
        if values is None:
            return None
        self._busy = True
        self.run_button.disabled = True
        self.size_button.disabled = self.fidelity_button.disabled = True
        t0 = time.perf_counter()
        try:
            call = inputs_to_call(values)
            expected = call.expected_duration_s()
            self.progress.value = 0.0
            self.progress.bar_style = "info"
            last = [0.0]

            def progress(t_s, step_index=0):
                now = time.perf_counter()
                if now - last[0] < 0.1:
                    return
                last[0] = now
                if expected:
                    self.progress.value = min(0.99, float(t_s) / expected)
                self.status.value = (f"running · simulated {float(t_s):.0f} s · elapsed "
                                     f"{now - t0:.1f} s")

            self.status.value = "running …"
            ds = call.run(progress=progress)
        except Exception as exc:  # the app's boundary: show why, keep the previous results
            logger.debug("run failed", exc_info=True)
            self._failed(f"{type(exc).__name__}: {exc}" if not isinstance(exc, ValueError) else str(exc))
            return None
        finally:
            self._busy = False
            self._on_change()
        elapsed = time.perf_counter() - t0
        status = str(ds.attrs.get("status", "completed"))
        if status == "failed":
            self._failed(str(ds.attrs.get("status_message", "the run failed")))
            return None
        self.last_error = None
        self._limits = call.limits
        self._cell = call.cell
        self.inputs_used = _portable(values)
        self._check_base = ds  # the check re-runs this run (show() forgets it for another one)
        self.show(ds)
        self.progress.value = 1.0
        self.progress.bar_style = "success" if status == "completed" else "warning"
        note = "" if status == "completed" else f" — {status}: {ds.attrs.get('status_message', '')}"
        self.runs_done += 1
        self.status.value = f"run {self.runs_done} done in {elapsed:.1f} s{_esc(note)}"
        return ds

    def _failed(self, reason: str) -> None:
        self.last_error = reason
        self.progress.bar_style = "danger"
        keep = " — showing the previous results" if self.dataset is not None else ""
        self.status.value = f"<span style='{_ERROR_STYLE}'>run failed: {_esc(reason)}{keep}</span>"

    def _guard(self, action) -> None:
        """Run a button's action and show its error (never a traceback in the notebook)."""
        try:
            message = action()
        except Exception as exc:  # the app's boundary
            logger.debug("action failed", exc_info=True)
            self.file_status.value = f"<span style='{_ERROR_STYLE}'>{_esc(exc)}</span>"
        else:
            if isinstance(message, str):
                self.file_status.value = _esc(message)
            elif isinstance(message, Path):
                self.file_status.value = f"wrote {_esc(message)}"

    # -----------------------------------------------------------------------------------------
    # showing a result

    def show(self, ds) -> None:
        """Show ``ds`` in every panel (figures updated in place) and make it the current result.

        A module result (dimension ``cell``) fills the Module tab; the other tabs show its hottest
        cell (another can be picked in the Module tab). Results read from a file saved light
        (fields on their own ``field_time``) are shown at the stored field times.
        """
        from explorer.results import field_view

        self._ensure_ready()
        if ds is not self._check_base:  # not the app's run: the check has no inputs to re-run
            self._check_base = None
        self.fidelity = None
        self._show_fidelity(ds)
        ds = field_view(ds)
        self.dataset = ds
        view, cell = cell_view(ds)
        self._show_module(ds, cell)
        self._show_view(view)

    def _show_module(self, ds, cell) -> None:
        if cell is None:
            self.cell_select.layout.display = "none"
            self.module_text.value = ("<p style='color:#555'>One cell was run. Set more than one cell "
                                      "sharing the coolant (Cooling tab) to run the module along "
                                      "the plate.</p>")
            if not self.fig_module.empty:  # an earlier module must not pass for this run
                _replace(self.fig_module, _placeholder("the last run was one cell",
                                                     self.fig_module.figure.layout.height))
            return
        _replace(self.fig_module, plots.module_figure(ds, limits=self._limits))
        self.module_text.value = module_html(ds, self._limits)
        options = [(f"cell {c}" + (" (the hottest)" if k == cell else ""), k)
                   for k, c in enumerate(ds["cell"].values)]
        suspended, self._suspend = self._suspend, True
        try:
            self.cell_select.options = options
            self.cell_select.value = cell
        finally:
            self._suspend = suspended
        self.cell_select.layout.display = None

    def _select_cell(self, k) -> None:
        if self._suspend or k is None or self.dataset is None or "cell" not in self.dataset.dims:
            return
        self._show_view(cell_view(self.dataset, int(k))[0])

    def _show_view(self, ds) -> None:
        """Fill the single-cell panels (fields, traces, heat, summary) from ``ds``: every tab,
        hidden ones too, at the time it opens on."""
        with self._time_lock:
            self._fill_view(ds)

    def _fill_view(self, ds) -> None:
        self._view = ds
        n = int(ds.sizes["time"])
        hottest = "temperature_hottest" if "temperature_hottest" in ds else "temperature_max"
        index = int(np.nanargmax(ds[hottest].values)) if n else 0  # open at the peak
        self._show_fields(ds, index)
        traces = plots.traces_figure(ds, limits=self._limits)
        _, _, divisor = plots.time_axis(ds)
        t0 = float(ds["time"].values[index]) / divisor
        traces.add_vline(x=t0, line=dict(color="#555", width=1), row="all", col=1,
                         name=_TIME_MARKER)
        self._marker_shape = [k for k, s in enumerate(traces.layout.shapes) if s.name == _TIME_MARKER]
        _replace(self.fig_traces, traces)
        self._figure_time[self.fig_traces] = index
        heat = plots.heat_split_figure(heat_view(self.dataset))
        if "cell" in self.dataset.dims:
            heat.update_layout(title_text=f"Heat generation by source, whole module "
                                          f"({self.dataset.sizes['cell']} cells)")
        _replace(self.fig_heat, heat)
        self.summary.value = self._summary_html(ds, self.dataset)
        self.play.value = False
        if self.time_slider.max != max(0, n - 1):
            self._replace_slider(n, index)
        self._time_index = -1
        if self.time_slider.value == index:
            self.set_time(index)
        else:
            self.time_slider.value = index  # triggers set_time

    # -----------------------------------------------------------------------------------------
    # time and colours

    def _new_slider(self, n: int, index: int = 0):
        slider = widgets.IntSlider(value=index, min=0, max=max(0, n - 1), description="time step",
                                   continuous_update=True, layout=widgets.Layout(width="420px"))
        slider.observe(lambda ch: self.set_time(ch["new"]), names="value")
        return slider

    def _replace_slider(self, n: int, index: int) -> None:
        old = self.time_slider
        self.time_slider = self._new_slider(n, index)
        children = list(self._time_row.children)
        children[children.index(old)] = self.time_slider
        self._time_row.children = children
        # closed one replacement later: closing it now can reach the browser before the row's
        # new children, which then asks for a view of a closed model
        if self._retired_slider is not None:
            self._retired_slider.close()
        self._retired_slider = old

    def _play_toggled(self, on: bool) -> None:
        self.play.icon = "pause" if on else "play"
        self.play.description = "pause" if on else "play"
        if on and (self._play_thread is None or not self._play_thread.is_alive()):
            self._play_thread = threading.Thread(target=self._play_loop, name="explorer-app-play",
                                                 daemon=True)
            self._play_thread.start()

    def _play_loop(self) -> None:
        """Step the time slider while play is on: about 60 pictures per run, from the start when
        at the end; pausing keeps the time shown."""
        try:
            last = self.time_slider.max
            step = max(1, round(last / 60))
            if self.time_slider.value >= last:
                self.time_slider.value = 0
            while self.play.value and self._view is not None:
                t0 = time.perf_counter()
                nxt = min(last, self.time_slider.value + step)
                self.time_slider.value = nxt
                if nxt >= last:
                    break
                time.sleep(max(0.0, self.play_interval_s - (time.perf_counter() - t0)))
        finally:
            self.play.value = False

    def _color_range(self, variable: str):
        mode = self.color_mode.value
        if mode == "pinned" and self._view is not None:
            runs = [cell_view(ds)[0] for ds, _ in self.pinned.values()] + [self._view]
            return plots.color_range(runs, variable)
        return mode if mode in ("frame", "run") else "frame"

    def _colors_changed(self) -> None:
        if self._view is None:
            return
        with self._time_lock:  # a colour range reaches the maps of every tab
            self._show_fields(self._view, max(self._time_index, 0))
            self._time_index = -1
            self.set_time(self.time_slider.value)

    def _show_fields(self, ds, index: int) -> None:
        """Draw the three field maps of ``ds`` at time ``index`` (a uniform SOC is explained,
        not drawn as one flat colour)."""
        self._field_drawn = {}
        # the app's last cell outlines only its own results; results loaded from a file (or
        # another cell's) draw the face the file records
        cell = (self._cell if self._cell is not None
                and getattr(self._cell, "sha256", None) == ds.attrs.get("cell_sha256") else None)
        for live, variable in self._field_figures():
            label = plots.FIELDS[variable][0]
            drawn = False
            if _has_field(ds, variable) and variable == "soc" and plots.field_is_uniform(ds, "soc"):
                source = _placeholder(
                    f"{label}: one value over the face in the {ds.attrs.get('layout', '')} layout "
                    "(one averaged rod), so no map;<br>its value is on the Traces tab. Choose "
                    "the layout 'grid of rods' (Model tab) to see it vary over the face.",
                    live.figure.layout.height)
            elif _has_field(ds, variable):
                source = plots.field_figure(ds, variable, index=index, animate=False,
                                            color_range=self._color_range(variable),
                                            cell=cell, width_px=_FIELD_WIDTH_PX)
                drawn = True
            elif variable in ds:  # layout 'single': one value, not a 1 mm square of colour
                source = _placeholder(f"{label}: one value over the face (layout 'single'); no "
                                      "field to show", live.figure.layout.height)
            else:  # a module run keeps only each cell's mean SOC
                source = _placeholder(f"{label}: no field recorded for this run",
                                      live.figure.layout.height)
            _replace(live, source)
            self._field_drawn[variable] = drawn
            self._figure_time[live] = index

    def _field_figures(self):
        return ((self.fig_temperature, "temperature"), (self.fig_soc, "soc"),
                (self.fig_heat_flux, "heat_flux"))

    def set_time(self, index: int) -> None:
        """Move to time ``index``: the time label, and the field pictures and the traces' time
        marker on the visible tab, in place. Figures on hidden tabs keep their time until their
        tab is shown (:meth:`_tab_changed`), so playing costs only what the engineer sees."""
        ds = self._view
        if ds is None:
            return
        index = int(np.clip(index, 0, ds.sizes["time"] - 1))
        with self._time_lock:
            if index == self._time_index or ds is not self._view:
                return
            self._time_index = index
            figures = [live for live, _ in self._time_figures()]
            if not self._time_follows_hidden_tabs:
                figures = [live for live in figures if live.visible]
            self._follow_time(figures)
            t = float(ds["time"].values[index])
            self.time_label.value = f"t = {t:.0f} s ({index + 1} of {ds.sizes['time']})"

    def _time_figures(self):
        """``(figure, move)`` for every figure tied to the time: the field maps drawn as maps
        and the traces with their time marker; ``move(index)`` updates the figure in place."""
        out = [(live, lambda k, live=live, v=variable: self._move_field(live, v, k))
               for live, variable in self._field_figures() if self._field_drawn.get(variable)]
        if self._marker_shape:
            out.append((self.fig_traces, self._move_marker))
        return out

    def _follow_time(self, figures) -> None:
        """Bring the time-tied ones of ``figures`` to the current time (each at most once)."""
        index = self._time_index
        if self._view is None or index < 0:
            return
        wanted = {id(live) for live in figures}
        for live, move in self._time_figures():
            if id(live) in wanted and self._figure_time.get(live) != index:
                move(index)
                self._figure_time[live] = index

    def _move_field(self, live, variable: str, index: int) -> None:
        frame = plots.field_frame(self._view, variable, index,
                                  color_range=self._color_range(variable))
        fig = live.figure
        spot = plots.spot_annotation(frame, plots.FIELDS[variable][1])
        with fig.batch_update():
            fig.data[0].z = frame["z"]
            fig.data[0].zmin, fig.data[0].zmax = frame["zmin"], frame["zmax"]
            fig.layout.annotations[0].update(x=spot["x"], y=spot["y"], ay=spot["ay"],
                                             text=spot["text"])
            fig.layout.title.text = frame["title"]
        live.refresh()

    def _move_marker(self, index: int) -> None:
        _, _, divisor = plots.time_axis(self._view)
        x = float(self._view["time"].values[index]) / divisor
        fig = self.fig_traces.figure
        with fig.batch_update():
            for k in self._marker_shape:
                fig.layout.shapes[k].x0 = x
                fig.layout.shapes[k].x1 = x
        self.fig_traces.refresh()

    def _summary_html(self, ds, whole) -> str:
        """Key figures and verdicts of the whole result ``whole`` (a module: its worst cell);
        ``ds`` is the cell the figures show."""
        from explorer.report import format_figure

        figures = _results().key_figures(whole)
        rows = "".join(f"<tr><td>{_esc(label)}</td><td style='text-align:right'>{_esc(text)}</td></tr>"
                       for label, text in (format_figure(k, v) for k, v in figures.items()))
        checks = limits_html(whole, self._limits) if self._limits is not None else ""
        hyd = hydraulics_html(whole)
        if hyd:
            checks += f"<h4>Cold plate hydraulics</h4>{hyd}"
        which = ""
        if "cell" in whole.dims:
            which = (f" — the worst of the {whole.sizes['cell']} cells sharing the coolant "
                     f"(the figures show cell {_esc(ds['cell'].values)}; Module tab for all)")
        status = ds.attrs.get("status", "")
        return (f"<style>.pte-sum td,.pte-sum th{{padding:1px 10px;line-height:1.35}}</style>"
                f"<p><b>{_esc(whole.attrs.get('cell_name', ''))}</b> · "
                f"{_esc(str(ds.attrs.get('electrochemistry', '')).upper())} · "
                f"{_esc(ds.attrs.get('layout', ''))} · status {_esc(status)}: "
                f"{_esc(ds.attrs.get('status_message', ''))}</p>"
                "<div class='pte-sum' style='display:flex;gap:3em;flex-wrap:wrap'>"
                f"<div><h4>Key figures{which}</h4><table>{rows}</table></div>"
                f"<div>{checks}</div></div>")

    # -----------------------------------------------------------------------------------------
    # scenarios

    def pin(self, name: str | None = None) -> str:
        """Keep the last run as a named scenario and refresh the comparison."""
        if self.dataset is None:
            raise ValueError("Pin run: there is no result yet; run first")
        name = (name or self.scenario_name.value or "").strip() or f"scenario {len(self.pinned) + 1}"
        self.pinned[name] = (self.dataset, dict(self.inputs_used or {}))
        self.scenario_name.value = ""
        self._refresh_compare()
        return f"pinned {name!r} ({len(self.pinned)} pinned)"

    def clear_pins(self) -> str:
        self.pinned.clear()
        self._refresh_compare()
        return "pins cleared"

    def _refresh_compare(self) -> None:
        if not self.pinned:
            self.compare_table.value = ""
            return
        named = {name: ds for name, (ds, _) in self.pinned.items()}
        views = {name: cell_view(ds)[0] for name, ds in named.items()}  # a module: its hottest
        _replace(self.fig_compare, plots.comparison_figure(views, limits=self._limits))
        self.compare_table.value = _compare_html(named)

    # -----------------------------------------------------------------------------------------
    # sizing

    def start_sizing(self) -> None:
        if self._busy:
            return
        self._busy = True
        self._thread = threading.Thread(target=self.size, name="explorer-app-size", daemon=True)
        self._thread.start()

    def _valid_inputs(self):
        """The current inputs, or None (with the reason in ``last_error``) while any is invalid."""
        self._on_change()
        if self.errors:
            self.last_error = "inputs invalid: " + "; ".join(f"{k}: {v}" for k, v in self.errors.items())
            self._busy = False
            self._on_change()
            return None
        return self.inputs()

    def size(self):
        """Size the current design for the chosen parameter (blocking); return the result or None."""
        self._ensure_ready()
        values = self._valid_inputs()
        if values is None:
            return None
        t0 = time.perf_counter()
        self._busy = True
        self.run_button.disabled = self.size_button.disabled = True
        self.fidelity_button.disabled = True
        self.status.value = f"sizing {values['size_vary']} …"
        self.progress.bar_style = "info"
        runs = [0, -1.0, 0.0]  # runs started, last simulated time, last status update

        def progress(t_s, step_index=0):
            # one simulate call per evaluated value: time restarting from zero means a new run
            if float(t_s) < runs[1]:
                runs[0] += 1
            runs[1] = float(t_s)
            now = time.perf_counter()
            if now - runs[2] >= 0.1:
                runs[2] = now
                self.status.value = (f"sizing {values['size_vary']} · run {runs[0] + 1} · elapsed "
                                     f"{now - t0:.1f} s")

        try:
            call = inputs_to_call(values)
            # the answer is checked on the fuller models (DFN, grid of rods, finer grid)
            result = call.size(values["size_vary"], (float(values["size_low"]),
                                                     float(values["size_high"])), progress=progress,
                               check_fidelity=self.check_fidelity)
        except Exception as exc:  # the app's boundary
            logger.debug("sizing failed", exc_info=True)
            self.last_error = str(exc)
            self.sizing_text.value = f"<pre style='{_ERROR_STYLE}'>{_esc(exc)}</pre>"
            self.status.value = f"<span style='{_ERROR_STYLE}'>sizing failed</span>"
            return None
        finally:
            self._busy = False
            self._on_change()
        self.last_error = None
        self.sizing = result
        self._limits = call.limits
        self._cell = call.cell
        _replace(self.fig_sizing, plots.sizing_figure(result, limits=call.limits))
        self.sizing_text.value = sizing_html(result, call.limits)
        self.status.value = f"sized in {time.perf_counter() - t0:.1f} s"
        run = sized_run(result)
        if run is not None:
            vary = values["size_vary"]
            sized = float(f"{float(result.value):.10g}")  # no float noise in the input box
            self.inputs_used = _portable({**values, vary: sized})
            self.set_inputs(**{vary: sized})  # Run now repeats the sized design
            self._check_base = run
            self.show(run)
        return result

    # -----------------------------------------------------------------------------------------
    # how far to trust the run shown: the fuller models

    def _fidelity_controls(self) -> None:
        """The Check button: enabled when the app's own run is shown and nothing is busy."""
        self.fidelity_button.disabled = self._busy or self._check_base is None

    def _show_fidelity(self, ds) -> None:
        """The check ``ds`` carries (made here, by the sizing, or read from its file), or none."""
        from explorer import fidelity

        summary = fidelity.from_attrs(ds)
        self.fidelity_result.value = "" if not summary else fidelity_check_html(summary)
        self.fidelity_note.value = "" if self._check_base is not None else _NOT_RUN_HERE
        self._fidelity_controls()

    def start_check(self) -> None:
        """Check the run shown against the fuller models in a background thread (the button)."""
        if self._busy or self._check_base is None:
            return
        self._busy = True
        self._thread = threading.Thread(target=self.check, name="explorer-app-check", daemon=True)
        self._thread.start()

    def check(self, max_wall_s: float | None = None):
        """Check the run shown against the fuller models now (blocking): ``explorer.check_fidelity``
        on the inputs it was run with, within ``max_wall_s`` (default: the cap box). Return the
        check's Dataset, or None when there is no run to check or the check failed (the reason
        beside the button and in ``last_error``)."""
        base = self._check_base
        if base is None or self.inputs_used is None:
            self._busy = False
            self._fidelity_controls()
            return None
        cap = float(self.fidelity_cap.value if max_wall_s is None else max_wall_s)
        self._busy = True
        self.run_button.disabled = self.size_button.disabled = True
        self.fidelity_button.disabled = True
        self.fidelity_note.value = ""
        self.progress.value = 0.0
        self.progress.bar_style = "info"
        t0, last = time.perf_counter(), [0.0]

        def progress(variant, fraction):
            now = time.perf_counter()
            if now - last[0] < 0.1:
                return
            last[0] = now
            self.progress.value = min(0.99, float(fraction))
            self.status.value = (f"checking against the fuller models · {_esc(variant)} "
                                 f"{float(fraction):.0%} · elapsed {now - t0:.1f} s of at most "
                                 f"{cap:g} s")

        self.status.value = f"checking against the fuller models (at most {cap:g} s) …"
        try:
            # the inputs the run was made with, on the very cell object it ran (not re-read)
            call = inputs_to_call({**self.inputs_used, "cell": self._cell})
            fid = call.check_fidelity(base=base, max_wall_s=cap, progress=progress)
        except Exception as exc:  # the app's boundary: say why beside the button
            logger.debug("fidelity check failed", exc_info=True)
            reason = str(exc) if isinstance(exc, ValueError) else f"{type(exc).__name__}: {exc}"
            self.last_error = reason
            self.progress.bar_style = "danger"
            self.fidelity_note.value = (f"<span style='{_ERROR_STYLE}'>check failed: "
                                        f"{_esc(reason)}</span>")
            self.status.value = f"<span style='{_ERROR_STYLE}'>fidelity check failed</span>"
            return None
        finally:
            self._busy = False
            self._on_change()
        if self._check_base is not base:  # another result was shown meanwhile: not its check
            self.status.value = "fidelity check dropped: another result is shown now"
            return None
        from explorer import fidelity

        self.last_error = None
        fidelity.attach(base, fid)  # kept with the run: saved, pinned and reported with it
        self.fidelity = fid
        self.fidelity_result.value = fidelity_check_html(fidelity.summary(fid))
        flip = fid.attrs.get("verdict_could_flip", "not evaluated")
        self.progress.value = 1.0
        self.progress.bar_style = {"yes": "danger", "no": "success"}.get(flip, "warning")
        self.status.value = (f"checked against the fuller models in {time.perf_counter() - t0:.1f}"
                             f" s: verdict could flip: {_esc(flip)} (Summary tab)")
        return fid

    # -----------------------------------------------------------------------------------------
    # files

    def save_inputs(self, path) -> Path:
        """Write the current inputs to a .json or .toml scenario file."""
        values = self.inputs()
        if app_inputs.is_cell(values["cell"]):
            source = getattr(values["cell"], "source_path", None)
            if not source:
                raise ValueError("Save inputs: the cell was built in Python and has no file; "
                                 "write it to a cell file first and pick that file")
            values["cell"] = str(source)
        return app_inputs.save_inputs(values, path)

    def load_inputs(self, path) -> str:
        """Read a scenario file and set the inputs from it."""
        values = app_inputs.load_inputs(path)
        self.set_inputs(**values)
        return f"loaded inputs from {path}"

    def save_results(self, path) -> Path:
        """Write the last result to netCDF (``explorer.results.save``)."""
        if self.dataset is None:
            raise ValueError("Save results: there is no result yet; run first")
        return _results().save(self.dataset, path)

    def export_report(self, path) -> Path:
        """Write the HTML report: the pinned scenarios (or the last run), with the sizing if any."""
        from explorer.report import write_report

        if self.pinned:
            runs = {name: ds for name, (ds, _) in self.pinned.items()}
            inputs = [inp for _, inp in self.pinned.values()]
        elif self.dataset is not None:
            runs, inputs = self.dataset, self.inputs_used
        else:
            raise ValueError("Export report: there is no result yet; run first")
        return write_report(runs, path, inputs=inputs, limits=self._limits, sizing=self.sizing,
                            title="Pouch Thermal Explorer — notebook app report")

    def __repr__(self) -> str:
        state = "no result" if self.dataset is None else \
            f"last run {self.dataset.attrs.get('cell_name', '')} ({self.dataset.attrs.get('status')})"
        return f"<ExplorerApp: {state}, {len(self.pinned)} pinned>"


def _portable(values: dict) -> dict:
    """The inputs as a report or a pinned scenario records them: a Cell object built in Python
    is named by its file, else by its name."""
    cell = values.get("cell")
    if app_inputs.is_cell(cell):
        values = {**values, "cell": str(getattr(cell, "source_path", None) or cell.name)}
    return values


def _warm_up(call) -> None:
    """A 30 s rest with the current inputs, drawn into throw-away figures: loads the code and
    caches a first run needs (solver set-up, array modules, plotly's validators) so that the
    first Run click is quick."""
    import explorer
    from explorer import duty

    ds = explorer.simulate(call.cell, duty.rest(30.0), call.cooling, **call.simulate_kwargs)
    for variable in ("temperature", "soc", "heat_flux"):
        if _has_field(ds, variable):
            plots.field_figure(ds, variable, animate=False)
    plots.traces_figure(ds, limits=call.limits)
    plots.heat_split_figure(ds)
    _results().key_figures(ds)


def _has_field(ds, variable: str) -> bool:
    """Whether ``ds`` holds ``variable`` as a field over the face (more than one point)."""
    return variable in ds and ds.sizes.get("x", 1) * ds.sizes.get("y", 1) > 1


def _replace(live, source) -> None:
    """``live.replace(source)``, first clearing the annotations and shapes ``source`` lacks.

    A figure widget swapped for one with other traces gets the new layout as a relayout, which
    merges: a key the new layout lacks keeps its old value in the browser (the placeholder's
    "Run to see ..." text stayed over the heat split).
    """
    if getattr(live, "native", False):
        layout = live.figure.layout
        for key in ("annotations", "shapes"):
            if layout[key] and not source.layout[key]:
                layout[key] = ()
    live.replace(source)


def _refit(live) -> None:
    """Make a shown figure widget take its tab's width again.

    A plotly figure drawn while its tab is hidden has no width to read and keeps plotly's 700 px
    default; a relayout with ``autosize`` makes the browser measure the now visible tab (the
    first assignment clears it so the second is always sent).
    """
    if not getattr(live, "native", False):
        return  # a plain figure is redrawn into its visible Output, at the right width
    layout = live.figure.layout
    layout.autosize = None
    layout.autosize = True


def _with_suffix(path: str, suffix: str) -> str:
    p = Path(path.strip() or "scenario")
    return str(p.with_suffix(suffix))


def _compare_html(named: dict) -> str:
    from explorer.report import format_figure

    results = _results()
    names = list(named)
    figs = {n: results.key_figures(ds) for n, ds in named.items()}
    head = "<tr><th>figure</th>" + "".join(
        f"<th>{_esc(n)}{'' if k == 0 else ' (Δ to first)'}</th>" for k, n in enumerate(names)) + "</tr>"
    rows = []
    for key, base in figs[names[0]].items():
        if key == "status":
            continue
        label, text = format_figure(key, base)
        cells = [f"<td>{_esc(label)}</td><td style='text-align:right'>{_esc(text)}</td>"]
        for n in names[1:]:
            value = figs[n].get(key)
            _, vtext = format_figure(key, value)
            if isinstance(value, float) and isinstance(base, float) and \
                    np.isfinite(value) and np.isfinite(base):  # no Δ to a figure not evaluated
                _, dtext = format_figure(key, value - base)
                vtext = f"{vtext} ({'+' if value >= base else ''}{dtext})"
            cells.append(f"<td style='text-align:right'>{_esc(vtext)}</td>")
        rows.append("<tr>" + "".join(cells) + "</tr>")
    warnings = {n: results.run_warnings(ds) for n, ds in named.items()}
    if any(warnings.values()):  # every figure above carries its run's warning
        cells = "".join(f"<td style='color:#8A5A00'>{_esc('; '.join(w)) if w else '—'}</td>"
                        for w in warnings.values())
        rows.append(f"<tr><td>⚠ warnings (every figure of the run carries them)</td>{cells}</tr>")
    return f"{_TABLE_CSS}<table class='pte-table'>{head}{''.join(rows)}</table>"


# ---------------------------------------------------------------------------------------------
# what the panels show, as plain functions of the results (testable without a widget)

_NOT_MET = "<b style='color:#B2182B'>NOT met</b>"
_NOT_EVALUATED_STYLE = "color:#8A5A00"
_WARNING_STYLE = ("background:#FFF4E0;border-left:4px solid #E69F00;padding:0.3em 0.6em;"
                  "margin:0.3em 0;white-space:pre-wrap")
_NUMBER_STYLE = "text-align:right;white-space:nowrap"  # "45 °C" stays on one line
_TABLE_CSS = ("<style>.pte-table td,.pte-table th{padding:1px 8px;text-align:left;"
              "vertical-align:top}</style>")
_DISPLAY_UNITS = {"degC": "°C", "W/(m2 K)": "W/(m² K)", "um": "µm", "1": ""}
_CHANNELS_ONLY = ("pressure_drop", "pump_power", "Pressure drop", "Pump power")


def cell_view(ds, cell: int | None = None):
    """``(Dataset of one cell, its position)``; ``(ds, None)`` for a single-cell result.

    A module result (dimension ``cell``) is seen through cell ``cell`` (a position along the
    ``cell`` dimension; default the one whose hottest point anywhere gets hottest).
    """
    if "cell" not in ds.dims:
        return ds, None
    if cell is None:
        name = "temperature_hottest" if "temperature_hottest" in ds else "temperature_max"
        cell = int(np.nanargmax(ds[name].max("time").values))
    view = ds.isel(cell=cell)
    label = ds["cell"].values[cell]
    view.attrs = {**ds.attrs, "cell_name": f"{ds.attrs.get('cell_name', 'cell')} · cell {label} "
                                           f"of {ds.sizes['cell']}"}
    return view, cell


def heat_view(ds):
    """What the heat-split figure reads: a module's heat over all its cells (its split by source
    is recorded for the whole module, so the totals must be too)."""
    if "cell" not in ds.dims:
        return ds
    out = ds[[n for n in ds.data_vars if "cell" not in ds[n].dims]]
    for name, v in ds.data_vars.items():
        if name.startswith("heat_") and v.dims == ("cell", "time"):  # per cell: add them up
            out[name] = v.sum("cell", keep_attrs=True)
    return out.drop_vars("cell", errors="ignore")


def _placeholder(text: str, height=None):
    import plotly.graph_objects as go

    return go.Figure(layout=dict(
        template="simple_white", height=height,
        annotations=[dict(text=text, showarrow=False, x=0.5, y=0.5, xref="paper", yref="paper",
                          font=dict(size=15, color="#777"))],
        xaxis=dict(visible=False), yaxis=dict(visible=False)))


def _run_hydraulics(ds) -> dict | None:
    import json

    raw = ds.attrs.get("hydraulics")
    try:
        value = json.loads(raw) if isinstance(raw, str) else dict(raw or {})
    except (TypeError, ValueError):
        return None
    return value or None


def _channels_only(label: str) -> str:
    """Hydraulic figures cover the plate's channels only (no manifolds, pipes or fittings)."""
    if label.startswith(_CHANNELS_ONLY) and "channels only" not in label:
        return f"{label} — channels only"
    return label


def _limit_label(name: str) -> str:
    from explorer import limits as limits_module

    return _channels_only(limits_module.LONG_NAMES.get(name, name))


def _unit(name: str) -> str:
    from explorer import limits as limits_module

    return _display_unit(limits_module.UNITS.get(name, ""))


def _warnings_html(warnings) -> str:
    if not warnings:
        return ""
    items = "".join(f"<li>{_esc(w)}</li>" for w in warnings)
    return (f"<div style='{_WARNING_STYLE}'><b>⚠ Every verdict on this run carries this "
            f"warning:</b><ul style='margin:0.2em 0'>{items}</ul></div>")


def limits_html(ds, limits) -> str:
    """The verdict on every set limit from ``limits.check(ds)``, with the run's warnings.

    Each row names the figure that governs the limit, the limit, the figure, the margin and the
    verdict: "met", "NOT met" or "not evaluated (reason)". The warnings (``check["warnings"]``: a
    duty cut short ...) stand above the table and are marked beside every verdict.
    """
    try:
        check = limits.check(ds, hydraulics=_run_hydraulics(ds))
    except ValueError as exc:  # InputError: a limit the run cannot be checked against
        return f"<p style='{_ERROR_STYLE}'>{_esc(exc)}</p>"
    warnings = list(check.get("warnings") or ())
    tip = _esc("; ".join(warnings))
    mark = f" <span title='{tip}' style='color:#E69F00'>⚠ see warning</span>" if warnings else ""
    lines = []
    for name in limits.names():
        unit = _unit(name)
        delta = "K" if unit == "°C" else unit  # a margin on a temperature is a difference
        verdict = check["verdicts"][name]
        figure, margin = check["figures"].get(name), check["margins"].get(name)
        reason = check.get("reasons", {}).get(name, "")
        why = f" ({_esc(reason)})" if reason else ""
        if verdict == "met":
            text = "met"
        elif verdict == "not met":  # the verdict itself never breaks over two lines
            text = f"<span style='white-space:nowrap'>{_NOT_MET}</span>{why}"
        else:
            text = f"<span style='{_NOT_EVALUATED_STYLE}'>not evaluated{why}</span>"
        cell = (check.get("cells") or {}).get(name)
        where = f" (cell {_esc(cell)})" if cell is not None else ""
        lines.append(
            f"<tr><td>{_esc(_limit_label(name))}</td>"
            f"<td style='{_NUMBER_STYLE}'>{getattr(limits, name):.4g} {_esc(unit)}</td>"
            f"<td style='{_NUMBER_STYLE}'>"
            f"{'—' if figure is None else f'{figure:.4g} {_esc(unit)}{where}'}</td>"
            f"<td style='{_NUMBER_STYLE}'>"
            f"{'—' if margin is None else f'{margin:+.3g} {_esc(delta)}'}</td>"
            f"<td>{text}{mark}</td></tr>")
    if check["met"]:
        overall = "every limit met"
        if warnings:  # a headline "met" must not hide that the run was cut short
            overall += " <span style='color:#8A5A00'>⚠ read with the warning below</span>"
    elif any(v == "not met" for v in check["verdicts"].values()):
        overall = f"<b style='color:#B2182B'>NOT met</b> (worst: {_esc(_limit_label(check['worst']))})"
    else:
        overall = (f"<span style='{_NOT_EVALUATED_STYLE}'>not every limit could be evaluated; no "
                   "verdict on those</span>")
    return (f"<h4>Limits (margin = limit − figure): {overall}</h4>{_warnings_html(warnings)}"
            f"{_TABLE_CSS}<table class='pte-table'><tr><th>limit on</th><th>limit</th><th>figure</th><th>margin</th><th>verdict"
            f"</th></tr>{''.join(lines)}</table>")


def hydraulics_html(ds) -> str:
    """The plate's hydraulic figures recorded with the run (pressure drop and pump power are for
    the channels only); empty for designs without a plate."""
    from explorer.report import hydraulics_rows

    rows = hydraulics_rows(ds)
    if not rows:
        return ""
    return "<table>" + "".join(f"<tr><td>{_esc(_channels_only(a))}</td><td>{_esc(b)}</td></tr>"
                               for a, b in rows) + "</table>"


def module_html(ds, limits=None) -> str:
    """The module in words: each cell's peak and coolant outlet, and the cell-to-cell figure."""
    hottest = "temperature_hottest" if "temperature_hottest" in ds else "temperature_max"
    peaks = ds[hottest].max("time").values
    outlet = ds["coolant_outlet"].max("time").values if "coolant_outlet" in ds else None
    worst = int(np.nanargmax(peaks))
    rows = []
    for k, c in enumerate(ds["cell"].values):
        out = "—" if outlet is None else f"{outlet[k]:.2f}"
        bold = " style='font-weight:bold'" if k == worst else ""
        rows.append(f"<tr{bold}><td>{_esc(c)}</td><td style='text-align:right'>{peaks[k]:.2f}</td>"
                    f"<td style='text-align:right'>{out}</td></tr>")
    c2c = limit = None
    if limits is not None:
        try:
            check = limits.check(ds, hydraulics=_run_hydraulics(ds))
        except ValueError:
            check = {}
        c2c = check.get("figures", {}).get("cell_to_cell_K")
        limit = getattr(limits, "cell_to_cell_K", None)
    if c2c is None:  # no limit on it: the figure alone
        c2c = _results().key_figures(ds)["cell_to_cell_K"]
    if limit is None:
        against = ("no cell-to-cell limit set (Limits tab: Max cell-to-cell difference)")
    else:
        verdict = check["verdicts"]["cell_to_cell_K"]
        text = {"met": "met", "not met": _NOT_MET}.get(
            verdict, f"not evaluated ({_esc(check.get('reasons', {}).get('cell_to_cell_K', ''))})")
        against = f"limit {limit:g} K: {text}"
    warnings = []
    if limits is not None:
        warnings = list(check.get("warnings") or ())
    return (f"<h4>Module: {ds.sizes['cell']} cells along the coolant (cell 0 meets it first)</h4>"
            f"{_warnings_html(warnings)}"
            f"<p>Cell-to-cell difference (largest minus smallest cell mean temperature at one "
            f"time): <b>{c2c:.3g} K</b> — {against}</p>"
            f"{_TABLE_CSS}<table class='pte-table'><tr><th>cell</th>"
            "<th>peak, hottest point anywhere (°C)</th>"
            f"<th>coolant outlet, highest (°C)</th></tr>{''.join(rows)}</table>")


def sizing_bounds(name: str) -> tuple[float, float, str, float]:
    """``(low, high, unit, resolution)`` the sizing of ``name`` starts from (its default bounds,
    from ``explorer.sizing.design_parameter``); the unit as the app shows it."""
    from explorer.sizing import design_parameter

    p = design_parameter(name)
    return float(p.bounds[0]), float(p.bounds[1]), _display_unit(p.unit), float(p.resolution)


def _display_unit(unit: str) -> str:
    return _DISPLAY_UNITS.get(unit, unit)


_LIMITED_BY = {  # limited_by -> (what decided the answer, in words)
    "limits": ("limited by the limits", "one step cheaper does not meet them"),
    "lower bound": ("limited by the lower bound, not by a limit", "the bound itself meets the "
                    "limits; widen the bounds to look for a cheaper design"),
    "upper bound": ("limited by the upper bound, not by a limit", "the bound itself meets the "
                    "limits; widen the bounds to look for a cheaper design"),
    "none met": ("no value meets the limits", "none within the bounds does; the best one "
                 "evaluated is shown"),
}


def _parameter_name(vary: str) -> str:
    """The varied parameter in words, as the Size menu names it without its unit ("fin
    thickness", not the input label "Fin thickness, 0 = none")."""
    for value, text in FIELDS["size_vary"].choices:
        if value == vary:
            return text.split(" (")[0]
    return FIELDS[vary].label if vary in FIELDS else vary


def sized_run(result):
    """The run at the sized value: the whole module when it was judged as one, else the cell."""
    module = getattr(result, "module", None)
    return module if module is not None else result.dataset


def sizing_html(result, limits) -> str:
    """The sizing answer: the rounded value with its step and unit, what decided it, the verdicts
    at that value (with the run's warnings) and the hydraulics there (channels only)."""
    vary = result.vary
    unit = _display_unit(result.unit)
    u = f" {unit}" if unit else ""
    name = _parameter_name(vary)
    label = name[:1].upper() + name[1:]
    step = f" (rounded in the safe direction to a step of {result.resolution:g}{u})"
    verdict = "meets the limits" if result.feasible else _NOT_MET
    if not result.feasible:  # nothing was sized or rounded: the best value evaluated
        label, step = f"Best evaluated: {name}", ""
    head, why = _LIMITED_BY.get(result.limited_by, (f"limited by {result.limited_by}", ""))
    parts = [f"<h4>{_esc(label)} = {float(result.value):.6g}{_esc(u)}{_esc(step)}: {verdict}</h4>",
             f"<p><b>{_esc(head)}</b>: {_esc(why)}</p>"]
    run = sized_run(result)
    if limits is not None and run is not None:
        parts.append(limits_html(run, limits))  # the verdicts carry the run's warnings
    else:
        parts.append(_warnings_html(result.warnings))
    hyd = getattr(result, "hydraulics", None) or {}
    for key, name, scale, fmt in (("pressure_drop_Pa", "Pressure drop (kPa)", 1e-3, "{:.3g}"),
                                  ("pump_power_W", "Pump power (W)", 1.0, "{:.3g}")):
        if hyd.get(key) is not None:
            parts.append(f"<p>{_esc(_channels_only(name))}: {fmt.format(hyd[key] * scale)}</p>")
    parts.append(fidelity_html(sized_run(result) if run is not None else None,
                               getattr(result, "fidelity", None)))
    message = getattr(result, "message", "")
    if message:
        parts.append(f"<p style='color:#555;font-size:0.9em'>{_esc(human_text(message))}</p>")
    return "".join(parts)


def fidelity_html(ds=None, fid=None) -> str:
    """The fidelity check of a run (``explorer.fidelity.html_table``): how far the fuller models
    (DFN, a grid of rods, a finer grid) move its figures and whether a verdict could flip."""
    try:
        from explorer import fidelity
    except ImportError:  # pragma: no cover - the module ships with the package
        return ""
    summary = None
    if fid is not None:
        summary = fidelity.summary(fid)
    elif ds is not None:
        summary = fidelity.from_attrs(ds)
    if not summary:
        return ""
    return (f"{_TABLE_CSS}<div class='pte-table pte-fidelity'>"
            f"{human_text(fidelity.html_table(summary))}</div>")


def _cap_stopped(reason: str) -> bool:
    """Whether a skipped variant was stopped by the wall-time cap (not just not needed)."""
    return "max_wall_s" in reason


def fidelity_check_html(summary: dict) -> str:
    """The answer of a fidelity check (``explorer.fidelity.summary``) for the Summary tab: could a
    verdict flip, in large type; the fuller models stopped by the wall-time cap, listed as such;
    then the table of figures (``explorer.fidelity.html_table``)."""
    from explorer import fidelity

    flip = summary.get("verdict_could_flip", "not evaluated")
    skipped = summary.get("skipped") or []
    stopped = [s for s in skipped if _cap_stopped(str(s.get("reason", "")))]
    ran = list(summary.get("variants", []))[1:]
    if flip == "yes":
        answer = ("<b style='color:#B2182B'>YES</b>: a fuller model puts a figure on the "
                  "other side of a limit; check this design point on the fuller model before "
                  "trusting its verdict")
    elif flip == "no":
        answer = (f"<b style='color:#1B7837'>no</b>: every verdict stays as it is on the "
                  f"fuller models run ({_esc(', '.join(ran))})")
        if stopped:
            answer += (f"; <span style='{_NOT_EVALUATED_STYLE}'>not known for the "
                       f"{len(stopped)} stopped by the wall-time cap (below)</span>")
    else:
        why = ("no limits set" if summary.get("limits") is None
               else "no fuller model ran" if not ran else "no comparable figure")
        answer = f"<span style='{_NOT_EVALUATED_STYLE}'>not evaluated ({_esc(why)})</span>"
    parts = [f"<h4 class='pte-could-flip'>Could a verdict flip on the fuller models? {answer}</h4>"]
    if stopped:
        items = "".join(f"<li><b>{_esc(s['variant'])}</b>: {_esc(human_text(s['reason']))}</li>"
                        for s in stopped)
        parts.append(f"<div class='pte-fidelity-stopped' style='{_WARNING_STYLE}'><b>Stopped by "
                     f"the wall-time cap</b> (not compared; raise the cap beside the button to "
                     f"run them):<ul style='margin:0.2em 0'>{items}</ul></div>")
    parts.append(f"{_TABLE_CSS}<div class='pte-table pte-fidelity'>"
                 f"{human_text(fidelity.html_table(summary))}</div>")
    return "".join(parts)


def human_text(text: str) -> str:
    """A message with the limits' and design parameters' identifiers (``temperature_max_C``,
    `flow_L_min`) put in words with units, as the rest of the app shows them."""
    import re

    from explorer import limits as limits_module

    def limit(match):
        name = match.group(1)
        return _short_limit(name)

    out = re.sub(r"`?\b(" + "|".join(map(re.escape, limits_module.LONG_NAMES)) + r")\b`?",
                 limit, str(text))
    for value, label in FIELDS["size_vary"].choices:
        out = out.replace(f"`{value}`", label.split(" (")[0]).replace(value, label.split(" (")[0])
    return out.replace("degC", "°C")


_SHORT_LIMITS = {"temperature_max_C": "hottest point anywhere", "spread_K": "in-cell spread",
                 "cell_to_cell_K": "cell-to-cell difference",
                 "core_temperature_max_C": "hottest core estimate",
                 "coolant_outlet_C": "coolant outlet", "pressure_drop_kPa": "pressure drop",
                 "pump_power_W": "pump power"}


def _short_limit(name: str) -> str:
    return _SHORT_LIMITS.get(name, name.replace("_", " "))
