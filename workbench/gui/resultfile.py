"""The layout report from the window: hands the results file to :mod:`workbench.report`."""
from __future__ import annotations

__all__ = ["write_report"]


def write_report(results_path, out_path, progress=None):
    """Write the layout report of ``results_path`` to ``out_path`` (.pdf or .html);
    ``progress(fraction, text)`` is called between steps (from the calling thread)."""
    from .. import report

    return report.write_report(results_path, out_path, progress=progress)
