"""``workbench gui [FILE]``: open the desktop workbench (also what ``workbench`` alone does)."""
from __future__ import annotations

import importlib
import os


def add_parser(subparsers):
    p = subparsers.add_parser("gui", help="open the desktop workbench (on the demo, or on FILE)",
                              description="Open the desktop workbench on the built-in demo arm and cell, "
                                          "or on FILE: an arm file (.toml), URDF, cell file, study file "
                                          "or results file (.h5).")
    p.add_argument("file", nargs="?", help="arm, URDF, cell, study or results file to open")
    return p


def run(args) -> int:
    if args.file and not os.path.exists(args.file):
        from ..errors import WorkbenchError

        raise WorkbenchError(f"{args.file}: no such file; expected an arm, URDF, cell, study or results file")
    _check_display()
    # The GUI layer sits above the CLI (DESIGN §2: gui -> cli -> ...): importing it by name at run
    # time keeps this module free of any static import of workbench.gui, so the layer contract
    # holds and `workbench --help` never loads Qt.
    app = importlib.import_module("workbench.gui.app")
    return int(app.main(args.file) or 0)


def _check_display() -> None:
    """On Linux/BSD, refuse in one line when there is no screen to open a window on (Qt would
    abort the process with a core dump instead)."""
    import sys

    from ..errors import WorkbenchError

    if not sys.platform.startswith(("linux", "freebsd", "openbsd", "netbsd")):
        return
    if os.environ.get("QT_QPA_PLATFORM") or os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY"):
        return
    raise WorkbenchError("no display: the desktop workbench needs a screen (DISPLAY or WAYLAND_DISPLAY is "
                         "not set); run it on a desktop or under xvfb-run, or use the other commands "
                         "(workbench --help)")
