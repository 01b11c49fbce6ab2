"""A self-contained HTML report of one or more results: runs, a module, a sizing, a sweep.

The report stands alone. Its first screen says what was run (cell, duty, cooling, model and
layout in words and numbers), the verdict against the limits with the margins, the warnings
(a duty cut short, a fidelity flag, hydraulic or geometry warnings) and a banner when an input
is invented or template data. Then: the key figures, an inputs table (every number with its
unit), the assumptions (what the model leaves out), the figures, each under its own heading,
the module view and the fidelity check when present, and an appendix with the full settings
and the provenance (tool version, cell file and hash; file names only, no local paths).
Several runs are compared side by side first. The caution of DESIGN.md §7
(:data:`explorer.results.CAUTION`) opens and closes every report.

plotly.js is embedded once (the file opens with no network), or, with
``plotlyjs="beside"``, loaded from ``plotly-<version>.min.js`` written next to the report
(many reports shared together carry the library once).

Examples
--------
>>> from explorer.report import write_report                        # doctest: +SKIP
>>> write_report(ds, "van_edge_plate.html", limits=explorer.Limits(temperature_max_C=55))  # doctest: +SKIP
"""

from __future__ import annotations

import datetime as _dt
import html
import json
import logging
import re
import sys
from collections.abc import Mapping, Sequence
from pathlib import Path

import numpy as np

from explorer import plots
from explorer import report_parts as parts

logger = logging.getLogger(__name__)

__all__ = [
    "KEY_FIGURE_LABELS",
    "PLOTLYJS_MODES",
    "cmd_report",
    "format_figure",
    "hydraulics_rows",
    "limits_rows",
    "render_report",
    "write_report",
]

DEFAULT_TITLE = "Pouch Thermal Explorer — cooling results"
REPORT_FRAMES = 40  # animation frames per field in a report (plots.MAX_FRAMES is the ceiling)
PLOTLYJS_MODES = ("inline", "beside")

# key figure -> (label, format); unknown figures are shown with their own name
KEY_FIGURE_LABELS = {
    "peak_temperature_C": ("Peak temperature (°C): hottest point anywhere in the cell, core "
                           "estimate and faces included", "{:.2f}"),
    "peak_time_s": ("Time of the peak (s)", "{:.0f}"),
    "peak_mean_field_C": ("Hottest point of the through-thickness-mean field (°C)", "{:.2f}"),
    "max_spread_K": ("Largest in-cell spread (K): hottest − coldest point anywhere in the cell "
                     "at one time", "{:.2f}"),
    "max_face_spread_K": ("Largest spread over the face (K), through-thickness-mean field",
                          "{:.2f}"),
    "max_through_thickness_K": ("Largest difference through the thickness at one point (K)",
                                "{:.2f}"),
    "time_to_limit_s": ("Time for the hottest point anywhere to reach the data-sheet limit (s)",
                        "{:.0f}"),
    "worst_cell": ("Worst cell of the module (peak)", "{}"),
    "cell_to_cell_K": ("Largest cell-to-cell difference of mean temperatures (K)", "{:.2f}"),
    "end_soc": ("SOC at the end (%)", "pct"),
    "energy_delivered_Wh": ("Energy delivered (Wh)", "{:.1f}"),
    "charge_delivered_Ah": ("Charge delivered (Ah)", "{:.2f}"),
    "heat_generated_J": ("Heat generated (kJ)", "kJ"),
    "heat_rejected_J": ("Heat rejected to sinks (kJ)", "kJ"),
    "duration_s": ("Duration (s)", "{:.0f}"),
    "end_voltage_V": ("Voltage at the end (V)", "{:.3f}"),
    "status": ("Run status", "{}"),
}

_CSS = """
body{font-family:Helvetica,Arial,sans-serif;margin:0 auto;max-width:1100px;padding:1.5em;color:#1a1a1a}
h1{font-size:1.6em;margin-bottom:.2em}h2{border-bottom:2px solid #0072B2;padding-bottom:.2em;margin-top:2em}
h3{margin-top:1.5em}.meta{color:#555;font-size:.9em}
table{border-collapse:collapse;margin:.6em 0;font-size:.92em}
td,th{border:1px solid #ccc;padding:.25em .6em;text-align:left;vertical-align:top}
th{background:#f1f4f8}td.num{text-align:right;font-variant-numeric:tabular-nums}
pre{margin:0;white-space:pre-wrap;font-size:.85em}
.caution{border-left:6px solid #D55E00;background:#fff4ec;padding:.7em 1em;margin:1em 0}
.banner{border:2px solid #B2182B;background:#fdecea;padding:.7em 1em;margin:1em 0}
.warnings li{color:#8a1c1c}
.first-screen{border:1px solid #ccd;padding:.2em 1em 1em;background:#fafbfd}
.verdict-met{color:#1a7f37;font-weight:bold;white-space:nowrap}
.verdict-not{color:#B2182B;font-weight:bold;white-space:nowrap}
.status-stopped,.status-failed,.status-cut_short{color:#B2182B;font-weight:bold}
.plot{margin:0 0 1.5em}.wide{overflow-x:auto;max-width:100%}
footer{margin-top:3em;border-top:1px solid #ccc;padding-top:1em;font-size:.9em;color:#333}
"""


def _results():
    """The results module (key figures, caution, loader)."""
    from explorer import results

    return results


def _tool_version() -> str:
    try:
        from explorer import __version__
    except ImportError:  # pragma: no cover
        return "unknown"
    return str(__version__)


# ---------------------------------------------------------------------------------------------
# html pieces


def _esc(value) -> str:
    return html.escape(str(value), quote=True)


# key figures a single-temperature layout cannot see (NaN in explorer.results.key_figures)
_OVER_THE_FACE = ("max_spread_K", "max_face_spread_K")


