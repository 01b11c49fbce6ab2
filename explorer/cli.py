"""The command line: ``python -m explorer <command>``.

Commands
--------
demo    run the main job on a bundled demo cell and write results + report
cells   list the bundled demo cells
show    print the summary of a cell file
run     simulate a scenario file
size    size the cooling of a scenario file against its limits
sweep   sweep the design parameters of a scenario file
report  write the HTML report of a saved results file
"""

from __future__ import annotations

import argparse
import logging
import sys
from pathlib import Path

from explorer.validators import InputError

DEMO_CELL = "van_nmc_66ah"


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="python -m explorer",
        description="Pouch Thermal Explorer: heat, temperature and SOC fields of large pouch "
        "cells, and cold-plate sizing.")
    p.add_argument("-v", "--verbose", action="store_true", help="log progress details")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")
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
                           help="address of a running Dask scheduler (default: a local cluster)")
    r = sub.add_parser("report", help="write the HTML report of a saved results file")
    r.add_argument("results", help="results file (netCDF) written by this tool")
    r.add_argument("--out", default=None, help="report file (default: beside the results)")
    return p


def main(argv=None) -> int:
    parser = _parser()
    args = parser.parse_args(argv)
    logging.basicConfig(level=logging.INFO if args.verbose else logging.WARNING,
                        format="%(levelname)s %(name)s: %(message)s")
    if args.command is None:
        parser.print_help()
        return 0
    try:
        return _dispatch(args)
    except InputError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2


def _dispatch(args) -> int:
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
            return scenario.cmd_size(args.scenario, args.out)
        return scenario.cmd_sweep(args.scenario, args.out, args.scheduler)
    if args.command == "report":
        from explorer.report import cmd_report

        return cmd_report(args.results, args.out)
    raise AssertionError(args.command)
