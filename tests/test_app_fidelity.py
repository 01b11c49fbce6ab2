"""The app's "Check against fuller models" control (explorer.check_fidelity on the run shown).

The widget logic runs on stand-ins: ``explorer.simulate`` returns the invented synthetic Dataset
of tests/synthetic.py and ``explorer.check_fidelity`` returns a check Dataset made by hand (its
figures invented) and judged by the real ``explorer.fidelity.judge``, so the could-flip answer
follows DESIGN.md section 3, rule 6. One test runs a real, short check end to end.
"""

from __future__ import annotations

import html
import json
import re
import time

import numpy as np
import pytest
import xarray as xr
from synthetic import SyntheticSizing, synthetic_dataset

import explorer
from explorer import fidelity
from explorer.validators import InputError

_CAP_STOP = ("would take about 240 s (estimated from its first 60 s of 1200 s of duty, 12.0 s of "
             "wall time), more than the 48 s left of max_wall_s = 60 s; raise max_wall_s or use a "
             "coarser grid")


def fake_check(limits, dfn_peak_C: float = 41.0, skipped=()) -> xr.Dataset:
    """A check Dataset of the shape explorer.check_fidelity returns (figures invented): the run as
    made peaks at 40 degC, the DFN at ``dfn_peak_C``; the finer grid 0.1 K hotter."""
    names = ["as run", "dfn", "finer grid"]
    values = {"peak_temperature": [40.0, dfn_peak_C, 40.1],
              "core_temperature": [40.0, dfn_peak_C, 40.1],
              "in_cell_spread": [3.0, 3.1, 3.2], "cell_to_cell_spread": [np.nan] * 3,
              "end_soc_spread": [0.0, 0.0, 0.0], "voltage_rms_difference": [0.0, 2e-3, 1e-4],
              "voltage_max_difference": [0.0, 4e-3, 2e-4]}
    data = {name: ("variant", np.array(v, dtype=float),
                   {"units": fidelity.FIGURES[name][0], "long_name": fidelity.FIGURES[name][1]})
            for name, v in values.items()}
    data["duration"] = ("variant", np.full(3, 600.0), {"units": "s"})
    data["wall_time"] = ("variant", np.array([0.1, 0.5, 0.2]), {"units": "s"})
    data["status"] = ("variant", np.array(["completed"] * 3))
    data["setting"] = ("variant", np.array(["spme, averaged", "dfn, averaged", "grid 2x"]))
    fid = xr.Dataset(data, coords={"variant": names})
    fid.attrs["skipped"] = json.dumps(list(skipped))
    return fidelity.judge(fid, limits)


@pytest.fixture
def fake_simulate(monkeypatch):
    """explorer.simulate returning synthetic results (a new object each call)."""
    calls = []

    def simulate(cell, duty, cooling=None, progress=None, **kwargs):
        calls.append(kwargs)
        return synthetic_dataset(rise_K=10.0 + 5.0 * len(calls))

    monkeypatch.setattr(explorer, "simulate", simulate, raising=False)
    return calls


@pytest.fixture
def checks(monkeypatch):
    """explorer.check_fidelity stand-in: records its arguments and the app's buttons meanwhile.

    ``checks.result`` sets what it returns (a function of the limits), ``checks.error`` what it
    raises."""

    class Stand:
        calls: list = []
        app = None
        error = None
        result = staticmethod(lambda limits: fake_check(limits))

    def check_fidelity(cell, duty, cooling, *args, **kwargs):
        if Stand.app is not None:
            kwargs["_buttons"] = {n: getattr(Stand.app, n).disabled
                                  for n in ("run_button", "size_button", "fidelity_button")}
        Stand.calls.append({"cell": cell, "duty": duty, "cooling": cooling, **kwargs})
        if kwargs.get("progress") is not None:
            kwargs["progress"]("dfn", 0.5)
        if Stand.error is not None:
            raise Stand.error
        return Stand.result(kwargs.get("limits"))

    Stand.calls = []
    monkeypatch.setattr(explorer, "check_fidelity", check_fidelity, raising=False)
    return Stand


def _text(widget) -> str:
    """What a widget's HTML reads as (tags dropped)."""
    return html.unescape(re.sub(r"<[^>]+>", "", widget.value))


# ---------------------------------------------------------------------------------------------
# the control on stand-ins


