"""Light results files (issue 13 item 4) and what a results file carries (contract G).

``explorer.results.save(ds, path, light=True)``: netCDF zlib compression, the 2-D fields in
float32 and only every ``field_interval_s`` (on the coordinate ``field_time``), the scalar
traces at every step in full precision. Read back, the key figures and the verdicts are those
of the run itself. The runs here use the invented demo cell.
"""

from __future__ import annotations

import json
import math
import re

import numpy as np
import pytest

import explorer
from explorer import results
from explorer.demo import demo_design
from explorer.report import render_report, write_report


@pytest.fixture(scope="module")
def demo_run():
    """The demo's run (2C discharge on the edge plate; the demo cell is invented)."""
    cell = explorer.load_cell("van_nmc_66ah")
    return explorer.simulate(cell, explorer.duty.discharge(c_rate=2.0), demo_design())


@pytest.fixture(scope="module")
def light(demo_run, tmp_path_factory):
    folder = tmp_path_factory.mktemp("light")
    limits = explorer.Limits(temperature_max_C=55.0, spread_K=5.0)
    path = results.save(demo_run, folder / "run.nc", limits=limits)
    return path, limits


def test_light_file_is_a_third_of_the_raw_size(demo_run, light):
    # the raw size of the Dataset as the tool wrote it before (float64, uncompressed)
    raw = demo_run.nbytes
    assert light[0].stat().st_size <= raw / 3


def test_traces_keep_every_step_fields_are_decimated(demo_run, light):
    back = explorer.open_results(light[0])
    assert back.sizes["time"] == demo_run.sizes["time"]
    for name in ("voltage", "temperature_hottest", "temperature_max", "soc_mean"):
        np.testing.assert_array_equal(back[name].values, demo_run[name].values)
    interval = back.attrs["field_interval_s"]
    assert interval > 0 and "every" in back.attrs["field_storage"]
    ft = back["field_time"].values
    assert ft.size <= results.FIELD_FRAMES + 2 and back["temperature"].dtype == np.float32
    assert back["temperature"].dims == ("field_time", "y", "x")
    assert set(ft) <= set(demo_run["time"].values)  # stored at times the run recorded
    assert ft[0] == demo_run["time"].values[0] and ft[-1] == demo_run["time"].values[-1]
    peak = demo_run["time"].values[int(np.argmax(demo_run["temperature_max"].values))]
    assert peak in ft  # the hottest moment is among the stored fields
    assert np.all(np.diff(ft) <= interval * 1.5 + 1e-9)


def test_fields_read_back_within_float32(demo_run, light):
    view = results.field_view(explorer.open_results(light[0]))
    assert view["temperature"].dims == ("time", "y", "x")
    original = demo_run["temperature"].sel(time=view["time"].values).values
    # float32 keeps about 7 significant digits: 1e-5 K at 50 degC
    np.testing.assert_allclose(view["temperature"].values, original, rtol=1e-6)


def test_key_figures_and_verdicts_read_back_unchanged(demo_run, light):
    path, limits = light
    back = explorer.open_results(path)
    before, after = results.key_figures(demo_run), results.key_figures(back)
    assert after.keys() == before.keys()
    for key, value in before.items():
        if isinstance(value, float) and math.isfinite(value):
            assert after[key] == pytest.approx(value, rel=1e-12), key
        else:
            assert after[key] == value or (value != value and after[key] != after[key]), key
    first, again = limits.check(demo_run), results.limits_from(back).check(back)
    assert again["verdicts"] == first["verdicts"] and again["met"] == first["met"]
    for name, margin in first["margins"].items():
        assert again["margins"][name] == pytest.approx(margin, rel=1e-12)


def test_a_short_run_keeps_every_field(tmp_path):
    cell = explorer.load_cell("van_nmc_66ah")
    ds = explorer.simulate(cell, explorer.duty.discharge(c_rate=1.0, end_time_s=300),
                           grid=(6, 4), electrochemistry="spm", output_interval_s=30.0)
    assert ds.sizes["time"] <= results.FIELD_FRAMES
    back = explorer.open_results(results.save(ds, tmp_path / "short.nc"))
    assert back["temperature"].dims == ("time", "y", "x")
    with pytest.raises(explorer.validators.InputError, match="field_interval_s"):
        results.save(ds, tmp_path / "bad.nc", field_interval_s=-1.0)
    coarse = explorer.open_results(results.save(ds, tmp_path / "c.nc", field_interval_s=150.0))
    assert coarse.sizes["field_time"] == 3 and coarse.attrs["field_interval_s"] == 150.0


