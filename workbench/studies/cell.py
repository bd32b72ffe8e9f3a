"""Cell files: work points, paths, equipment boxes and the mount candidate region (our TOML schema).

Schema (lengths in the file's ``length_unit``, "m" or "mm"; angles in degrees; the cell frame has
z up, the floor at z = 0)::

    [cell]
    name = "Tray loading cell"         # required
    description = "..."                # optional
    length_unit = "m"                  # "m" (default) or "mm"

    [[point]]                          # a work point (at least one)
    name = "rack_1"                    # unique
    xyz = [0.9, 0.5, 0.8]              # TCP position in the cell frame
    orientation = "fixed"              # "fixed" (rpy), "axis" (tool z axis only) or "free" (position only)
    rpy = [180, 0, 0]                  # for "fixed": TCP orientation (roll, pitch, yaw; R = Rz Ry Rx)
    axis = [0, 0, -1]                  # for "axis": direction of the tool z axis in the cell frame
    tolerance = 0.001                  # optional: position tolerance (length unit), default 1 mm
    angle_tolerance = 0.5              # optional: orientation tolerance (deg), default 0.5

    [[path]]                           # optional: a tool path through named points
    name = "seam"
    speed = 250                        # tool speed along the path, mm/s (always mm/s), > 0
    through = ["a", "b", "c"]          # a polyline through named points ...
    # ... or explicit segments from a start point (lines and circular arcs through a via point):
    # start = "a"
    # segments = [{line = "b"}, {arc = "c", via = "m"}]
    orientation = "fixed"              # optional: "fixed" (slerp between the points' rpy), "axis"
                                       # or "free"; default: the rule of the start point

    [[box]]                            # optional: fixed equipment, an obstacle of the clearance checks
    name = "conveyor"
    center = [1.0, -0.6, 0.4]
    size = [2.0, 0.5, 0.8]             # full edge lengths along the box's own x, y, z
    yaw = 0                            # optional, deg about z
    collide = true                     # optional: false = drawn only, not an obstacle

    [[cylinder]]                       # optional: a pillar (obstacle)
    name = "column"
    center = [1.5, 0.0, 1.5]           # centre of the cylinder
    radius = 0.2
    height = 3.0                       # along its axis
    axis = [0, 0, 1]                   # optional, default vertical
    collide = true                     # optional

    [[keep_out]]                       # optional: a box the arm must not enter (e.g. where an
    name = "operator"                  # operator stands); same keys as [[box]] but no 'collide'
    center = [-1.0, 0.0, 1.0]
    size = [0.8, 0.8, 2.0]

The floor (z = 0) is an obstacle unless ``[cell] floor = false``.

    [mount]                            # the candidate region of the mount search
    x = [-0.5, 0.5]                    # range of the base origin x (length unit)
    y = [-0.5, 0.5]
    step = 0.1                         # grid step (or step_x / step_y)
    heights = [0.0, 0.3]               # base origin z values (pedestal heights; ceiling height)
    yaws = [0, 90, 180, 270]           # base yaw about the cell z axis, deg
    style = "floor"                    # "floor", "wall", "ceiling", or a tilt in degrees;
                                       # may be a list of these

    [placement]                        # optional: the chosen mount (used by path audit and load map)
    xyz = [0.2, 0.0, 0.3]
    rpy = [0, 0, 90]

    [requirements]                     # optional: what the work asks (workbench.studies.requirements)
    force = [0, 0, 150]                # N the tool exerts (tool frame unless wrench_frame = "cell")
    payload = 12.0                     # kg, with payload_com (offset from the TCP, tool frame)
    # per point / per path: requirements = {force = [0, 0, 200], time = 8.0} inside [[point]] / [[path]]

Mount styles: a candidate base frame is ``T(x, y, h) @ Rz(yaw) @ Ry(tilt)`` with tilt 0 (floor,
base z up), 90 (wall: base z horizontal, pointing along the yaw direction), 180 (ceiling, base z
down) or the given tilt in degrees.

:func:`read_cell_file` validates everything and raises :class:`CellFileError` with one line naming
the file, the table/key and, where it can be found, the line.
"""
from __future__ import annotations

import hashlib
import math
import os
import re
import tomllib
from dataclasses import dataclass, field

import numpy as np

from ..arm.transforms import inverse_transform, make_transform, rot_y, rot_z, translation
from ..errors import WorkbenchError
from ..limits import MAX_CELL_COORD, MAX_MAGNITUDE, MAX_TEXT_BYTES, check_toml_text

__all__ = ["CellFileError", "Cell", "WorkPoint", "Path", "Segment", "Box", "Cylinder", "MountRegion",
           "read_cell_file", "parse_cell_text", "mount_transforms", "style_tilt", "PathSamples",
           "sample_path", "candidate_grid", "relative_targets", "ORIENTATION_RULES",
           "MAX_MOUNT_CANDIDATES"]

ORIENTATION_RULES = ("fixed", "axis", "free")
STYLE_TILTS = {"floor": 0.0, "wall": 90.0, "ceiling": 180.0}
MAX_MOUNT_CANDIDATES = 2_000_000
_DEG = math.pi / 180.0
_UNITS = {"m": 1.0, "mm": 1e-3}
_TOP = {"cell", "point", "path", "box", "mount", "placement", "requirements", "cylinder", "keep_out",
        "trajectory", "embedded_csv"}
_CELL_KEYS = {"name", "description", "length_unit", "floor"}
_POINT_KEYS = {"name", "xyz", "orientation", "rpy", "axis", "tolerance", "angle_tolerance", "requirements"}
_PATH_KEYS = {"name", "speed", "through", "start", "segments", "orientation", "requirements", "csv", "columns",
              "rotation", "csv_unit"}
