"""Arm files: our own TOML schema (read, validate, write back losslessly).

Schema (angles in degrees, lengths in the file's ``length_unit``: "m" or "mm")::

    [arm]
    name = "..."                 # required
    description = "..."          # optional
    geometry = "dh"              # "dh" (standard DH), "mdh" (modified DH) or "origins"
    length_unit = "m"            # "m" (default) or "mm"
    home = [0, -90, 90, 0, 0, 0] # optional; degrees (revolute) / length unit (prismatic)
    characteristic_length = 1.5  # optional (length unit): divides translational rows of mixed
                                 #   measures; default: the axis-chain length (model.axis_chain_length)

    [[joint]]                    # one table per joint, base to tip (at most MAX_JOINTS)
    name = "shoulder"            # required, unique; not only digits, no ':' or ','
    type = "revolute"            # or "prismatic" (default "revolute")
    # geometry = "dh":      a, alpha, d, theta  (row i: link i; theta/d are offsets added to q)
    # geometry = "mdh":     a, alpha, d, theta  (row i: a_{i-1}, alpha_{i-1}, d_i, theta_i)
    # geometry = "origins": xyz, and rpy or rot (fixed origin from the previous joint frame), axis
    limits = [-170, 170]         # optional (default unlimited); lower < upper
    max_speed = 180              # optional: deg/s or length-unit/s
    max_effort = 800             # optional: N m (revolute) or N (prismatic)
    max_acceleration = 600       # optional: deg/s^2 or length-unit/s^2 (cycle-time estimates)
    mass = 12.5                  # optional: kg of the link this joint moves
    com = [0, 0, 0.1]            # optional: centre of mass in that link's frame (length unit)

    [flange]                     # optional: extra fixed transform from the last link frame to
    xyz = [0, 0, 0.1]            #   the flange (for "dh" it follows the last DH row)
    rpy = [0, 0, 0]

    [tool]                       # optional: TCP relative to the flange
    xyz = [0, 0, 0.1]
    rpy = [0, 0, 0]              # or rot = [[...], [...], [...]] (rows of a rotation matrix)
    mass = 0.0                   # kg
    com = [0, 0, 0]              # in the TCP frame (length unit)

    [mount]                      # optional: arm base in the world (cell) frame
    xyz = [0, 0, 0]
    rpy = [0, 0, 0]

Collision shapes (lengths in ``length_unit``; in the link frame, where ``com`` is given)::

    [arm]
    skip = [["shoulder", "wrist_2"]]   # optional: more pairs of bodies not checked against each
                                       # other (joint names for their links, "base", "tool");
                                       # neighbours along the chain are never checked
    [[joint]]
    radius = 0.06                # short form: a capsule from this joint's frame origin to the next
                                 # joint's (the flange for the last joint) of this radius
    [[joint.shape]]              # or explicit shapes (any number; both forms may be combined)
    type = "capsule"             # a = [..], b = [..], radius
    # type = "sphere"            # center, radius
    # type = "box"               # center, size (full edges), rpy or rot
    # type = "cylinder"          # a, b (centres of the end faces), radius
    # type = "mesh"              # file (STL; relative to the arm file), scale = [1, 1, 1], xyz, rpy
    [tool]
    radius = 0.03                # a capsule from the flange to the TCP ...
    [[tool.shape]]               # ... and/or explicit shapes, in the flange frame
    [[base.shape]]               # shapes of the fixed base, in the base frame (mount feasibility)

``rpy`` is roll, pitch, yaw in degrees about fixed x, y, z (R = Rz(yaw) Ry(pitch) Rx(roll), the
URDF convention). Wherever ``rpy`` is allowed a rotation matrix ``rot`` (three rows of three
numbers) may be given instead; it must be orthonormal with determinant +1 to within 1e-6.

For "dh" the link frame of joint i (where ``com`` is given) is the DH frame i; for "mdh" and
"origins" it is the joint's own frame.

Every error is an :class:`ArmFileError` with one line naming the file, the line (when it can be
found), the table or joint (number and name), the key, the value received and what is expected.
Writing keeps the file's content (the parsed dict) exactly; comments and layout are not kept.
"""
from __future__ import annotations

import math
import os
import re
import tomllib
from dataclasses import replace

import numpy as np

from ..limits import MAX_MAGNITUDE, check_toml_text
from .model import PRISMATIC, REVOLUTE, ArmError, ArmModel, Joint
from .transforms import make_transform, matrix_to_rpy, rot_x, rot_z, translation

__all__ = ["ArmFileError", "read_arm_file", "parse_arm_dict", "parse_arm_text", "arm_to_dict",
           "write_arm_file", "dumps_arm", "same_arm", "arm_joint_name", "MAX_JOINTS", "MAX_FILE_BYTES"]

MAX_JOINTS = 32
MAX_FILE_BYTES = 4 * 1024 * 1024
_MAX_MAGNITUDE = MAX_MAGNITUDE  # any number in a file; larger values are typos, not arms
_ROT_TOL = 1e-6
_DEG = math.pi / 180.0
_UNITS = {"m": 1.0, "mm": 1e-3}
_TOP_KEYS = {"arm", "joint", "tool", "mount", "flange", "base"}
_ARM_KEYS = {"name", "description", "geometry", "length_unit", "home", "skip", "characteristic_length"}
_JOINT_COMMON = {"name", "type", "limits", "max_speed", "max_effort", "max_acceleration", "mass", "com", "radius",
                 "shape"}
