"""GUI tests run offscreen (no display, no OpenGL: the 2D scene is what they exercise)."""
import os

os.environ["QT_QPA_PLATFORM"] = "offscreen"

import pytest  # noqa: E402


@pytest.fixture
def qsettings(tmp_path):
    from PySide6 import QtCore

    return QtCore.QSettings(str(tmp_path / "settings.ini"), QtCore.QSettings.IniFormat)


@pytest.fixture
def window(qtbot, qsettings):
    from workbench.gui.app import make_app
    from workbench.gui.main_window import MainWindow

    make_app()
    w = MainWindow(settings=qsettings)
    qtbot.addWidget(w)
    w.resize(1400, 900)
    w.show()
    yield w
    w.stop_run()


def wait_run(qtbot, w, timeout=30000):
    qtbot.waitUntil(lambda: not w.running, timeout=timeout)