_TRAJ_KEYS = {"name", "csv", "time", "joints", "angle_unit", "csv_unit", "time_unit", "requirements"}
_BOX_KEYS = {"name", "center", "size", "yaw", "collide"}
_KEEP_KEYS = {"name", "center", "size", "yaw"}
_CYL_KEYS = {"name", "center", "radius", "height", "axis", "collide"}
_MOUNT_KEYS = {"x", "y", "step", "step_x", "step_y", "heights", "yaws", "style"}
_PLACE_KEYS = {"xyz", "rpy"}


class CellFileError(WorkbenchError):
    """A bad cell file; the message names the file, the table/key, the line and what is expected."""


# ----------------------------------------------------------------------------------------------
# the model


@dataclass(frozen=True, eq=False)
class WorkPoint:
    """A work point (SI units).

    Attributes
    ----------
    pose : (4, 4) ndarray
        TCP target in the cell frame; for "axis" its z column is the tool axis, for "free" the
        rotation is the identity and not used.
    rule : {"fixed", "axis", "free"}
    tolerance : float
        Position tolerance, m.
    angle_tolerance : float
        Orientation tolerance, rad.
    """

    name: str
    pose: np.ndarray
    rule: str
    tolerance: float = 1e-3
    angle_tolerance: float = 0.5 * _DEG

    @property
    def position(self) -> np.ndarray:
        return self.pose[:3, 3]


@dataclass(frozen=True)
class Segment:
    """One path segment: a line to ``to`` or a circular arc to ``to`` through ``via``."""

    kind: str  # "line" | "arc"
    to: str
    via: str | None = None


@dataclass(frozen=True)
class Path:
    """A tool path: start point name, segments, tool speed (m/s) and orientation rule."""

    name: str
    start: str
    segments: tuple[Segment, ...]
    speed: float
    rule: str
    poses: np.ndarray | None = field(default=None, compare=False)   # a path from a CSV file: its rows (cell frame)
    csv: str | None = None                                           # that file

    def point_names(self) -> list[str]:
        if self.poses is not None:
            return []
        out = [self.start]
        for s in self.segments:
            if s.via:
                out.append(s.via)
            out.append(s.to)
        return out


@dataclass(frozen=True, eq=False)
class Box:
    """Fixed equipment or a keep-out zone: centre (m), full sizes (m), yaw (rad); ``collide``:
    an obstacle of the clearance checks; ``keep_out``: space the arm must not enter."""

    name: str
    center: np.ndarray
    size: np.ndarray
    yaw: float = 0.0
    collide: bool = True
    keep_out: bool = False

    @property
    def rotation(self) -> np.ndarray:
        c, si = math.cos(self.yaw), math.sin(self.yaw)
        return np.array([[c, -si, 0], [si, c, 0], [0, 0, 1.0]])

    def corners(self) -> np.ndarray:
        """(8, 3) corner positions in the cell frame (m)."""
        s = np.array([[sx, sy, sz] for sx in (-1, 1) for sy in (-1, 1) for sz in (-1, 1)], float) * self.size / 2
        c, si = math.cos(self.yaw), math.sin(self.yaw)
        R = np.array([[c, -si, 0], [si, c, 0], [0, 0, 1.0]])
        return s @ R.T + self.center


@dataclass(frozen=True, eq=False)
class Cylinder:
    """A pillar: centre (m), unit axis, radius (m), height (m, along the axis)."""

    name: str
    center: np.ndarray
    radius: float
    height: float
    axis: np.ndarray = field(default_factory=lambda: np.array([0.0, 0.0, 1.0]))
    collide: bool = True

    def ends(self) -> tuple[np.ndarray, np.ndarray]:
        """Centres of the two end faces (m)."""
        h = self.axis * self.height / 2
        return self.center - h, self.center + h


@dataclass(frozen=True, eq=False)
class MountRegion:
    """Candidate mounts: grids of x, y (m), heights (m), yaws (rad) and style tilts (rad)."""

    xs: np.ndarray
    ys: np.ndarray
    heights: np.ndarray
    yaws: np.ndarray
    styles: tuple[str, ...]
    tilts: np.ndarray

    @property
    def shape(self) -> tuple[int, int, int, int, int]:
        """(styles, heights, yaws, ny, nx)."""
        return (len(self.tilts), len(self.heights), len(self.yaws), len(self.ys), len(self.xs))

    @property
    def count(self) -> int:
        return int(np.prod(self.shape))