def test_field_interval_ladder():
    t = np.linspace(0.0, 1800.0, 200)
    assert results.field_interval(t) == 50.0  # 1800 s / 59 = 30.5 s -> the next of 1-2-5
    assert results.field_interval(np.linspace(0.0, 100.0, 5)) == 2.0


def test_what_a_results_file_carries(demo_run):
    a = demo_run.attrs
    assert a["kind"] == "run" and a["cell_file"] == "van_nmc_66ah.toml"
    assert a["cell_file_sha256"] == a["cell_sha256"] and len(a["cell_file_sha256"]) == 64
    assert "invented" in a["data_note"]
    notes = json.loads(a["data_notes"])
    assert len(notes) == 1 and "invented" in notes[0] and "van_nmc_66ah.toml" in notes[0]
    inputs = json.loads(a["inputs"])
    assert set(inputs) == {"cell", "duty", "cooling", "model", "start"}
    assert inputs["cooling"]["plate"]["flow_L_min"] == 2.0
    assert inputs["model"]["grid"] == [a["grid_nx"], a["grid_ny"]]
    assert inputs["start"] == {"soc": 1.0, "temperature_C": 25.0}
    # no local absolute path anywhere in the attributes
    assert not any(re.search(r"(^|[\"' ])/(home|tmp|work|root)/", str(v)) for v in a.values())


def test_an_invented_profile_is_a_data_note(tmp_path):
    profile = tmp_path / "route.csv"
    profile.write_text("# INVENTED for this test: a load for one cell\ntime_s,current_A\n"
                       "0,10\n60,20\n120,0\n", encoding="utf-8")
    cell = explorer.load_cell("van_nmc_66ah")
    ds = explorer.simulate(cell, explorer.duty.profile_csv(profile), layout="single",
                           electrochemistry="spm")
    notes = json.loads(ds.attrs["data_notes"])
    assert any(n.startswith("load profile route.csv: INVENTED") for n in notes)
    assert str(tmp_path) not in ds.attrs["inputs"]
    text = render_report(ds)  # the run in memory: its report names the file, not the folder
    assert "route.csv" in text and str(tmp_path) not in text
    assert "load profile route.csv: INVENTED" in text  # in the banner


def test_portable_paths():
    assert results.portable("/home/me/cells/a.toml") == "a.toml"
    assert results.portable("C:\\cells\\b.toml") == "b.toml"
    assert json.loads(results.portable('{"source": "/tmp/x/p.csv", "n": 2}')) == {
        "source": "p.csv", "n": 2}
    assert results.portable("all 1 duty step(s) ran") == "all 1 duty step(s) ran"


def test_report_frames_bounded_and_plotlyjs_beside(demo_run, light, tmp_path):
    text = render_report(results.open_results(light[0]))
    for div in ("run0-temperature-plot", "run0-heat_flux-plot"):
        start = text.index(f'id="{div}"')
        script = text[start:text.index("</script>", start)]
        frames = script.count('"traces":[0]')
        assert 2 <= frames <= 60, div
    path = write_report(demo_run, tmp_path / "a.html", plotlyjs="beside")
    write_report(demo_run, tmp_path / "b.html", plotlyjs="beside")
    scripts = sorted(p.name for p in tmp_path.glob("*.js"))
    assert len(scripts) == 1 and scripts[0].startswith("plotly-")  # shared, written once
    html = path.read_text(encoding="utf-8")
    assert f"src='{scripts[0]}'" in html and "http" not in html.split("</head>")[0]
    assert path.stat().st_size < (tmp_path / scripts[0]).stat().st_size


def test_a_template_cell_is_a_data_note():
    from types import SimpleNamespace

    # the shape of a cell built on a chemistry template (explorer.cell.datasheet): each value's
    # provenance in cell.extra["provenance"]; the names and values are invented
    cell = SimpleNamespace(name="built pouch", source_path="/somewhere/built.toml", sha256="ab",
                           extra={"data_note": "from the maker's data sheet",
                                  "provenance": {"cell.nominal_capacity": "data sheet",
                                                 "negative.diffusivity": "template",
                                                 "positive.diffusivity": "template"},
                                  "warnings": ["geometry inconsistent (invented)"]})
    attrs = results.data_attrs(cell)
    notes = json.loads(attrs["data_notes"])
    assert notes == ["cell built pouch: 2 value(s) from a chemistry template "
                     "(negative.diffusivity, positive.diffusivity)"]
    assert attrs["cell_file"] == "built.toml" and attrs["cell_file_sha256"] == "ab"
    assert json.loads(attrs["cell_warnings"]) == ["geometry inconsistent (invented)"]
