"""Write the validation report: one self-contained HTML file and a Markdown summary.

The HTML carries plotly.js once, inline, so it opens with no network. Both files are written
atomically (:mod:`explorer.fileio`).
"""

from __future__ import annotations

import html
import platform
import subprocess
from pathlib import Path

from explorer.validation.fuller import MARK_PEAK_K, MARK_VOLTAGE_RMS_MV

__all__ = ["environment", "render_html", "render_markdown", "write_report"]

TITLE = "Pouch Thermal Explorer — validation report"
HTML_NAME = "validation.html"
MD_NAME = "validation.md"
#: the libraries whose versions the report records (distribution names)
LIBRARIES = ("numpy", "scipy", "xarray", "netCDF4", "pint", "plotly", "CoolProp", "ht", "fluids",
             "scikit-fem", "dask")

_CSS = """
body{font-family:Helvetica,Arial,sans-serif;margin:0 auto;max-width:1150px;padding:1.5em;color:#1a1a1a}
h1{font-size:1.6em;margin-bottom:.2em}h2{border-bottom:2px solid #0072B2;padding-bottom:.2em;margin-top:2em}
h3{margin-top:1.6em}.meta{color:#555;font-size:.9em}
table{border-collapse:collapse;margin:.6em 0;font-size:.9em}
td,th{border:1px solid #ccc;padding:.25em .5em;text-align:left;vertical-align:top}
th{background:#f1f4f8}td.num{text-align:right;font-variant-numeric:tabular-nums}
.pass{color:#1a7f37;font-weight:bold}.FAIL{color:#B2182B;font-weight:bold}.skipped{color:#8a6d00}
.caution{border-left:6px solid #D55E00;background:#fff4ec;padding:.7em 1em;margin:1em 0}
footer{margin-top:3em;border-top:1px solid #ccc;padding-top:1em;font-size:.9em;color:#333}
"""


def environment() -> dict:
    """Tool version (and git commit when run from a checkout), date, Python, libraries."""
    import datetime as dt
    from importlib.metadata import PackageNotFoundError, version

    from explorer import __version__

    libs = {}
    for name in LIBRARIES:
        try:
            libs[name] = version(name)
        except PackageNotFoundError:
            libs[name] = "not installed"
    tool = str(__version__)
    commit = _git_commit()
    if commit:
        tool += f" (git {commit})"
    return {"tool": tool, "date": dt.datetime.now(dt.UTC).strftime("%Y-%m-%d %H:%M UTC"),
            "python": f"{platform.python_version()} ({platform.python_implementation()})",
            "platform": platform.platform(), "machine": f"{platform.machine()}, "
            f"{_cpus()} logical CPUs", "libraries": libs}


def _cpus() -> str:
    import os

    return str(os.cpu_count() or "?")


def _git_commit() -> str:
    """The checkout's commit, marked when tracked files differ from it; "" outside git."""
    here = Path(__file__).resolve().parent
    try:
        head = subprocess.run(["git", "-C", str(here), "rev-parse", "--short", "HEAD"],
                              capture_output=True, text=True, timeout=5, check=True).stdout.strip()
        dirty = subprocess.run(["git", "-C", str(here), "status", "--porcelain",
                                "--untracked-files=no"], capture_output=True, text=True,
                               timeout=5, check=True).stdout.strip()
    except (OSError, subprocess.SubprocessError):
        return ""
    return f"{head}{', with local changes' if dirty else ''}" if head else ""


def _esc(value) -> str:
    return html.escape(str(value), quote=True)


def _summary(results) -> str:
    n = {s: sum(r.status == s for r in results) for s in ("pass", "FAIL", "skipped")}
    text = f"{len(results)} checks: {n['pass']} passed, {n['FAIL']} failed"
    return text + (f", {n['skipped']} skipped" if n["skipped"] else "")


def _env_rows(env: dict, total_s: float, quick: bool) -> list[tuple[str, str]]:
    rows = [("Tool", f"Pouch Thermal Explorer {env['tool']}"), ("Date", env["date"]),
            ("Mode", "quick (the fuller-model map skipped)" if quick else "full"),
            ("Total run time", f"{total_s:.1f} s"), ("Python", env["python"]),
            ("Platform", env["platform"]), ("Machine", env["machine"])]
    rows += [(name, v) for name, v in env["libraries"].items()]
    return rows