@dataclass(frozen=True, eq=False)
class Cell:
    """A parsed, validated cell (SI units). ``text`` is the file text, ``sha256`` its fingerprint."""

    name: str
    points: tuple[WorkPoint, ...]
    paths: tuple[Path, ...] = ()
    boxes: tuple[Box, ...] = ()
    mount: MountRegion | None = None
    placement: np.ndarray | None = None
    description: str = ""
    length_unit: str = "m"
    text: str = ""
    path: str | None = None
    lines: dict = field(default_factory=dict)
    cylinders: tuple = ()
    keep_outs: tuple = ()
    floor: bool = True
    trajectories: tuple = ()             # joint trajectories from CSV (workbench.studies.taskdata.Trajectory)
    csv_texts: dict = field(default_factory=dict)   # CSV file name (as written) -> the text read

    def obstacles(self) -> list:
        """What the clearance checks test against: [("floor", None)] when the floor is on, then
        ("box", Box), ("cylinder", Cylinder), ("keep_out", Box) for every one that collides."""
        out = [("floor", None)] if self.floor else []
        out += [("box", b) for b in self.boxes if b.collide]
        out += [("cylinder", c) for c in self.cylinders if c.collide]
        out += [("keep_out", k) for k in self.keep_outs]
        return out

    requirements: object = None          # cell-wide Requirements (workbench.studies.requirements)
    point_requirements: dict = field(default_factory=dict)   # point name -> Requirements (merged)
    path_requirements: dict = field(default_factory=dict)    # path name -> Requirements (merged)

    def requirements_for(self, point: str | None = None, path: str | None = None):
        """The :class:`~workbench.studies.requirements.Requirements` of a work point or a path (the
        cell-wide ones merged with its own), or the cell-wide ones."""
        from .requirements import Requirements

        if point is not None and point in self.point_requirements:
            return self.point_requirements[point]
        if path is not None and path in self.path_requirements:
            return self.path_requirements[path]
        return self.requirements if self.requirements is not None else Requirements()

    @property
    def sha256(self) -> str:
        return hashlib.sha256(self.text.encode("utf-8")).hexdigest()

    def point(self, name: str) -> WorkPoint:
        for p in self.points:
            if p.name == name:
                return p
        raise CellFileError(f"{self.path or '<cell>'}: no work point named {name!r}")

    def get_path(self, name: str | None) -> "Path":
        if not self.paths:
            raise CellFileError(f"{self.path or '<cell>'}: the cell has no [[path]] tables; a path audit needs one")
        if name is None:
            return self.paths[0]
        for p in self.paths:
            if p.name == name:
                return p
        raise CellFileError(f"{self.path or '<cell>'}: no path named {name!r}; paths are "
                            f"{', '.join(p.name for p in self.paths)}")

    def point_poses(self) -> np.ndarray:
        """(P, 4, 4) work point poses in the cell frame."""
        return np.array([p.pose for p in self.points])

    def summary(self) -> str:
        s = f"{self.name}: {len(self.points)} work points, {len(self.paths)} paths, {len(self.boxes)} boxes"
        if self.cylinders:
            s += f", {len(self.cylinders)} cylinders"
        if self.keep_outs:
            s += f", {len(self.keep_outs)} keep-out zones"
        if self.trajectories:
            s += f", {len(self.trajectories)} joint trajectories"
        if self.mount is not None:
            s += f", {self.mount.count} mount candidates"
        return s


# ----------------------------------------------------------------------------------------------
# reading and validation


class _Ctx:
    """Error context: file name and the text (to find the line of a key)."""

    def __init__(self, name: str, text: str):
        self.name = name
        self.lines = text.splitlines()

    def line_of(self, table: str | None, index: int | None, key: str | None) -> int | None:
        """1-based line of ``key`` inside the ``index``-th ``[[table]]`` (or ``[table]``); best effort."""
        start = 0
        if table is not None:
            hdr = re.compile(r"^\s*\[\[\s*" + re.escape(table) + r"\s*\]\]" if index is not None
                             else r"^\s*\[\s*" + re.escape(table) + r"\s*\]")
            count = -1
            found = None
            for i, ln in enumerate(self.lines):
                if hdr.match(ln):
                    count += 1
                    if index is None or count == index:
                        found = i
                        break
            if found is None:
                return None
            start = found
            if key is None:
                return found + 1
        if key is None:
            return None
        kre = re.compile(r"^\s*" + re.escape(key) + r"\s*=")
        for i in range(start + (1 if table else 0), len(self.lines)):
            ln = self.lines[i]
            if table is not None and i > start and re.match(r"^\s*\[", ln):
                break
            if kre.match(ln):
                return i + 1
        return None

    def err(self, msg: str, table=None, index=None, key=None) -> CellFileError:
        where = self.name
        if table is not None:
            where += f": [[{table}]] {index + 1}" if index is not None else f": [{table}]"
        if key is not None:
            where += f" '{key}'"
        line = self.line_of(table, index, key)
        if line is not None:
            where += f" (line {line})"
        return CellFileError(f"{where}: {msg}")


def _num(ctx, v, table, index, key, positive=False, nonneg=False):
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        raise ctx.err(f"expected a number, got {v!r}", table, index, key)
    try:
        v = float(v)
    except OverflowError:  # a TOML integer beyond a float
        raise ctx.err(f"expected a number of magnitude at most {MAX_MAGNITUDE:g}, got {v!r}", table, index,
                      key) from None
    if not math.isfinite(v):
        raise ctx.err(f"expected a finite number, got {v!r}", table, index, key)
    if abs(v) > MAX_MAGNITUDE:
        raise ctx.err(f"expected a number of magnitude at most {MAX_MAGNITUDE:g}, got {v:g}", table, index, key)
    if positive and v <= 0:
        raise ctx.err(f"expected a number > 0, got {v:g}", table, index, key)
    if nonneg and v < 0:
        raise ctx.err(f"expected a number >= 0, got {v:g}", table, index, key)
    return v


def _vec(ctx, v, table, index, key, size=3):
    if not isinstance(v, (list, tuple)) or len(v) != size:
        raise ctx.err(f"expected a list of {size} numbers, got {v!r}", table, index, key)
    return np.array([_num(ctx, x, table, index, key) for x in v], dtype=float)


def _coord(ctx, values, table, index, key, unit):
    """``values`` (metres, any shape) unchanged when every one is within :data:`MAX_CELL_COORD`."""
    a = np.asarray(values, dtype=float)
    if a.size and float(np.max(np.abs(a))) > MAX_CELL_COORD:
        bad = float(a.reshape(-1)[int(np.argmax(np.abs(a)))])
        shown = f"{bad * 1e3:g} mm ({bad:g} m)" if unit == "mm" else f"{bad:g} m"
        raise ctx.err(f"value {shown} is beyond the limit of {MAX_CELL_COORD:g} m from the cell origin "
                      f"(is the length unit right?)", table, index, key)
    return values


def _numlist(ctx, v, table, key, nonempty=True):
    if isinstance(v, (int, float)) and not isinstance(v, bool):
        v = [v]
    if not isinstance(v, (list, tuple)):
        raise ctx.err(f"expected a list of numbers, got {v!r}", table, None, key)
    if nonempty and not v:
        raise ctx.err("the list is empty: the candidate region needs at least one value", table, None, key)
    return np.array([_num(ctx, x, table, None, key) for x in v], dtype=float)