_JOINT_GEOM = {"dh": {"a", "alpha", "d", "theta"}, "mdh": {"a", "alpha", "d", "theta"},
               "origins": {"xyz", "rpy", "rot", "axis"}}
_TOOL_KEYS = {"xyz", "rpy", "rot", "mass", "com", "radius", "shape"}
_SHAPE_KEYS = {"capsule": {"a", "b", "radius"}, "sphere": {"center", "radius"},
               "box": {"center", "size", "rpy", "rot"}, "cylinder": {"a", "b", "radius"},
               "mesh": {"file", "scale", "xyz", "rpy", "rot"}}
_PLACE_KEYS = {"xyz", "rpy", "rot"}
_RESERVED_NAMES = {"tcp", "flange", "base"}
_NAME_RE = re.compile(r"^[^\s:,\x00-\x1f\x7f]([^:,\x00-\x1f\x7f]{0,62}[^\s:,\x00-\x1f\x7f])?$")


def arm_joint_name(name: str, taken=()) -> str:
    """A joint name an arm file accepts, made from ``name`` (e.g. a URDF joint name): ':' ',' and
    control characters become '_', surrounding spaces go, a name of digits only or a reserved name
    (tcp, flange, base) gets a ``joint_`` prefix, at most 64 characters, and a ``_2``, ``_3`` ...
    suffix when the result is already in ``taken``. A valid name not in ``taken`` comes back as it is."""
    out = re.sub(r"[:,\x00-\x1f\x7f]", "_", str(name)).strip() or "joint"
    if out.isdigit() or out.lower() in _RESERVED_NAMES:
        out = f"joint_{out}"
    out = out[:64].strip()
    base, k = out, 2
    while out in taken or not _NAME_RE.match(out):
        tail = f"_{k}"
        out = base[:64 - len(tail)].strip() + tail
        k += 1
    return out


class ArmFileError(ArmError):
    """A bad arm file; the message names the file, the place and what is expected."""


# ---------------------------------------------------------------------------------------------
# where things are: file, line, table, key

class _Locator:
    """Finds the line of a table header or of a key inside a table in the TOML text (best effort;
    inline tables and dotted keys are not located, and then no line is given)."""

    _HEADER = re.compile(r"^\s*(\[\[?)\s*([A-Za-z0-9_\-\"' .]+?)\s*\]\]?\s*(#.*)?$")

    def __init__(self, text: str | None):
        self.headers: list[tuple[int, str, bool]] = []  # (0-based line, name, is_array)
        self.lines = text.splitlines() if text else []
        for k, line in enumerate(self.lines):
            m = self._HEADER.match(line)
            if m:
                self.headers.append((k, m.group(2).strip().strip("\"'"), m.group(1) == "[["))

    def _section(self, table: str, index: int | None):
        hits = [h for h in self.headers if h[1] == table]
        if index is not None:
            hits = [h for h in hits if h[2]]
            if index >= len(hits):
                return None
            start = hits[index][0]
        else:
            hits = [h for h in hits if not h[2]]
            if not hits:
                return None
            start = hits[0][0]
        nxt = [h[0] for h in self.headers if h[0] > start]
        return start, (nxt[0] if nxt else len(self.lines))

    def line(self, table: str | None, index: int | None = None, key: str | None = None) -> int | None:
        """1-based line of ``key`` in ``[table]`` (or the ``index``-th ``[[table]]``), else of the
        table header, else None."""
        if table is None:
            if key is None:
                return None
            end = self.headers[0][0] if self.headers else len(self.lines)
            span = (0, end)
            start = None
        else:
            span = self._section(table, index)
            if span is None:
                return None
            start = span[0]
        if key is not None:
            pat = re.compile(r"^\s*[\"']?" + re.escape(key) + r"[\"']?\s*=")
            for k in range(span[0] + (0 if table is None else 1), span[1]):
                if pat.match(self.lines[k]):
                    return k + 1
        return None if start is None else start + 1


class _Ctx:
    """Builds one-line error messages: ``FILE:LINE: [table] 'key': what is wrong``."""

    def __init__(self, source_name: str, text: str | None):
        self.name = source_name
        self.loc = _Locator(text)

    def fail(self, msg: str, table: str | None = None, index: int | None = None, key: str | None = None,
             label: str | None = None) -> ArmFileError:
        line = self.loc.line(table, index, key)
        head = f"{self.name}:{line}" if line else self.name
        if label is None:
            label = f"[{table}]" if table else ""
        shown = (f"'{key}'" if str(key).isprintable() else repr(str(key))) if key else ""  # control characters escaped: one line
        where = " ".join(p for p in (label, shown) if p)
        return ArmFileError(f"{head}: {where}: {msg}" if where else f"{head}: {msg}")


