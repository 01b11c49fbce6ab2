"""Cost of a design sweep: ``bench_sweep() -> list[dict]`` (called by ``explorer.bench``).

A 48-case sweep (6 fin thicknesses x 4 interface conductivities x 2 sink
temperatures of an edge plate on the van demo cell; 2C discharge to the lower
voltage limit, SPMe, averaged layout) is run serially in this process and on
local Dask clusters on loopback of 1 and 2 worker processes (1 thread each),
in the same call, without the cache. The cluster's start-up (and the workers'
warm-up: imports, coolant tables) is timed apart from the sweep itself; the
speed-up is serial time over cluster time, per worker count. A cluster of threads in this process (1 worker, 2 threads) is timed too: it is
what a plain script without a main guard could use instead of worker processes; the sweep runs
such a script's cases serially because the threads gain nothing (the cases hold the GIL).

Run it directly: ``python -m explorer.sweep_bench``.
"""

from __future__ import annotations

import os
import time

__all__ = ["bench_sweep", "AXES"]

AXES = {
    "fin_mm": [0.3, 0.5, 1.0, 1.5, 2.0, 3.0],
    "tim_W_mK": [1.0, 2.0, 3.0, 5.0],
    "temperature_C": [20.0, 30.0],
}
SETTINGS = {"electrochemistry": "spme", "layout": "averaged", "grid": (12, 8),
            "output_interval_s": 30.0}


def bench_sweep(cell: str = "van_nmc_66ah", workers=(1, 2)) -> list[dict]:
    """Serial against local-cluster wall time of the same 48-case sweep, per worker count.

    Returns rows with ``section`` "sweep": the serial run, each cluster run
    (and its start-up), and the speed-up against serial for each worker
    count, with a check that every run gave the same figures.
    """
    import numpy as np

    from explorer import cooling, duty
    from explorer.cell import load_cell
    from explorer.sweeping import sweep

    the_cell = load_cell(cell)
    design = cooling.edge_plate(cooling.fixed_sink(temperature_C=25.0, h_W_m2K=2000.0),
                                edge="bottom", fin_mm=1.0)
    the_duty = duty.discharge(c_rate=2.0)
    cases = int(np.prod([len(v) for v in AXES.values()]))

    t0 = time.perf_counter()
    serial = sweep(the_cell, the_duty, design, AXES, scheduler="serial", progress=False,
                   **SETTINGS)
    serial_s = time.perf_counter() - t0
    runs = {n: _cluster(the_cell, the_duty, design, n) for n in workers}
    threads_s, threaded = _threads(the_cell, the_duty, design)
    others = [ds for _, _, ds in runs.values()] + [threaded]
    same = all(bool(np.allclose(serial["peak_temperature_C"], other["peak_temperature_C"],
                                rtol=1e-12, equal_nan=True)) for other in others)
    failed = sum(int(ds.attrs["cases_failed"]) for ds in [serial, *others])
    # Other work on the machine shows up here; a loaded machine hides the parallel gain.
    common = {"section": "sweep", "cases": cases, "model": "spme", "grid": "12x8",
              "load_average_1min": os.getloadavg()[0]}
    # CPU seconds of the cases themselves: equal in every run when the cluster adds no work
    # per case; then the wall-time ratio on an idle machine approaches the worker count.
    cpu_serial = float(serial["case_cpu_s"].sum())
    rows = [{**common, "run": "serial", "wall_s": serial_s, "per_case_s": serial_s / cases,
             "cases_cpu_s": cpu_serial}]
    for n, (start_s, wall_s, ds) in runs.items():
        rows.append({**common, "run": f"dask {n}x1", "wall_s": wall_s,
                     "per_case_s": wall_s / cases, "cases_cpu_s": float(ds["case_cpu_s"].sum()),
                     "cluster_start_s": start_s})
    rows.append({**common, "run": "dask threads 1x2", "wall_s": threads_s,
                 "per_case_s": threads_s / cases})
    for n, (start_s, wall_s, ds) in runs.items():
        rows.append({**common, "run": f"serial/dask {n}x1", "ratio": serial_s / wall_s,
                     "ratio_with_start": serial_s / (wall_s + start_s),
                     "cpu_ratio": cpu_serial / float(ds["case_cpu_s"].sum()),
                     "ideal_ratio": float(min(n, os.cpu_count() or 1)), "same_figures": same,
                     "failed_cases": failed})
    rows.append({**common, "run": "serial/threads", "ratio": serial_s / threads_s})
    return rows


def _cluster(cell, duty, design, n_workers):
    """(start-up s, sweep wall s, result) on a fresh local cluster of ``n_workers`` processes.

    The start-up includes the workers' warm-up (imports, coolant tables), which the serial
    side has already paid in this process.
    """
    from distributed import Client, LocalCluster

    from explorer.sweeping import LOCAL_CLUSTER, _warm_workers, sweep

    t0 = time.perf_counter()
    cluster = LocalCluster(**{**LOCAL_CLUSTER, "n_workers": n_workers})
    client = Client(cluster)
    _warm_workers(client, [])
    start_s = time.perf_counter() - t0
    try:
        t0 = time.perf_counter()
        result = sweep(cell, duty, design, AXES, scheduler=client, progress=False, **SETTINGS)
        wall_s = time.perf_counter() - t0
    finally:
        client.close()
        cluster.close()
    return start_s, wall_s, result


def _threads(cell, duty, design):
    """Wall time (start-up included: milliseconds) of the sweep on a cluster of threads."""
    from distributed import Client, LocalCluster

    from explorer.sweeping import sweep

    t0 = time.perf_counter()
    with LocalCluster(processes=False, n_workers=1, threads_per_worker=2,
                      dashboard_address=None) as cluster, Client(cluster) as client:
        result = sweep(cell, duty, design, AXES, scheduler=client, progress=False, **SETTINGS)
    return time.perf_counter() - t0, result


if __name__ == "__main__":
    for row in bench_sweep():
        print(row)