def _keys(ctx, tbl, allowed, table, index=None):
    if not isinstance(tbl, dict):
        raise ctx.err(f"expected a table, got {type(tbl).__name__}", table, index)
    unknown = sorted(set(tbl) - allowed)
    if unknown:
        raise ctx.err(f"unknown key; allowed keys: {', '.join(sorted(allowed))}", table, index, unknown[0])


def _tool_z_frame(axis: np.ndarray) -> np.ndarray:
    """A rotation (3, 3) whose z column is the unit ``axis`` (x chosen deterministically)."""
    z = axis / np.linalg.norm(axis)
    ref = np.array([1.0, 0, 0]) if abs(z[0]) < 0.9 else np.array([0, 1.0, 0])
    x = ref - z * (ref @ z)
    x /= np.linalg.norm(x)
    y = np.cross(z, x)
    return np.stack([x, y, z], axis=1)


def read_cell_file(path) -> Cell:
    """Read and validate a cell file -> :class:`Cell` (SI units).

    Raises
    ------
    CellFileError
        One line naming the file, table/key, line and what is expected.
    """
    path = os.fspath(path)
    try:
        with open(path, "rb") as fh:
            raw = fh.read(MAX_TEXT_BYTES + 1)
    except IsADirectoryError:
        raise CellFileError(f"{path}: is a directory, expected a cell file (.toml)") from None
    except FileNotFoundError:
        raise CellFileError(f"{path}: no such file") from None
    except OSError as exc:
        raise CellFileError(f"{path}: cannot be read ({exc.strerror})") from None
    if len(raw) > MAX_TEXT_BYTES:
        raise CellFileError(f"{path}: larger than {MAX_TEXT_BYTES >> 20} MB; a cell file is a few kB of TOML")
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise CellFileError(f"{path}: not UTF-8 text; expected a TOML cell file") from None
    return parse_cell_text(text, source_name=path)


