"""``workbench export RESULTS --png F --csv F``: maps as PNG and pose lists as CSV."""
from __future__ import annotations

import sys


def add_parser(subparsers):
    p = subparsers.add_parser("export", help="export a results file: a map as PNG, a pose list as CSV",
                              description="Export a results file: a map of one measure as a PNG image (colour "
                                          "bar, axes in degrees or metres) and/or a pose list as CSV (joint "
                                          "values in degrees / mm and the measures).")
    p.add_argument("results", metavar="RESULTS", help="results file (.h5) written by 'workbench run'")
    p.add_argument("--png", metavar="FILE", default=None, help="write a map image")
    p.add_argument("--measure", metavar="NAME", default=None,
                   help="measure to draw (default: inverse_condition); see the list printed on a wrong name")
    p.add_argument("--csv", metavar="FILE", default=None, help="write a pose list")
    p.add_argument("--table", metavar="NAME", default=None,
                   help="which pose list (default: near_singular, else the mount ranking or the worst reached "
                        "points); 'cells' writes every finished cell")
    return p


def run(args) -> int:
    from ..errors import WorkbenchError
    from ..results import check_export_target, export_csv, export_png, read_results

    if not args.png and not args.csv:
        raise WorkbenchError("export: nothing to do; give --png FILE and/or --csv FILE")
    res = read_results(args.results)
    # check every output before writing any, so a bad second one leaves no first one behind
    for opt, path in (("--png", args.png), ("--csv", args.csv)):
        if path:
            check_export_target(path, opt, res.path)
    if args.png:  # the measure is checked before anything is written too
        names = res.measure_names()
        if args.measure is not None and args.measure not in names:
            raise WorkbenchError(f"--measure {args.measure}: not a map of these results; expected one of "
                                 f"{', '.join(names)}")
    if args.csv and args.table is not None and args.table != "cells" and args.table not in res.tables:
        raise WorkbenchError(f"--table {args.table}: no such table in {res.path}; tables are "
                             f"{', '.join(list(res.tables) + ['cells'])}")
    if res.incomplete:
        sys.stderr.write(f"note: {args.results} is an incomplete run ({int(res.finished.sum())} of "
                         f"{res.finished.size} chunks); unfinished cells are blank\n")
    if args.png:
        export_png(res, args.png, measure=args.measure)
        sys.stderr.write(f"wrote {args.png}\n")
    if args.csv:
        n = export_csv(res, args.csv, table=args.table)
        sys.stderr.write(f"wrote {args.csv} ({n} rows)\n")
    return 0
