"""The command line: ``python -m explorer <command>``.

Commands
--------
demo    run the main job on a bundled demo cell and write results + report
cells   list the bundled demo cells
show    print the summary of a cell file
run     simulate a scenario file
size    size the cooling of a scenario file against its limits
sweep   sweep the design parameters of a scenario file
report  write the HTML report of saved results files (runs, module, sizing, sweep)
validate run the outside checks and write the validation report
new-cell build a cell file from data-sheet values and a chemistry template
calibrate fit a few cell parameters to measured test curves

Errors
------
Every failure prints one clear message on stderr (no traceback; ``-v`` adds
the traceback) and exits non-zero:

=====  ==============================================================================
0      done (and, for ``run``/``size``, every limit met)
1      done but a limit is not met, a case failed or the run did not complete; or an
       internal error (a bug: "internal error: ... (run with -v for the traceback)")
2      bad input, or a file that cannot be read or written (the message names it)
130    interrupted (Ctrl-C)
141    the reader of the output went away (``... | head``): quiet, like other tools
=====  ==============================================================================
"""

from __future__ import annotations

import argparse
import logging
import os
import sys
import traceback
from pathlib import Path

from explorer.validators import MESSAGE_CHARS, InputError, OutputError, clip

DEMO_CELL = "van_nmc_66ah"

EXIT_INPUT = 2
EXIT_INTERNAL = 1
EXIT_INTERRUPTED = 130  # 128 + SIGINT, what a shell reports for Ctrl-C
EXIT_BROKEN_PIPE = 141  # 128 + SIGPIPE, what a shell reports for `yes | head`


def _parser() -> argparse.ArgumentParser:
    p = _Parser(
        prog="python -m explorer",
        description="Pouch Thermal Explorer: heat, temperature and SOC fields of large pouch "
        "cells, and cold-plate sizing.")
    p.add_argument("-v", "--verbose", action="store_true",
                   help="log progress details; on an error, print the traceback too")
    # -v also after the command (`show x -v`); SUPPRESS keeps a -v given before it
    verbose = argparse.ArgumentParser(add_help=False)
    verbose.add_argument("-v", "--verbose", action="store_true", default=argparse.SUPPRESS,
                         help="log progress details; on an error, print the traceback too")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_subparser(verbose))
    d = sub.add_parser("demo", help="run the main job on a bundled demo cell (2C discharge, "
                       "edge plate) and write results (netCDF) and an HTML report")
    d.add_argument("--out", default="explorer-demo", help="output folder (default: %(default)s)")
    d.add_argument("--cell", default=DEMO_CELL, help="demo cell name or cell file "
                   "(default: %(default)s)")
    d.add_argument("--c-rate", type=float, default=2.0, help="discharge C-rate (default: 2)")
    sub.add_parser("cells", help="list the bundled demo cells")
    s = sub.add_parser("show", help="print the summary of a cell file or demo cell")
    s.add_argument("cell")
    for name, text in (("run", "simulate a scenario file"),
                       ("size", "size the cooling of a scenario file against its limits"),
                       ("sweep", "sweep the design parameters of a scenario file")):
        c = sub.add_parser(name, help=text)
        c.add_argument("scenario", help="scenario file (TOML)")
        c.add_argument("--out", default=None, help="output folder (default: beside the scenario)")
        if name == "sweep":
            c.add_argument("--scheduler", default=None,
                           help="address of a running Dask scheduler (tcp://host:8786), or "
                           "'serial' to run the cases one after another in this process "
                           "(default: a local cluster)")
        if name == "size":
            c.add_argument("--no-fidelity", action="store_true", help="skip the fidelity check "
                           "of the answer (the same design on the DFN, the fuller layout and a "
                           "finer grid; on by default)")
    r = sub.add_parser("report", help="write the HTML report of saved results files")
    r.add_argument("results", nargs="+", help="results file(s) (netCDF) written by this tool; "
                   "several runs are compared side by side")
    r.add_argument("--out", default=None, help="report file (default: beside the results)")
    r.add_argument("--plotlyjs", choices=("inline", "beside"), default="inline",
                   help="inline: plotly.js inside the report (opens with no network); beside: "
                   "load it from plotly-<version>.min.js written next to the report (many "
                   "reports shared together carry it once)")
    v = sub.add_parser("validate", help="run the outside checks (published solutions, handbook "
                       "tables) and write the validation report (HTML and Markdown)")
    v.add_argument("--out", default="explorer-validation",
                   help="output folder (default: %(default)s)")
    v.add_argument("--quick", action="store_true", help="skip the slowest checks and maps")
    n = sub.add_parser("new-cell", help="build a cell file from data-sheet values and a "
                       "chemistry template (prompts for the values when no file is given)")
    n.add_argument("datasheet", nargs="?", default=None,
                   help="data-sheet values (TOML); omit to be asked for each value")
    n.add_argument("--out", default=None, help="cell file to write (default: beside the "
                   "data sheet, or ./<name>.toml)")
    k = sub.add_parser("calibrate", help="fit a few cell parameters to measured test curves "
                       "(CSV: time_s, current_A, voltage_V, optional temperature_C)")
    k.add_argument("cell", help="cell file or demo cell name")
    k.add_argument("tests", nargs="+", help="test curves (CSV), one file per test")
    k.add_argument("--fit", default=None, help="comma-separated parameters to fit "
                   "(default: a resistance, a diffusivity and a rate-constant scale)")
    k.add_argument("--out", default=None, help="calibrated cell file to write "
                   "(default: <cell>_calibrated.toml in the current folder)")
    return p


class _Parser(argparse.ArgumentParser):
    """argparse with its usage errors cut short (it echoes the bad argument whole)."""

    def error(self, message):
        super().error(clip(message, MESSAGE_CHARS))


