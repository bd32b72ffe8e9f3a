"""``workbench jacobian ARM --q ...``: the Jacobian and its measures at one pose.

Prints the 6 x n geometric Jacobian (rows vx vy vz wx wy wz, in the base frame or with
``--world`` the cell frame), the singular values of the chosen task rows, manipulability,
condition number, inverse condition, minimum singular value, the TCP pose (mm, degrees) and a
plain-words note on the weakest direction. Joint values are given in degrees (mm for prismatic
joints). ``--json`` prints the same as one JSON object.
"""
from __future__ import annotations

import json
import math
import re

import numpy as np

from ..errors import WorkbenchError
from ..quantities import axis_label, unit_of
from .info import add_arm_arguments, fmt_num, fmt_pose, joint_unit, json_value, load, pose_dict

_ROW_LABELS = ("vx", "vy", "vz", "wx", "wy", "wz")


def add_parser(subparsers):
    p = subparsers.add_parser(
        "jacobian", help="Jacobian and measures at one pose",
        description="The geometric Jacobian of a frame at one pose and its measures (singular values, "
        "manipulability, condition number). Joint values in degrees (mm for prismatic joints), e.g. "
        "--q 0,-90,90,0,45,0 or --q 0 -90 90 0 45 0.")
    add_arm_arguments(p)
    p.add_argument("--q", nargs="+", metavar="VALUES", default=None,
                   help="joint values in degrees (mm for prismatic joints), comma or space separated; "
                   "default: the arm's home pose")
    p.add_argument("--frame", default="tcp",
                   help="tcp (default), flange, base, a joint name, joint:K (1-based), com:NAME or com:K")
    p.add_argument("--rows", default="full",
                   help="task rows: full (default), translation, rotation, planar, or a list such as vx,vy,wz")
    p.add_argument("--length", type=float, default=None, metavar="L",
                   help="characteristic length in metres dividing the translational rows when the rows mix "
                   "translation and rotation (default: the arm's nominal reach)")
    p.add_argument("--world", action="store_true",
                   help="express the Jacobian and poses in the cell (world) frame, through the mount")
    p.add_argument("--json", action="store_true", help="print one JSON object instead of text")
    # values such as "-90,90" are joint values, not options
    p._negative_number_matcher = re.compile(r"^-\.?\d")
    return p


def parse_q(tokens, arm) -> np.ndarray:
    """Joint values (n,) in rad / m from display-unit tokens ("0,-90" or ["0", "-90"])."""
    m = arm.model
    text = " ".join(str(t) for t in tokens)
    parts = text.split(",")
    if len(parts) > 1 and any(not p.strip() for p in parts):  # '0,,90' would silently shift the values
        k = next(i for i, p in enumerate(parts) if not p.strip())
        raise WorkbenchError(f"--q: value {k + 1} is empty in {text.strip()!r}; expected {m.n} numbers separated "
                             f"by commas or spaces, in degrees (mm for prismatic joints)")
    items = [s for t in tokens for s in re.split(r"[,\s]+", str(t).strip()) if s]
    if len(items) != m.n:
        raise WorkbenchError(f"--q: got {len(items)} joint value(s); arm {m.name!r} has {m.n} joints "
                             f"({', '.join(m.names)}); give {m.n} values in degrees (mm for prismatic joints)")
    out = np.empty(m.n)
    for k, (s, j) in enumerate(zip(items, m.joints)):
        try:
            v = float(s)
        except ValueError:
            raise WorkbenchError(f"--q: value {k + 1} ({j.name}) {s!r} is not a number; expected "
                                 f"{'degrees' if j.revolute else 'millimetres'}") from None
        if not math.isfinite(v):
            raise WorkbenchError(f"--q: value {k + 1} ({j.name}) {s!r} is not a finite number")
        out[k] = v / joint_unit(j)[0]
    return out


