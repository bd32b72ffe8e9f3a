"""``workbench report RESULTS --out report.pdf|report.html``: the layout report of a results file."""
from __future__ import annotations

import sys


def add_parser(subparsers):
    p = subparsers.add_parser("report", help="write the layout report (PDF or HTML) of a results file",
                              description="Turn a results file into a layout report: study settings, arm and "
                                          "cell summaries with fingerprints, every map with its colour bar, "
                                          "the tables (mount ranking, near-singular poses ...), the "
                                          "assumptions and the cautions.")
    p.add_argument("results", metavar="RESULTS", help="results file (.h5) written by 'workbench run'")
    p.add_argument("--out", metavar="FILE", required=True,
                   help="report file: .pdf, or .html (with a FILE_files folder of images next to it)")
    return p


def run(args) -> int:
    from ..report import write_report

    path = write_report(args.results, args.out)
    print(f"wrote {path}", file=sys.stderr)
    return 0
