"""Benchmark of the notebook app, for ``python -m explorer.bench`` (section ``app``).

Two figures, each the best of ``repeat`` timings after one warm-up (a shared machine is noisy):

* ``run_to_figure``: :meth:`ExplorerApp.run` on the default inputs (SPMe, averaged layout, coarse
  grid, 1C discharge with an edge plate) until every live figure shows the new result;
  target 1.5 s.
* ``time_slider``: one move of the time slider with the app's default tab (Temperature) shown:
  the temperature map updated in place (the other tabs' figures follow when shown); target 50 ms.
  ``frames_per_s`` is its inverse, the pictures per second the kernel can serve while playing,
  and ``sent_kB`` what one move sends to the browser (the widgets' update messages).
* ``time_slider_every_tab``: the same move as it was before only the shown tab followed the time
  (the three field maps and the traces' time marker, on every tab), for comparison.
* ``play`` / ``play_every_tab``: the play button from the start to the end of the run with no
  pause between pictures (the app pauses ``play_interval_s`` = 0.1 s, so plays at most 10
  pictures/s): ``frames_per_s`` as the kernel serves them, both ways.
* ``module_run_to_figure``: the same with ``module_cells`` cells sharing the plate's coolant
  (``explorer.simulate_module`` and the Module tab); no target of its own, for scale.
* ``open``: in a fresh Python, ``import explorer`` then ``explorer.explore()`` as in a notebook
  (the figures and the model load behind the shown app): the time until the app can be shown
  (target 3 s), ``prepare_s`` until it is ready, and ``first_run_s``, the first Run after that
  (target 1.5 s). One sample (a second one would find the imports cached).

Without ``anywidget`` the figures are plain plotly figures updated in place (no browser here), so
the figures measure the Python side either way: the inputs, the simulation and the figure updates.
"""

from __future__ import annotations

from explorer.timing import best_of

TARGETS_S = {"run_to_figure": 1.5, "time_slider": 0.05, "open": 3.0, "first_run": 1.5}

_OPEN_SCRIPT = """
import json, time
t0 = time.perf_counter()
import explorer
from explorer.app import widget
widget.DEFER_PREPARE = True
t1 = time.perf_counter()
app = explorer.explore(discharge_c_rate=1.5)
t2 = time.perf_counter()
app._ready.wait(300)
t3 = time.perf_counter()
app.run()
t4 = time.perf_counter()
print(json.dumps({"import_s": t1 - t0, "construct_s": t2 - t1, "prepare_s": t3 - t2,
                  "first_run_s": t4 - t3, "error": app.last_error}))
"""


def bench_open() -> dict:
    """Open the app in a fresh interpreter (see the module docstring); return one row."""
    import json
    import subprocess
    import sys

    out = subprocess.run([sys.executable, "-c", _OPEN_SCRIPT], capture_output=True, text=True,
                         timeout=600, check=True)
    figures = json.loads(out.stdout.strip().splitlines()[-1])
    return {"section": "app", "figure": "open", "wall_s": figures["import_s"]
            + figures["construct_s"], **figures, "target_s": TARGETS_S["open"],
            "first_run_target_s": TARGETS_S["first_run"]}


