"""Bench section ``fidelity``: the fidelity check of an averaged SPMe run at 1C, and the
validation report end to end (``python -m explorer.bench --only fidelity``)."""

from __future__ import annotations

import contextlib
import sys
import tempfile
import time
from pathlib import Path

#: Targets of issue 10 on the 2-core reference machine, s.
TARGET_CHECK_S = 10.0
TARGET_VALIDATE_S = 180.0


def bench_check(cell_name: str = "van_nmc_66ah") -> dict:
    """One fidelity check (DFN, distributed, finer grid) of a cold-plate 1C discharge on the
    default grid; the run as made is timed apart and not counted."""
    import explorer
    from explorer.fidelity import check_fidelity

    cell = explorer.load_cell(cell_name)
    plate = explorer.cooling.cold_plate("eg50", flow_L_min=2.0, inlet_C=25.0)
    design = explorer.cooling.face_plate(plate)
    discharge = explorer.duty.discharge(c_rate=1.0)
    t0 = time.perf_counter()
    base = explorer.simulate(cell, discharge, design)
    as_run = time.perf_counter() - t0
    limits = explorer.Limits(temperature_max_C=45.0, spread_K=5.0)
    t0 = time.perf_counter()
    fid = check_fidelity(cell, discharge, design, limits=limits, base=base)
    wall = time.perf_counter() - t0
    return {"section": "fidelity", "case": f"{cell_name} 1C, face plate, spme averaged "
            f"{base.attrs['grid_nx']}x{base.attrs['grid_ny']}", "wall_s": wall,
            "target_s": TARGET_CHECK_S, "as_run_s": as_run,
            "variants": ", ".join(str(v) for v in fid["variant"].values[1:]),
            "variant_wall_s": ", ".join(f"{float(w):.2f}" for w in fid["wall_time"].values[1:]),
            "could_flip": fid.attrs["verdict_could_flip"]}


def bench_validate() -> dict:
    """``validate`` end to end (its full form) in a temporary folder; its printout goes to
    stderr so ``--json`` stays clean. Skipped with a note when the validation module is not
    importable."""
    row = {"section": "fidelity", "case": "validate (end to end)", "target_s": TARGET_VALIDATE_S}
    try:
        from explorer.validation import cmd_validate
    except ImportError as exc:
        return {**row, "note": f"skipped: explorer.validation not importable ({exc})"}
    with tempfile.TemporaryDirectory() as folder:
        t0 = time.perf_counter()
        with contextlib.redirect_stdout(sys.stderr):
            code = cmd_validate(Path(folder), quick=False)
        wall = time.perf_counter() - t0
    return {**row, "wall_s": wall, "exit_code": code}


def bench_fidelity(quick: bool = False) -> list[dict]:
    """The rows of the ``fidelity`` section. Each is one timed run (a check takes seconds;
    ``quick`` changes nothing here)."""
    return [bench_check(), bench_validate()]