def test_button_off_before_a_run_and_on_after(fake_simulate, checks):
    app = explorer.explore()
    assert app.fidelity_button.disabled and "Run first" in _text(app.fidelity_note)
    assert app.check() is None and not checks.calls  # nothing to check: nothing runs
    app.run()
    assert not app.fidelity_button.disabled and app.fidelity_result.value == ""
    assert "fuller models" in app.fidelity_button.description
    # it stands under the verdicts, in the Summary tab
    summary = app._panels["Summary"].children
    assert summary[0] is app.summary and app._fidelity_box in summary


def test_check_passes_the_run_its_inputs_and_the_cap(fake_simulate, checks):
    app = explorer.explore(start_soc_pct=80.0, layout="distributed")
    ds = app.run()
    checks.app = app
    app.set_inputs(start_soc_pct=50.0)  # typed after the run: the check is of the run shown
    fid = app.check()
    assert fid is app.fidelity and len(checks.calls) == 1
    call = checks.calls[0]
    assert call["base"] is ds and call["max_wall_s"] == 60.0 and callable(call["progress"])
    assert call["cell"] is app._cell  # the cell object run, not the file read again
    assert call["limits"].temperature_max_C == 45.0 and call["module"] is False
    assert call["start_soc"] == pytest.approx(0.8) and call["layout"] == "distributed"
    # busy while it checks: no run, sizing or second check meanwhile
    assert call["_buttons"] == {"run_button": True, "size_button": True, "fidelity_button": True}
    assert not app.fidelity_button.disabled and not app.run_button.disabled
    app.fidelity_cap.value = 15  # the cap box beside the button
    app.check()
    assert checks.calls[-1]["max_wall_s"] == 15.0
    assert "wall-time cap" in app.fidelity_cap.description


def test_table_and_could_flip_answer_appear(fake_simulate, checks):
    # the DFN peaks at 46 degC against a 45 degC limit the run as made meets by 5 K: the verdict
    # could flip (DESIGN.md section 3, rule 6); the grid of rods was stopped by the cap
    checks.result = staticmethod(lambda limits: fake_check(
        limits, dfn_peak_C=46.0, skipped=[{"variant": "distributed", "reason": _CAP_STOP}]))
    app = explorer.explore()
    app.run()
    app.check()
    text = _text(app.fidelity_result)
    assert "Could a verdict flip on the fuller models? YES" in text
    assert "<table" in app.fidelity_result.value
    assert "COULD FLIP" in text and "peak temperature" in text
    stopped = text.split("Stopped by the wall-time cap")[1].split("Fidelity check")[0]
    assert "distributed" in stopped and "would take about 240 s" in stopped
    assert "temperature_max_C" not in text  # the limits in words, as the rest of the app says
    assert "verdict could flip: yes" in _text(app.status) and app.progress.value == 1.0
    # stored on the run it checked: saved, pinned and reported with it
    assert fidelity.from_attrs(app.dataset)["verdict_could_flip"] == "yes"


def test_no_flip_names_the_models_run_and_those_stopped(fake_simulate, checks):
    checks.result = staticmethod(lambda limits: fake_check(
        limits, skipped=[{"variant": "distributed", "reason": _CAP_STOP},
                         {"variant": "averaged", "reason": "the run is the DFN already"}]))
    app = explorer.explore()
    app.run()
    app.check()
    text = _text(app.fidelity_result)
    answer = html.unescape(app.fidelity_result.value.split("</h4>")[0])
    assert "? <b style='color:#1B7837'>no</b>: every verdict stays as it is on the fuller models " \
        "run (dfn, finer grid)" in answer
    assert "not known for the 1 stopped by the wall-time cap" in answer
    stopped = text.split("Stopped by the wall-time cap")[1].split("Fidelity check")[0]
    assert "distributed" in stopped and "DFN already" not in stopped  # not needed is not stopped


def test_a_new_run_clears_the_check(fake_simulate, checks):
    app = explorer.explore()
    app.run()
    app.check()
    assert app.fidelity_result.value and app.fidelity is not None
    app.run()
    assert app.fidelity_result.value == "" and app.fidelity is None
    assert "fidelity_summary" not in app.dataset.attrs and not app.fidelity_button.disabled