def parse_cell_text(text: str, source_name: str = "<cell>") -> Cell:
    """Parse and validate cell-file text (see the module docstring for the schema)."""
    check_toml_text(text, source_name, CellFileError)
    ctx = _Ctx(source_name, text)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise CellFileError(f"{source_name}: malformed TOML: {exc}") from None
    unknown = sorted(set(data) - _TOP)
    if unknown:  # a top-level name is a table (or a stray key): say so, not "unknown key"
        tables = ", ".join(f"[{t}]" if t in ("cell", "mount", "placement", "requirements") else f"[[{t}]]"
                           for t in sorted(_TOP - {"embedded_csv"}))  # embedded_csv: written by the workbench
        raise CellFileError(f"{source_name}: unknown table or key '{unknown[0]}'; allowed tables: {tables}")
    if "cell" not in data:
        raise CellFileError(f"{source_name}: missing table [cell] (with at least 'name')")
    c = data["cell"]
    _keys(ctx, c, _CELL_KEYS, "cell")
    name = c.get("name")
    if not isinstance(name, str) or not name.strip():
        raise ctx.err(f"expected a non-empty string, got {name!r}", "cell", None, "name")
    unit = c.get("length_unit", "m")
    if unit not in _UNITS:
        raise ctx.err(f"expected 'm' or 'mm', got {unit!r}", "cell", None, "length_unit")
    L = _UNITS[unit]
    desc = c.get("description", "")
    if not isinstance(desc, str):
        raise ctx.err("expected a string", "cell", None, "description")
    floor = c.get("floor", True)
    if not isinstance(floor, bool):
        raise ctx.err(f"expected true or false, got {floor!r}", "cell", None, "floor")

    # ---- work points
    raw_pts = data.get("point", [])
    if not isinstance(raw_pts, list) or not raw_pts:
        raise CellFileError(f"{source_name}: no [[point]] tables; a cell needs at least one work point")
    points = []
    for i, p in enumerate(raw_pts):
        _keys(ctx, p, _POINT_KEYS, "point", i)
        pname = p.get("name")
        if not isinstance(pname, str) or not pname.strip():
            raise ctx.err(f"expected a non-empty string, got {pname!r}", "point", i, "name")
        if any(q.name == pname for q in points):
            raise ctx.err(f"duplicate work point name {pname!r}", "point", i, "name")
        if "xyz" not in p:
            raise ctx.err("missing key 'xyz' (the TCP position)", "point", i)
        xyz = _coord(ctx, _vec(ctx, p["xyz"], "point", i, "xyz") * L, "point", i, "xyz", unit)
        rule = p.get("orientation", "fixed" if "rpy" in p else ("axis" if "axis" in p else "free"))
        if rule not in ORIENTATION_RULES:
            raise ctx.err(f"expected one of fixed, axis, free, got {rule!r}", "point", i, "orientation")
        T = np.eye(4)
        T[:3, 3] = xyz
        if rule == "fixed":
            if "rpy" not in p:
                raise ctx.err("orientation 'fixed' needs 'rpy' (degrees)", "point", i, "orientation")
            T[:3, :3] = make_transform(np.zeros(3), _vec(ctx, p["rpy"], "point", i, "rpy") * _DEG)[:3, :3]
        elif rule == "axis":
            if "axis" not in p:
                raise ctx.err("orientation 'axis' needs 'axis' (tool z direction)", "point", i, "orientation")
            ax = _vec(ctx, p["axis"], "point", i, "axis")
            if np.linalg.norm(ax) < 1e-9:
                raise ctx.err("zero-length axis; expected a direction", "point", i, "axis")
            T[:3, :3] = _tool_z_frame(ax)
        tol = _num(ctx, p.get("tolerance", 1e-3 / L), "point", i, "tolerance", positive=True) * L
        atol = _num(ctx, p.get("angle_tolerance", 0.5), "point", i, "angle_tolerance", positive=True) * _DEG
        points.append(WorkPoint(pname.strip(), T, rule, tol, atol))
    names = {p.name for p in points}

    # ---- CSV files embedded in the text (results files keep the files a cell names)
    embedded, csv_texts = {}, {}
    raw_emb = data.get("embedded_csv", [])
    if not isinstance(raw_emb, list):
        raise CellFileError(f"{source_name}: 'embedded_csv' must be an array of tables ([[embedded_csv]])")
    for i, e in enumerate(raw_emb):
        _keys(ctx, e, {"file", "text"}, "embedded_csv", i)
        if not isinstance(e.get("file"), str) or not isinstance(e.get("text"), str):
            raise ctx.err("expected file = NAME and text = CSV content (strings)", "embedded_csv", i)
        embedded[e["file"]] = e["text"]

    # ---- paths
    raw_paths = data.get("path", [])
    if not isinstance(raw_paths, list):
        raise CellFileError(f"{source_name}: 'path' must be an array of tables ([[path]])")
    paths = []
    for i, p in enumerate(raw_paths):
        _keys(ctx, p, _PATH_KEYS, "path", i)
        pname = p.get("name")
        if not isinstance(pname, str) or not pname.strip():
            raise ctx.err(f"expected a non-empty string, got {pname!r}", "path", i, "name")
        if any(q.name == pname for q in paths):
            raise ctx.err(f"duplicate path name {pname!r}", "path", i, "name")
        if "speed" not in p:
            raise ctx.err("missing key 'speed' (tool speed in mm/s)", "path", i)
        speed = _num(ctx, p["speed"], "path", i, "speed")
        if speed <= 0:
            raise ctx.err(f"tool speed must be > 0 mm/s, got {speed:g}", "path", i, "speed")
        if "csv" in p:
            paths.append(_csv_path(ctx, p, i, pname.strip(), speed, source_name, embedded, csv_texts))
            continue
        stray = sorted(set(p) & {"columns", "rotation", "csv_unit"})
        if stray:
            raise ctx.err("only a path from a CSV file ('csv') takes this key", "path", i, stray[0])
        if ("through" in p) == ("start" in p):
            raise ctx.err("give either 'through' (a polyline), 'start' with 'segments', or 'csv' (a file of TCP "
                          "poses)", "path", i)
        segs = []
        if "through" in p:
            thr = p["through"]
            if not isinstance(thr, list) or len(thr) < 2 or not all(isinstance(s, str) for s in thr):
                raise ctx.err(f"expected a list of at least 2 point names, got {thr!r}", "path", i, "through")
            start = thr[0]
            segs = [Segment("line", s) for s in thr[1:]]
            key = "through"
        else:
            start = p["start"]
            if not isinstance(start, str):
                raise ctx.err(f"expected a point name, got {start!r}", "path", i, "start")
            raw_segs = p.get("segments")
            if not isinstance(raw_segs, list) or not raw_segs:
                raise ctx.err("expected a non-empty list like [{line = \"b\"}, {arc = \"c\", via = \"m\"}]",
                              "path", i, "segments")
            for s in raw_segs:
                if not isinstance(s, dict) or not ({"line"} == set(s) or {"arc", "via"} == set(s)):
                    raise ctx.err(f"each segment is {{line = NAME}} or {{arc = NAME, via = NAME}}, got {s!r}",
                                  "path", i, "segments")
                if "line" in s:
                    segs.append(Segment("line", s["line"]))
                else:
                    segs.append(Segment("arc", s["arc"], s["via"]))
            key = "segments"
        path = Path(pname.strip(), start, tuple(segs), speed * 1e-3, "free")
        for nm in path.point_names():
            if not isinstance(nm, str) or nm not in names:
                raise ctx.err(f"path goes through {nm!r}, which is not a work point name "
                              f"(known: {', '.join(sorted(names))})", "path", i, key if nm != start or key == "through" else "start")
        by = {q.name: q for q in points}
        prev = by[start].position
        for s in segs:
            nxt = by[s.to].position
            if np.linalg.norm(nxt - prev) < 1e-9:
                raise ctx.err(f"segment to {s.to!r} has zero length", "path", i, key)
            if s.kind == "arc":
                mid = by[s.via].position
                if np.linalg.norm(np.cross(mid - prev, nxt - prev)) < 1e-9 * max(1.0, np.linalg.norm(nxt - prev)) ** 2:
                    raise ctx.err(f"arc to {s.to!r} via {s.via!r}: the three points are on one line", "path", i, key)
            prev = nxt
        rule = p.get("orientation", by[start].rule)
        if rule not in ORIENTATION_RULES:
            raise ctx.err(f"expected one of fixed, axis, free, got {rule!r}", "path", i, "orientation")
        rank = {"free": 0, "axis": 1, "fixed": 2}
        for nm in path.point_names():
            if rank[by[nm].rule] < rank[rule]:
                raise ctx.err(f"orientation {rule!r} needs every point of the path to give one; "
                              f"point {nm!r} is {by[nm].rule!r}", "path", i, "orientation")
        paths.append(Path(pname.strip(), start, tuple(segs), speed * 1e-3, rule))

    # ---- boxes, keep-out zones, cylinders
    def _collide(tbl, table, i):
        v = tbl.get("collide", True)
        if not isinstance(v, bool):
            raise ctx.err(f"expected true or false, got {v!r}", table, i, "collide")
        return v

    def _boxes(table, allowed, keep_out):
        raw_boxes = data.get(table, [])
        if not isinstance(raw_boxes, list):
            raise CellFileError(f"{source_name}: '{table}' must be an array of tables ([[{table}]])")
        out = []
        for i, b in enumerate(raw_boxes):
            _keys(ctx, b, allowed, table, i)
            bname = b.get("name", f"{table.replace('_', '-')} {i + 1}")
            if not isinstance(bname, str):
                raise ctx.err("expected a string", table, i, "name")
            for k in ("center", "size"):
                if k not in b:
                    raise ctx.err(f"missing key '{k}'", table, i)
            size = _coord(ctx, _vec(ctx, b["size"], table, i, "size") * L, table, i, "size", unit)
            if np.any(size <= 0):
                raise ctx.err("every size must be > 0", table, i, "size")
            out.append(Box(bname, _coord(ctx, _vec(ctx, b["center"], table, i, "center") * L, table, i, "center",
                                         unit), size,
                           _num(ctx, b.get("yaw", 0.0), table, i, "yaw") * _DEG,
                           True if keep_out else _collide(b, table, i), keep_out))
        return out

    boxes = _boxes("box", _BOX_KEYS, False)
    keep_outs = _boxes("keep_out", _KEEP_KEYS, True)
    raw_cyl = data.get("cylinder", [])
    if not isinstance(raw_cyl, list):
        raise CellFileError(f"{source_name}: 'cylinder' must be an array of tables ([[cylinder]])")
    cylinders = []
    for i, cy in enumerate(raw_cyl):
        _keys(ctx, cy, _CYL_KEYS, "cylinder", i)
        cname = cy.get("name", f"cylinder {i + 1}")
        if not isinstance(cname, str):
            raise ctx.err("expected a string", "cylinder", i, "name")
        for k in ("center", "radius", "height"):
            if k not in cy:
                raise ctx.err(f"missing key '{k}'", "cylinder", i)
        ax = _vec(ctx, cy.get("axis", [0, 0, 1]), "cylinder", i, "axis")
        if np.linalg.norm(ax) < 1e-9:
            raise ctx.err("zero-length axis; expected a direction", "cylinder", i, "axis")
        cylinders.append(Cylinder(cname, _coord(ctx, _vec(ctx, cy["center"], "cylinder", i, "center") * L,
                                                "cylinder", i, "center", unit),
                                  _coord(ctx, _num(ctx, cy["radius"], "cylinder", i, "radius", positive=True) * L,
                                         "cylinder", i, "radius", unit),
                                  _coord(ctx, _num(ctx, cy["height"], "cylinder", i, "height", positive=True) * L,
                                         "cylinder", i, "height", unit),
                                  ax / np.linalg.norm(ax), _collide(cy, "cylinder", i)))

    # ---- mount region
    mount = None
    if "mount" in data:
        m = data["mount"]
        _keys(ctx, m, _MOUNT_KEYS, "mount")
        axes = {}
        for ax in ("x", "y"):
            if ax not in m:
                raise ctx.err(f"missing key '{ax}' ([min, max] or a single value)", "mount")
            r = _coord(ctx, _numlist(ctx, m[ax], "mount", ax) * L, "mount", None, ax, unit) / L
            if len(r) == 1:
                r = np.array([r[0], r[0]])
            if len(r) != 2:
                raise ctx.err(f"expected [min, max], got {m[ax]!r}", "mount", None, ax)
            if r[1] < r[0]:
                raise ctx.err(f"empty candidate region: min {r[0]:g} > max {r[1]:g}", "mount", None, ax)
            skey = f"step_{ax}" if f"step_{ax}" in m else "step"
            if r[1] > r[0]:
                if skey not in m:
                    raise ctx.err(f"missing key 'step' (grid step, {unit})", "mount")
                step = _num(ctx, m[skey], "mount", None, skey, positive=True)
                n = int(math.floor((r[1] - r[0]) / step + 1e-9)) + 1
                if n > MAX_MOUNT_CANDIDATES:  # refuse before allocating the axis
                    raise ctx.err(f"{n} grid values along {ax}; at most {MAX_MOUNT_CANDIDATES} candidates "
                                  f"in all (use a coarser step or a smaller range)", "mount", None, skey)
                vals = r[0] + step * np.arange(n)
            else:
                vals = r[:1]
            axes[ax] = vals * L
        heights = _coord(ctx, _numlist(ctx, m.get("heights", [0.0]), "mount", "heights") * L, "mount", None,
                         "heights", unit)
        yaws = _numlist(ctx, m.get("yaws", [0.0]), "mount", "yaws") * _DEG
        st = m.get("style", "floor")
        st_list = st if isinstance(st, list) else [st]
        if not st_list:
            raise ctx.err("empty candidate region: the style list is empty", "mount", None, "style")
        styles, tilts = [], []
        for s in st_list:
            if isinstance(s, str) and s in STYLE_TILTS:
                styles.append(s)
                tilts.append(STYLE_TILTS[s] * _DEG)
            elif isinstance(s, (int, float)) and not isinstance(s, bool) and math.isfinite(s):
                styles.append(f"tilt {float(s):g} deg")
                tilts.append(float(s) * _DEG)
            else:
                raise ctx.err(f"expected floor, wall, ceiling or a tilt in degrees, got {s!r}", "mount", None, "style")
        mount = MountRegion(axes["x"], axes["y"], heights, yaws, tuple(styles), np.array(tilts))
        if mount.count > MAX_MOUNT_CANDIDATES:
            raise ctx.err(f"{mount.count} candidates; at most {MAX_MOUNT_CANDIDATES} (use a coarser step)",
                          "mount", None, "step")

    placement = None
    if "placement" in data:
        pl = data["placement"]
        _keys(ctx, pl, _PLACE_KEYS, "placement")
        placement = make_transform(_coord(ctx, _vec(ctx, pl.get("xyz", [0, 0, 0]), "placement", None, "xyz") * L,
                                          "placement", None, "xyz", unit),
                                   _vec(ctx, pl.get("rpy", [0, 0, 0]), "placement", None, "rpy") * _DEG)

    # ---- joint trajectories from CSV files
    raw_tr = data.get("trajectory", [])
    if not isinstance(raw_tr, list):
        raise CellFileError(f"{source_name}: 'trajectory' must be an array of tables ([[trajectory]])")
    trajectories = []
    for i, t in enumerate(raw_tr):
        _keys(ctx, t, _TRAJ_KEYS, "trajectory", i)
        tname = t.get("name")
        if not isinstance(tname, str) or not tname.strip():
            raise ctx.err(f"expected a non-empty string, got {tname!r}", "trajectory", i, "name")
        if any(x.name == tname.strip() for x in trajectories) or any(x.name == tname.strip() for x in paths):
            raise ctx.err(f"duplicate name {tname!r} (paths and trajectories need distinct names)", "trajectory", i,
                          "name")
        from .taskdata import parse_layout, read_trajectory_csv, with_text

        layout = with_text(parse_layout(ctx, t, "trajectory", i, _base_dir(source_name), "trajectory", embedded))
        csv_texts[layout.name] = layout.text
        trajectories.append(read_trajectory_csv(layout, tname.strip()))

    # ---- requirements: cell-wide defaults, then per point / per path
    from .requirements import Requirements, parse_requirements

    base = Requirements()
    if "requirements" in data:
        base = parse_requirements(ctx, data["requirements"], ("requirements", None), L, base, "cell")
    point_reqs, path_reqs = {}, {}
    for i, p in enumerate(raw_pts):
        if "requirements" in p:
            point_reqs[points[i].name] = parse_requirements(ctx, p["requirements"], ("point", i), L, base, "point")
    for i, p in enumerate(raw_paths):
        if "requirements" in p:
            path_reqs[paths[i].name] = parse_requirements(ctx, p["requirements"], ("path", i), L, base, "path")
    for i, t in enumerate(raw_tr):
        if "requirements" in t:
            path_reqs[trajectories[i].name] = parse_requirements(ctx, t["requirements"], ("trajectory", i), L, base,
                                                                 "path")

    return Cell(name.strip(), tuple(points), tuple(paths), tuple(boxes), mount, placement, desc, unit,
                text, source_name, requirements=base, point_requirements=point_reqs, path_requirements=path_reqs,
                cylinders=tuple(cylinders), keep_outs=tuple(keep_outs), floor=floor, trajectories=tuple(trajectories),
                csv_texts=csv_texts)


