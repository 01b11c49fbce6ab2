"""A results file carries its cell's face geometry, so a field map drawn from the file alone shows
the cell's own tabs (not only the bare outline), whatever cell it came from.

The cell is built from the INVENTED van data sheet (demo_cells/datasheets/) with its tabs moved
off the template's top edge: the negative tab to the left edge, the positive to the bottom edge.
Positions are compared in mm with a 0.01 mm tolerance (the attribute rounds to 0.1 um).
"""

from __future__ import annotations

import json
import logging
import tomllib
from pathlib import Path

import pytest
import xarray as xr

import explorer
from explorer import plots, results
from explorer.cell.datasheet import from_datasheet
from explorer.validators import InputError

SHEET = Path(__file__).resolve().parents[1] / "demo_cells" / "datasheets" / "van_nmc_66ah_sheet.toml"
TOL_MM = 0.01
# the data sheet gives tab centres from the body's corner; the cell file's are along the
# coated edge, 5 mm in (the van template's inset): 60 mm -> 55 mm, 200 mm -> 195 mm
NEG_CENTRE_MM, POS_CENTRE_MM, TAB_WIDTH_MM = 55.0, 195.0, 50.0
RUN = dict(electrochemistry="spm", layout="averaged", grid=(6, 4))


def _duty():
    return explorer.duty.discharge(c_rate=1.0, end_time_s=60.0)


@pytest.fixture(scope="module")
def own(tmp_path_factory):
    """An own cell (tabs on the left and bottom edges), run, saved and read back with xarray."""
    folder = tmp_path_factory.mktemp("own")
    raw = tomllib.loads(SHEET.read_text(encoding="utf-8"))
    raw["tabs"]["negative"].update(edge="left", centre="60 mm")
    raw["tabs"]["positive"].update(edge="bottom", centre="200 mm")
    cell = from_datasheet(raw, out=folder / "my_cell.toml")
    ds = explorer.simulate(cell, _duty(), None, **RUN)
    assert ds.attrs["status"] == "completed"
    path = results.save(ds, folder / "my_run.nc")
    with xr.open_dataset(path, engine="netcdf4") as f:
        loaded = f.load()
    return cell, loaded


@pytest.fixture(scope="module")
def demo():
    return explorer.simulate(explorer.load_cell("van_nmc_66ah"), _duty(), None, **RUN)


def _tabs(outline) -> dict:
    return {s["name"]: s for s in outline["shapes"] if s.get("name", "").startswith("tab ")}


def _centre(shape, axis: str) -> float:
    return (shape[f"{axis}0"] + shape[f"{axis}1"]) / 2


def _assert_own_tabs(tabs: dict) -> None:
    assert set(tabs) == {"tab negative", "tab positive"}
    neg, pos = tabs["tab negative"], tabs["tab positive"]
    # negative on the left edge: it stands out to the left of x = 0, centred at its position
    assert neg["x1"] == pytest.approx(0.0, abs=TOL_MM) and neg["x0"] < 0
    assert _centre(neg, "y") == pytest.approx(NEG_CENTRE_MM, abs=TOL_MM)
    assert neg["y1"] - neg["y0"] == pytest.approx(TAB_WIDTH_MM, abs=TOL_MM)
    # positive on the bottom edge: below y = 0
    assert pos["y1"] == pytest.approx(0.0, abs=TOL_MM) and pos["y0"] < 0
    assert _centre(pos, "x") == pytest.approx(POS_CENTRE_MM, abs=TOL_MM)
    assert pos["x1"] - pos["x0"] == pytest.approx(TAB_WIDTH_MM, abs=TOL_MM)


def test_the_template_puts_its_tabs_elsewhere():
    """The check below means something only if the template's tabs are not where ours are."""
    template = explorer.load_cell("van_nmc_66ah")
    assert {t.edge for t in template.geometry.tabs} == {"top"}


def test_a_loaded_own_cell_run_draws_its_tabs_where_the_cell_has_them(own):
    cell, ds = own
    raw = ds.attrs[results.FACE_GEOMETRY]
    assert len(raw.encode()) < 600  # a few hundred bytes
    recorded = results.face_geometry(ds)
    assert recorded.width_m * 1e3 == pytest.approx(cell.geometry.width_m * 1e3, abs=TOL_MM)
    assert [t.material for t in recorded.tabs] == [t.material for t in cell.geometry.tabs]
    from_file = plots.face_outline(ds)
    _assert_own_tabs(_tabs(from_file))
    # the same picture as when the caller hands the cell over
    with_cell = plots.face_outline(ds, cell=cell)
    for name, shape in _tabs(with_cell).items():
        other = _tabs(from_file)[name]
        for key in ("x0", "x1", "y0", "y1"):
            assert other[key] == pytest.approx(shape[key], abs=TOL_MM)
        assert other["label"]["text"] == shape["label"]["text"]
    assert from_file["width_mm"] == pytest.approx(with_cell["width_mm"], abs=TOL_MM)
    assert from_file["height_mm"] == pytest.approx(with_cell["height_mm"], abs=TOL_MM)
    # and the field map itself carries them
    fig = plots.field_figure(results.field_view(ds), "temperature", animate=False)
    assert {s.name for s in fig.layout.shapes} >= {"tab negative", "tab positive"}