def format_figure(name: str, value) -> tuple[str, str]:
    """A key figure as (label with unit, formatted value) for tables (unknown names pass through)."""
    label, fmt = KEY_FIGURE_LABELS.get(name, (name.replace("_", " "), "{}"))
    if value is None:
        text = "not reached" if name == "time_to_limit_s" else "—"
    elif name in _OVER_THE_FACE and isinstance(value, float) and np.isnan(value):
        text = "not evaluated (one temperature over the face)"
    elif isinstance(value, int | float | np.floating | np.integer) and not isinstance(value, bool):
        v = float(value)
        if not np.isfinite(v):
            text = "—"
        elif fmt == "pct":
            text = f"{100.0 * v:.1f}"
        elif fmt == "kJ":  # 29.1, 183.1; a small heat keeps its digits (0.0327, not 0.0)
            text = f"{v / 1e3:.1f}" if abs(v) >= 1e4 else f"{v / 1e3:.3g}"
        else:
            text = fmt.format(v) if fmt != "{}" else f"{v:.4g}"
    else:
        text = str(value)
    return label, text


def _table(rows: Sequence[Sequence[str]], header: Sequence[str] | None = None,
           numeric_from: int = 1, cls: str = "") -> str:
    """An HTML table; cells are HTML already (escape them before)."""
    out = [f"<table class='{cls}'>" if cls else "<table>"]
    if header:
        out.append("<tr>" + "".join(f"<th>{_esc(h)}</th>" for h in header) + "</tr>")
    for row in rows:
        cells = []
        for k, cell in enumerate(row):
            num = ' class="num"' if k >= numeric_from and _NUMERIC.match(str(cell)) else ""
            cells.append(f"<td{num}>{cell}</td>")
        out.append("<tr>" + "".join(cells) + "</tr>")
    out.append("</table>")
    return "\n".join(out)


_NUMERIC = re.compile(r"^[≥<>+\-−]?\s*[\d.,]+(e[+-]?\d+)?(\s*[^\s<]{0,8})?$")


def _esc_rows(rows) -> list[list[str]]:
    return [[_esc(c) for c in row] for row in rows]


HYDRAULIC_FIGURES = (
    ("coolant_description", "Coolant", "{}"),
    ("flow_L_min", "Flow (L/min)", "{:.3g}"),
    ("regime", "Flow regime", "{}"),
    ("reynolds", "Reynolds number", "{:.0f}"),
    ("h_channel_W_m2K", "Channel heat transfer coefficient (W/(m² K))", "{:.0f}"),
    ("pressure_drop_Pa", "Pressure drop (kPa)", "kPa"),
    ("pump_power_W", "Pump power (W)", "{:.3g}"),
    ("outlet_C", "Coolant outlet at the run's mean heat into the plate (°C)", "{:.2f}"),
)


def _hydraulics(ds) -> dict:
    raw = ds.attrs.get("hydraulics", "{}")
    try:
        hyd = json.loads(raw) if isinstance(raw, str) else dict(raw or {})
    except (TypeError, ValueError):
        return {}
    return hyd if isinstance(hyd, dict) else {}


def hydraulics_rows(ds) -> list[tuple[str, str]]:
    """The cold plate's hydraulic figures from ``ds.attrs["hydraulics"]`` as (label, text) rows,
    followed by its warnings; empty for designs without a plate."""
    hyd = _hydraulics(ds)
    rows = []
    for key, label, fmt in HYDRAULIC_FIGURES:
        value = hyd.get(key)
        if value is None:
            continue
        if fmt == "kPa":
            text = f"{float(value) / 1e3:.3g}"
        elif fmt == "{}":
            text = str(value)
        else:
            text = fmt.format(float(value))
        rows.append((label, text))
    if rows and "coolant_outlet" in ds.data_vars:  # the figure a coolant_outlet_C limit reads
        outlet = np.asarray(ds["coolant_outlet"].values, dtype=float)
        if np.isfinite(outlet).any():
            rows.append(("Highest coolant outlet during the run (°C)",
                         f"{float(np.nanmax(outlet)):.2f}"))
    rows += [("Warning", str(w)) for w in hyd.get("warnings", []) or []]
    return rows


def limits_rows(ds, limits) -> list[tuple[str, str, str, str, str]]:
    """(limit, limit value, figure, margin, verdict) rows from ``limits.check(ds)``.

    The limit cell names the figure that governs (e.g. the hottest point anywhere in the cell,
    core included); the verdict is "met", "NOT met" or "not evaluated: <why>". The design's
    hydraulics are read from ``ds.attrs["hydraulics"]``. Empty when ``limits`` has no ``check``
    method (e.g. a plain mapping used only for the lines).
    """
    result = _limits_check(ds, limits)
    if result is None:
        return []
    from explorer.limits import LONG_NAMES, UNITS

    status = str(ds.attrs.get("status", "completed"))
    early = ""
    if status != "completed" and "time" in ds.coords and ds.sizes["time"]:
        what = {"cut_short": "was cut short", "stopped": "was interrupted"}.get(status, status)
        early = (f" (over the first {float(ds['time'].values[-1]):.0f} s only: the run "
                 f"{what}; see the warnings)")
    rows = []
    for name, margin in result["margins"].items():
        verdict = result["verdicts"][name]
        figure = result["figures"].get(name)
        unit = UNITS.get(name, "").replace("degC", "°C")
        margin_unit = "K" if unit == "°C" else unit
        margin_text = "—" if margin is None else f"{margin:+.3g} {margin_unit}"
        if figure is not None:
            shown, margin_shown = parts.figure_and_margin(figure, margin if margin is not None
                                                          else 0.0)
            shown += f" {unit}"
            if margin is not None:
                margin_text = f"{margin_shown} {margin_unit}"
        elif name in result.get("bounds", {}):
            shown = f"≥ {result['bounds'][name]:.4g} {unit}"
        else:
            shown = "—"
        cell = result.get("cells", {}).get(name)
        if cell is not None:
            shown += f" (cell {cell})"
        text = {"met": "met", "not met": "NOT met"}.get(verdict, "not evaluated")
        if name in result["reasons"]:
            text += f": {result['reasons'][name]}"
        if early and verdict in ("met", "not met"):  # every verdict carries an early end
            text += early
        rows.append((f"{name}: {LONG_NAMES.get(name, name)}", f"{getattr(limits, name):.4g} {unit}",
                     shown, margin_text, text))
    return rows


