"""Where the fuller models matter: a map of how far the cheap models drift from the full ones.

For each demo cell, C-rate and start temperature, one constant-current discharge from SOC 1 to
the cell's lower voltage is run with the SPMe on the averaged layout (the default, "as run"),
and :func:`explorer.check_fidelity` re-runs it on the same duty and cooling with

* the DFN through the cell: the voltage difference (RMS and largest, over the time both ran)
  is what the SPMe misses through the cell;
* the distributed layout over the face: the difference in peak temperature (hottest point
  anywhere) is what averaging the current over the face misses;
* a grid twice as fine: how far the map's coarse grid is from converged.

This compares the tool's own models (no outside source); it shows where the cheap ones stop
being enough. The grid is coarse to keep the map within the validation report's time budget;
the DFN and distributed runs use the same grid, so their differences are the models', and the
finer-grid column says what the grid itself moves.
"""

from __future__ import annotations

import json
import math
import time
from dataclasses import dataclass

__all__ = ["MapSettings", "fuller_model_map", "map_figure", "map_messages", "map_table_rows"]


@dataclass(frozen=True)
class MapSettings:
    c_rates: tuple = (0.5, 1.0, 2.0, 3.0)
    temperatures_C: tuple = (0.0, 25.0)  # start temperature = coolant inlet
    cells_in_grid: int = 96  # in-plane control volumes, near-square on each cell's face
    max_wall_s: float = 120.0  # cap of each point's fuller runs (explorer.check_fidelity)
    coolant: str = "eg50"  # liquid down to -36 degC
    flow_L_min: float = 2.0

    def describe(self) -> str:
        return (f"constant-current discharge from SOC 1 to the lower voltage, cell and coolant "
                f"inlet at the start temperature; back-face cold plate ({self.coolant}, "
                f"{self.flow_L_min:g} L/min, default plate and TIM); in-plane grid of about "
                f"{self.cells_in_grid} control volumes (the finer-grid variant doubles it in "
                "each direction), the distributed layout's default rods (about 24), default "
                "rod mesh; computed with explorer.check_fidelity")


def _near_square(width: float, height: float, n: int) -> tuple[int, int]:
    nx = max(1, round(math.sqrt(n * width / height)))
    return nx, max(1, round(n / nx))


_LABEL = {"as run": "SPMe averaged", "dfn": "DFN averaged", "distributed": "SPMe distributed",
          "finer grid": "finer grid"}


def _point(cell, c_rate: float, T_C: float, s: MapSettings) -> dict:
    """One point: the run as made (SPMe, averaged) and :func:`explorer.check_fidelity` on it."""
    import explorer
    from explorer import cooling, duty

    g = cell.geometry
    grid = _near_square(g.width_m, g.height_m, s.cells_in_grid)
    plate = cooling.cold_plate(coolant=s.coolant, flow_L_min=s.flow_L_min, inlet_C=T_C)
    design = cooling.face_plate(plate, face="back")
    steps = duty.discharge(c_rate=c_rate)
    base = explorer.simulate(cell, steps, design, "spme", "averaged", start_temperature_C=T_C,
                             grid=grid)
    fid = explorer.check_fidelity(cell, steps, design, "spme", "averaged",
                                  start_temperature_C=T_C, grid=grid, base=base,
                                  max_wall_s=s.max_wall_s)
    row = {"cell": cell_name(cell), "c_rate": c_rate, "temperature_C": T_C,
           "voltage_rms_mV": math.nan, "voltage_max_mV": math.nan, "peak_as_run_C": math.nan,
           "peak_difference_K": math.nan, "dfn_peak_difference_K": math.nan,
           "grid_peak_difference_K": math.nan, "note": ""}
    names = [str(v) for v in fid["variant"].values]
    status = {n: str(fid["status"].sel(variant=n).values) for n in names}
    failed = [n for n in names if status[n] != "completed"]
    notes = [f"{_LABEL[n]} {status[n]}" for n in failed]
    notes += [f"{s_['variant']} not run: {s_['reason']}" for s_ in json.loads(
        fid.attrs.get("skipped", "[]"))]
    if failed:
        notes.append(", ".join(f"{_LABEL[n]} completed" for n in names if n not in failed))
    row["note"] = "; ".join(notes)
    if status["as run"] != "completed":
        row["messages"] = {_LABEL["as run"]: str(base.attrs.get("status_message", ""))}
        return row  # nothing to compare the fuller runs with

    def peak(n):
        return float(fid["peak_temperature"].sel(variant=n))

    row["peak_as_run_C"] = peak("as run")
    ok = {n for n in names if status[n] == "completed"}
    if "dfn" in ok:
        row["voltage_rms_mV"] = 1e3 * float(fid["voltage_rms_difference"].sel(variant="dfn"))
        row["voltage_max_mV"] = 1e3 * float(fid["voltage_max_difference"].sel(variant="dfn"))
        row["dfn_peak_difference_K"] = peak("dfn") - peak("as run")
    if "distributed" in ok:
        row["peak_difference_K"] = peak("distributed") - peak("as run")
    if "finer grid" in ok:
        row["grid_peak_difference_K"] = peak("finer grid") - peak("as run")
    return row