def _base_dir(source_name: str) -> str:
    """Folder that CSV file names in a cell file are relative to (the cell file's own)."""
    if source_name and not source_name.startswith("<"):
        return os.path.dirname(os.path.abspath(source_name))
    return os.getcwd()


def _csv_path(ctx, p, i, name, speed, source_name, embedded=None, csv_texts=None) -> Path:
    """A [[path]] with 'csv': the file's TCP poses as the path's samples."""
    from .taskdata import parse_layout, read_pose_csv, with_text

    for k in ("through", "start", "segments"):
        if k in p:
            raise ctx.err("a path from a CSV file takes no points ('through', 'start', 'segments')", "path", i, k)
    layout = parse_layout(ctx, p, "path", i, _base_dir(source_name), "path", embedded)
    rule = p.get("orientation", "fixed" if layout.rotation != "none" else "free")
    if rule not in ORIENTATION_RULES:
        raise ctx.err(f"expected one of fixed, axis, free, got {rule!r}", "path", i, "orientation")
    if rule != "free" and layout.rotation == "none":
        raise ctx.err(f"orientation {rule!r} needs rotation columns (rotation = 'rpy' or 'quaternion')", "path", i,
                      "orientation")
    layout = with_text(layout)
    if csv_texts is not None:
        csv_texts[layout.name] = layout.text
    poses = read_pose_csv(layout)
    return Path(name, "", (), speed * 1e-3, rule, poses, layout.file)


