"""`python -m explorer report` on every kind of results file the tool writes (issue 13 item 2).

A run, a module run, the two files of a sizing, a sweep, several runs side by side, and the
demo's own report; a foreign netCDF file and a sweep cache entry give one line and exit 2. The
HTML is parsed with the standard library's ``html.parser`` (a tokenizer following the WHATWG
HTML Living Standard), not searched as a string alone. Every scenario here is invented.
"""

from __future__ import annotations

import json
import re
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

import explorer
from explorer import results
from explorer.cli import main

# A cheap scenario (invented): averaged layout on a coarse grid, SPM, five minutes of 2C.
SCENARIO = """
[scenario]
name = "report kinds (invented)"
cell = "van_nmc_66ah"
[model]
electrochemistry = "spm"
layout = "averaged"
grid = [6, 4]
output_interval_s = 30.0
[[duty]]
step = "discharge"
c_rate = 2.0
end_time_s = 300
[cooling]
design = "edge_plate"
edge = "bottom"
fin_mm = 0.5
[cooling.plate]
kind = "cold_plate"
coolant = "water"
flow_L_min = 2.0
inlet_C = 25.0
[limits]
temperature_max_C = 45.0
spread_K = 8.0
[size]
vary = "flow_L_min"
bounds = [0.5, 4.0]
samples = 3
[sweep.axes]
flow_L_min = [1.0, 3.0]
inlet_C = [20.0, 25.0]
"""


