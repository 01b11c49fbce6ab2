"""The ``profile`` section of ``python -m explorer.bench``: long 1 Hz load profiles.

A day-long 1 Hz profile (86 400 rows) must run in time linear in its length:
each row is a breakpoint the stepper lands on, so the cost per row should not
grow with the row count. The load is INVENTED (a zero-mean square wave of
10 A with a 10-minute period on the demo van cell, single layout, SPMe).
"""

from __future__ import annotations

import tempfile
from pathlib import Path

import numpy as np

from explorer.timing import best_of

ROWS = (10_000, 30_000, 86_400)


def _write_profile(path: Path, rows: int) -> None:
    t = np.arange(rows)
    current = 10.0 * np.sign(np.sin(2 * np.pi * (t + 0.5) / 600.0))  # invented, zero mean
    path.write_text("time_s,current_A\n" + "".join(f"{a},{b:g}\n" for a, b in zip(t, current)))


def bench_profile(repeat=1, rows=ROWS):
    import explorer

    cell = explorer.load_cell("van_nmc_66ah")
    out = []
    with tempfile.TemporaryDirectory() as folder:
        for n in rows:
            path = Path(folder) / f"profile_{n}.csv"
            _write_profile(path, n)
            step = explorer.duty.profile_csv(path)

            def once(step=step):
                return explorer.simulate(cell, step, layout="single", start_soc=0.5)
            wall, ds = best_of(once, repeat, warm_up=False)
            out.append({"section": "profile", "rows": n, "wall_s": wall,
                        "ms_per_row": 1e3 * wall / n, "records": int(ds.sizes["time"]),
                        "steps": int(ds.attrs["steps_taken"]), "status": ds.attrs["status"]})
    return out