def _subparser(parent):
    """A parser class whose instances all take ``parent``'s options (here: ``-v``)."""

    class Sub(_Parser):
        def __init__(self, *args, parents=(), **kwargs):
            super().__init__(*args, parents=[*parents, parent], **kwargs)

    return Sub


def main(argv=None) -> int:
    parser = _parser()
    args = parser.parse_args(argv)
    logging.basicConfig(level=logging.INFO if args.verbose else logging.WARNING,
                        format="%(levelname)s %(name)s: %(message)s")
    if args.command is None:
        parser.print_help()
        return 0
    return run_guarded(lambda: _dispatch(args), verbose=args.verbose)


def run_guarded(job, verbose: bool = False) -> int:
    """Run ``job()`` (returns an exit code) and turn every failure into a message and a code.

    One place decides what the user sees when something goes wrong: the
    project's own errors and OS errors as a clear one-message "error: ...",
    anything else as "internal error: ..."; the traceback only with ``verbose``.
    """
    try:
        code = job()
        sys.stdout.flush()  # a closed pipe shows up here, not at interpreter exit
        return code
    except BrokenPipeError:
        _silence_stdout()
        return EXIT_BROKEN_PIPE
    except KeyboardInterrupt:
        return _fail("interrupted", verbose, EXIT_INTERRUPTED)
    except InputError as exc:  # OutputError (a file that cannot be written) included
        return _fail(str(exc), verbose, EXIT_INPUT)
    except OSError as exc:
        return _fail(os_error_text(exc), verbose, EXIT_INPUT)
    except UnicodeDecodeError as exc:  # a reader that did not name its file; say what is wrong
        return _fail(f"a file is not UTF-8 text ({exc}); save it as UTF-8", verbose, EXIT_INPUT)
    except Exception as exc:  # the last resort: a bug, but never a bare traceback
        hint = "" if verbose else " (run with -v for the traceback)"
        text = " ".join(f"{type(exc).__name__}: {exc}".split())  # one line
        return _fail(f"internal error: {clip(text, 300)}{hint}", verbose, EXIT_INTERNAL,
                     prefix="")


def _fail(message: str, verbose: bool, code: int, prefix: str = "error: ") -> int:
    """Print ``message`` (capped) on stderr, the traceback first when ``verbose``."""
    if verbose:
        traceback.print_exc(file=sys.stderr)
    print(f"{prefix}{clip(message, MESSAGE_CHARS)}", file=sys.stderr)
    return code


def os_error_text(exc: OSError) -> str:
    """``"<path>: <reason>"`` for an OS error (the path the OS names, then why)."""
    reason = exc.strerror or str(exc) or type(exc).__name__
    paths = [str(p) for p in (exc.filename, exc.filename2) if p is not None]
    return f"{' -> '.join(paths)}: {reason}" if paths else reason


def _silence_stdout() -> None:
    """The reader went away (``| head``): send what is left to devnull so the interpreter's
    final flush does not complain (the recipe of the Python docs, signal module)."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError, AttributeError):  # stdout is not a real file (tests)
        pass


_OUT_IS_FILE = {"report": "report.html", "new-cell": "my_cell.toml",
                "calibrate": "my_cell_calibrated.toml"}


def _check_out(args) -> None:
    """``--out`` names a folder (demo, run, size, sweep) or a report file (report)."""
    out = getattr(args, "out", None)
    if out is None:
        return
    path = Path(out)
    if args.command in _OUT_IS_FILE:
        if path.is_dir():
            raise InputError(f"`--out` {clip(out)}: is a folder; expected a file name "
                             f"such as {_OUT_IS_FILE[args.command]}")
    elif path.exists() and not path.is_dir():
        raise InputError(f"`--out` {clip(out)}: is an existing file; expected a folder (it is "
                         "created when missing)")
    else:  # say it before a long run rather than after it
        folder = next((p for p in (path, *path.parents) if p.is_dir()), Path("."))
        if not os.access(folder, os.W_OK | os.X_OK):
            raise OutputError(f"`--out` {clip(out)}: cannot write into the folder "
                              f"{clip(str(folder))} (permission denied)")


def _dispatch(args) -> int:
    _check_out(args)
    if args.command == "demo":
        from explorer.demo import run_demo

        return run_demo(args.cell, Path(args.out), c_rate=args.c_rate)
    if args.command == "cells":
        from explorer.cell import list_demo_cells

        for name, path in list_demo_cells().items():
            print(f"{name:24s} {path}")
        return 0
    if args.command == "show":
        from explorer.cell import load_cell
        from explorer.demo import describe_cell

        print(describe_cell(load_cell(args.cell)))
        return 0
    if args.command in ("run", "size", "sweep"):
        from explorer import scenario

        if args.command == "run":
            return scenario.cmd_run(args.scenario, args.out)
        if args.command == "size":
            return scenario.cmd_size(args.scenario, args.out, fidelity=not args.no_fidelity)
        return scenario.cmd_sweep(args.scenario, args.out, args.scheduler)
    if args.command == "report":
        from explorer.report import cmd_report

        return cmd_report(args.results, args.out, plotlyjs=args.plotlyjs)
    if args.command == "validate":
        from explorer.validation import cmd_validate

        return cmd_validate(Path(args.out), quick=args.quick)
    if args.command == "new-cell":
        from explorer.cell.datasheet import cmd_new_cell

        return cmd_new_cell(args.datasheet, args.out)
    if args.command == "calibrate":
        from explorer.calibration import cmd_calibrate

        return cmd_calibrate(args.cell, args.tests, fit=args.fit, out=args.out)
    raise AssertionError(args.command)
