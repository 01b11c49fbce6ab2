"""Figures and tables the report draws from a sweep or a sizing-curve file.

A sweep (``explorer.sweep``; dimension per axis) gets a map of its figures against the axes:
lines over one axis, heat maps over two (further axes are reduced to their worst value, and
the title says so). A sizing-curve file (``python -m explorer size``) is turned back into the
object :func:`explorer.plots.sizing_figure` draws.
"""

from __future__ import annotations

import json
from types import SimpleNamespace

import numpy as np
import plotly.graph_objects as go
from plotly.subplots import make_subplots

from explorer.report_parts import number, split_unit

# sweep figure -> (label, worse is higher)
SWEEP_FIGURES = {
    "peak_temperature_C": ("Hottest point anywhere (°C)", True),
    "max_spread_K": ("In-cell spread (K)", True),
    "cell_to_cell_K": ("Cell-to-cell difference (K)", True),
    "pressure_drop_kPa": ("Pressure drop, channels only (kPa)", True),
    "pump_power_W": ("Pump power, channels only (W)", True),
    "end_soc": ("SOC at the end (%)", False),
}
_SCALE = {"end_soc": 100.0}  # stored as a fraction, shown in % like the run report's
_LIMIT_OF = {"peak_temperature_C": "temperature_max_C", "max_spread_K": "spread_K",
             "cell_to_cell_K": "cell_to_cell_K", "pressure_drop_kPa": "pressure_drop_kPa",
             "pump_power_W": "pump_power_W"}


def sweep_axes(ds) -> list[str]:
    """The swept parameters, in the sweep's order."""
    try:
        return list(json.loads(ds.attrs.get("axes", "{}")))
    except ValueError:
        return [d for d in ds["case_status"].dims] if "case_status" in ds else []


def sweep_figures_present(ds) -> list[str]:
    """The sweep figures with at least one finite value."""
    out = []
    for name in SWEEP_FIGURES:
        if name in ds and np.isfinite(np.asarray(ds[name].values, dtype=float)).any():
            out.append(name)
    return out


def axis_label(name: str) -> str:
    words, unit = split_unit(name)
    return f"{words} ({unit})" if unit else words


def sweep_rows(ds) -> tuple[list[str], list[list[str]]]:
    """(header, rows): one row per case with the axis values, the figures, the verdict and the
    status, rounded."""
    axes = sweep_axes(ds)
    names = sweep_figures_present(ds)
    header = [axis_label(a) for a in axes] + [SWEEP_FIGURES[n][0] for n in names]
    has_verdict = "meets_limits" in ds
    if has_verdict:
        header.append("limits")
    header.append("status")
    keep = names + ["case_status"] + (["meets_limits"] if has_verdict else [])
    stacked = ds[keep].stack(case=axes) if axes else ds[keep].expand_dims(case=[0])
    rows = []
    for k in range(stacked.sizes["case"]):
        row = stacked.isel(case=k)
        cells = [number(float(row[a])) for a in axes]
        cells += [number(float(row[n]) * _SCALE.get(n, 1.0)) for n in names]
        if has_verdict:
            cells.append("met" if int(row["meets_limits"]) else "NOT met")
        cells.append(str(row["case_status"].item()))
        rows.append(cells)
    return header, rows


