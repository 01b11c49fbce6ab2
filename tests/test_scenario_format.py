"""One scenario format: the app's "Save inputs", ``python -m explorer run``, the app's "Load inputs"
and ``explorer.scenario.save`` all read and write the same TOML tables.

The checks are round trips inside the project (no outside source is needed: the claim is that
the three doors give the same file and the same results).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import xarray as xr

import explorer
from explorer import scenario
from explorer.app import inputs as app_inputs
from explorer.app.inputs import InputsFileError, defaults
from explorer.cli import main as cli_main

ROOT = Path(__file__).resolve().parents[1]
BUNDLED = sorted((ROOT / "demo_cells" / "scenarios").glob("*.toml"))

APP_VALUES = {**defaults(), "cell": "bus_power_12ah", "discharge_c_rate": 2.0,
              "cooling": "edge_plate", "flow_L_min": 1.5, "fin_mm": 0.3, "tab_cooling": True,
              "electrochemistry": "spm", "grid": "coarse", "limit_temperature_C": 50.0}


def _applied(values: dict) -> dict:
    return {k: v for k, v in values.items() if app_inputs.applies(k, values)}


def test_app_file_runs_on_the_cli_and_loads_back_with_the_same_results(tmp_path):
    path = app_inputs.save_inputs(APP_VALUES, tmp_path / "bus.toml")
    assert cli_main(["run", str(path), "--out", str(tmp_path)]) in (0, 1)  # 1: a limit not met
    cli_ds = xr.load_dataset(tmp_path / "bus_run.nc")
    back = app_inputs.load_inputs(path)
    assert _applied(back) == _applied(APP_VALUES)
    app_ds = app_inputs.inputs_to_call(back).run()
    assert cli_ds.attrs["status"] == app_ds.attrs["status"] == "completed"
    np.testing.assert_allclose(cli_ds.time.values, app_ds.time.values, rtol=1e-9)
    for name in ("voltage", "temperature_hottest", "temperature_coldest", "soc_mean"):
        np.testing.assert_allclose(cli_ds[name].values, app_ds[name].values, rtol=1e-5,
                                   atol=1e-6, err_msg=name)


def test_python_save_writes_what_load_scenario_reads(tmp_path):
    limits = explorer.Limits(temperature_max_C=45.0, spread_K=5.0)
    path = scenario.save(tmp_path / "van.toml", cell="van_nmc_66ah", name="van, convection",
                         duty=[{"step": "discharge", "c_rate": 1.0},
                               {"step": "rest", "seconds": 600.0}],
                         cooling={"design": "convection", "h_W_m2K": 10.0, "ambient_C": 25.0},
                         model={"layout": "single", "grid": (8, 12)}, limits=limits,
                         size={"vary": "h_W_m2K", "bounds": [5.0, 200.0]})
    sc = scenario.load_scenario(path)
    assert sc.name == "van, convection" and sc.cell.name == explorer.load_cell("van_nmc_66ah").name
    assert [s.kind for s in sc.duty] == [s.kind for s in
                                         [explorer.duty.discharge(c_rate=1.0),
                                          explorer.duty.rest(600.0)]]
    assert sc.limits == limits and sc.model["grid"] == (8, 12)
    assert sc.size == {"vary": "h_W_m2K", "bounds": [5.0, 200.0]}
    # a loaded scenario saves to the same tables
    again = scenario.save(tmp_path / "again.toml", cell=sc.tables["scenario"]["cell"],
                          name=sc.name, **{k: sc.tables[k] for k in
                                           ("duty", "cooling", "model", "limits", "size")})
    assert scenario.load_scenario(again).tables == {**sc.tables}


def test_save_refuses_what_would_not_load_and_writes_nothing(tmp_path):
    with pytest.raises(scenario.ScenarioError, match="c_rte"):
        scenario.save(tmp_path / "bad.toml", cell="van_nmc_66ah",
                      duty=[{"step": "discharge", "c_rte": 1.0}])
    with pytest.raises(scenario.ScenarioError, match=r"\.toml"):
        scenario.save(tmp_path / "bad.json", cell="van_nmc_66ah",
                      duty=[{"step": "discharge", "c_rate": 1.0}])
    assert list(tmp_path.iterdir()) == []


def test_cell_and_profile_files_are_written_relative_to_the_scenario(tmp_path):
    cell_file = tmp_path / "cells" / "my_cell.toml"
    cell_file.parent.mkdir()
    cell_file.write_text(explorer.cell.list_demo_cells()["bus_power_12ah"].read_text())
    profile = tmp_path / "route.csv"
    profile.write_text("time_s,current_A\n0,10\n60,10\n")
    values = {**APP_VALUES, "cell": str(cell_file), "duty": "profile",
              "profile_path": str(profile)}
    path = app_inputs.save_inputs(values, tmp_path / "s.toml")
    text = path.read_text()
    assert '"cells/my_cell.toml"' in text and '"route.csv"' in text
    assert str(tmp_path) not in text  # the scenario and its files travel together
    back = app_inputs.load_inputs(path)
    assert Path(back["cell"]) == cell_file and Path(back["profile_path"]) == profile


@pytest.mark.parametrize("path", BUNDLED, ids=lambda p: p.stem)
def test_bundled_scenarios_load_into_the_app_or_say_why_not(path):
    tables = scenario.load_scenario(path).tables
    notes = []
    if len(tables["duty"]) > 1:  # e.g. discharge + rest: the app shows one duty step
        with pytest.raises(InputsFileError, match="explorer run"):
            app_inputs.load_inputs(path, notes=notes)
        return
    values = app_inputs.load_inputs(path, notes=notes)
    assert values["cell"] == tables["scenario"]["cell"]
    if "output_interval_s" in tables.get("model", {}):
        assert any("output_interval_s" in n for n in notes)  # said, not silently dropped


def test_what_the_app_cannot_show_is_said(tmp_path):
    path = scenario.save(tmp_path / "two_steps.toml", cell="van_nmc_66ah",
                         duty=[{"step": "discharge", "c_rate": 1.0},
                               {"step": "rest", "seconds": 60.0}])
    with pytest.raises(InputsFileError, match="discharge \\+ rest.*explorer run"):
        app_inputs.load_inputs(path)
    path = scenario.save(tmp_path / "sink.toml", cell="van_nmc_66ah",
                         duty=[{"step": "discharge", "c_rate": 1.0}],
                         cooling={"design": "edge_plate",
                                  "plate": {"kind": "fixed_sink", "temperature_C": 25.0,
                                            "h_W_m2K": 2000.0}})
    with pytest.raises(InputsFileError, match="cooling.*explorer run"):
        app_inputs.load_inputs(path)


def test_save_writes_a_relative_profile_relative_to_the_scenario(tmp_path, monkeypatch):
    # a profile named relative to the current folder, beside (not below) the scenario's folder:
    # written as "../profiles/route.csv", never as this machine's absolute path
    (tmp_path / "profiles").mkdir()
    (tmp_path / "profiles" / "route.csv").write_text("time_s,current_A\n0,10\n60,10\n")
    (tmp_path / "scenarios").mkdir()
    monkeypatch.chdir(tmp_path)
    path = scenario.save("scenarios/route.toml", cell="bus_power_12ah",
                         duty=[{"step": "profile_csv", "path": "profiles/route.csv"}])
    text = path.read_text()
    assert '"../profiles/route.csv"' in text and str(tmp_path) not in text
    monkeypatch.chdir(tmp_path / "scenarios")  # it loads from anywhere
    assert scenario.load_scenario(tmp_path / "scenarios" / "route.toml").duty
