"""Study specs and study files (TOML).

A study file names the study kind, the arm file, optionally a cell file, and the kind's settings::

    [study]
    name = "j2 x j3 sweep of the S6 demo arm"   # optional, default: the file name
    kind = "joint_sweep"                          # a registered kind (see studies.base.KINDS)
    arm  = "../demo_s6.toml"                      # relative to this study file
    cell = "demo_cell.toml"                       # optional

    [settings]                                    # kind-specific, in file units (degrees, m)
    joints = ["j2", "j3"]
    ...

Paths in the file are relative to the study file's folder; :class:`StudySpec` keeps them as
written plus the folder, and writes them back relative to the new file's folder.
"""
from __future__ import annotations

import copy
import importlib
import os
import tempfile
import tomllib
from dataclasses import dataclass, field, replace

import tomli_w

from ..limits import MAX_TEXT_BYTES, check_toml_text
from .base import StudyError, get_kind

__all__ = ["StudySpec", "read_study_file", "parse_study_dict", "dumps_study", "write_study_file",
           "load_context", "read_text", "CELL_READERS"]

_STUDY_KEYS = {"name", "kind", "arm", "cell", "description", "base_link", "tip_link"}
_TOP_KEYS = {"study", "settings"}

#: where cell-file readers may live ("module:function(path) -> cell"); the first that imports wins
CELL_READERS = (
    "workbench.studies.cell:read_cell_file",
)


@dataclass(frozen=True)
class StudySpec:
    """A study: kind, arm file, optional cell file, settings (file units), name.

    Parameters
    ----------
    kind : str
        Registered study kind ("joint_sweep", "reach_slice", ...).
    arm : str
        Arm file path as written (relative to ``base_dir`` unless absolute).
    cell : str or None
        Cell file path as written, or None.
    settings : dict
        The ``[settings]`` table, in file units (degrees, metres); validated by the kind.
    name : str
        Display name.
    description : str
    base_dir : str
        Folder that relative paths refer to (the study file's folder; the current folder for
        specs built in code).
    source : str or None
        The study file this spec was read from, if any.
    base_link, tip_link : str or None
        URDF arms only: the links that start and end the chain.
    """

    kind: str
    arm: str
    cell: str | None = None
    settings: dict = field(default_factory=dict)
    name: str = ""
    description: str = ""
    base_dir: str = "."
    source: str | None = None
    base_link: str | None = None
    tip_link: str | None = None

    @property
    def arm_path(self) -> str:
        return _resolve(self.base_dir, self.arm)

    @property
    def cell_path(self) -> str | None:
        return None if self.cell is None else _resolve(self.base_dir, self.cell)

    @property
    def where(self) -> str:
        """Prefix for error messages: the study file (or "study")."""
        return self.source or "study"

    def with_settings(self, **changes) -> "StudySpec":
        """A copy with some settings replaced (file units)."""
        s = copy.deepcopy(self.settings)
        s.update(changes)
        return replace(self, settings=s)

    def to_dict(self, relative_to: str | None = None) -> dict:
        """The study-file mapping; paths rewritten relative to ``relative_to`` when given."""
        def rel(p):
            if p is None:
                return None
            full = _resolve(self.base_dir, p)
            if relative_to is None:
                return p
            try:
                return os.path.relpath(full, relative_to).replace(os.sep, "/")
            except ValueError:  # other drive
                return full
        study = {"kind": self.kind, "arm": rel(self.arm)}
        if self.name:
            study = {"name": self.name, **study}
        if self.cell is not None:
            study["cell"] = rel(self.cell)
        if self.description:
            study["description"] = self.description
        for key in ("base_link", "tip_link"):
            if getattr(self, key):
                study[key] = getattr(self, key)
        return {"study": study, "settings": copy.deepcopy(dict(self.settings))}


def _resolve(base_dir: str, p: str) -> str:
    p = os.path.expanduser(str(p))
    return p if os.path.isabs(p) else os.path.normpath(os.path.join(base_dir, p))


def read_text(path: str, what: str) -> str:
    """A UTF-8 text file's content, or a :class:`StudyError` naming ``what`` and the path."""
    try:
        with open(path, "rb") as fh:
            raw = fh.read(MAX_TEXT_BYTES + 1)
    except IsADirectoryError:
        raise StudyError(f"{what}: {path} is a directory, expected a file") from None
    except FileNotFoundError:
        raise StudyError(f"{what}: {path}: no such file") from None
    except OSError as exc:
        raise StudyError(f"{what}: {path}: cannot be read ({exc.strerror})") from None
    if len(raw) > MAX_TEXT_BYTES:
        raise StudyError(f"{what}: {path}: larger than {MAX_TEXT_BYTES >> 20} MB; expected a TOML file of a few kB")
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError:
        if raw.startswith(b"\x89HDF\r\n\x1a\n"):  # the HDF5 signature: a results file given by mistake
            raise StudyError(f"{what}: {path}: is an HDF5 file (results?); expected a TOML text file") from None
        raise StudyError(f"{what}: {path}: not UTF-8 text") from None


def read_study_file(path) -> StudySpec:
    """Read a study file -> :class:`StudySpec` (structure checked; settings are checked by the
    kind at plan time).

    Raises
    ------
    StudyError
        Naming the file and key for a missing/unknown key, an unknown kind or malformed TOML.
    """
    path = os.fspath(path)
    text = read_text(path, "study file")
    check_toml_text(text, path, StudyError)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise StudyError(f"{path}: malformed TOML: {exc}") from None
    return parse_study_dict(data, source=path, base_dir=os.path.dirname(os.path.abspath(path)))


