"""A self-contained HTML report of one or more runs (opens with no network: plotly.js is embedded).

The report shows, for each run: the inputs (when given), the model settings (the Dataset
attributes), the key figures (:func:`explorer.results.key_figures`), the plots of
:mod:`explorer.plots`, the tool version and the safety caution :data:`explorer.results.CAUTION`.
Several runs add a comparison (overlaid traces and a table of differences to the first run).

Examples
--------
>>> from explorer.report import write_report                        # doctest: +SKIP
>>> write_report(ds, "van_edge_plate.html", inputs={"flow_L_min": 2.0})   # doctest: +SKIP
"""

from __future__ import annotations

import datetime as _dt
import html
import json
import logging
import sys
from collections.abc import Mapping, Sequence
from pathlib import Path

import numpy as np

from explorer import plots

logger = logging.getLogger(__name__)

__all__ = [
    "KEY_FIGURE_LABELS",
    "cmd_report",
    "format_figure",
    "hydraulics_rows",
    "limits_rows",
    "render_report",
    "write_report",
]

DEFAULT_TITLE = "Pouch Thermal Explorer — cooling results"

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

_SETTING_ORDER = (
    "cell_name", "cell_file", "cell_sha256", "electrochemistry", "layout", "grid_nx", "grid_ny",
    "start_soc", "start_temperature_C", "temperature_limit_C", "heat_capacity_J_per_K",
    "collector_resistance_ohm", "duty", "cooling", "hydraulics", "status", "status_message",
    "tool_version",
)

_CSS = """
body{font-family:Helvetica,Arial,sans-serif;margin:0 auto;max-width:1100px;padding:1.5em;color:#1a1a1a}
h1{font-size:1.6em;margin-bottom:.2em}h2{border-bottom:2px solid #0072B2;padding-bottom:.2em;margin-top:2em}
h3{margin-top:1.5em}.meta{color:#555;font-size:.9em}
table{border-collapse:collapse;margin:.6em 0;font-size:.92em}
td,th{border:1px solid #ccc;padding:.25em .6em;text-align:left;vertical-align:top}
th{background:#f1f4f8}td.num{text-align:right;font-variant-numeric:tabular-nums}
pre{margin:0;white-space:pre-wrap;font-size:.85em}
.caution{border-left:6px solid #D55E00;background:#fff4ec;padding:.7em 1em;margin:1em 0}
.status-stopped,.status-failed{color:#B2182B;font-weight:bold}
footer{margin-top:3em;border-top:1px solid #ccc;padding-top:1em;font-size:.9em;color:#333}
"""


def _results():
    """The results module (key figures, caution, loader); a clear error while it is missing."""
    try:
        from explorer import results
    except ImportError as exc:  # pragma: no cover - only while the package is incomplete
        raise ImportError(
            "explorer.report needs explorer.results (key_figures, CAUTION, open_results), which could "
            f"not be imported: {exc}"
        ) from exc
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
        elif fmt == "kJ":
            text = f"{v / 1e3:.1f}"
        else:
            text = fmt.format(v) if fmt != "{}" else f"{v:.4g}"
    else:
        text = str(value)
    return label, text


def _table(rows: Sequence[Sequence[str]], header: Sequence[str] | None = None, numeric_from: int = 1) -> str:
    out = ["<table>"]
    if header:
        out.append("<tr>" + "".join(f"<th>{_esc(h)}</th>" for h in header) + "</tr>")
    for row in rows:
        cells = []
        for k, cell in enumerate(row):
            cls = ' class="num"' if k >= numeric_from else ""
            cells.append(f"<td{cls}>{cell}</td>")
        out.append("<tr>" + "".join(cells) + "</tr>")
    out.append("</table>")
    return "\n".join(out)


def _value_html(value) -> str:
    """Render a setting: JSON strings and mappings pretty-printed, the rest escaped."""
    if isinstance(value, str) and value[:1] in "[{":
        try:
            value = json.loads(value)
        except ValueError:
            return _esc(value)
    if isinstance(value, Mapping | list | tuple):
        return "<pre>" + _esc(json.dumps(value, indent=2, default=str, ensure_ascii=False)) + "</pre>"
    if isinstance(value, float | np.floating):
        return _esc(f"{float(value):.6g}")
    return _esc(value)


def _settings_table(ds) -> str:
    attrs = dict(ds.attrs)
    attrs.pop("caution", None)
    keys = [k for k in _SETTING_ORDER if k in attrs] + sorted(k for k in attrs if k not in _SETTING_ORDER)
    return _table([(_esc(k), _value_html(attrs[k])) for k in keys], header=("setting", "value"),
                  numeric_from=99)


