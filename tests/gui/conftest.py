"""GUI tests run offscreen (no display, no OpenGL: the 2D scene is what they exercise)."""
import gc
import os

os.environ["QT_QPA_PLATFORM"] = "offscreen"

import pytest  # noqa: E402


@pytest.fixture(autouse=True, scope="session")
def _refcount_guard(qapp):
    # a PySide6 build that leaks references to None/True on Python 3.11 (see workbench.gui.qtfix)
    from workbench.gui.qtfix import guard

    guard()
    yield


@pytest.fixture
def qsettings(tmp_path):
    from PySide6 import QtCore

    s = QtCore.QSettings(str(tmp_path / "settings.ini"), QtCore.QSettings.IniFormat)
    s.setValue("project_dir", str(tmp_path / "runs"))     # runs kept here, not in the user's folders
    return s


def dispose(w):
    """Close a window and free it (and its Qt children) now, while the interpreter is whole."""
    from PySide6 import QtCore, QtWidgets

    w.stop_run()
    w.close()
    w.deleteLater()
    QtCore.QCoreApplication.sendPostedEvents(None, QtCore.QEvent.DeferredDelete)
    QtWidgets.QApplication.processEvents()
    gc.collect()


@pytest.fixture
def window(qtbot, qsettings):
    from workbench.gui.app import make_app
    from workbench.gui.main_window import MainWindow

    make_app()
    w = MainWindow(settings=qsettings)
    w.resize(1400, 900)
    w.show()
    yield w
    dispose(w)