class _Scope:
    """Error helpers bound to one table (or one joint) of the file."""

    def __init__(self, ctx: _Ctx, table: str | None, index: int | None = None, label: str | None = None):
        self.ctx, self.table, self.index, self.label = ctx, table, index, label

    def fail(self, msg, key=None) -> ArmFileError:
        return self.ctx.fail(msg, self.table, self.index, key, self.label)

    def num(self, v, key, positive=False, nonneg=False, what="a number"):
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            raise self.fail(f"expected {what}, got {_show(v)}", key)
        try:
            f = float(v)
        except OverflowError:
            raise self.fail(f"expected {what} of magnitude below {_MAX_MAGNITUDE:g}, got {_show(v)}",
                            key) from None
        if not math.isfinite(f):
            raise self.fail(f"expected a finite number, got {_show(v)}", key)
        if abs(f) > _MAX_MAGNITUDE:
            raise self.fail(f"expected {what} of magnitude below {_MAX_MAGNITUDE:g}, got {_show(v)}", key)
        if positive and f <= 0:
            raise self.fail(f"expected a positive number, got {_show(v)}", key)
        if nonneg and f < 0:
            raise self.fail(f"expected a number >= 0, got {_show(v)}", key)
        return f

    def vec(self, v, key, size=3):
        if not isinstance(v, list) or len(v) != size:
            raise self.fail(f"expected a list of {size} numbers, got {_show(v)}", key)
        return np.array([self.num(x, key) for x in v], dtype=float)

    def keys(self, table, allowed):
        if not isinstance(table, dict):
            raise self.fail(f"expected a table, got {_type(table)}")
        unknown = sorted(str(k) for k in set(table) - allowed)
        if unknown:
            raise self.fail(f"unknown key {unknown[0]!r}; allowed keys: {', '.join(sorted(allowed))}",
                            unknown[0])

    def text(self, v, key, allow_empty=True):
        if not isinstance(v, str) or (not allow_empty and not v.strip()):
            raise self.fail(f"expected a {'' if allow_empty else 'non-empty '}string, got {_show(v)}", key)
        return v

    def rotation(self, table: dict, key_rpy="rpy", key_rot="rot") -> np.ndarray:
        """(3, 3) rotation from ``rpy`` (degrees) or ``rot`` (matrix rows); identity if neither."""
        if key_rpy in table and key_rot in table:
            raise self.fail(f"give either '{key_rpy}' or '{key_rot}', not both", key_rot)
        if key_rot in table:
            m = table[key_rot]
            if not isinstance(m, list) or len(m) != 3 or not all(isinstance(r, list) and len(r) == 3 for r in m):
                raise self.fail(f"expected a 3x3 rotation matrix as three rows of three numbers, got {_show(m)}",
                                key_rot)
            R = np.array([[self.num(x, key_rot) for x in r] for r in m], dtype=float)
            err = float(np.abs(R.T @ R - np.eye(3)).max())
            if err > _ROT_TOL:
                raise self.fail(f"not orthonormal (R^T R differs from the identity by {err:.3g}); expected a "
                                f"rotation matrix, or give 'rpy' in degrees instead", key_rot)
            if np.linalg.det(R) < 0:
                raise self.fail("determinant is -1 (a reflection); expected a rotation matrix with "
                                "determinant +1", key_rot)
            # remove the small non-orthogonality allowed by the tolerance
            U, _, Vt = np.linalg.svd(R)
            return U @ Vt
        rpy = self.vec(table.get(key_rpy, [0, 0, 0]), key_rpy) * _DEG
        return make_transform(np.zeros(3), rpy)[:3, :3]

    def place(self, table: dict, L: float) -> np.ndarray:
        """(4, 4) transform from ``xyz`` (length unit) and ``rpy``/``rot``."""
        T = np.eye(4)
        T[:3, :3] = self.rotation(table)
        T[:3, 3] = self.vec(table.get("xyz", [0, 0, 0]), "xyz") * L
        return T


def _type(v) -> str:
    return {dict: "a table", list: "an array", str: "a string", bool: "a boolean", int: "an integer",
            float: "a number"}.get(type(v), type(v).__name__)


def _show(v) -> str:
    s = repr(v)
    return s if len(s) <= 60 else s[:57] + "..."


# ---------------------------------------------------------------------------------------------
# collision shapes