def render_html(results, env: dict, total_s: float, quick: bool, fidelity=None) -> str:
    """The report as one HTML string. ``fidelity``: None (skipped) or a dict with ``rows``,
    ``seconds``, ``settings`` (text) and ``figure``."""
    import plotly.offline

    from explorer.results import CAUTION

    body = [f"<h1>{_esc(TITLE)}</h1>",
            f"<p class='meta'>Written {_esc(env['date'])} by Pouch Thermal Explorer "
            f"{_esc(env['tool'])}. {_esc(_summary(results))}; total {total_s:.1f} s.</p>",
            "<p>Each check compares the tool with something outside it: a published equation, a "
            "handbook table, a reference library or an independent solver. The source is named "
            "in each row (\"from memory\": values recalled rather than copied from the printed "
            "page; \"common practice\": a trade figure with no single source). Tolerances are "
            "stated before measuring. The same check functions run in the test suite "
            "(<code>tests/test_validation.py</code>).</p>",
            f"<div class='caution'><strong>Caution.</strong> {_esc(CAUTION)}</div>",
            "<h2>Checks</h2>", _checks_table(results)]
    for k, r in enumerate(results, 1):
        body.append(f"<h3 id='check{k}'>{k}. {_esc(r.name)} — "
                    f"<span class='{r.status}'>{r.status}</span></h3>")
        parts = [f"<strong>Source:</strong> {_esc(r.source)}",
                 f"<strong>Tolerance:</strong> {_esc(r.tolerance)}",
                 f"<strong>Measured:</strong> {_esc(r.measured)} ({r.seconds:.2f} s)"]
        if r.detail:
            parts.append(f"<strong>Case:</strong> {_esc(r.detail)}")
        body.append("<p>" + "<br>".join(parts) + "</p>")
        if r.figure is not None:
            body.append(r.figure.to_html(full_html=False, include_plotlyjs=False,
                                         div_id=f"figure{k}"))
    body.append("<h2 id='fuller'>Where the fuller models matter</h2>")
    body.append(_fidelity_html(fidelity))
    body.append("<h2>Environment</h2>")
    body.append(_table(["", ""], [list(r) for r in _env_rows(env, total_s, quick)], header=False))
    body.append(f"<footer><p><strong>Caution.</strong> {_esc(CAUTION)}</p>"
                f"<p>Pouch Thermal Explorer {_esc(env['tool'])}.</p></footer>")
    return "\n".join([
        "<!DOCTYPE html>", "<html lang='en'>", "<head>", "<meta charset='utf-8'>",
        f"<title>{_esc(TITLE)}</title>", f"<style>{_CSS}</style>",
        # plotly.js once, inline: the file opens with no network
        f"<script type='text/javascript'>{plotly.offline.get_plotlyjs()}</script>",
        "</head>", "<body>", *body, "</body>", "</html>"])


def _checks_table(results) -> str:
    head = ["#", "check", "source", "tolerance", "measured", "result", "time (s)"]
    rows = []
    for k, r in enumerate(results, 1):
        rows.append([str(k), f"<a href='#check{k}'>{_esc(r.name)}</a>", _esc(r.source),
                     _esc(r.tolerance), _esc(r.measured),
                     f"<span class='{r.status}'>{r.status}</span>", f"{r.seconds:.2f}"])
    return _table(head, rows, escaped=True, numeric=(0, 6))


def _table(head, rows, header: bool = True, escaped: bool = False, numeric=()) -> str:
    out = ["<table>"]
    if header:
        out.append("<tr>" + "".join(f"<th>{_esc(h)}</th>" for h in head) + "</tr>")
    for row in rows:
        cells = []
        for i, v in enumerate(row):
            cls = " class='num'" if i in numeric else ""
            cells.append(f"<td{cls}>{v if escaped else _esc(v)}</td>")
        out.append("<tr>" + "".join(cells) + "</tr>")
    out.append("</table>")
    return "\n".join(out)


_FIDELITY_INTRO = (
    "The tool's own models against each other (no outside source): for each demo cell, C-rate "
    "and start temperature, the same discharge and cooling run with the SPMe on the averaged "
    "layout (as a user runs it by default), then, through the fidelity check, with the DFN "
    "through the cell, with the distributed layout over the face and on a grid twice as fine. "
    "Where the differences are small against the margins of a design, the cheap models are "
    "enough; where they are not, run the fuller ones (explorer.check_fidelity on the design "
    "point says so for one design).")