def _limits_check(ds, limits):
    """``limits.check(ds, hydraulics)`` with the hydraulics the run recorded; None without a
    ``check`` method."""
    check = getattr(limits, "check", None)
    if check is None:
        return None
    return check(ds, _hydraulics(ds) or None)


class _Page:
    """The body of a report being built: sections, unique element ids, the figures."""

    def __init__(self, frames: int = REPORT_FRAMES):
        self.body: list[str] = []
        self.ids: set[str] = set()
        self.frames = frames

    def uid(self, base: str) -> str:
        """``base`` made a valid, unique element id (a suffix when taken)."""
        clean = "".join(c if c.isalnum() or c in "-_" else "-" for c in base.lower()) or "x"
        candidate, k = clean, 1
        while candidate in self.ids:
            k += 1
            candidate = f"{clean}-{k}"
        self.ids.add(candidate)
        return candidate

    def add(self, *items: str) -> None:
        self.body.extend(items)

    def heading(self, level: int, text: str, base: str) -> str:
        """Add a heading with a unique id; return the id."""
        hid = self.uid(base)
        self.add(f"<h{level} id='{hid}'>{_esc(text)}</h{level}>")
        return hid

    def figure(self, title: str, base: str, make) -> None:
        """A figure under its own heading: ``<section class='plot'><h3/>plot div</section>``.
        A figure that cannot be drawn says why in its place."""
        hid = self.uid(f"{base}-heading")
        div = self.uid(f"{base}-plot")
        try:
            fig = make()
            body = fig.to_html(full_html=False, include_plotlyjs=False, div_id=div,
                               auto_play=False, config={"displaylogo": False, "responsive": True})
        except (ValueError, KeyError, TypeError) as exc:
            body = f"<p class='meta' id='{div}'>Not drawn: {_esc(exc)}</p>"
        self.add(f"<section class='plot' aria-labelledby='{hid}'>",
                 f"<h3 id='{hid}'>{_esc(title)}</h3>", body, "</section>")


# ---------------------------------------------------------------------------------------------
# a run


def _limits_for(ds, limits):
    """The limits to hold ``ds`` against: those given, else those the file recorded, else the
    data-sheet maximum (labelled as such)."""
    if isinstance(limits, Mapping):  # a plain mapping of limit values
        from explorer.limits import Limits
        from explorer.validators import InputError

        try:
            limits = Limits(**limits)
        except (InputError, TypeError):
            pass
    if limits is not None and hasattr(limits, "check"):
        return limits, "given"
    recorded = _results().limits_from(ds)
    if recorded is not None:
        return recorded, "recorded"
    sheet = ds.attrs.get("temperature_limit_C")
    if limits is None and sheet is not None and np.isfinite(float(sheet)):
        from explorer.limits import Limits

        return Limits(temperature_max_C=float(sheet)), "data sheet"
    return limits, "given"


def _warnings(ds, check) -> list[str]:
    """Every warning a reader must see: an early end, the limits check's, the hydraulics', the
    cell's (e.g. an inconsistent geometry) and a fidelity check that says the verdict could
    flip."""
    out = list(_results().run_warnings(ds))
    if check is not None:
        out += [w for w in check.get("warnings", []) if w not in out]
    out += [f"hydraulics: {w}" for w in _hydraulics(ds).get("warnings", []) or []]
    cell_warnings = parts.parse(ds.attrs.get("cell_warnings", "[]"))
    if isinstance(cell_warnings, list):
        out += [f"cell: {w}" for w in cell_warnings]
    summary = _fidelity_summary(ds)
    if summary and str(summary.get("verdict_could_flip", "")).lower() == "yes":
        out.append("fidelity check: the fuller models differ by more than a margin; the "
                   f"verdict could flip. {summary.get('message', '')}".strip())
    return out


def _fidelity_summary(ds) -> dict | None:
    try:
        from explorer import fidelity
    except ImportError:
        fidelity = None
    if fidelity is not None and hasattr(fidelity, "from_attrs"):
        try:
            return fidelity.from_attrs(ds)
        except (ValueError, TypeError, KeyError):
            return None
    value = parts.parse(ds.attrs.get("fidelity_summary"))
    return value if isinstance(value, Mapping) else None


def _fidelity_html(summary: Mapping) -> str:
    """The check's table and message: :func:`explorer.fidelity.html_table`, else drawn here from
    the summary's rows (contract F)."""
    try:
        from explorer import fidelity

        return fidelity.html_table(summary)
    except (ImportError, AttributeError, KeyError, TypeError):
        pass
    rows = []
    for r in summary.get("rows", []) or []:
        rows.append([_esc(r.get("figure", "")), _esc(r.get("unit", "")),
                     *(_esc(parts.number(r.get(k))) for k in ("as_run", "fuller", "difference",
                                                              "margin")),
                     _esc(r.get("could_flip", ""))])
    out = [_table(rows, header=("figure", "unit", "as run", "fuller model", "difference",
                                "margin", "verdict could flip"), numeric_from=2)]
    for skipped in summary.get("skipped", []) or []:
        out.append(f"<p class='meta'>Not run: {_esc(skipped.get('variant', ''))} — "
                   f"{_esc(skipped.get('reason', ''))}</p>")
    out.append(f"<p>Verdict could flip: {_esc(summary.get('verdict_could_flip', '?'))}. "
               f"{_esc(summary.get('message', ''))}</p>")
    return "\n".join(out)