class _Page(HTMLParser):
    """Text, element ids, headings and plot containers of a report."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.text: list[str] = []
        self.ids: list[str] = []
        self.anchors: list[str] = []
        self.headings: list[str] = []
        self.tables: list[list[list[str]]] = []
        self._script = False
        self._heading = None
        self._cell: list[str] | None = None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if a.get("id"):
            self.ids.append(a["id"])
        if tag == "a" and (a.get("href") or "").startswith("#"):
            self.anchors.append(a["href"][1:])
        if tag == "script":
            self._script = True
        if tag in ("h1", "h2", "h3"):
            self._heading = []
        if tag == "table":
            self.tables.append([])
        if tag == "tr" and self.tables:
            self.tables[-1].append([])
        if tag in ("td", "th"):
            self._cell = []

    def handle_endtag(self, tag):
        if tag == "script":
            self._script = False
        if tag in ("h1", "h2", "h3") and self._heading is not None:
            self.headings.append("".join(self._heading).strip())
            self._heading = None
        if tag in ("td", "th") and self._cell is not None and self.tables:
            self.tables[-1][-1].append("".join(self._cell).strip())
            self._cell = None

    def handle_data(self, data):
        if self._script:
            return
        self.text.append(data)
        if self._heading is not None:
            self._heading.append(data)
        if self._cell is not None:
            self._cell.append(data)

    @property
    def body(self) -> str:
        return " ".join(" ".join(self.text).split())


def parse(path: Path) -> _Page:
    page = _Page()
    page.feed(path.read_text(encoding="utf-8"))
    page.close()
    return page


ABSOLUTE = re.compile(r"(?<![\w.])(/(home|tmp|work|root|Users|var|private)/|[A-Z]:\\)")


def check_page(path: Path, folder: Path) -> _Page:
    """What every report must hold: unique ids, the caution at both ends, no local path."""
    page = parse(path)
    text = path.read_text(encoding="utf-8")
    assert len(page.ids) == len(set(page.ids)), "element ids must be unique"
    assert set(page.anchors) <= set(page.ids), "every link of the contents leads somewhere"
    assert page.body.count(" ".join(results.CAUTION.split())) >= 2
    assert str(folder) not in text and not ABSOLUTE.search(page.body)
    return page


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """Each kind of file, written by the commands (run, size, sweep) and the Python API
    (a module run)."""
    folder = tmp_path_factory.mktemp("kinds")
    scenario = folder / "case.toml"
    scenario.write_text(SCENARIO, encoding="utf-8")
    assert main(["run", str(scenario)]) in (0, 1)
    assert main(["size", str(scenario)]) in (0, 1)
    assert main(["sweep", str(scenario), "--scheduler", "serial"]) in (0, 1)
    plate = explorer.cooling.cold_plate("water", 2.0, 25.0, cells_per_plate=3)
    module = explorer.simulate_module("van_nmc_66ah",
                                      explorer.duty.discharge(c_rate=2.0, end_time_s=300),
                                      explorer.cooling.face_plate(plate),
                                      electrochemistry="spm", grid=(6, 4),
                                      output_interval_s=30.0)
    results.save(module, folder / "module.nc", limits=explorer.Limits(temperature_max_C=45.0,
                                                                       cell_to_cell_K=3.0))
    return {"folder": folder, "run": folder / "case_run.nc", "size": folder / "case_size.nc",
            "curve": folder / "case_size_curve.nc", "sweep": folder / "case_sweep.nc",
            "module": folder / "module.nc"}


@pytest.mark.parametrize("kind", ["run", "size", "curve", "sweep", "module"])
def test_report_of_each_kind_exits_0(files, tmp_path, kind, capsys):
    out = tmp_path / f"{kind}.html"
    assert main(["report", str(files[kind]), "--out", str(out)]) == 0
    assert str(out) in capsys.readouterr().out
    page = check_page(out, files["folder"])
    # the file's kind attribute (contract G)
    with xr.open_dataset(files[kind]) as ds:
        assert ds.attrs["kind"] == {"run": "run", "size": "sizing", "curve": "sizing_curve",
                                    "sweep": "sweep", "module": "module"}[kind]
        assert "invented" in ds.attrs["data_note"]
    assert "Invented or template data." in page.body


def test_run_report_holds_the_recorded_limits(files, tmp_path):
    out = tmp_path / "run.html"
    assert main(["report", str(files["run"]), "--out", str(out)]) == 0
    page = parse(out)
    # the scenario's [limits] travelled inside the results file
    assert "Held against the limits recorded in the results file" in page.body
    verdict = next(t for t in page.tables if t and t[0][:2] == ["limit", "limit value"])
    assert [row[1] for row in verdict[1:]] == ["45 °C", "8 K"]
    ds = explorer.open_results(files["run"])
    check = results.limits_from(ds).check(ds)
    assert [row[4].split(":")[0] for row in verdict[1:]] == [
        {"met": "met", "not met": "NOT met"}.get(v, "not evaluated")
        for v in check["verdicts"].values()]


def test_module_report_has_its_own_section(files, tmp_path):
    out = tmp_path / "module.html"
    assert main(["report", str(files["module"]), "--out", str(out)]) == 0
    page = parse(out)
    assert any(h.startswith("Module view") for h in page.headings)
    cells = next(t for t in page.tables if t and t[0][0].startswith("cell (0 = first"))
    assert len(cells) == 1 + 3  # a row per cell
    assert "cell_to_cell_K" in page.body
    assert "module-view-plot" in " ".join(page.ids)


def test_sizing_report_brings_both_files(files, tmp_path):
    for name in ("size", "curve"):
        out = tmp_path / f"{name}.html"
        assert main(["report", str(files[name]), "--out", str(out)]) == 0
        page = parse(out)
        assert "Sizing" in page.headings and "What was run" in page.headings
        assert any(i.startswith("sizing-plot") for i in page.ids)
    curve = xr.open_dataset(files["curve"]).load()
    table = next(t for t in parse(tmp_path / "curve.html").tables
                 if t and t[0][0].startswith("flow"))
    assert len(table) == 1 + curve.sizes["value"]  # every evaluated value


def test_sweep_report_has_a_table_and_a_map(files, tmp_path):
    out = tmp_path / "sweep.html"
    assert main(["report", str(files["sweep"]), "--out", str(out)]) == 0
    page = parse(out)
    sweep = xr.open_dataset(files["sweep"]).load()
    cases = int(np.prod([sweep.sizes[a] for a in ("flow_L_min", "inlet_C")]))
    table = next(t for t in page.tables if t and t[0][0] == "flow (L/min)")
    assert len(table) == 1 + cases and table[0][1] == "inlet (°C)"
    assert "sweep0-map-plot" in page.ids
    assert "Map of the swept figures against the axes" in page.headings


def test_two_runs_side_by_side(files, tmp_path):
    out = tmp_path / "two.html"
    assert main(["report", str(files["run"]), str(files["size"]), "--out", str(out)]) == 0
    page = check_page(out, files["folder"])
    assert "Comparison, side by side" in page.headings
    table = next(t for t in page.tables if t and t[0][0] == "" and len(t[0]) == 3)
    assert table[0][1] == "case_run.nc" and table[0][2].startswith("case_size.nc")
    assert {"run0", "run1", "comparison-plot"} <= set(page.ids)


def test_foreign_netcdf_is_one_line_and_exit_2(tmp_path, capsys):
    foreign = tmp_path / "ocean.nc"
    xr.Dataset({"salinity": ("depth", np.arange(3.0))}).to_netcdf(foreign)
    assert main(["report", str(foreign)]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and "did not write" in err
    assert not foreign.with_suffix(".html").exists()
    entry = tmp_path / "0123abcd.nc"
    xr.Dataset(attrs={"case_status": "completed", "cache_key": "x"}).to_netcdf(entry)
    assert main(["report", str(entry)]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and "sweep cache entry" in err


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    folder = tmp_path_factory.mktemp("demo")
    assert main(["demo", "--out", str(folder)]) == 0
    return folder


def test_demo_report_stands_alone(demo):
    """The checks of issue 13 on the demo's report."""
    path = next(demo.glob("*_report.html"))
    page = check_page(path, demo)
    inputs = next(t for t in page.tables if t and t[0] == ["group", "input", "value", "unit"])
    names = {row[1] for row in inputs[1:]}
    assert {"coolant", "flow", "inlet", "fin", "cell", "duty"} <= names
    flow = next(row for row in inputs if row[1] == "flow")
    assert flow[2:] == ["2", "L/min"]  # rounded, with its unit
    assert "invented" in page.body
    for heading in ("What was run", "Verdict against the limits", "Warnings", "Inputs",
                    "Assumptions: what the model leaves out",
                    "Appendix: settings and provenance"):
        assert heading in page.headings
    # no raw JSON with 15 digits anywhere in the text
    assert not re.search(r"\d\.\d{9,}", page.body)


