"""Start the desktop workbench: ``main(path=None)`` opens the main window (on the demo, or on
``path``) and runs the Qt event loop."""
from __future__ import annotations

import os
import sys

__all__ = ["main", "make_app"]


def _load_models_first():
    """Import the Qt-free layers the first window needs before PySide6 is imported.

    Once PySide6 is imported, its import hook reads the source text of every module imported after
    it (``inspect.getsource``, to see whether the module uses PySide6's optional features): for
    numpy, numba, scipy and our own model layers that is several hundred files, about 0.4-0.8 s of
    a cold start on this 2-core machine. Modules imported before PySide6 are not read. These are the
    modules the first window loads anyway (the demo arm's kinematics, the document, the cell and its
    paths, whose orientations go through scipy's rotations), so nothing extra is loaded; the results
    file reader (h5py), the report and Dask stay unloaded until used.
    """
    import numpy  # noqa: F401

    from .. import document, measures  # noqa: F401
    from ..kinematics import kernels  # noqa: F401
    from ..studies import cell  # noqa: F401
    from scipy.spatial import transform  # noqa: F401


def make_app(argv=None):
    """The QApplication (created once), with our organisation/app names for QSettings."""
    if "PySide6" not in sys.modules:
        _load_models_first()
    from PySide6 import QtWidgets
    import pyqtgraph as pg

    from .style import apply_plot_style

    pg.setConfigOptions(imageAxisOrder="row-major", antialias=True)
    apply_plot_style()
    app = QtWidgets.QApplication.instance()
    if app is None:
        app = QtWidgets.QApplication(list(argv) if argv else [sys.argv[0]])
    from .main_window import APP_NAME, ORG_NAME
    from .qtfix import guard

    guard()
    app.setOrganizationName(ORG_NAME)
    app.setApplicationName(APP_NAME)
    return app


def main(path=None, exec_loop=True):
    """Open the main window (on ``path`` if given) and run the event loop; returns the exit code."""
    app = make_app()
    from .main_window import MainWindow

    win = MainWindow()
    if path:
        win.open_file(path)   # a bad file: the window stays on the demo and says what was wrong
    win.show()
    if not exec_loop:
        return win
    return app.exec()


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main(sys.argv[1] if len(sys.argv) > 1 else None))