def _first_screen(page: _Page, ds, name: str, limits, prefix: str) -> None:
    page.add("<div class='first-screen'>")
    page.heading(3, "What was run", f"{prefix}-what")
    status = str(ds.attrs.get("status", "unknown"))
    message = str(ds.attrs.get("status_message", ""))
    rows = [(_esc(k), _esc(v)) for k, v in parts.what_was_run(ds)]
    rows.append(("Status", f"<span class='status-{_esc(status)}'>{_esc(status)}</span>"
                 + (f" — {_esc(message)}" if message else "")))
    page.add(_table(rows, numeric_from=99))
    page.heading(3, "Verdict against the limits", f"{prefix}-verdict")
    held, source = _limits_for(ds, limits)
    check = None
    try:
        check = _limits_check(ds, held)
        rows = limits_rows(ds, held)
    except ValueError as exc:  # a limit the run cannot be checked against
        page.add(f"<p>{_esc(exc)}</p>")
        rows = []
    if check is not None and rows:
        if check["met"]:
            overall, cls = "Every limit is met.", "verdict-met"
        elif any(v == "not met" for v in check["verdicts"].values()):
            overall, cls = "A limit is NOT met.", "verdict-not"
        else:
            overall, cls = ("Not every limit is shown to be met: a limit not evaluated is not "
                            "met."), "verdict-not"
        where = {"given": "the limits given", "recorded": "the limits recorded in the results "
                 "file", "data sheet": "the cell's data-sheet maximum (no design limits were "
                 "recorded)"}[source]
        page.add(f"<p><span class='{cls}'>{_esc(overall)}</span> Held against {_esc(where)}; "
                 "margin = limit − figure, positive when met.</p>")
        cells = [[_esc(c) for c in row[:4]] + [_verdict_cell(row[4])] for row in rows]
        page.add(_table(cells, header=("limit", "limit value", "figure", "margin", "verdict")))
    elif not rows:
        page.add("<p class='meta'>No limits to hold the run against.</p>")
    page.heading(3, "Warnings", f"{prefix}-warnings")
    warnings = _warnings(ds, check)
    if warnings:
        page.add("<ul class='warnings'>" + "".join(f"<li>{_esc(w)}</li>" for w in warnings)
                 + "</ul>")
    else:
        page.add("<p>None: the duty ran to its end and no check raised a warning.</p>")
    page.add("</div>")


def _verdict_cell(text: str) -> str:
    """The verdict word coloured and kept on one line; its reason or caveat after it as plain,
    wrapping text (a long reason in the coloured no-wrap style ran off the page)."""
    word = next((w for w in ("not evaluated", "NOT met", "met") if text.startswith(w)), text)
    cls = "verdict-met" if word == "met" else "verdict-not"
    return f"<span class='{cls}'>{_esc(word)}</span>{_esc(text[len(word):])}"


def _banner(notes: Sequence[str]) -> str:
    if not notes:
        return ""
    items = "".join(f"<li>{_esc(n)}</li>" for n in notes)
    return ("<div class='banner'><strong>Invented or template data.</strong> These results "
            "rest on inputs that are not measured data; they show how the tool works and say "
            f"nothing about a real product:<ul>{items}</ul></div>")


def _run_section(page: _Page, ds, k: int, name: str, inputs, limits) -> None:
    results = _results()
    prefix = f"run{k}"
    sid = page.uid(prefix)
    page.add(f"<section id='{sid}'>")
    page.heading(2, name, f"{prefix}-title")
    page.add(_banner(parts.data_notes(ds)))
    _first_screen(page, ds, name, limits, prefix)
    held, _ = _limits_for(ds, limits)
    page.heading(3, "Key figures", f"{prefix}-key")
    figures = results.key_figures(ds)
    page.add(_table([[_esc(c) for c in _module_label(ds, *format_figure(n, v), n)]
                     for n, v in figures.items()], header=("figure", "value")))
    page.heading(3, "Inputs", f"{prefix}-inputs")
    if not isinstance(inputs, Mapping | type(None)):
        raise TypeError(f"write_report: `inputs` must be a mapping (name -> value), got "
                        f"{type(inputs).__name__}")
    if parts.recorded_inputs(ds) is None and inputs is None:
        page.add("<p class='meta'>This results file does not record its inputs (written by an "
                 "older version); the rows below come from its settings.</p>")
    rows = parts.input_rows(ds, inputs)
    page.add(_table(_esc_rows(rows), header=("group", "input", "value", "unit"),
                    numeric_from=2))
    page.heading(3, "Assumptions: what the model leaves out", f"{prefix}-assumptions")
    page.add("<ul>" + "".join(f"<li>{_esc(a)}</li>" for a in parts.assumptions(ds)) + "</ul>")
    hyd = hydraulics_rows(ds)
    if hyd:
        page.heading(3, "Cold plate hydraulics (channels only)", f"{prefix}-hydraulics")
        page.add(_table(_esc_rows(hyd), header=("figure", "value")))
    _figures(page, ds, prefix, held)
    if results.is_module(ds):
        _module_section(page, ds, prefix, held)
    summary = _fidelity_summary(ds)
    if summary:
        page.heading(3, "Fidelity check: the same design point on fuller models",
                     f"{prefix}-fidelity")
        page.add(_fidelity_html(summary))
    _appendix(page, ds, prefix)
    page.add("</section>")


def _module_label(ds, label: str, text: str, name: str) -> tuple[str, str]:
    """A module's key figure says what it spans: the heats add up over the cells, the energy
    is per cell (the string's over the cells), the charge is the series charge."""
    if "cell" not in ds.dims:
        return label, text
    if name in ("heat_generated_J", "heat_rejected_J"):
        label = label.replace(" (kJ)", f", all {ds.sizes['cell']} cells (kJ)")
    elif name == "energy_delivered_Wh":
        label = label.replace(" (Wh)", " per cell (Wh)")
    return label, text