HYDRAULIC_FIGURES = (
    ("coolant_description", "Coolant", "{}"),
    ("flow_L_min", "Flow (L/min)", "{:.3g}"),
    ("regime", "Flow regime", "{}"),
    ("reynolds", "Reynolds number", "{:.0f}"),
    ("h_channel_W_m2K", "Channel heat transfer coefficient (W/(m² K))", "{:.0f}"),
    ("pressure_drop_Pa", "Pressure drop (kPa)", "kPa"),
    ("pump_power_W", "Pump power (W)", "{:.3g}"),
    ("outlet_C", "Coolant outlet (°C)", "{:.2f}"),
)


def hydraulics_rows(ds) -> list[tuple[str, str]]:
    """The cold plate's hydraulic figures from ``ds.attrs["hydraulics"]`` as (label, text) rows,
    followed by its warnings; empty for designs without a plate."""
    raw = ds.attrs.get("hydraulics", "{}")
    try:
        hyd = json.loads(raw) if isinstance(raw, str) else dict(raw or {})
    except (TypeError, ValueError):
        return []
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
    from explorer.limits import LONG_NAMES

    rows = []
    for name, margin in result["margins"].items():
        verdict = result["verdicts"][name]
        figure = result["figures"].get(name)
        if figure is not None:
            shown = f"{figure:.4g}"
        elif name in result.get("bounds", {}):
            shown = f"≥ {result['bounds'][name]:.4g}"
        else:
            shown = "—"
        cell = result.get("cells", {}).get(name)
        if cell is not None:
            shown += f" (cell {cell})"
        text = {"met": "met", "not met": "NOT met"}.get(verdict, "not evaluated")
        if name in result["reasons"]:
            text += f": {result['reasons'][name]}"
        rows.append((f"{name}: {LONG_NAMES.get(name, name)}", f"{getattr(limits, name):.4g}",
                     shown, "—" if margin is None else f"{margin:+.3g}", text))
    return rows


def _limits_check(ds, limits):
    """``limits.check(ds, hydraulics)`` with the hydraulics the run recorded; None without a
    ``check`` method."""
    check = getattr(limits, "check", None)
    if check is None:
        return None
    raw = ds.attrs.get("hydraulics", "{}")
    try:
        hyd = json.loads(raw) if isinstance(raw, str) else dict(raw or {})
    except (TypeError, ValueError):
        hyd = {}
    return check(ds, hyd or None)


def _inputs_table(inputs) -> str:
    if inputs is None:
        return "<p class='meta'>Inputs were not recorded for this run; the model settings below hold " \
               "what the run used.</p>"
    if not isinstance(inputs, Mapping):
        raise TypeError(f"write_report: `inputs` must be a mapping (name -> value), got {type(inputs).__name__}")
    return _table([(_esc(k), _value_html(v)) for k, v in inputs.items()], header=("input", "value"),
                  numeric_from=99)


def _figure_html(fig, div_id: str) -> str:
    return fig.to_html(full_html=False, include_plotlyjs=False, div_id=div_id, auto_play=False,
                       config={"displaylogo": False, "responsive": True})


def _is_uniform(ds, name: str) -> bool:
    values = np.asarray(ds[name].values, dtype=float)
    return values.size == 0 or float(np.nanmax(np.ptp(values.reshape(values.shape[0], -1), axis=1))) < 1e-9


def _run_section(ds, k: int, name: str, inputs, limits, results) -> str:
    figures = results.key_figures(ds)
    status = str(ds.attrs.get("status", "unknown"))
    message = ds.attrs.get("status_message", "")
    parts = [f"<h2 id='run{k}'>{_esc(name)}</h2>",
             f"<p>Status: <span class='status-{_esc(status)}'>{_esc(status)}</span>"
             + (f" — {_esc(message)}" if message else "") + "</p>",
             "<h3>Key figures</h3>",
             _table([format_figure(n, v) for n, v in figures.items()], header=("figure", "value")),
             *_limits_section(ds, limits),
             *_hydraulics_section(ds),
             "<h3>Inputs</h3>", _inputs_table(inputs),
             "<details><summary><h3 style='display:inline'>Model settings</h3> (every attribute "
             "of the run; click to open)</summary>", _settings_table(ds), "</details>",
             "<h3>Plots</h3>"]
    parts.append(_figure_html(plots.traces_figure(ds, limits=limits), f"traces{k}"))
    parts.append(_figure_html(plots.field_figure(ds, "temperature"), f"temperature{k}"))
    parts.append(_figure_html(plots.heat_split_figure(ds), f"heat{k}"))
    for variable in ("heat_flux", "soc"):
        if variable in ds and ds.sizes.get("x", 1) * ds.sizes.get("y", 1) > 1:
            if _is_uniform(ds, variable):
                parts.append(f"<p class='meta'>The {_esc(variable)} field is uniform over the face in this "
                             f"layout ({_esc(ds.attrs.get('layout', '?'))}); not plotted.</p>")
            else:
                parts.append(_figure_html(plots.field_figure(ds, variable), f"{variable}{k}"))
    return "\n".join(parts)