def run(args) -> int:
    from ..kinematics.rows import parse_rows
    from ..measures import measures

    arm = load(args)
    m = arm.model
    q = arm.home_q.copy() if args.q is None else parse_q(args.q, arm)
    rows = parse_rows(args.rows)
    length = arm.nominal_reach() if args.length is None else args.length
    if args.length is not None and not (math.isfinite(length) and length > 0):
        raise WorkbenchError(f"--length: expected a positive length in metres, got {args.length!r}")
    arm.resolve_frame(args.frame)  # unknown frames -> one-line error
    J = arm.jacobian(q, frame=args.frame, world=args.world)
    res = measures(J, rows=rows, length=length)
    tcp = arm.fk(q, frame="tcp", world=args.world)
    frame_T = arm.fk(q, frame=args.frame, world=args.world)
    outside = [k for k in range(m.n) if not (m.lower[k] - 1e-12 <= q[k] <= m.upper[k] + 1e-12)]
    note = None
    if not res["inverse_condition"] > 1e-12:
        note = _structural_note(arm, args.frame, rows, length, args.world)
    if note is None:
        note = _note(arm, q, args.frame, rows, length, args.world)
    mixed = any(r < 3 for r in rows) and any(r >= 3 for r in rows)
    data = {
        "arm": m.name,
        "file": m.path,
        "joints": list(m.names),
        "q": [float(v * joint_unit(j)[0]) for v, j in zip(q, m.joints)],
        "q_units": [joint_unit(j)[1] for j in m.joints],
        "q_si": q.tolist(),
        "frame": args.frame,
        "reference": "world" if args.world else "base",
        "jacobian": J.tolist(),
        "jacobian_rows": list(_ROW_LABELS),
        "rows": [_ROW_LABELS[r] for r in rows],
        "length_m": float(length) if mixed else None,
        "singular_values": res["sv"].tolist(),
        "manipulability": float(res["manipulability"]),
        "condition": float(res["condition"]),
        "inverse_condition": float(res["inverse_condition"]),
        "min_sv": float(res["min_sv"]),
        # units of the measures of these rows on this arm (workbench/quantities.py); None: no single unit
        "units": {k: unit_of(k, rows, [j.kind for j in m.joints])
                  for k in ("manipulability", "condition", "inverse_condition", "min_sv")},
        "tcp": {**pose_dict(tcp), "matrix": tcp.tolist()},
        "frame_pose": {**pose_dict(frame_T), "matrix": frame_T.tolist()},
        "outside_limits": [m.names[k] for k in outside],
        "note": note,
    }
    if args.json:
        print(json.dumps(json_value(data), indent=2))
    else:
        print(format_jacobian(data, J, arm))
    return 0


def _structural_note(arm, frame, rows, length, world):
    """The sentence for rows the arm lacks at every pose (not a singularity), with rows it can serve;
    None when some pose gives the rows their full rank."""
    from ..kinematics.task_rank import generic_rank

    rr = generic_rank(arm, rows, frame=frame, world=world, length=length)
    if not rr.structural:
        return None
    where = "world" if world else "base"
    text = (f"Not a singularity: the arm cannot serve the {where}-frame rows [{rr.names(rr.rows)}] at any pose "
            f"(rank at most {rr.rank} of {rr.full} over random poses in the joint limits)")
    if rr.dead_rows:
        text += f"; it never moves along or about {rr.names(rr.dead_rows)} in the {where} frame"
    text += "."
    if world and not generic_rank(arm, rows, frame=frame, world=False, length=length).structural:
        text += (" In the arm's own base frame these rows are served: drop --world (for a planar arm that is "
                 "its own plane).")
    else:
        live = generic_rank(arm, "full", frame=frame, world=world, length=length).live_rows
        if live and len(live) <= arm.n and tuple(live) != tuple(rr.rows):
            alt = generic_rank(arm, list(live), frame=frame, world=world, length=length)
            if not alt.structural:
                text += (f" The rows it does serve here: --rows {','.join(alt.names(live).split(', '))}"
                         f"{' --world' if world else ''}.")
    return text


