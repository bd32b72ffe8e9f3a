"""The layer rule of DESIGN §2: imports point downward, only workbench.gui imports Qt."""
import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_import_linter_contracts_hold():
    exe = shutil.which("lint-imports")
    assert exe, "import-linter is part of the test extra"
    res = subprocess.run([exe, "--no-cache", str(ROOT / "pyproject.toml")], cwd=ROOT,
                         capture_output=True, text=True)
    assert res.returncode == 0, res.stdout + res.stderr


def test_no_qt_outside_gui_by_source_scan():
    # a second, dumb check that does not depend on import-linter's graph
    bad = []
    for path in (ROOT / "workbench").rglob("*.py"):
        if "gui" in path.relative_to(ROOT / "workbench").parts:
            continue
        text = path.read_text()
        for word in ("PySide6", "pyqtgraph", "shiboken6", "PyQt"):
            if f"import {word}" in text or f"from {word}" in text:
                bad.append(f"{path}: {word}")
    assert not bad, bad


def test_importing_core_does_not_load_qt():
    code = "import sys, workbench, workbench.measures, workbench.cli; print('PySide6' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT)
    assert out.stdout.strip() == "False", out.stderr
