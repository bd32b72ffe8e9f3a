"""The layout report from the window: hands the results file to :mod:`workbench.report`."""
from __future__ import annotations

from ..errors import WorkbenchError

__all__ = ["write_report"]


def write_report(results_path, out_path):
    """Write the layout report of ``results_path`` to ``out_path`` (.pdf or .html)."""
    from .. import report

    fn = getattr(report, "write_report", None) or getattr(report, "make_report", None)
    if fn is None:
        raise WorkbenchError(f"{out_path}: this build has no layout report yet")
    fn(results_path, out_path)
