"""``workbench bench [--json] [--quick] [--only NAME ...]``: exit status 1 when any bar fails."""
from __future__ import annotations

import json
import sys


def add_parser(sub):
    p = sub.add_parser("bench", help="throughput of this machine against plain references, as ratios",
                       description="Run the engine and plain references on the same inputs in one process "
                                   "and print rates, ratios and PASS/FAIL against the project's bars.")
    p.add_argument("--json", action="store_true", help="print machine-readable JSON")
    p.add_argument("--quick", action="store_true", help="smaller sizes (seconds, not minutes)")
    p.add_argument("--only", nargs="+", metavar="NAME", help="run only these entries")
    return p


def run(args) -> int:
    from ..bench import ENTRIES, format_results, run_benches
    from ..errors import WorkbenchError

    names = args.only
    known = {n for n, _ in ENTRIES}
    if names:
        bad = [n for n in names if n not in known]
        if bad:
            raise WorkbenchError(f"--only: unknown bench entry {bad[0]!r}; entries are {', '.join(sorted(known))}")
    results = run_benches(names, quick=args.quick, log=lambda s: print(s, file=sys.stderr))
    if args.json:
        print(json.dumps(results, indent=2, default=_jsonable))
    else:
        print(format_results(results))
    failed = failed_bars(results)
    if failed:  # a failed bar is a failed run: scripts and CI see it in the exit status
        print(f"bench: {len(failed)} bar(s) failed: {'; '.join(failed)}", file=sys.stderr)
        return 1
    return 0


def failed_bars(results) -> list[str]:
    """``"entry: bar"`` for every bar that did not pass, in the order printed."""
    return [f"{r.get('name', '?')}: {k}" for r in results if "skipped" not in r
            for k, (_v, _t, ok) in r.get("bars", {}).items() if not ok]


def _jsonable(o):
    import numpy as np

    if isinstance(o, np.generic):
        return o.item()
    if isinstance(o, np.ndarray):
        return o.tolist()
    return str(o)