def test_without_the_attribute_an_own_cell_draws_the_outline_and_a_demo_cell_its_tabs(own, demo):
    _, ds = own
    bare = ds.copy()
    del bare.attrs[results.FACE_GEOMETRY]
    outline = plots.face_outline(bare)  # a file written before the geometry was recorded
    assert _tabs(outline) == {}
    assert outline["width_mm"] == pytest.approx(240.0, abs=TOL_MM)  # from the grid
    assert outline["height_mm"] == pytest.approx(160.0, abs=TOL_MM)
    old_demo = demo.copy()
    del old_demo.attrs[results.FACE_GEOMETRY]
    tabs = _tabs(plots.face_outline(old_demo))  # found by the demo cell's name and checksum
    g = explorer.load_cell("van_nmc_66ah").geometry
    assert set(tabs) == {f"tab {t.name}" for t in g.tabs}
    for t in g.tabs:
        assert _centre(tabs[f"tab {t.name}"], "x") == pytest.approx(t.position_m * 1e3,
                                                                    abs=TOL_MM)


BROKEN = {
    "not JSON": "{width_m: 0.24",
    "a list": "[0.24, 0.16]",
    "no height": json.dumps({"width_m": 0.24, "tabs": []}),
    "negative width": json.dumps({"width_m": -0.24, "height_m": 0.16, "tabs": []}),
    "NaN position": '{"width_m":0.24,"height_m":0.16,"tabs":[{"name":"n","edge":"top",'
                    '"position_m":NaN,"width_m":0.05,"free_length_m":0.01,"polarity":"negative"}]}',
    "unknown edge": json.dumps({"width_m": 0.24, "height_m": 0.16, "tabs": [
        {"name": "n", "edge": "middle", "position_m": 0.05, "width_m": 0.05,
         "free_length_m": 0.01, "polarity": "negative"}]}),
    "tabs not a list": json.dumps({"width_m": 0.24, "height_m": 0.16, "tabs": "two"}),
}


@pytest.mark.parametrize("text", BROKEN.values(), ids=BROKEN.keys())
def test_a_malformed_attribute_falls_back_and_says_why_at_debug_level(own, demo, text, caplog):
    _, ds = own
    broken = ds.copy()
    broken.attrs[results.FACE_GEOMETRY] = text
    with pytest.raises(InputError, match="face_geometry"):
        results.face_geometry(broken)
    with caplog.at_level(logging.DEBUG, logger="explorer.plots"):
        outline = plots.face_outline(broken)
    assert _tabs(outline) == {} and outline["width_mm"] == pytest.approx(240.0, abs=TOL_MM)
    assert any("face geometry" in r.getMessage() for r in caplog.records)
    broken_demo = demo.copy()
    broken_demo.attrs[results.FACE_GEOMETRY] = text
    assert len(_tabs(plots.face_outline(broken_demo))) == 2  # the demo cell's, by name


def test_the_report_of_an_own_cell_run_draws_its_tabs(own, tmp_path):
    from explorer.report import write_report

    _, ds = own
    html = write_report(ds, tmp_path / "own.html").read_text(encoding="utf-8")
    start = html.index("Temperature field over the face")
    layout = _plotly_layout(html, start)
    tabs = {s["name"]: s for s in layout.get("shapes", []) if s.get("name", "").startswith("tab ")}
    _assert_own_tabs(tabs)


def _plotly_layout(html: str, start: int) -> dict:
    """The layout argument of the first ``Plotly.newPlot(div, data, layout, ...)`` after
    ``start`` (plotly's own call in the figure's HTML), decoded as JSON."""
    decoder = json.JSONDecoder()
    at = html.index("Plotly.newPlot(", start) + len("Plotly.newPlot(")
    values = []
    for _ in range(3):  # the div id, the traces, the layout
        while html[at] in " \t\r\n,":
            at += 1
        value, at = decoder.raw_decode(html, at)
        values.append(value)
    return values[2]


def test_a_sweep_with_fields_keeps_the_geometry(own):
    from explorer.sweeping import sweep

    cell, _ = own
    plate = explorer.cooling.edge_plate(
        explorer.cooling.cold_plate(coolant="water", flow_L_min=2.0, inlet_C=25.0), fin_mm=0.5)
    ds = sweep(cell, explorer.duty.discharge(c_rate=1.0, end_time_s=30.0), plate,
               {"flow_L_min": [1.0, 2.0]}, scheduler="serial", keep_fields=True,
               progress=False, **RUN)
    _assert_own_tabs(_tabs(plots.face_outline(ds)))


def test_the_app_draws_a_loaded_files_own_tabs_not_its_last_runs(own):
    """The app's last run was the demo cell; results of another cell shown afterwards (loaded
    from a file) draw that cell's recorded tabs, not the demo cell's."""
    _, loaded = own
    app = explorer.explore()
    assert app.run() is not None, app.last_error  # the default inputs: the van demo cell
    app.show(loaded)
    shapes = [s.to_plotly_json() for s in app.fig_temperature.figure.layout.shapes]
    _assert_own_tabs({s["name"]: s for s in shapes if str(s.get("name", "")).startswith("tab ")})
