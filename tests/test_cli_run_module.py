"""``python -m explorer run`` on a cold plate that serves several cells: the verdict is the
module's (every cell on the coolant path run coupled, DESIGN.md §3 rule 3): the worst cell named,
the cell-to-cell spread evaluated, the hottest point of any cell reported.

The runs are short (SPM, a coarse grid, five minutes of a 2C discharge) on the invented demo
cell; the physics check is the first law on the coolant (below).
"""

from __future__ import annotations

import re

import numpy as np
import pytest
import xarray as xr

from explorer import scenario
from explorer.cli import main

# A plate of 8 channels (96 mm wide) under the 2C-discharged demo cell: every channel lies under
# the cell, so the whole flow takes up the cells' heat (the first-law check below needs that).
PLATE = """
[scenario]
name = "plate"
cell = "van_nmc_66ah"
[model]
electrochemistry = "spm"
layout = "{layout}"
grid = [4, 4]
output_interval_s = 30.0
{model_extra}
[[duty]]
step = "discharge"
c_rate = 2.0
end_time_s = 300
[cooling]
design = "face_plate"
face = "back"
[cooling.plate]
kind = "cold_plate"
coolant = "water"
flow_L_min = {flow}
inlet_C = 25.0
channels = 8
cells_per_plate = {cells}
length_mm = 800.0
[limits]
temperature_max_C = 45.0
spread_K = 5.0
{extra_limits}
"""

# Liquid water near 300 K: density 1/v_f = 1/1.003e-3 m3/kg = 997 kg/m3, specific heat
# 4.179 kJ/(kg K) (Incropera & DeWitt, Fundamentals of Heat and Mass Transfer, Table A.6,
# saturated water at 300 K; from memory). The coolant here stays within 25-28 degC, where both
# change by well under 0.1 %.
WATER_DENSITY_KG_M3 = 997.0
WATER_CP_J_KGK = 4179.0


def _write(tmp_path, *, cells=3, layout="averaged", flow=0.2, model_extra="",
           extra_limits="cell_to_cell_K = 3.0"):
    path = tmp_path / "plate.toml"
    path.write_text(PLATE.format(cells=cells, layout=layout, flow=flow, model_extra=model_extra,
                                 extra_limits=extra_limits), encoding="utf-8")
    return path


def _run(tmp_path, capsys, **kwargs):
    """(exit code, stdout, stderr, the written Dataset) of `explorer run` on the plate."""
    code = main(["run", str(_write(tmp_path, **kwargs)), "--out", str(tmp_path / "out")])
    captured = capsys.readouterr()
    ds = xr.load_dataset(tmp_path / "out" / "plate_run.nc")
    return code, captured.out, captured.err, ds


def _printed(out: str, name: str) -> float:
    match = re.search(rf"^{name}\s+(\S+)", out, re.MULTILINE)
    assert match, f"{name} not printed:\n{out}"
    return float(match.group(1))


def test_a_three_cell_plate_runs_the_module_and_names_the_worst_cell(tmp_path, capsys):
    code, out, err, ds = _run(tmp_path, capsys)
    assert code in (0, 1), err
    assert ds.attrs["status"] == "completed"
    assert ds.sizes["cell"] == 3 and ds.attrs["kind"] == "module"
    assert "3 cells" in err  # said before the run starts
    # the reported peak is the hottest point of any cell (core included)
    hottest = ds["temperature_hottest"].max("time")
    peak = float(hottest.max())
    assert _printed(out, "peak_temperature_C") == pytest.approx(peak, rel=1e-3)
    worst = int(ds["cell"][int(np.argmax(hottest.values))])
    assert f"worst cell {worst}" in out
    # the cell-to-cell spread is evaluated and is what the file holds
    mean = ds["temperature_mean"]
    spread = float((mean.max("cell") - mean.min("cell")).max())
    assert _printed(out, "cell_to_cell_K") == pytest.approx(spread, rel=1e-3)
    table = out[out.index("limit "):]
    assert "cell_to_cell_K" in table and "not evaluated" not in table
    assert re.search(r"^cell_to_cell_K\s.*\bmet$", table, re.MULTILINE)
    # one line per cell in the per-cell table
    for k in range(3):
        assert re.search(rf"^\s+{k}\s+\d", out, re.MULTILINE)


