"""Real task data: tool paths from CSV files of TCP poses and joint trajectories from CSV files
of time + joint values, audited as they are.

Cell-file schema (the column names and units are declared in the cell file)::

    [[path]]
    name = "seam (exported)"
    csv = "seam.csv"               # relative to the cell file
    columns = ["X", "Y", "Z", "A", "B", "C"]   # x, y, z, then the rotation's columns
    rotation = "rpy"               # "rpy": roll, pitch, yaw in degrees (R = Rz(yaw) Ry(pitch) Rx(roll));
                                   # "quaternion": 4 columns w, x, y, z; "none": 3 columns only
    csv_unit = "mm"                # unit of x, y, z in the file: "mm" or "m"
    speed = 150                    # tool speed, mm/s
    orientation = "fixed"          # "fixed", "axis" (tool z only) or "free" (positions only)

    [[trajectory]]
    name = "recorded pick"
    csv = "pick.csv"
    time = "t"                     # the time column
    joints = ["J1", "J2", "J3", "J4", "J5", "J6"]   # one column per arm joint, base to tip
    angle_unit = "deg"             # revolute joints: "deg" or "rad"
    csv_unit = "mm"                # prismatic joints: "mm" or "m"
    time_unit = "s"                # "s" or "ms"

The first row of a file names its columns (other columns are ignored); every later row is one
sample. A pose path's rows are the path's samples (no resampling): distance along the path is the
sum of the chord lengths, the tangent and the turn rate come from neighbouring rows. A trajectory's
joint speeds and accelerations come from its times (second-order differences, ``np.gradient``).

Every bad row gives one line: ``FILE: line L, column 'NAME': what is wrong``.
"""
from __future__ import annotations

import csv
import io
import math
import os
from dataclasses import dataclass, field

import numpy as np

from ..errors import WorkbenchError

__all__ = ["TaskDataError", "PoseCsv", "TrajectoryCsv", "Trajectory", "read_pose_csv", "write_pose_csv",
           "read_csv_text", "self_contained_text",
           "samples_from_poses", "read_trajectory_csv", "write_trajectory_csv", "trajectory_rates",
           "MAX_ROWS"]

MAX_ROWS = 2_000_000
MAX_CSV_BYTES = 256 * 1024 * 1024
_UNITS = {"m": 1.0, "mm": 1e-3}
_DEG = math.pi / 180.0


class TaskDataError(WorkbenchError):
    """A bad task-data file: the message names the file, the line and the column."""


@dataclass(frozen=True)
class PoseCsv:
    """How a pose CSV file is laid out (from the cell file)."""

    file: str
    columns: tuple
    rotation: str = "rpy"        # "rpy" | "quaternion" | "none"
    unit: str = "mm"
    name: str = ""               # the file name as the cell file writes it
    text: str | None = field(default=None, repr=False, compare=False)   # its content when embedded


@dataclass(frozen=True)
class TrajectoryCsv:
    """How a joint-trajectory CSV file is laid out (from the cell file)."""

    file: str
    time: str
    joints: tuple
    angle_unit: str = "deg"
    unit: str = "mm"
    time_unit: str = "s"
    name: str = ""
    text: str | None = field(default=None, repr=False, compare=False)


@dataclass(frozen=True, eq=False)
class Trajectory:
    """A joint trajectory: name, times t (N,) in s, joint columns (N, n) in file units, layout."""

    name: str
    t: np.ndarray
    values: np.ndarray
    layout: TrajectoryCsv
    requirements: object = None

    def joint_values(self, arm) -> np.ndarray:
        """Joint values (N, n) in rad / m for ``arm``; the column count must match its joints."""
        m = arm.model
        if self.values.shape[1] != m.n:
            raise TaskDataError(f"{self.layout.file}: trajectory {self.name!r} has {self.values.shape[1]} joint "
                                f"columns ({', '.join(self.layout.joints)}) but arm {m.name!r} has {m.n} joints")
        asc = _DEG if self.layout.angle_unit == "deg" else 1.0
        lsc = _UNITS[self.layout.unit]
        return self.values * np.array([asc if j.revolute else lsc for j in m.joints])


def read_csv_text(path, what) -> str:
    """The text of a CSV file (UTF-8, a BOM dropped), or a one-line TaskDataError."""
    try:
        with open(path, "rb") as fh:
            raw = fh.read(MAX_CSV_BYTES + 1)
    except FileNotFoundError:
        raise TaskDataError(f"{path}: no such file ({what})") from None
    except IsADirectoryError:
        raise TaskDataError(f"{path}: is a directory, expected a CSV file ({what})") from None
    except OSError as exc:
        raise TaskDataError(f"{path}: cannot be read ({exc.strerror})") from None
    if len(raw) > MAX_CSV_BYTES:
        raise TaskDataError(f"{path}: more than {MAX_CSV_BYTES:,} bytes; at most that much is read ({what})")
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise TaskDataError(f"{path}: not UTF-8 text; expected a CSV file ({what})") from None