def _parse_shapes(ctx: "_Ctx", raw, table: str, index, label: str, L: float, frame: np.ndarray,
                  base_dir: str | None) -> list:
    """The explicit ``shape`` list of one table -> Shapes in the body frame (``frame`` maps the
    file's link frame to it)."""
    from .shapes import MAX_SHAPES, box, capsule, check_shape, cylinder, sphere

    sc = _Scope(ctx, table, index, label)
    if isinstance(raw, dict):
        raw = [raw]
    if not isinstance(raw, list) or not all(isinstance(x, dict) for x in raw):
        raise sc.fail(f"expected shape tables ([[{table}.shape]]), got {_show(raw)}", "shape")
    if len(raw) > MAX_SHAPES:
        raise sc.fail(f"{len(raw)} shapes; at most {MAX_SHAPES} per link", "shape")
    out = []
    for k, sh in enumerate(raw):
        ss = _Scope(ctx, table, index, f"{label} shape {k + 1}")
        kind = sh.get("type")
        if kind not in _SHAPE_KEYS:
            raise ss.fail(f"expected 'type' = one of {', '.join(_SHAPE_KEYS)}, got {_show(kind)}", "type")
        ss.keys(sh, _SHAPE_KEYS[kind] | {"type"})
        need = [x for x in sorted(_SHAPE_KEYS[kind] - {"rpy", "rot", "scale", "xyz"}) if x not in sh]
        if need:
            raise ss.fail(f"missing key '{need[0]}' (a {kind} needs {', '.join(sorted(_SHAPE_KEYS[kind] - {'rpy', 'rot', 'scale', 'xyz'}))})")
        where = f"{ctx.name}: {label} shape {k + 1} ({kind})"
        if "radius" in sh:
            r = ss.num(sh["radius"], "radius")
            if r <= 0:
                raise ss.fail(f"radius must be > 0, got {_show(sh['radius'])}", "radius")
            r *= L
        if kind in ("capsule", "cylinder"):
            a = ss.vec(sh["a"], "a") * L
            b = ss.vec(sh["b"], "b") * L
            if kind == "capsule":
                shp = capsule(a, b, r)
            else:
                ln = float(np.linalg.norm(b - a))
                if ln <= 0:
                    raise ss.fail("a and b are the same point; a cylinder needs two distinct end centres", "b")
                T = np.eye(4)
                T[:3, :3] = _frame_z((b - a) / ln)
                T[:3, 3] = (a + b) / 2
                shp = cylinder(T, r, ln)
        elif kind == "sphere":
            shp = sphere(ss.vec(sh["center"], "center") * L, r)
        elif kind == "box":
            size = ss.vec(sh["size"], "size") * L
            if np.any(size <= 0):
                raise ss.fail(f"every size must be > 0, got {_show(sh['size'])}", "size")
            T = np.eye(4)
            T[:3, :3] = ss.rotation(sh)
            T[:3, 3] = ss.vec(sh["center"], "center") * L
            shp = box(T, size)
        else:
            from .meshes import mesh_shape

            f = ss.text(sh["file"], "file", allow_empty=False)
            scale = ss.vec(sh.get("scale", [1, 1, 1]), "scale")
            if np.any(scale == 0):
                raise ss.fail(f"a zero scale flattens the mesh, got {_show(sh['scale'])}", "scale")
            T = np.eye(4)
            T[:3, :3] = ss.rotation(sh)
            T[:3, 3] = ss.vec(sh.get("xyz", [0, 0, 0]), "xyz") * L
            path = f if os.path.isabs(f) or base_dir is None else os.path.join(base_dir, f)
            try:
                shp = mesh_shape(path, scale * L, T, where=where, file_name=f)
            except ArmError as exc:
                raise ArmFileError(str(exc)) from None
        try:
            out.append(check_shape(shp.transformed(frame) if frame is not None else shp, where))
        except ArmError as exc:
            raise ArmFileError(str(exc)) from None
    return out


def _frame_z(z: np.ndarray) -> np.ndarray:
    """A rotation whose z column is the unit vector ``z``."""
    ref = np.array([1.0, 0, 0]) if abs(z[0]) < 0.9 else np.array([0, 1.0, 0])
    x = ref - z * (ref @ z)
    x /= np.linalg.norm(x)
    return np.stack([x, np.cross(z, x), z], axis=1)


# ---------------------------------------------------------------------------------------------
# reading

def read_arm_file(path) -> ArmModel:
    """Read and validate an arm file (our TOML schema).

    Parameters
    ----------
    path : str or os.PathLike
        The ``.toml`` arm file.

    Returns
    -------
    ArmModel
        The arm in SI units; ``model.source`` keeps the file content for lossless writing.

    Raises
    ------
    ArmFileError
        One line naming the file, line, table/joint and key, and what is expected.
    """
    path = os.fspath(path)
    if os.path.isdir(path):
        raise ArmFileError(f"{path}: is a directory, expected an arm file (.toml or .urdf)")
    try:
        with open(path, "rb") as fh:
            raw = fh.read(MAX_FILE_BYTES + 1)
    except FileNotFoundError:
        raise ArmFileError(f"{path}: no such file") from None
    except IsADirectoryError:
        raise ArmFileError(f"{path}: is a directory, expected an arm file (.toml or .urdf)") from None
    except OSError as exc:
        raise ArmFileError(f"{path}: cannot be read ({exc.strerror or exc})") from None
    if len(raw) > MAX_FILE_BYTES:
        raise ArmFileError(f"{path}: larger than {MAX_FILE_BYTES // (1024 * 1024)} MB; an arm file is a few kB "
                           f"of TOML")
    return parse_arm_text(raw, source_name=path)


def parse_arm_text(raw, source_name: str = "<arm>") -> ArmModel:
    """Parse arm-file text (str or UTF-8 bytes) -> ArmModel; see :func:`read_arm_file`."""
    if isinstance(raw, (bytes, bytearray)):
        try:
            text = bytes(raw).decode("utf-8-sig")
        except UnicodeDecodeError as exc:
            raise ArmFileError(f"{source_name}: not UTF-8 text (bad byte at offset {exc.start}); expected a "
                               f"TOML arm file") from None
    else:
        text = str(raw)
    if "\x00" in text:
        raise ArmFileError(f"{source_name}: contains NUL characters; expected a TOML arm file (text)")
    check_toml_text(text, source_name, ArmFileError)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc).splitlines()[0] if str(exc) else "syntax error"
        raise ArmFileError(f"{source_name}: malformed TOML: {msg}") from None
    except RecursionError:
        raise ArmFileError(f"{source_name}: malformed TOML: nested too deeply") from None
    return parse_arm_dict(data, source_name=source_name, text=text)


