"""Sweeps under faults: SIGKILL and Ctrl-C (SIGINT) mid-sweep, a Dask worker killed mid-case,
a plain script without a main guard.

The cases are the INVENTED lumped stand-in of ``test_sizing`` (lumped-capacitance
solution, Incropera & DeWitt, Fundamentals of Heat and Mass Transfer, 6th ed. 2007,
§5.3): the point here is the machinery (cache, resume, retries), not the physics.
Each run writes one line per case it starts and ends to a log file, so a test can
count the computations of a process it killed.
"""

from __future__ import annotations

import functools
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
import pytest
import xarray as xr
from distributed.diagnostics.plugin import WorkerPlugin
from test_sizing import DUTY, STANDIN_CELL, StandInPlate, standin_simulate

import explorer.sweeping as sweep_mod
from explorer.sweeping import LOCAL_CLUSTER, sweep

pytestmark = pytest.mark.skipif(os.name != "posix", reason="POSIX signals")

TESTS = Path(__file__).resolve().parent
AXES = {"flow_L_min": [1.0, 2.0, 4.0], "inlet_C": [20.0, 30.0]}
BOOKKEEPING = ["case_status", "case_message", "case_warnings", "case_wall_s", "case_cpu_s"]


# --------------------------------------------------------------------------- helpers


def logged_standin(log, slow_call=None, delay_s=0.0, *args, **kwargs):
    """The stand-in run, logging 'start'/'end' with the case; the ``slow_call``-th call of this
    process waits (up to 60 s) and, like the stepper (contracts A), turns Ctrl-C into a run
    with status "stopped" that keeps what it computed. Every run takes ``delay_s`` at least."""
    cooling = kwargs["cooling"]
    case = f"{cooling.flow_L_min:g} {cooling.inlet_C:g}"
    logged_standin.calls = getattr(logged_standin, "calls", 0) + 1
    if logged_standin.calls == slow_call:
        try:  # the test interrupts once it reads 'start': already inside the try
            with open(log, "a") as fh:
                fh.write(f"start {case}\n")
            time.sleep(60.0)
        except KeyboardInterrupt:
            ds = standin_simulate(*args, **kwargs).sel(time=slice(0.0, 100.0))
            ds.attrs.update(status="stopped", status_message="interrupted by the user")
            with open(log, "a") as fh:
                fh.write(f"stopped {case}\n")
            return ds
    else:
        with open(log, "a") as fh:
            fh.write(f"start {case}\n")
    time.sleep(delay_s)
    ds = standin_simulate(*args, **kwargs)
    with open(log, "a") as fh:
        fh.write(f"end {case}\n")
    return ds


def _log(path) -> list[tuple[str, str]]:
    if not path.exists():
        return []
    lines = path.read_text().split("\n")[:-1]  # a line still being written has no newline
    return [tuple(line.split(" ", 1)) for line in lines]


def _case_names(plate) -> dict:
    """Cache key -> 'flow inlet' as the log writes it."""
    checked = sweep_mod._check_axes(AXES, plate, {})
    return {c.key: f"{c.values['flow_L_min']:g} {c.values['inlet_C']:g}"
            for c in sweep_mod._cases(STANDIN_CELL, DUTY, plate, checked, {}, False)}


def _wait_for(condition, proc, timeout=60.0):
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        if condition():
            return
        if proc.poll() is not None:
            raise AssertionError(f"the sweep process ended early: {proc.communicate()}")
        time.sleep(0.02)
    proc.kill()
    raise AssertionError("timed out waiting for the sweep process")


CHILD = """
import sys
sys.path.insert(0, {tests!r})
import functools
import xarray as xr
import explorer.sweeping as sweep_mod
from explorer.results import save
from test_sizing import DUTY, STANDIN_CELL, StandInPlate
from test_sweep_faults import AXES, logged_standin

cache, log, out, mode = sys.argv[1:5]
sweep_mod._simulate = functools.partial(logged_standin, log, 3 if mode == "sigint" else None,
                                        0.0)
if mode == "sigkill":
    # the third cache write stays open (written, not yet renamed) until the test kills us
    real, writes = xr.Dataset.to_netcdf, []
    def slow(self, path, *args, **kwargs):
        writes.append(path)
        result = real(self, path, *args, **kwargs)
        if len(writes) == 3:
            import time
            time.sleep(60.0)
        return result
    xr.Dataset.to_netcdf = slow
ds = sweep_mod.sweep(STANDIN_CELL, DUTY, StandInPlate(), AXES, scheduler="serial",
                     cache_dir=cache, progress=False)
save(ds, out)
"""


