"""Time to the first answer, in fresh processes: ``bench_first_answer(quick) -> list[dict]``.

Called by ``python -m explorer.bench --only first_answer``. Every figure is the wall time from
the start of a new Python process (interpreter start included) to the answer, taken in the
same call as the baseline -- the bare import of numpy, scipy and xarray in a fresh process --
so each figure is also given as a ratio to that baseline, which travels between machines:

* ``baseline``: ``import numpy, scipy.sparse.linalg, xarray``.
* ``import explorer``: the package, and whether it loaded any of the libraries only some
  users need (CoolProp, Dask, plotly, ipywidgets, pint).
* ``first cold-plate run``: load a demo cell, build an edge plate on a glycol cold plate,
  ``explorer.simulate`` (SPMe, averaged layout, 1C discharge): the answer a new user asks
  for first. With the coolant property tables in the user cache (every run after the first
  on a machine), and once with an empty cache (the first run ever: CoolProp builds them).
* ``12-cell sizing``: ``explorer.size_cooling`` of the fin of a bottom edge plate under 12
  cells on one coolant path (the van demo scenario), from process start.
* ``sweep first case``: ``python -m explorer sweep`` on the 15-case demo scenario (face
  plate flow x inlet, local cluster), the time from the command's start to its first case
  done (read off the progress bar), and to the end of the command.

Targets are those of issue 15 (seconds on the 2-core development machine): ``met`` compares
the seconds. ``target_ratio`` is the target over the baseline on that machine
(:data:`REFERENCE_BASELINE_S`); ``met_by_ratio`` compares ``ratio`` with it, which holds on
another machine, or on a loaded one. ``cpu_s`` is the CPU time of the process (not of its
subprocesses), which other work on the machine disturbs less than the wall time.
"""

from __future__ import annotations

import json
import os
import re
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

__all__ = ["bench_first_answer", "TARGETS_S", "REFERENCE_BASELINE_S"]

# Issue 15 targets, seconds from process start on the 2-core development machine.
TARGETS_S = {"first cold-plate run": 1.5, "12-cell sizing": 4.0, "sweep first case": 5.0}
# The baseline import on that machine (2026-12-02): the machine was never idle that day; its
# CPU time was 0.46 s and the best wall time under load 0.97 s: 0.5 s taken as the idle figure.
REFERENCE_BASELINE_S = 0.5
HEAVY = ("CoolProp", "dask", "distributed", "plotly", "ipywidgets", "pint")
SWEEP_SCENARIO = "rack_face_plate_sweep.toml"

_REPORT = """
import json, sys, time
print("@@" + json.dumps({"t": time.time(), "cpu_s": time.process_time(), **__result}),
      flush=True)
"""

BASELINE = "import numpy, scipy, scipy.sparse.linalg, xarray\n__result = {}"
IMPORT = f"""
import sys
import explorer
__result = {{"heavy": [m for m in {list(HEAVY)!r} if m in sys.modules]}}
"""
FIRST_RUN = """
import explorer
cell = explorer.load_cell("van_nmc_66ah")
plate = explorer.cooling.cold_plate("eg50", flow_L_min=4.0, inlet_C=25.0)
design = explorer.cooling.edge_plate(plate, edge="bottom", fin_mm=1.0)
ds = explorer.simulate(cell, explorer.duty.discharge(c_rate=1.0), design,
                       electrochemistry="spme", layout="averaged")
__result = {"status": ds.attrs["status"], "steps": int(ds.attrs["steps_taken"])}
"""
SIZING = """
import explorer
cell = explorer.load_cell("van_nmc_66ah")
plate = explorer.cooling.cold_plate("eg50", flow_L_min=4.0, inlet_C=30.0, cells_per_plate=12)
design = explorer.cooling.edge_plate(plate, edge="bottom", fin_mm=1.0, tim_W_mK=3.0,
                                     tim_mm=0.5)
limits = explorer.Limits(temperature_max_C=45.0, spread_K=5.0, cell_to_cell_K=3.0)
runs = []
result = explorer.size_cooling(cell, explorer.duty.discharge(c_rate=1.0), design, "fin_mm",
                               (0.2, 3.0), limits, on_evaluation=lambda *a: runs.append(a),
                               electrochemistry="spme", layout="averaged", grid=(12, 8),
                               start_temperature_C=30.0, output_interval_s=30.0)
__result = {"evaluations": len(runs), "answer": getattr(result, "value", None)}
"""