# ----------------------------------------------------------------------------------------------
# mount candidates


def style_tilt(style) -> float:
    """Tilt (rad) of a mount style name or a tilt given in degrees."""
    if isinstance(style, str):
        if style not in STYLE_TILTS:
            raise WorkbenchError(f"mount style: expected floor, wall, ceiling or a tilt in degrees, got {style!r}")
        return STYLE_TILTS[style] * _DEG
    return float(style) * _DEG


def mount_transforms(x, y, h, yaw, tilt=0.0) -> np.ndarray:
    """Base-in-cell transforms ``T(x, y, h) @ Rz(yaw) @ Ry(tilt)`` (broadcast) -> (..., 4, 4).

    Parameters
    ----------
    x, y, h : array_like
        Base origin in the cell frame, m.
    yaw, tilt : array_like
        Rotation about the cell z axis, then about the rotated y axis, rad.
    """
    x, y, h, yaw, tilt = np.broadcast_arrays(*(np.asarray(v, float) for v in (x, y, h, yaw, tilt)))
    return translation(x, y, h) @ rot_z(yaw) @ rot_y(tilt)


def candidate_grid(region: MountRegion) -> np.ndarray:
    """(S, H, Y, ny, nx, 4, 4) mount transforms of every candidate of ``region``."""
    S = region.tilts[:, None, None, None, None]
    H = region.heights[None, :, None, None, None]
    Yw = region.yaws[None, None, :, None, None]
    yy = region.ys[None, None, None, :, None]
    xx = region.xs[None, None, None, None, :]
    return mount_transforms(xx, yy, H, Yw, S)


# ----------------------------------------------------------------------------------------------
# path sampling


@dataclass(frozen=True, eq=False)
class PathSamples:
    """Samples along a path (cell frame, SI units).

    Attributes
    ----------
    s : (N,) ndarray
        Distance along the path, m.
    poses : (N, 4, 4) ndarray
        TCP targets (rotation meaningful per ``rule``).
    tangent : (N, 3) ndarray
        Unit tangent of the path.
    omega_per_m : (N, 3) ndarray
        Tool angular velocity per unit path speed (rad/m) from the orientation interpolation.
    segment : (N,) int ndarray
        Segment index of each sample.
    corners : (K,) ndarray
        Path distances of the segment ends (m).
    """

    s: np.ndarray
    poses: np.ndarray
    tangent: np.ndarray
    omega_per_m: np.ndarray
    segment: np.ndarray
    corners: np.ndarray
    rule: str
    speed: float
    name: str

    @property
    def length(self) -> float:
        return float(self.corners[-1]) if len(self.corners) else 0.0


