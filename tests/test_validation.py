"""The validation report's checks (explorer.validation): every check passes, names its source and
states its tolerance; ``python -m explorer validate --quick`` writes the report end to end.

The outside references (handbook tables, exact solutions, the scikit-fem solver, the ht and
fluids libraries) live beside each check in ``explorer/validation/checks.py`` and
``reference.py``, with their sources; the report and this file call the same functions.
"""

from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import explorer.validation as validation
from explorer.validation import checks, reference
from explorer.validation.checks import CHECKS, CheckResult, Outcome, SkipCheck, check, run_check
from explorer.validation.fuller import MapSettings, fuller_model_map, map_messages, map_table_rows
from explorer.validation.report import render_html, render_markdown

ROOT = Path(__file__).resolve().parents[1]


@pytest.mark.parametrize("fn", CHECKS, ids=[f.__name__ for f in CHECKS])
def test_check_passes_and_names_its_source(fn):
    r = fn()
    assert isinstance(r, CheckResult)
    if r.passed is None:
        pytest.skip(r.measured)
    assert r.passed, f"{r.name}: measured {r.measured}; tolerance {r.tolerance}"
    assert r.source.strip() and r.tolerance.strip() and r.measured.strip()
    assert r.seconds >= 0


def test_check_names_are_unique():
    names = [f.check_name for f in CHECKS]
    assert len(set(names)) == len(names)


# --- the references themselves, against values printed in the sources ----------------------

def test_slab_eigenvalue_and_series_against_incropera():
    """First root of zeta tan(zeta) = Bi at Bi 0.5 is 0.6533 and at Bi 1.0 is 0.8603
    (Incropera & DeWitt Table 5.1, from memory); the mean excess starts at 1 and, at large Fo,
    follows its first term."""
    assert reference.slab_eigenvalues(0.5, 1)[0] == pytest.approx(0.6533, abs=2e-4)
    assert reference.slab_eigenvalues(1.0, 1)[0] == pytest.approx(0.8603, abs=2e-4)
    assert reference.slab_mean_excess(0.5, 1e-3)[0] == pytest.approx(1.0, abs=2e-3)
    z = reference.slab_eigenvalues(0.5, 1)[0]
    c1 = 4 * math.sin(z) / (2 * z + math.sin(2 * z))
    late = reference.slab_mean_excess(0.5, 5.0)[0]
    assert late == pytest.approx(c1 * math.sin(z) / z * math.exp(-z**2 * 5.0), rel=1e-6)


def test_fem_reference_reproduces_the_one_third_rule():
    """The finite-element reference on its own: a tab along the whole top edge with no
    resistance (a tiny one) gives the distributed-load result R_s H / (3 W)."""
    pytest.importorskip("skfem")
    W, H, r_s = 0.2, 0.1, 1e-4
    _, compliance = reference.fem_sheet_potential(1 / r_s, W, H, [(0.0, W, 1e-12)], 4, 8,
                                                  per_cell=2)
    assert compliance == pytest.approx(r_s * H / (3 * W), rel=1e-4)


# --- machinery ---------------------------------------------------------------------------------

@check("a check that fails", "invented for the test", "none")
def _failing() -> Outcome:
    return Outcome("1 vs 2", False)


@check("a check that breaks", "invented for the test", "none")
def _broken() -> Outcome:
    raise ZeroDivisionError("boom")


@check("a check that cannot run", "invented for the test", "none")
def _skipped() -> Outcome:
    raise SkipCheck("some-package not installed")


def test_run_check_reports_errors_and_skips():
    assert run_check(_failing).passed is False
    broken = run_check(_broken)
    assert broken.passed is False and "ZeroDivisionError: boom" in broken.measured
    assert broken.name == "a check that breaks"
    skipped = run_check(_skipped)
    assert skipped.passed is None and skipped.status == "skipped"
    assert "some-package not installed" in skipped.measured


def test_validate_exits_1_when_a_check_fails(monkeypatch, tmp_path, capsys):
    monkeypatch.setattr(validation, "CHECKS", (checks.glycol_properties, _failing, _skipped))
    assert validation.cmd_validate(tmp_path / "out", quick=True) == 1
    md = (tmp_path / "out" / "validation.md").read_text()
    assert "| FAIL |" in md and "| skipped |" in md and "| pass |" in md
    assert "a check that fails" in capsys.readouterr().err


def test_a_broken_map_is_reported_and_fails_the_run(monkeypatch, tmp_path):
    def broken(progress=None):
        raise RuntimeError("the map broke")

    monkeypatch.setattr(validation, "CHECKS", (checks.glycol_properties,))
    monkeypatch.setattr(validation, "run_fidelity_map", broken)
    assert validation.cmd_validate(tmp_path, quick=False) == 1
    md = (tmp_path / "validation.md").read_text()
    assert "The map did not finish:** RuntimeError: the map broke" in md


