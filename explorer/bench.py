"""Benchmarks: ``python -m explorer.bench [--json] [--quick] [--only NAME ...]``.

Speed targets are met here, never in timed unit tests. Every ratio is
measured side by side in the same run. Sections:

* ``rods``      full 1C discharge through ``simulate`` (single layout, adaptive steps,
                event location, Dataset) for each model on each demo cell; real-time
                factor; DFN/SPMe ratio, which the shared stepper's own cost dilutes
* ``rod_only``  the rod models alone at a fixed 20 s step (no stepper): the
                compute ratio DFN/SPMe at the same mesh
* ``averaged``  SPMe, averaged layout, 32 x 48 thermal grid, full 1C discharge
* ``distributed`` the same on the default grid of rods (for scale; no target)
* ``module``    a face plate shared by 12 cells: ``simulate_module`` (all 12 cells,
                coupled along the coolant) against one ``simulate`` of the same design,
                SPMe averaged on the default grid, 1C discharge; target ratio <= 3
* ``profile``   1 Hz load profiles of 10 000, 30 000 and 86 400 rows (single layout, SPMe):
                the cost per row must stay flat (linear time in the profile's length)
* ``inplane``   collector network set-up and thermal steps on the 32 x 48 grid
* ``sweep``     48-case sweep, serial against the local Dask cluster
* ``app``       the notebook app's run-to-figure and time-slider update
* ``stepper``   the shared stepper's own cost per step, and the heat integration on default steps
* ``first_answer`` fresh processes: first cold-plate run, a 12-cell sizing, a sweep's first
                case, as ratios to the bare import of numpy, scipy and xarray
* ``fidelity``  the fidelity check of an averaged SPMe run at 1C; ``validate`` end to end
* ``calibrate`` a three-parameter calibration to three discharge curves

Each figure is the best of ``--repeat`` runs (default 3) after one warm-up,
which suppresses the noise of a shared machine without hiding a slow path.
"""

from __future__ import annotations

import argparse
import json
import platform
import sys

from explorer.timing import best_of

TARGETS = {
    ("rods", "spme"): 0.1,
    ("rods", "dfn"): 3.0,
    ("averaged", "spme"): 0.5,
}


def bench_simulate_rods(repeat=3, cells=None):
    import explorer
    from explorer.cell import list_demo_cells

    rows = []
    for name in cells or list(list_demo_cells()):
        cell = explorer.load_cell(name)
        times = {}
        for model in ("spm", "spme", "dfn"):
            def once(model=model, cell=cell):
                return explorer.simulate(cell, explorer.duty.discharge(c_rate=1.0),
                                         electrochemistry=model, layout="single")
            wall, ds = best_of(once, repeat if model != "dfn" else max(1, repeat - 1))
            times[model] = wall
            duration = float(ds.time[-1])
            rows.append({"section": "rods", "cell": name, "model": model, "wall_s": wall,
                         "duration_s": duration, "real_time_factor": duration / wall,
                         "steps": int(ds.attrs["steps_taken"]), "status": ds.attrs["status"],
                         "target_s": TARGETS.get(("rods", model))})
        rows.append({"section": "rods", "cell": name, "model": "dfn/spme",
                     "ratio": times["dfn"] / times["spme"], "target_ratio_min": 30.0})
    return rows


def bench_layout(layout, repeat=3, cells=None, warm_up=True):
    """SPMe, full 1C discharge with convection on a 32 x 48 field, in the given layout."""
    import explorer
    from explorer.cell import list_demo_cells

    rows = []
    for name in cells or list(list_demo_cells()):
        cell = explorer.load_cell(name)

        def once(cell=cell):
            return explorer.simulate(cell, explorer.duty.discharge(c_rate=1.0),
                                     explorer.cooling.convection(10.0, 25.0),
                                     electrochemistry="spme", layout=layout, grid=(32, 48))
        wall, ds = best_of(once, repeat, warm_up=warm_up)
        duration = float(ds.time[-1])
        rows.append({"section": layout, "cell": name, "model": "spme", "grid": "32x48",
                     "rods": "x".join(map(str, json.loads(ds.attrs["rods"]))), "wall_s": wall,
                     "duration_s": duration, "real_time_factor": duration / wall,
                     "steps": int(ds.attrs["steps_taken"]), "status": ds.attrs["status"],
                     "target_s": TARGETS.get((layout, "spme"))})
    return rows