def _figures(page: _Page, ds, prefix: str, limits) -> None:
    results = _results()
    view = results.field_view(ds)
    page.add(f"<h3 id='{page.uid(prefix + '-figures')}'>Figures</h3>")
    page.figure("Voltage, current, temperatures and spread over time", f"{prefix}-traces",
                lambda: plots.traces_figure(ds, limits=limits))
    if "temperature" in view:
        page.figure("Temperature field over the face", f"{prefix}-temperature",
                    lambda: _light(plots.field_figure(view, "temperature",
                                                      max_frames=page.frames)))
    page.figure("Heat generation by source", f"{prefix}-heat",
                lambda: plots.heat_split_figure(ds))
    for variable, title in (("heat_flux", "Heat generation over the face"),
                            ("soc", "State of charge over the face")):
        if variable in view and view.sizes.get("x", 1) * view.sizes.get("y", 1) > 1:
            if _is_uniform(view, variable):
                page.add(f"<p class='meta'>The {_esc(title.lower())} is uniform in this layout "
                         f"({_esc(ds.attrs.get('layout', '?'))}); not drawn.</p>")
            else:
                page.figure(title, f"{prefix}-{variable}",
                            lambda v=variable: _light(plots.field_figure(
                                view, v, max_frames=page.frames)))


def _light(fig):
    """Field pictures in float32 (half the bytes in the page; far finer than the colours)."""
    traces = [*fig.data, *(t for frame in fig.frames or () for t in frame.data)]
    for trace in traces:
        z = getattr(trace, "z", None)
        if z is not None:
            trace.z = None  # plotly skips an assignment of equal values, float32 or not
            trace.z = np.asarray(z, dtype=np.float32)
    return fig


def _is_uniform(ds, name: str) -> bool:
    values = np.asarray(ds[name].values, dtype=float)
    if values.size == 0:
        return True
    flat = values.reshape(-1, values.shape[-2] * values.shape[-1])
    return float(np.nanmax(np.ptp(flat, axis=1))) < 1e-9


def _module_section(page: _Page, ds, prefix: str, limits) -> None:
    results = _results()
    page.heading(3, "Module view: the cells along the coolant path", f"{prefix}-module")
    hot = results.hottest_anywhere(ds)
    cold = results.coldest_anywhere(ds)
    mean = results.per_cell(ds, "temperature_mean")
    cells = ds["cell"].values if "cell" in ds.coords else np.arange(hot.shape[0])
    rows = []
    for k, c in enumerate(cells):
        rows.append([_esc(int(c)), _esc(f"{np.nanmax(hot[k]):.2f}"),
                     _esc(f"{np.nanmax(hot[k] - cold[k]):.2f}"),
                     _esc(f"{np.nanmax(mean[k]):.2f}")])
    page.add(_table(rows, header=("cell (0 = first the coolant meets)",
                                  "peak, hottest point anywhere (°C)", "largest in-cell spread (K)",
                                  "peak of the cell mean (°C)")))
    page.figure("Module along the coolant path", f"{prefix}-module-view",
                lambda: plots.module_figure(ds, limits=limits))


def _appendix(page: _Page, ds, prefix: str) -> None:
    page.heading(3, "Appendix: settings and provenance", f"{prefix}-appendix")
    a = ds.attrs
    prov = [("Run made by", f"Pouch Thermal Explorer {a.get('tool_version', '?')}"),
            ("Report written by", f"Pouch Thermal Explorer {_tool_version()}"),
            ("Cell file", str(a.get("cell_file", "—") or "—")),
            ("Cell file SHA-256", str(a.get("cell_file_sha256", a.get("cell_sha256", "—")))),
            ("Cell data note", str(a.get("data_note", "—") or "—"))]
    tables = parts.parse(a.get("cell_tables", "{}"))
    for key, table in (tables.items() if isinstance(tables, Mapping) else ()):
        if isinstance(table, Mapping):
            prov.append((f"Cell table {key}", f"{table.get('file', '?')} (SHA-256 "
                                              f"{table.get('sha256', '?')})"))
    if a.get("field_storage"):
        prov.append(("Stored fields", str(a["field_storage"])))
    page.add(_table(_esc_rows(prov), numeric_from=99))
    page.add("<details><summary>Every setting of the run (click to open)</summary>",
             _table(_esc_rows(parts.setting_rows(ds)), header=("setting", "value"),
                    numeric_from=99), "</details>")


# ---------------------------------------------------------------------------------------------
# several runs, sizing, sweep


def _comparison_section(page: _Page, named: dict, limits) -> None:
    results = _results()
    names = list(named)
    page.add(f"<section id='{page.uid('comparison')}'>")
    page.heading(2, "Comparison, side by side", "comparison-title")
    header = ["", *names]
    rows = [[_esc("What was run: " + label)] + [
        _esc(dict(parts.what_was_run(ds)).get(label, "—")) for ds in named.values()]
        for label in ("Duty", "Cooling", "Model")]
    verdicts = []
    for ds in named.values():
        held, _ = _limits_for(ds, limits)
        try:
            check = _limits_check(ds, held)
        except ValueError:
            check = None
        if check is None:
            verdicts.append("—")
        else:
            word = ("met" if check["met"] else
                    "NOT met" if any(v == "not met" for v in check["verdicts"].values()) else
                    f"not shown to be met (not evaluated: {', '.join(check['not_evaluated'])})")
            worst = check.get("worst")
            margin = check.get("worst_margin")
            verdicts.append(word + (f" (worst: {worst}, margin {margin:+.3g})"
                                    if worst and margin is not None else ""))
    rows.append([_esc("Verdict against the limits")] + [_esc(v) for v in verdicts])
    figs = {n: results.key_figures(ds) for n, ds in named.items()}
    base = figs[names[0]]
    for key in (k for k in base if k != "status"):
        label, first_text = format_figure(key, base[key])
        row = [_esc(label), _esc(first_text)]
        for n in names[1:]:
            value = figs[n].get(key)
            _, text = format_figure(key, value)
            b = base[key]
            if isinstance(value, int | float) and isinstance(b, int | float) and \
                    np.isfinite(value) and np.isfinite(b):
                _, dtext = format_figure(key, value - b)
                text = f"{text} ({'+' if value - b >= 0 else ''}{dtext})"
            row.append(_esc(text))
        rows.append(row)
    page.add("<p class='meta'>Figures of each run; in brackets the difference to the first run."
             "</p>", _table(rows, header=[header[0]] + [names[0]] + [
                 f"{n} (Δ to first)" for n in names[1:]]))
    held = _limits_for(next(iter(named.values())), limits)[0]
    page.figure("The runs overlaid", "comparison",
                lambda: plots.comparison_figure(named, limits=held))
    page.add("</section>")


