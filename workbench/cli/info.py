"""``workbench info ARM``: check an arm file or URDF and summarise it.

Prints the name, degrees of freedom, a joint table (type, limits in degrees or mm, max speed,
max effort, link mass), the flange, tool and mount transforms, the home pose, a reach estimate
and warnings about what is missing for some studies. ``--json`` prints the same as one JSON object.
"""
from __future__ import annotations

import json
import math
import os
import sys

import numpy as np

from ..arm.transforms import matrix_to_rpy
from ..errors import WorkbenchError

REACH_SAMPLES = 20000


# ---- shared with ``workbench jacobian`` ---------------------------------------------------------

def add_arm_arguments(p) -> None:
    """The ARM positional argument and the URDF chain options."""
    p.add_argument("arm", metavar="ARM", help="arm file (.toml) or URDF (.urdf)")
    p.add_argument("--base", metavar="LINK", default=None,
                   help="URDF only: link where the chain starts (default: the root link)")
    p.add_argument("--tip", metavar="LINK", default=None,
                   help="URDF only: link where the chain ends (default: the single leaf link)")
    add_package_path_argument(p)


def add_package_path_argument(p) -> None:
    """``--package-path NAME=DIR`` (repeatable): where ``package://NAME/...`` mesh paths are."""
    p.add_argument("--package-path", metavar="NAME=DIR", action="append", default=[],
                   help="URDF meshes: folder of package NAME for package://NAME/... paths (repeatable)")


def package_paths(args) -> dict:
    """NAME -> DIR from ``--package-path`` options; sets them as the default for URDF imports."""
    from ..arm.urdf import set_package_paths

    out = {}
    for item in getattr(args, "package_path", None) or []:
        name, sep, folder = item.partition("=")
        if not sep or not name.strip() or not folder.strip():
            raise WorkbenchError(f"--package-path {item!r}: expected NAME=DIR")
        if not os.path.isdir(folder):
            raise WorkbenchError(f"--package-path {item!r}: {folder} is not a folder")
        out[name.strip()] = folder
    set_package_paths(out)
    return out


def load(args):
    """The :class:`workbench.kinematics.Arm` named by ``args.arm`` (with --base/--tip/--package-path)."""
    from ..arm import read_arm_model
    from ..kinematics import Arm

    pk = package_paths(args)
    return Arm(read_arm_model(args.arm, base_link=args.base, tip_link=args.tip, package_paths=pk))


def joint_unit(joint) -> tuple[float, str]:
    """(factor from SI to display units, unit) for a joint value: degrees or millimetres."""
    return (180.0 / math.pi, "deg") if joint.revolute else (1000.0, "mm")


def fmt_num(v, digits=4) -> str:
    """A compact number: up to ``digits`` significant digits, no '-0'."""
    if v is None or (isinstance(v, float) and math.isnan(v)):
        return "-"
    if isinstance(v, float) and math.isinf(v):
        return "inf" if v > 0 else "-inf"
    s = f"{float(v):.{digits}g}"
    return "0" if s in ("-0", "0") else s


def fmt_vec(v, scale=1.0, digits=4) -> str:
    return "[" + ", ".join(fmt_num(float(x) * scale + 0.0, digits) for x in v) + "]"


def pose_dict(T) -> dict:
    """Position (mm) and roll-pitch-yaw (deg) of a (4, 4) transform, for screens and JSON."""
    T = np.asarray(T, dtype=float)
    return {"xyz_mm": [_clean(x * 1000.0) for x in T[:3, 3]],
            "rpy_deg": [_clean(math.degrees(x)) for x in matrix_to_rpy(T[:3, :3])]}


def fmt_pose(T) -> str:
    d = pose_dict(T)
    return f"xyz {fmt_vec(d['xyz_mm'], digits=6)} mm, rpy {fmt_vec(d['rpy_deg'], digits=6)} deg"


def _clean(x, nd=9) -> float:
    x = round(float(x), nd)
    return 0.0 if x == 0 else x


