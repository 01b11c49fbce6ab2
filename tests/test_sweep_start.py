"""Sweeps that start at once: the first cases run here while the local cluster starts, the
cluster is kept for the next sweep, its workers are warmed up, Ctrl-C during its start.

Machinery only: the cases are real runs of explorer.simulate (checked against the serial sweep,
which tests/test_sweep.py checks against single runs) or the INVENTED stand-in of test_sizing.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys

import pytest
import xarray as xr
from test_sizing import DUTY, STANDIN_CELL, StandInPlate
from test_sweep_faults import TESTS, _log, _wait_for

import explorer.sweeping as sweep_mod
from explorer.sweeping import close_local_cluster, sweep

REAL = {"electrochemistry": "spm", "layout": "averaged", "grid": (6, 4)}
AXES = {"flow_L_min": [0.5, 1.0, 4.0]}
BOOKKEEPING = ["case_status", "case_message", "case_warnings", "case_wall_s", "case_cpu_s"]


@pytest.fixture
def plate_case():
    from explorer import cooling, duty
    from explorer.cell import load_cell

    cell = load_cell("rack_lfp_26ah")
    design = cooling.face_plate(cooling.cold_plate("pg30", flow_L_min=1.0, inlet_C=25.0))
    yield cell, duty.discharge(c_rate=2.0, end_time_s=300.0), design
    close_local_cluster()


def _same(a, b):
    data = [v for v in b.data_vars if v not in BOOKKEEPING]
    xr.testing.assert_allclose(a[data], b[data], rtol=1e-12)


def test_first_cases_run_here_and_the_cluster_is_kept(plate_case, monkeypatch):
    cell, d, design = plate_case
    close_local_cluster()
    serial = sweep(cell, d, design, AXES, scheduler="serial", progress=False, **REAL)
    here = []

    def counted(*args, **kwargs):  # the cases run in this process (the workers count apart)
        here.append(args[2])
        return real(*args, **kwargs)

    real = sweep_mod.run_case
    monkeypatch.setattr(sweep_mod, "run_case", counted)
    first = sweep(cell, d, design, AXES, progress=False, **REAL)
    local = sweep_mod._LOCAL
    assert 1 <= len(here) <= 3  # the cluster was still starting when the first case began
    client = local.wait()  # it goes on starting when this process ran every case
    assert client is not None and client.status == "running", local.error
    if sys.platform.startswith("linux"):  # SIGINT blocked in the workers only (see /proc)
        sigint = 1 << (signal.SIGINT - 1)
        assert all(int(m, 16) & sigint for m in client.run(_sigblk).values())
        assert not int(_sigblk(), 16) & sigint
    _same(first, serial)
    here.clear()
    second = sweep(cell, d, design, AXES, progress=False, **REAL)
    assert sweep_mod._LOCAL is local  # the same cluster, already up: every case went to it
    assert here == []
    _same(second, serial)
    assert first.attrs["scheduler"] == "local cluster"
    close_local_cluster()
    assert sweep_mod._LOCAL is None and local.client.status == "closed"


def test_one_case_runs_here_without_a_cluster(monkeypatch):
    from test_sizing import standin_simulate

    close_local_cluster()
    monkeypatch.setattr(sweep_mod, "_simulate", standin_simulate)
    ds = sweep(STANDIN_CELL, DUTY, StandInPlate(), {"flow_L_min": [2.0]}, progress=False)
    assert ds.attrs["scheduler"] == "serial" and sweep_mod._LOCAL is None
    assert str(ds["case_status"].values[0]) == "completed"


def test_warm_worker_loads_the_coolant_tables(plate_case):
    from explorer.cooling import coolant

    cell, d, design = plate_case
    cases = sweep_mod._cases(cell, d, design, sweep_mod._check_axes(AXES, design, {}), {},
                             False)
    assert sweep_mod._coolants(cases) == ["pg30"]
    coolant._TABLES.pop("INCOMP::MPG-30%", None)
    sweep_mod.warm_worker(["pg30", "not-a-coolant"])  # a bad name is left to the case
    assert "INCOMP::MPG-30%" in coolant._TABLES


CHILD = """
import sys
sys.path.insert(0, {tests!r})
import functools
import explorer.sweeping as sweep_mod
from explorer.results import save
from test_sizing import DUTY, STANDIN_CELL, StandInPlate
from test_sweep_faults import AXES, logged_standin

# top level: the worker processes run this too (they start by running the main script)
sweep_mod._simulate = functools.partial(logged_standin, {log!r}, None, 3.0)

if __name__ == "__main__":
    ds = sweep_mod.sweep(STANDIN_CELL, DUTY, StandInPlate(), AXES, cache_dir={cache!r},
                         progress=False)
    save(ds, {out!r})
"""


@pytest.mark.skipif(os.name != "posix", reason="POSIX signals")
def test_ctrl_c_while_the_cluster_starts(tmp_path):
    """Ctrl-C in a terminal (the whole process group) while the first case runs here and the
    cluster is still starting: the sweep stops at once with what it has, and closes the
    cluster; its workers never see the signal."""
    import psutil

    cache, log, out = tmp_path / "cache", tmp_path / "run.log", tmp_path / "out.nc"
    script = tmp_path / "child.py"
    script.write_text(CHILD.format(tests=str(TESTS), log=str(log), cache=str(cache),
                                   out=str(out)))
    proc = subprocess.Popen([sys.executable, str(script)], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, start_new_session=True)
    _wait_for(lambda: any(w == "start" for w, _ in _log(log)), proc, timeout=120)
    children = psutil.Process(proc.pid).children(recursive=True)
    os.killpg(proc.pid, signal.SIGINT)
    try:
        _, stderr = proc.communicate(timeout=60)
    except subprocess.TimeoutExpired:
        os.killpg(proc.pid, signal.SIGKILL)
        raise AssertionError("the sweep did not stop within 60 s of Ctrl-C") from None
    assert proc.returncode == 0, stderr
    assert "sweep stopped" in stderr and "KeyboardInterrupt" not in stderr
    with xr.open_dataset(out) as part:
        assert part.attrs["status"] == "stopped"
        assert (part["case_status"] == "stopped").all()
    gone = psutil.wait_procs(children, timeout=30)[1]
    assert gone == []  # no process of the sweep left behind


def _sigblk() -> str:
    with open("/proc/self/status") as fh:
        return next(line.split()[1] for line in fh if line.startswith("SigBlk"))
