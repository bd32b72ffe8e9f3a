"""The project folder: where the window keeps the results of its runs (pure Python, no Qt).

Every run of the window writes one results file into the project folder and nothing there is
ever deleted by the window. The folder is the one the user chose (File -> Results folder), or,
when none was chosen, ``<study name>_runs/`` beside the study file the form came from, or the
application's own data folder. ``project.json`` in the folder keeps what belongs to the files
but not in them: the brushes drawn on each results file.
"""
from __future__ import annotations

import json
import os
import re
import time
from dataclasses import dataclass

from ..errors import WorkbenchError

__all__ = ["Project", "RunEntry", "folder_beside_study", "PROJECT_FILE"]

PROJECT_FILE = "project.json"
_SAFE = re.compile(r"[^A-Za-z0-9_.-]+")


def folder_beside_study(study_path) -> str:
    """``<folder of the study>/<study file name without .toml>_runs``."""
    study_path = os.path.abspath(os.fspath(study_path))
    stem = os.path.splitext(os.path.basename(study_path))[0]
    return os.path.join(os.path.dirname(study_path), f"{stem}_runs")


@dataclass
class RunEntry:
    """One results file of the project folder, as the runs list shows it."""

    path: str
    name: str
    kind: str
    cells: int
    incomplete: bool
    created: str
    size_bytes: int

    @property
    def label(self) -> str:
        mb = self.size_bytes / 1e6
        size = f"{mb:.1f} MB" if mb >= 0.1 else f"{self.size_bytes / 1e3:.0f} KB"
        state = "incomplete" if self.incomplete else "complete"
        return (f"{os.path.basename(self.path)}: {self.name} ({self.kind.replace('_', ' ')}, "
                f"{self.cells:,} cells, {state}, {size})")


#: (path, mtime, size) -> RunEntry of results files already read (the runs list is refreshed after
#: every run; reading every file again took about 0.1 s each)
_ENTRIES: dict = {}


class Project:
    """A results folder. Creating the object makes the folder if needed.

    Raises
    ------
    WorkbenchError
        When the folder cannot be made or takes no files (one line naming it).
    """

    def __init__(self, folder):
        self.folder = os.path.abspath(os.fspath(folder))
        try:
            os.makedirs(self.folder, exist_ok=True)
        except OSError as exc:
            raise WorkbenchError(f"{self.folder}: cannot make the results folder ({exc.strerror or exc})") from None
        if not os.access(self.folder, os.W_OK):
            raise WorkbenchError(f"{self.folder}: the results folder is not writable")

    # ---- runs ----------------------------------------------------------------------------
    def new_run_path(self, name: str) -> str:
        """A new results file name: ``<date>-<time>-<study name>.h5``, never an existing file."""
        base = _SAFE.sub("_", name.strip() or "run").strip("_")[:40] or "run"
        stamp = time.strftime("%Y%m%d-%H%M%S")
        path = os.path.join(self.folder, f"{stamp}-{base}.h5")
        k = 2
        while os.path.exists(path):
            path = os.path.join(self.folder, f"{stamp}-{base}-{k}.h5")
            k += 1
        return path

    def runs(self) -> list:
        """:class:`RunEntry` of every readable results file in the folder, newest first."""
        from ..results import read_results

        out = []
        for n in os.listdir(self.folder):
            p = os.path.join(self.folder, n)
            if not n.endswith((".h5", ".hdf5")) or n.startswith(".") or not os.path.isfile(p):
                continue
            st = os.stat(p)
            key = (p, st.st_mtime_ns, st.st_size)
            if key not in _ENTRIES:        # read each file once per change, not at every listing
                try:
                    r = read_results(p, load=False)
                except WorkbenchError:
                    continue
                cells = 1
                for a in r.axes:
                    cells *= a.size
                _ENTRIES[key] = RunEntry(p, r.name, r.kind, cells, bool(r.incomplete),
                                         str(r.attrs.get("created", "")), st.st_size)
            out.append(_ENTRIES[key])
        out.sort(key=lambda e: os.path.getmtime(e.path), reverse=True)
        return out

    # ---- what belongs to the files: brushes ----------------------------------------------
    def _load(self) -> dict:
        p = os.path.join(self.folder, PROJECT_FILE)
        try:
            with open(p, encoding="utf-8") as fh:
                data = json.load(fh)
            return data if isinstance(data, dict) else {}
        except (OSError, ValueError):
            return {}

    def _save(self, data: dict) -> None:
        p = os.path.join(self.folder, PROJECT_FILE)
        tmp = p + ".tmp"
        with open(tmp, "w", encoding="utf-8") as fh:
            json.dump(data, fh, indent=1)
        os.replace(tmp, p)

    def brushes(self, results_path) -> list:
        """The brushes saved for ``results_path`` (a list of plain dicts, see selection.Brush)."""
        key = os.path.basename(os.fspath(results_path))
        return list(self._load().get("brushes", {}).get(key, []))

    def save_brushes(self, results_path, brushes: list) -> None:
        data = self._load()
        key = os.path.basename(os.fspath(results_path))
        data.setdefault("brushes", {})[key] = list(brushes)
        self._save(data)

    def contains(self, path) -> bool:
        return os.path.dirname(os.path.abspath(os.fspath(path))) == self.folder
