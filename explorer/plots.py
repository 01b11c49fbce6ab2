"""Plotly figures of a results Dataset: fields over the face, traces, heat split, comparisons, sizing.

Every function reads only the results Dataset (see :func:`explorer.results.to_dataset`) or, for
:func:`sizing_figure`, the object returned by :func:`explorer.size_cooling`. Nothing here runs a
simulation. Lengths are shown in mm, temperatures in degC, time in s or min (chosen from the
duration), heat in W and heat flux in W/m².

Colour choices (our own): temperature on *cividis*, a perceptually uniform scale that stays
readable for the common colour-vision deficiencies and in grey-scale print (Nuñez, Anderton &
Renslow, "Optimizing colormaps with consideration for color vision deficiency", PLOS ONE 13 (2018)
e0199239); SOC on *viridis*; heat flux on *inferno*; line colours from the Okabe–Ito palette
(Okabe & Ito, "Color Universal Design", 2008).

Examples
--------
>>> from explorer import plots                                  # doctest: +SKIP
>>> plots.field_figure(ds).show()                               # doctest: +SKIP
>>> plots.traces_figure(ds, limits=explorer.Limits(temperature_max_C=45, spread_K=5))  # doctest: +SKIP
"""

from __future__ import annotations

import logging
from collections.abc import Mapping, Sequence

import numpy as np
import plotly.graph_objects as go
from plotly.subplots import make_subplots

logger = logging.getLogger(__name__)

__all__ = [
    "FIELDS",
    "PALETTE",
    "color_range",
    "comparison_figure",
    "face_outline",
    "field_figure",
    "field_is_uniform",
    "field_frame",
    "frame_indices",
    "heat_split_figure",
    "limit_values",
    "sizing_figure",
    "spot_annotation",
    "time_axis",
    "traces_figure",
]

# Okabe–Ito colour-blind-safe palette (black first for the reference line).
PALETTE = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#F0E442", "#000000")

# variable -> (label, unit shown, scale factor from dataset units, colour scale)
FIELDS = {
    "temperature": ("Temperature", "°C", 1.0, "Cividis"),
    "soc": ("State of charge", "%", 100.0, "Viridis"),
    "heat_flux": ("Heat generation", "W/m²", 1.0, "Inferno"),
}

HEAT_PARTS = {
    "heat_irreversible": "reaction (irreversible)",
    "heat_reversible": "entropic (reversible)",
    "heat_ohmic_electrolyte": "electrolyte Ohmic",
    "heat_ohmic_solid": "electrode solid Ohmic",
    "heat_collector": "current collectors",
    "heat_tab": "tabs",
}

_LAYOUT = dict(
    template="simple_white",
    font=dict(family="Helvetica, Arial, sans-serif", size=13),
    margin=dict(l=70, r=30, t=110, b=60),
    hovermode="x unified",
    legend=dict(orientation="h", yanchor="bottom", y=1.01, xanchor="left", x=0.0),
    title=dict(x=0.01, xanchor="left", y=0.99, yanchor="top"),
)
_LIMIT_STYLE = dict(color="#B2182B", width=1.5, dash="dash")
_SHEET_STYLE = dict(color="#444444", width=1.5, dash="dot")

MAX_FRAMES = 60  # frames per animated field; more only inflates the HTML without adding insight


# ---------------------------------------------------------------------------------------------
# checks and small helpers


def _require(ds, names: Sequence[str], where: str) -> None:
    """Raise a clear error when the Dataset lacks a variable a plot needs."""
    if not hasattr(ds, "data_vars"):
        raise TypeError(
            f"{where}: expected an xarray.Dataset from explorer.simulate, got {type(ds).__name__}"
        )
    missing = [name for name in names if name not in ds.variables]
    if missing:
        raise ValueError(
            f"{where}: the results Dataset has no variable(s) {', '.join(f'`{m}`' for m in missing)}; "
            "expected a Dataset written by explorer.simulate / explorer.open_results"
        )


def worst_cell_view(ds):
    """A module Dataset (a ``cell`` dimension) as its worst cell: the one whose hottest point
    anywhere is the highest (``attrs["shown_cell"]`` says which); a single run as it is.

    The single-cell figures (fields, traces) show that cell; the module view is
    :func:`module_figure`.
    """
    if "cell" not in getattr(ds, "dims", ()):
        return ds  # a single run, or not a Dataset (the figure's own check names it)
    from explorer.results import hottest_anywhere

    hot = hottest_anywhere(ds)
    row = int(np.unravel_index(int(np.nanargmax(hot)), hot.shape)[0])
    view = ds.isel(cell=row)
    view.attrs = {**ds.attrs, "shown_cell": int(ds["cell"].values[row]) if "cell" in ds.coords
                  else row}
    return view


def _module_totals(ds):
    """A module's per-cell heat series added up over the cells (the split is already a sum)."""
    if "cell" not in getattr(ds, "dims", ()):
        return ds
    out = ds.copy()
    for name in ("heat_total", "heat_rejected"):
        if name in ds and "cell" in ds[name].dims:
            out[name] = ds[name].sum("cell", keep_attrs=True)
    return out


def time_axis(ds) -> tuple[np.ndarray, str, float]:
    """Return (time values to plot, axis label, divisor from s): minutes for runs over 20 min."""
    t = np.asarray(ds["time"].values, dtype=float)
    duration = float(t[-1] - t[0]) if t.size else 0.0
    if duration > 1200.0:
        return t / 60.0, "Time (min)", 60.0
    return t, "Time (s)", 1.0


def frame_indices(n_time: int, max_frames: int = MAX_FRAMES) -> np.ndarray:
    """Time indices to animate: all of them, or an even subsample always keeping the last."""
    if n_time <= max_frames:
        return np.arange(n_time)
    return np.unique(np.linspace(0, n_time - 1, max_frames).round().astype(int))


