"""Plausibility warnings: inputs that read without error but are probably not what was meant.

A file can be valid and still wrong: metre values in a millimetre arm file (an arm that reaches
2 mm), a URDF written in millimetres (500 m of reach, joint limits of +-9740 deg), radians typed
into a degree field (``alpha = -1.5708``), a placement given in mm where metres are read (the arm
stands kilometres away from its work), or a study where nothing is reachable. Each check returns
plain sentences; the command line prints them as ``warning:`` lines (``workbench info``,
``workbench run``), the decision (and so the report and the window) carries the result warnings
as notes. Nothing here refuses anything: the limits in :mod:`workbench.limits` do that.

Every function is pure (numpy only) and returns a list of strings, empty when nothing looks odd.
"""
from __future__ import annotations

import math

import numpy as np

__all__ = ["REACH_RANGE_M", "FAR_FACTOR", "ALMOST_NOTHING", "arm_warnings", "angle_warnings",
           "cell_warnings", "reached_fraction", "result_warnings", "study_warnings"]

#: reach (m) of arms this tool is for: from small bench arms (about 0.1 m) to large floor arms and
#: gantries (a few metres); outside this a length unit is probably wrong (common practice)
REACH_RANGE_M = (0.05, 10.0)
#: a base farther than this many reaches from every work point cannot serve any of them
FAR_FACTOR = 1.5
#: a study that reaches at most this fraction of its targets is called "almost nothing reachable"
ALMOST_NOTHING = 0.05
#: revolute limits beyond this (rad) in a URDF are degrees written where radians are read
_URDF_TURNS = 4 * math.pi
_RADIAN_LOOKS = tuple(k * math.pi / d for d in (1, 2, 3, 4, 6) for k in range(1, 2 * d + 1))


def _fmt_len(m: float) -> str:
    if not math.isfinite(m):
        return str(m)
    if abs(m) < 1.0:
        return f"{m * 1000:.3g} mm"
    return f"{m:.4g} m"


def _reach(arm) -> float:
    try:
        return float(arm.nominal_reach())
    except Exception:  # pragma: no cover - an arm without joints is refused by the readers
        return float("nan")


def _is_urdf(model) -> bool:
    return model.source is None and str(model.path or "").lower().endswith(".urdf")


def _file_unit(model) -> str | None:
    src = model.source if isinstance(model.source, dict) else None
    if src is None:
        return "m" if _is_urdf(model) else None
    arm = src.get("arm") if isinstance(src.get("arm"), dict) else {}
    return arm.get("length_unit", "m")


def arm_warnings(arm) -> list[str]:
    """Reach outside :data:`REACH_RANGE_M` for the file's length unit, URDF limits in degrees,
    and angle fields that look like radians (:func:`angle_warnings`).

    Parameters
    ----------
    arm : workbench.kinematics.Arm
    """
    m = arm.model
    where = m.path or m.name
    out = []
    reach = _reach(arm)
    unit = _file_unit(m)
    lo, hi = REACH_RANGE_M
    if math.isfinite(reach) and reach < lo:
        hint = (" (metre values in a length_unit = 'mm' file?)" if unit == "mm" else
                " (is the length unit right?)")
        out.append(f"{where}: the arm reaches only {_fmt_len(reach)} (its axis-chain length, an upper bound on the reach from the first axis); arms are "
                   f"{_fmt_len(lo)} to {hi:g} m{hint}")
    elif math.isfinite(reach) and reach > hi:
        hint = (" (a URDF written in millimetres? URDF lengths are metres)" if _is_urdf(m) else
                " (millimetre values in a length_unit = 'm' file?)" if unit == "m" else
                " (is the length unit right?)")
        out.append(f"{where}: the arm reaches {_fmt_len(reach)} (its axis-chain length, an upper bound on the reach from the first axis); arms are "
                   f"{_fmt_len(lo)} to {hi:g} m{hint}")
    if _is_urdf(m):
        wide = [j.name for j in m.joints if j.revolute and
                max(abs(j.lower) if math.isfinite(j.lower) else 0, abs(j.upper) if math.isfinite(j.upper) else 0)
                > _URDF_TURNS]
        if wide:
            j = next(j for j in m.joints if j.name == wide[0])
            out.append(f"{where}: joint limits of {math.degrees(j.lower):.0f} .. {math.degrees(j.upper):.0f} deg on "
                       f"{', '.join(wide)} (more than two turns each way): degrees written where URDF expects "
                       f"radians?")
    out.extend(angle_warnings(m))
    return out


