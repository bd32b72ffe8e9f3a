"""Start the desktop workbench: ``main(path=None)`` opens the main window (on the demo, or on
``path``) and runs the Qt event loop."""
from __future__ import annotations

import os
import sys

__all__ = ["main", "make_app"]


def make_app(argv=None):
    """The QApplication (created once), with our organisation/app names for QSettings."""
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