def _note(arm, q, frame, rows, length, world):
    try:
        from ..measures import explain_singularity
    except ImportError:  # pragma: no cover - older measures module
        return None
    try:
        return explain_singularity(arm, q, frame=frame, rows=rows, length=length, world=world)
    except WorkbenchError:
        return None


def format_jacobian(data: dict, J: np.ndarray, arm) -> str:
    """The text ``workbench jacobian`` prints."""
    m = arm.model
    if all(u == "deg" for u in data["q_units"]):
        qs = "[" + ", ".join(fmt_num(v, 6) for v in data["q"]) + "] deg"
    else:
        qs = "[" + ", ".join(f"{fmt_num(v, 6)} {u}" for v, u in zip(data["q"], data["q_units"])) + "]"
    lines = [f"{data['arm']}: Jacobian of '{data['frame']}' at q = {qs} ({data['reference']} frame)"]
    lines.append("  columns: joints; rows: tool velocity vx vy vz (m/s) and angular velocity wx wy wz (rad/s) "
                 "per unit joint speed (rad/s, or m/s for prismatic joints)")
    heads = [n if len(n) <= 10 else n[:9] + "~" for n in m.names]
    w = max(10, max(len(h) for h in heads))
    lines.append("      " + " ".join(h.rjust(w) for h in heads))
    for r, lab in enumerate(_ROW_LABELS):
        vals = " ".join(f"{(round(float(J[r, c]), 5) + 0.0):{w}.5f}" for c in range(m.n))
        lines.append(f"  {lab}  {vals}")
    lines.append("")
    rows_txt = ", ".join(data["rows"])
    scale = f"; translational rows divided by L = {data['length_m']:.4g} m" if data["length_m"] else ""
    lines.append(f"  task rows: {rows_txt}{scale}")
    sv = data["singular_values"]
    tiny = 1e-12 * max(sv[0], 1e-300) if sv else 0.0
    shown = [("0" if s <= tiny else f"{s:.6g}") for s in sv]
    units = data.get("units", {})

    sv_unit = units.get("min_sv") or ""
    heads = {name: axis_label(name, unit=units.get(name) or "", log=False) + ":"
             for name in ("manipulability", "condition", "inverse_condition", "min_sv")}
    heads["sv"] = "singular values" + (f" ({sv_unit})" if sv_unit else "") + ":"
    width = max(23, max(len(h) for h in heads.values()) + 1)

    def head(name):         # the registry's label and the unit of these rows: "manipulability w (m^3):"
        return f"  {heads[name]:<{width}}"

    lines.append(f"{head('sv')}{'  '.join(shown)}")
    lines.append(f"{head('manipulability')}{'0' if sv and sv[-1] <= tiny else format(data['manipulability'], '.6g')}")
    cond = data["condition"]
    singular = math.isinf(cond) or (sv and sv[-1] <= tiny)
    lines.append(f"{head('condition')}{'inf (singular)' if singular else f'{cond:.6g}'}")
    lines.append(f"{head('inverse_condition')}{'0' if singular else format(data['inverse_condition'], '.6g')}")
    lines.append(f"{head('min_sv')}{shown[-1] if shown else '-'}")
    lines.append("")
    T = np.array(data["tcp"]["matrix"])
    lines.append(f"  TCP pose:   {fmt_pose(T)}")
    if data["frame"].strip().lower() != "tcp":
        lines.append(f"  frame pose: {fmt_pose(np.array(data['frame_pose']['matrix']))}")
    if data["outside_limits"]:
        lines.append(f"  note: outside the joint limits: {', '.join(data['outside_limits'])}")
    if data["note"]:
        lines.append("")
        lines.append(f"  {data['note']}")
    return "\n".join(lines)