def parse_arm_dict(data: dict, source_name: str = "<arm>", text: str | None = None) -> ArmModel:
    """Validate a parsed arm-file dict and build the model.

    Parameters
    ----------
    data : dict
        The file content as parsed by ``tomllib`` (file units: degrees, ``length_unit``).
    source_name : str
        Used in error messages (usually the file path).
    text : str, optional
        The TOML text, used only to give line numbers in error messages.

    Returns
    -------
    ArmModel
        SI units; ``source`` is ``data`` itself.
    """
    ctx = _Ctx(source_name, text)
    top = _Scope(ctx, None)
    if not isinstance(data, dict):
        raise top.fail(f"expected a TOML document (a table), got {_type(data)}")
    unknown = sorted(str(k) for k in set(data) - _TOP_KEYS)
    if unknown:
        k = unknown[0]
        kind = "table" if isinstance(data[k], (dict, list)) else "key"
        line = ctx.loc.line(k) or ctx.loc.line(None, None, k)
        head = f"{source_name}:{line}" if line else source_name
        looks = ("; this looks like a study file" if {"study", "settings"} & set(data) else
                 "; this looks like a cell file" if {"cell", "point", "path", "box"} & set(data) else "")
        raise ArmFileError(f"{head}: unknown {kind} {k!r}{looks}; allowed in an arm file: [arm], [[joint]], "
                           f"[flange], [tool], [mount], [base]")
    if "arm" not in data:
        raise top.fail("missing table [arm] (with at least 'name')")
    arm = data["arm"]
    sa = _Scope(ctx, "arm")
    sa.keys(arm, _ARM_KEYS)
    if "name" not in arm:
        raise sa.fail("missing key 'name' (the arm's name)")
    name = sa.text(arm["name"], "name", allow_empty=False)
    geometry = arm.get("geometry", "origins")
    if not isinstance(geometry, str) or geometry not in _JOINT_GEOM:
        raise sa.fail(f"expected one of 'dh', 'mdh', 'origins', got {_show(geometry)}", "geometry")
    unit = arm.get("length_unit", "m")
    if not isinstance(unit, str) or unit not in _UNITS:
        raise sa.fail(f"expected 'm' or 'mm', got {_show(unit)}", "length_unit")
    L = _UNITS[unit]
    description = sa.text(arm.get("description", ""), "description")
    stated_length = None
    if "characteristic_length" in arm:
        stated_length = sa.num(arm["characteristic_length"], "characteristic_length", positive=True,
                               what=f"a positive length ({unit})") * L

    joints_raw = data.get("joint")
    if joints_raw is None:
        raise top.fail("no [[joint]] tables; an arm needs at least one joint")
    if not isinstance(joints_raw, list) or not joints_raw:
        raise ctx.fail(f"expected an array of tables ([[joint]]), got {_show(joints_raw)}", None, None, "joint",
                       label="")
    if len(joints_raw) > MAX_JOINTS:
        raise top.fail(f"{len(joints_raw)} joints; at most {MAX_JOINTS} are supported")

    allowed = _JOINT_COMMON | _JOINT_GEOM[geometry]
    base_dir = os.path.dirname(os.path.abspath(source_name)) if source_name and not source_name.startswith("<") else None
    shape_lists: list[list] = []
    short_radius: dict[int, float] = {}
    joints = []
    names: dict[str, int] = {}
    post_prev = np.eye(4)  # standard DH: the part of the previous link transform after its joint
    posts = []
    for i, jr in enumerate(joints_raw):
        sj = _Scope(ctx, "joint", i, f"joint {i + 1}")
        if isinstance(jr, dict) and isinstance(jr.get("name"), str) and jr["name"].strip():
            sj.label = f"joint {i + 1} ({jr['name']!r})"
        sj.keys(jr, allowed)
        if "name" not in jr:
            raise sj.fail("missing key 'name' (a unique joint name)")
        jname = sj.text(jr["name"], "name", allow_empty=False)
        if not _NAME_RE.match(jname) or jname.isdigit() or jname.lower() in _RESERVED_NAMES:
            raise sj.fail(f"bad joint name {jname!r}: expected 1-64 characters without ':' or ',', not only "
                          f"digits and not tcp, flange or base", "name")
        sj.label = f"joint {i + 1} ({jname!r})"
        if jname in names:
            raise sj.fail(f"duplicate joint name; joint {names[jname] + 1} already has it", "name")
        names[jname] = i
        kind = jr.get("type", REVOLUTE)
        if kind not in (REVOLUTE, PRISMATIC):
            raise sj.fail(f"expected 'revolute' or 'prismatic', got {_show(kind)}", "type")
        qscale = _DEG if kind == REVOLUTE else L

        if geometry in ("dh", "mdh"):
            missing = [k for k in ("a", "alpha", "d", "theta") if k not in jr]
            if missing:
                raise sj.fail(f"missing key '{missing[0]}' ({geometry} rows need a, alpha, d, theta)")
            a = sj.num(jr["a"], "a") * L
            alpha = sj.num(jr["alpha"], "alpha") * _DEG
            d = sj.num(jr["d"], "d") * L
            theta = sj.num(jr["theta"], "theta") * _DEG
            axis = np.array([0.0, 0.0, 1.0])
            if geometry == "dh":
                origin = post_prev @ rot_z(theta) @ translation(0, 0, d)
                post = translation(a, 0, 0) @ rot_x(alpha)
                posts.append(post)
                post_prev = post
            else:
                origin = rot_x(alpha) @ translation(a, 0, 0) @ rot_z(theta) @ translation(0, 0, d)
                posts.append(np.eye(4))
        else:
            origin = sj.place(jr, L)
            if "axis" not in jr:
                raise sj.fail("missing key 'axis' (a unit vector in the joint frame, e.g. [0, 0, 1])")
            axis = sj.vec(jr["axis"], "axis")
            norm = float(np.linalg.norm(axis))
            if norm < 1e-9:
                raise sj.fail(f"zero-length axis {_show(jr['axis'])}; expected a unit vector", "axis")
            if abs(norm - 1.0) > 1e-6:
                raise sj.fail(f"expected a unit vector, got {_show(jr['axis'])} of length {norm:.6g}", "axis")
            axis = axis / norm
            posts.append(np.eye(4))

        lower, upper = -math.inf, math.inf
        if "limits" in jr:
            lim = jr["limits"]
            if not isinstance(lim, list) or len(lim) != 2:
                raise sj.fail(f"expected [lower, upper], got {_show(lim)}", "limits")
            lo = sj.num(lim[0], "limits")
            hi = sj.num(lim[1], "limits")
            if not lo < hi:
                raise sj.fail(f"lower {lo:g} must be below upper {hi:g} (reversed or empty range)", "limits")
            lower, upper = lo * qscale, hi * qscale
        max_speed = sj.num(jr["max_speed"], "max_speed", positive=True) * qscale if "max_speed" in jr else None
        max_effort = sj.num(jr["max_effort"], "max_effort", positive=True) if "max_effort" in jr else None
        max_acc = (sj.num(jr["max_acceleration"], "max_acceleration", positive=True) * qscale
                   if "max_acceleration" in jr else None)
        mass = sj.num(jr["mass"], "mass", nonneg=True) if "mass" in jr else None
        com = None
        if "com" in jr:
            com = sj.vec(jr["com"], "com") * L
            com = (posts[-1] @ np.append(com, 1.0))[:3]  # DH link frame -> joint frame
        elif mass is not None:
            com = np.zeros(3)
        shapes = []
        if "shape" in jr:
            shapes = _parse_shapes(ctx, jr["shape"], "joint", i, sj.label, L, posts[-1], base_dir)
        if "radius" in jr:
            rr = sj.num(jr["radius"], "radius")
            if rr <= 0:
                raise sj.fail(f"radius must be > 0, got {_show(jr['radius'])} (the link's capsule)", "radius")
            short_radius[i] = rr * L
        shape_lists.append(shapes)
        joints.append(Joint(jname, kind, np.ascontiguousarray(origin), axis, lower, upper,
                            max_speed, max_effort, mass, com, max_acc))

    end = posts[-1] if geometry == "dh" else np.eye(4)
    if "flange" in data:
        sf = _Scope(ctx, "flange")
        sf.keys(data["flange"], _PLACE_KEYS)
        end = end @ sf.place(data["flange"], L)

    tool = np.eye(4)
    tool_mass, tool_com = 0.0, np.zeros(3)
    if "tool" in data:
        t = data["tool"]
        st = _Scope(ctx, "tool")
        st.keys(t, _TOOL_KEYS)
        tool = st.place(t, L)
        tool_mass = st.num(t.get("mass", 0.0), "mass", nonneg=True)
        tool_com = st.vec(t.get("com", [0, 0, 0]), "com") * L
    tool_shapes = []
    if "tool" in data:
        from .shapes import capsule as _capsule

        if "shape" in t:
            tool_shapes += _parse_shapes(ctx, t["shape"], "tool", None, "[tool]", L, None, base_dir)
        if "radius" in t:
            rr = st.num(t["radius"], "radius")
            if rr <= 0:
                raise st.fail(f"radius must be > 0, got {_show(t['radius'])} (the tool's capsule)", "radius")
            tool_shapes.append(_capsule(np.zeros(3), tool[:3, 3], rr * L))
    base_shapes = []
    if "base" in data:
        sb = _Scope(ctx, "base")
        sb.keys(data["base"], {"shape"})
        if "shape" in data["base"]:
            base_shapes = _parse_shapes(ctx, data["base"]["shape"], "base", None, "[base]", L, None, base_dir)
    for i, rr in short_radius.items():
        from .shapes import capsule as _capsule

        tip = joints[i + 1].origin[:3, 3] if i + 1 < len(joints) else end[:3, 3]
        shape_lists[i].insert(0, _capsule(np.zeros(3), tip, rr))
    joints = [replace(j, shapes=tuple(sl)) if sl else j for j, sl in zip(joints, shape_lists)]
    skip = []
    if "skip" in arm:
        bodies = {"base": 0, "tool": len(joints) + 1, **{j.name: k + 1 for k, j in enumerate(joints)}}
        sk = arm["skip"]
        if not isinstance(sk, list) or not all(isinstance(p, list) and len(p) == 2 for p in sk):
            raise sa.fail(f"expected a list of pairs like [[\"shoulder\", \"wrist\"]], got {_show(sk)}", "skip")
        for p in sk:
            for nm in p:
                if nm not in bodies:
                    raise sa.fail(f"{_show(nm)} is not a joint name, 'base' or 'tool'; joints are "
                                  f"{', '.join(j.name for j in joints)}", "skip")
            a_, b_ = sorted((bodies[p[0]], bodies[p[1]]))
            if a_ == b_:
                raise sa.fail(f"pair {_show(p)} names one body twice", "skip")
            skip.append((a_, b_))
    mount = np.eye(4)
    if "mount" in data:
        sm = _Scope(ctx, "mount")
        sm.keys(data["mount"], _PLACE_KEYS)
        mount = sm.place(data["mount"], L)

    home = None
    if "home" in arm:
        h = arm["home"]
        if not isinstance(h, list) or len(h) != len(joints):
            raise sa.fail(f"expected a list of {len(joints)} joint values (one per joint), got {_show(h)}", "home")
        home = np.array([sa.num(v, "home") * (_DEG if j.kind == REVOLUTE else L) for v, j in zip(h, joints)])
        for k, (v, j) in enumerate(zip(home, joints)):
            if not (j.lower - 1e-12 <= v <= j.upper + 1e-12):
                raise sa.fail(f"joint {k + 1} ({j.name!r}) value {h[k]!r} is outside its limits", "home")

    return ArmModel(name=name.strip(), joints=tuple(joints), end=end, tool=tool, mount=mount,
                    home=home, description=description, tool_mass=tool_mass, tool_com=tool_com,
                    source=data, path=source_name, stated_length=stated_length, tool_shapes=tuple(tool_shapes),
                    base_shapes=tuple(base_shapes), skip_pairs=tuple(sorted(set(skip))))


