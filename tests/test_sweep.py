"""Design sweeps: the case grid, the per-case cache and resume, failures, Dask vs serial.

The bookkeeping is tested on the INVENTED stand-in of ``test_sizing`` (a
lumped cell on a coolant stream, lumped-capacitance solution of Incropera &
DeWitt, Fundamentals of Heat and Mass Transfer, 6th ed. 2007, §5.3); the
Dask-against-serial comparison and the coolant energy balance use real runs
of explorer.simulate on a demo cell.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import xarray as xr
from test_sizing import DUTY, STANDIN_CELL, Counter, StandInPlate, standin_simulate

import explorer.sweeping as sweep_mod
from explorer.limits import Limits
from explorer.results import key_figures
from explorer.sweeping import LOCAL_CLUSTER, _resample, sweep
from explorer.validators import InputError

AXES = {"flow_L_min": [1.0, 2.0, 4.0], "inlet_C": [20.0, 30.0]}
# Per-case bookkeeping that differs between runs of the same sweep (timings, text).
BOOKKEEPING = ["case_status", "case_message", "case_warnings", "case_wall_s", "case_cpu_s"]


@pytest.fixture
def standin(monkeypatch):
    counter = Counter()
    monkeypatch.setattr(sweep_mod, "_simulate", counter)
    return counter


def test_serial_sweep_matches_single_runs(standin):
    plate = StandInPlate()
    ds = sweep(STANDIN_CELL, DUTY, plate, AXES, scheduler="serial", progress=False)
    assert ds["peak_temperature_C"].dims == ("flow_L_min", "inlet_C")
    assert ds["temperature_max"].dims == ("flow_L_min", "inlet_C", "time")
    assert standin.calls == 6
    for q in AXES["flow_L_min"]:
        for t in AXES["inlet_C"]:
            one = standin_simulate(STANDIN_CELL, DUTY, plate.replace(flow_L_min=q, inlet_C=t))
            fig = key_figures(one)
            case = ds.sel(flow_L_min=q, inlet_C=t)
            assert float(case["peak_temperature_C"]) == pytest.approx(fig["peak_temperature_C"])
            assert float(case["energy_delivered_Wh"]) == pytest.approx(fig["energy_delivered_Wh"])
            assert float(case["pressure_drop_kPa"]) == pytest.approx(
                plate.replace(flow_L_min=q).hydraulics()["pressure_drop_Pa"] / 1e3)
            # same time base as the run here (uniform output), so the traces match exactly
            np.testing.assert_allclose(case["temperature_max"].values,
                                       one["temperature_max"].values)
    assert (ds["case_status"] == "completed").all()
    # more flow helps, a warmer inlet hurts (the stand-in's physics)
    assert (ds["peak_temperature_C"].diff("flow_L_min") < 0).all()
    assert (ds["peak_temperature_C"].diff("inlet_C") > 0).all()


def test_interrupted_sweep_resumes_from_cache(tmp_path, monkeypatch):
    plate = StandInPlate()
    interrupted = Counter(interrupt_after=4)
    monkeypatch.setattr(sweep_mod, "_simulate", interrupted)
    # Ctrl-C between two runs: the sweep stops and returns what it has
    part = sweep(STANDIN_CELL, DUTY, plate, AXES, scheduler="serial", cache_dir=tmp_path,
                 progress=False)
    assert part.attrs["status"] == "stopped" and part.attrs["cases_stopped"] == 2
    assert sorted(part["case_status"].values.ravel()) == ["completed"] * 4 + ["stopped"] * 2
    assert part.attrs["cases_failed"] == 2  # no full result
    assert len(list(tmp_path.glob("*.nc"))) == 4
    resumed = Counter()
    monkeypatch.setattr(sweep_mod, "_simulate", resumed)
    ds = sweep(STANDIN_CELL, DUTY, plate, AXES, scheduler="serial", cache_dir=tmp_path,
               progress=False)
    assert resumed.calls == 2  # only the two missing cases ran
    fresh = Counter()
    monkeypatch.setattr(sweep_mod, "_simulate", fresh)
    ref = sweep(STANDIN_CELL, DUTY, plate, AXES, scheduler="serial", progress=False)
    xr.testing.assert_allclose(ds.drop_vars(BOOKKEEPING), ref.drop_vars(BOOKKEEPING))
    np.testing.assert_array_equal(ds["case_status"], ref["case_status"])
    # a changed setting is a different case: nothing is reused
    again = Counter()
    monkeypatch.setattr(sweep_mod, "_simulate", again)
    sweep(STANDIN_CELL, DUTY, plate, AXES, scheduler="serial", cache_dir=tmp_path,
          progress=False, heat_W=41.0)
    assert again.calls == 6


def test_failed_case_is_recorded_and_not_cached(tmp_path, standin):
    plate = StandInPlate(fail_at_flow=2.0)
    ds = sweep(STANDIN_CELL, DUTY, plate, AXES, scheduler="serial", cache_dir=tmp_path,
               progress=False)
    failed = ds["case_status"].sel(flow_L_min=2.0)
    assert (failed == "failed").all()
    assert "stand-in failure" in str(ds["case_message"].sel(flow_L_min=2.0, inlet_C=20.0).values)
    assert np.isnan(ds["peak_temperature_C"].sel(flow_L_min=2.0)).all()
    assert np.isnan(ds["temperature_max"].sel(flow_L_min=2.0)).all()
    assert (ds["case_status"].sel(flow_L_min=[1.0, 4.0]) == "completed").all()
    assert ds.attrs["cases_failed"] == 2
    assert len(list(tmp_path.glob("*.nc"))) == 4  # failures are retried next time
    # every case failing still gives a Dataset saying so
    alone = sweep(STANDIN_CELL, DUTY, plate, {"flow_L_min": [2.0]}, scheduler="serial",
                  progress=False)
    assert alone.attrs["cases_failed"] == 1 and alone.sizes["time"] == 0
    assert str(alone["case_status"].values[0]) == "failed"


def _stopped_after(after_s, status="stopped", message="interrupted by the user"):
    """A stand-in run ended early at ``after_s`` with ``status`` (the stepper's record, contracts
    A: it keeps what it computed up to then)."""
    def run(*args, **kwargs):
        ds = standin_simulate(*args, **kwargs).sel(time=slice(0.0, after_s))
        ds.attrs.update(status=status, status_message=f"{message} at t = {after_s:g} s")
        return ds
    return run


class Script:
    """Replays a list of stand-in runs (None: the plain stand-in) and counts the calls."""

    def __init__(self, *runs):
        self.runs, self.calls = list(runs), 0

    def __call__(self, *args, **kwargs):
        run = self.runs[self.calls] if self.calls < len(self.runs) else None
        self.calls += 1
        return (run or standin_simulate)(*args, **kwargs)


def _keys(plate, axes, **settings):
    """Case values -> cache key, as the sweep computes them."""
    checked = sweep_mod._check_axes(axes, plate, settings)
    return {tuple(c.values.values()): c.key
            for c in sweep_mod._cases(STANDIN_CELL, DUTY, plate, checked, settings, False)}


def test_stopped_case_stops_the_sweep_and_is_not_cached(tmp_path, monkeypatch):
    plate = StandInPlate()
    lim = Limits(temperature_max_C=80.0)
    # the third run is caught by Ctrl-C inside the stepper and comes back "stopped"
    monkeypatch.setattr(sweep_mod, "_simulate", Script(None, None, _stopped_after(300.0)))
    part = sweep(STANDIN_CELL, DUTY, plate, AXES, scheduler="serial", cache_dir=tmp_path,
                 progress=False, limits=lim)
    assert part.attrs["status"] == "stopped"
    assert "Ctrl-C" in part.attrs["status_message"]
    flat = part.stack(case=list(AXES))
    assert list(flat["case_status"].values) == ["completed"] * 2 + ["stopped"] * 4
    assert "interrupted by the user" in str(flat["case_message"].values[2])
    assert all(str(m) == sweep_mod.NOT_RUN for m in flat["case_message"].values[3:])
    # the stopped case keeps what it computed (traces up to 300 s), but meets nothing
    trace = flat["temperature_max"].isel(case=2)
    assert np.isfinite(trace.sel(time=300.0)) and np.isnan(trace.sel(time=320.0))
    assert float(flat["margin_temperature_max_C"].isel(case=2)) > 0
    assert list(flat["meets_limits"].values) == [1, 1, 0, 0, 0, 0]
    assert len(list(tmp_path.glob("*.nc"))) == 2  # only the completed ones
    resumed = Counter()
    monkeypatch.setattr(sweep_mod, "_simulate", resumed)
    done = sweep(STANDIN_CELL, DUTY, plate, AXES, scheduler="serial", cache_dir=tmp_path,
                 progress=False)
    assert resumed.calls == 4 and done.attrs["status"] == "completed"
    assert (done["case_status"] == "completed").all() and done.attrs["cases_failed"] == 0


def test_cut_short_case_is_cached_with_its_status(tmp_path, monkeypatch):
    plate = StandInPlate()
    axes = {"flow_L_min": [1.0, 2.0]}
    cut = _stopped_after(600.0, "cut_short", "voltage window reached")
    monkeypatch.setattr(sweep_mod, "_simulate", Script(cut, None))
    first = sweep(STANDIN_CELL, DUTY, plate, axes, scheduler="serial", cache_dir=tmp_path,
                  progress=False, limits=Limits(temperature_max_C=80.0))
    assert list(first["case_status"].values) == ["cut_short", "completed"]
    assert first.attrs["status"] == "completed" and first.attrs["cases_failed"] == 0
    assert list(first["meets_limits"].values) == [0, 1]  # the duty did not run to its end
    assert len(list(tmp_path.glob("*.nc"))) == 2
    again = Counter()
    monkeypatch.setattr(sweep_mod, "_simulate", again)
    second = sweep(STANDIN_CELL, DUTY, plate, axes, scheduler="serial", cache_dir=tmp_path,
                   progress=False)
    assert again.calls == 0
    assert list(second["case_status"].values) == ["cut_short", "completed"]
    assert "voltage window reached" in str(second["case_message"].values[0])
    assert float(second["duration_s"][0]) == pytest.approx(600.0)


def test_cache_entry_is_checked_against_its_key(tmp_path, monkeypatch):
    plate = StandInPlate()
    axes = {"flow_L_min": [1.0, 2.0, 4.0]}
    keys = _keys(plate, axes)
    first = Counter()
    monkeypatch.setattr(sweep_mod, "_simulate", first)
    ref = sweep(STANDIN_CELL, DUTY, plate, axes, scheduler="serial", cache_dir=tmp_path,
                progress=False)
    entry = {q: tmp_path / f"{keys[(q,)]}.nc" for q in axes["flow_L_min"]}
    # one entry's bytes copied over another's; a valid but empty netCDF; bytes that are no
    # netCDF at all: each is a missing entry, recomputed and overwritten
    entry[2.0].write_bytes(entry[1.0].read_bytes())
    xr.Dataset().to_netcdf(entry[4.0])
    again = Counter()
    monkeypatch.setattr(sweep_mod, "_simulate", again)
    ds = sweep(STANDIN_CELL, DUTY, plate, axes, scheduler="serial", cache_dir=tmp_path,
               progress=False)
    assert again.calls == 2
    xr.testing.assert_allclose(ds.drop_vars(BOOKKEEPING), ref.drop_vars(BOOKKEEPING))
    for q, path in entry.items():
        with xr.open_dataset(path) as stored:
            assert stored.attrs["cache_key"] == keys[(q,)]
    entry[1.0].write_bytes(b"not a netCDF file")
    third = Counter()
    monkeypatch.setattr(sweep_mod, "_simulate", third)
    ds = sweep(STANDIN_CELL, DUTY, plate, axes, scheduler="serial", cache_dir=tmp_path,
               progress=False)
    assert third.calls == 1
    xr.testing.assert_allclose(ds.drop_vars(BOOKKEEPING), ref.drop_vars(BOOKKEEPING))
    expected = [p.name for p in entry.values()] + [p.name + ".sha256" for p in entry.values()]
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(expected)


def test_damaged_cache_entry_is_recomputed_without_opening_it(tmp_path, monkeypatch):
    """A few bytes overwritten inside an entry (same length) can make the HDF5 open spin for
    ever: the checksum beside each entry is compared first, so the damaged entry is never opened
    and the case runs again."""
    plate = StandInPlate()
    axes = {"flow_L_min": [1.0, 2.0]}
    keys = _keys(plate, axes)
    monkeypatch.setattr(sweep_mod, "_simulate", Counter())
    ref = sweep(STANDIN_CELL, DUTY, plate, axes, scheduler="serial", cache_dir=tmp_path,
                progress=False)
    path = tmp_path / f"{keys[(2.0,)]}.nc"
    data = bytearray(path.read_bytes())
    middle = len(data) // 2
    data[middle:middle + 8] = bytes(255 - b for b in data[middle:middle + 8])
    path.write_bytes(bytes(data))
    opened = []
    real_open = xr.open_dataset
    monkeypatch.setattr(xr, "open_dataset", lambda p, *a, **k: opened.append(Path(p).name)
                        or real_open(p, *a, **k))
    again = Counter()
    monkeypatch.setattr(sweep_mod, "_simulate", again)
    ds = sweep(STANDIN_CELL, DUTY, plate, axes, scheduler="serial", cache_dir=tmp_path,
               progress=False)
    assert again.calls == 1 and path.name not in opened
    xr.testing.assert_allclose(ds.drop_vars(BOOKKEEPING), ref.drop_vars(BOOKKEEPING))


def test_cache_write_failure_does_not_stop_the_sweep(tmp_path, standin, monkeypatch, caplog):
    from explorer.validators import OutputError

    def full(ds, path):
        raise OutputError(f"{path}: cannot write the file (No space left on device)")

    monkeypatch.setattr(sweep_mod, "write_netcdf", full)
    ds = sweep(STANDIN_CELL, DUTY, StandInPlate(), AXES, scheduler="serial", progress=False,
               cache_dir=tmp_path)
    assert (ds["case_status"] == "completed").all() and standin.calls == 6
    assert "not cached" in caplog.text and "No space left" in caplog.text


def test_cache_dir_that_is_a_file(tmp_path, standin):
    from explorer.validators import OutputError

    (tmp_path / "cache").write_text("x")
    with pytest.raises(OutputError, match="cache"):
        sweep(STANDIN_CELL, DUTY, StandInPlate(), {"flow_L_min": [1.0]}, scheduler="serial",
              cache_dir=tmp_path / "cache", progress=False)


def test_auto_output_interval(monkeypatch):
    """A run without `output_interval_s` records "auto" (simulate's own spacing per step)."""
    def auto(*args, **kwargs):
        ds = standin_simulate(*args, **kwargs)
        ds.attrs["output_interval_s"] = "auto"
        return ds

    monkeypatch.setattr(sweep_mod, "_simulate", auto)
    ds = sweep(STANDIN_CELL, DUTY, StandInPlate(), AXES, scheduler="serial", progress=False)
    assert (ds["case_status"] == "completed").all()
    np.testing.assert_allclose(np.diff(ds["time"].values), 20.0)  # the runs' own spacing


def test_limits_margins_per_case(standin):
    lim = Limits(temperature_max_C=40.0, pressure_drop_kPa=20.0)
    ds = sweep(STANDIN_CELL, DUTY, StandInPlate(), AXES, scheduler="serial", progress=False,
               limits=lim)
    np.testing.assert_allclose(ds["margin_temperature_max_C"], 40.0 - ds["peak_temperature_C"])
    met = (ds["margin_temperature_max_C"] >= 0) & (ds["margin_pressure_drop_kPa"] >= 0)
    np.testing.assert_array_equal(ds["meets_limits"].values, met.values.astype("int8"))


def test_limits_not_evaluated_flow_through(monkeypatch):
    """Verdict rule 2 (DESIGN.md §3): what the run cannot see is "not evaluated", never met."""
    def lumped_without_hydraulics(*args, **kwargs):
        ds = standin_simulate(*args, **kwargs)
        ds.attrs["layout"] = "single"
        del ds.attrs["hydraulics"]
        return ds

    monkeypatch.setattr(sweep_mod, "_simulate", lumped_without_hydraulics)
    lim = Limits(temperature_max_C=80.0, spread_K=50.0, cell_to_cell_K=5.0,
                 pressure_drop_kPa=20.0)
    ds = sweep(STANDIN_CELL, DUTY, StandInPlate(), AXES, scheduler="serial", progress=False,
               limits=lim)
    assert (ds["verdict_temperature_max_C"] == "met").all()
    for name in ("spread_K", "cell_to_cell_K", "pressure_drop_kPa"):
        assert (ds[f"verdict_{name}"] == "not evaluated").all()
        assert np.isnan(ds[f"margin_{name}"]).all()
    assert (ds["meets_limits"] == 0).all()  # not shown to be met
    assert np.isnan(ds["max_spread_K"]).all() and np.isnan(ds["cell_to_cell_K"]).all()
    notes = json.loads(str(ds["case_warnings"].values[0, 0]))
    assert any(n.startswith("cell_to_cell_K not evaluated: one cell was run") for n in notes)
    assert any(n.startswith("pressure_drop_kPa not evaluated") for n in notes)
    assert any("layout 'single'" in n for n in notes)


def _module_standin(*args, cooling=None, **kwargs):
    """A module of INVENTED stand-in cells: cell k sees the coolant warmed by the k before it
    (the stand-in's own coupling), stacked along `cell` as explorer.simulate_module does."""
    runs = [standin_simulate(*args, cooling=cooling, position=k, **kwargs)
            for k in range(cooling.cells_per_plate)]
    per_cell = [n for n in runs[0].data_vars if n.startswith(("temperature", "coolant",
                                                              "heat_", "soc"))]
    module = xr.concat([r[per_cell] for r in runs], dim="cell").assign_coords(
        cell=np.arange(len(runs)))
    for name in runs[0].data_vars:
        if name not in per_cell:
            module[name] = runs[0][name]
    module.attrs.update(runs[0].attrs, module_cells=len(runs))
    return module


def test_module_case_worst_cell_and_cell_to_cell(monkeypatch):
    monkeypatch.setattr(sweep_mod, "_simulate", _module_standin)
    plate = StandInPlate(cells_per_plate=3)
    lim = Limits(temperature_max_C=80.0, cell_to_cell_K=0.5)
    ds = sweep(STANDIN_CELL, DUTY, plate, {"flow_L_min": [1.0, 4.0]}, scheduler="serial",
               progress=False, limits=lim)
    for q in (1.0, 4.0):
        cells = [standin_simulate(STANDIN_CELL, DUTY, plate.replace(flow_L_min=q), position=k)
                 for k in range(3)]
        case = ds.sel(flow_L_min=q)
        hottest = [float(c["temperature_core_max"].max()) for c in cells]  # core is the hottest
        assert float(case["peak_temperature_C"]) == pytest.approx(max(hottest))
        assert int(case["worst_cell"]) == 2  # the last cell sees the warmest coolant
        means = np.stack([c["temperature_mean"].values for c in cells])
        c2c = float((means.max(axis=0) - means.min(axis=0)).max())
        assert float(case["cell_to_cell_K"]) == pytest.approx(c2c)
        assert float(case["margin_cell_to_cell_K"]) == pytest.approx(0.5 - c2c)
        # the module's traces: its hottest cell's maximum, the coolant leaving its last cell
        np.testing.assert_allclose(case["temperature_max"].values,
                                   np.max([c["temperature_max"].values for c in cells], axis=0))
        np.testing.assert_allclose(case["coolant_outlet"].values, cells[-1]["coolant_outlet"])
    assert (ds["verdict_cell_to_cell_K"] != "not evaluated").all()
    # more flow: smaller differences between the cells (the stand-in's physics)
    assert float(ds["cell_to_cell_K"].sel(flow_L_min=4.0)) < float(
        ds["cell_to_cell_K"].sel(flow_L_min=1.0))


def test_setting_axis_and_public_name(standin):
    import explorer

    # `explorer.sweep` is the public function (the module is explorer.sweeping)
    ds = explorer.sweep(STANDIN_CELL, DUTY, StandInPlate(), {"start_temperature_C": [15.0, 25.0]},
                        scheduler="serial", progress=False)
    assert ds.sizes["start_temperature_C"] == 2


def test_resample_pads_with_nan():
    t = np.array([0.0, 10.0, 10.0, 20.0])  # a repeated event time
    y = np.array([0.0, 1.0, 2.0, 4.0])
    out = _resample(t, y, np.arange(0.0, 31.0, 5.0))
    np.testing.assert_allclose(out[:5], [0.0, 1.0, 2.0, 3.0, 4.0])
    assert np.isnan(out[5:]).all()
    field = np.stack([y, 2 * y], axis=1)[:, None, :]  # (time, 1, 2)
    out = _resample(t, field, np.array([5.0, 15.0]))
    np.testing.assert_allclose(out[:, 0, 1], [2.0, 6.0])


def test_bad_axes(standin):
    plate = StandInPlate()
    with pytest.raises(InputError, match=r"axis `fin_mm` is not a parameter.*flow_L_min"):
        sweep(STANDIN_CELL, DUTY, plate, {"fin_mm": [1.0]}, scheduler="serial", progress=False)
    with pytest.raises(InputError, match="non-empty"):
        sweep(STANDIN_CELL, DUTY, plate, {}, scheduler="serial", progress=False)
    with pytest.raises(InputError, match="list of numbers"):
        sweep(STANDIN_CELL, DUTY, plate, {"flow_L_min": ["a"]}, scheduler="serial")
    with pytest.raises(InputError, match="repeats"):
        sweep(STANDIN_CELL, DUTY, plate, {"flow_L_min": [1.0, 1.0]}, scheduler="serial")
    with pytest.raises(InputError, match="no values"):
        sweep(STANDIN_CELL, DUTY, plate, {"flow_L_min": []}, scheduler="serial")
    with pytest.raises(InputError, match="not a valid design"):
        sweep(STANDIN_CELL, DUTY, plate, {"flow_L_min": [-1.0]}, scheduler="serial")
    with pytest.raises(InputError, match="both an axis and a fixed setting"):
        sweep(STANDIN_CELL, DUTY, plate, {"start_soc": [0.5]}, scheduler="serial", start_soc=1.0)
    with pytest.raises(InputError, match="scheduler"):
        sweep(STANDIN_CELL, DUTY, plate, {"flow_L_min": [1.0]}, scheduler=42, progress=False)
    assert standin.calls == 0


# --------------------------------------------------------------------------- real runs

# No `output_interval_s`: the README's flow (simulate picks the spacing and records "auto").
REAL = {"electrochemistry": "spm", "layout": "averaged", "grid": (6, 4)}
REAL_AXES = {"fin_mm": [0.5, 2.0], "tim_W_mK": [1.0, 4.0]}


@pytest.fixture(scope="module")
def real_case():
    from explorer import cooling, duty
    from explorer.cell import load_cell

    cell = load_cell("van_nmc_66ah")
    design = cooling.edge_plate(cooling.fixed_sink(temperature_C=25.0, h_W_m2K=2000.0),
                                edge="bottom", fin_mm=1.0)
    return cell, duty.discharge(c_rate=2.0, end_time_s=600.0), design


def test_local_dask_cluster_equals_serial(real_case, tmp_path):
    """The same sweep on a loopback Dask cluster (started and stopped here) equals the serial one."""
    from distributed import Client, LocalCluster

    cell, d, design = real_case
    serial = sweep(cell, d, design, REAL_AXES, scheduler="serial", progress=False, **REAL)
    # the default: the sweep starts its own loopback cluster and stops it
    default = sweep(cell, d, design, REAL_AXES, progress=False, cache_dir=tmp_path, **REAL)
    with LocalCluster(**LOCAL_CLUSTER) as cluster:
        parallel = sweep(cell, d, design, REAL_AXES, scheduler=cluster.scheduler_address,
                         progress=False, **REAL)
        with Client(cluster) as client:  # a Client object is accepted as well, and not closed
            again = sweep(cell, d, design, REAL_AXES, scheduler=client, progress=False, **REAL)
            assert client.status == "running"
    assert (serial["case_status"] == "completed").all()
    data = [v for v in serial.data_vars if v not in BOOKKEEPING]
    xr.testing.assert_allclose(default[data], serial[data], rtol=1e-12)
    xr.testing.assert_allclose(parallel[data], serial[data], rtol=1e-12)
    xr.testing.assert_allclose(again[data], serial[data], rtol=1e-12)
    assert len(list(tmp_path.glob("*.nc"))) == 4
    # a thicker fin cools better (physics of the edge path)
    assert (serial["peak_temperature_C"].diff("fin_mm") < 0).all()


def test_keep_fields_on_real_runs(real_case):
    cell, d, design = real_case
    ds = sweep(cell, d, design, {"fin_mm": [0.5, 2.0]}, scheduler="serial", progress=False,
               keep_fields=True, **REAL)
    assert ds["temperature"].dims == ("fin_mm", "time", "y", "x")
    assert ds.sizes["x"] == 6 and ds.sizes["y"] == 4
    peak = ds["temperature"].max(dim=("x", "y"))
    np.testing.assert_allclose(peak, ds["temperature_max"], rtol=1e-9)
    none = sweep(cell, d, design, {"fin_mm": [0.5]}, scheduler="serial", progress=False, **REAL)
    assert "temperature" not in none


def test_module_cases_on_real_runs():
    """A cold plate along 3 cells: each case runs the module (explorer.simulate_module) and is
    judged by its worst cell (DESIGN.md §3 rule 3), as the direct call judges it."""
    import explorer
    from explorer import cooling, duty

    cell = explorer.load_cell("rack_lfp_26ah")
    plate = cooling.cold_plate("pg30", flow_L_min=1.0, inlet_C=25.0, cells_per_plate=3,
                               length_mm=700.0)
    design = cooling.face_plate(plate, face="back", tim_W_mK=1.0, tim_mm=1.5)
    d = duty.discharge(c_rate=2.0, end_time_s=600.0)
    lim = Limits(temperature_max_C=45.0, cell_to_cell_K=2.0)
    ds = sweep(cell, d, design, {"flow_L_min": [0.25, 2.0]}, scheduler="serial",
               progress=False, limits=lim, electrochemistry="spm", layout="single")
    assert (ds["cells_run"] == 3).all() and (ds["case_status"] == "completed").all()
    direct = explorer.simulate_module(cell, d, design.replace(flow_L_min=0.25),
                                      electrochemistry="spm", layout="single")
    fig = key_figures(direct)
    case = ds.sel(flow_L_min=0.25)
    assert float(case["peak_temperature_C"]) == pytest.approx(fig["peak_temperature_C"])
    assert int(case["worst_cell"]) == fig["worst_cell"] == 2  # the warmest coolant
    assert float(case["cell_to_cell_K"]) == pytest.approx(fig["cell_to_cell_K"])
    assert (ds["verdict_cell_to_cell_K"] != "not evaluated").all()
    # coolant energy balance (common practice): more flow warms less along the path
    assert float(ds["cell_to_cell_K"].sel(flow_L_min=2.0)) < float(case["cell_to_cell_K"])
    # one position asked for: one cell is run and the module figure is not evaluated
    one = sweep(cell, d, design, {"flow_L_min": [0.25]}, scheduler="serial", progress=False,
                limits=lim, electrochemistry="spm", layout="single", position=1)
    assert int(one["cells_run"][0]) == 1 and int(one["worst_cell"][0]) == 1
    assert str(one["verdict_cell_to_cell_K"].values[0]) == "not evaluated"


def test_cut_short_real_run_is_cached_with_its_status(tmp_path, monkeypatch):
    """A discharge asked to run 4000 s reaches the cell's lower voltage first: "cut_short"
    (contracts A), a result of that design: cached, shown, and its warning carried."""
    import explorer
    from explorer import duty

    cell = explorer.load_cell("rack_lfp_26ah")
    d = duty.discharge(c_rate=2.0, end_time_s=4000.0)
    settings = {"electrochemistry": "spm", "layout": "single"}
    axes = {"start_temperature_C": [25.0, 35.0]}
    first = sweep(cell, d, None, axes, scheduler="serial", progress=False, cache_dir=tmp_path,
                  **settings)
    assert (first["case_status"] == "cut_short").all()
    assert all("lower limit" in str(m) for m in first["case_message"].values)
    assert all("cut short" in str(w) for w in first["case_warnings"].values)
    assert len(list(tmp_path.glob("*.nc"))) == 2
    again = Counter()
    monkeypatch.setattr(sweep_mod, "_simulate", again)
    second = sweep(cell, d, None, axes, scheduler="serial", progress=False, cache_dir=tmp_path,
                   **settings)
    assert again.calls == 0
    np.testing.assert_array_equal(second["case_status"], first["case_status"])
    np.testing.assert_array_equal(second["case_message"], first["case_message"])
