"""Raw cost of the rod models: ``bench_rods() -> list[dict]`` (called by ``explorer.bench``).

A deliberately simple fixed-step driver (no event location, no thermal model)
runs a full constant-current discharge from SOC 1 to the cell's lower voltage
limit at 25 degC, for each model on each demo cell, at the same mesh and the
same time steps. Each figure is the best of ``repeat`` runs after a warm-up.
The integrator's stepper is the real driver; this measures the rod alone.

Run it directly: ``python -m explorer.rod_bench``.
"""

from __future__ import annotations

import numpy as np

from explorer.timing import best_of

__all__ = ["bench_rods", "discharge", "TARGETS_S"]

TARGETS_S = {"spme": 0.1, "dfn": 3.0}  # full 1C discharge, issue 3
RATIO_TARGET = 30.0  # DFN / SPMe at the same mesh


def discharge(rod, params, c_rate=1.0, dt=20.0, temperature_K=298.15, max_steps=100000):
    """Fixed-step CC discharge to ``params.voltage_min_V``; returns ``(times, voltages, charge_Ah)``.

    ``dt`` is in seconds at 1C and scales with 1 / ``c_rate``. The step that
    crosses the limit (or that the model refuses because a particle surface
    empties) ends the run.
    """
    from explorer.rod.base import Control, RodStepError

    current = c_rate * params.capacity_Ah
    step = dt / c_rate
    control = Control("current", current)
    x = rod.initial_state(1.0, temperature_K)
    t, times, volts = 0.0, [], []
    for _ in range(max_steps):
        try:
            r = rod.solve_step(x, step, temperature_K, control)
        except RodStepError:
            break
        t += step
        times.append(t)
        volts.append(r.voltage_V)
        x = r.state
        if r.voltage_V <= params.voltage_min_V:
            break
    return np.array(times), np.array(volts), current * t / 3600.0


def bench_rods(repeat: int = 3, cells=None, mesh=None, c_rate: float = 1.0,
               dt: float = 20.0) -> list[dict]:
    """Wall time of a full CC discharge per model and demo cell, plus the DFN/SPMe ratio.

    Returns one dict per (cell, model) with ``section="rod"``, ``cell``, ``model``,
    ``wall_s``, ``steps``, ``per_step_ms``, ``capacity_Ah`` (delivered), ``target_s``
    and ``meets_target``; and one per cell with ``model="dfn/spme"`` and the ratio.
    """
    from explorer.cell import list_demo_cells, load_cell
    from explorer.rod import RodParameters, make_rod

    rows = []
    for name in cells or list(list_demo_cells()):
        params = RodParameters.from_cell(load_cell(name))
        walls = {}
        for model in ("spm", "spme", "dfn"):
            rod = make_rod(model, params, mesh)
            wall, (times, volts, q) = best_of(lambda rod=rod, p=params: discharge(rod, p, c_rate, dt),
                                            repeat if model != "dfn" else max(1, repeat - 1))
            walls[model] = wall
            target = TARGETS_S.get(model)
            rows.append({"section": "rod", "cell": name, "model": model, "c_rate": c_rate,
                         "dt_s": dt / c_rate, "wall_s": round(wall, 4), "steps": len(times),
                         "per_step_ms": round(1e3 * wall / max(len(times), 1), 4),
                         "capacity_Ah": round(q, 3), "target_s": target,
                         "meets_target": None if target is None else wall <= target})
        ratio = walls["dfn"] / walls["spme"]
        rows.append({"section": "rod", "cell": name, "model": "dfn/spme", "ratio": round(ratio, 1),
                     "target_ratio": RATIO_TARGET, "meets_target": ratio >= RATIO_TARGET})
    return rows


if __name__ == "__main__":  # pragma: no cover - manual run
    for row in bench_rods():
        print(row)