def _looks_radian(v) -> float | None:
    """The multiple of pi that ``v`` (a number in a degree field) looks like, or None."""
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        return None
    a = abs(float(v))
    if a == 0 or float(v).is_integer():
        return None
    for r in _RADIAN_LOOKS:
        if abs(a - r) <= 2e-3 * r:
            return r
    return None


def _pi_text(r: float) -> str:
    for d in (1, 2, 3, 4, 6):
        k = r * d / math.pi
        if abs(k - round(k)) < 1e-9:
            k = int(round(k))
            num = "pi" if k == 1 else f"{k} pi"
            return num if d == 1 else f"{num}/{d}"
    return f"{r:.4g}"  # pragma: no cover


def angle_warnings(model) -> list[str]:
    """Degree fields of a TOML arm file whose values look like radians.

    A value that is not a whole number and lies within 0.2 % of a multiple of pi/6 or pi/4 (for
    example ``alpha = -1.5708``, pi/2) is most likely radians; so are joint limits whose ends are
    both fractions within one turn of radians (``limits = [-2.97, 2.97]``).
    """
    src = model.source if isinstance(model.source, dict) else None
    if src is None:
        return []
    where = model.path or model.name
    out = []
    joints = src.get("joint") if isinstance(src.get("joint"), list) else []
    for i, jr in enumerate(joints):
        if not isinstance(jr, dict):
            continue
        label = f"joint {i + 1} ({jr.get('name')!r})"
        for key in ("alpha", "theta"):
            r = _looks_radian(jr.get(key))
            if r is not None:
                out.append(f"{where}: {label} {key} = {jr[key]!r} looks like radians ({'-' if jr[key] < 0 else ''}"
                           f"{_pi_text(r)}) in a degree field; write {math.copysign(math.degrees(r), jr[key]):g}")
        rpy = jr.get("rpy")
        if isinstance(rpy, list):
            hits = [(k, v) for k, v in enumerate(rpy) if _looks_radian(v) is not None]
            if hits:
                out.append(f"{where}: {label} rpy = {rpy!r} looks like radians in a degree field; write "
                           f"{[round(math.degrees(float(v)), 6) if k in dict(hits) else v for k, v in enumerate(rpy)]}")
        lim = jr.get("limits")
        if (jr.get("type", "revolute") == "revolute" and isinstance(lim, list) and len(lim) == 2
                and all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in lim)
                and all(abs(v) <= 2 * math.pi + 0.01 for v in lim) and not all(float(v).is_integer() for v in lim)):
            out.append(f"{where}: {label} limits = {lim!r} deg span only {abs(lim[1] - lim[0]):.3g} deg: radians in a "
                       f"degree field? (write [{math.degrees(lim[0]):.4g}, {math.degrees(lim[1]):.4g}])")
    for table in ("tool", "mount", "flange"):
        t = src.get(table)
        if isinstance(t, dict) and isinstance(t.get("rpy"), list):
            if any(_looks_radian(v) is not None for v in t["rpy"]):
                out.append(f"{where}: [{table}] rpy = {t['rpy']!r} looks like radians in a degree field")
    return out


def _base_position(arm, cell, settings_mount=None):
    if settings_mount is not None:
        return np.asarray(settings_mount, float)[:3, 3], "the study's mount"
    if cell is not None and getattr(cell, "placement", None) is not None:
        return np.asarray(cell.placement, float)[:3, 3], "the cell's [placement]"
    return np.asarray(arm.model.mount, float)[:3, 3], "the arm's [mount]"


def cell_warnings(arm, cell, settings_mount=None, uses_region=False) -> list[str]:
    """A placement (or every mount candidate) farther than :data:`FAR_FACTOR` reaches from every
    work point of ``cell``.

    Parameters
    ----------
    arm : workbench.kinematics.Arm
    cell : workbench.studies.cell.Cell or None
    settings_mount : (4, 4) array, optional
        A base pose from the study settings that overrides the cell's placement.
    uses_region : bool
        Check the mount candidate region (mount search) instead of the placement.
    """
    if cell is None or not getattr(cell, "points", None):
        return []
    reach = _reach(arm)
    if not math.isfinite(reach) or reach <= 0:
        return []
    P = np.array([p.position for p in cell.points], float)  # (k, 3)
    where = getattr(cell, "path", None) or cell.name
    limit = FAR_FACTOR * reach
    if uses_region and getattr(cell, "mount", None) is not None:
        reg = cell.mount
        lo = np.array([np.min(reg.xs), np.min(reg.ys), np.min(reg.heights)])
        hi = np.array([np.max(reg.xs), np.max(reg.ys), np.max(reg.heights)])
        gap = np.linalg.norm(np.maximum(0.0, np.maximum(lo - P, P - hi)), axis=1)  # point to the region's box
        nearest = float(gap.min())
        if nearest > limit:
            return [f"{where}: every mount candidate is at least {_fmt_len(nearest)} from every work point, beyond "
                    f"{FAR_FACTOR:g} x the arm's reach ({_fmt_len(reach)}): is the [mount] region in the cell's "
                    f"length unit?"]
        return []
    base, what = _base_position(arm, cell, settings_mount)
    d = np.linalg.norm(P - base, axis=1)
    k = int(np.argmin(d))
    if d[k] > limit:
        return [f"{where}: {what} at [{', '.join(f'{v:g}' for v in base)}] m is {_fmt_len(float(d[k]))} from the "
                f"nearest work point ({cell.points[k].name!r}), beyond {FAR_FACTOR:g} x the arm's reach "
                f"({_fmt_len(reach)}): nothing can be reached (a placement in mm read as metres?)"]
    return []