def _start_child(tmp_path, mode):
    script = tmp_path / "child.py"
    script.write_text(CHILD.format(tests=str(TESTS)))
    cache, log, out = tmp_path / "cache", tmp_path / "run1.log", tmp_path / "out.nc"
    proc = subprocess.Popen([sys.executable, str(script), str(cache), str(log), str(out), mode],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    return proc, cache, log, out


def _resume_and_check(tmp_path, monkeypatch, cache, first_log):
    """Re-run in this process: equals an uninterrupted sweep; only the uncached cases run."""
    plate = StandInPlate()
    names = _case_names(plate)
    cached = {names[p.stem] for p in cache.glob("*.nc")}
    ended = {case for what, case in _log(first_log) if what == "end"}
    assert cached <= ended  # only cases that ran to their end were cached
    second_log = tmp_path / "run2.log"
    monkeypatch.setattr(sweep_mod, "_simulate", functools.partial(logged_standin, second_log,
                                                                  None, 0.0))
    ds = sweep(STANDIN_CELL, DUTY, plate, AXES, scheduler="serial", cache_dir=cache,
               progress=False)
    rerun = [case for what, case in _log(second_log) if what == "start"]
    assert sorted(rerun) == sorted(set(names.values()) - cached)  # none lost, none redone
    # every entry with its checksum beside it, no temporary file left
    expected = [f"{k}.nc" for k in names] + [f"{k}.nc.sha256" for k in names]
    assert sorted(p.name for p in cache.iterdir()) == sorted(expected)
    monkeypatch.setattr(sweep_mod, "_simulate", standin_simulate)
    ref = sweep(STANDIN_CELL, DUTY, plate, AXES, scheduler="serial", progress=False)
    xr.testing.assert_allclose(ds.drop_vars(BOOKKEEPING), ref.drop_vars(BOOKKEEPING))
    assert (ds["case_status"] == "completed").all() and ds.attrs["status"] == "completed"
    return cached


# --------------------------------------------------------------------------- killed sweeps


def test_sweep_killed_mid_write_resumes(tmp_path, monkeypatch):
    proc, cache, log, _ = _start_child(tmp_path, "sigkill")
    # two entries written, the third held open before its rename: kill
    _wait_for(lambda: len(list(cache.glob("*.nc"))) == 2 and any(cache.glob(".*.tmp")), proc)
    proc.send_signal(signal.SIGKILL)
    proc.wait(timeout=30)
    assert len(list(cache.glob("*.nc"))) == 2
    assert len(list(cache.glob(".*.tmp"))) == 1  # the write the kill cut short
    cached = _resume_and_check(tmp_path, monkeypatch, cache, log)
    assert len(cached) == 2


def test_sweep_interrupted_by_ctrl_c_resumes(tmp_path, monkeypatch):
    proc, cache, log, out = _start_child(tmp_path, "sigint")
    # the third case is running (and waiting): interrupt it
    _wait_for(lambda: sum(w == "start" for w, _ in _log(log)) == 3, proc)
    proc.send_signal(signal.SIGINT)
    stdout, stderr = proc.communicate(timeout=60)
    assert proc.returncode == 0, stderr  # the sweep returned what it had
    assert "sweep stopped" in stderr
    with xr.open_dataset(out) as part:
        flat = part.load().stack(case=list(AXES))
    assert part.attrs["status"] == "stopped"
    assert list(flat["case_status"].values) == ["completed"] * 2 + ["stopped"] * 4
    assert "interrupted by the user" in str(flat["case_message"].values[2])
    assert np.isfinite(flat["temperature_max"].isel(case=2).sel(time=100.0))  # kept
    assert ("stopped", "2 20") in _log(log)
    cached = _resume_and_check(tmp_path, monkeypatch, cache, log)
    assert cached == {"1 20", "1 30"}  # the stopped case was not cached


CLUSTER_CHILD = """
import sys
sys.path.insert(0, {tests!r})
import functools
import explorer.sweeping as sweep_mod
from explorer.results import save
from test_sizing import DUTY, STANDIN_CELL, StandInPlate
from test_sweep_faults import AXES, logged_standin

# top level: the worker processes run this too (they start by running the main script)
sweep_mod._simulate = functools.partial(logged_standin, {log!r}, None, 1.0)

if __name__ == "__main__":
    ds = sweep_mod.sweep(STANDIN_CELL, DUTY, StandInPlate(), AXES, cache_dir={cache!r},
                         progress=False)
    save(ds, {out!r})
"""


def test_ctrl_c_in_a_terminal_stops_the_default_cluster_sweep(tmp_path, monkeypatch):
    """Ctrl-C in a terminal reaches the whole process group, the local cluster's workers
    included: the sweep still stops at once, closes its cluster and keeps what it has."""
    cache, log, out = tmp_path / "cache", tmp_path / "run1.log", tmp_path / "out.nc"
    script = tmp_path / "child.py"
    script.write_text(CLUSTER_CHILD.format(tests=str(TESTS), log=str(log), cache=str(cache),
                                           out=str(out)))
    proc = subprocess.Popen([sys.executable, str(script)], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, start_new_session=True)
    _wait_for(lambda: len(list(cache.glob("*.nc"))) >= 2, proc, timeout=120)
    os.killpg(proc.pid, signal.SIGINT)
    try:
        _, stderr = proc.communicate(timeout=60)
    except subprocess.TimeoutExpired:
        os.killpg(proc.pid, signal.SIGKILL)
        raise AssertionError("the sweep did not stop within 60 s of Ctrl-C") from None
    assert proc.returncode == 0, stderr
    assert "sweep stopped" in stderr
    with xr.open_dataset(out) as part:
        assert part.attrs["status"] == "stopped"
        assert (part["case_status"] == "stopped").any()
    _resume_and_check(tmp_path, monkeypatch, cache, log)


# --------------------------------------------------------------------------- Dask workers


def kill_once(marker, *args, **kwargs):
    """The first call on any worker kills its own process (SIGKILL); later calls run."""
    try:
        os.close(os.open(marker, os.O_CREAT | os.O_EXCL | os.O_WRONLY))
    except FileExistsError:
        return standin_simulate(*args, **kwargs)
    os.kill(os.getpid(), signal.SIGKILL)


class KillOncePlugin(WorkerPlugin):
    """Worker plugin: every worker, restarted ones included, runs ``kill_once``."""

    name = "sweep-kill-once"

    def __init__(self, marker):
        self.marker = str(marker)

    def setup(self, worker):
        sweep_mod._simulate = functools.partial(kill_once, self.marker)


@pytest.mark.parametrize("allowed_failures", [3, 0])
def test_dask_worker_killed_mid_case(tmp_path, monkeypatch, allowed_failures):
    """Dask runs a case lost with its worker again (up to `allowed-failures` times); past that
    the case is recorded failed. Never silently missing."""
    import dask
    from distributed import Client, LocalCluster
    plugin = KillOncePlugin(tmp_path / "killed")
    plate = StandInPlate()
    with dask.config.set({"distributed.scheduler.allowed-failures": allowed_failures}):
        with LocalCluster(**LOCAL_CLUSTER) as cluster, Client(cluster) as client:
            client.register_plugin(plugin)
            ds = sweep(STANDIN_CELL, DUTY, plate, AXES, scheduler=client, progress=False)
    assert (tmp_path / "killed").exists()  # a worker did die
    status = ds["case_status"].values.ravel()
    if allowed_failures:
        assert (status == "completed").all()
        monkeypatch.setattr(sweep_mod, "_simulate", standin_simulate)
        ref = sweep(STANDIN_CELL, DUTY, plate, AXES, scheduler="serial", progress=False)
        xr.testing.assert_allclose(ds.drop_vars(BOOKKEEPING), ref.drop_vars(BOOKKEEPING))
    else:
        # the cases the dead worker held (the one running and any queued behind it) fail;
        # every case is there with a status
        failed = status == "failed"
        assert failed.any() and (status[~failed] == "completed").all()
        assert all("KilledWorker" in str(m) for m in ds["case_message"].values.ravel()[failed])
        assert ds.attrs["cases_failed"] == failed.sum()
        assert np.isfinite(ds["peak_temperature_C"].values.ravel()[~failed]).all()


# --------------------------------------------------------------------------- plain scripts

SCRIPT_HEAD = f"""
import sys
sys.path.insert(0, {str(TESTS)!r})
import explorer.sweeping as sweep_mod
from test_sizing import DUTY, STANDIN_CELL, StandInPlate, standin_simulate
sweep_mod._simulate = standin_simulate
"""


def _run_script(tmp_path, body):
    script = tmp_path / "script.py"
    script.write_text(SCRIPT_HEAD + textwrap.dedent(body))
    return subprocess.run([sys.executable, str(script)], capture_output=True, text=True,
                          timeout=300, cwd=tmp_path)


def test_plain_script_without_main_guard_runs(tmp_path):
    """The default scheduler from a script with no `if __name__ == "__main__":` block."""
    done = _run_script(tmp_path, """
        ds = sweep_mod.sweep(STANDIN_CELL, DUTY, StandInPlate(), {"flow_L_min": [1.0, 2.0]},
                             progress=False)
        print(ds.attrs["scheduler"], *ds["case_status"].values)
    """)
    assert done.returncode == 0, done.stderr
    assert done.stdout.split() == ["serial", "completed", "completed"]
    assert 'if __name__ == "__main__":' in done.stderr  # the warning says what to do


@pytest.mark.parametrize(("body", "reruns"), ids=["top level", "guarded", "main() guarded",
                                                 "main() unguarded"], argvalues=[
    ("print(sweep_mod._main_reruns_sweep())", True),
    ("""
     if __name__ == "__main__":
         print(sweep_mod._main_reruns_sweep())
     """, False),
    ("""
     def main():
         print(sweep_mod._main_reruns_sweep())

     if __name__ == "__main__":
         main()
     """, False),
    ("""
     def main():
         print(sweep_mod._main_reruns_sweep())

     main()
     """, True),
])
def test_main_guard_detection(tmp_path, body, reruns):
    done = _run_script(tmp_path, body)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == str(reruns)


def test_main_guard_detection_in_process():
    """pytest's own main module is not run again: this process may start workers."""
    assert sweep_mod._main_reruns_sweep() is False


def test_ctrl_c_in_the_dask_client_stops_the_sweep(monkeypatch, tmp_path):
    """Ctrl-C while the client waits for Dask results (here a cluster of threads in this
    process, so the stand-in runs on it): the sweep returns what it has; the user's client
    stays open."""
    from distributed import Client, LocalCluster

    monkeypatch.setattr(sweep_mod, "_simulate", standin_simulate)
    finish, seen = sweep_mod._finish, []

    def interrupt_third(done, case, result):
        seen.append(case.index)
        if len(seen) == 3:
            raise KeyboardInterrupt
        finish(done, case, result)

    monkeypatch.setattr(sweep_mod, "_finish", interrupt_third)
    with LocalCluster(processes=False, n_workers=1, threads_per_worker=1,
                      dashboard_address=None) as cluster, Client(cluster) as client:
        ds = sweep(STANDIN_CELL, DUTY, StandInPlate(), AXES, scheduler=client, progress=False,
                   cache_dir=tmp_path)
        assert client.status == "running"
    status = ds["case_status"].values.ravel()
    assert ds.attrs["status"] == "stopped"
    assert sorted(status) == ["completed"] * 2 + ["stopped"] * 4
    assert len(list(tmp_path.glob("*.nc"))) == 2
