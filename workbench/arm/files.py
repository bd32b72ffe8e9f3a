"""Arm files: our own TOML schema (read, validate, write back losslessly).

Schema (angles in degrees, lengths in the file's ``length_unit``: "m" or "mm")::

    [arm]
    name = "..."                 # required
    description = "..."          # optional
    geometry = "dh"              # "dh" (standard DH), "mdh" (modified DH) or "origins"
    length_unit = "m"            # "m" (default) or "mm"
    home = [0, -90, 90, 0, 0, 0] # optional; degrees (revolute) / length unit (prismatic)

    [[joint]]                    # one table per joint, base to tip
    name = "shoulder"
    type = "revolute"            # or "prismatic"
    # geometry = "dh":      a, alpha, d, theta  (row i: link i; theta/d are offsets added to q)
    # geometry = "mdh":     a, alpha, d, theta  (row i: a_{i-1}, alpha_{i-1}, d_i, theta_i)
    # geometry = "origins": xyz, rpy (fixed origin from the previous joint frame), axis
    limits = [-170, 170]         # optional (default unlimited)
    max_speed = 180              # optional: deg/s or length-unit/s
    max_effort = 800             # optional: N m (revolute) or N (prismatic)
    mass = 12.5                  # optional: kg of the link this joint moves
    com = [0, 0, 0.1]            # optional: centre of mass in that link's frame

    [tool]                       # optional: TCP relative to the flange
    xyz = [0, 0, 0.1]
    rpy = [0, 0, 0]
    mass = 0.0
    com = [0, 0, 0]

    [mount]                      # optional: arm base in the world (cell) frame
    xyz = [0, 0, 0]
    rpy = [0, 0, 0]

For "dh" the link frame of joint i (where ``com`` is given) is the DH frame i; for "mdh" and
"origins" it is the joint's own frame.
"""
from __future__ import annotations

import math
import os
import tomllib

import numpy as np

from .model import PRISMATIC, REVOLUTE, ArmError, ArmModel, Joint
from .transforms import make_transform, rot_x, rot_z, translation

__all__ = ["ArmFileError", "read_arm_file", "parse_arm_dict", "arm_to_dict", "write_arm_file",
           "dumps_arm", "MAX_JOINTS"]

MAX_JOINTS = 32
_DEG = math.pi / 180.0
_UNITS = {"m": 1.0, "mm": 1e-3}
_TOP_KEYS = {"arm", "joint", "tool", "mount"}
_ARM_KEYS = {"name", "description", "geometry", "length_unit", "home"}
_JOINT_COMMON = {"name", "type", "limits", "max_speed", "max_effort", "mass", "com"}
_JOINT_GEOM = {"dh": {"a", "alpha", "d", "theta"}, "mdh": {"a", "alpha", "d", "theta"},
               "origins": {"xyz", "rpy", "axis"}}
_TOOL_KEYS = {"xyz", "rpy", "mass", "com"}
_MOUNT_KEYS = {"xyz", "rpy"}


class ArmFileError(ArmError):
    """A bad arm file; the message names the file, the place and what is expected."""


def _where(ctx, key=None):
    return f"{ctx}: '{key}'" if key else ctx


def _num(v, ctx, key, positive=False, nonneg=False):
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        raise ArmFileError(f"{_where(ctx, key)}: expected a number, got {v!r}")
    v = float(v)
    if not math.isfinite(v):
        raise ArmFileError(f"{_where(ctx, key)}: expected a finite number, got {v!r}")
    if positive and v <= 0:
        raise ArmFileError(f"{_where(ctx, key)}: expected a positive number, got {v!r}")
    if nonneg and v < 0:
        raise ArmFileError(f"{_where(ctx, key)}: expected a number >= 0, got {v!r}")
    return v


def _vec(v, ctx, key, size=3):
    if not isinstance(v, (list, tuple)) or len(v) != size:
        raise ArmFileError(f"{_where(ctx, key)}: expected a list of {size} numbers, got {v!r}")
    return np.array([_num(x, ctx, key) for x in v], dtype=float)