def _sizing_section(page: _Page, sizing, limits) -> None:
    page.add(f"<section id='{page.uid('sizing')}'>")
    page.heading(2, "Sizing", "sizing-title")
    table = sizing.table() if hasattr(sizing, "table") else ""
    if table:
        page.add(f"<pre>{_esc(table)}</pre>")
    else:
        message = getattr(sizing, "message", "")
        value = getattr(sizing, "value", None)
        if value is not None:
            state = "meets the limits" if getattr(sizing, "feasible", False) else \
                "DOES NOT meet the limits"
            page.add(f"<p><strong>{_esc(getattr(sizing, 'vary', 'value'))} = "
                     f"{_esc(parts.number(value))} {_esc(getattr(sizing, 'unit', ''))}</strong> "
                     f"({_esc(state)}).</p>")
        if message:
            page.add(f"<p>{_esc(message)}</p>")
    curve = getattr(sizing, "curve", None)
    if curve is not None and "value" in getattr(curve, "dims", {}):
        from explorer.report_figures import sizing_rows

        header, rows = sizing_rows(curve)
        page.add("<div class='wide'>" + _table(_esc_rows(rows), header=header) + "</div>")
    page.figure("Sizing curve: the limits' figures against the design value", "sizing",
                lambda: plots.sizing_figure(sizing, limits=limits))
    page.add("</section>")


def _sweep_section(page: _Page, ds, k: int, limits) -> None:
    from explorer.report_figures import sweep_map_figure, sweep_rows

    prefix = f"sweep{k}"
    page.add(f"<section id='{page.uid(prefix)}'>")
    page.heading(2, f"Sweep: {ds.attrs.get('cell_name', '')}", f"{prefix}-title")
    page.add(_banner(parts.data_notes(ds)))
    page.add("<div class='first-screen'>")
    page.heading(3, "What was swept", f"{prefix}-what")
    axes = parts.parse(ds.attrs.get("axes", "{}"))
    rows = [("Cell", str(ds.attrs.get("cell_name", "?")) + (
        f" (file {ds.attrs['cell_file']})" if ds.attrs.get("cell_file") else ""))]
    duty = parts.parse(ds.attrs.get("duty", "[]"))
    if isinstance(duty, list) and duty:
        rows.append(("Duty", "; then ".join(parts.duty_words(s) if isinstance(s, Mapping)
                                            else str(s) for s in duty)))
    cooling = parts.cooling_words(parts.parse(ds.attrs.get("cooling", "{}")))
    if isinstance(axes, Mapping) and axes:  # the base design's values of the swept parameters
        cooling += (" (base design; swept: "
                    + ", ".join(parts.split_unit(n)[0] for n in axes) + ", see the axes)")
    rows.append(("Cooling", cooling))
    settings = parts.parse(ds.attrs.get("settings", "{}"))
    if isinstance(settings, Mapping) and settings:
        words = (parts._named_value(str(a), b) for a, b in settings.items())
        rows.append(("Model", ", ".join(f"{n} {v}" + (f" {u}" if u else "")
                                        for n, v, u in words)))
    if isinstance(axes, Mapping):
        for name, values in axes.items():
            words, unit = parts.split_unit(name)
            rows.append((f"Axis: {words}", ", ".join(parts.number(v) for v in values)
                         + (f" {unit}" if unit else "")))
    rows.append(("Status", f"{ds.attrs.get('status', '?')}: {ds.attrs.get('status_message', '')}"))
    page.add(_table(_esc_rows(rows), numeric_from=99))
    if limits is not None and "meets_limits" in ds:
        met = int(np.asarray(ds["meets_limits"].values).sum())
        page.add(f"<p>{met} of {ds['meets_limits'].size} cases meet every limit "
                 f"({_esc(', '.join(f'{n} {v:g}' for n, v in limits.as_dict().items()))}).</p>")
    page.add("</div>")
    page.heading(3, "Every case", f"{prefix}-table")
    header, rows = sweep_rows(ds)
    page.add("<div class='wide'>" + _table(_esc_rows(rows), header=header, numeric_from=0)
             + "</div>")
    page.figure("Map of the swept figures against the axes", f"{prefix}-map",
                lambda: sweep_map_figure(ds, limits=limits))
    page.heading(3, "Assumptions: what the model leaves out", f"{prefix}-assumptions")
    page.add("<ul>" + "".join(f"<li>{_esc(a)}</li>" for a in parts.assumptions(ds)) + "</ul>")
    page.heading(3, "Appendix: settings and provenance", f"{prefix}-appendix")
    page.add("<details><summary>Every setting of the sweep (click to open)</summary>",
             _table(_esc_rows(parts.setting_rows(ds)), header=("setting", "value"),
                    numeric_from=99), "</details>")
    page.add("</section>")


def _named_runs(ds_or_list) -> dict:
    if hasattr(ds_or_list, "data_vars"):
        return {str(ds_or_list.attrs.get("cell_name", "run")): ds_or_list}
    if isinstance(ds_or_list, Mapping):
        named = dict(ds_or_list)
    elif isinstance(ds_or_list, Sequence) and not isinstance(ds_or_list, str):
        named = {f"Run {k + 1}: {getattr(ds, 'attrs', {}).get('cell_name', 'run')}": ds
                 for k, ds in enumerate(ds_or_list)}
    else:
        raise TypeError("write_report: expected a results Dataset, a list of them or a mapping "
                        f"name -> Dataset, got {type(ds_or_list).__name__}")
    for name, ds in named.items():
        if not hasattr(ds, "data_vars"):
            raise TypeError(f"write_report: run {name!r} is a {type(ds).__name__}, expected an "
                            "xarray.Dataset")
    return named