def _limits_section(ds, limits) -> list[str]:
    try:
        rows = limits_rows(ds, limits)
    except ValueError as exc:  # a limit the run cannot be checked against
        return ["<h3>Limits</h3>", f"<p>{_esc(exc)}</p>"]
    if not rows:
        return []
    cells = [[_esc(c) for c in row[:4]] + [f"<span class='status-{'completed' if row[4] == 'met' else 'failed'}'>"
                                            f"{_esc(row[4])}</span>"] for row in rows]
    result = _limits_check(ds, limits)
    overall = ("Every limit met." if result["met"] else
               "Not every limit is shown to be met: a limit not evaluated is not met."
               if all(v != "not met" for v in result["verdicts"].values()) else
               "A limit is NOT met.")
    notes = [f"<p class='caution'>Warning: {_esc(w)}</p>" for w in result.get("warnings", [])]
    return ["<h3>Limits (margin = limit − figure)</h3>",
            _table(cells, header=("limit", "limit value", "figure", "margin", "")),
            f"<p>{_esc(overall)}</p>", *notes]


def _hydraulics_section(ds) -> list[str]:
    rows = hydraulics_rows(ds)
    if not rows:
        return []
    return ["<h3>Cold plate hydraulics</h3>",
            _table([(_esc(a), _esc(b)) for a, b in rows], header=("figure", "value"))]


def _comparison_section(named: dict, limits, results) -> str:
    names = list(named)
    figs = {n: results.key_figures(ds) for n, ds in named.items()}
    keys = [k for k in figs[names[0]] if k != "status"]
    header = ["figure"] + [n if i == 0 else f"{n} (Δ to first)" for i, n in enumerate(names)]
    rows = []
    for key in keys:
        label, first_text = format_figure(key, figs[names[0]][key])
        row = [_esc(label), _esc(first_text)]
        base = figs[names[0]][key]
        for n in names[1:]:
            value = figs[n].get(key)
            _, text = format_figure(key, value)
            if isinstance(value, int | float) and isinstance(base, int | float) and value is not None \
                    and base is not None and np.isfinite(value) and np.isfinite(base):
                _, dtext = format_figure(key, value - base)
                text = f"{text} ({'+' if value - base >= 0 else ''}{dtext})"
            row.append(_esc(text))
        rows.append(row)
    return "\n".join([
        "<h2 id='comparison'>Comparison</h2>",
        _table(rows, header=header),
        _figure_html(plots.comparison_figure(named, limits=limits), "comparison"),
    ])


def _named_runs(ds_or_list) -> dict:
    if hasattr(ds_or_list, "data_vars"):
        return {str(ds_or_list.attrs.get("cell_name", "run")): ds_or_list}
    if isinstance(ds_or_list, Mapping):
        named = dict(ds_or_list)
    elif isinstance(ds_or_list, Sequence) and not isinstance(ds_or_list, str):
        named = {f"Run {k + 1}: {getattr(ds, 'attrs', {}).get('cell_name', 'run')}": ds
                 for k, ds in enumerate(ds_or_list)}
    else:
        raise TypeError("write_report: expected a results Dataset, a list of them or a mapping name -> "
                        f"Dataset, got {type(ds_or_list).__name__}")
    if not named:
        raise ValueError("write_report: no runs given; expected at least one results Dataset")
    for name, ds in named.items():
        if not hasattr(ds, "data_vars"):
            raise TypeError(f"write_report: run {name!r} is a {type(ds).__name__}, expected an xarray.Dataset")
    return named