# ---------------------------------------------------------------------------------------------
# comparing and writing

def _same_opt(a, b, atol):
    if a is None or b is None:
        return a is None and b is None
    return bool(np.allclose(np.asarray(a, float), np.asarray(b, float), rtol=0, atol=atol))


def same_arm(a: ArmModel, b: ArmModel, atol: float = 1e-9) -> bool:
    """True when two models describe the same arm (same names, kinds, limits, speeds, efforts,
    masses, and transforms equal to within ``atol``); ``source`` and ``path`` are ignored."""
    if (a.name, a.description, a.names, tuple(a.kinds)) != (b.name, b.description, b.names, tuple(b.kinds)):
        return False
    for x, y in ((a.lower, b.lower), (a.upper, b.upper), (a.max_speed, b.max_speed),
                 (a.max_effort, b.max_effort), (a.masses, b.masses), (a.max_acceleration, b.max_acceleration)):
        if not np.allclose(x, y, rtol=1e-12, atol=atol, equal_nan=True):
            return False
    for ja, jb in zip(a.joints, b.joints):
        if not (_same_opt(ja.origin, jb.origin, atol) and _same_opt(ja.axis, jb.axis, atol)
                and _same_opt(ja.com, jb.com, atol)):
            return False
    for sa_, sb_ in zip(a.body_shapes(), b.body_shapes()):
        if len(sa_) != len(sb_) or not all(x.same(y, max(atol, 1e-12)) for x, y in zip(sa_, sb_)):
            return False
    if tuple(a.skip_pairs) != tuple(b.skip_pairs):
        return False
    return (_same_opt(a.end, b.end, atol) and _same_opt(a.tool, b.tool, atol) and _same_opt(a.mount, b.mount, atol)
            and _same_opt(a.home, b.home, atol) and abs(a.tool_mass - b.tool_mass) <= atol
            and _same_opt(a.tool_com, b.tool_com, atol)
            and _same_opt(a.stated_length, b.stated_length, atol))