def sweep_map_figure(ds, limits=None) -> go.Figure:
    """The sweep's figures against its axes: one panel per figure."""
    axes = sweep_axes(ds)
    names = sweep_figures_present(ds)
    if not axes or not names:
        raise ValueError("sweep map: the sweep has no axes or no figure with a value")
    reduced = axes[2:]
    if len(axes) == 1:
        fig = make_subplots(rows=len(names), cols=1, shared_xaxes=True, vertical_spacing=0.06)
        x = np.asarray(ds[axes[0]].values, dtype=float)
        for row, name in enumerate(names, start=1):
            fig.add_trace(go.Scatter(x=x, y=np.asarray(ds[name].values, dtype=float)
                                     * _SCALE.get(name, 1.0),
                                     mode="lines+markers", name=SWEEP_FIGURES[name][0]),
                          row=row, col=1)
            fig.update_yaxes(title_text=SWEEP_FIGURES[name][0], row=row, col=1)
            value = _limit(limits, name)
            if value is not None:
                fig.add_hline(y=value, line=dict(color="#B2182B", width=1.5, dash="dash"),
                              row=row, col=1, annotation_text=f"limit {value:g}")
        fig.update_xaxes(title_text=axis_label(axes[0]), row=len(names), col=1)
        fig.update_layout(height=230 * len(names) + 120, showlegend=False)
    else:
        fig = make_subplots(rows=len(names), cols=1, vertical_spacing=0.08,
                            subplot_titles=[SWEEP_FIGURES[n][0] for n in names])
        for row, name in enumerate(names, start=1):
            da = ds[name] * _SCALE.get(name, 1.0)
            if reduced:  # the worst over the further axes
                da = da.max(reduced) if SWEEP_FIGURES[name][1] else da.min(reduced)
            z = np.asarray(da.transpose(axes[1], axes[0]).values, dtype=float)
            fig.add_trace(go.Heatmap(
                x=[number(v) for v in ds[axes[0]].values], y=[number(v) for v in
                                                              ds[axes[1]].values],
                z=z, colorscale="Cividis" if SWEEP_FIGURES[name][1] else "Viridis",
                texttemplate="%{z:.3g}", showscale=False, name=SWEEP_FIGURES[name][0],
                hovertemplate=f"{axes[0]} %{{x}}<br>{axes[1]} %{{y}}<br>%{{z:.4g}}<extra></extra>"),
                row=row, col=1)
            fig.update_xaxes(title_text=axis_label(axes[0]), type="category", row=row, col=1)
            fig.update_yaxes(title_text=axis_label(axes[1]), type="category", row=row, col=1)
        fig.update_layout(height=300 * len(names) + 120)
    title = "Sweep: figures against " + " and ".join(axis_label(a) for a in axes[:2])
    if reduced:
        title += f" (worst over {', '.join(axis_label(a) for a in reduced)})"
    fig.update_layout(template="simple_white", title=dict(text=title),
                      font=dict(family="Helvetica, Arial, sans-serif", size=13),
                      margin=dict(l=80, r=30, t=90, b=60))
    return fig


def _limit(limits, figure: str):
    if limits is None or figure not in _LIMIT_OF:
        return None
    return getattr(limits, _LIMIT_OF[figure], None)


def sizing_from_curve(curve, limits=None):
    """The object :func:`explorer.plots.sizing_figure` draws, rebuilt from a sizing-curve file
    (``.curve``, ``.value``, ``.feasible``, ``.vary``, ``.limits``, ``.message``)."""
    a = curve.attrs
    value = a.get("design_value")
    return SimpleNamespace(
        curve=curve, value=None if value is None else float(value),
        feasible=bool(int(a.get("feasible", 0))), vary=str(a.get("vary", "value")),
        limits=limits, message=str(a.get("message", "")), unit=str(a.get("unit", "")),
        limited_by=str(a.get("limited_by", "")))


def sizing_rows(curve) -> tuple[list[str], list[list[str]]]:
    """(header, rows): every evaluated value with its figures, margins and verdict, rounded."""
    vary = str(curve.attrs.get("vary", "value"))
    order = np.argsort(np.asarray(curve["value"].values, dtype=float))
    names = [n for n in curve.data_vars
             if curve[n].dims == ("value",) and n not in ("position", "positions_checked")]
    header = [axis_label(vary)] + [_curve_label(n) for n in names]
    rows = []
    for k in order:
        cells = [number(float(curve["value"].values[k]))]
        for n in names:
            v = curve[n].values[k]
            cells.append(("yes" if int(v) else "no") if n == "feasible" else number(float(v)))
        rows.append(cells)
    return header, rows


def _curve_label(name: str) -> str:
    """A sizing-curve column in words with its unit (a margin on a temperature is in K)."""
    if name == "feasible":
        return "meets the limits"
    if name == "worst_margin":
        return "worst margin (scaled)"
    if name.startswith("margin_"):
        words, unit = split_unit(name[len("margin_"):])
        unit = "K" if unit == "°C" else unit
        return f"margin on {words}" + (f" ({unit})" if unit else "")
    return axis_label(name)