def _read_table(path, names, what, text=None):
    """Rows of the named columns as floats (N, len(names)) and the row line numbers, from the file
    (or its embedded ``text``); errors name file, line, column."""
    if text is None:
        text = read_csv_text(path, what)
    fh = io.StringIO(text, newline="")
    with fh:
        try:
            sample = fh.read(65536)
            fh.seek(0)
            try:
                dialect = csv.Sniffer().sniff(sample, delimiters=",;\t")
            except csv.Error:
                dialect = csv.excel
            reader = csv.reader(fh, dialect)
            header = next(reader, None)
            if header is None:
                raise TaskDataError(f"{path}: line 1: empty file; expected a header row naming the columns")
            header = [h.strip() for h in header]
            idx = []
            for nm in names:
                if nm not in header:
                    raise TaskDataError(f"{path}: line 1: no column {nm!r}; the file's columns are "
                                        f"{', '.join(repr(h) for h in header)}")
                idx.append(header.index(nm))
            rows = []
            for line_no, row in enumerate(reader, start=2):
                if not row or all(not c.strip() for c in row):
                    continue
                if len(rows) >= MAX_ROWS:
                    raise TaskDataError(f"{path}: line {line_no}: more than {MAX_ROWS} rows")
                vals = []
                for nm, i in zip(names, idx):
                    if i >= len(row):
                        raise TaskDataError(f"{path}: line {line_no}, column {nm!r}: missing (the row has only "
                                            f"{len(row)} fields)")
                    cell = row[i].strip()
                    try:
                        v = float(cell)
                    except ValueError:
                        raise TaskDataError(f"{path}: line {line_no}, column {nm!r}: expected a number, got "
                                            f"{cell!r}") from None
                    if not math.isfinite(v):
                        raise TaskDataError(f"{path}: line {line_no}, column {nm!r}: expected a finite number, "
                                            f"got {cell!r}")
                    vals.append(v)
                rows.append((line_no, vals))
        except UnicodeDecodeError:
            raise TaskDataError(f"{path}: not UTF-8 text; expected a CSV file ({what})") from None
        except csv.Error as exc:
            raise TaskDataError(f"{path}: line {reader.line_num}: malformed CSV ({exc})") from None
    if len(rows) < 2:
        raise TaskDataError(f"{path}: {len(rows)} data row{'s' if len(rows) != 1 else ''}; {what} needs at least 2")
    lines = np.array([r[0] for r in rows])
    return np.array([r[1] for r in rows], dtype=float), lines


def _quat_matrix(w, x, y, z):
    n = np.sqrt(w * w + x * x + y * y + z * z)
    w, x, y, z = w / n, x / n, y / n, z / n
    return np.stack([
        np.stack([1 - 2 * (y * y + z * z), 2 * (x * y - z * w), 2 * (x * z + y * w)], -1),
        np.stack([2 * (x * y + z * w), 1 - 2 * (x * x + z * z), 2 * (y * z - x * w)], -1),
        np.stack([2 * (x * z - y * w), 2 * (y * z + x * w), 1 - 2 * (x * x + y * y)], -1)], -2)


def read_pose_csv(layout: PoseCsv) -> np.ndarray:
    """TCP poses (N, 4, 4) in the cell frame (m) from a pose CSV file."""
    need = {"rpy": 6, "quaternion": 7, "none": 3}[layout.rotation]
    data, lines = _read_table(layout.file, list(layout.columns[:need]), "a pose path", layout.text)
    from ..limits import MAX_CELL_COORD

    N = data.shape[0]
    xyz = data[:, :3] * _UNITS[layout.unit]
    far = np.argwhere(np.abs(xyz) > MAX_CELL_COORD)
    if len(far):
        r, c = far[0]
        raise TaskDataError(f"{layout.file}: line {lines[r]}, column {layout.columns[c]!r}: {data[r, c]:g} "
                            f"{layout.unit} is more than {MAX_CELL_COORD:g} m from the cell origin (wrong csv_unit?)")
    T = np.tile(np.eye(4), (N, 1, 1))
    T[:, :3, 3] = xyz
    if layout.rotation == "rpy":
        from ..arm.transforms import make_transform

        T[:, :3, :3] = [make_transform(np.zeros(3), r * _DEG)[:3, :3] for r in data[:, 3:6]]
    elif layout.rotation == "quaternion":
        nq = np.linalg.norm(data[:, 3:7], axis=1)
        bad = np.flatnonzero(nq < 1e-9)
        if bad.size:
            raise TaskDataError(f"{layout.file}: line {lines[bad[0]]}, column {layout.columns[3]!r}: the quaternion "
                                f"is zero; expected w, x, y, z of a rotation")
        T[:, :3, :3] = _quat_matrix(*data[:, 3:7].T)
    step = np.linalg.norm(np.diff(T[:, :3, 3], axis=0), axis=1)
    same = np.flatnonzero(step < 1e-9)
    if same.size:
        k = int(same[0]) + 1
        raise TaskDataError(f"{layout.file}: line {lines[k]}, column {layout.columns[0]!r}: the same position as "
                            f"line {lines[k - 1]}; a path needs distinct positions (drop repeated rows)")
    return T


