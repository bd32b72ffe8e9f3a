"""`workbench gui FILE` on the command line (no window is opened for a bad file)."""
import os
import subprocess
import sys

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))


def test_gui_command_with_a_missing_file_is_one_error_line(tmp_path):
    res = subprocess.run([sys.executable, "-m", "workbench", "gui", str(tmp_path / "nope.toml")],
                         capture_output=True, text=True, cwd=ROOT, timeout=60,
                         env=dict(os.environ, QT_QPA_PLATFORM="offscreen"))
    assert res.returncode == 2
    assert res.stderr.startswith("error: ") and res.stderr.count("\n") == 1
    assert "nope.toml" in res.stderr and "Traceback" not in res.stderr


def test_cli_module_has_no_static_import_of_the_gui():
    text = open(os.path.join(ROOT, "workbench", "cli", "gui.py")).read()
    assert "importlib.import_module(\"workbench.gui.app\")" in text
    assert "from ..gui" not in text and "import workbench.gui" not in text