def limit_values(ds, limits=None) -> dict[str, float]:
    """The limit lines to draw: the data-sheet maximum from the attributes and the user's Limits.

    ``limits`` is duck-typed: anything with ``temperature_max_C`` and/or ``spread_K`` attributes
    (normally :class:`explorer.Limits`), or a mapping with those keys.
    """
    out: dict[str, float] = {}
    sheet = ds.attrs.get("temperature_limit_C") if ds is not None else None
    if sheet is not None and np.isfinite(float(sheet)):
        out["datasheet_C"] = float(sheet)
    if limits is not None:
        get = limits.get if isinstance(limits, Mapping) else (lambda k: getattr(limits, k, None))
        for key, name in (("temperature_max_C", "temperature_max_C"), ("spread_K", "spread_K")):
            value = get(key)
            if value is not None:
                out[name] = float(value)
    return out


def _scale(variable: str) -> tuple[str, str, float, str]:
    if variable not in FIELDS:
        raise ValueError(
            f"field plot: `variable` must be one of {', '.join(map(repr, FIELDS))}, got {variable!r}"
        )
    return FIELDS[variable]


def field_frame(ds, variable: str, index: int, values: np.ndarray | None = None,
                color_range="frame") -> dict:
    """The data of one field picture: ``z`` (ny, nx) in display units, the extreme point, a title
    and the colour range (``zmin``, ``zmax``; see :func:`field_figure`).

    Used by :func:`field_figure` and by the app, which updates a live figure in place from it.
    ``values`` may pass the whole field already in display units (time, y, x) to skip the lookup.
    """
    label, unit, factor, _ = _scale(variable)
    if values is None:
        z = np.asarray(ds[variable].isel(time=index).values, dtype=float) * factor
    else:
        z = values[index]
    k = int(np.nanargmax(z)) if variable != "soc" else int(np.nanargmin(z))
    j, i = np.unravel_index(k, z.shape)
    t = float(ds["time"].values[index])
    word = "lowest" if variable == "soc" else "hottest" if variable == "temperature" else "peak"
    # the picture is the through-thickness mean: its hottest point is not the hottest anywhere
    # (core included) that the limits hold, so the title says which it is; a module's cell is named
    extreme = f"through-thickness mean, {word}" if variable == "temperature" else word
    where = f", cell {ds['cell'].item()}" if "cell" in ds.coords and ds["cell"].ndim == 0 else ""
    if isinstance(color_range, str) and color_range == "run":
        zmin, zmax = _color_range(ds, variable)
    elif isinstance(color_range, str):  # "frame": this picture's own spread uses every colour
        zmin, zmax = _padded(float(np.nanmin(z)), float(np.nanmax(z)))
    else:
        zmin, zmax = (float(v) for v in color_range)
    return {
        "z": z,
        "zmin": zmin,
        "zmax": zmax,
        "spot_x_mm": float(ds["x"].values[i]) * 1e3,
        "spot_y_mm": float(ds["y"].values[j]) * 1e3,
        "spot_value": float(z[j, i]),
        "spot_word": word,
        # the label goes below a point in the upper half (above it sit the tabs' labels)
        "spot_ay": 35 if j >= z.shape[0] / 2 else -35,
        "title": f"{label} at t = {t:.0f} s{where} — {extreme} {z[j, i]:.3g} {unit}",
    }


def field_is_uniform(ds, variable: str) -> bool:
    """Whether ``variable`` has one value over the face at every time (the SOC of the averaged
    layout: one averaged rod), so a map would be one flat colour."""
    values = np.asarray(ds[variable].values, dtype=float)
    if values.ndim < 2 or values.size == 0:
        return True
    spread = np.nanmax(values, axis=(-2, -1)) - np.nanmin(values, axis=(-2, -1))
    scale = max(float(np.nanmax(np.abs(values))), 1e-12)
    return bool(np.all(spread <= 1e-9 * scale))


def _padded(lo: float, hi: float) -> tuple[float, float]:
    if hi - lo < 1e-9:  # a uniform field still needs a visible colour bar
        pad = max(abs(hi) * 1e-3, 0.05)
        return lo - pad, hi + pad
    return lo, hi


def spot_annotation(frame: dict, unit: str, visible: bool = True) -> dict:
    """The marker of a field's extreme point: an arrow and its value (a layout annotation)."""
    return dict(x=frame["spot_x_mm"], y=frame["spot_y_mm"], xref="x", yref="y", visible=visible,
                text=f"{frame['spot_word']} {frame['spot_value']:.3g} {unit}", showarrow=True,
                arrowhead=2, arrowwidth=1.5, arrowcolor="#000000", ax=30,
                ay=frame.get("spot_ay", -35),
                font=dict(color="#000000", size=12), bgcolor="rgba(255,255,255,0.85)",
                bordercolor="#000000", borderwidth=1)


def _color_range(ds, variable: str) -> tuple[float, float]:
    """The colour range that fits ``variable`` over the whole run (every time and place)."""
    _, _, factor, _ = _scale(variable)
    values = np.asarray(ds[variable].values, dtype=float) * factor
    return _padded(float(np.nanmin(values)), float(np.nanmax(values)))


def color_range(runs, variable: str) -> tuple[float, float]:
    """One colour range fitting ``variable`` over several runs (a mapping or sequence of
    Datasets): pass it as ``color_range`` to compare pinned runs on the same colours."""
    named = _named(runs, "color_range")
    lows, highs = zip(*(_color_range(worst_cell_view(ds), variable) for ds in named.values()))
    return min(lows), max(highs)


# ---------------------------------------------------------------------------------------------
# figures