def _plotlyjs_tag(plotlyjs: str) -> str:
    import plotly.offline

    if plotlyjs == "inline":  # once, inline, so the file opens with no network
        return f"<script type='text/javascript'>{plotly.offline.get_plotlyjs()}</script>"
    if plotlyjs == "beside":
        return f"<script type='text/javascript' src='{plotlyjs_file_name()}'></script>"
    raise ValueError(f"write_report: `plotlyjs` must be one of {', '.join(PLOTLYJS_MODES)}, "
                     f"got {plotlyjs!r}")


def plotlyjs_file_name() -> str:
    """The file a ``plotlyjs="beside"`` report loads: the plotly.js the installed plotly
    bundles, named by its version."""
    import plotly.offline

    return f"plotly-{plotly.offline.get_plotlyjs_version()}.min.js"


def render_report(ds_or_list, inputs=None, title: str = DEFAULT_TITLE, limits=None, sizing=None,
                  *, sweeps=(), plotlyjs: str = "inline", frames: int = REPORT_FRAMES) -> str:
    """Return the report as one HTML string (see :func:`write_report` for the arguments)."""
    results = _results()
    named = _named_runs(ds_or_list) if ds_or_list is not None else {}
    sweeps = list(sweeps)
    if not named and not sweeps and sizing is None:
        raise ValueError("write_report: no runs given; expected at least one results Dataset")
    if inputs is None or isinstance(inputs, Mapping):
        input_list = [inputs] * len(named)
    else:
        input_list = list(inputs)
        if len(input_list) != len(named):
            raise ValueError(f"write_report: {len(input_list)} input sets given for {len(named)} "
                             "runs; expected one mapping per run (or one for all)")
    caution = str(results.CAUTION)
    now = _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%d %H:%M UTC")
    version = _tool_version()
    every = [*named.values(), *sweeps]
    run_versions = sorted({str(ds.attrs.get("tool_version", "?")) for ds in every}) or [version]
    page = _Page(frames=min(int(frames), plots.MAX_FRAMES))
    page.add(f"<h1 id='{page.uid('title')}'>{_esc(title)}</h1>",
             f"<p class='meta'>Written {now} by Pouch Thermal Explorer {_esc(version)}; results "
             f"made with version {_esc(', '.join(run_versions))}.</p>",
             f"<div class='caution'><strong>Caution.</strong> {_esc(caution)}</div>")
    notes = sorted({n for ds in every for n in parts.data_notes(ds)})
    if len(every) > 1 and notes:
        page.add(_banner(notes))
    contents = []
    if len(named) > 1:
        contents.append(("comparison", "Comparison, side by side"))
    contents += [(f"run{k}", n) for k, n in enumerate(named)]
    if sizing is not None:
        contents.append(("sizing", "Sizing"))
    contents += [(f"sweep{k}", f"Sweep {k + 1}") for k in range(len(sweeps))]
    if len(contents) > 1:
        page.add("<nav><p>Contents: " + ", ".join(
            f"<a href='#{a}'>{_esc(b)}</a>" for a, b in contents) + "</p></nav>")
    if len(named) > 1:
        _comparison_section(page, named, limits)
    for k, ((name, ds), run_inputs) in enumerate(zip(named.items(), input_list, strict=True)):
        _run_section(page, ds, k, name, run_inputs, limits)
    if sizing is not None:
        _sizing_section(page, sizing, limits if limits is not None else
                        getattr(sizing, "limits", None))
    for k, ds in enumerate(sweeps):
        _sweep_section(page, ds, k, limits if limits is not None else results.limits_from(ds))
    page.add(f"<footer><p><strong>Caution.</strong> {_esc(caution)}</p>"
             f"<p>Pouch Thermal Explorer {_esc(version)}.</p></footer>")
    return "\n".join([
        "<!DOCTYPE html>", "<html lang='en'>", "<head>", "<meta charset='utf-8'>",
        f"<title>{_esc(title)}</title>", f"<style>{_CSS}</style>", _plotlyjs_tag(plotlyjs),
        "</head>", "<body>", *page.body, "</body>", "</html>",
    ])


def write_report(ds_or_list, path, inputs=None, title: str = DEFAULT_TITLE, limits=None,
                 sizing=None, *, sweeps=(), plotlyjs: str = "inline") -> Path:
    """Write a self-contained HTML report atomically (temporary file + rename) and return its path.

    Parameters
    ----------
    ds_or_list : xarray.Dataset, a sequence of Datasets, a mapping name -> Dataset, or None
        The run(s) (a single cell or a module). Several runs are compared side by side.
    path : str or Path
        Output file (``.html``); its folder must exist.
    inputs : mapping, or a sequence of mappings (one per run), optional
        The user's own inputs (e.g. the app's), shown beside those the results file records.
    title : str
        Report title.
    limits : explorer.Limits, optional
        The limits to hold the runs against; default: those each results file recorded, else
        the cell's data-sheet maximum.
    sizing : the result of explorer.size_cooling, optional
        Adds the sizing curve.
    sweeps : sequence of sweep Datasets, optional
        Adds a table and a map of each sweep's figures against its axes.
    plotlyjs : {"inline", "beside"}
        "inline" embeds plotly.js (one file, opens with no network); "beside" writes it once
        as ``plotly-<version>.min.js`` next to the report and loads it from there.
    """
    from explorer.fileio import atomic_write_text
    from explorer.validators import OutputError

    path = Path(path)
    if path.is_dir():
        raise OutputError(f"write_report: `path` {str(path)!r} is a folder; expected a file name "
                          "such as report.html")
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise OutputError(f"write_report: the folder {str(folder)!r} of `path` does not exist; "
                          "create it first or choose another path")
    text = render_report(ds_or_list, inputs=inputs, title=title, limits=limits, sizing=sizing,
                         sweeps=sweeps, plotlyjs=plotlyjs)
    if plotlyjs == "beside":
        _write_plotlyjs(folder)
    atomic_write_text(path, text)
    logger.info("report written to %s", path)
    return path