def _check_keys(table, allowed, ctx):
    if not isinstance(table, dict):
        raise ArmFileError(f"{ctx}: expected a table, got {type(table).__name__}")
    unknown = sorted(set(table) - allowed)
    if unknown:
        raise ArmFileError(f"{ctx}: unknown key '{unknown[0]}'; allowed keys: {', '.join(sorted(allowed))}")


def read_arm_file(path) -> ArmModel:
    """Read and validate an arm file (our TOML schema) -> ArmModel (SI units)."""
    path = os.fspath(path)
    try:
        with open(path, "rb") as fh:
            raw = fh.read()
    except IsADirectoryError:
        raise ArmFileError(f"{path}: is a directory, expected an arm file (.toml or .urdf)") from None
    except FileNotFoundError:
        raise ArmFileError(f"{path}: no such file") from None
    except OSError as exc:
        raise ArmFileError(f"{path}: cannot be read ({exc.strerror})") from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise ArmFileError(f"{path}: not UTF-8 text; expected a TOML arm file") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ArmFileError(f"{path}: malformed TOML: {exc}") from None
    return parse_arm_dict(data, source_name=path)


def parse_arm_dict(data: dict, source_name: str = "<arm>") -> ArmModel:
    """Validate a parsed arm-file dict and build the model. Errors name ``source_name`` and the key."""
    ctx0 = source_name
    _check_keys(data, _TOP_KEYS, ctx0)
    if "arm" not in data:
        raise ArmFileError(f"{ctx0}: missing table [arm]")
    arm = data["arm"]
    _check_keys(arm, _ARM_KEYS, f"{ctx0}: [arm]")
    name = arm.get("name")
    if not isinstance(name, str) or not name.strip():
        raise ArmFileError(f"{ctx0}: [arm] 'name': expected a non-empty string, got {name!r}")
    geometry = arm.get("geometry", "origins")
    if geometry not in _JOINT_GEOM:
        raise ArmFileError(f"{ctx0}: [arm] 'geometry': expected one of dh, mdh, origins, got {geometry!r}")
    unit = arm.get("length_unit", "m")
    if unit not in _UNITS:
        raise ArmFileError(f"{ctx0}: [arm] 'length_unit': expected 'm' or 'mm', got {unit!r}")
    L = _UNITS[unit]
    description = arm.get("description", "")
    if not isinstance(description, str):
        raise ArmFileError(f"{ctx0}: [arm] 'description': expected a string")

    joints_raw = data.get("joint")
    if joints_raw is None:
        raise ArmFileError(f"{ctx0}: no [[joint]] tables; an arm needs at least one joint")
    if not isinstance(joints_raw, list) or not joints_raw:
        raise ArmFileError(f"{ctx0}: 'joint' must be an array of tables ([[joint]])")
    if len(joints_raw) > MAX_JOINTS:
        raise ArmFileError(f"{ctx0}: {len(joints_raw)} joints; at most {MAX_JOINTS} are supported")

    allowed = _JOINT_COMMON | _JOINT_GEOM[geometry]
    joints = []
    names = set()
    post_prev = np.eye(4)  # standard DH: the part of the previous link transform after its joint
    posts = []
    for i, jr in enumerate(joints_raw):
        ctx = f"{ctx0}: joint {i + 1}"
        _check_keys(jr, allowed, ctx)
        jname = jr.get("name")
        if not isinstance(jname, str) or not jname.strip():
            raise ArmFileError(f"{ctx}: 'name': expected a non-empty string, got {jname!r}")
        ctx = f"{ctx0}: joint {i + 1} ({jname!r})"
        if jname in names:
            raise ArmFileError(f"{ctx}: 'name': duplicate joint name")
        names.add(jname)
        kind = jr.get("type", REVOLUTE)
        if kind not in (REVOLUTE, PRISMATIC):
            raise ArmFileError(f"{ctx}: 'type': expected 'revolute' or 'prismatic', got {kind!r}")
        qscale = _DEG if kind == REVOLUTE else L

        if geometry in ("dh", "mdh"):
            missing = [k for k in ("a", "alpha", "d", "theta") if k not in jr]
            if missing:
                raise ArmFileError(f"{ctx}: missing key '{missing[0]}' (DH rows need a, alpha, d, theta)")
            a = _num(jr["a"], ctx, "a") * L
            alpha = _num(jr["alpha"], ctx, "alpha") * _DEG
            d = _num(jr["d"], ctx, "d") * L
            theta = _num(jr["theta"], ctx, "theta") * _DEG
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
            xyz = _vec(jr.get("xyz", [0, 0, 0]), ctx, "xyz") * L
            rpy = _vec(jr.get("rpy", [0, 0, 0]), ctx, "rpy") * _DEG
            origin = make_transform(xyz, rpy)
            if "axis" not in jr:
                raise ArmFileError(f"{ctx}: missing key 'axis' (a unit vector in the joint frame)")
            axis = _vec(jr["axis"], ctx, "axis")
            norm = float(np.linalg.norm(axis))
            if norm < 1e-9:
                raise ArmFileError(f"{ctx}: 'axis': zero-length axis {jr['axis']!r}")
            if abs(norm - 1.0) > 1e-6:
                raise ArmFileError(f"{ctx}: 'axis': expected a unit vector, got length {norm:.6g}")
            axis = axis / norm
            posts.append(np.eye(4))

        lower, upper = -math.inf, math.inf
        if "limits" in jr:
            lim = jr["limits"]
            if not isinstance(lim, (list, tuple)) or len(lim) != 2:
                raise ArmFileError(f"{ctx}: 'limits': expected [lower, upper], got {lim!r}")
            lo = _num(lim[0], ctx, "limits")
            hi = _num(lim[1], ctx, "limits")
            if not lo < hi:
                raise ArmFileError(f"{ctx}: 'limits': lower {lo:g} must be below upper {hi:g}")
            lower, upper = lo * qscale, hi * qscale
        max_speed = _num(jr["max_speed"], ctx, "max_speed", positive=True) * qscale if "max_speed" in jr else None
        max_effort = _num(jr["max_effort"], ctx, "max_effort", positive=True) if "max_effort" in jr else None
        mass = _num(jr["mass"], ctx, "mass", nonneg=True) if "mass" in jr else None
        com = None
        if "com" in jr:
            com = _vec(jr["com"], ctx, "com") * L
            com = (posts[-1] @ np.append(com, 1.0))[:3]  # DH link frame -> joint frame
        elif mass is not None:
            com = np.zeros(3)
        joints.append(Joint(jname, kind, np.ascontiguousarray(origin), axis, lower, upper,
                            max_speed, max_effort, mass, com))

    end = posts[-1] if geometry == "dh" else np.eye(4)

    tool = np.eye(4)
    tool_mass, tool_com = 0.0, np.zeros(3)
    if "tool" in data:
        t = data["tool"]
        _check_keys(t, _TOOL_KEYS, f"{ctx0}: [tool]")
        tool = make_transform(_vec(t.get("xyz", [0, 0, 0]), f"{ctx0}: [tool]", "xyz") * L,
                              _vec(t.get("rpy", [0, 0, 0]), f"{ctx0}: [tool]", "rpy") * _DEG)
        tool_mass = _num(t.get("mass", 0.0), f"{ctx0}: [tool]", "mass", nonneg=True)
        tool_com = _vec(t.get("com", [0, 0, 0]), f"{ctx0}: [tool]", "com") * L
    mount = np.eye(4)
    if "mount" in data:
        mt = data["mount"]
        _check_keys(mt, _MOUNT_KEYS, f"{ctx0}: [mount]")
        mount = make_transform(_vec(mt.get("xyz", [0, 0, 0]), f"{ctx0}: [mount]", "xyz") * L,
                               _vec(mt.get("rpy", [0, 0, 0]), f"{ctx0}: [mount]", "rpy") * _DEG)

    home = None
    if "home" in arm:
        h = arm["home"]
        if not isinstance(h, (list, tuple)) or len(h) != len(joints):
            raise ArmFileError(f"{ctx0}: [arm] 'home': expected a list of {len(joints)} joint values, got {h!r}")
        home = np.array([_num(v, f"{ctx0}: [arm]", "home") * (_DEG if j.kind == REVOLUTE else L)
                         for v, j in zip(h, joints)])
        for k, (v, j) in enumerate(zip(home, joints)):
            if not (j.lower - 1e-12 <= v <= j.upper + 1e-12):
                raise ArmFileError(f"{ctx0}: [arm] 'home': joint {k + 1} ({j.name!r}) value {h[k]!r} is outside its limits")

    return ArmModel(name=name.strip(), joints=tuple(joints), end=end, tool=tool, mount=mount,
                    home=home, description=description, tool_mass=tool_mass, tool_com=tool_com,
                    source=data, path=source_name)