def _tidy(x) -> float:
    """A float for writing: 15 significant digits (drops binary noise such as 89.99999999999999),
    exact zeros for |x| < 1e-12 (no -0.0 or 6e-17 from rotations)."""
    x = float(x)
    return 0.0 if abs(x) < 1e-12 else float(f"{x:.15g}")


def _place_dict(T) -> dict:
    return {"xyz": [_tidy(x) for x in T[:3, 3]],
            "rpy": [_tidy(x / _DEG) for x in matrix_to_rpy(T[:3, :3])]}


def _model_to_dict(model: ArmModel) -> dict:
    out: dict = {"arm": {"name": model.name, "geometry": "origins", "length_unit": "m"}}
    if model.description:
        out["arm"]["description"] = model.description
    if model.home is not None:
        out["arm"]["home"] = [_tidy(v / _DEG) if j.revolute else _tidy(v) for v, j in zip(model.home, model.joints)]
    if model.stated_length is not None:
        out["arm"]["characteristic_length"] = _tidy(model.stated_length)
    joints = []
    for j in model.joints:
        jd = {"name": j.name, "type": j.kind, **_place_dict(j.origin), "axis": [_tidy(x) for x in j.axis]}
        s = _DEG if j.revolute else 1.0
        lo, hi = math.isfinite(j.lower), math.isfinite(j.upper)
        if lo and hi:
            jd["limits"] = [_tidy(j.lower / s), _tidy(j.upper / s)]
        elif lo or hi:
            raise ArmError(f"arm {model.name!r}: joint {j.name!r} has a one-sided limit; arm files need both "
                           f"limits or none")
        if j.max_speed is not None:
            jd["max_speed"] = _tidy(j.max_speed / s)
        if j.max_effort is not None:
            jd["max_effort"] = float(j.max_effort)
        if j.max_acceleration is not None:
            jd["max_acceleration"] = _tidy(j.max_acceleration / s)
        if j.mass is not None:
            jd["mass"] = float(j.mass)
        if j.com is not None:
            jd["com"] = [_tidy(x) for x in j.com]
        if j.shapes:
            jd["shape"] = [_shape_dict(sh) for sh in j.shapes]
        joints.append(jd)
    out["joint"] = joints
    if not np.array_equal(model.end, np.eye(4)):
        out["flange"] = _place_dict(model.end)
    if not np.array_equal(model.tool, np.eye(4)) or model.tool_mass or np.any(model.tool_com):
        out["tool"] = _place_dict(model.tool)
        if model.tool_mass or np.any(model.tool_com):
            out["tool"]["mass"] = float(model.tool_mass)
            out["tool"]["com"] = [_tidy(x) for x in model.tool_com]
    if model.tool_shapes:
        out.setdefault("tool", _place_dict(model.tool))["shape"] = [_shape_dict(sh) for sh in model.tool_shapes]
    if not np.array_equal(model.mount, np.eye(4)):
        out["mount"] = _place_dict(model.mount)
    if model.base_shapes:
        out["base"] = {"shape": [_shape_dict(sh) for sh in model.base_shapes]}
    if model.skip_pairs:
        names = ["base"] + list(model.names) + ["tool"]
        out["arm"]["skip"] = [[names[a], names[b]] for a, b in model.skip_pairs]
    return out