def bench_first_answer(quick: bool = False) -> list[dict]:
    """Rows with ``section`` "first_answer": each figure, its target and its baseline ratio.

    ``quick``: one timing per figure (else the best of three, after one warm-up process
    that also fills the coolant tables of the user cache).
    """
    repeat = 1 if quick else 3
    _child(FIRST_RUN)  # warm-up: disk caches, the user's coolant tables
    base = _best(BASELINE, repeat)
    baseline = base["s"]
    common = {"section": "first_answer", "baseline_s": baseline,
              "load_average_1min": os.getloadavg()[0]}

    def row(what, s, target=None, **extra):
        """``target``: seconds (its ratio to the reference baseline beside it) or words."""
        seconds = isinstance(target, (int, float))
        out = {**common, "figure": what, "s": s, "target": target, "ratio": s / baseline,
               "cpu_s": extra.pop("cpu_s", None),
               "target_ratio": target / REFERENCE_BASELINE_S if seconds else None,
               "met": (s <= target) if seconds else None,
               # the same target as a ratio: holds on a slower or a loaded machine too
               "met_by_ratio": (s / baseline <= target / REFERENCE_BASELINE_S) if seconds
               else None}
        out.update(extra)
        return out

    rows = [row("baseline: import numpy, scipy, xarray", baseline, cpu_s=base["cpu_s"])]
    imp = _best(IMPORT, repeat)
    rows.append(row("import explorer", imp["s"], "none of " + ", ".join(HEAVY) + " loaded",
                    heavy_modules_loaded=",".join(imp["heavy"]) or "none", cpu_s=imp["cpu_s"]))
    first = _best(FIRST_RUN, repeat)
    rows.append(row("first cold-plate run", first["s"], TARGETS_S["first cold-plate run"],
                    status=first.get("status"), steps=first.get("steps"), cpu_s=first["cpu_s"]))
    with tempfile.TemporaryDirectory(prefix="explorer-bench-cache-") as empty:
        cold = _child(FIRST_RUN, env={"EXPLORER_CACHE_DIR": empty})
    rows.append(row("first cold-plate run, empty property cache", cold["s"],
                    "none: once per coolant and CoolProp version", cpu_s=cold["cpu_s"]))
    sizing = _best(SIZING, 1 if quick else 2)
    rows.append(row("12-cell sizing", sizing["s"], TARGETS_S["12-cell sizing"],
                    evaluations=sizing.get("evaluations"), answer=sizing.get("answer"),
                    cpu_s=sizing["cpu_s"]))
    sweeps = [_sweep_first_case() for _ in range(1 if quick else 2)]
    best = min(sweeps, key=lambda r: r["first_case_s"])
    rows.append(row("sweep first case", best["first_case_s"], TARGETS_S["sweep first case"],
                    cases=best["cases"], command_s=best["command_s"], returncode=best["rc"]))
    return rows


def _best(code: str, repeat: int) -> dict:
    return min((_child(code) for _ in range(max(1, repeat))), key=lambda r: r["s"])


def _child(code: str, env: dict | None = None) -> dict:
    """Run ``code`` in a fresh interpreter; its result dict with ``s`` = seconds from the
    process's start to the end of ``code``."""
    t0 = time.time()
    done = subprocess.run([sys.executable, "-c", code + _REPORT], capture_output=True,
                          text=True, env={**os.environ, **(env or {})}, timeout=600)
    lines = [ln for ln in done.stdout.splitlines() if ln.startswith("@@")]
    if done.returncode != 0 or not lines:
        raise RuntimeError(f"first_answer child failed ({done.returncode}): "
                           f"{done.stderr.strip()[-800:]}")
    result = json.loads(lines[-1][2:])
    result["s"] = result.pop("t") - t0
    return result


def _sweep_first_case() -> dict:
    """``python -m explorer sweep`` on the demo sweep scenario (its cache in a temporary
    folder): seconds from the command's start to the first case done, and to its end."""
    from explorer.cell.loader import DEMO_DIR

    source = Path(DEMO_DIR) / "scenarios" / SWEEP_SCENARIO
    with tempfile.TemporaryDirectory(prefix="explorer-bench-sweep-") as tmp:
        text = source.read_text(encoding="utf-8")
        cache = (Path(tmp) / "cache").as_posix()
        text = re.sub(r"(?m)^cache\s*=.*$", f'cache = "{cache}"', text)
        scenario = Path(tmp) / SWEEP_SCENARIO
        scenario.write_text(text, encoding="utf-8")
        t0 = time.time()
        proc = subprocess.Popen([sys.executable, "-m", "explorer", "sweep", str(scenario),
                                 "--out", tmp], stdout=subprocess.DEVNULL,
                                stderr=subprocess.PIPE, cwd=tmp)
        marks: dict[int, float] = {}
        total = [0]
        reader = threading.Thread(target=_read_progress, args=(proc.stderr, marks, total))
        reader.start()
        try:
            rc = proc.wait(timeout=600)
        finally:
            if proc.poll() is None:
                proc.kill()
            reader.join()
        end = time.time()
    first = min((t for n, t in marks.items() if n >= 1), default=float("nan"))
    return {"first_case_s": first - t0, "command_s": end - t0, "cases": total[0], "rc": rc}


def _read_progress(stream, marks: dict, total: list) -> None:
    """Time (time.time()) at which the progress bar first showed each count of done cases."""
    tail = b""
    while True:
        chunk = stream.read1(4096)
        if not chunk:
            return
        now = time.time()
        tail = (tail + chunk)[-4096:]
        for m in re.finditer(rb"\|\s*(\d+)/(\d+)", tail):
            marks.setdefault(int(m.group(1)), now)
            total[0] = int(m.group(2))


if __name__ == "__main__":
    for r in bench_first_answer(quick="--quick" in sys.argv):
        print(r)