def arm_to_dict(model: ArmModel) -> dict:
    """The file content of an arm: its source dict when it came from a file, else an "origins"
    description in metres and degrees built from the model."""
    if model.source is not None:
        return model.source
    out: dict = {"arm": {"name": model.name, "geometry": "origins", "length_unit": "m"}}
    if model.description:
        out["arm"]["description"] = model.description
    from .transforms import matrix_to_rpy

    if model.home is not None:
        out["arm"]["home"] = [float(v / _DEG) if j.revolute else float(v) for v, j in zip(model.home, model.joints)]
    joints = []
    for k, j in enumerate(model.joints):
        origin = j.origin if k else j.origin
        jd = {"name": j.name, "type": j.kind,
              "xyz": [float(x) for x in origin[:3, 3]],
              "rpy": [float(x / _DEG) for x in matrix_to_rpy(origin[:3, :3])],
              "axis": [float(x) for x in j.axis]}
        s = _DEG if j.revolute else 1.0
        if math.isfinite(j.lower) and math.isfinite(j.upper):
            jd["limits"] = [j.lower / s, j.upper / s]
        if j.max_speed is not None:
            jd["max_speed"] = j.max_speed / s
        if j.max_effort is not None:
            jd["max_effort"] = j.max_effort
        if j.mass is not None:
            jd["mass"] = j.mass
            jd["com"] = [float(x) for x in (j.com if j.com is not None else np.zeros(3))]
        joints.append(jd)
    out["joint"] = joints
    tcp = model.end @ model.tool
    if not np.allclose(tcp, np.eye(4)) or model.tool_mass:
        out["tool"] = {"xyz": [float(x) for x in tcp[:3, 3]],
                       "rpy": [float(x / _DEG) for x in matrix_to_rpy(tcp[:3, :3])]}
        if model.tool_mass:
            out["tool"]["mass"] = float(model.tool_mass)
            out["tool"]["com"] = [float(x) for x in model.tool_com]
    if not np.allclose(model.mount, np.eye(4)):
        out["mount"] = {"xyz": [float(x) for x in model.mount[:3, 3]],
                        "rpy": [float(x / _DEG) for x in matrix_to_rpy(model.mount[:3, :3])]}
    return out


def dumps_arm(model: ArmModel) -> str:
    import tomli_w

    return tomli_w.dumps(arm_to_dict(model))


def write_arm_file(model: ArmModel, path) -> None:
    """Write an arm file atomically (temporary name, then rename)."""
    text = dumps_arm(model)
    path = os.fspath(path)
    tmp = f"{path}.tmp{os.getpid()}"
    try:
        with open(tmp, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.replace(tmp, path)
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)
