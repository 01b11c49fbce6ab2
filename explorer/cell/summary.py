"""A cell's key figures as labelled rows with units, for reports, widgets and printing.

Examples
--------
>>> from explorer.cell import load_cell
>>> rows = summary(load_cell("rack_lfp_26ah"))
>>> next(r for r in rows if r["key"] == "nominal_capacity")["unit"]
'Ah'
"""

from __future__ import annotations

from explorer.cell.derived import ocv
from explorer.cell.model import Cell

__all__ = ["summary", "summary_text"]


def summary(cell: Cell) -> list[dict]:
    """Key figures of ``cell``: a list of ``{"key", "label", "value", "unit"}`` rows.

    Values are in the display units named in ``unit`` (mm, g, Ah...), not SI.
    """
    g, d = cell.geometry, cell.derived

    def row(key, label, value, unit=""):
        return {"key": key, "label": label, "value": value, "unit": unit}

    rows = [
        row("name", "Cell", cell.name),
        row("data_note", "Data", cell.extra.get("data_note", "")),
        row("nominal_capacity", "Nominal capacity", cell.nominal_capacity_Ah, "Ah"),
        row("computed_capacity", "Computed capacity (SOC window)", d.theoretical_capacity_Ah,
            "Ah"),
        row("voltage_window", "Voltage window",
            f"{cell.voltage_min_V:g} to {cell.voltage_max_V:g}", "V"),
        row("temperature_window", "Operating temperature",
            f"{cell.temperature_min_C:g} to {cell.temperature_max_C:g}", "degC"),
        row("ocv_50", "OCV at 50 % SOC, 25 degC", float(ocv(cell.negative, cell.positive, 0.5)),
            "V"),
        row("energy", "Energy (OCV integral)", d.energy_Wh, "Wh"),
        row("size", "Electrode width x height x cell thickness",
            f"{g.width_m * 1e3:g} x {g.height_m * 1e3:g} x {g.stack_thickness_m * 1e3:g}", "mm"),
        row("unit_layers", "Unit layers", g.unit_layers),
        row("foils", "Negative / positive foils", f"{d.negative_foils} / {d.positive_foils}"),
        row("mass", "Mass", d.mass_kg * 1e3, "g"),
        *([row("stated_mass", "Stated mass (data sheet)", cell.mass_kg * 1e3, "g")]
          if getattr(cell, "mass_kg", None) is not None else []),
        row("specific_energy", "Specific energy", d.energy_Wh / d.mass_kg, "Wh/kg"),
        row("np_ratio", "N/P ratio", d.np_ratio),
        row("sheet_resistance", "Sheet resistance, negative / positive foils",
            f"{d.negative_sheet_resistance_ohm * 1e6:.1f} / "
            f"{d.positive_sheet_resistance_ohm * 1e6:.1f}", "uohm/sq"),
        row("inplane_conductivity", "In-plane conductivity", d.inplane_conductivity_W_mK,
            "W/(m K)"),
        row("throughplane_conductivity", "Through-plane conductivity",
            d.throughplane_conductivity_W_mK, "W/(m K)"),
        row("heat_capacity", "Heat capacity", d.heat_capacity_J_K, "J/K"),
    ]
    for label, used, computed in (
        ("in-plane conductivity", d.inplane_conductivity_W_mK,
         d.computed_inplane_conductivity_W_mK),
        ("through-plane conductivity", d.throughplane_conductivity_W_mK,
         d.computed_throughplane_conductivity_W_mK),
        ("heat capacity", d.heat_capacity_J_K, d.computed_heat_capacity_J_K),
    ):
        if used != computed:
            rows.append(row(f"computed_{label}", f"Computed {label} (overridden)", computed,
                            "J/K" if label == "heat capacity" else "W/(m K)"))
    for name, e in (("negative", cell.negative), ("positive", cell.positive)):
        curve = e.ocp if isinstance(e.ocp, str) else e.ocp.source
        rows.append(row(f"{name}_curve", f"{name.capitalize()} potential curve", curve))
    for t in g.tabs:
        rows.append(row(f"tab_{t.name}", f"Tab {t.name!r} ({t.polarity})",
                        f"{t.edge} edge at {t.position_m * 1e3:g} mm, {t.width_m * 1e3:g} mm "
                        f"wide, {t.material}", ""))
    return rows


def summary_text(cell: Cell) -> str:
    """:func:`summary` as aligned plain text, one figure per line."""
    lines = []
    for r in summary(cell):
        v = r["value"]
        text = f"{v:.4g}" if isinstance(v, float) else str(v)
        lines.append(f"{r['label']:<46} {text} {r['unit']}".rstrip())
    return "\n".join(lines)
