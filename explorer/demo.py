"""The main job on a bundled demo cell: ``python -m explorer demo``.

A 2C continuous discharge of the delivery-van demo cell (invented) on an
edge cold plate under its bottom edge with an aluminium fin sheet, averaged
layout with SPMe; prints the key figures and writes the results (netCDF) and
a self-contained HTML report.
"""

from __future__ import annotations

import math
import time
from pathlib import Path

from explorer.limits import verdict_lines
from explorer.results import CAUTION, key_figures, save


def demo_design():
    """The demo's cooling design: water-cooled edge plate under the bottom edge, 0.5 mm fin."""
    from explorer import cooling

    plate = cooling.cold_plate(coolant="water", flow_L_min=2.0, inlet_C=25.0)
    return cooling.edge_plate(plate, edge="bottom", fin_mm=0.5)


def describe_cell(cell) -> str:
    g, d = cell.geometry, cell.derived
    tabs = ", ".join(f"{t.name}{'' if t.name == t.polarity else f' ({t.polarity})'} on "
                     f"{t.edge} at {t.position_m * 1e3:.0f} mm, {t.width_m * 1e3:.0f} mm wide"
                     for t in g.tabs)
    curves = "; ".join(f"{name} {e.ocp if isinstance(e.ocp, str) else e.ocp.source}"
                       for name, e in (("negative", cell.negative), ("positive", cell.positive)))
    note = str(cell.extra.get("data_note", "") or "")
    warnings = [str(w) for w in cell.extra.get("warnings", []) or []]
    lines = [
        f"{cell.name}: {cell.description}",
        f"  file             {cell.source_path}",
        f"  capacity         {cell.nominal_capacity_Ah:g} Ah nominal, "
        f"{d.theoretical_capacity_Ah:.2f} Ah computed (N/P {d.np_ratio:.2f})",
        f"  voltage window   {cell.voltage_min_V:g}-{cell.voltage_max_V:g} V, energy "
        f"{d.energy_Wh:.0f} Wh",
        f"  size             coated area {g.width_m * 1e3:.0f} x {g.height_m * 1e3:.0f} mm, "
        f"{g.stack_thickness_m * 1e3:.1f} mm thick, {g.unit_layers} unit layers, "
        f"{d.mass_kg * 1e3:.0f} g",
        f"  tabs             {tabs}",
        f"  conductivity     {d.inplane_conductivity_W_mK:.1f} W/(m K) in plane, "
        f"{d.throughplane_conductivity_W_mK:.2f} W/(m K) through plane",
        f"  heat capacity    {d.heat_capacity_J_K:.0f} J/K",
        f"  temperature      {cell.temperature_min_C:g} to {cell.temperature_max_C:g} degC "
        "(data sheet)",
        f"  potentials       {curves}",
    ]
    if note:
        lines.append(f"  data note        {note}")
    lines += [f"  warning          {w}" for w in warnings]
    return "\n".join(lines)


def _kelvin(value, what: str) -> str:
    return f"{value:.2f} K ({what})" if math.isfinite(value) else f"not evaluated ({what})"


def format_figures(fig: dict, ds) -> str:
    """The key figures, each saying what it spans (see :func:`explorer.results.key_figures`)."""
    limit = ds.attrs.get("temperature_limit_C")
    ttl = fig["time_to_limit_s"]
    face_why = ("layout single: one temperature over the face" if not
                math.isfinite(fig["max_face_spread_K"]) else "of the through-thickness mean "
                "field over the face")
    rows = [
        ("peak temperature", f"{fig['peak_temperature_C']:.2f} degC at {fig['peak_time_s']:.0f} s"
                             f": hottest point anywhere in the cell, core estimate and faces "
                             f"included (limit {limit:g} degC)"),
        ("  mean field only", f"{fig['peak_mean_field_C']:.2f} degC (hottest point of the "
                              "through-thickness mean field)"),
        ("largest in-cell spread", _kelvin(fig["max_spread_K"], "hottest minus coldest point "
                                           "anywhere in the cell at one time")),
        ("  over the face", _kelvin(fig["max_face_spread_K"], face_why)),
        ("  through the thickness", _kelvin(fig["max_through_thickness_K"], "largest hottest "
                                            "minus coldest through the thickness at one point")),
        ("time to temperature limit", ("not reached" if ttl is None else f"{ttl:.0f} s")
         + f" (hottest point anywhere reaching {limit:g} degC)"),
        ("energy delivered", f"{fig['energy_delivered_Wh']:.1f} Wh "
                             f"({fig['charge_delivered_Ah']:.2f} Ah)"),
        ("heat generated / rejected", f"{fig['heat_generated_J'] / 1e3:.1f} kJ / "
                                      f"{fig['heat_rejected_J'] / 1e3:.1f} kJ"),
        ("end of run", f"{fig['duration_s']:.0f} s, {fig['end_voltage_V']:.3f} V, "
                       f"SOC {fig['end_soc']:.3f}"),
        ("status", f"{ds.attrs['status']}: {ds.attrs['status_message']}"),
    ]
    return "\n".join(f"  {k:26s} {v}" for k, v in rows)


def run_demo(cell_name: str, out: Path, c_rate: float = 2.0) -> int:
    import explorer

    cell = explorer.load_cell(cell_name)
    design = demo_design()
    duty = explorer.duty.discharge(c_rate=c_rate)
    print(describe_cell(cell))
    print(f"\nRunning a {c_rate:g}C discharge, SPMe, averaged layout, edge plate with fin ...")
    t0 = time.perf_counter()
    ds = explorer.simulate(cell, duty, design, electrochemistry="spme", layout="averaged")
    wall = time.perf_counter() - t0
    fig = key_figures(ds)
    print(f"done in {wall:.2f} s\n")
    print(format_figures(fig, ds))
    # the data-sheet maximum, and a 5 K in-cell spread (a common design guideline, no single
    # source): the limits a review would hold this run against first
    limits = explorer.Limits(temperature_max_C=cell.temperature_max_C, spread_K=5.0)
    check = limits.check(ds)
    print("\nAgainst the data-sheet maximum and a 5 K spread guideline (common practice):")
    for line in verdict_lines(limits, check):
        print(f"  {line}")
    out = Path(out)
    stem = f"{Path(cell.source_path).stem or 'cell'}_{c_rate:g}C"
    from explorer.report import write_report

    try:
        nc = save(ds, out / f"{stem}.nc", limits=limits)
        html = write_report(ds, out / f"{stem}_report.html", limits=limits,
                            title=f"{cell.name}: {c_rate:g}C discharge on an edge cold plate")
    except (OSError, ValueError) as exc:  # ValueError: the report's own path checks
        raise _write_error(out, exc) from exc
    print(f"\nwrote {nc}\nwrote {html}\n")
    print(f"Caution: {CAUTION}")
    # a limit not met is an answer, not an error: the exit code says whether the run completed
    return 0 if ds.attrs["status"] == "completed" else 1


def _write_error(out: Path, exc: Exception):
    """The error for a demo whose files cannot be written: which folder, why, and that the
    figures printed above are the run's (it finished; only the files are missing)."""
    from explorer.validators import OutputError

    if isinstance(exc, OSError):
        reason = f"{exc.filename or out}: {exc.strerror or exc}"
    else:
        reason = str(exc)
    return OutputError(f"demo: cannot write the results into the folder {out} ({reason}); "
                       "the run itself finished and its figures are printed above")