def reached_fraction(kind: str, arrays) -> float | None:
    """Fraction of a study's computed targets that were reached (None for kinds without targets
    or without any computed cell)."""
    def arr(name):
        return None if name not in arrays else np.asarray(arrays[name]).reshape(-1)

    if kind == "reach_slice" and "status" in arrays:
        st = arr("status").astype(np.int64)
        done = st != 0
        return float(((st & 1) > 0)[done].mean()) if done.any() else None
    if kind == "path_audit" and "flags" in arrays:
        fl = arr("flags").astype(np.int64)
        done = np.isfinite(arr("distance")) if "distance" in arrays else np.ones(fl.shape, bool)
        return float(((fl & 1) > 0)[done].mean()) if done.any() else None
    if kind == "mount_search" and "point_reached" in arrays:
        pr = np.asarray(arrays["point_reached"])
        sc = arr("score")
        done = np.isfinite(sc) if sc is not None else np.ones(pr.shape[0], bool)
        return float((pr.reshape(len(done), -1)[done] > 0).mean()) if done.any() else None
    if kind == "load_map" and "reached" in arrays:
        r = arr("reached")
        p = arr("payload")
        done = np.isfinite(p) | (r > 0) if p is not None else np.ones(r.shape, bool)
        return float((r > 0)[done].mean()) if done.any() else None
    return None


def result_warnings(kind: str, arrays, where: str = "", best_fraction=None) -> list[str]:
    """"Nothing (or almost nothing) is reachable" for a finished or partial study.

    Parameters
    ----------
    kind : str
        The study kind.
    arrays : mapping
        The result arrays (flat or grid-shaped).
    where : str
        The study (file) for the message.
    """
    f = reached_fraction(kind, arrays)
    if f is None:
        return []
    head = f"{where}: " if where else ""
    what = {"reach_slice": "grid points", "path_audit": "path samples", "mount_search": "(candidate, work point) pairs",
            "load_map": "grid points"}.get(kind, "targets")
    if kind == "mount_search" and "reached_fraction" in arrays:
        best = np.asarray(arrays["reached_fraction"], float).reshape(-1)
        best = best[np.isfinite(best)]
        if best.size and float(best.max()) == 0.0:
            return [f"{head}no candidate mount reaches any work point: check the [mount] region, the work points and "
                    f"their length unit"]
    if f == 0.0:
        return [f"{head}nothing is reachable: 0 of the {what} were reached (is the placement or the length unit "
                f"right? is the region inside the arm's reach?)"]
    if f <= ALMOST_NOTHING:
        return [f"{head}almost nothing is reachable: {100 * f:.2g} % of the {what} were reached"]
    return []


def study_warnings(prepared) -> list[str]:
    """The warnings of a prepared study (:class:`workbench.runner.Prepared`-like: ``plan``, ``arm``,
    ``cell``) before it runs: the arm's and the cell's (placement or mount region)."""
    plan, arm, cell = prepared.plan, prepared.arm, prepared.cell
    out = list(arm_warnings(arm))
    if cell is not None:
        mount = getattr(plan.settings, "mount", None)
        mount = mount if isinstance(mount, np.ndarray) and mount.shape == (4, 4) else None
        out.extend(cell_warnings(arm, cell, settings_mount=mount, uses_region=plan.kind == "mount_search"))
    coll = (plan.data.get("result_attrs") or {}).get("collisions", "") if isinstance(plan.data, dict) else ""
    if "no collision shapes" in coll:
        from .collide import NO_SHAPES_WARNING

        out.append(NO_SHAPES_WARNING)
    return out
