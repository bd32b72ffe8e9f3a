"""What kind of file the user opened (pure Python, no Qt): arm file, URDF, cell file, study file
or results file, by extension and, for TOML, by content."""
from __future__ import annotations

import os
import tomllib

from ..errors import WorkbenchError

__all__ = ["classify", "FILE_FILTER", "find_demo_cell", "DEMO_ARM"]

FILE_FILTER = ("Workbench files (*.toml *.urdf *.xml *.h5 *.hdf5);;Arm, cell or study files (*.toml);;"
               "URDF (*.urdf *.xml);;Results files (*.h5 *.hdf5);;All files (*)")
ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
DEMO_ARM = os.path.join(ROOT, "arms", "demo_s6.toml")


def classify(path) -> str:
    """"arm", "urdf", "cell", "study" or "results" for ``path``.

    Raises
    ------
    WorkbenchError
        Missing file, a folder, or a file that is none of these (the message says what is expected).
    """
    path = os.fspath(path)
    if not os.path.exists(path):
        raise WorkbenchError(f"{path}: no such file")
    if os.path.isdir(path):
        raise WorkbenchError(f"{path} is a folder; expected an arm, URDF, cell, study or results file")
    ext = os.path.splitext(path)[1].lower()
    if ext in (".h5", ".hdf5"):
        return "results"
    if ext in (".urdf", ".xml"):
        return "urdf"
    if ext == ".toml":
        try:
            with open(path, "rb") as fh:
                data = tomllib.load(fh)
        except tomllib.TOMLDecodeError as exc:
            raise WorkbenchError(f"{path}: malformed TOML: {exc}") from None
        except UnicodeDecodeError:
            raise WorkbenchError(f"{path}: not UTF-8 text") from None
        if "study" in data:
            return "study"
        if "cell" in data or "point" in data:
            return "cell"
        if "arm" in data or "joint" in data:
            return "arm"
        raise WorkbenchError(f"{path}: a TOML file without an [arm], [cell] or [study] table; expected an arm, "
                             f"cell or study file")
    raise WorkbenchError(f"{path}: unknown file type {ext or '(no extension)'}; expected .toml (arm, cell or "
                         f"study), .urdf or .h5 (results)")


def find_demo_cell() -> str | None:
    """The demo cell file in arms/cells/ (the first TOML file there with a [cell] table), or None."""
    folder = os.path.join(ROOT, "arms", "cells")
    if not os.path.isdir(folder):
        return None
    names = sorted(os.listdir(folder))
    names.sort(key=lambda n: ("demo" not in n, n))
    for n in names:
        p = os.path.join(folder, n)
        if n.endswith(".toml"):
            try:
                if classify(p) == "cell":
                    return p
            except WorkbenchError:
                continue
    return None
