"""``workbench report RESULTS [RESULTS ...] --out report.pdf|report.html [--paper a4|letter]``: the
layout report of a results file, or a comparison of several of one study kind."""
from __future__ import annotations

import sys


def add_parser(subparsers):
    p = subparsers.add_parser("report", help="write the layout report (PDF or HTML) of results files",
                              description="Turn a results file into a layout report: page 1 answers the study's "
                                          "question (recommendation, drawing of the cell, verdicts, the largest "
                                          "risks, the caution), then the evidence (per-point table, maps, charts, "
                                          "tables) and appendices (settings, fingerprints, file texts). Several "
                                          "results files of one study kind make a comparison side by side.")
    p.add_argument("results", metavar="RESULTS", nargs="+",
                   help="results file (.h5) written by 'workbench run'; several of one kind: a comparison")
    p.add_argument("--out", metavar="FILE", required=True,
                   help="report file: .pdf, or .html (with a FILE_files folder of images next to it); a mount "
                        "search also writes FILE_points.csv (the per-work-point table) beside it")
    p.add_argument("--paper", choices=("a4", "letter"), default="a4",
                   help="page size of the PDF, portrait (default a4)")
    return p


def run(args) -> int:
    from ..report import write_report

    res = args.results if len(args.results) > 1 else args.results[0]
    path = write_report(res, args.out, paper=args.paper)
    print(f"wrote {path}", file=sys.stderr)
    return 0