def field_figure(ds, variable: str = "temperature", index: int | None = None, animate: bool = True,
                 max_frames: int = MAX_FRAMES, *, color_range="frame", cell=None,
                 width_px: int = 760) -> go.Figure:
    """Heat map of a field over the face, drawn to the cell's true aspect, with the tabs, the
    cooled edge or plate footprint outlined and the extreme point marked.

    Parameters
    ----------
    ds : xarray.Dataset
        Results Dataset.
    variable : {"temperature", "soc", "heat_flux"}
    index : int, optional
        Time index shown first (default: the time of the overall peak temperature for the
        temperature field, else the last time).
    animate : bool
        Add frames with a time slider and a play button (for reports and notebooks). The app
        passes ``False`` and drives the time itself.
    max_frames : int
        At most this many frames (evenly spaced, always including the last time).
    color_range : "frame", "run" or (low, high)
        "frame" fits the colours to each picture (the spread at any time uses every colour);
        "run" fits them to the whole run; a pair fixes them (e.g. :func:`color_range` of several
        pinned runs, to compare them on the same colours).
    cell : explorer.Cell, optional
        The cell run, for its tabs; without it the tabs of a bundled demo cell are found from the
        run's cell file (its checksum must match), else only the outline is drawn.
    width_px : int
        The width the figure is sized for (its height follows the cell's aspect).

    Returns
    -------
    plotly.graph_objects.Figure
        One trace (the heat map); the extreme point is ``layout.annotations[0]`` (an annotation,
        not a trace, because plotly.js animates frames that mix a heat map and a scatter trace
        badly), the outline is in ``layout.shapes`` and ``layout.meta`` holds the variable, the
        time index shown and the colour-range choice.
    """
    label, unit, _, colorscale = _scale(variable)
    ds = worst_cell_view(ds)
    _require(ds, [variable, "time", "x", "y"], "field_figure")
    n_time = ds.sizes["time"]
    if n_time == 0:
        raise ValueError("field_figure: the results Dataset has no time samples")
    if not (color_range in ("frame", "run") or (
            isinstance(color_range, Sequence) and not isinstance(color_range, str)
            and len(color_range) == 2)):
        raise ValueError(f"field_figure: `color_range` must be 'frame', 'run' or a (low, high) "
                         f"pair, got {color_range!r}")
    if index is None:
        if variable == "temperature" and "temperature_max" in ds:
            index = int(np.nanargmax(ds["temperature_max"].values))
        else:
            index = n_time - 1
    if not -n_time <= index < n_time:
        raise ValueError(f"field_figure: `index` must be in [0, {n_time - 1}], got {index}")
    index = index % n_time
    x_mm = np.asarray(ds["x"].values, dtype=float) * 1e3
    y_mm = np.asarray(ds["y"].values, dtype=float) * 1e3
    first = field_frame(ds, variable, index, color_range=color_range)
    uniform = variable == "soc" and field_is_uniform(ds, variable)

    fig = go.Figure(
        data=[
            go.Heatmap(
                x=x_mm, y=y_mm, z=first["z"], zmin=first["zmin"], zmax=first["zmax"],
                colorscale=colorscale,
                colorbar=dict(title=dict(text=f"{label}<br>({unit})"), len=0.9),
                hovertemplate="x %{x:.1f} mm<br>y %{y:.1f} mm<br>%{z:.4g} " + unit + "<extra></extra>",
                name=label,
            ),
        ]
    )
    outline = face_outline(ds, cell)
    width_mm, height_mm = outline["width_mm"], outline["height_mm"]
    fig.update_layout(**_LAYOUT)
    title = first["title"]
    if uniform:
        title = (f"{label}: one value over the face ({ds.attrs.get('layout', 'this')} layout: one "
                 f"averaged rod) — {first['spot_value']:.3g} {unit} at t = "
                 f"{float(ds['time'].values[index]):.0f} s")
    fig.update_layout(title=dict(text=title), hovermode="closest",
                      annotations=[spot_annotation(first, unit, visible=not uniform)],
                      shapes=outline["shapes"], margin=dict(l=70, r=30, t=70, b=60))
    pad = outline["pad_mm"]
    cooling = f" · {'; '.join(outline['notes'])}" if outline["notes"] else ""
    fig.update_xaxes(title_text=f"x across the width (mm){cooling}", range=[-pad, width_mm + pad],
                     constrain="domain", showgrid=False, zeroline=False)
    fig.update_yaxes(title_text="y along the height (mm)", range=[-pad, height_mm + pad],
                     scaleanchor="x", scaleratio=1, constrain="domain", showgrid=False,
                     zeroline=False)
    plot_w = max(240.0, width_px - 70 - 30 - 130)  # margins and the colour bar
    plot_h = float(np.clip(plot_w * (height_mm + 2 * pad) / (width_mm + 2 * pad), 200.0, 720.0))
    fig.update_layout(height=int(plot_h + 70 + 60 + (120 if animate and n_time > 1 else 0)))
    fig.layout.meta = {"variable": variable, "index": index, "width_mm": width_mm,
                       "height_mm": height_mm, "uniform": uniform,
                       "color_range": color_range if isinstance(color_range, str)
                       else [float(v) for v in color_range]}

    if animate and n_time > 1:
        idx = frame_indices(n_time, max_frames)
        values = np.asarray(ds[variable].values, dtype=float) * FIELDS[variable][2]
        frames, steps = [], []
        for k in idx:
            fr = field_frame(ds, variable, int(k), values=values, color_range=color_range)
            name = str(int(k))
            # plain dicts (validated once on assignment below); only z changes per frame: extra
            # x/y or a second trace in the frames leaves plotly.js's animated heat map blank
            frames.append(dict(
                name=name,
                data=[dict(type="heatmap", z=fr["z"], zmin=fr["zmin"], zmax=fr["zmax"])],
                traces=[0],
                layout=dict(title=dict(text=title if uniform else fr["title"]),
                            annotations=[spot_annotation(fr, unit, visible=not uniform)]),
            ))
            steps.append(dict(
                method="animate", label=f"{float(ds['time'].values[k]):.0f}",
                args=[[name], dict(mode="immediate", frame=dict(duration=0, redraw=True),
                                   transition=dict(duration=0))],
            ))
        fig.frames = frames
        active = int(np.argmin(np.abs(idx - index)))
        fig.update_layout(
            sliders=[dict(active=active, steps=steps, currentvalue=dict(prefix="time (s): "),
                          pad=dict(t=50), len=0.85, x=0.15)],
            updatemenus=[dict(
                type="buttons", direction="left", x=0.0, y=0.0, xanchor="left", yanchor="top",
                pad=dict(t=50, r=10), showactive=False,
                buttons=[
                    dict(label="▶", method="animate",
                         args=[None, dict(frame=dict(duration=150, redraw=True), fromcurrent=True,
                                          transition=dict(duration=0))]),
                    dict(label="❚❚", method="animate",
                         args=[[None], dict(mode="immediate", frame=dict(duration=0, redraw=False))]),
                ],
            )],
        )
    return fig


