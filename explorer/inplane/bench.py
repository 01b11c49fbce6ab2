"""Timings of the in-plane models for ``explorer.bench``: ``bench_inplane() -> list[dict]``.

Per demo cell on the 32 x 48 grid: building the collector network (the
factorised potential problem), building the thermal model, one step with a
cached factorisation and one step with a new ``dt`` (a fresh factorisation),
for three heat-path sets built directly as :class:`Sinks` (representative
values, invented for the benchmark): both faces convecting, an edge plate
with a fin sheet and a coolant stream, a face plate with a coolant stream.
Each figure is the best of ``repeat`` runs, to damp the noise of a shared machine.
"""

from __future__ import annotations

import numpy as np

from explorer.inplane.collector import CollectorNetwork
from explorer.inplane.grid import Grid
from explorer.inplane.sinks import CoolantStream, EdgeSink, FaceSink, Fin, Sinks
from explorer.inplane.thermal import PlaneThermal
from explorer.timing import best_of

#: Step with a cached factorisation, target per step (s): the averaged layout takes a few
#: hundred steps and the whole run must fit in 0.5 s.
TARGET_STEP_S = 1e-3


def _sink_sets(cell) -> dict:
    fin = Fin("back", 1.0e-3, 237.0, 2702.0, 903.0, 2000.0, "bottom")
    return {
        "convection": Sinks(faces={"front": FaceSink(10.0, 25.0), "back": FaceSink(10.0, 25.0)}),
        "edge plate + fin + coolant": Sinks(
            edges={"bottom": EdgeSink(300.0, 25.0, layer="fin")}, fin=fin,
            coolant=CoolantStream("bottom", "+y", 100.0, 25.0, upstream_cells=5)),
        "face plate + coolant": Sinks(
            faces={"back": FaceSink(800.0, 25.0)},
            coolant=CoolantStream("back", "+x", 50.0, 25.0, upstream_cells=5)),
    }


def _thermal_row(name: str, cell, g: Grid, label: str, sinks: Sinks, repeat: int) -> dict:
    heat = np.full(g.shape, 5.0 / (g.nx * g.ny))
    model = PlaneThermal(cell, g, sinks)
    state = model.initial_state(25.0)
    model.step(state, heat, 10.0)
    n = 200

    def cached():
        for _ in range(n):
            model.step(state, heat, 10.0)

    dts = iter(np.linspace(1.0, 2.0, repeat + 1))

    def fresh():
        model.step(state, heat, float(next(dts)))

    return {"section": "inplane", "cell": name, "part": f"thermal: {label}",
            "grid": f"{g.nx}x{g.ny}", "nodes": int(state.size),
            "build_s": best_of(lambda: PlaneThermal(cell, g, sinks), repeat, warm_up=False)[0],
            "step_cached_s": best_of(cached, repeat, warm_up=False)[0] / n, "step_new_dt_s": best_of(fresh, repeat, warm_up=False)[0],
            "target_step_s": TARGET_STEP_S}


def bench_inplane(repeat: int = 3, cells=None, grid=(32, 48)) -> list[dict]:
    """Rows with ``section`` "inplane" (see the module docstring)."""
    from explorer.cell import list_demo_cells, load_cell

    nx, ny = grid
    rows = []
    for name in cells or list(list_demo_cells()):
        cell = load_cell(name)
        g = Grid(cell.geometry.width_m, cell.geometry.height_m, nx, ny)
        build_s = best_of(lambda g=g, cell=cell: CollectorNetwork(cell, g), repeat, warm_up=False)[0]
        net = CollectorNetwork(cell, g)
        rows.append({"section": "inplane", "cell": name, "part": "collector build",
                     "grid": f"{nx}x{ny}", "refine": net.refine, "wall_s": build_s,
                     "resistance_mohm": net.resistance_ohm * 1e3})
        for label, sinks in _sink_sets(cell).items():
            rows.append(_thermal_row(name, cell, g, label, sinks, repeat))
    return rows


if __name__ == "__main__":  # pragma: no cover - manual use
    for row in bench_inplane():
        print(row)
