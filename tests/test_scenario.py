"""Scenario files and the run/size/sweep command functions.

The bundled scenarios are INVENTED situations (see each file's header). The
checks here are about the file layout and the messages (file, field, value,
expectation), and about the commands end to end on cheap real runs: the
commands' tables must agree with the Dataset they write (self-consistency,
common practice).
"""

from __future__ import annotations

import textwrap
from pathlib import Path

import pytest
import xarray as xr

from explorer.limits import Limits
from explorer.scenario import ScenarioError, cmd_run, cmd_size, cmd_sweep, load_scenario

BUNDLED = sorted((Path(__file__).parents[1] / "demo_cells" / "scenarios").glob("*.toml"))

# A cheap scenario for the commands: averaged layout, SPM, coarse grid, short duty.
CHEAP = """
[scenario]
name = "cheap test scenario (invented)"
cell = "van_nmc_66ah"

[model]
electrochemistry = "spm"
layout = "averaged"
grid = [6, 4]
start_temperature_C = 25.0
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
kind = "fixed_sink"
temperature_C = 25.0
h_W_m2K = 2000.0
"""


def write(tmp_path, text, name="case.toml") -> Path:
    path = tmp_path / name
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


@pytest.mark.parametrize("path", BUNDLED, ids=[p.stem for p in BUNDLED])
def test_bundled_scenarios_load(path):
    sc = load_scenario(path)
    assert sc.cell.sha256 and sc.duty and sc.cooling is not None
    assert isinstance(sc.limits, Limits)
    assert sc.size is not None or sc.sweep is not None
    if sc.size is not None:
        assert sc.size["vary"] in sc.cooling.parameters()
    if sc.sweep is not None:
        assert set(sc.sweep["axes"]) <= set(sc.cooling.parameters())
    assert "INVENTED" in path.read_text(encoding="utf-8").splitlines()[0]


def test_required_bundle_names():
    names = {p.name for p in BUNDLED}
    assert "van_edge_plate_size.toml" in names
    assert any("sweep" in n for n in names)


def test_loads_steps_cooling_and_combined(tmp_path):
    text = CHEAP + """
    [[duty]]
    step = "rest"
    seconds = 60

    [[duty]]
    step = "repeat"
    times = 2
    steps = [{step = "charge", c_rate = 1.0, end_time_s = 30}, {step = "rest", seconds = 30}]

    [[cooling.with]]
    design = "tab_cooling"
    busbar_C = 30.0
    """
    sc = load_scenario(write(tmp_path, text))
    assert [s.kind for s in sc.duty] == ["current", "rest", "current", "rest", "current", "rest"]
    assert sc.cooling.kind == "combined"
    assert sc.model["grid"] == (6, 4)


BAD = [
    # (what to change, the pieces the message must contain)
    ("[extra]\nx = 1\n", ["unknown field `extra`", "scenario, model"]),
    ("[limits]\ntemperature_max_C = 318.0\n", ["`limits`", "318", "kelvin"]),
    ("[size]\nvary = \"flow_L_min\"\nbounds = [5.0, 1.0]\n", ["`size.bounds`", "lo < hi"]),
    ("[size]\nvary = \"flow_L_min\"\nbounds = [1.0]\n", ["`size.bounds`", "[lo, hi]"]),
    ("[sweep.axes]\nflow_L_min = 2.0\n", ["`sweep.axes.flow_L_min`", "list of numbers"]),
    ("[sweep.axes]\nflow_L_min = [1.0, \"two\"]\n", ["`sweep.axes.flow_L_min[1]`", "'two'"]),
]


@pytest.mark.parametrize("extra, pieces", BAD)
def test_bad_tables_name_file_field_value(tmp_path, extra, pieces):
    path = write(tmp_path, CHEAP + extra)
    with pytest.raises(ScenarioError) as err:
        load_scenario(path)
    msg = str(err.value)
    assert str(path) in msg
    for piece in pieces:
        assert piece in msg


REPLACED = [
    ('c_rate = 2.0', 'c_rat = 2.0', ["unknown field `duty[0].c_rat`", "c_rate"]),
    ('c_rate = 2.0', 'c_rate = -2.0', ["`duty[0]`", "c_rate", "-2"]),
    ('step = "discharge"', 'step = "drain"', ["`duty[0].step` = 'drain'", "discharge, charge"]),
    ('design = "edge_plate"', 'design = "heat_pipe"', ["`cooling.design` = 'heat_pipe'",
                                                      "edge_plate"]),
    ('fin_mm = 0.5', 'fin_mm = -0.5', ["`cooling`", "fin_mm", "-0.5"]),
    ('fin_mm = 0.5', 'fins = 2', ["unknown field `cooling.fins`", "fin_mm"]),
    ('kind = "fixed_sink"', 'kind = "ice"', ["`cooling.plate.kind` = 'ice'", "cold_plate"]),
    ('grid = [6, 4]', 'grid = [6]', ["`model.grid` = [6]", "[nx, ny]"]),
    ('layout = "averaged"', 'layot = "averaged"', ["unknown field `model.layot`", "layout"]),
    ('cell = "van_nmc_66ah"', 'cell = 5', ["`scenario.cell` = 5", "demo cell name"]),
]


@pytest.mark.parametrize("old, new, pieces", REPLACED)
def test_bad_fields_name_file_field_value(tmp_path, old, new, pieces):
    assert old in CHEAP
    path = write(tmp_path, CHEAP.replace(old, new, 1))
    with pytest.raises(ScenarioError) as err:
        load_scenario(path)
    msg = str(err.value)
    assert str(path) in msg
    for piece in pieces:
        assert piece in msg, msg