_MARKED = (f"In bold: an SPMe-DFN voltage RMS beyond {MARK_VOLTAGE_RMS_MV:g} mV or a peak-"
           f"temperature difference beyond {MARK_PEAK_K:g} K.")


def _fidelity_html(fidelity) -> str:
    if fidelity is None:
        return "<p>Skipped in the quick mode (<code>--quick</code>).</p>"
    if "error" in fidelity:
        return f"<p class='FAIL'>The map did not finish: {_esc(fidelity['error'])}</p>"
    from explorer.validation.fuller import map_messages, map_table_rows

    head, rows = map_table_rows(fidelity["rows"], mark=lambda t: f"<strong>{t}</strong>")
    rows = [[v if i in (3, 6, 7, 8) else _esc(v) for i, v in enumerate(row)] for row in rows]
    notes = [f"<li>{_esc(m)}</li>" for m in map_messages(fidelity["rows"])]
    return "\n".join([
        f"<p>{_esc(_FIDELITY_INTRO)}</p>",
        f"<p class='meta'>Settings: {_esc(fidelity['settings'])}. Run time "
        f"{fidelity['seconds']:.1f} s.</p>",
        fidelity["figure"].to_html(full_html=False, include_plotlyjs=False, div_id="fuller_map"),
        f"<p>{_esc(_MARKED)}</p>",
        _table(head, rows, escaped=True, numeric=(1, 2, 3, 4, 5, 6, 7, 8)),
        *(["<p>Runs that did not complete:</p><ul>", *notes, "</ul>"] if notes else [])])


def _md_cell(value) -> str:
    return str(value).replace("|", "\\|").replace("\n", " ")


def _md_table(head, rows) -> list[str]:
    lines = ["| " + " | ".join(_md_cell(h) for h in head) + " |",
             "|" + "|".join("---" for _ in head) + "|"]
    lines += ["| " + " | ".join(_md_cell(v) for v in row) + " |" for row in rows]
    return lines


def render_markdown(results, env: dict, total_s: float, quick: bool, fidelity=None) -> str:
    """The Markdown summary: the checks table, the fuller-model map, the environment."""
    from explorer.results import CAUTION

    lines = [f"# {TITLE}", "",
             f"Written {env['date']} by Pouch Thermal Explorer {env['tool']}. "
             f"{_summary(results)}; total {total_s:.1f} s. The HTML report ({HTML_NAME}) has the "
             "plots.", "", f"> **Caution.** {CAUTION}", "", "## Checks", ""]
    lines += _md_table(["#", "check", "source", "tolerance", "measured", "result", "time (s)"],
                       [[k, r.name, r.source, r.tolerance, r.measured, r.status,
                         f"{r.seconds:.2f}"] for k, r in enumerate(results, 1)])
    lines += ["", "## Where the fuller models matter", ""]
    if fidelity is None:
        lines.append("Skipped in the quick mode (`--quick`).")
    elif "error" in fidelity:
        lines.append(f"**The map did not finish:** {fidelity['error']}")
    else:
        from explorer.validation.fuller import map_messages, map_table_rows

        lines += [_FIDELITY_INTRO, "", f"Settings: {fidelity['settings']}. Run time "
                  f"{fidelity['seconds']:.1f} s.", ""]
        lines += [_MARKED, ""]
        lines += _md_table(*map_table_rows(fidelity["rows"], mark=lambda t: f"**{t}**"))
        messages = map_messages(fidelity["rows"])
        if messages:
            lines += ["", "Runs that did not complete:", ""] + [f"- {m}" for m in messages]
    lines += ["", "## Environment", ""]
    lines += _md_table(["item", "version / value"], _env_rows(env, total_s, quick))
    return "\n".join(lines) + "\n"


def write_report(out: Path, results, env: dict, total_s: float, quick: bool,
                 fidelity=None) -> tuple[Path, Path]:
    """Write ``validation.html`` and ``validation.md`` into the folder ``out`` (created when
    missing); return their paths."""
    from explorer.fileio import atomic_write_text

    out = Path(out)
    page = render_html(results, env, total_s, quick, fidelity)
    summary = render_markdown(results, env, total_s, quick, fidelity)
    return (atomic_write_text(out / HTML_NAME, page, parents=True),
            atomic_write_text(out / MD_NAME, summary, parents=True))
