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
    # The GUI layer sits above the CLI (DESIGN §2: gui -> cli -> ...): importing it by name at run
    # time keeps this module free of any static import of workbench.gui, so the layer contract
    # holds and `workbench --help` never loads Qt.
    app = importlib.import_module("workbench.gui.app")
    return int(app.main(args.file) or 0)