def test_demo_report_rebuilt_from_its_file_loses_nothing(demo, tmp_path):
    nc = next(demo.glob("*.nc"))
    out = tmp_path / "rebuilt.html"
    assert main(["report", str(nc), "--out", str(out)]) == 0
    first, again = parse(next(demo.glob("*_report.html"))), parse(out)
    verdict = [t for t in first.tables if t and t[0][:2] == ["limit", "limit value"]]
    assert verdict and verdict == [t for t in again.tables
                                   if t and t[0][:2] == ["limit", "limit value"]]
    inputs = [t for t in first.tables if t and t[0] == ["group", "input", "value", "unit"]]
    assert inputs == [t for t in again.tables if t and t[0] == ["group", "input", "value",
                                                                 "unit"]]


def test_a_file_shaped_like_a_run_but_short_is_one_line(tmp_path, capsys):
    fake = tmp_path / "fake_run.nc"
    xr.Dataset({"voltage": ("time", [4.0, 3.9]), "temperature_max": ("time", [25.0, 26.0])},
               coords={"time": [0.0, 1.0]}).to_netcdf(fake)
    assert main(["report", str(fake)]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and "missing" in err and "fake_run.nc" in err


def _table_of(page: _Page, first: str) -> dict[str, list[str]]:
    """A two-or-more-column table whose header row starts with ``first``, keyed by row label."""
    table = next(t for t in page.tables if t and t[0] and t[0][0] == first)
    return {row[0]: row[1:] for row in table[1:] if row}


def test_module_figures_say_what_they_span(files, tmp_path):
    out = tmp_path / "module_words.html"
    assert main(["report", str(files["module"]), "--out", str(out)]) == 0
    page = parse(out)
    key = _table_of(page, "figure")
    # the heats add up over the cells (results.key_figures sums them), the energy is per cell
    assert "Heat generated, all 3 cells (kJ)" in key and "Energy delivered per cell (Wh)" in key
    ds = explorer.open_results(files["module"])
    heat = results.key_figures(ds)["heat_generated_J"]
    assert key["Heat generated, all 3 cells (kJ)"][0] == f"{heat / 1e3:.1f}"
    # the coolant outlet a limit reads (the highest during the run) beside the design-point one
    rows = {r[0]: r[1:] for t in page.tables for r in t[1:] if r}
    highest = float(np.nanmax(ds["coolant_outlet"].values))
    assert rows["Highest coolant outlet during the run (°C)"][0] == f"{highest:.2f}"
    assert "Coolant outlet at the run's mean heat into the plate (°C)" in rows


def test_sweep_words_name_the_swept_values(files, tmp_path):
    out = tmp_path / "sweep_words.html"
    assert main(["report", str(files["sweep"]), "--out", str(out)]) == 0
    page = parse(out)
    what = {r[0]: r[1] for t in page.tables for r in t if len(r) == 2}
    # the cooling row gives the base design; it says which of its values were swept
    assert "swept: flow, inlet" in what["Cooling"]
    assert "grid 6 × 4" in what["Model"] and "output interval 30 s" in what["Model"]
    assert "_" not in what["Model"]  # words, not identifiers
    table = next(t for t in page.tables if t and t[0][0] == "flow (L/min)")
    column = table[0].index("SOC at the end (%)")
    sweep = xr.open_dataset(files["sweep"]).load()
    assert float(table[1][column]) > 1.0 or float(sweep["end_soc"].min()) < 0.01  # in %


def test_run_inputs_read_in_engineering_words(files, tmp_path):
    out = tmp_path / "run_words.html"
    assert main(["report", str(files["run"]), "--out", str(out)]) == 0
    page = parse(out)
    inputs = next(t for t in page.tables if t and t[0] == ["group", "input", "value", "unit"])
    rows = {(r[0], r[1]): r[2:] for r in inputs[1:]}
    assert rows[("start", "SOC")] == ["100", "%"]  # as on the first screen, not "1"
    assert rows[("model", "output interval")] == ["30", "s"]


def test_a_measured_ocv_table_is_named_in_the_file_and_the_report(tmp_path):
    # A cell whose positive curve comes from a full-cell OCV table (the van cell's own OCV
    # sampled, invented data): the results file names the table by file name and content hash
    # (results.data_attrs), and the report's provenance shows it, with no local path.
    from explorer.cell import list_demo_cells, load_cell, ocv
    from explorer.report import render_report

    ref = load_cell("van_nmc_66ah")
    soc = np.concatenate([np.linspace(0, 0.1, 21), np.linspace(0.12, 1, 45)])
    volts = ocv(ref.negative, ref.positive, soc)
    (tmp_path / "ocv.csv").write_text("# invented test table\nsoc,ocv_V\n" + "".join(
        f"{s:.6g},{v:.6g}\n" for s, v in zip(soc, volts, strict=True)), encoding="utf-8")
    text = list_demo_cells()["van_nmc_66ah"].read_text(encoding="utf-8")
    text = text.replace('ocp = "nmc"\n', "", 1).replace(
        "[geometry]", 'ocv_table = "ocv.csv"\n\n[geometry]', 1)
    (tmp_path / "cell.toml").write_text(text, encoding="utf-8")
    run = explorer.simulate(load_cell(tmp_path / "cell.toml"),
                            explorer.duty.discharge(c_rate=1.0, end_time_s=60), None, "spm",
                            "single")
    tables = json.loads(run.attrs["cell_tables"])
    assert tables["cell.ocv_table"]["file"] == "ocv.csv"
    assert len(tables["cell.ocv_table"]["sha256"]) == 64
    page = _Page()
    page.feed(render_report(run))
    assert "Cell table cell.ocv_table" in page.body and "ocv.csv" in page.body
    assert str(tmp_path) not in page.body


def test_each_file_keeps_its_own_limits_beside_a_sizing(files, tmp_path):
    # a run recorded with its own limits, reported with a sizing of other limits: the run is
    # held against its own (the sizing's limits go with its curve only)
    ds = explorer.open_results(files["run"])
    own = tmp_path / "own_limits.nc"
    results.save(ds, own, limits=explorer.Limits(temperature_max_C=30.0))
    out = tmp_path / "mixed.html"
    assert main(["report", str(own), str(files["curve"]), "--out", str(out)]) == 0
    page = parse(out)
    verdicts = [t for t in page.tables if t and t[0][:2] == ["limit", "limit value"]]
    assert [row[1] for row in verdicts[0][1:]] == ["30 °C"]  # the run's own
    assert [row[1] for row in verdicts[1][1:]] == ["45 °C", "8 K"]  # the sized run's
    assert "Held against the limits given" not in page.body