# ---------------------------------------------------------------------------------------------
# the face outline: the cell's edges, its tabs, and where heat leaves (cooled edge, plate, tabs)

_COOLED = "#0072B2"
_TAB_FILL = "rgba(120,120,120,0.55)"


def _demo_geometry(ds):
    """The geometry of the bundled demo cell a run used (matched by file name and checksum)."""
    name = str(ds.attrs.get("cell_file", ""))
    digest = ds.attrs.get("cell_file_sha256") or ds.attrs.get("cell_sha256")
    key = (name, digest)
    if key not in _GEOMETRY_CACHE:
        _GEOMETRY_CACHE[key] = None
        try:
            from explorer.cell import list_demo_cells, load_cell

            stem = name.rsplit(".", 1)[0]
            if stem in list_demo_cells():
                cell = load_cell(stem)
                if digest is None or getattr(cell, "sha256", digest) == digest:
                    _GEOMETRY_CACHE[key] = cell.geometry
        except (OSError, ValueError, ImportError):  # no geometry: the outline alone is drawn
            logger.debug("no demo geometry for %s", name, exc_info=True)
    return _GEOMETRY_CACHE[key]


_GEOMETRY_CACHE: dict = {}


def _face_geometry(ds, cell=None):
    """The geometry the outline draws, first found of: ``cell.geometry``; the face geometry the
    Dataset records (:func:`explorer.results.face_geometry`); the bundled demo cell the run
    used (files written before it was recorded); None (the outline from the grid alone)."""
    geometry = getattr(cell, "geometry", None)
    if geometry is not None:
        return geometry
    from explorer.results import face_geometry

    try:
        geometry = face_geometry(ds)
    except ValueError:  # a damaged attribute must not cost the picture: try the next source
        logger.debug("unreadable face geometry in the results; trying the demo cells",
                     exc_info=True)
        geometry = None
    return geometry if geometry is not None else _demo_geometry(ds)


def _cooling_parts(ds) -> list[dict]:
    import json

    raw = ds.attrs.get("cooling")
    try:
        design = json.loads(raw) if isinstance(raw, str) else dict(raw or {})
    except (TypeError, ValueError):
        return []
    if not isinstance(design, dict):
        return []
    return list(design.get("parts", [design])) if design.get("kind") == "combined" else [design]


def face_outline(ds, cell=None) -> dict:
    """The shapes that outline the face: the cell's edges, its tabs (cooled tabs in blue) and
    where the cooling acts (a thick line along a cooled edge, a dashed footprint for a plate
    under a face). Returns ``{"shapes", "width_mm", "height_mm", "pad_mm", "notes"}``.

    The tabs come from ``cell`` when given, else from the face geometry the results file
    records (``ds.attrs["face_geometry"]``), else, for an older file of a bundled demo cell,
    from that cell; failing all three, the outline of the grid is drawn alone."""
    x = np.asarray(ds["x"].values, dtype=float) * 1e3
    y = np.asarray(ds["y"].values, dtype=float) * 1e3
    geometry = _face_geometry(ds, cell)
    if geometry is not None:
        width, height = geometry.width_m * 1e3, geometry.height_m * 1e3
    else:  # from the grid: cell centres half a control volume in from each edge
        dx = float(x[1] - x[0]) if x.size > 1 else 2.0 * float(x[0]) if x.size else 1.0
        dy = float(y[1] - y[0]) if y.size > 1 else 2.0 * float(y[0]) if y.size else 1.0
        width, height = float(x[-1] + dx / 2), float(y[-1] + dy / 2)
    parts = _cooling_parts(ds)
    kinds = {p.get("kind") for p in parts}
    tab_len = 0.0
    shapes = [dict(type="rect", x0=0, y0=0, x1=width, y1=height, layer="above",
                   line=dict(color="#222222", width=1.5), name="cell outline")]
    notes = []
    for tab in getattr(geometry, "tabs", ()) or ():
        length = max(8.0, float(getattr(tab, "free_length_m", 0.012) or 0.012) * 1e3)
        tab_len = max(tab_len, length)
        half = float(tab.width_m) * 1e3 / 2
        pos = float(tab.position_m) * 1e3
        cooled = "tab_cooling" in kinds
        box = {"top": (pos - half, height, pos + half, height + length),
               "bottom": (pos - half, -length, pos + half, 0.0),
               "left": (-length, pos - half, 0.0, pos + half),
               "right": (width, pos - half, width + length, pos + half)}.get(tab.edge)
        if box is None:
            continue
        sign = "+" if tab.polarity == "positive" else "−"
        shapes.append(dict(type="rect", x0=box[0], y0=box[1], x1=box[2], y1=box[3],
                           fillcolor=_COOLED if cooled else _TAB_FILL, layer="above", opacity=1,
                           line=dict(color="#222222", width=1), name=f"tab {tab.name}",
                           label=dict(text=f"{sign} tab" + (" (cooled)" if cooled else ""),
                                      font=dict(size=11, color="#000000"))))
    pad = max(tab_len + 4.0, 0.06 * max(width, height))
    for part in parts:
        kind = part.get("kind")
        if kind == "edge_plate":
            edge = part.get("edge", "bottom")
            off = 0.35 * pad
            line = {"bottom": (0, -off, width, -off), "top": (0, height + off, width, height + off),
                    "left": (-off, 0, -off, height), "right": (width + off, 0, width + off, height)}
            x0, y0, x1, y1 = line.get(edge, line["bottom"])
            fin = part.get("fin_mm")
            text = f"cold plate, {edge} edge" + (f" ({fin:g} mm fin)" if fin else "")
            shapes.append(dict(type="line", x0=x0, y0=y0, x1=x1, y1=y1, layer="above", opacity=1,
                               line=dict(color=_COOLED, width=6), name="cooled edge",
                               label=dict(text=text, font=dict(size=11, color=_COOLED),
                                          textposition="middle")))
            notes.append(text)
        elif kind == "face_plate":
            face = part.get("face", "back")
            text = f"cold plate under the {face} face" if face != "both" else \
                "cold plates under both faces"
            inset = 0.012 * max(width, height)
            shapes.append(dict(type="rect", x0=inset, y0=inset, x1=width - inset,
                               y1=height - inset, layer="above", name="plate footprint",
                               opacity=1, line=dict(color=_COOLED, width=2.5, dash="dash")))
            notes.append(f"{text} (dashed)")
        elif kind == "convection":
            notes.append("convection on both faces")
    return {"shapes": shapes, "width_mm": width, "height_mm": height, "pad_mm": pad,
            "notes": notes}


