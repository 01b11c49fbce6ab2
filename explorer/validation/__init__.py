"""The validation report: the tool against outside references, in one document to cite.

``python -m explorer validate [--out DIR] [--quick]`` runs every check of
:data:`explorer.validation.checks.CHECKS` (published equations, handbook tables, reference
libraries, an independent finite-element solver) and, unless ``--quick``, the map of where the
fuller models matter (:mod:`explorer.validation.fuller`); it writes ``validation.html``
(self-contained, opens offline) and ``validation.md`` into ``DIR``.

The test suite runs the same check functions (``tests/test_validation.py``).

Examples
--------
>>> from explorer.validation.checks import plane_wall
>>> plane_wall().passed                                           # doctest: +SKIP
True
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

from explorer.validation.checks import CHECKS, CheckResult, run_check

__all__ = ["CHECKS", "CheckResult", "cmd_validate", "run_checks", "run_fidelity_map"]


def _say(text: str) -> None:
    print(text, file=sys.stderr, flush=True)


def run_checks(progress=_say) -> list[CheckResult]:
    """Run every check in order; an error inside a check is a failed row, not a crash."""
    results = []
    for k, fn in enumerate(CHECKS, 1):
        r = run_check(fn)
        results.append(r)
        if progress is not None:
            progress(f"[{k:2d}/{len(CHECKS)}] {r.status:7s} {r.seconds:5.1f} s  {r.name}: "
                     f"{r.measured}")
    return results


def run_fidelity_map(progress=_say) -> dict:
    """The fuller-model map: ``{"rows", "seconds", "settings", "figure"}``."""
    from explorer.validation.fuller import MapSettings, fuller_model_map, map_figure

    settings = MapSettings()

    def step(row):
        if progress is not None:
            progress(f"        map: {row['cell']} {row['c_rate']:g}C {row['temperature_C']:g} °C")

    rows, seconds = fuller_model_map(settings, progress=step)
    return {"rows": rows, "seconds": seconds, "settings": settings.describe(),
            "figure": map_figure(rows)}


def cmd_validate(out: Path, quick: bool = False) -> int:
    """CLI ``python -m explorer validate``: 0 when every check passes (or is skipped), 1 when
    one fails. Progress goes to stderr, the written paths to stdout."""
    from explorer.validation.report import environment, write_report

    t0 = time.perf_counter()
    results = run_checks()
    fidelity = None
    if not quick:
        try:
            fidelity = run_fidelity_map()
        except Exception as exc:  # a bug: the report says so and the exit code is 1
            fidelity = {"error": f"{type(exc).__name__}: {exc}"}
    total = time.perf_counter() - t0
    html_path, md_path = write_report(Path(out), results, environment(), total, quick, fidelity)
    failed = [r.name for r in results if r.passed is False]
    if fidelity is not None and "error" in fidelity:
        failed.append(f"the fuller-model map ({fidelity['error']})")
    _say(f"validate: {len(results)} checks, {len(failed)} failed"
         + (f" ({'; '.join(failed)})" if failed else "") + f"; {total:.1f} s")
    print(html_path)
    print(md_path)
    return 1 if failed else 0