def test_the_coolant_rise_over_the_module_meets_the_energy_balance(tmp_path, capsys):
    """First law on the coolant (steady flow, no storage in the coolant path, as the module
    assumes): Q = m_dot c_p (T_out - T_in), with Q the heat all cells put into the coolant and
    m_dot c_p from handbook water properties (constants above). The coolant also warms from cell
    to cell, so the last cell, on the warmest coolant, is the hottest (the reason the module is
    run at all)."""
    _, _, _, ds = _run(tmp_path, capsys)
    into_coolant = ds["heat_to_back"].sum("cell").values  # the back face sits on the plate
    rise = (ds["coolant_outlet"].isel(cell=-1) - ds["coolant_inlet"].isel(cell=0)).values
    capacity = 0.2 / 60e3 * WATER_DENSITY_KG_M3 * WATER_CP_J_KGK  # W/K
    later = into_coolant > 1.0  # after the first instant (no heat yet at t = 0)
    assert later.sum() >= 5
    np.testing.assert_allclose(capacity * rise[later], into_coolant[later], rtol=0.01)
    # each cell's inlet is the previous cell's outlet
    np.testing.assert_allclose(ds["coolant_inlet"].isel(cell=slice(1, None)).values,
                               ds["coolant_outlet"].isel(cell=slice(None, -1)).values,
                               atol=1e-6)
    peaks = ds["temperature_hottest"].max("time").values
    assert peaks[0] < peaks[1] < peaks[2]


def test_a_one_cell_plate_still_runs_one_cell(tmp_path, capsys):
    code, out, err, ds = _run(tmp_path, capsys, cells=1, extra_limits="")
    assert code in (0, 1), err
    assert "cell" not in ds.dims and ds.attrs["kind"] == "run"
    assert "module:" not in out and "worst cell" not in out and "running the module" not in err
    peak = float(ds["temperature_hottest"].max())
    assert _printed(out, "peak_temperature_C") == pytest.approx(peak, rel=1e-3)


def test_position_is_not_used_on_a_module_and_says_so(tmp_path, capsys):
    code, out, err, ds = _run(tmp_path, capsys, layout="single", model_extra="position = 1")
    assert code in (0, 1), err
    assert ds.sizes["cell"] == 3
    assert "`model.position` = 1 is not used" in out
    # the lumped layout cannot see the in-cell spread, the module still sees cell to cell
    assert "spread_K" in out and "not evaluated" in out
    assert re.search(r"^cell_to_cell_K\s.*\bmet$", out, re.MULTILINE)


def test_sweep_judges_the_module_too_whatever_position_says(tmp_path, capsys):
    # `sweep` on the same file as `run`: each case runs every cell on its coolant path; a
    # `model.position` (which would run that one cell) is set aside with the same kind of note
    path = _write(tmp_path, layout="single", model_extra="position = 1")
    with path.open("a", encoding="utf-8") as f:
        f.write("[sweep.axes]\nflow_L_min = [0.2, 0.4]\n")
    code = main(["sweep", str(path), "--out", str(tmp_path / "out"), "--scheduler", "serial"])
    out = capsys.readouterr().out
    assert code == 0, out
    assert "`model.position` = 1 is not used" in out
    ds = xr.load_dataset(tmp_path / "out" / "plate_sweep.nc")
    assert np.all(np.isfinite(ds["cell_to_cell_K"].values))


def test_a_model_setting_a_module_does_not_take_is_refused(tmp_path, capsys, monkeypatch):
    # no such key today besides `position`; a future single-cell-only setting (here `rods`)
    # must not be dropped silently
    monkeypatch.setattr(scenario, "MODEL_KEYS", (*scenario.MODEL_KEYS, "rods"))
    path = _write(tmp_path, model_extra="rods = [2, 2]")
    code = main(["run", str(path), "--out", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert code == 2
    assert str(path) in err and "model.rods" in err and "Traceback" not in err
    assert not (tmp_path / "out" / "plate_run.nc").exists()


def test_ctrl_c_during_a_module_run_keeps_what_was_computed(tmp_path, capsys, monkeypatch):
    def stop_after_two_minutes(every_s=10.0):
        def progress(t_s, step_index):
            if t_s > 120.0:
                raise KeyboardInterrupt
        return progress

    monkeypatch.setattr(scenario, "_module_progress", stop_after_two_minutes)
    code, out, err, ds = _run(tmp_path, capsys)
    assert ds.attrs["status"] == "stopped" and "status: stopped" in out
    assert ds.sizes["cell"] == 3
    assert 100.0 < float(ds["time"].max()) < 300.0
    assert code in (0, 1)
