"""The two notebooks run top to bottom on a real kernel and show their figures.

Kernel: ``nbclient.NotebookClient(nb, kernel_name="python3")``. The "python3" kernel spec is the
one ipykernel installs into the environment (``<venv>/share/jupyter/kernels/python3``), and
jupyter_client replaces its ``python`` command by the running interpreter (``sys.executable``), so
the kernel is this venv's Python without any ``ipykernel install --user``. The first test checks
exactly that.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import pytest

nbformat = pytest.importorskip("nbformat")
nbclient = pytest.importorskip("nbclient")

NOTEBOOKS = Path(__file__).resolve().parents[1] / "notebooks"
PLOTLY = "application/vnd.plotly.v1+json"
WIDGET = "application/vnd.jupyter.widget-view+json"


def _execute(name: str, tmp_path: Path, extra_cells: list[str] = ()):
    nb = nbformat.read(NOTEBOOKS / name, as_version=4)
    for source in extra_cells:
        nb.cells.append(nbformat.v4.new_code_cell(source))
    client = nbclient.NotebookClient(nb, kernel_name="python3", timeout=300,
                                     resources={"metadata": {"path": str(tmp_path)}})
    client.execute()  # raises CellExecutionError with the cell and traceback on any error
    return nb


def _outputs(nb, mime: str) -> list:
    found = []
    for cell in nb.cells:
        if cell.cell_type != "code":
            continue
        for out in cell.get("outputs", []):
            data = out.get("data", {})
            if mime in data:
                value = data[mime]
                found.append(json.loads(value) if isinstance(value, str) else value)
    return found


def _text(nb) -> str:
    parts = []
    for cell in nb.cells:
        for out in cell.get("outputs", []):
            parts.append(out.get("text", ""))
            parts.append(str(out.get("data", {}).get("text/plain", "")))
    return "\n".join(parts)


def _trace_types(fig: dict) -> list[str]:
    return [tr.get("type", "scatter") for tr in fig["data"]]


def test_quick_start(tmp_path):
    nb = _execute("quick_start.ipynb", tmp_path, ["import sys; print('KERNEL', sys.executable)"])
    figures = _outputs(nb, PLOTLY)
    assert len(figures) == 3  # traces, temperature field, heat split
    traces, field, heat = figures
    assert "Voltage (V)" in json.dumps(traces["layout"])
    assert _trace_types(field)[0] == "heatmap" and field.get("frames")  # animated field
    assert "Heat generation by source" in json.dumps(heat["layout"])
    assert len(_outputs(nb, WIDGET)) == 1  # the app
    text = _text(nb)
    assert "peak_temperature_C" in text
    assert f"KERNEL {sys.executable}" in text  # the kernel is this environment's Python


def test_cooling_design_review(tmp_path):
    nb = _execute("cooling_design_review.ipynb", tmp_path)
    figures = _outputs(nb, PLOTLY)
    assert len(figures) == 3  # comparison, sizing curve, field at the design point
    comparison, sizing, field = figures
    names = {tr.get("name") for tr in comparison["data"]}
    assert {"baseline: edge plate", "A: edge plate + 1.5 mm fin", "B: face plates"} <= names
    assert "Sizing" in json.dumps(sizing["layout"])
    assert _trace_types(field)[0] == "heatmap"
    text = _text(nb)
    assert "flow_L_min =" in text and "Baseline edge plate" in text
    report = tmp_path / "cooling_design_review.html"
    assert report.is_file() and report.stat().st_size > 1_000_000  # plotly.js inline
    # the verdict tables are rounded, with units, and name the figures in words
    tables = [out["data"]["text/html"] for cell in nb.cells if cell.cell_type == "code"
              for out in cell.get("outputs", []) if "text/html" in out.get("data", {})
              and "<table" in out["data"]["text/html"]]
    assert any("hottest point, core included" in t and "°C" in t for t in tables)
    assert not any("temperature_max_C" in t for t in tables)
    _shows_figures_offline(nb, tmp_path, expected=3)


def _shows_figures_offline(nb, tmp_path: Path, expected: int) -> None:
    """Exported with nbconvert and opened with the network blocked, every figure draws."""
    from browser_util import file_url, offline_page, require_browser

    require_browser()
    nbconvert = pytest.importorskip("nbconvert")
    html, _ = nbconvert.HTMLExporter().from_notebook_node(nb)
    exported = tmp_path / "exported.html"
    exported.write_text(html, encoding="utf-8")
    with offline_page() as (page, errors):
        page.goto(file_url(exported))
        page.wait_for_function(f"document.querySelectorAll('.plotly-graph-div .main-svg')"
                               f".length >= {expected}", timeout=30_000)
        drawn = page.evaluate("Array.from(document.querySelectorAll('.plotly-graph-div'))"
                              ".filter(d => d.querySelector('.main-svg') && d.data"
                              " && d.data.length > 0).length")
    assert drawn == expected, (drawn, errors)


def test_app_runs_in_a_kernel_background_thread(tmp_path):
    """The Run button's path: a background run inside a real kernel fills the live figures."""
    nb = nbformat.v4.new_notebook()
    nb.cells = [nbformat.v4.new_code_cell(
        "import explorer\n"
        "app = explorer.explore(discharge_c_rate=2.0)\n"
        "app.start(); app.wait(120)\n"
        "fig = app.fig_temperature\n"
        "assert app.dataset is not None, app.last_error\n"
        "if fig.native:  # FigureWidget (anywidget installed)\n"
        "    shown = fig.figure.data[0].z\n"
        "else:  # plain figure redrawn into an Output widget\n"
        "    shown = fig.widget.outputs[0]['data']['application/vnd.plotly.v1+json']['data'][0]['z']\n"
        "    # a figure on a hidden tab is drawn when its tab is opened\n"
        "    assert not app.fig_traces.widget.outputs\n"
        "    app.output_tabs.selected_index = 3\n"
        "    assert app.fig_traces.widget.outputs\n"
        "print('SHOWN', shown is not None, fig.updates)")]
    nbclient.NotebookClient(nb, kernel_name="python3", timeout=300,
                            resources={"metadata": {"path": str(tmp_path)}}).execute()
    assert "SHOWN True" in _text(nb)