def bench_module(repeat=3, cells=12, cell_name="van_nmc_66ah"):
    """``simulate_module`` of ``cells`` cells on one face plate against one ``simulate``.

    The two are timed alternately (best of ``repeat`` each) so the ratio sees the
    same machine load.
    """
    import explorer
    from explorer.timing import best_of

    cell = explorer.load_cell(cell_name)
    along = cell.geometry.width_m * 1e3  # the plate runs along +x under every cell
    plate = explorer.cooling.cold_plate("eg50", flow_L_min=4.0, inlet_C=25.0,
                                        cells_per_plate=cells, length_mm=cells * along)
    design = explorer.cooling.face_plate(plate)
    duty = explorer.duty.discharge(c_rate=1.0)

    def single():
        return explorer.simulate(cell, duty, design)

    def module():
        return explorer.simulate_module(cell, duty, design)

    single(), module()  # warm-up: imports, coolant tables
    t_single, t_module = float("inf"), float("inf")
    for _ in range(max(1, repeat)):
        w, ds1 = best_of(single, 1, warm_up=False)
        t_single = min(t_single, w)
        w, dsm = best_of(module, 1, warm_up=False)
        t_module = min(t_module, w)
    return [{"section": "module", "cell": cell_name, "model": "spme", "cells": cells,
             "grid": f"{dsm.sizes['x']}x{dsm.sizes['y']}", "single_s": t_single,
             "module_s": t_module, "ratio": t_module / t_single, "target_ratio_max": 3.0,
             "steps_single": int(ds1.attrs["steps_taken"]),
             "steps_module": int(dsm.attrs["steps_taken"]), "status": dsm.attrs["status"]}]


def _section(name, quick):
    if name == "rods":
        return bench_simulate_rods(repeat=1 if quick else 3)
    if name == "averaged":
        return bench_layout("averaged", repeat=1 if quick else 3)
    if name == "distributed":  # seconds per run: one timed run, no warm-up
        return bench_layout("distributed", repeat=1, warm_up=False)
    if name == "module":
        return bench_module(repeat=1 if quick else 3)
    if name == "rod_only":
        from explorer.rod_bench import bench_rods as bench_rod_models

        return bench_rod_models(repeat=1 if quick else 3)
    if name == "profile":  # one timed run per length (a day-long profile takes a while)
        from explorer.stepping.profile_bench import bench_profile

        return bench_profile()
    if name == "inplane":
        from explorer.inplane.bench import bench_inplane

        return bench_inplane(repeat=1 if quick else 3)
    if name == "sweep":
        from explorer.sweep_bench import bench_sweep

        return bench_sweep()
    if name == "app":
        from explorer.app.bench import bench_app

        return bench_app()
    if name == "stepper":
        from explorer.stepping.stepper_bench import bench_stepper

        return bench_stepper(repeat=1 if quick else 3)
    if name == "first_answer":  # fresh processes: cold imports, first calls
        from explorer.first_answer_bench import bench_first_answer

        return bench_first_answer(quick=quick)
    if name == "fidelity":
        from explorer.fidelity_bench import bench_fidelity

        return bench_fidelity(quick=quick)
    if name == "calibrate":
        from explorer.calibration_bench import bench_calibration

        return bench_calibration(quick=quick)
    raise ValueError(name)


SECTIONS = ("rods", "rod_only", "averaged", "distributed", "module", "profile", "inplane",
            "sweep", "app", "stepper", "first_answer", "fidelity", "calibrate")


def _table(rows) -> str:
    keys = []
    for r in rows:
        keys.extend(k for k in r if k not in keys)
    cols = [[k] + [_fmt(r.get(k)) for r in rows] for k in keys]
    widths = [max(len(c) for c in col) for col in cols]
    lines = []
    for i in range(len(rows) + 1):
        lines.append("  ".join(col[i].ljust(w) for col, w in zip(cols, widths)))
        if i == 0:
            lines.append("  ".join("-" * w for w in widths))
    return "\n".join(lines)


def _fmt(v) -> str:
    if v is None:
        return ""
    if isinstance(v, float):
        return f"{v:.4g}"
    return str(v)


def main(argv=None) -> int:
    p = argparse.ArgumentParser(prog="python -m explorer.bench", description=__doc__.split("\n")[0])
    p.add_argument("--json", action="store_true", help="print machine-readable figures")
    p.add_argument("--quick", action="store_true", help="one repeat per figure")
    p.add_argument("--only", nargs="+", choices=SECTIONS, help="sections to run")
    args = p.parse_args(argv)
    rows, errors = [], []
    for name in args.only or SECTIONS:
        try:
            rows.extend(_section(name, args.quick))
        except Exception as exc:  # a broken section must not hide the others' figures
            errors.append({"section": name, "error": f"{type(exc).__name__}: {exc}"})
    meta = {"python": platform.python_version(), "machine": platform.machine(),
            "processor": platform.processor()}
    if args.json:
        json.dump({"meta": meta, "rows": rows, "errors": errors}, sys.stdout, indent=2)
        print()
    else:
        by = {}
        for r in rows:
            by.setdefault(r["section"], []).append(r)
        for name, rs in by.items():
            print(f"\n== {name} ==")
            print(_table([{k: v for k, v in r.items() if k != "section"} for r in rs]))
        for e in errors:
            print(f"\n== {e['section']} == FAILED: {e['error']}")
    return 1 if errors else 0


if __name__ == "__main__":
    sys.exit(main())