def _fake_rows():
    base = {"cell": "invented", "c_rate": 1.0, "temperature_C": 25.0, "voltage_rms_mV": 7.5,
            "voltage_max_mV": 20.0, "peak_as_run_C": 40.0, "peak_difference_K": -0.004,
            "dfn_peak_difference_K": 0.6, "grid_peak_difference_K": 0.1, "note": ""}
    failed = dict(base, c_rate=3.0, voltage_rms_mV=math.nan, voltage_max_mV=math.nan,
                  peak_as_run_C=math.nan, peak_difference_K=math.nan,
                  dfn_peak_difference_K=math.nan, grid_peak_difference_K=math.nan,
                  note="SPMe averaged failed",
                  messages={"SPMe averaged": "stopped at t = 39 s: <depleted> & more"})
    return [base, failed]


def test_map_table_marks_large_differences_and_lists_failures():
    head, rows = map_table_rows(_fake_rows(), mark=lambda t: f"[{t}]")
    assert len(head) == len(rows[0])
    assert rows[0][3] == "[7.5]" and rows[0][6] == "0.00" and rows[0][7] == "[+0.60]"
    assert rows[1][3] == "—"
    assert map_messages(_fake_rows()) == [
        "invented 3C 25 °C, SPMe averaged: stopped at t = 39 s: <depleted> & more"]


def test_report_renders_offline_with_the_map():
    import plotly.graph_objects as go
    import plotly.offline

    results = [checks.glycol_properties(), checks.duct_nusselt()]
    env = {"tool": "0.test", "date": "today", "python": "3", "platform": "p", "machine": "m",
           "libraries": {"numpy": np.__version__}}
    fidelity = {"rows": _fake_rows(), "seconds": 1.0, "settings": "a tiny map",
                "figure": go.Figure()}
    page = render_html(results, env, 2.0, False, fidelity)
    js = plotly.offline.get_plotlyjs()
    assert page.count(js) == 1  # plotly.js once, inline
    page = page.replace(js, "")
    assert "<script src" not in page and "cdn.plot.ly" not in page  # nothing to fetch
    assert "&lt;depleted&gt; &amp; more" in page  # messages escaped
    assert "<strong>7.5</strong>" in page
    md = render_markdown(results, env, 2.0, False, fidelity)
    assert "**7.5**" in md and "Shah & London" in md


def test_fuller_model_map_small():
    """One point of the map on the power cell: every figure finite, no failure, and the cheap
    models within the mild-case bounds at 1C and 25 degC (5 mV, 0.5 K; issue 10)."""
    settings = MapSettings(c_rates=(1.0,), temperatures_C=(25.0,), cells_in_grid=24)
    rows, seconds = fuller_model_map(settings, cells=["bus_power_12ah"])
    assert len(rows) == 1 and seconds > 0
    row = rows[0]
    assert row["note"] == ""
    for key in ("voltage_rms_mV", "voltage_max_mV", "peak_as_run_C", "peak_difference_K",
                "dfn_peak_difference_K", "grid_peak_difference_K"):
        assert math.isfinite(row[key]), key
    assert row["voltage_rms_mV"] < 5.0 and abs(row["peak_difference_K"]) < 0.5


def test_validate_quick_end_to_end(tmp_path):
    """``python -m explorer validate --quick`` exits 0 on a clean checkout, writes both files,
    and every row of the checks table names its source."""
    out = tmp_path / "report"
    proc = subprocess.run([sys.executable, "-m", "explorer", "validate", "--quick", "--out",
                           str(out)], capture_output=True, text=True, timeout=600, cwd=ROOT)
    assert proc.returncode == 0, proc.stderr
    html_file, md_file = out / "validation.html", out / "validation.md"
    assert str(html_file) in proc.stdout and str(md_file) in proc.stdout
    md = md_file.read_text()
    table = md.split("## Checks")[1].split("## Where")[0]
    rows = [line for line in table.splitlines() if line.startswith("| ") and "---" not in line][1:]
    assert len(rows) == len(CHECKS)
    for line in rows:
        cells = [c.strip() for c in line.strip("|").split(" | ")]
        assert cells[2], line  # source
        assert cells[5] in ("pass", "skipped"), line
    assert "Skipped in the quick mode" in md
    for item in ("Python", "numpy", "CoolProp", "Date", "Tool"):
        assert f"| {item} |" in md
    import plotly.offline

    page = html_file.read_text().replace(plotly.offline.get_plotlyjs(), "")
    assert "<script src" not in page and "cdn.plot.ly" not in page