def write_pose_csv(path, poses, layout: PoseCsv) -> None:
    """Write poses (N, 4, 4) with ``layout``'s columns and units (9 significant digits in m)."""
    from ..arm.transforms import matrix_to_rpy

    poses = np.asarray(poses, float)
    sc = 1.0 / _UNITS[layout.unit]
    need = {"rpy": 6, "quaternion": 7, "none": 3}[layout.rotation]
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(layout.columns[:need])
        for T in poses:
            row = list(T[:3, 3] * sc)
            if layout.rotation == "rpy":
                row += list(np.degrees(matrix_to_rpy(T[:3, :3])))
            elif layout.rotation == "quaternion":
                from scipy.spatial.transform import Rotation

                x, y, z, qw = Rotation.from_matrix(T[:3, :3]).as_quat()
                row += [qw, x, y, z]
            w.writerow([f"{v:.12g}" for v in row])


def samples_from_poses(poses, rule: str, speed: float, name: str):
    """A :class:`~workbench.studies.cell.PathSamples` of the given poses as they are: distance =
    cumulative chord length, tangent = normalised central difference of the positions, turn rate =
    the rotation between neighbours per metre (averaged at inner samples)."""
    from .cell import PathSamples, _rotvec

    poses = np.asarray(poses, float)
    P = poses[:, :3, 3]
    step = np.linalg.norm(np.diff(P, axis=0), axis=1)
    s = np.concatenate([[0.0], np.cumsum(step)])
    tan = np.gradient(P, s, axis=0, edge_order=2 if len(s) >= 3 else 1)
    tan /= np.linalg.norm(tan, axis=1, keepdims=True)
    N = len(s)
    w_seg = np.zeros((N - 1, 3))
    if rule != "free":
        for k in range(N - 1):
            if rule == "fixed":
                R = poses[k + 1, :3, :3] @ poses[k, :3, :3].T
            else:
                from .cell import _align

                R = _align(poses[k, :3, 2], poses[k + 1, :3, 2])
            w_seg[k] = _rotvec(R) / step[k]
    w = np.zeros((N, 3))
    w[0], w[-1] = w_seg[0], w_seg[-1]
    if N > 2:
        w[1:-1] = 0.5 * (w_seg[:-1] + w_seg[1:])
    return PathSamples(s, poses.copy(), tan, w, np.zeros(N, int), np.array([0.0, float(s[-1])]), rule, speed, name)


def read_trajectory_csv(layout: TrajectoryCsv, name: str = "trajectory", requirements=None) -> Trajectory:
    """A :class:`Trajectory` from a CSV file of time + joint values (times strictly increasing)."""
    data, lines = _read_table(layout.file, [layout.time, *layout.joints], "a joint trajectory", layout.text)
    t = data[:, 0] * (1e-3 if layout.time_unit == "ms" else 1.0)
    dt = np.diff(t)
    bad = np.flatnonzero(~(dt > 0))
    if bad.size:
        k = int(bad[0]) + 1
        raise TaskDataError(f"{layout.file}: line {lines[k]}, column {layout.time!r}: time {data[k, 0]:g} does not "
                            f"increase from line {lines[k - 1]} ({data[k - 1, 0]:g}); expected strictly increasing "
                            f"times")
    return Trajectory(name, t - t[0], data[:, 1:], layout, requirements)