def _write_plotlyjs(folder: Path) -> Path:
    """plotly.js next to the reports, written once (kept when already there with this size)."""
    import plotly.offline

    from explorer.fileio import atomic_write_text

    target = folder / plotlyjs_file_name()
    code = plotly.offline.get_plotlyjs()
    if not (target.is_file() and target.stat().st_size == len(code.encode("utf-8"))):
        atomic_write_text(target, code)
    return target


# ---------------------------------------------------------------------------------------------
# the command line


def cmd_report(paths, out: str | None = None, plotlyjs: str = "inline") -> int:
    """CLI ``python -m explorer report FILE... [--out report.html]``: return an exit code.

    Takes any results file the tool writes: a run, a module run, the run and the curve of a
    sizing (either file brings its companion ``<name>_size.nc`` / ``<name>_size_curve.nc``
    when it lies beside it), and a sweep; several runs are compared side by side. 0 on
    success; 2 when a file cannot be read or is not one of the tool's results files (one line
    on stderr saying which and why), or the report cannot be written.
    """
    from explorer.validators import MESSAGE_CHARS, InputError, OutputError, clip

    def fail(message: str) -> int:
        print(f"error: {clip(' '.join(str(message).split()), MESSAGE_CHARS)}", file=sys.stderr)
        return 2

    paths = [paths] if isinstance(paths, str | Path) else list(paths)
    if not paths:
        return fail("no results file given; expected one or more netCDF files written by "
                    "this tool")
    if plotlyjs not in PLOTLYJS_MODES:
        return fail(f"`--plotlyjs` {plotlyjs!r}; expected one of {', '.join(PLOTLYJS_MODES)}")
    try:
        loaded = _load_all([Path(p) for p in paths])
    except InputError as exc:
        return fail(str(exc))
    runs, curves, sweeps = loaded
    first = Path(paths[0])
    target = Path(out) if out else first.with_suffix(".html")
    sizing = None
    if curves:
        from explorer.report_figures import sizing_from_curve

        curve = next(iter(curves.values()))
        sizing = sizing_from_curve(curve, _results().limits_from(curve))
    names = ", ".join(Path(p).name for p in paths)
    try:  # each file is held against the limits it recorded (a sizing's go with its curve)
        write_report(runs or None, target, title=f"{DEFAULT_TITLE}: {names}", limits=None,
                     sizing=sizing, sweeps=list(sweeps.values()), plotlyjs=plotlyjs)
    except OSError as exc:
        return fail(f"cannot write report {str(target)!r}: {exc.strerror or exc}")
    except OutputError as exc:
        return fail(f"cannot write report {str(target)!r}: {exc}")
    except KeyError as exc:  # a file shaped like a run but short of what every run carries
        return fail(f"{names}: a variable every results file of this tool carries is missing "
                    f"({exc}); was the file written by another program?")
    print(target)
    return 0


def _load_all(paths: list[Path]) -> tuple[dict, dict, dict]:
    """The files named, by kind: (runs, sizing curves, sweeps), each name -> Dataset; a sizing
    file brings its companion beside it. Raises InputError (one line) for a file that is not
    one of the tool's results files."""
    from explorer.validators import InputError

    results = _results()
    runs, curves, sweeps = {}, {}, {}
    seen: set[Path] = set()
    queue = list(paths)
    explicit = set(paths)
    while queue:
        path = queue.pop(0)
        try:
            key = path.resolve()
        except (OSError, ValueError):
            key = path
        if key in seen:
            continue
        seen.add(key)
        try:
            found = path.is_file()
        except (OSError, ValueError):
            found = False
        if not found:
            what = "is a folder" if _is_dir(path) else "not found"
            raise InputError(f"results file {str(path)!r} {what}; expected a netCDF file written "
                             "by `python -m explorer run`, `size`, `sweep` or `demo`")
        ds, kind = results.open_any(path)
        if kind == "run":
            runs[_unique(runs, path.name)] = ds
            companion = _companion(path, "_size.nc", "_size_curve.nc")
        elif kind == "sizing curve":
            curves[_unique(curves, path.name)] = ds
            companion = _companion(path, "_size_curve.nc", "_size.nc")
        elif kind == "sweep":
            sweeps[_unique(sweeps, path.name)] = ds
            companion = None
        elif kind == "sweep cache entry":
            raise InputError(f"{path} is a sweep cache entry (one case of a sweep, kept to resume "
                             "it); report the sweep's results file (<name>_sweep.nc) instead")
        else:
            raise InputError(f"{path} is a netCDF file this tool did not write (no run, "
                             "sizing or sweep variables in it); expected a file written by "
                             "`python -m explorer run`, `size`, `sweep` or `demo`")
        if companion is not None and companion not in explicit and companion.is_file():
            queue.append(companion)
    return runs, curves, sweeps


def _is_dir(path: Path) -> bool:
    try:
        return path.is_dir()
    except (OSError, ValueError):
        return False


def _companion(path: Path, suffix: str, other: str) -> Path | None:
    """The other file of a sizing (``x_size.nc`` <-> ``x_size_curve.nc``) beside ``path``."""
    if not path.name.endswith(suffix):
        return None
    return path.with_name(path.name[: -len(suffix)] + other)


def _unique(named: dict, name: str) -> str:
    candidate, k = name, 1
    while candidate in named:
        k += 1
        candidate = f"{name} ({k})"
    return candidate