def _rotvec(R):
    from scipy.spatial.transform import Rotation

    return Rotation.from_matrix(R).as_rotvec()


def _rot_from_rotvec(v):
    from scipy.spatial.transform import Rotation

    return Rotation.from_rotvec(v).as_matrix()


def _align(a, b):
    """Smallest rotation (3, 3) taking unit vector a to unit vector b."""
    a = a / np.linalg.norm(a)
    b = b / np.linalg.norm(b)
    v = np.cross(a, b)
    c = float(a @ b)
    sn = float(np.linalg.norm(v))
    if sn < 1e-12:
        if c > 0:
            return np.eye(3)
        return _tool_z_frame(a) @ np.diag([1.0, -1.0, -1.0]) @ _tool_z_frame(a).T
    return _rot_from_rotvec(v / sn * math.atan2(sn, c))


def sample_path(cell: Cell, path: Path, spacing: float) -> PathSamples:
    """Sample ``path`` of ``cell`` every ``spacing`` metres (at least 2 samples per segment).

    Lines are straight; arcs are circles through start, via and end. Orientation: "fixed" turns
    at a constant rate about one axis from each segment's start orientation to its end orientation
    (slerp); "axis" turns the tool axis likewise by the smallest rotation; "free" keeps the start's.
    """
    if not (isinstance(spacing, (int, float)) and math.isfinite(spacing) and spacing > 0):
        raise WorkbenchError(f"path audit 'spacing': expected a positive length in metres, got {spacing!r}")
    if path.poses is not None:  # a path from a CSV file: its rows, as they are
        from .taskdata import samples_from_poses

        return samples_from_poses(path.poses, path.rule, path.speed, path.name)
    by = {p.name: p for p in cell.points}
    s_all, P_all, R_all, t_all, w_all, seg_all = [], [], [], [], [], []
    corners = [0.0]
    s0 = 0.0
    prev = by[path.start]
    R_prev = prev.pose[:3, :3]
    for k, seg in enumerate(path.segments):
        nxt = by[seg.to]
        a, b = prev.position, nxt.position
        if seg.kind == "line":
            length = float(np.linalg.norm(b - a))
            m = max(2, int(math.ceil(length / spacing - 1e-9)) + 1)
            u = np.linspace(0.0, 1.0, m)
            pos = a + u[:, None] * (b - a)
            tan = np.tile((b - a) / length, (m, 1))
        else:
            c3 = by[seg.via].position
            # circle through a, c3, b
            ab, ac = b - a, c3 - a
            nrm = np.cross(ab, ac)
            nn = nrm @ nrm
            centre = a + (np.cross(nrm, ab) * (ac @ ac) + np.cross(ac, nrm) * (ab @ ab)) / (2 * nn)
            radius = float(np.linalg.norm(a - centre))
            axis = -nrm / math.sqrt(nn)  # (ac x ab): a -> via -> b turns positively about it
            e1 = (a - centre) / radius
            e2 = np.cross(axis, e1)

            def ang(p):
                d = p - centre
                return math.atan2(d @ e2, d @ e1) % (2 * math.pi)

            th_b = ang(b)  # the arc from a (0) runs positively about axis through via then to b
            length = radius * th_b
            m = max(2, int(math.ceil(length / spacing - 1e-9)) + 1)
            th = np.linspace(0.0, th_b, m)
            pos = centre + radius * (np.cos(th)[:, None] * e1 + np.sin(th)[:, None] * e2)
            tan = -np.sin(th)[:, None] * e1 + np.cos(th)[:, None] * e2
            u = th / th_b
        R_next = nxt.pose[:3, :3]
        if path.rule == "fixed":
            rv = _rotvec(R_next @ R_prev.T)
        elif path.rule == "axis":
            rv = _rotvec(_align(R_prev[:, 2], R_next[:, 2]))
        else:
            rv = np.zeros(3)
        Rs = _rot_from_rotvec(u[:, None] * rv) @ R_prev
        w = np.tile(rv / length, (m, 1))
        if path.rule == "axis":
            R_end = Rs[-1]
        elif path.rule == "fixed":
            R_end = R_next
        else:
            R_end = R_prev
        sl = s0 + u * length if seg.kind == "line" else s0 + th * radius
        start = 0 if k == 0 else 1  # the joint sample is shared with the previous segment
        s_all.append(sl[start:]); P_all.append(pos[start:]); R_all.append(Rs[start:])
        t_all.append(tan[start:]); w_all.append(w[start:]); seg_all.append(np.full(m - start, k))
        s0 += length
        corners.append(s0)
        prev, R_prev = nxt, R_end
    s = np.concatenate(s_all)
    N = len(s)
    poses = np.tile(np.eye(4), (N, 1, 1))
    poses[:, :3, :3] = np.concatenate(R_all)
    poses[:, :3, 3] = np.concatenate(P_all)
    return PathSamples(s, poses, np.concatenate(t_all), np.concatenate(w_all), np.concatenate(seg_all),
                       np.array(corners), path.rule, path.speed, path.name)


def relative_targets(mounts: np.ndarray, poses: np.ndarray) -> np.ndarray:
    """Targets in the arm base frame: ``inverse(mount) @ pose``.

    Parameters
    ----------
    mounts : (..., 4, 4)
        Base-in-cell transforms.
    poses : (P, 4, 4)
        Work point poses in the cell frame.

    Returns
    -------
    (..., P, 4, 4) ndarray
    """
    inv = inverse_transform(np.asarray(mounts, float))
    return np.einsum("...ij,pjk->...pik", inv, np.asarray(poses, float))