def _temperature_limit_lines(fig, lim: dict, row: int) -> None:
    """The data-sheet maximum (dotted) and the design limit (dashed) on a temperature panel."""
    if "datasheet_C" in lim:
        fig.add_hline(y=lim["datasheet_C"], line=_SHEET_STYLE, row=row, col=1,
                      annotation_text=f"data-sheet max {lim['datasheet_C']:g} °C",
                      annotation_position="top left")
    if "temperature_max_C" in lim:
        fig.add_hline(y=lim["temperature_max_C"], line=_LIMIT_STYLE, row=row, col=1,
                      annotation_text=f"design limit {lim['temperature_max_C']:g} °C",
                      annotation_position="bottom left")


def traces_figure(ds, limits=None) -> go.Figure:
    """Voltage, current, temperatures (max/min/mean, core) and spread against time, with limits.

    The data-sheet maximum temperature (``ds.attrs["temperature_limit_C"]``) is drawn dotted, the
    user's :class:`explorer.Limits` dashed (``temperature_max_C`` on the temperature panel,
    ``spread_K`` on the spread panel).
    """
    ds = worst_cell_view(ds)
    _require(ds, ["voltage", "current", "temperature_max", "temperature_min"], "traces_figure")
    t, t_label, _ = time_axis(ds)
    fig = make_subplots(
        rows=4, cols=1, shared_xaxes=True, vertical_spacing=0.045,
        row_heights=[0.22, 0.18, 0.38, 0.22],
    )
    fig.add_trace(go.Scatter(x=t, y=ds["voltage"].values, name="terminal voltage",
                             line=dict(color=PALETTE[0])), row=1, col=1)
    if "ocv" in ds:
        fig.add_trace(go.Scatter(x=t, y=ds["ocv"].values, name="open-circuit voltage",
                                 line=dict(color=PALETTE[0], dash="dot", width=1)), row=1, col=1)
    fig.add_trace(go.Scatter(x=t, y=ds["current"].values, name="current (+ discharge)",
                             line=dict(color=PALETTE[4])), row=2, col=1)
    # the limit is held against the hottest point anywhere (core and faces included)
    temps = [("temperature_hottest", "hottest point anywhere (core incl.)", PALETTE[1], None),
             ("temperature_max", "hottest point of the mean field", PALETTE[1], "dash"),
             ("temperature_mean", "face mean", PALETTE[2], None),
             ("temperature_min", "coldest point of the mean field", PALETTE[5], "dash"),
             ("temperature_coldest", "coldest point anywhere", PALETTE[5], None),
             ("temperature_core_max", "hottest core (estimate from generation)", PALETTE[1],
              "dot")]
    for name, label, color, dash in temps:
        if name in ds:
            fig.add_trace(go.Scatter(x=t, y=ds[name].values, name=label,
                                     line=dict(color=color, dash=dash)), row=3, col=1)
    spread = ds["temperature_max"].values - ds["temperature_min"].values
    fig.add_trace(go.Scatter(x=t, y=spread, name="spread of the mean field over the face",
                             line=dict(color=PALETTE[3], dash="dash")), row=4, col=1)
    if "temperature_hottest" in ds and "temperature_coldest" in ds:
        # layout 'single' sees only the through-thickness part: a lower bound, not the spread
        lumped = _lumped(ds)
        fig.add_trace(go.Scatter(x=t, y=ds["temperature_hottest"].values
                                 - ds["temperature_coldest"].values,
                                 name=_LOWER_BOUND_SPREAD if lumped else
                                 "in-cell spread (hottest − coldest anywhere)",
                                 line=dict(color=PALETTE[3], dash="dot" if lumped else None)),
                      row=4, col=1)
    lim = limit_values(ds, limits)
    _temperature_limit_lines(fig, lim, row=3)
    if "spread_K" in lim:
        fig.add_hline(y=lim["spread_K"], line=_LIMIT_STYLE, row=4, col=1,
                      annotation_text=f"spread limit {lim['spread_K']:g} K",
                      annotation_position="top left")
    fig.update_layout(**_LAYOUT)
    # eleven legend entries run to six rows of two in a notebook-wide figure: room for them
    # above the plots, under the title (the fixed 110 px let them cover the title)
    rows = -(-sum(1 for tr in fig.data if tr.showlegend is not False) // 2)
    top = max(_LAYOUT["margin"]["t"], 50 + 21 * rows)
    fig.update_layout(title=dict(text=_run_title(ds)), height=820 + top - _LAYOUT["margin"]["t"],
                      margin=dict(t=top))
    fig.update_yaxes(title_text="Voltage (V)", row=1, col=1)
    fig.update_yaxes(title_text="Current (A)", row=2, col=1)
    fig.update_yaxes(title_text="Temperature (°C)", row=3, col=1)
    fig.update_yaxes(title_text="Spread (K)", rangemode="tozero", row=4, col=1)
    fig.update_xaxes(title_text=t_label, row=4, col=1)
    return fig


def heat_split_figure(ds) -> go.Figure:
    """The generated heat split by source over time (stacked areas) with the rejected heat."""
    ds = _module_totals(ds)
    present = [name for name in HEAT_PARTS if name in ds]
    _require(ds, ["heat_total"], "heat_split_figure")
    if not present:
        raise ValueError("heat_split_figure: the results Dataset has none of the heat_<source> variables "
                         f"({', '.join(HEAT_PARTS)})")
    t, t_label, _ = time_axis(ds)
    fig = go.Figure()
    # reversible heat changes sign (cooling on part of a cycle), which a stack cannot show honestly:
    # positive parts are stacked, a negative contribution is drawn as its own line below zero.
    for k, name in enumerate(present):
        values = np.asarray(ds[name].values, dtype=float)
        color = PALETTE[k % len(PALETTE)]
        if name == "heat_reversible" and np.nanmin(values) < 0.0:
            fig.add_trace(go.Scatter(x=t, y=values, name=HEAT_PARTS[name] + " (signed)",
                                     line=dict(color=color, width=2)))
            continue
        fig.add_trace(go.Scatter(x=t, y=values, name=HEAT_PARTS[name], stackgroup="heat",
                                 line=dict(color=color, width=0.5)))
    signed = any("signed" in (tr.name or "") for tr in fig.data)
    total_name = "total generated (stack + entropic)" if signed else "total generated"
    fig.add_trace(go.Scatter(x=t, y=ds["heat_total"].values, name=total_name,
                             line=dict(color="#000000", width=2)))
    if "heat_rejected" in ds:
        fig.add_trace(go.Scatter(x=t, y=ds["heat_rejected"].values, name="rejected to sinks",
                                 line=dict(color="#000000", width=2, dash="dash")))
    fig.update_layout(**_LAYOUT)
    fig.update_layout(title=dict(text="Heat generation by source"), height=460)
    fig.update_xaxes(title_text=t_label)
    fig.update_yaxes(title_text="Heat (W)")
    return fig


_COMPARE = {  # axis titles fit a 260 px panel: the long ones break onto a second line
    "temperature_max": ("Hottest point anywhere<br>(core included) (°C)", 1.0),
    "voltage": ("Terminal voltage (V)", 1.0),
    "spread": ("In-cell spread<br>(hottest − coldest) (K)", 1.0),
    "soc_mean": ("State of charge (%)", 100.0),
    "heat_total": ("Generated heat (W)", 1.0),
    "temperature_mean": ("Face mean temperature (°C)", 1.0),
    "current": ("Current (A)", 1.0),
}


_LOWER_BOUND_SPREAD = "through-thickness only (lower bound)"  # layout 'single'


def _lumped(ds) -> bool:
    from explorer.results import is_lumped

    return is_lumped(ds)


def _series(ds, name: str) -> np.ndarray:
    """A comparison trace: the figures the verdicts read (hottest point anywhere, in-cell
    spread), the worst over a module's cells; per-cell series of a module are averaged."""
    from explorer.results import coldest_anywhere, hottest_anywhere

    if name == "temperature_max":
        return np.nanmax(hottest_anywhere(ds), axis=0)
    if name == "spread":
        return np.nanmax(hottest_anywhere(ds) - coldest_anywhere(ds), axis=0)
    v = ds[name]
    if "cell" in v.dims:
        v = v.mean("cell")
    return np.asarray(v.values, dtype=float) * _COMPARE[name][1]


def comparison_figure(scenarios, variables: Sequence[str] = ("temperature_max", "spread", "voltage"),
                      limits=None) -> go.Figure:
    """Overlay the traces of several runs, one panel per variable, one colour per scenario.

    Parameters
    ----------
    scenarios : mapping name -> Dataset, or a sequence of Datasets (named by their cell and index)
    variables : names from ``temperature_max``, ``spread``, ``voltage``, ``soc_mean``,
        ``heat_total``, ``temperature_mean``, ``current``.
    limits : explorer.Limits, optional
        Drawn on the temperature and spread panels.
    """
    named = _named(scenarios, "comparison_figure")
    bad = [v for v in variables if v not in _COMPARE]
    if bad:
        raise ValueError(f"comparison_figure: unknown variable(s) {bad}; expected some of "
                         f"{', '.join(_COMPARE)}")
    for name, ds in named.items():
        needed = ["temperature_max", "temperature_min"] if "spread" in variables else []
        _require(ds, needed + [v for v in variables if v != "spread"], f"comparison_figure[{name!r}]")
    fig = make_subplots(rows=len(variables), cols=1, shared_xaxes=True, vertical_spacing=0.06)
    t_label = "Time (s)"
    minutes = max(float(ds["time"].values[-1]) for ds in named.values()) > 1200.0
    if minutes:
        t_label = "Time (min)"
    for k, (name, ds) in enumerate(named.items()):
        t = np.asarray(ds["time"].values, dtype=float) / (60.0 if minutes else 1.0)
        color = PALETTE[k % len(PALETTE)]
        for row, var in enumerate(variables, start=1):
            if var == "spread" and _lumped(ds):  # through the thickness only: a lower bound
                fig.add_trace(go.Scatter(x=t, y=_series(ds, var), legendgroup=name,
                                         name=f"{name}: {_LOWER_BOUND_SPREAD}",
                                         line=dict(color=color, dash="dot")), row=row, col=1)
                continue
            fig.add_trace(go.Scatter(x=t, y=_series(ds, var), name=name, legendgroup=name,
                                     showlegend=row == 1, line=dict(color=color)), row=row, col=1)
    lim = limit_values(next(iter(named.values())), limits)
    for row, var in enumerate(variables, start=1):
        fig.update_yaxes(title_text=_COMPARE[var][0], row=row, col=1)
        if var == "temperature_max" and "temperature_max_C" in lim:
            fig.add_hline(y=lim["temperature_max_C"], line=_LIMIT_STYLE, row=row, col=1,
                          annotation_text=f"design limit {lim['temperature_max_C']:g} °C")
        if var == "spread" and "spread_K" in lim:
            fig.add_hline(y=lim["spread_K"], line=_LIMIT_STYLE, row=row, col=1,
                          annotation_text=f"spread limit {lim['spread_K']:g} K")
    fig.update_layout(**_LAYOUT)
    fig.update_layout(title=dict(text="Scenario comparison"), height=260 * len(variables) + 100)
    fig.update_xaxes(title_text=t_label, row=len(variables), col=1)
    return fig


def _named(scenarios, where: str) -> dict:
    if hasattr(scenarios, "data_vars"):
        scenarios = [scenarios]
    if isinstance(scenarios, Mapping):
        named = dict(scenarios)
    else:
        named = {}
        for k, ds in enumerate(scenarios):
            base = f"{k + 1}: {ds.attrs.get('cell_name', 'run')}" if hasattr(ds, "attrs") else str(k)
            named[base] = ds
    if not named:
        raise ValueError(f"{where}: no scenarios given; expected at least one results Dataset")
    return named


def sizing_figure(result, limits=None, vary: str | None = None) -> go.Figure:
    """Peak temperature and spread against the varied design value, with the limits and design point.

    Parameters
    ----------
    result : the object returned by :func:`explorer.size_cooling`
        Uses ``.curve`` (an xarray Dataset over dimension ``value`` with ``temperature_max_C`` and
        ``spread_K``), ``.value`` and ``.feasible``; ``.vary`` / ``.limits`` when present.
    limits : explorer.Limits, optional
        Defaults to ``result.limits`` if the result carries them.
    vary : str, optional
        Name of the varied parameter for the axis label (default ``result.vary`` or "value").
    """
    curve = getattr(result, "curve", None)
    if curve is None or not hasattr(curve, "data_vars"):
        raise TypeError("sizing_figure: expected the result of explorer.size_cooling (with `.curve`, an "
                        f"xarray Dataset), got {type(result).__name__}")
    _require(curve, ["value", "temperature_max_C", "spread_K"], "sizing_figure (result.curve)")
    vary = vary or getattr(result, "vary", None) or "value"
    limits = limits if limits is not None else getattr(result, "limits", None)
    order = np.argsort(curve["value"].values)
    v = np.asarray(curve["value"].values, dtype=float)[order]
    tmax = np.asarray(curve["temperature_max_C"].values, dtype=float)[order]
    spread = np.asarray(curve["spread_K"].values, dtype=float)[order]
    fig = make_subplots(rows=2, cols=1, shared_xaxes=True, vertical_spacing=0.08)
    fig.add_trace(go.Scatter(x=v, y=tmax, mode="lines+markers", name="hottest point",
                             line=dict(color=PALETTE[1])), row=1, col=1)
    fig.add_trace(go.Scatter(x=v, y=spread, mode="lines+markers", name="spread",
                             line=dict(color=PALETTE[3])), row=2, col=1)
    lim = limit_values(None, limits)
    if "temperature_max_C" in lim:
        fig.add_hline(y=lim["temperature_max_C"], line=_LIMIT_STYLE, row=1, col=1,
                      annotation_text=f"limit {lim['temperature_max_C']:g} °C")
    if "spread_K" in lim:
        fig.add_hline(y=lim["spread_K"], line=_LIMIT_STYLE, row=2, col=1,
                      annotation_text=f"limit {lim['spread_K']:g} K")
    value = getattr(result, "value", None)
    feasible = bool(getattr(result, "feasible", False))
    if value is not None and np.isfinite(float(value)):
        value = float(value)
        fig.add_vline(x=value, line=dict(color="#000000", width=1.5), row="all", col=1)
        fig.add_trace(go.Scatter(x=[value], y=[float(np.interp(value, v, tmax))], mode="markers",
                                 marker=dict(size=12, symbol="diamond", color="#000000"),
                                 name="design point"), row=1, col=1)
        fig.add_trace(go.Scatter(x=[value], y=[float(np.interp(value, v, spread))], mode="markers",
                                 marker=dict(size=12, symbol="diamond", color="#000000"),
                                 showlegend=False, name="design point"), row=2, col=1)
    verdict = f"design point {_design_label(vary)} = {value:.4g}" if value is not None and feasible else \
        "no value within the bounds meets the limits"
    fig.update_layout(**_LAYOUT)
    fig.update_layout(title=dict(text=f"Sizing: {verdict}"), height=560, hovermode="closest")
    fig.update_yaxes(title_text="Hottest point anywhere (°C)", row=1, col=1)
    fig.update_yaxes(title_text="In-cell spread (K)", row=2, col=1)
    fig.update_xaxes(title_text=_design_label(vary), row=2, col=1)
    return fig


def _design_label(name: str) -> str:
    """A design parameter's axis label in words with its unit (``fin_mm`` -> ``fin thickness
    (mm)``, from ``explorer.sizing.design_parameter``); else :func:`_axis_label`."""
    try:
        from explorer.sizing import design_parameter

        p = design_parameter(name)
    except (ImportError, ValueError, KeyError):  # not a design parameter
        return _axis_label(name)
    unit = {"degC": "°C", "W/(m2 K)": "W/(m² K)", "um": "µm", "1": ""}.get(p.unit, p.unit)
    return f"{p.label} ({unit})" if unit else p.label


def _axis_label(name: str) -> str:
    """Turn a parameter name with a unit suffix into an axis label: ``flow_L_min`` -> ``flow (L/min)``."""
    units = {"_L_min": "L/min", "_C": "°C", "_mm": "mm", "_W_mK": "W/(m K)", "_W_m2K": "W/(m² K)",
             "_W_K": "W/K", "_K": "K", "_Pa": "Pa", "_kPa": "kPa"}
    for suffix, unit in units.items():
        if name.endswith(suffix):
            return f"{name[: -len(suffix)].replace('_', ' ')} ({unit})"
    return name.replace("_", " ")


def _run_title(ds) -> str:
    a = ds.attrs
    parts = [str(a.get("cell_name", "run")), str(a.get("electrochemistry", "")).upper(),
             str(a.get("layout", ""))]
    status = a.get("status")
    if status and status != "completed":
        parts.append(f"status: {status}")
    return " · ".join(p for p in parts if p)


def _module_hottest(ds) -> str:
    """The per-cell figure that governs a temperature limit: hottest anywhere, else the face max."""
    return "temperature_hottest" if "temperature_hottest" in ds else "temperature_max"


def _module_coolant(ds) -> np.ndarray | None:
    """Coolant temperature at the cell boundaries along the plate, (time, cells + 1); None when
    the run has no coolant stream.

    Point 0 is the inlet of the first cell, point k+1 the outlet of cell k (the inlet of k+1).
    """
    if "coolant_outlet" not in ds:
        return None
    outlet = np.asarray(ds["coolant_outlet"].transpose("time", "cell").values, dtype=float)
    first = (np.asarray(ds["coolant_inlet"].isel(cell=0).values, dtype=float)
             if "coolant_inlet" in ds else np.full(outlet.shape[0], np.nan))
    return np.column_stack([first, outlet])


def module_figure(ds, limits=None) -> go.Figure:
    """A module along the coolant path: each cell's peak, the coolant along the plate, cell-to-cell.

    Parameters
    ----------
    ds : xarray.Dataset
        A module result (dimension ``cell``, 0 = the first cell the coolant meets), as returned by
        :func:`explorer.simulate_module`.
    limits : explorer.Limits or mapping, optional
        ``temperature_max_C`` is drawn on the peak panel, ``cell_to_cell_K`` on the last one.

    Panels: (1) each cell's peak of the hottest point anywhere in it (core included) over the
    duty; (2) the coolant temperature at each cell boundary along the plate, at the time of the
    module's peak and the highest over the run; (3) the cell-to-cell difference (largest minus
    smallest cell mean temperature) against time.
    """
    if not hasattr(ds, "dims") or "cell" not in ds.dims:
        raise ValueError("module_figure: expected a module result with a `cell` dimension (from "
                         "explorer.simulate_module), got a Dataset without one")
    hottest = _module_hottest(ds)
    _require(ds, [hottest, "temperature_mean"], "module_figure")
    cells = np.asarray(ds["cell"].values)
    peaks = np.asarray(ds[hottest].max("time").values, dtype=float)
    module_peak = np.asarray(ds[hottest].max("cell").values, dtype=float)
    i_peak = int(np.nanargmax(module_peak))
    t, t_label, divisor = time_axis(ds)
    fig = make_subplots(rows=3, cols=1, vertical_spacing=0.11, row_heights=[0.36, 0.32, 0.32])
    fig.add_trace(go.Scatter(x=cells, y=peaks, mode="lines+markers", name="peak of each cell "
                             "(hottest point anywhere)", line=dict(color=PALETTE[1])), row=1, col=1)
    lim = limit_values(ds, limits)
    _temperature_limit_lines(fig, lim, row=1)
    coolant = _module_coolant(ds)
    if coolant is not None:
        edges = np.arange(cells.size + 1)
        fig.add_trace(go.Scatter(x=edges, y=coolant[i_peak], mode="lines+markers",
                                 name=f"coolant at the module's peak (t = {t[i_peak]:.4g} "
                                      f"{'min' if divisor == 60.0 else 's'})",
                                 line=dict(color=PALETTE[0])), row=2, col=1)
        fig.add_trace(go.Scatter(x=edges, y=np.nanmax(coolant, axis=0), mode="lines",
                                 name="coolant, highest over the run",
                                 line=dict(color=PALETTE[0], dash="dash")), row=2, col=1)
    spread = np.asarray((ds["temperature_mean"].max("cell") - ds["temperature_mean"].min("cell"))
                        .values, dtype=float)
    fig.add_trace(go.Scatter(x=t, y=spread, name="cell-to-cell (largest − smallest cell mean)",
                             line=dict(color=PALETTE[3])), row=3, col=1)
    c2c = None
    if limits is not None:
        c2c = limits.get("cell_to_cell_K") if isinstance(limits, Mapping) else \
            getattr(limits, "cell_to_cell_K", None)
    if c2c is not None:
        fig.add_hline(y=float(c2c), line=_LIMIT_STYLE, row=3, col=1,
                      annotation_text=f"cell-to-cell limit {float(c2c):g} K",
                      annotation_position="top left")
    fig.update_layout(**_LAYOUT)
    fig.update_layout(title=dict(text=f"Module of {cells.size} cells along the coolant · "
                                      f"{_run_title(ds)}"), height=820, hovermode="closest")
    fig.update_xaxes(title_text="Cell along the coolant path (0 = first the coolant meets)",
                     tickmode="array", tickvals=cells, row=1, col=1)
    fig.update_yaxes(title_text="Peak temperature (°C)", row=1, col=1)
    fig.update_xaxes(title_text="Position along the plate (cell boundaries; 0 = inlet)",
                     tickmode="array", tickvals=np.arange(cells.size + 1), row=2, col=1)
    fig.update_yaxes(title_text="Coolant (°C)", row=2, col=1)
    fig.update_xaxes(title_text=t_label, row=3, col=1)
    fig.update_yaxes(title_text="Cell-to-cell (K)", rangemode="tozero", row=3, col=1)
    return fig