def test_syntax_error_and_missing_file(tmp_path):
    path = write(tmp_path, "[scenario\nname = 1\n")
    with pytest.raises(ScenarioError, match=r"not valid TOML.*line 1"):
        load_scenario(path)
    with pytest.raises(ScenarioError, match="no such scenario file"):
        load_scenario(tmp_path / "missing.toml")
    path = write(tmp_path, CHEAP.replace("[[duty]]", "[[dutty]]"))
    with pytest.raises(ScenarioError, match="unknown field `dutty`"):
        load_scenario(path)


def test_commands_return_2_on_bad_input(tmp_path, capsys):
    path = write(tmp_path, CHEAP.replace("c_rate = 2.0", "c_rate = -1"))
    assert cmd_run(path, tmp_path) == 2
    assert "error:" in capsys.readouterr().err
    assert cmd_size(write(tmp_path, CHEAP, "nosize.toml"), tmp_path) == 2  # no [size]/[limits]
    assert "no `[size]` table" in capsys.readouterr().err
    assert cmd_sweep(write(tmp_path, CHEAP, "nosweep.toml"), tmp_path, "serial") == 2


# --------------------------------------------------------------------------- real runs


def test_cmd_run_writes_the_dataset_and_prints_margins(tmp_path, capsys):
    path = write(tmp_path, CHEAP + "[limits]\ntemperature_max_C = 50.0\nspread_K = 8.0\n")
    code = cmd_run(path, tmp_path / "out")
    out = capsys.readouterr().out
    ds = xr.open_dataset(tmp_path / "out" / "case_run.nc").load()
    # the limits hold the hottest point anywhere (core included) and the in-cell spread
    peak = float(ds["temperature_hottest"].max())
    assert f"{peak:.4g}" in out
    assert "temperature_max_C" in out and "margin" in out
    assert code == (0 if peak <= 50.0 and float(
        (ds["temperature_hottest"] - ds["temperature_coldest"]).max()) <= 8.0 else 1)


def test_cmd_size_and_sweep_on_a_fixed_sink(tmp_path, capsys):
    """Size the fin of an edge plate on a fixed-temperature sink, then sweep it."""
    text = CHEAP.replace("end_time_s = 300", "end_time_s = 1500") + """
    [limits]
    temperature_max_C = 40.0

    [size]
    vary = "fin_mm"
    bounds = [0.2, 3.0]
    rtol = 0.01

    [sweep.axes]
    fin_mm = [0.3, 2.0]
    """
    path = write(tmp_path, text)
    code = cmd_size(path, tmp_path)
    out = capsys.readouterr().out
    curve = xr.open_dataset(tmp_path / "case_size_curve.nc").load()
    assert "fin_mm =" in out
    assert code == (0 if curve.attrs["feasible"] else 1)
    run = xr.open_dataset(tmp_path / "case_size.nc").load()
    assert float(run["temperature_max"].max()) <= 40.0 or not curve.attrs["feasible"]
    code = cmd_sweep(path, tmp_path, "serial")
    out = capsys.readouterr().out
    ds = xr.open_dataset(tmp_path / "case_sweep.nc").load()
    assert code == 0 and ds.sizes["fin_mm"] == 2
    assert "meets" in out
    # a thicker fin, a cooler cell
    assert float(ds["peak_temperature_C"][1]) < float(ds["peak_temperature_C"][0])


def test_paths_are_relative_to_the_scenario_file(tmp_path):
    import shutil

    from explorer.cell import list_demo_cells

    (tmp_path / "cells").mkdir()
    shutil.copy(list_demo_cells()["van_nmc_66ah"], tmp_path / "cells" / "mine.toml")
    (tmp_path / "load.csv").write_text("time [s],current [A]\n0,66\n60,33\n120,0\n",
                                       encoding="utf-8")
    text = CHEAP.replace('cell = "van_nmc_66ah"', 'cell = "cells/mine.toml"')
    text = text.replace('step = "discharge"\nc_rate = 2.0\nend_time_s = 300',
                        'step = "profile_csv"\npath = "load.csv"')
    sc = load_scenario(write(tmp_path, text))
    assert Path(sc.cell.source_path).resolve() == (tmp_path / "cells" / "mine.toml").resolve()
    assert sc.duty[0].kind == "profile" and len(sc.duty[0].profile_time_s) == 3
    missing = write(tmp_path, text.replace("load.csv", "nowhere.csv"), "missing.toml")
    with pytest.raises(ScenarioError, match=r"duty\[0\].*nowhere.csv"):
        load_scenario(missing)


def test_cmd_run_lines_on_a_single_layout_without_limits(tmp_path, capsys):
    # the SOC in %, and a figure the layout cannot see as "-" with why (not "nan")
    text = CHEAP.replace('layout = "averaged"', 'layout = "single"').replace(
        "end_time_s = 300", "end_time_s = 300\nend_voltage_V = 4.1").replace(
        'step = "discharge"', 'step = "charge"')
    path = write(tmp_path, text.replace("start_temperature_C = 25.0",
                                        "start_temperature_C = 25.0\nstart_soc = 0.9"))
    cmd_run(path, tmp_path / "out")
    out = capsys.readouterr().out
    ds = xr.open_dataset(tmp_path / "out" / "case_run.nc").load()
    soc = 100.0 * float(ds["soc_mean"].values[-1])
    assert f"{soc:.4g}  %" in out
    assert "nan" not in out and "(not seen on layout 'single')" in out