def json_value(v):
    """JSON-safe numbers: NaN and inf become None."""
    if isinstance(v, dict):
        return {k: json_value(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [json_value(x) for x in v]
    if isinstance(v, np.ndarray):
        return json_value(v.tolist())
    if isinstance(v, (np.floating, float)):
        v = float(v)
        return v if math.isfinite(v) else None
    if isinstance(v, np.integer):
        return int(v)
    return v


# ---- the command -------------------------------------------------------------------------------

def add_parser(subparsers):
    p = subparsers.add_parser("info", help="check an arm file or URDF and summarise it",
                              description="Check an arm file (.toml) or URDF and summarise it: joints, "
                              "limits, speeds, efforts, masses, tool and mount, a reach estimate and "
                              "warnings.")
    add_arm_arguments(p)
    p.add_argument("--samples", type=int, default=REACH_SAMPLES, metavar="N",
                   help=f"random in-limit poses for the reach estimate (default {REACH_SAMPLES})")
    p.add_argument("--seed", type=int, default=0, help="random seed for the reach estimate (default 0)")
    p.add_argument("--json", action="store_true", help="print one JSON object instead of text")
    return p


def run(args) -> int:
    if not 1 <= args.samples <= 10_000_000:
        raise WorkbenchError(f"--samples: expected a count between 1 and 10000000, got {args.samples}")
    if args.seed < 0:
        raise WorkbenchError(f"--seed: expected a whole number >= 0, got {args.seed}")
    arm = load(args)
    info = summarise(arm, samples=args.samples, seed=args.seed)
    for w in info.get("plausibility", []):
        sys.stderr.write(f"warning: {w}\n")
    if args.json:
        print(json.dumps(json_value(info), indent=2))
    else:
        print(format_info(info))
    return 0


def reach_estimate(arm, samples=REACH_SAMPLES, seed=0) -> dict:
    """Largest TCP distance from joint 1's axis and from joint 1's origin over random in-limit
    poses (plus the home pose), and the characteristic length (stated or the axis chain).

    Returns
    -------
    dict
        ``from_axis_m``, ``from_origin_m``, ``nominal_m`` (m) and ``samples``.
    """
    m = arm.model
    rng = np.random.default_rng(seed)
    o0 = m.origins[0]
    c = o0[:3, 3]
    z = o0[:3, :3] @ m.axes[0]
    best_axis = best_origin = 0.0
    left = int(samples)
    first = True
    while first or left > 0:  # blocks of at most 100 000 poses keep the memory small
        k = min(left, 100_000)
        q = arm.random_q(k, rng=rng)
        if first:
            q = np.vstack([q, arm.home_q[None, :]])
            first = False
        left -= k
        d = arm.fk(q)[:, :3, 3] - c
        radial = d - np.outer(d @ z, z)
        best_axis = max(best_axis, float(np.linalg.norm(radial, axis=1).max()))
        best_origin = max(best_origin, float(np.linalg.norm(d, axis=1).max()))
    return {"from_axis_m": best_axis, "from_origin_m": best_origin,
            "nominal_m": float(arm.characteristic_length()),
            "characteristic_length_m": float(arm.characteristic_length()),
            "axis_chain_m": float(arm.model.axis_chain_length),
            "characteristic_length_source": "arm file" if arm.model.stated_length is not None else "axis chain",
            "samples": int(samples) + 1}


def warnings_for(arm) -> list[str]:
    """Plain-words warnings about what is missing or odd in an arm description."""
    m = arm.model
    out = []
    names = lambda ks: ", ".join(f"{k + 1} ({m.names[k]})" for k in ks)  # noqa: E731
    unl_r = [k for k, j in enumerate(m.joints) if j.revolute and not (math.isfinite(j.lower) and math.isfinite(j.upper))]
    unl_p = [k for k, j in enumerate(m.joints) if not j.revolute and not (math.isfinite(j.lower) and math.isfinite(j.upper))]
    if unl_r:
        out.append(f"no limits on revolute joint(s) {names(unl_r)}: they turn freely; joint sweeps and "
                   f"random poses use -180..180 deg for them")
    if unl_p:
        out.append(f"no limits on prismatic joint(s) {names(unl_p)}: random poses use -3.14..3.14 m; "
                   f"give limits in the arm file")
    for attr, what, lost in (("mass", "link mass", "gravity torques and load maps are"),
                             ("max_effort", "max effort", "load maps and torque-weighted force ellipsoids are"),
                             ("max_speed", "max speed", "speed-weighted ellipsoids and path speed checks are")):
        missing = [k for k, j in enumerate(m.joints) if getattr(j, attr) is None]
        if missing:
            out.append(f"no {what} for joint(s) {names(missing)}: {lost} not available")
    # consecutive joints that can never be told apart: same axis line (revolute) or parallel
    # slides (prismatic); checked at the home pose, where it holds at every pose
    F = arm.frames(arm.home_q)
    Z = np.einsum("kij,kj->ki", F[:, :3, :3], m.axes)
    P = F[:, :3, 3]
    for k in range(m.n - 1):
        if m.kinds[k] != m.kinds[k + 1]:
            continue
        par = np.linalg.norm(np.cross(Z[k], Z[k + 1])) < 1e-9
        d = P[k + 1] - P[k]
        on_line = np.linalg.norm(d - np.dot(d, Z[k]) * Z[k]) < 1e-9
        if par and (on_line or m.kinds[k] == 1):
            how = "share one axis line" if m.kinds[k] == 0 else "slide along parallel axes"
            out.append(f"joints {names([k, k + 1])} {how}: the arm is singular at every pose")
    if np.all(m.kinds == 0) and np.allclose(m.origins[1:, :3, 3], 0) and np.allclose(m.tcp_offset[:3, 3], 0):
        out.append("all link lengths are zero: the tool point never leaves joint 1's frame")
    if np.array_equal(m.tcp_offset, np.eye(4)) and m.n > 0:
        out.append("no tool and no flange offset: the TCP is the last joint's frame")
    if m.n < 6:
        out.append(f"{m.n} joint{'s' if m.n != 1 else ''}: full 6-row measures are zero at every pose; use --rows translation, "
                   f"planar or a custom row list")
    elif m.n > 6:
        out.append(f"{m.n} joints: redundant for 6 task rows; inverse kinematics picks one of many "
                   f"solutions")
    if m.home is None:
        out.append("no home pose given: the all-zero pose (clipped into the limits) is used")
    elif not np.all(np.isfinite(m.home)):  # pragma: no cover - the readers refuse this
        out.append("home pose is not finite")
    return out


def summarise(arm, samples=REACH_SAMPLES, seed=0) -> dict:
    """Everything ``workbench info`` shows, as plain data (display units: deg, mm, kg)."""
    m = arm.model
    joints = []
    for k, j in enumerate(m.joints):
        f, unit = joint_unit(j)
        lim = [j.lower * f, j.upper * f] if math.isfinite(j.lower) and math.isfinite(j.upper) else None
        joints.append({
            "index": k + 1, "name": j.name, "type": j.kind, "unit": unit,
            "limits": None if lim is None else [_clean(x, 6) for x in lim],
            "max_speed": None if j.max_speed is None else _clean(j.max_speed * f, 6),
            "speed_unit": f"{unit}/s",
            "max_effort": j.max_effort, "effort_unit": "N m" if j.revolute else "N",
            "max_acceleration": None if j.max_acceleration is None else _clean(j.max_acceleration * f, 6),
            "acceleration_unit": f"{unit}/s^2",
            "mass_kg": j.mass,
            "com_mm": None if j.com is None else [_clean(x * 1000.0, 6) for x in j.com],
        })
    home = [_clean(v * joint_unit(j)[0], 6) for v, j in zip(arm.home_q, m.joints)]
    total_mass = float(np.nansum(m.masses)) if np.any(np.isfinite(m.masses)) else None
    out = {
        "file": m.path and os.fspath(m.path),
        "name": m.name,
        "description": m.description,
        "described_as": _described_as(m),
        "dof": m.n,
        "revolute": int(np.sum(m.kinds == 0)),
        "prismatic": int(np.sum(m.kinds == 1)),
        "joints": joints,
        "flange": pose_dict(m.end),
        "tool": {**pose_dict(m.tool), "mass_kg": m.tool_mass, "com_mm": [_clean(x * 1000.0, 6) for x in m.tool_com]},
        "mount": pose_dict(m.mount),
        "home": home,
        "home_given": m.home is not None,
        "moving_mass_kg": total_mass,
        "reach": reach_estimate(arm, samples=samples, seed=seed),
        "collision": collision_summary(arm),
        "warnings": warnings_for(arm) + collision_warnings(arm),
    }
    from ..studies.plausibility import arm_warnings

    plaus = arm_warnings(arm)  # units and angles that look wrong: also "warning:" lines on stderr
    out["plausibility"] = plaus
    out["warnings"] = plaus + out["warnings"]
    return out


def collision_summary(arm) -> dict:
    """Shapes per body, pairs checked and skipped, and the self-clearance at the home pose."""
    from ..collision import nearest, pair_names, self_pairs

    m = arm.model
    names = m.body_names()
    bodies = [{"body": names[b], "shapes": [s.describe() for s in shapes]}
              for b, shapes in enumerate(m.body_shapes()) if shapes]
    out = {"bodies": bodies, "skipped": [[names[a], names[b]] for a, b in m.skip_pairs],
           "self_pairs": len(self_pairs(m))}
    if m.has_shapes or m.base_shapes:
        d, k = nearest(arm, arm.home_q, None, self_collision=True)
        pn = pair_names(arm, None)
        out["home_clearance_mm"] = None if not np.isfinite(d) else _clean(float(d) * 1000.0, 6)
        out["home_nearest"] = None if int(k) < 0 else list(pn[int(k)])
    return out


def collision_warnings(arm) -> list[str]:
    from ..collision import pair_distances, pair_names

    m = arm.model
    if not m.has_shapes:
        return ["no collision shapes: studies cannot check collisions (give 'radius' or [[joint.shape]] "
                "tables, or <collision> elements in a URDF)"]
    names = pair_names(arm, None)
    d = pair_distances(arm, arm.home_q, None)
    bad = [f"{a} - {b} ({v * 1000:.0f} mm)" for (a, b), v in zip(names, d) if v < 0]
    if bad:
        return [f"collision shapes overlap at the home pose: {', '.join(bad[:6])}; if a pair always "
                f"touches, list it in [arm] skip"]
    return []


def _described_as(m) -> str:
    if m.source is None:
        return "URDF" if (m.path or "").lower().endswith((".urdf", ".xml")) else "built in code"
    arm = m.source.get("arm", {})
    geometry = {"dh": "standard DH", "mdh": "modified DH", "origins": "origins (xyz, rpy, axis)"}
    return f"{geometry.get(arm.get('geometry', 'origins'), '?')} in {arm.get('length_unit', 'm')}"


def format_info(info: dict) -> str:
    """The text ``workbench info`` prints."""
    lines = [f"{info['name']}" + (f"  ({info['file']})" if info.get("file") else "")]
    if info.get("description"):
        lines.append(f"  {info['description']}")
    lines.append(f"  {info['dof']} joint{'s' if info['dof'] != 1 else ''}: {info['revolute']} revolute, "
                 f"{info['prismatic']} prismatic; described as {info['described_as']}")
    lines.append("")
    rows = [("#", "joint", "type", "limits", "max speed", "max effort", "mass kg", "COM mm (joint frame)")]
    acc = any(j.get("max_acceleration") is not None for j in info["joints"])
    if acc:
        rows[0] = rows[0][:5] + ("max accel",) + rows[0][5:]
    for j in info["joints"]:
        lim = "unlimited" if j["limits"] is None else \
            f"{fmt_num(j['limits'][0], 6)} .. {fmt_num(j['limits'][1], 6)} {j['unit']}"
        spd = "-" if j["max_speed"] is None else f"{fmt_num(j['max_speed'])} {j['speed_unit']}"
        eff = "-" if j["max_effort"] is None else f"{fmt_num(j['max_effort'])} {j['effort_unit']}"
        mass = "-" if j["mass_kg"] is None else fmt_num(j["mass_kg"])
        com = "-" if j["com_mm"] is None else fmt_vec(j["com_mm"])
        row = (str(j["index"]), j["name"], j["type"], lim, spd, eff, mass, com)
        if acc:
            a = "-" if j.get("max_acceleration") is None else f"{fmt_num(j['max_acceleration'])} {j['acceleration_unit']}"
            row = row[:5] + (a,) + row[5:]
        rows.append(row)
    widths = [max(len(r[c]) for r in rows) for c in range(len(rows[0]))]
    for r in rows:
        lines.append("  " + "  ".join(s.ljust(w) for s, w in zip(r, widths)).rstrip())
    lines.append("")
    fl = info["flange"]
    tl = info["tool"]
    mt = info["mount"]
    lines.append(f"  flange (from the last joint frame): xyz {fmt_vec(fl['xyz_mm'], digits=6)} mm, "
                 f"rpy {fmt_vec(fl['rpy_deg'], digits=6)} deg")
    lines.append(f"  tool (TCP from the flange):         xyz {fmt_vec(tl['xyz_mm'], digits=6)} mm, "
                 f"rpy {fmt_vec(tl['rpy_deg'], digits=6)} deg, mass {fmt_num(tl['mass_kg'])} kg")
    lines.append(f"  mount (arm base in the cell):       xyz {fmt_vec(mt['xyz_mm'], digits=6)} mm, "
                 f"rpy {fmt_vec(mt['rpy_deg'], digits=6)} deg")
    home = ", ".join(f"{j['name']} {fmt_num(v, 6)} {j['unit']}" for v, j in zip(info["home"], info["joints"]))
    lines.append(f"  home pose: {home}{'' if info['home_given'] else ' (not given: zeros)'}")
    if info["moving_mass_kg"] is not None:
        lines.append(f"  moving mass (links): {fmt_num(info['moving_mass_kg'])} kg")
    r = info["reach"]
    lines.append(f"  reach: {r['from_axis_m'] * 1000:.0f} mm from joint 1's axis, "
                 f"{r['from_origin_m'] * 1000:.0f} mm from joint 1's origin (largest over {r['samples'] - 1} random "
                 f"in-limit poses and the home pose)")
    if r["characteristic_length_source"] == "arm file":
        lines.append(f"  characteristic length: {r['characteristic_length_m'] * 1000:.0f} mm (stated in the arm file; "
                     f"axis chain {r['axis_chain_m'] * 1000:.0f} mm)")
    else:
        lines.append(f"  characteristic length: {r['characteristic_length_m'] * 1000:.0f} mm (axis chain: the reach "
                     f"bound from joint 1's axis, the same for any file form of this arm)")
    col = info.get("collision") or {}
    if col.get("bodies"):
        lines.append("")
        lines.append("  collision shapes:")
        for b in col["bodies"]:
            lines.append(f"    {b['body']}: {'; '.join(b['shapes'])}")
        skipped = ", ".join(f"{a} - {b}" for a, b in col.get("skipped", []))
        lines.append(f"    {col['self_pairs']} body pairs checked against each other (chain neighbours never"
                     f"{'; skipped: ' + skipped if skipped else ''})")
        if col.get("home_clearance_mm") is not None:
            a, b = col["home_nearest"]
            lines.append(f"    clearance at the home pose (floor and own links): {fmt_num(col['home_clearance_mm'])} mm, "
                         f"{a} - {b}")
    if info["warnings"]:
        lines.append("")
        lines.append("warnings:")
        lines.extend(f"  - {w}" for w in info["warnings"])
    else:
        lines.append("")
        lines.append("no warnings")
    return "\n".join(lines)