def write_trajectory_csv(path, t, values, layout: TrajectoryCsv) -> None:
    """Write times (N,) in s and joint columns (N, n) in file units with ``layout``'s names."""
    sc = 1e3 if layout.time_unit == "ms" else 1.0
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow([layout.time, *layout.joints])
        for tk, row in zip(np.asarray(t, float), np.asarray(values, float)):
            w.writerow([f"{tk * sc:.12g}", *(f"{v:.12g}" for v in row)])


def trajectory_rates(t, q):
    """Joint speeds and accelerations (N, n) of q (N, n) at times t (N,) (np.gradient, second order
    inside, first order at the ends)."""
    t = np.asarray(t, float)
    q = np.asarray(q, float)
    edge = 2 if len(t) >= 3 else 1
    qd = np.gradient(q, t, axis=0, edge_order=edge)
    qdd = np.gradient(qd, t, axis=0, edge_order=edge)
    return qd, qdd


def self_contained_text(cell, text: str) -> str:
    """The cell text with the CSV files it names appended as ``[[embedded_csv]]`` tables (their
    content as read), so that a results file holding it reads back without the files. The text is
    returned unchanged when the cell names no CSV file, a file holds ``'''`` or the result would be
    larger than a cell file may be."""
    from ..limits import MAX_TEXT_BYTES

    files = getattr(cell, "csv_texts", None) or {}
    if not files or text is None or "[[embedded_csv]]" in text:
        return text
    parts = [text.rstrip("\n"), "", "# ---- added by the workbench when the study ran: the CSV files this cell names, "
             "as they were read"]
    for name, body in files.items():
        body = body.replace("\r\n", "\n").replace("\r", "\n")  # TOML strings take no bare CR
        if "'''" in body or "\\" in name or '"' in name:
            return text
        parts += ["[[embedded_csv]]", f'file = "{name}"', "text = '''", body.rstrip("\n") + "'''", ""]
    out = "\n".join(parts)
    return out if len(out) <= MAX_TEXT_BYTES else text


def with_text(layout):
    """``layout`` with the file's text read (or kept when it came embedded in the cell text)."""
    from dataclasses import replace

    if layout.text is not None:
        return layout
    what = "a pose path" if isinstance(layout, PoseCsv) else "a joint trajectory"
    return replace(layout, text=read_csv_text(layout.file, what))


def parse_layout(ctx, tbl, table, index, base_dir, kind, embedded=None):
    """The CSV layout of a ``[[path]]`` with ``csv`` (kind "path") or a ``[[trajectory]]`` (kind
    "trajectory") from the cell file, errors through the cell reader's ``ctx``."""
    f = tbl.get("csv")
    if not isinstance(f, str) or not f.strip():
        raise ctx.err(f"expected a CSV file name, got {f!r}", table, index, "csv")
    file = f if os.path.isabs(f) else os.path.join(base_dir, f)
    text = (embedded or {}).get(f)
    unit = tbl.get("csv_unit", "mm")
    if unit not in _UNITS:
        raise ctx.err(f"expected 'mm' or 'm', got {unit!r}", table, index, "csv_unit")

    def names(key, count=None):
        v = tbl.get(key)
        if (not isinstance(v, list) or not v or not all(isinstance(x, str) and x.strip() for x in v)
                or (count is not None and len(v) != count)):
            want = f"a list of {count} column names" if count else "a list of column names"
            raise ctx.err(f"expected {want}, got {v!r}", table, index, key)
        if len(set(v)) != len(v):
            raise ctx.err(f"a column is named twice in {v!r}", table, index, key)
        return tuple(x.strip() for x in v)

    if kind == "path":
        rot = tbl.get("rotation", "rpy")
        if rot not in ("rpy", "quaternion", "none"):
            raise ctx.err(f"expected 'rpy', 'quaternion' or 'none', got {rot!r}", table, index, "rotation")
        need = {"rpy": 6, "quaternion": 7, "none": 3}[rot]
        return PoseCsv(file, names("columns", need), rot, unit, f, text)
    t = tbl.get("time")
    if not isinstance(t, str) or not t.strip():
        raise ctx.err(f"expected the name of the time column, got {t!r}", table, index, "time")
    au = tbl.get("angle_unit", "deg")
    if au not in ("deg", "rad"):
        raise ctx.err(f"expected 'deg' or 'rad', got {au!r}", table, index, "angle_unit")
    tu = tbl.get("time_unit", "s")
    if tu not in ("s", "ms"):
        raise ctx.err(f"expected 's' or 'ms', got {tu!r}", table, index, "time_unit")
    js = names("joints")
    if t.strip() in js:
        raise ctx.err(f"the time column {t!r} is also named as a joint column", table, index, "joints")
    return TrajectoryCsv(file, t.strip(), js, au, unit, tu, f, text)