def cell_name(cell) -> str:
    from pathlib import Path

    return Path(cell.source_path).stem if cell.source_path else cell.name


def fuller_model_map(settings: MapSettings | None = None, cells=None, progress=None):
    """Run the map; return ``(rows, seconds)``: one dict per (cell, C-rate, temperature)."""
    from explorer.cell import list_demo_cells, load_cell

    s = settings or MapSettings()
    t0 = time.perf_counter()
    rows = []
    for name in cells or sorted(list_demo_cells()):
        cell = load_cell(name)
        for T_C in s.temperatures_C:
            for c_rate in s.c_rates:
                rows.append(_point(cell, c_rate, T_C, s))
                if progress is not None:
                    progress(rows[-1])
    return rows, time.perf_counter() - t0


def _fmt(value: float, spec: str) -> str:
    if not math.isfinite(value):
        return "—"
    text = format(value, spec)
    return text if any(c in "123456789" for c in text) else format(0.0, spec.lstrip("+"))


#: differences the table marks: beyond these the cheap model is not enough for a design whose
#: margins are this small (the bounds of the fidelity check's mild case, issue 10)
MARK_VOLTAGE_RMS_MV = 5.0
MARK_PEAK_K = 0.5


def map_table_rows(rows, mark=lambda text: text) -> tuple[list[str], list[list[str]]]:
    """Header and formatted rows for the HTML and Markdown tables; ``mark(text)`` decorates
    a difference beyond :data:`MARK_VOLTAGE_RMS_MV` or :data:`MARK_PEAK_K`."""
    header = ["cell", "C-rate", "start (°C)", "SPMe−DFN RMS (mV)", "SPMe−DFN max (mV)",
              "peak, as run (°C)", "distributed − averaged peak (K)", "DFN − SPMe peak (K)",
              "finer grid − as run peak (K)", "note"]

    def flagged(value, spec, bound):
        text = _fmt(value, spec)
        return mark(text) if math.isfinite(value) and abs(value) > bound else text

    out = [[r["cell"], f"{r['c_rate']:g}C", f"{r['temperature_C']:g}",
            flagged(r["voltage_rms_mV"], ".1f", MARK_VOLTAGE_RMS_MV),
            _fmt(r["voltage_max_mV"], ".0f"), _fmt(r["peak_as_run_C"], ".1f"),
            flagged(r["peak_difference_K"], "+.2f", MARK_PEAK_K),
            flagged(r["dfn_peak_difference_K"], "+.2f", MARK_PEAK_K),
            flagged(r.get("grid_peak_difference_K", math.nan), "+.2f", MARK_PEAK_K),
            r["note"]] for r in rows]
    return header, out


def map_messages(rows) -> list[str]:
    """The status messages of the runs that did not complete, one line each."""
    return [f"{r['cell']} {r['c_rate']:g}C {r['temperature_C']:g} °C, {label}: {text}"
            for r in rows for label, text in r.get("messages", {}).items()]


def map_figure(rows):
    """Two panels against C-rate: SPMe−DFN voltage RMS, distributed−averaged peak difference."""
    from plotly.subplots import make_subplots

    from explorer.validation.checks import PALETTE

    fig = make_subplots(rows=1, cols=2, subplot_titles=(
        "SPMe − DFN voltage, RMS (mV)", "distributed − averaged peak temperature (K)"))
    cells = list(dict.fromkeys(r["cell"] for r in rows))
    temps = sorted({r["temperature_C"] for r in rows})
    for i, cell in enumerate(cells):
        for T in temps:
            sel = [r for r in rows if r["cell"] == cell and r["temperature_C"] == T]
            x = [r["c_rate"] for r in sel]
            dash = "solid" if T == max(temps) else "dash"
            style = dict(color=PALETTE[i % len(PALETTE)], dash=dash)
            name = f"{cell}, {T:g} °C"
            fig.add_scatter(x=x, y=[r["voltage_rms_mV"] for r in sel], mode="lines+markers",
                            line=style, name=name, legendgroup=name, row=1, col=1)
            fig.add_scatter(x=x, y=[r["peak_difference_K"] for r in sel], mode="lines+markers",
                            line=style, name=name, legendgroup=name, showlegend=False, row=1,
                            col=2)
    fig.update_xaxes(title_text="C-rate")
    fig.update_yaxes(type="log", row=1, col=1)
    fig.update_layout(template="plotly_white", height=430, margin=dict(l=60, r=20, t=60, b=60),
                      title="Where the fuller models matter (gaps: the SPMe could not run)")
    return fig
