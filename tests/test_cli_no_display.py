"""`workbench` without a screen: one line and exit 2, not Qt's abort (core dump, status 134)."""
import os
import subprocess
import sys

import pytest


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="the display check is for X11/Wayland systems")
def test_no_display_is_one_clear_line():
    env = {k: v for k, v in os.environ.items() if k not in ("DISPLAY", "WAYLAND_DISPLAY", "QT_QPA_PLATFORM")}
    res = subprocess.run([sys.executable, "-m", "workbench"], env=env, capture_output=True, text=True, timeout=60)
    assert res.returncode == 2
    assert res.stderr.startswith("error: no display:") and res.stderr.count("\n") == 1
    assert "Traceback" not in res.stderr


def test_missing_file_is_checked_before_any_window(tmp_path):
    from workbench.cli import main

    assert main(["gui", str(tmp_path / "nothing.toml")]) == 2