def _shape_dict(sh) -> dict:
    """An explicit shape table (metres, degrees) of a Shape."""
    v = lambda x: [_tidy(c) for c in x]  # noqa: E731
    if sh.kind == "capsule":
        return {"type": "capsule", "a": v(sh.a), "b": v(sh.b), "radius": _tidy(sh.radius)}
    if sh.kind == "sphere":
        return {"type": "sphere", "center": v(sh.a), "radius": _tidy(sh.radius)}
    if sh.kind == "box":
        return {"type": "box", "center": v(sh.pose[:3, 3]), "size": v(sh.size),
                "rot": [v(r) for r in sh.pose[:3, :3]]}
    if sh.kind == "cylinder":
        z = sh.pose[:3, 2] * sh.length / 2
        return {"type": "cylinder", "a": v(sh.pose[:3, 3] - z), "b": v(sh.pose[:3, 3] + z), "radius": _tidy(sh.radius)}
    return {"type": "mesh", "file": os.path.abspath(sh.mesh), "scale": v(sh.mesh_scale),
            "xyz": v(sh.mesh_origin[:3, 3]), "rot": [v(r) for r in sh.mesh_origin[:3, :3]]}


def arm_to_dict(model: ArmModel) -> dict:
    """The file content of an arm (file units).

    The source dict when the model came from a file and still matches it; otherwise an "origins"
    description in metres and degrees built from the model (e.g. an imported URDF, an arm built in
    code, or a model changed with ``dataclasses.replace``).
    """
    if model.source is not None:
        try:
            if same_arm(parse_arm_dict(model.source, model.path or "<arm>"), model, atol=0.0):
                return model.source
        except ArmError:
            pass
    return _model_to_dict(model)


_BARE_KEY = re.compile(r"^[A-Za-z0-9_-]+$")


def _toml_str(s: str) -> str:
    out = []
    for ch in s:
        if ch in "\\\"":
            out.append("\\" + ch)
        elif ch == "\n":
            out.append("\\n")
        elif ch == "\t":
            out.append("\\t")
        elif ord(ch) < 0x20 or ord(ch) == 0x7F:
            out.append(f"\\u{ord(ch):04x}")
        else:
            out.append(ch)
    return '"' + "".join(out) + '"'


def _toml_key(k: str) -> str:
    return k if _BARE_KEY.match(k) else _toml_str(k)


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return _toml_str(v)
    if isinstance(v, list):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{_toml_key(k)} = {_toml_value(x)}" for k, x in v.items()) + "}"
    raise ArmError(f"arm file: cannot write a value of type {type(v).__name__}")


def _toml_table(name: str, table: dict, header: str) -> list[str]:
    lines = [header.format(_toml_key(name))]
    lines += [f"{_toml_key(k)} = {_toml_value(v)}" for k, v in table.items()]
    return lines


def dumps_arm(model: ArmModel) -> str:
    """The arm file text (TOML) of ``model``: one line per key, arrays inline, tables in the order
    [arm], [[joint]]..., [flange], [tool], [mount]."""
    d = arm_to_dict(model)
    chunks: list[list[str]] = []
    order = [k for k in ("arm", "joint", "flange", "tool", "mount", "base") if k in d] + \
        [k for k in d if k not in ("arm", "joint", "flange", "tool", "mount", "base")]
    plain = {k: v for k, v in d.items() if not isinstance(v, (dict, list)) or
             (isinstance(v, list) and not all(isinstance(x, dict) for x in v)) or v == []}
    if plain:
        chunks.append([f"{_toml_key(k)} = {_toml_value(v)}" for k, v in plain.items()])
    for k in order:
        if k in plain:
            continue
        v = d[k]
        if isinstance(v, dict):
            chunks.append(_toml_table(k, v, "[{}]"))
        else:
            for item in v:
                chunks.append(_toml_table(k, item, "[[{}]]"))
    text = "\n\n".join("\n".join(c) for c in chunks) + "\n"
    if tomllib.loads(text) != d:  # never write what would not read back the same
        import tomli_w

        text = tomli_w.dumps(d)
    return text


def write_arm_file(model: ArmModel, path) -> None:
    """Write an arm file atomically (temporary name in the same folder, then rename).

    Reading it back gives the same model (:func:`same_arm`) and, for a model read from a file,
    the same content dict.
    """
    text = dumps_arm(model)
    path = os.fspath(path)
    if os.path.isdir(path):
        raise ArmFileError(f"{path}: is a directory; expected an arm file name ending in .toml")
    tmp = f"{path}.tmp{os.getpid()}"
    try:
        with open(tmp, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.replace(tmp, path)
    except OSError as exc:
        raise ArmFileError(f"{path}: cannot be written ({exc.strerror or exc})") from None
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)