def parse_study_dict(data: dict, source: str = "study", base_dir: str = ".") -> StudySpec:
    """Check a parsed study-file mapping and build the spec; errors name ``source`` and the key."""
    if not isinstance(data, dict):
        raise StudyError(f"{source}: expected a TOML document with a [study] table")
    unknown = sorted(set(data) - _TOP_KEYS)
    if unknown:
        looks = ("; this looks like an arm file" if {"arm", "joint"} & set(unknown) else
                 "; this looks like a cell file" if {"cell", "point"} & set(unknown) else "")
        raise StudyError(f"{source}: unknown table [{unknown[0]}]{looks}; expected a study file with [study] and "
                         f"[settings]")
    study = data.get("study")
    if not isinstance(study, dict):
        raise StudyError(f"{source}: missing table [study] (with kind and arm)")
    unknown = sorted(set(study) - _STUDY_KEYS)
    if unknown:
        raise StudyError(f"{source}: [study]: unknown key '{unknown[0]}'; allowed keys: "
                         f"{', '.join(sorted(_STUDY_KEYS))}")
    for key in ("kind", "arm"):
        v = study.get(key)
        if not isinstance(v, str) or not v.strip():
            raise StudyError(f"{source}: [study] {key}: expected a non-empty string, got {v!r}")
    cell = study.get("cell")
    if cell is not None and (not isinstance(cell, str) or not cell.strip()):
        raise StudyError(f"{source}: [study] cell: expected a file path string, got {cell!r}")
    kind = study["kind"].strip()
    get_kind(kind, where=f"{source}: [study] kind")  # unknown / unavailable kinds fail here
    settings = data.get("settings", {})
    if not isinstance(settings, dict):
        raise StudyError(f"{source}: [settings]: expected a table, got {type(settings).__name__}")
    for key in ("base_link", "tip_link", "description"):
        v = study.get(key)
        if v is not None and not isinstance(v, str):
            raise StudyError(f"{source}: [study] {key}: expected a string, got {v!r}")
    name = study.get("name")
    if name is not None and not isinstance(name, str):
        raise StudyError(f"{source}: [study] name: expected a string, got {name!r}")
    if not name:
        name = os.path.splitext(os.path.basename(source))[0] if source != "study" else kind
    return StudySpec(kind=kind, arm=study["arm"].strip(), cell=cell.strip() if cell else None,
                     settings=settings, name=name, description=str(study.get("description", "")),
                     base_dir=os.path.abspath(base_dir), source=source if source != "study" else None,
                     base_link=study.get("base_link"), tip_link=study.get("tip_link"))


def dumps_study(spec: StudySpec, relative_to: str | None = None) -> str:
    """The study file text of ``spec`` (paths relative to ``relative_to`` when given)."""
    return tomli_w.dumps(spec.to_dict(relative_to=relative_to))


def write_study_file(spec: StudySpec, path) -> StudySpec:
    """Write ``spec`` to ``path`` atomically (temp file + rename); paths become relative to the
    new file's folder. Returns the spec as read back from the new file's point of view."""
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    text = dumps_study(spec, relative_to=folder)
    fd, tmp = tempfile.mkstemp(prefix=".~", suffix=".toml", dir=folder)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return read_study_file(path)


def load_context(spec: StudySpec):
    """Load what a study needs: ``(arm, cell, arm_text, cell_text)``.

    ``arm`` is a :class:`workbench.kinematics.Arm`; ``cell`` is whatever the cell-file reader
    returns (None without a cell file); the texts are kept for the results file.
    """
    from ..arm import read_arm_model
    from ..kinematics import Arm

    where = spec.where
    arm_path = spec.arm_path
    if not os.path.exists(arm_path):
        raise StudyError(f"{where}: [study] arm: arm file {arm_path} does not exist")
    if os.path.isdir(arm_path):
        raise StudyError(f"{where}: [study] arm: {arm_path} is a directory, expected an arm file")
    arm_text = read_text(arm_path, f"{where}: [study] arm")
    arm = Arm(read_arm_model(arm_path, base_link=spec.base_link, tip_link=spec.tip_link))
    cell = cell_text = None
    if spec.cell is not None:
        cell_path = spec.cell_path
        if not os.path.exists(cell_path):
            raise StudyError(f"{where}: [study] cell: cell file {cell_path} does not exist")
        cell_text = read_text(cell_path, f"{where}: [study] cell")
        cell = _read_cell(cell_path, where)
        from .taskdata import self_contained_text

        cell_text = self_contained_text(cell, cell_text)  # the CSV files it names go into the results too
    elif get_kind(spec.kind).needs_cell:
        raise StudyError(f"{where}: [study] cell: study kind {spec.kind!r} needs a cell file")
    return arm, cell, arm_text, cell_text


def _read_cell(path: str, where: str):
    for target in CELL_READERS:
        mod_name, _, fn = target.partition(":")
        try:
            mod = importlib.import_module(mod_name)
        except ModuleNotFoundError as exc:
            if exc.name and mod_name.startswith(exc.name):
                continue
            raise
        if hasattr(mod, fn):
            return getattr(mod, fn)(path)
    raise StudyError(f"{where}: [study] cell: no cell-file reader in this build for {path}")
