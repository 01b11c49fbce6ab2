"""The HTML report: one self-contained file with inputs, settings, key figures, plots and the caution.

Parsed with the Python standard library's ``html.parser`` (an independent HTML tokenizer following
the WHATWG HTML Living Standard tokenization rules), not by string search alone.
"""

from __future__ import annotations

import json
from html.parser import HTMLParser

import plotly.offline
import pytest
from synthetic import SyntheticSizing, synthetic_dataset

from explorer import report_parts as parts
from explorer import results
from explorer.report import cmd_report, render_report, write_report


class _Collect(HTMLParser):
    """Collect the text, the script blocks and the external references of a page."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.text: list[str] = []
        self.scripts: list[str] = []
        self.external: list[str] = []
        self.tags: dict[str, int] = {}
        self._in_script = False

    def handle_starttag(self, tag, attrs):
        self.tags[tag] = self.tags.get(tag, 0) + 1
        a = dict(attrs)
        for key in ("src", "href"):
            value = a.get(key) or ""
            if value.startswith(("http:", "https:", "//")):
                self.external.append(value)
        if tag == "script":
            self._in_script = True
            self.scripts.append("")

    def handle_endtag(self, tag):
        if tag == "script":
            self._in_script = False

    def handle_data(self, data):
        if self._in_script:
            self.scripts[-1] += data
        else:
            self.text.append(data)


def _parse(text: str) -> _Collect:
    p = _Collect()
    p.feed(text)
    p.close()
    return p


@pytest.fixture(scope="module")
def ds():
    return synthetic_dataset()


def test_report_is_self_contained_and_complete(tmp_path, ds):
    inputs = {"cell": "van_nmc_66ah", "flow_L_min": 2.5, "cooling": {"kind": "edge plate", "fin_mm": 0.5}}
    path = write_report(ds, tmp_path / "r.html", inputs=inputs, title="Edge plate review",
                        limits={"temperature_max_C": 45.0, "spread_K": 5.0})
    text = path.read_text(encoding="utf-8")
    page = _parse(text)
    body = " ".join(page.text)
    # no network: nothing loaded from outside, and the plotly.js bundle inline exactly once
    assert page.external == []
    assert '<script src="http' not in text
    bundle_head = plotly.offline.get_plotlyjs()[:40]  # "/**\n* plotly.js vX.Y.Z" banner
    assert sum(s.lstrip().startswith(bundle_head) for s in page.scripts) == 1
    # inputs, settings, key figures, caution, version
    assert "Edge plate review" in body
    assert "flow_L_min" in body and "2.5" in body and "fin_mm" in body
    assert "electrochemistry" in body and "spme" in body and "cell_sha256" in body
    figures = results.key_figures(ds)
    assert "Peak temperature (°C)" in body and f"{figures['peak_temperature_C']:.2f}" in body
    assert f"{figures['energy_delivered_Wh']:.1f}" in body
    assert results.CAUTION in body and body.count(results.CAUTION) >= 2  # top and footer
    assert ds.attrs["tool_version"] in body
    # the plots are there: one div per figure with plotly's call
    assert text.count("Plotly.newPlot") >= 3
    assert "Temperature at t" in text and "Heat generation by source" in text


def test_limits_and_hydraulics_tables(ds):
    from explorer import Limits

    text = render_report(ds, limits=Limits(temperature_max_C=40.0, spread_K=10.0))
    body = " ".join(_parse(text).text)
    figures = results.key_figures(ds)
    # margin = limit - figure (positive = met), the convention of explorer.Limits.check
    # the margin is shown to the figure's decimals: limit - shown figure = shown margin
    for limit, name in ((40.0, "peak_temperature_C"), (10.0, "max_spread_K")):
        shown, margin = parts.figure_and_margin(figures[name], limit - figures[name])
        assert f"{shown} " in body and f"{margin} K" in body
        assert abs(limit - float(shown) - float(margin)) < 1.5 * 10.0 ** -len(margin.split(".")[-1])
    assert "NOT met" in body
    # the synthetic run's plate: 1200 Pa = 1.2 kPa (SI prefix)
    assert "Pressure drop (kPa)" in body and " 1.2 " in f" {body} ".replace("\n", " ")


def test_report_of_several_runs_compares_them(tmp_path, ds):
    other = synthetic_dataset(rise_K=10.0)
    path = write_report({"baseline": ds, "face plate": other}, tmp_path / "two.html",
                        sizing=SyntheticSizing())
    body = " ".join(_parse(path.read_text(encoding="utf-8")).text)
    assert "Comparison" in body and "face plate (Δ to first)" in body
    delta = results.key_figures(other)["peak_temperature_C"] - results.key_figures(ds)["peak_temperature_C"]
    assert f"({delta:.2f})" in body  # the difference to the first run, signed
    assert "Sizing" in body and "limits met (invented)" in body


def test_atomic_write_leaves_no_temporary_files(tmp_path, ds):
    write_report(ds, tmp_path / "a.html")
    write_report(ds, tmp_path / "a.html")  # overwrite in place
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.html"]
    # readable by others like any file written under the usual umask 022 (not mkstemp's 0600)
    import os
    import stat

    mask = os.umask(0)
    os.umask(mask)
    assert stat.S_IMODE((tmp_path / "a.html").stat().st_mode) == 0o666 & ~mask


def test_text_is_escaped(ds):
    bad = ds.copy()
    bad.attrs["cell_name"] = "<script>alert(1)</script>"
    text = render_report(bad, inputs={"note": "<b>x</b>"})
    assert "<script>alert(1)</script>" not in text.split("</head>", 1)[1]
    assert "&lt;b&gt;x&lt;/b&gt;" in text


def test_bad_arguments(tmp_path, ds):
    with pytest.raises(ValueError, match="does not exist"):
        write_report(ds, tmp_path / "missing" / "r.html")
    with pytest.raises(ValueError, match="is a folder"):
        write_report(ds, tmp_path)
    with pytest.raises(TypeError, match="xarray.Dataset"):
        write_report(["not a dataset"], tmp_path / "r.html")
    with pytest.raises(TypeError, match="`inputs` must be a mapping"):
        write_report(ds, tmp_path / "r.html", inputs=[1])
    with pytest.raises(ValueError, match="no runs"):
        write_report([], tmp_path / "r.html")


def test_cmd_report_round_trip(tmp_path, ds, capsys):
    nc = results.save(ds, tmp_path / "run.nc")
    assert cmd_report(str(nc), None) == 0
    out = tmp_path / "run.html"
    assert out.is_file() and str(out) in capsys.readouterr().out
    body = " ".join(_parse(out.read_text(encoding="utf-8")).text)
    assert json.loads(ds.attrs["duty"])[0]["kind"] in body
    assert cmd_report(str(nc), str(tmp_path / "custom.html")) == 0
    assert (tmp_path / "custom.html").is_file()


def test_cmd_report_errors(tmp_path, capsys):
    assert cmd_report(str(tmp_path / "nope.nc"), None) == 2
    assert "nope.nc" in capsys.readouterr().err
    junk = tmp_path / "junk.nc"
    junk.write_text("not netcdf")
    assert cmd_report(str(junk), None) == 2
    assert "junk.nc" in capsys.readouterr().err


def test_report_of_a_real_run(tmp_path):
    import explorer

    cell = explorer.load_cell("van_nmc_66ah")
    ds = explorer.simulate(cell, explorer.duty.discharge(c_rate=2.0),
                           explorer.cooling.convection(10.0, 25.0), electrochemistry="spm",
                           layout="averaged", grid=(12, 8))
    path = write_report(ds, tmp_path / "real.html", inputs={"h_W_m2K": 10.0})
    body = " ".join(_parse(path.read_text(encoding="utf-8")).text)
    assert cell.sha256 in body and cell.name in body
    figures = results.key_figures(ds)
    assert f"{figures['charge_delivered_Ah']:.2f}" in body
    assert ds.attrs["status_message"] in body


def _ids(text: str) -> list[str]:
    class Ids(HTMLParser):
        def __init__(self):
            super().__init__()
            self.ids = []

        def handle_starttag(self, tag, attrs):
            self.ids += [v for k, v in attrs if k == "id"]

    p = Ids()
    p.feed(text)
    return p.ids


def test_ids_unique_with_several_runs_and_sizing(ds):
    # headings and figure containers once shared ids ("sizing", "comparison"): issue 13
    text = render_report({"a": ds, "b": synthetic_dataset(rise_K=10.0)}, sizing=SyntheticSizing())
    ids = _ids(text)
    assert len(ids) == len(set(ids))
    for base in ("sizing", "comparison", "run0-traces", "run1-traces"):
        assert f"{base}-plot" in ids and any(i.startswith(base) and i != f"{base}-plot"
                                             for i in ids)


def test_banner_for_invented_data_only(ds):
    body = " ".join(_parse(render_report(ds)).text)
    assert "Invented or template data." not in body  # the synthetic run names no data note
    noted = ds.copy()
    noted.attrs["data_notes"] = json.dumps(["cell X (x.toml): invented for the demo"])
    body = " ".join(_parse(render_report(noted)).text)
    assert "Invented or template data." in body and "invented for the demo" in body


# the shape of explorer.fidelity.summary (contract F); the numbers are invented
FIDELITY = {
    "rows": [{"variant": "dfn", "figure": "peak_temperature", "label": "hottest point anywhere",
              "unit": "degC", "as_run": 41.2, "fuller": 42.9, "difference": 1.7, "margin": 0.8,
              "could_flip": True}],
    "verdict_could_flip": "yes", "message": "the DFN run is 1.7 K hotter than the margin allows",
    "variants": ["as run", "dfn"], "skipped": [],
}


def test_fidelity_check_has_its_own_section_and_warns(ds):
    checked = ds.copy()
    checked.attrs["fidelity_summary"] = json.dumps(FIDELITY)
    page = _parse(render_report(checked))
    body = " ".join(page.text)
    assert "Fidelity check: the same design point on fuller models" in body
    assert "COULD FLIP" in body or "could flip" in body
    # the flag is among the first screen's warnings
    warnings = body.split("Warnings", 1)[1].split("Key figures", 1)[0]
    assert "verdict could flip" in warnings
    assert "Fidelity check" not in " ".join(_parse(render_report(ds)).text)


def test_first_screen_words_and_assumptions(tmp_path):
    import explorer
    from explorer.demo import demo_design

    run = explorer.simulate("van_nmc_66ah", explorer.duty.discharge(c_rate=2.0, end_time_s=120),
                            demo_design(), electrochemistry="spm", grid=(6, 4),
                            output_interval_s=30.0)
    body = " ".join(" ".join(_parse(render_report(run)).text).split())
    first = body.split("What was run", 1)[1].split("Key figures", 1)[0]
    for words in ("Van module NMC 66 Ah (file van_nmc_66ah.toml)", "66 Ah nominal",
                  "coated area 240 × 160 mm, 8.9 mm thick",
                  "2C discharge (constant current) for 120 s",
                  "edge cold plate under the bottom edge", "water at 2 L/min, inlet 25 °C",
                  "SPM (single particle model", "in-plane grid 6 × 4", "SOC 100 %",
                  "Held against the cell's data-sheet maximum"):
        assert words in first, words
    assumptions = body.split("Assumptions: what the model leaves out", 1)[1]
    for words in ("through-thickness mean", "channels only", "fin contact coefficient 2000",
                  "thermal runaway"):
        assert words in assumptions, words


def test_first_screen_warnings_name_an_early_end_and_the_cell():
    stopped = synthetic_dataset(status="cut_short")
    stopped.attrs["cell_warnings"] = json.dumps(["geometry inconsistent: the stated thickness "
                                                 "differs from the layers' (invented)"])
    body = " ".join(" ".join(_parse(render_report(stopped)).text).split())
    warnings = body.split("Warnings", 1)[1].split("Key figures", 1)[0]
    assert "was cut short" in warnings and "not the whole duty" in warnings
    assert "cell: geometry inconsistent" in warnings


def test_margin_has_the_figures_decimals():
    # 5 K limit, 22.0129 K spread: shown "22.01" and "-17.01" (was "-17", which does not add up)
    assert parts.figure_and_margin(22.0129, 5.0 - 22.0129) == ("22.01", "-17.01")
    assert parts.figure_and_margin(56.8857, 55.0 - 56.8857) == ("56.89", "-1.89")
    assert parts.figure_and_margin(0.26351, 5.0 - 0.26351) == ("0.2635", "+4.736")  # 3 places
    assert parts.figure_and_margin(1806.0, 1.0) == ("1806", "+1")


def test_duty_words_say_when_the_window_only_guards_a_step():
    # explorer.duty.resolve: the voltage window ends a step with no end of its own; for a
    # profile or a step with its own end it is a guard whose reaching cuts the duty short
    words = parts.duty_words
    assert words({"kind": "current", "c_rate": 2, "default_limit": True, "ends": []}) == \
        "2C discharge (constant current) until the cell's voltage window"
    timed = words({"kind": "current", "c_rate": 2, "default_limit": True,
                   "ends": [{"quantity": "time", "threshold": 300, "direction": "above"}]})
    assert timed.startswith("2C discharge (constant current) for 300 s") and "guards" in timed
    profile = words({"kind": "profile", "profile_quantity": "power", "source": "/a/route.csv",
                     "default_limit": True, "ends": []})
    assert "until" not in profile and "guards it" in profile and "/a/" not in profile
    assert words({"kind": "rest", "ends": [{"quantity": "time", "threshold": 900}]}) == \
        "rest for 900 s"


def test_every_verdict_of_a_run_cut_short_carries_it(ds):
    from explorer import Limits

    short = ds.copy()
    short.attrs.update(status="cut_short", status_message="cut short at t = 60 s (test)")
    body = " ".join(" ".join(_parse(render_report(
        short, limits=Limits(temperature_max_C=80.0, spread_K=0.001))).text).split())
    t_end = float(ds["time"].values[-1])
    note = f"(over the first {t_end:.0f} s only: the run was cut short; see the warnings)"
    assert f"met {note}" in body and f"NOT met {note}" in body


def test_small_heats_keep_their_digits():
    from explorer.report import format_figure

    assert format_figure("heat_generated_J", 32.72)[1] == "0.0327"
    assert format_figure("heat_generated_J", 29100.0)[1] == "29.1"