def test_results_not_run_here_cannot_be_checked(fake_simulate, checks):
    app = explorer.explore()
    app.run()
    app.show(synthetic_dataset(rise_K=3.0))  # e.g. read from a file: no inputs to re-run
    assert app.fidelity_button.disabled and "cannot be checked" in _text(app.fidelity_note)
    assert app.check() is None and not checks.calls
    # a result that carries its check (made before it was saved) still shows it
    carried = fidelity.attach(synthetic_dataset(), fake_check(explorer.Limits(
        temperature_max_C=45.0)))
    app.show(carried)
    assert "Could a verdict flip" in _text(app.fidelity_result)


@pytest.mark.parametrize("error, words", [
    (InputError("check_fidelity: `max_wall_s` must be a number of seconds > 0, got -1"),
     "check failed: check_fidelity: `max_wall_s` must be a number of seconds > 0, got -1"),
    (RuntimeError("the DFN solver found no solution"),
     "check failed: RuntimeError: the DFN solver found no solution"),
])
def test_an_error_is_shown_beside_the_button(fake_simulate, checks, error, words):
    checks.error = error
    app = explorer.explore()
    ds = app.run()
    assert app.check() is None
    note = _text(app.fidelity_note)
    assert words in note and "Traceback" not in note
    assert app.last_error in note and "check failed" in _text(app.status)
    assert app.dataset is ds and app.fidelity_result.value == ""  # the run shown is kept
    assert not app.fidelity_button.disabled  # it can be tried again
    checks.error = None
    app.check()
    assert app.fidelity_note.value == "" and app.fidelity_result.value


def test_the_button_checks_in_the_background(fake_simulate, checks):
    app = explorer.explore()
    app.run()
    app.fidelity_button.click()
    app.wait(30)
    assert len(checks.calls) == 1 and app.fidelity is not None
    assert not app.fidelity_button.disabled


def test_a_module_run_is_checked_as_a_module(monkeypatch, checks):
    from test_app_verdicts import module_dataset

    monkeypatch.setattr(explorer, "simulate_module",
                        lambda cell, duty, cooling, progress=None, **kw: module_dataset(3),
                        raising=False)
    app = explorer.explore(cells_per_plate=3)
    ds = app.run()
    assert ds is not None, app.last_error
    app.check()
    call = checks.calls[0]
    assert call["module"] is True and call["base"] is ds
    assert call["cooling"].plate.cells_per_plate == 3


def test_a_sized_run_is_checked_at_the_sized_value(monkeypatch, fake_simulate, checks):
    result = SyntheticSizing()
    result.unit, result.resolution, result.limited_by = "L/min", 0.05, "limits"
    result.warnings, result.module, result.hydraulics = [], None, {}
    monkeypatch.setattr(explorer, "size_cooling", lambda *a, **k: result, raising=False)
    app = explorer.explore(size_vary="flow_L_min")
    app.size()
    assert not app.fidelity_button.disabled
    app.check()
    call = checks.calls[0]
    assert call["base"] is result.dataset
    assert call["cooling"].parameters()["flow_L_min"] == pytest.approx(result.value, rel=1e-9)


# ---------------------------------------------------------------------------------------------
# end to end on the real models


def test_real_check_of_a_short_run():
    # the app's defaults (van_nmc_66ah, SPMe, averaged, coarse grid, edge plate) at 2C from
    # 10 % SOC: about 2 minutes of duty
    app = explorer.explore(start_soc_pct=10.0, discharge_c_rate=2.0)
    ds = app.run()
    assert ds is not None, app.last_error
    t0 = time.perf_counter()
    fid = app.check()
    print(f"\nreal fidelity check in the app: {time.perf_counter() - t0:.2f} s")
    assert fid is not None, app.last_error
    assert fid.attrs["max_wall_s"] == 60.0
    ran = [str(v) for v in fid["variant"].values]
    skipped = {s["variant"] for s in json.loads(fid.attrs["skipped"])}
    assert ran[0] == "as run" and set(ran[1:]) | skipped == {"dfn", "distributed", "finer grid"}
    text = _text(app.fidelity_result)
    assert "Could a verdict flip on the fuller models?" in text
    assert "<table" in app.fidelity_result.value
    assert fid.attrs["verdict_could_flip"] in ("yes", "no")
    assert fidelity.from_attrs(ds) is not None