def bench_app(repeat: int = 3, module_cells: int = 6, **inputs) -> list[dict]:
    """Time the app's run-to-figure and a time-slider move; return rows for explorer.bench.

    Parameters
    ----------
    repeat : int
        Timings per figure after the warm-up (the best is reported).
    module_cells : int
        Cells sharing the coolant in the module row (0 leaves the row out).
    **inputs
        App inputs by name overriding the defaults (see ``explorer.app.FIELDS``).
    """
    from explorer.app import explore
    from explorer.app.live import figure_widgets_available

    app = explore(**inputs)
    if app.errors:
        raise ValueError(f"bench_app: invalid inputs {app.errors}")

    def run_once():
        if app.run() is None:
            raise RuntimeError(f"bench_app: the run failed: {app.last_error}")

    run_s = best_of(run_once, repeat)[0]
    ds = app.dataset
    n = int(ds.sizes["time"])
    moves = iter(range(10**9))

    def slide_once():
        # a different index every call, so every move really updates
        app.time_slider.value = next(moves) % max(n, 1)

    slider_s, every_tab_s, sent, sent_every_tab = _slider_both_ways(app, slide_once, repeat)
    plays = {old: _play(app, old, repeat) for old in (False, True)}
    common = {"section": "app", "cell": ds.attrs.get("cell_name"),
              "model": ds.attrs.get("electrochemistry"), "layout": ds.attrs.get("layout"),
              "grid": f"{ds.sizes['x']}x{ds.sizes['y']}",
              "figure_widget": figure_widgets_available()}
    rows = [
        {**common, "figure": "run_to_figure", "wall_s": run_s, "time_samples": n,
         "target_s": TARGETS_S["run_to_figure"]},
        {**common, "figure": "time_slider", "tab": _tab_title(app), "wall_s": slider_s,
         "frames_per_s": 1.0 / slider_s, "sent_kB": sent / 1e3,
         "target_s": TARGETS_S["time_slider"]},
        {**common, "figure": "time_slider_every_tab", "tab": "all", "wall_s": every_tab_s,
         "frames_per_s": 1.0 / every_tab_s, "sent_kB": sent_every_tab / 1e3, "target_s": None},
    ]
    for old, (wall, frames) in plays.items():
        rows.append({**common, "figure": "play_every_tab" if old else "play",
                     "tab": "all" if old else _tab_title(app), "wall_s": wall, "frames": frames,
                     "frames_per_s": frames / wall, "target_s": None})
    rows.append(bench_open())
    if module_cells > 1 and app.rows["cells_per_plate"].box.layout.display != "none":
        app.set_inputs(cells_per_plate=module_cells)
        module_s = best_of(run_once, repeat)[0]
        rows.append({**common, "figure": "module_run_to_figure", "cells": module_cells,
                     "wall_s": module_s, "time_samples": int(app.dataset.sizes["time"]),
                     "target_s": None})
    return rows


def _tab_title(app) -> str:
    return app.output_tabs.get_title(app.output_tabs.selected_index)


def _slider_both_ways(app, slide_once, repeat: int):
    """Time a slider move with the shown tab following (the app) and with every tab following
    (the old path, kept selectable for this comparison only); and the bytes each move sends."""
    timings = {}
    sent = {}
    for old in (False, True):
        app._time_follows_hidden_tabs = old
        try:
            slide_once()  # after a switch of path: bring every figure to a moving time first
            timings[old] = best_of(slide_once, max(5, repeat * 5))[0]
            sent[old] = _bytes_sent(slide_once)
        finally:
            app._time_follows_hidden_tabs = False
    return timings[False], timings[True], sent[False], sent[True]


def _bytes_sent(action) -> int:
    """The size of the widget messages ``action`` sends to the browser (JSON plus buffers).

    Counted on a separate call, not a timed one: encoding the messages here costs time of its own.
    """
    import json

    import ipywidgets

    total = [0]
    send = ipywidgets.Widget._send

    def counting(widget, msg, buffers=None):
        total[0] += len(json.dumps(msg, default=str)) + sum(memoryview(b).nbytes
                                                             for b in buffers or ())
        return send(widget, msg, buffers=buffers)

    ipywidgets.Widget._send = counting
    try:
        action()
    finally:
        ipywidgets.Widget._send = send
    return total[0]


def _play(app, every_tab: bool, repeat: int) -> tuple[float, int]:
    """Play the run from the start to the end with no pause; ``(best wall s, pictures)``."""
    import time

    app.play_interval_s = 0.0
    frames = [0]

    def count(change):
        frames[0] += 1

    app.time_slider.observe(count, names="value")
    best = float("inf")
    app._time_follows_hidden_tabs = every_tab
    try:
        for _ in range(max(1, repeat)):
            app.time_slider.value = 0
            frames[0] = 0
            t0 = time.perf_counter()
            app.play.value = True
            app._play_thread.join(600)
            best = min(best, time.perf_counter() - t0)
    finally:
        app._time_follows_hidden_tabs = False
        app.time_slider.unobserve(count, names="value")
        app.play_interval_s = 0.1
    return best, frames[0]


if __name__ == "__main__":  # pragma: no cover
    for row in bench_app():
        print(row)