def render_report(ds_or_list, inputs=None, title: str = DEFAULT_TITLE, limits=None, sizing=None) -> str:
    """Return the report as one HTML string (see :func:`write_report` for the arguments)."""
    import plotly.offline

    results = _results()
    named = _named_runs(ds_or_list)
    if inputs is None or isinstance(inputs, Mapping):
        input_list = [inputs] * len(named)
    else:
        input_list = list(inputs)
        if len(input_list) != len(named):
            raise ValueError(f"write_report: {len(input_list)} input sets given for {len(named)} runs; "
                             "expected one mapping per run (or one for all)")
    caution = str(results.CAUTION)
    now = _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%d %H:%M UTC")
    version = _tool_version()
    run_versions = sorted({str(ds.attrs.get("tool_version", "?")) for ds in named.values()})
    body = [f"<h1>{_esc(title)}</h1>",
            f"<p class='meta'>Written {now} by Pouch Thermal Explorer {_esc(version)}; runs made with "
            f"version {_esc(', '.join(run_versions))}.</p>",
            f"<div class='caution'><strong>Caution.</strong> {_esc(caution)}</div>"]
    if len(named) > 1:
        body.append("<p>Runs: " + ", ".join(f"<a href='#run{k}'>{_esc(n)}</a>"
                                             for k, n in enumerate(named)) + "</p>")
    for k, ((name, ds), run_inputs) in enumerate(zip(named.items(), input_list)):
        body.append(_run_section(ds, k, name, run_inputs, limits, results))
    if len(named) > 1:
        body.append(_comparison_section(named, limits, results))
    if sizing is not None:
        body.append("<h2 id='sizing'>Sizing</h2>")
        table = sizing.table() if hasattr(sizing, "table") else getattr(sizing, "message", "")
        if table:
            body.append(f"<pre>{_esc(table)}</pre>")
        body.append(_figure_html(plots.sizing_figure(sizing, limits=limits), "sizing"))
    body.append(f"<footer><p><strong>Caution.</strong> {_esc(caution)}</p>"
                f"<p>Pouch Thermal Explorer {_esc(version)}.</p></footer>")
    return "\n".join([
        "<!DOCTYPE html>", "<html lang='en'>", "<head>", "<meta charset='utf-8'>",
        f"<title>{_esc(title)}</title>", f"<style>{_CSS}</style>",
        # plotly.js once, inline, so the file opens with no network
        f"<script type='text/javascript'>{plotly.offline.get_plotlyjs()}</script>",
        "</head>", "<body>", *body, "</body>", "</html>",
    ])


def write_report(ds_or_list, path, inputs=None, title: str = DEFAULT_TITLE, limits=None,
                 sizing=None) -> Path:
    """Write a self-contained HTML report atomically (temporary file + rename) and return its path.

    Parameters
    ----------
    ds_or_list : xarray.Dataset, a sequence of Datasets, or a mapping name -> Dataset
        The run(s). Several runs add a comparison section.
    path : str or Path
        Output file (``.html``); its folder must exist.
    inputs : mapping, or a sequence of mappings (one per run), optional
        The user's inputs (e.g. the app's scenario) shown in an "Inputs" table.
    title : str
        Report title.
    limits : explorer.Limits, optional
        Drawn on the plots.
    sizing : the result of explorer.size_cooling, optional
        Adds the sizing curve.
    """
    from explorer.fileio import atomic_write_text
    from explorer.validators import OutputError

    path = Path(path)
    if path.is_dir():
        raise OutputError(f"write_report: `path` {str(path)!r} is a folder; expected a file name such as "
                          "report.html")
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise OutputError(f"write_report: the folder {str(folder)!r} of `path` does not exist; create it "
                          "first or choose another path")
    text = render_report(ds_or_list, inputs=inputs, title=title, limits=limits, sizing=sizing)
    atomic_write_text(path, text)
    logger.info("report written to %s", path)
    return path


def cmd_report(path: str, out: str | None = None) -> int:
    """CLI ``python -m explorer report results.nc [--out report.html]``: return an exit code.

    0 on success; 2 when the input file cannot be read or is not a single-run results file (the
    message says what it is instead: a sweep, a sizing curve, a file this tool did not write), and
    2 when the report cannot be written. The message goes to stderr; the written path to stdout.
    """
    from explorer.validators import MESSAGE_CHARS, InputError, OutputError, clip

    def fail(message: str) -> int:
        print(f"error: {clip(message, MESSAGE_CHARS)}", file=sys.stderr)
        return 2

    results = _results()
    source = Path(path)
    try:
        found = source.is_file()
    except (OSError, ValueError):  # a name the OS refuses (too long, NUL byte)
        found = False
    if not found:
        what = "is a folder" if source.is_dir() else "not found"
        return fail(f"results file {str(source)!r} {what}; expected a netCDF file written by "
                    "`python -m explorer run` or explorer.results.save")
    try:
        ds = results.open_results(str(source))
    except results.ResultsKindError as exc:
        return fail(f"{exc.path} is {exc.kind}; the report command takes a single-run results "
                    "file (written by `python -m explorer run` or `demo`)")
    except InputError as exc:  # names the file already
        return fail(str(exc))
    except (OSError, ValueError, KeyError, ImportError) as exc:
        return fail(f"cannot read results file {str(source)!r}: {exc}")
    target = Path(out) if out else source.with_suffix(".html")
    try:
        write_report(ds, target, title=f"{DEFAULT_TITLE}: {source.name}")
    except OSError as exc:
        return fail(f"cannot write report {str(target)!r}: {exc.strerror or exc}")
    except OutputError as exc:  # any other failure is a bug of the report: the CLI says so
        return fail(f"cannot write report {str(target)!r}: {exc}")
    finally:
        close = getattr(ds, "close", None)
        if close is not None:
            close()
    print(target)
    return 0
