"""The decision a results file supports, as plain data: what to do, whether the requirements hold,
and the largest risks (DESIGN §8 "Decisions first").

Every study kind fills the same small model, and the layout report (and the window) only renders
it, so that page 1 of the report, the ranking and the window give one answer:

* :class:`Recommendation`: the answer to the study's question. For a mount search the mount to
  use (x, y, height, yaw, style in the cell frame, as the ranking gives it); for a path audit or a
  load map the base placement the study used, stated with where it came from.
* :class:`Verdict`: one row per requirement: threshold (with unit), the worst value, where it
  occurs, and ``pass`` / ``fail`` / ``not checked``. A requirement the results cannot show is
  ``not checked`` with the reason (e.g. "the arm has no collision shapes"), never left out.
* :class:`Risk`: the largest risks in plain words: where, what (the cause, from
  :func:`workbench.measures.singularity_note` at the pose concerned), and what to change, worked out
  from the data where it can be (e.g. the smallest base move that clears a near-singular span).
* :class:`PointCheck`: per work point at the recommended mount (mount search): joint values,
  measures, margins, clearance and requirement checks.

:func:`decision_for` builds a :class:`Decision` from a :class:`workbench.results.Results`; one
builder per kind (``BUILDERS``). Verdict rows look for their data by name (a field or a table
column such as ``clearance`` or ``torque_margin``) and say "not checked" when it is absent, so a new
requirement is one small function here when its data appear.

Pure: numpy and the study modules only; no matplotlib, no Qt.
"""
from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, field, replace

import numpy as np

from .errors import WorkbenchError

__all__ = ["Decision", "Recommendation", "Verdict", "Risk", "PointCheck", "Comparison", "decision_for",
           "compare_decisions", "collision_status", "BUILDERS", "PASS", "FAIL", "NOT_CHECKED", "LIMIT_MARGIN",
           "SENSITIVITY_DROP", "fmt_number", "fmt_mm", "fmt_deg", "fmt_percent", "QUESTIONS"]

PASS, FAIL, NOT_CHECKED = "pass", "fail", "not checked"

#: smallest joint-limit margin (1 mid range, 0 at a limit) a pose should keep: within 5 % of a
#: joint's half range of a limit counts as "at the limit". Our default, not a published value.
LIMIT_MARGIN = 0.05
#: largest acceptable loss of the mount score when the base is placed off by the sensitivity
#: check's offsets (10-20 mm, 1-2 deg): 10 %. Our default.
SENSITIVITY_DROP = 0.10
#: default clearance asked of collision-checked studies when the results do not state it (m)
DEFAULT_CLEARANCE = 0.01

QUESTIONS = {
    "mount_search": "Where should the arm's base go?",
    "path_audit": "What must the paths avoid, with the base where it stands?",
    "load_map": "How much can the arm hold over the slice, with the base where it stands?",
    "reach_slice": "Which part of the slice does the arm reach, and how well?",
    "joint_sweep": "Which poses of the swept joints are near singular?",
}


# ----------------------------------------------------------------------------------------------
# numbers for people


def _clean(text: str) -> str:
    """'-0', '-0.0', '-0.00 %' -> without the minus."""
    if text.startswith("-") and not any(c in "123456789" for c in text.split("e")[0]):
        return text[1:]
    return text


def fmt_number(x, sig: int = 3, trim: bool = True) -> str:
    """A dimensionless number for people: ``sig`` significant digits, no exponent between 1e-3 and
    1e5, a short exponent below (``1.8e-8``), never "-0".

    Parameters
    ----------
    x : float
    sig : int
    trim : bool
        Drop trailing zeros ("0.02" rather than "0.0200"); tables keep them so that a column's
        values line up.
    """
    try:
        x = float(x)
    except (TypeError, ValueError):
        return str(x)
    if math.isnan(x):
        return "-"
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    if x == 0:
        return "0"
    a = abs(x)
    if a < 1e-3:
        m, e = f"{x:.{max(sig - 2, 0)}e}".split("e")
        if "." in m and trim:
            m = m.rstrip("0").rstrip(".")
        return _clean(f"{m}e{int(e)}")
    if a >= 1e5:
        return _clean(f"{x:.0f}")
    d = max(0, sig - 1 - int(math.floor(math.log10(a))))
    t = f"{x:.{d}f}"
    if "." in t and trim:
        t = t.rstrip("0").rstrip(".")
    return _clean(t)


def fmt_mm(metres, decimals: int | None = None) -> str:
    """A length given in m, shown in mm: whole mm (0.1 mm below 10 mm), never "-0"."""
    try:
        v = float(metres) * 1000.0
    except (TypeError, ValueError):
        return str(metres)
    if not math.isfinite(v):
        return fmt_number(v)
    if decimals is None:
        decimals = 1 if 0.05 <= abs(v) < 9.95 else 0
    return _clean(f"{v:.{decimals}f}")


def fmt_deg(rad, decimals: int = 1) -> str:
    """An angle given in rad, shown in degrees (0.1 deg), never "-0.0"."""
    try:
        v = math.degrees(float(rad))
    except (TypeError, ValueError):
        return str(rad)
    if not math.isfinite(v):
        return fmt_number(v)
    return _clean(f"{v:.{decimals}f}")


def fmt_percent(fraction, decimals: int = 1) -> str:
    """A fraction shown in percent, never "-0.0"."""
    try:
        v = float(fraction) * 100
    except (TypeError, ValueError):
        return str(fraction)
    if not math.isfinite(v):
        return fmt_number(v)
    return _clean(f"{v:.{decimals}f}") + " %"


def _joint_value(joint_revolute: bool, v) -> str:
    return fmt_deg(v) if joint_revolute else fmt_mm(v)


def _s(v):
    return v.decode("utf-8", "replace") if isinstance(v, bytes) else v


# ----------------------------------------------------------------------------------------------
# the model


@dataclass(frozen=True, eq=False)
class Recommendation:
    """The answer to the study's question.

    Attributes
    ----------
    kind : {"mount", "placement", "none"}
        "mount": chosen by a mount search; "placement": the base placement the study used;
        "none": no mount serves any work point.
    question, answer : str
        The study's question and the answer in one or two sentences.
    x, y, height : float
        Base origin in the cell frame, m.
    yaw : float
        Base rotation about the cell z axis, rad.
    style : str
        "floor", "wall", "ceiling", "tilt 30 deg" or "general" (a rotation that is not
        ``Rz(yaw) Ry(tilt)``; see ``transform``).
    tilt : float
        Rotation about the turned y axis, rad.
    transform : (4, 4) ndarray
        Base-in-cell transform ``T(x, y, height) Rz(yaw) Ry(tilt)`` (or the general one).
    source : str
        Where the values come from ("refined mount 1 of 3 of the mount search", "the cell's
        [placement]" ...).
    score : float or None
        The rank value of the recommended mount (mount search: points served + Q / (1 + Q), Q the
        quality; see :mod:`workbench.studies.mount_search`).
    pose : (n,) ndarray or None
        A representative pose to draw (rad / m), described by ``pose_label``.
    pose_label : str
    """

    kind: str
    question: str
    answer: str
    x: float
    y: float
    height: float
    yaw: float
    style: str
    tilt: float
    transform: np.ndarray
    source: str
    score: float | None = None
    pose: np.ndarray | None = None
    pose_label: str = ""

    def values(self) -> list:
        """(label, text) pairs of the placement, in mm and degrees (the same everywhere)."""
        out = [("x", f"{fmt_mm(self.x)} mm"), ("y", f"{fmt_mm(self.y)} mm"), ("height", f"{fmt_mm(self.height)} mm"),
               ("yaw", f"{fmt_deg(self.yaw)} deg"), ("style", self.style)]
        if self.score is not None:
            out.append(("rank value", fmt_number(self.score, 6)))
        return out


@dataclass(frozen=True)
class Verdict:
    """One requirement: threshold, worst value, where, and pass / fail / not checked.

    ``value`` and ``limit`` are the numbers behind ``worst`` and ``threshold`` (None for not
    checked), in ``unit``; ``better`` says which way is better ("higher" / "lower").
    """

    key: str
    requirement: str
    threshold: str
    worst: str
    where: str
    status: str
    note: str = ""
    value: float | None = None
    limit: float | None = None
    unit: str = ""
    better: str = "higher"


@dataclass(frozen=True, eq=False)
class Risk:
    """A risk in plain words: ``where`` it is, ``what`` happens there (the cause), and what to
    ``change``. ``severity`` orders risks (>= 1: a requirement fails there); ``pose`` (n,) and
    ``position`` (3,) (cell frame, m) locate it."""

    key: str
    where: str
    what: str
    change: str
    severity: float
    pose: np.ndarray | None = None
    position: np.ndarray | None = None
    shown: str = ""   # where ``pose`` is, when it is not ``where`` (a span's worst sample)

    @property
    def text(self) -> str:
        return f"{self.where}: {self.what}; {self.change}"


@dataclass(frozen=True, eq=False)
class PointCheck:
    """A work point at the recommended mount.

    Attributes
    ----------
    name : str
    position : (3,) ndarray
        Cell frame, m.
    reached : bool
    q : (n,) ndarray
        Joint values, rad / m (NaN where not reached).
    inverse_condition, min_sv, manipulability : float
        Measures of the study's task rows at ``q`` (NaN where not reached).
    margin : float
        Joint-limit margin (1 mid range, 0 at a limit).
    margin_joint : str
        The joint nearest its limit; ``limit_distance`` its distance to that limit (rad / m).
    limit_distance : float
    clearance : float or None
        Smallest clearance, m, to the cell's obstacles and between the arm's links (None: not in the
        results).
    obstacle_clearance : float or None
        Smallest clearance to the cell's obstacles only, m (the quality's clearance factor; None: not
        in the results).
    torque_margin : float or None
        Smallest torque margin, fraction of the limit (None: not in the results).
    checks : dict
        Verdict key -> PASS / FAIL / NOT_CHECKED for this point.
    """

    name: str
    position: np.ndarray
    reached: bool
    q: np.ndarray
    inverse_condition: float
    min_sv: float
    manipulability: float
    margin: float
    margin_joint: str
    limit_distance: float
    clearance: float | None = None
    torque_margin: float | None = None
    checks: dict = field(default_factory=dict)
    obstacle_clearance: float | None = None


@dataclass(frozen=True, eq=False)
class Decision:
    """What a results file says, ready to render (see the module docstring).

    ``risks`` holds the three most important risks, ``other_risks`` the rest (most important
    first). ``arm`` is the arm mounted at the recommendation (for drawings), ``cell`` the cell (or
    None). ``collisions`` is the sentence on collision checks; ``notes`` other facts a reader must
    know (e.g. values recomputed from an older results file).
    """

    kind: str
    title: str
    question: str
    recommendation: Recommendation
    verdicts: tuple
    risks: tuple
    other_risks: tuple = ()
    points: tuple = ()
    joint_names: tuple = ()
    joint_revolute: tuple = ()
    collisions: str = ""
    collisions_checked: bool = False
    notes: tuple = ()
    arm: object = field(default=None, repr=False)
    cell: object = field(default=None, repr=False)
    thresholds: dict = field(default_factory=dict)

    def verdict(self, key: str) -> Verdict | None:
        return next((v for v in self.verdicts if v.key == key), None)

    @property
    def failed(self) -> list:
        return [v for v in self.verdicts if v.status == FAIL]


# ----------------------------------------------------------------------------------------------
# shared helpers


class _Ctx:
    """What every builder needs from a results file, read once."""

    def __init__(self, results, progress=None):
        from .results import ResultsError

        self.r = results
        self.progress = progress or (lambda f, t: None)
        try:
            self.kind_obj, self.plan, self.arm, self.cell = results.context()
        except WorkbenchError:
            raise
        except Exception as exc:  # stored texts that no longer parse: one line
            raise ResultsError(f"{results.path or 'results'}: the stored study, arm or cell text cannot be "
                               f"read back ({exc})") from None
        self.settings = {}
        try:
            self.settings = dict(tomllib.loads(results.study_text or "").get("settings") or {})
        except tomllib.TOMLDecodeError:
            pass
        m = self.arm.model
        self.names = tuple(m.names)
        self.revolute = tuple(bool(j.revolute) for j in m.joints)

    def table(self, name):
        t = self.r.tables.get(name)
        return t if t is not None and t.rows else None

    def column(self, table, name):
        t = self.r.tables.get(table)
        if t is None or name not in t.columns:
            return None
        return np.asarray([_s(v) for v in t.columns[name]]) if t.columns[name].dtype == object else \
            np.asarray(t.columns[name])

    def has_field(self, name):
        return any(f.name == name for f in self.r.fields)

    def jn(self, k) -> str:
        return self.names[int(k)]


def arm_shapes(model):
    """The arm's collision shapes per link, or None when the arm has none.

    Looks for a per-joint ``shapes`` attribute or a model-level ``shapes`` / ``link_shapes``
    sequence (one entry per link); returns a list of n lists (shapes in that joint's frame).
    """
    n = len(model.joints)
    per = [list(getattr(j, "shapes", None) or ()) for j in model.joints]
    if any(per):
        return per
    for name in ("shapes", "link_shapes"):
        v = getattr(model, name, None)
        if v is not None and len(v) == n and any(len(list(s or ())) for s in v):
            return [list(s or ()) for s in v]
    return None


def collision_status(results, arm=None) -> tuple:
    """``(checked, clearance, sentence)``: whether the study checked collisions, the clearance it
    asked (m, or None), and one sentence saying so from what the results hold.

    Collisions count as checked when the results hold clearance values (a field or a table column
    named ``clearance``); otherwise the sentence gives the reason: switched off in the settings,
    the arm has no collision shapes, or the results predate collision checks.
    """
    settings = {}
    try:
        settings = tomllib.loads(results.study_text or "").get("settings") or {}
    except tomllib.TOMLDecodeError:
        pass
    asked = settings.get("clearance", results.attrs.get("clearance", DEFAULT_CLEARANCE))
    try:
        asked = float(asked)
    except (TypeError, ValueError):
        asked = DEFAULT_CLEARANCE
    has = any(f.name == "clearance" for f in results.fields) or any(
        "clearance" in t.columns for t in results.tables.values())
    if has and settings.get("collisions", True) is not False:
        return True, asked, (f"Collisions checked: a pose counts only with at least {fmt_mm(asked)} mm of clearance "
                             f"between the arm and the cell's obstacles and between its own links.")
    if settings.get("collisions", None) is False:
        return False, None, "Collisions not checked: switched off in the study settings (collisions = false)."
    stated = str(results.attrs.get("collisions", ""))
    if "no collision shapes" in stated or (arm is not None and arm_shapes(arm.model) is None):
        return False, None, ("Collisions not checked: the arm has no collision shapes, so links may pass through "
                             "equipment, keep-out zones or the floor.")
    return False, None, "Collisions not checked: these results hold no clearance values."


def _sv_measures(arm, q, rows, length):
    from .measures import measures_from_sv

    q = np.atleast_2d(np.asarray(q, float))
    ok = np.all(np.isfinite(q), axis=-1)
    sv = arm.singular_values(np.ascontiguousarray(np.where(ok[:, None], q, 0.0)), rows=rows, length=length)
    m = measures_from_sv(sv)
    return {k: np.where(ok, m[k], np.nan) for k in ("inverse_condition", "min_sv", "manipulability")}


def _limit_info(arm, q):
    """Per pose: (margin, joint index nearest a limit, distance to that limit in rad / m)."""
    q = np.atleast_2d(np.asarray(q, float))
    jm = arm.joint_margins(np.where(np.isfinite(q), q, 0.0))
    k = np.argmin(jm, axis=-1)
    lo, hi = arm.model.lower, arm.model.upper
    qk = q[np.arange(len(q)), k]
    dist = np.minimum(qk - lo[k], hi[k] - qk)
    return jm.min(axis=-1), k, dist


def _near_limit(arm, q, k) -> str:
    """'joint j5 at 118.0 deg, 17.0 deg from its +135.0 deg limit'."""
    m = arm.model
    rev = bool(m.joints[k].revolute)
    lo, hi = m.lower[k], m.upper[k]
    v = float(q[k])
    lim = lo if abs(v - lo) < abs(hi - v) else hi
    unit = "deg" if rev else "mm"
    f = (lambda x: fmt_deg(x)) if rev else (lambda x: fmt_mm(x))
    return f"joint {m.names[k]} at {f(v)} {unit}, {f(abs(v - lim))} {unit} from its {f(lim)} {unit} limit"


def _cause(arm, q, rows, length, threshold, frame_word="cell frame"):
    """(lost-direction sentence, cause sentence) of :func:`workbench.measures.singularity_note`
    at pose q of the mounted arm, directions in the world frame (named ``frame_word``)."""
    from .measures import singularity_note

    try:
        note = singularity_note(arm, np.asarray(q, float), rows=rows, length=length, threshold=threshold,
                                world=True)
    except Exception:  # a note helps; it is never a reason to lose the report
        return "", ""
    s = [t.replace("(world frame)", f"({frame_word})") for t in note.sentences]
    return s[0], " ".join(s[1:])


def _lower_first(s: str) -> str:
    return s[:1].lower() + s[1:] if s and not s[:2].isupper() else s


def _decompose(T):
    """x, y, height, yaw, tilt, style of a base-in-cell transform (style 'general' when it is not
    ``T(x, y, h) Rz(yaw) Ry(tilt)``)."""
    from .studies.cell import STYLE_TILTS, mount_transforms

    T = np.asarray(T, float)
    x, y, h = T[:3, 3]
    z = T[:3, 2]
    tilt = math.acos(max(-1.0, min(1.0, z[2])))
    if abs(math.sin(tilt)) > 1e-9:
        yaw = math.atan2(z[1], z[0])
    else:
        R = T[:3, :3]
        yaw = math.atan2(R[1, 0], R[0, 0]) if z[2] > 0 else math.atan2(-R[1, 0], -R[0, 0])
    style = "general"
    if np.allclose(mount_transforms(x, y, h, yaw, tilt), T, atol=1e-9):
        deg = round(math.degrees(tilt), 6)
        style = next((k for k, v in STYLE_TILTS.items() if abs(v - deg) < 1e-6), f"tilt {fmt_deg(tilt)} deg")
    return float(x), float(y), float(h), float(yaw % (2 * math.pi)), float(tilt), style


#: severity of a collision risk: above every other kind (a strike damages the cell; the others cost
#: speed, accuracy or a stop), deeper overlaps first
COLLISION_SEVERITY = 20.0


def _limit_severity(margin):
    """Severity of a joint-limit risk: 1 + log10(LIMIT_MARGIN / margin), so >= 1 exactly when the
    margin fails, and bounded (a joint at its limit stops the arm; it does not outrank a collision
    or an exact singularity, whose severities are log-scaled the same way)."""
    return 1.0 + math.log10(LIMIT_MARGIN / max(float(margin), 1e-12))


def _collision_risks(ctx, a, q, names, pidx, dist, asked, arm_bodies):
    """One risk per span of path samples closer than the clearance setting (table
    ``clearance_spans``): the pair in words, how deep, and what to change."""
    t = ctx.table("clearance_spans")
    if t is None:
        return []
    c = t.columns
    out = []
    for i in range(t.rows):
        path, lo, hi = _s(c["path"][i]), float(c["from"][i]), float(c["to"][i])
        mc, at, pair = float(c["min_clearance"][i]), float(c["at"][i]), _s(c["pair"][i])
        try:
            p = names.index(path)
        except ValueError:
            p = -1
        m = np.flatnonzero((pidx == p) & np.isfinite(dist))
        k = int(m[np.argmin(np.abs(dist[m] * 1000 - at))]) if m.size else None
        bodies = pair.split(" - ")
        own = set(bodies) <= set(arm_bodies)  # both bodies of the arm: it strikes itself
        # the table is in mm; fmt_mm takes metres
        what = (f"{_s(c['note'][i])} at {fmt_mm(at / 1000)} mm (clearance below the {fmt_mm(asked)} mm asked from "
                f"{fmt_mm(lo / 1000)} to {fmt_mm(hi / 1000)} mm)")
        if mc < 0.5:  # mm: touching or overlapping
            what += ": the arm would strike " + ("itself" if own else "the equipment") + " on this motion"
        change = ("change the tool's orientation along this stretch or move the path or the base so that the arm "
                  "folds less" if own else
                  f"move the path or the base away from {bodies[-1]}, or change the tool's orientation along this "
                  f"stretch")
        out.append(Risk("clearance", f"{path}, {fmt_mm(lo / 1000)}-{fmt_mm(hi / 1000)} mm", what, change,
                        COLLISION_SEVERITY + max(0.0, -mc) / 10.0, None if k is None else q[k],
                        None if k is None else np.asarray(a["xyz"][k], float), f"{path} at {fmt_mm(at / 1000)} mm"))
    return out


def _and(items):
    """'a', 'a and b', 'a, b and c'."""
    items = list(items)
    return items[0] if len(items) == 1 else ", ".join(items[:-1]) + " and " + items[-1]


def _rank_risks(risks, top=3):
    risks = sorted(risks, key=lambda r: -r.severity)
    return tuple(risks[:top]), tuple(risks[top:])


def _verdict_from_values(key, requirement, values, where, limit, better="higher", unit="", fmt=fmt_number,
                         note=""):
    """A verdict over per-item values (NaN ignored): the worst item against ``limit``."""
    v = np.asarray(values, float)
    ok = np.isfinite(v)
    sign = "≥" if better == "higher" else "≤"
    thr = f"{sign} {fmt(limit)}" + (f" {unit}" if unit else "")
    if not ok.any():
        return Verdict(key, requirement, thr, "-", "-", NOT_CHECKED, note or "no values", None, limit, unit, better)
    k = int(np.nanargmin(np.where(ok, v, np.inf)) if better == "higher" else np.nanargmax(np.where(ok, v, -np.inf)))
    worst = float(v[k])
    passed = worst >= limit if better == "higher" else worst <= limit
    return Verdict(key, requirement, thr, fmt(worst) + (f" {unit}" if unit else ""), where[k] if len(where) else "-",
                   PASS if passed else FAIL, note, worst, float(limit), unit, better)


def _not_checked(key, requirement, reason, threshold="-"):
    return Verdict(key, requirement, threshold, "-", "-", NOT_CHECKED, reason)


def _map_clearance(r):
    """(values, where) of a map's ``clearance`` field over its reached cells (status bit 1 of the
    ``status`` or ``reached`` field), or (None, []) when the results hold none."""
    if "clearance" not in r.arrays:
        return None, []
    c = np.asarray(r.arrays["clearance"], float).reshape(-1)
    st = r.arrays.get("status", r.arrays.get("reached"))
    if st is not None:
        c = np.where((np.asarray(st).reshape(-1).astype(np.int64) & 1) > 0, c, np.nan)
    return c, []


def _clearance_verdict(ctx, values, where, checked, asked, sentence):
    """Clearance >= the asked clearance, or not checked with the reason."""
    if values is None or not checked:
        return _not_checked("clearance", "Clearance to obstacles and between links",
                            _lower_first(sentence.split(": ", 1)[-1]).rstrip("."),
                            f"≥ {fmt_mm(asked if asked else DEFAULT_CLEARANCE)} mm")
    return _verdict_from_values("clearance", "Clearance to obstacles and between links", np.asarray(values, float),
                                where, asked, "higher", "mm", fmt=lambda v: fmt_mm(v))


def _torque_verdict(ctx, values, where):
    """Holding torques within the joint limits (torque margin >= 0), or not checked."""
    if values is None:
        m = ctx.arm.model
        if np.all(np.isnan(m.max_effort)):
            why = "the arm file gives no joint torque limits"
        else:
            why = "these results hold no holding torques (no tool wrench or payload checked by this study)"
        return _not_checked("torque_margin", "Holding torques within the joint limits", why, "≥ 0 % margin")
    return _verdict_from_values("torque_margin", "Holding torques within the joint limits", values, where, 0.0,
                                "higher", "", fmt=fmt_percent)


def _cycle_verdict(ctx):
    t = ctx.table("cycle_time")
    if t is None:
        return _not_checked("cycle_time", "Cycle time", "these results hold no cycle-time estimate")
    req = np.asarray(t.columns.get("required", np.full(t.rows, np.nan)), float)
    est = np.asarray(t.columns.get("time", t.columns.get("estimate", np.full(t.rows, np.nan))), float)
    names = [str(_s(v)) for v in t.columns.get("path", [f"path {i + 1}" for i in range(t.rows)])]
    ratio = est / req
    if not np.isfinite(ratio).any():
        return _not_checked("cycle_time", "Cycle time", "no required time in the cell file")
    k = int(np.nanargmax(ratio))
    ok = bool(np.nanmax(ratio) <= 1.0)
    return Verdict("cycle_time", "Cycle time within the required time", f"≤ {fmt_number(req[k])} s",
                   f"{fmt_number(est[k])} s", names[k], PASS if ok else FAIL, "", float(est[k]), float(req[k]), "s",
                   "lower")


# ----------------------------------------------------------------------------------------------
# mount search


def _mount_decision(ctx: _Ctx) -> Decision:
    from .measures import NEAR_SINGULAR
    from .studies.cell import mount_transforms

    r, arm0, cell, plan = ctx.r, ctx.arm, ctx.cell, ctx.plan
    s = plan.settings
    thr = float(ctx.settings.get("near_singular", NEAR_SINGULAR))
    points = list(plan.data["points"])
    P = len(points)
    checked, asked, coll = collision_status(r, arm0)
    notes = []
    ref = ctx.table("refined")
    rank = ctx.table("ranking")
    recd = ctx.table("recommended")
    src = None
    if recd is not None and recd.rows:
        c, row = recd.columns, 0
        if str(_s(c["source"][0])) == "refined":
            src = ("the mount search's recommended mount (table 'Recommended mount'): the best refined mount, "
                   "rounded to 1 mm and 0.1 deg and scored there; refined off the grid from the grid cell "
                   f"x = {fmt_number(float(c['grid_x'][0]), 6)} mm, y = {fmt_number(float(c['grid_y'][0]), 6)} mm, "
                   f"yaw {fmt_number(float(c['grid_yaw'][0]), 4)} deg (rank value "
                   f"{fmt_number(float(c['grid_rank_value'][0]), 6)}"
                   + (", the map's best cell)" if int(c["map_best"][0]) else ", not the map's best cell: its "
                      "refinement ended higher than the best cell's)"))
        else:
            src = "the mount search's recommended mount (table 'Recommended mount'): the best grid cell"
    elif ref is not None:
        c, row, src = ref.columns, 0, f"refined mount 1 of {ref.rows} of the mount search (table 'Refined mounts')"
    elif rank is not None:
        c, row, src = rank.columns, 0, "rank 1 of the mount search's grid ranking"
    if src is None:
        T = np.eye(4)
        rec = Recommendation("none", QUESTIONS["mount_search"],
                             "No candidate mount of the region serves any work point: widen the candidate region "
                             "or move the work points within reach.", 0.0, 0.0, 0.0, 0.0, "-", 0.0, T, "-", None)
        verdicts = (Verdict("points_served", "Work points served", f"all {P}", f"0 of {P}", "every candidate", FAIL),)
        return Decision("mount_search", _s(r.name), rec.question, rec, verdicts, (), (), (), ctx.names, ctx.revolute,
                        coll, checked, tuple(notes), arm0, cell, {"inverse_condition": thr})
    x, y, h = (float(c[k][row]) / 1000.0 for k in ("x", "y", "height"))
    yaw = math.radians(float(c["yaw"][row]))
    style = str(_s(c["style"][row]))
    styles = list(plan.data["styles"])
    tilt = float(plan.data["tilts"][styles.index(style)]) if style in styles else 0.0
    score = float(c["rank_value"][row]) if "rank_value" in c else float(c["score"][row])
    M = mount_transforms(x, y, h, yaw, tilt)
    arm = _mounted(arm0, M)
    ctx.progress(0.1, "per work point values at the recommended mount")

    # per-point joint values: from the results (the solutions behind the score) or recomputed
    bp = ctx.table("best_points")
    qcols = [f"q_{nm}" for nm in ctx.names]
    if bp is not None and all(k in bp.columns for k in qcols) and bp.rows == P:
        q = np.column_stack([np.radians(np.asarray(bp.columns[k], float)) if rev else
                             np.asarray(bp.columns[k], float) / 1000.0 for k, rev in zip(qcols, ctx.revolute)])
        reached = np.asarray(bp.columns["reached"]).astype(bool)
    else:
        from .studies.mount_search import evaluate_mounts

        ev = evaluate_mounts(arm0, M[None], points, s, choose="best")
        q, reached = ev["q"][0], ev["reached"][0]
        notes.append("The joint values per work point were recomputed (the results file holds none); they may be "
                     "another IK solution than the one behind the ranking's score.")
    q = np.where(reached[:, None], q, np.nan)
    length = s.length if s.length is not None else arm0.nominal_reach()
    meas = _sv_measures(arm0, q, s.rows, length)
    margin, mj, mdist = _limit_info(arm0, q)
    margin = np.where(reached, np.clip(margin, 0, 1), np.nan)
    clearance = _point_column(bp, "clearance", P, 1e-3)
    # the quality's clearance factor reads the clearance to obstacles (older files: the one clearance)
    obstacle = _point_column(bp, "obstacle_clearance", P, 1e-3)
    if obstacle is None:
        obstacle = clearance
    torque = _point_column(bp, "torque_margin", P, 1.0)
    names = [p.name for p in points]
    # the rank value from these values must be the ranking's (one answer everywhere)
    if reached.any():
        sm = getattr(s, "measure", "inverse_condition")
        w = np.nanmin(np.where(reached, meas.get(sm, meas["inverse_condition"]), np.nan))
        if "rank_value" in c:
            from .studies.mount_search import score_candidates

            tq = None if torque is None else torque[None]
            cl = None if obstacle is None else obstacle[None]
            sc = score_candidates(reached[None], np.where(reached, meas.get(sm, meas["inverse_condition"]), 0)[None],
                                  np.where(reached, margin, 0)[None], s, torque=tq, clearance=cl)
            check = float(sc["rank_value"][0])
        else:  # older files: the score f^p * w^a * m^b
            check = (reached.mean() ** getattr(s, "reach_power", 2.0) * max(w, 0) ** s.measure_power
                     * max(np.nanmin(margin), 0) ** s.margin_power)
        if abs(check - score) > 1e-6 * max(abs(score), 1e-12) + 1e-9:
            notes.append(f"The per-point values give a rank value of {fmt_number(check, 4)}, the ranking "
                         f"{fmt_number(score, 4)}: this results file was written by an older version whose per-point "
                         f"table used other IK solutions.")

    # verdicts
    missing = [nm for nm, ok in zip(names, reached) if not ok]
    served_what = ("Work points served (reached, inside the joint limits, the cell's requirements met)"
                   if bp is not None and "requirements_met" in bp.columns else
                   "Work points served (reached, inside the joint limits)")
    verdicts = [Verdict("points_served", served_what, f"all {P}",
                        f"{int(reached.sum())} of {P}", ", ".join(missing) if missing else "-",
                        PASS if not missing else FAIL, "", float(reached.sum()), float(P), "", "higher")]
    verdicts.append(_verdict_from_values("inverse_condition", f"Inverse condition ({_rows_words(s.rows)})",
                                         meas["inverse_condition"], names, thr))
    verdicts.append(_verdict_from_values("limit_margin", "Joint-limit margin (1 mid range, 0 at a limit)", margin,
                                         names, LIMIT_MARGIN))
    verdicts.append(_clearance_verdict(ctx, clearance, names, checked, asked, coll))
    verdicts.append(_torque_verdict(ctx, torque, names))
    sens = ctx.table("sensitivity")
    if sens is not None:
        kinds = [str(_s(k)) for k in sens.columns["offset_kind"]]
        off = np.asarray(sens.columns["offset"], float)
        nominal = float(np.asarray(sens.columns["nominal_score"], float)[0]) if "nominal_score" in sens.columns else score
        drop = np.asarray(sens.columns["score_drop"], float) / max(nominal, 1e-300)
        lost = (np.asarray(sens.columns["points_lost"], float) if "points_lost" in sens.columns
                else np.zeros(len(drop)))
        drop = np.where(lost > 0, np.inf, drop)
        k = int(np.argmax(drop))
        unit = "mm" if kinds[k] == "position" else "deg"
        parts = []
        for kind_, unit_ in (("position", "mm"), ("yaw", "deg")):
            o = sorted(off[i] for i, kk in enumerate(kinds) if kk == kind_)
            if o:
                parts.append(f"±{fmt_number(o[0])}" + (f"-{fmt_number(o[-1])}" if len(o) > 1 else "") + f" {unit_}")
        big = ", ".join(parts)
        worst_txt = (f"{int(lost[k])} work point{'s' if lost[k] > 1 else ''} lost" if lost[k] > 0
                     else f"{fmt_percent(max(drop[k], 0))} lost")
        verdicts.append(Verdict("placement_error", f"Quality kept when the base is placed off ({big})",
                                f"≤ {fmt_percent(SENSITIVITY_DROP, 0)} lost, no point lost", worst_txt,
                                f"{fmt_number(off[k])} {unit} off" + (" (turned)" if kinds[k] == "yaw" else ""),
                                PASS if drop[k] <= SENSITIVITY_DROP else FAIL, "",
                                float(max(drop[k], 0)) if np.isfinite(drop[k]) else float("inf"),
                                SENSITIVITY_DROP, "", "lower"))
    else:
        verdicts.append(_not_checked("placement_error", "Quality kept when the base is placed off",
                                     "the sensitivity check was switched off (sensitivity = false)"))
    verdicts.append(_not_checked("path_speeds", "Joint speeds and singular spans along the paths",
                                 "a mount search checks work points, not motion: run a path audit from this mount"
                                 if cell is not None and cell.paths else "the cell has no paths"))
    checks_of = _point_checks(verdicts, names, reached, meas["inverse_condition"], margin, thr, clearance, asked,
                              torque)
    pts = tuple(PointCheck(nm, np.asarray(p.position, float), bool(ok), q[i], float(meas["inverse_condition"][i]),
                           float(meas["min_sv"][i]), float(meas["manipulability"][i]), float(margin[i]),
                           ctx.jn(mj[i]), float(mdist[i]),
                           None if clearance is None else float(clearance[i]),
                           None if torque is None else float(torque[i]), checks_of[i],
                           None if obstacle is None else float(obstacle[i]))
                for i, (nm, p, ok) in enumerate(zip(names, points, reached)))

    ctx.progress(0.3, "risks at the recommended mount")
    risks = _mount_risks(ctx, arm, points, q, reached, meas, margin, mj, thr, s, length, verdicts)
    top, rest = _rank_risks(risks)
    if top and top[0].pose is not None:
        pose, label = top[0].pose, f"the arm drawn at {top[0].where.split(':')[0]} (risk 1)"
    else:
        k = int(np.nanargmin(np.where(reached, meas["inverse_condition"], np.inf))) if reached.any() else 0
        pose, label = q[k], f"the arm drawn at {names[k]}"
    served = int(reached.sum())
    fails = [v for v in verdicts if v.status == FAIL]
    answer = (f"Mount the base on the {style} at x = {fmt_mm(x)} mm, y = {fmt_mm(y)} mm, height {fmt_mm(h)} mm, "
              f"yaw {fmt_deg(yaw)} deg (cell frame). From there it serves {served} of {P} work points"
              + (f" (rank value {fmt_number(score, 6)}: points served first, then quality)" if "rank_value" in c else "")
              + "; "
              + (f"{len(fails)} requirement{'s' if len(fails) > 1 else ''} fail{'s' if len(fails) == 1 else ''} "
                 f"({', '.join(v.requirement.split(' (')[0].lower() for v in fails)})." if fails else
                 "every checked requirement passes."))
    if style not in ("floor", "wall", "ceiling"):
        answer = answer.replace(f"on the {style}", f"({style})")
    rec = Recommendation("mount", QUESTIONS["mount_search"], answer, x, y, h, yaw, style, tilt, M, src, score,
                         None if pose is None else np.asarray(pose, float), label)
    return Decision("mount_search", _s(r.name), rec.question, rec, tuple(verdicts), top, rest, pts, ctx.names,
                    ctx.revolute, coll, checked, tuple(notes), arm, cell,
                    {"inverse_condition": thr, "limit_margin": LIMIT_MARGIN})


def _rows_words(rows) -> str:
    return f"{rows} rows" if isinstance(rows, str) else f"rows {','.join(map(str, rows))}"


def _point_column(table, name, P, scale):
    if table is None or name not in table.columns or table.rows != P:
        return None
    return np.asarray(table.columns[name], float) * scale


def _point_checks(verdicts, names, reached, inv, margin, thr, clearance, asked, torque):
    out = []
    for i in range(len(names)):
        c = {"points_served": PASS if reached[i] else FAIL}
        if reached[i]:
            c["inverse_condition"] = PASS if inv[i] >= thr else FAIL
            c["limit_margin"] = PASS if margin[i] >= LIMIT_MARGIN else FAIL
            c["clearance"] = NOT_CHECKED if clearance is None else (PASS if clearance[i] >= asked else FAIL)
            c["torque_margin"] = NOT_CHECKED if torque is None else (PASS if torque[i] >= 0 else FAIL)
        out.append(c)
    return out


def _mounted(arm, M):
    from .kinematics import Arm

    return Arm(replace(arm.model, mount=np.asarray(M, float)))


def _nudge_point(arm, point, q, metric, steps=(0.05,)):
    """Move a work point by ``steps`` (m) along +-x, +-y, +-z of the cell and re-solve it from q
    (warm start): the move that raises ``metric(arm, q_new)`` most, as (direction text, step,
    new value) or None when no move reaches the point or helps."""
    from .studies.mount_search import reached_check, solve_targets

    dirs = np.array([[1, 0, 0], [-1, 0, 0], [0, 1, 0], [0, -1, 0], [0, 0, 1], [0, 0, -1]], float)
    words = ["+x", "-x", "+y", "-y", "+z (up)", "-z (down)"]
    Minv = np.linalg.inv(arm.model.mount)
    T = []
    for d in steps:
        for v in dirs:
            G = np.array(point.pose, float, copy=True)
            G[:3, 3] += d * v
            T.append(Minv @ G)
    T = np.array(T)
    qs, _ = solve_targets(arm, T, point.rule, seeds=1, q0=np.repeat(q[None], len(T), axis=0))
    ok = reached_check(arm, qs, T, point.rule, np.full(len(T), point.tolerance), np.full(len(T), point.angle_tolerance))
    if not ok.any():
        return None
    val = np.where(ok, metric(qs), -np.inf)
    k = int(np.argmax(val))
    return words[k % 6], steps[k // 6], float(val[k])


def _mount_risks(ctx, arm, points, q, reached, meas, margin, mj, thr, s, length, verdicts):
    from .studies.mount_search import center_turns

    risks = []
    inv = meas["inverse_condition"]
    names = [p.name for p in points]
    for i, p in enumerate(points):
        if not reached[i]:
            d = float(np.linalg.norm(p.position - arm.model.mount[:3, 3]))
            reach = arm.nominal_reach()
            why = (f"it lies {fmt_mm(d)} mm from the base origin, beyond the arm's nominal reach of "
                   f"{fmt_mm(reach)} mm" if d > reach else "no IK solution inside the joint limits was found from "
                   "this mount")
            risks.append(Risk("unreached", f"{p.name}", f"not served from the recommended mount: {why}",
                              "move the point or choose a mount of the ranking that reaches it", 10.0, None,
                              np.asarray(p.position, float)))
    if reached.any():
        # the weakest point: its cause, and the 5 cm move of the point that helps most
        k = int(np.nanargmin(np.where(reached, inv, np.inf)))
        lost, cause = _cause(arm, q[k], s.rows, length, thr)
        near = inv[k] < thr
        what = (f"{'near singular' if near else 'the weakest work point'} (inverse condition {fmt_number(inv[k])}, "
                f"threshold {fmt_number(thr)})")
        if cause:
            what += f": {_lower_first(cause).rstrip('.')}"
        elif lost:
            what += f"; its weakest direction: {lost.split(': ', 1)[-1].rstrip('.')}"
        met = (lambda qq: _sv_measures(arm, center_turns(arm, qq), s.rows, length)["inverse_condition"])
        nud = _nudge_point(arm, points[k], q[k], met)
        if nud and nud[2] > inv[k] * 1.05:
            change = (f"moving {names[k]} {fmt_mm(nud[1])} mm towards {nud[0]} (cell frame) raises it to "
                      f"{fmt_number(nud[2])}")
        else:
            change = "no 5 cm move of the point raises it; accept it or change the tool orientation there"
        risks.append(Risk("weakest_point", names[k], what, change, thr / max(inv[k], 1e-300), q[k],
                          np.asarray(points[k].position, float)))
        # the point nearest a joint limit
        k = int(np.nanargmin(np.where(reached, margin, np.inf)))
        j = int(mj[k])
        what = f"closest to a joint limit (margin {fmt_number(margin[k])}): {_near_limit(arm, q[k], j)}"

        def met_m(qq):
            return np.clip(arm.limit_margin(center_turns(arm, qq)), 0, 1)

        nud = _nudge_point(arm, points[k], q[k], met_m)
        if nud and nud[2] > margin[k] * 1.05:
            change = (f"moving {names[k]} {fmt_mm(nud[1])} mm towards {nud[0]} (cell frame) raises the margin to "
                      f"{fmt_number(nud[2])}")
        else:
            change = "no 5 cm move of the point helps; a mount turned about its vertical axis may"
        risks.append(Risk("limit_margin", names[k], what, change, _limit_severity(margin[k]), q[k],
                          np.asarray(points[k].position, float)))
    pv = next((v for v in verdicts if v.key == "placement_error"), None)
    if pv is not None and pv.value is not None and not math.isfinite(pv.value):
        risks.append(Risk("placement_error", "the base placement",
                          f"placing the base {pv.where} loses a work point ({pv.worst})",
                          "place the base precisely, or choose a mount farther from the edge of the served region",
                          10.0))
    elif pv is not None and pv.value is not None:
        risks.append(Risk("placement_error", "the base placement",
                          f"placing the base {pv.where} costs {fmt_percent(pv.value)} of the quality score",
                          "place the base within that tolerance" if pv.value > 0.02 else
                          "the placement tolerance of ordinary fixings is enough", pv.value / SENSITIVITY_DROP))
    return risks


# ----------------------------------------------------------------------------------------------
# path audit


def _path_decision(ctx: _Ctx) -> Decision:
    r, arm0, cell, plan = ctx.r, ctx.arm, ctx.cell, ctx.plan
    s = plan.settings
    d = plan.data
    M = np.asarray(d["mount"], float)
    arm = _mounted(arm0, M)
    x, y, h, yaw, tilt, style = _decompose(M)
    if s.mount is not None:
        src = "mount_xyz / mount_rpy of the study settings"
    elif cell is not None and cell.placement is not None:
        src = "the cell file's [placement]"
    else:
        src = "the arm file's mount"
    checked, asked, coll = collision_status(r, arm0)
    thr = float(s.near_singular)
    length = s.length if s.length is not None else arm0.nominal_reach()
    a = r.arrays
    dist = np.asarray(a["distance"], float)
    pidx = np.asarray(a["path_index"]).astype(int)
    inv = np.asarray(a["inverse_condition"], float)
    ratio = np.asarray(a["speed_ratio"], float)
    sj = np.asarray(a["speed_joint"]).astype(int)
    margin = np.asarray(a["margin"], float)
    flags = np.asarray(a["flags"]).astype(int)
    q = np.asarray(a["q"], float)
    names = list(d["names"])
    done = np.isfinite(dist)
    reached = done & ((flags & 1) > 0)
    where = [f"{names[p]} at {fmt_mm(v)} mm" if np.isfinite(v) else "-" for p, v in zip(pidx, dist)]
    N = int(done.sum())
    verdicts = []
    miss = done & ~reached
    mp = sorted({names[p] for p in pidx[miss]})
    verdicts.append(Verdict("samples_reached", "Path samples reached", f"all {N}", f"{int(reached.sum())} of {N}",
                            ", ".join(mp) if mp else "-", PASS if not miss.any() else FAIL, "",
                            float(reached.sum()), float(N)))
    verdicts.append(_verdict_from_values("inverse_condition", f"Inverse condition ({_rows_words(s.rows)})",
                                         np.where(reached, inv, np.nan), where, thr))
    has_limits = np.isfinite(arm0.model.max_speed).any()
    if has_limits:
        v = _verdict_from_values("speed_ratio", "Joint speeds within the limits (speed needed / limit)",
                                 np.where(reached, ratio, np.nan), where, 1.0, "lower")
        if v.value is not None and np.isfinite(v.value):
            k = int(np.nanargmax(np.where(reached, ratio, -np.inf)))
            v = replace(v, where=f"{where[k]} (joint {ctx.jn(sj[k])})")
        verdicts.append(v)
    else:
        verdicts.append(_not_checked("speed_ratio", "Joint speeds within the limits",
                                     "the arm file gives no joint speed limits", "≤ 1"))
    flips = done & ((flags & 4) > 0)
    fw = ", ".join(f"{names[p]} at {fmt_mm(v)} mm" for p, v in zip(pidx[flips], dist[flips])) or "-"
    verdicts.append(Verdict("branch_flips", "No branch flips (joint jumps between samples)", "0",
                            f"{int(flips.sum())}", fw, PASS if not flips.any() else FAIL, "", float(flips.sum()), 0.0,
                            "", "lower"))
    verdicts.append(_verdict_from_values("limit_margin", "Joint-limit margin (1 mid range, 0 at a limit)",
                                         np.where(reached, margin, np.nan), where, LIMIT_MARGIN))
    clear = np.asarray(a["clearance"], float) if "clearance" in a else None
    verdicts.append(_clearance_verdict(ctx, clear, where, checked, asked, coll))
    torque = np.asarray(a["torque_margin"], float) if "torque_margin" in a else None
    verdicts.append(_torque_verdict(ctx, torque, where))
    verdicts.append(_cycle_verdict(ctx))

    ctx.progress(0.2, "risks along the paths")
    risks = []
    from .studies.path_audit import near_singular_spans

    # regions of trouble: near-singular samples with the unreached samples and branch flips
    # between or beside them (one place, told once)
    near = reached & (inv < thr)
    bad = done & (near | ~reached | flips)
    runs = near_singular_spans(dist, np.where(bad, 0.0, 1.0), 0.5, pidx)
    spans = [(i0, i1) for i0, i1 in runs if near[i0:i1].any()]
    for (i0, i1) in spans:
        seg = np.flatnonzero(near[i0:i1]) + i0
        k = int(seg[np.argmin(inv[seg])])
        p = pidx[k]
        lost, cause = _cause(arm, q[k], s.rows, length, thr)
        what = f"near singular from {fmt_mm(dist[i0])} to {fmt_mm(dist[i1 - 1])} mm (inverse condition down to " \
               f"{fmt_number(inv[k])} at {fmt_mm(dist[k])} mm, threshold {fmt_number(thr)})"
        if cause:
            what += f": {_lower_first(cause).rstrip('.')}"
        miss_n = int((~reached[i0:i1]).sum())
        if miss_n:
            what += f"; {miss_n} sample{'s' if miss_n > 1 else ''} there not reached"
        fl = [j for j in range(i0, i1) if flips[j]]
        if fl:
            at = fmt_mm(dist[fl[0]]) + (f"-{fmt_mm(dist[fl[-1]])}" if len(fl) > 1 else "")
            what += f"; the arm flips branch at {at} mm"
        change = _span_change(arm, d, s, int(seg[0]), int(seg[-1]) + 1, k, q, names[p], thr, length)
        risks.append(Risk("near_singular", f"{names[p]}, {fmt_mm(dist[i0])}-{fmt_mm(dist[i1 - 1])} mm", what, change,
                          2.0 + math.log10(thr / max(inv[k], 1e-300)), q[k], np.asarray(a["xyz"][k], float)))
    in_span = np.zeros(len(dist), bool)
    for i0, i1 in spans:
        in_span[i0:i1] = True
    for k in np.flatnonzero(flips & ~in_span):
        step = np.degrees(np.abs(q[k] - q[k - 1])) if k > 0 else np.zeros(len(ctx.names))
        js = [ctx.jn(j) for j in np.flatnonzero(step > np.degrees(s.jump) / 2)]
        risks.append(Risk("branch_flip", f"{names[pidx[k]]} at {fmt_mm(dist[k])} mm",
                          f"the arm changes branch: joint{'s' if len(js) > 1 else ''} {', '.join(js)} jump by up to "
                          f"{fmt_number(step.max())} deg between two samples",
                          "the controller cannot follow this continuously: move the path or the base, or split the "
                          "path there", 2.0, q[k], np.asarray(a["xyz"][k], float)))
    lost_runs = near_singular_spans(dist, np.where(done & ~reached & ~in_span, 0.0, 1.0), 0.5, pidx)
    for i0, i1 in lost_runs:
        risks.append(Risk("unreached", f"{names[pidx[i0]]}, {fmt_mm(dist[i0])}-{fmt_mm(dist[i1 - 1])} mm",
                          f"{i1 - i0} sample{'s' if i1 - i0 > 1 else ''} not reached (no IK solution inside the "
                          f"limits was tracked there)", "move the path within reach or the base closer to it", 3.0,
                          None, np.asarray(a["xyz"][i0], float)))
    if has_limits and np.isfinite(np.where(reached, ratio, np.nan)).any():
        for p, nm in enumerate(names):
            m = reached & (pidx == p) & np.isfinite(ratio)
            if not m.any():
                continue
            k = int(np.argmax(np.where(m, ratio, -np.inf)))
            v = float(d["speeds"][p])
            top_speed = v / ratio[k] if ratio[k] > 0 else np.inf
            if ratio[k] > 1:
                change = f"slow the tool to {fmt_mm(top_speed)} mm/s there, or move the path away from it"
            else:
                change = (f"the tool speed could rise to {fmt_mm(top_speed)} mm/s before joint {ctx.jn(sj[k])} "
                          f"reaches its limit")
            risks.append(Risk("speed", f"{nm} at {fmt_mm(dist[k])} mm",
                              f"joint {ctx.jn(sj[k])} needs {fmt_percent(ratio[k], 0)} of its speed limit at "
                              f"{fmt_mm(v)} mm/s", change, float(ratio[k]), q[k], np.asarray(a["xyz"][k], float)))
    span_risks = [rk for rk in risks if rk.key == "near_singular"]
    if np.isfinite(np.where(reached, margin, np.nan)).any():
        k = int(np.nanargmin(np.where(reached, margin, np.inf)))
        _, jk, _ = _limit_info(arm0, q[k][None])
        inside = next((i for i, (i0, i1) in enumerate(spans) if i0 <= k < i1), None)
        if inside is not None and margin[k] < LIMIT_MARGIN:
            # the same place as a near-singular span: one risk, told once
            rk = span_risks[inside]
            idx = risks.index(rk)
            risks[idx] = replace(rk, what=rk.what + f"; at {fmt_mm(dist[k])} mm {_near_limit(arm0, q[k], int(jk[0]))}")
        else:
                risks.append(Risk("limit_margin", where[k], f"closest to a joint limit (margin {fmt_number(margin[k])}): "
                              f"{_near_limit(arm0, q[k], int(jk[0]))}",
                              "move the path or the base so that this joint turns less" if margin[k] < LIMIT_MARGIN
                              else "room is left", _limit_severity(margin[k]), q[k],
                              np.asarray(a["xyz"][k], float)))
    if checked:
        risks += _collision_risks(ctx, a, q, names, pidx, dist, asked, arm0.model.body_names())
    top, rest = _rank_risks(risks)
    if top and top[0].pose is not None:
        pose, label = top[0].pose, f"the arm drawn at {top[0].shown or top[0].where} (risk 1)"
    else:
        k = int(np.nanargmin(np.where(reached, inv, np.inf))) if reached.any() else 0
        pose, label = q[k], f"the arm drawn at {where[k]}"
    fails = [v for v in verdicts if v.status == FAIL]
    # which paths hold a failing sample (the verdicts are over all paths together)
    with np.errstate(invalid="ignore"):
        bad_sample = done & (~reached | flips | (reached & (inv < thr)) | (reached & (margin < LIMIT_MARGIN)))
        if has_limits:
            bad_sample |= reached & (ratio > 1)
        if clear is not None and checked:
            bad_sample |= reached & (clear < asked)
        if torque is not None:
            bad_sample |= reached & (torque < 0)
    failing = [nm for p, nm in enumerate(names) if (bad_sample & (pidx == p)).any()] if fails else []
    passing = [nm for nm in names if nm not in failing]
    head = (f"With the base at x = {fmt_mm(x)} mm, y = {fmt_mm(y)} mm, height {fmt_mm(h)} mm, yaw {fmt_deg(yaw)} deg "
            f"({src}), ")
    checks = ", ".join(v.requirement.split(' (')[0].lower() for v in fails)
    if not fails:
        answer = head + (f"{len(names)} path{'s' if len(names) != 1 else ''} ({', '.join(names)}) pass every "
                         f"checked requirement.")
    elif failing and passing:
        answer = head + (f"{_and(failing)} fail{'s' if len(failing) == 1 else ''} {len(fails)} "
                         f"check{'s' if len(fails) != 1 else ''} ({checks}); {_and(passing)} "
                         f"pass{'es' if len(passing) == 1 else ''} every checked requirement.")
    else:
        answer = head + (f"{len(names)} path{'s' if len(names) != 1 else ''} ({', '.join(names)}) fail "
                         f"{len(fails)} check{'s' if len(fails) != 1 else ''}: {checks}.")
    avoid = [rk.where for rk in sorted(risks, key=lambda r: -r.severity) if rk.key in ("clearance", "near_singular")]
    if avoid:
        answer += " Avoid: " + "; ".join(dict.fromkeys(avoid)) + "."
    rec = Recommendation("placement", QUESTIONS["path_audit"], answer, x, y, h, yaw, style, tilt, M, src, None,
                         np.asarray(pose, float), label)
    return Decision("path_audit", _s(r.name), rec.question, rec, tuple(verdicts), top, rest, (), ctx.names,
                    ctx.revolute, coll, checked, (), arm, cell, {"inverse_condition": thr, "limit_margin": LIMIT_MARGIN})


def _span_change(arm, d, s, i0, i1, k, q, path_name, thr, length):
    """The smallest sideways base move (2-30 cm, horizontal, across the path at the worst sample)
    that keeps the inverse condition >= thr over the span, in words."""
    from .arm.transforms import translation
    from .studies.mount_search import reached_check, solve_targets

    xyz = np.asarray(d["cell_xyz"], float)
    a, b = max(i0, k - 1), min(i1 - 1, k + 1)
    if b == a:
        a, b = max(0, k - 1), min(len(xyz) - 1, k + 1)
    t = xyz[b] - xyz[a]
    nrm = np.cross([0.0, 0.0, 1.0], t)
    if np.linalg.norm(nrm) < 1e-12:
        nrm = np.array([1.0, 0.0, 0.0])
    nrm = nrm / np.linalg.norm(nrm)
    idx = np.unique(np.linspace(i0, i1 - 1, min(25, i1 - i0)).astype(int))
    idx = np.unique(np.append(idx, k))
    M = np.asarray(d["mount"], float)
    # the cell poses of the samples: the stored base-frame targets taken back to the cell
    G = np.einsum("ij,njk->nik", M, np.asarray(d["targets"], float)[idx])
    names = list(d["names"])
    rule = d["rules"][names.index(path_name)] if path_name in names else "fixed"
    arm0 = _mounted(arm, np.eye(4))
    tried = []
    for step in (0.02, 0.04, 0.06, 0.08, 0.10, 0.15, 0.20, 0.30):
        best = None
        for sign in (1.0, -1.0):
            Mn = translation(*(sign * step * nrm)) @ M
            T = np.einsum("ij,njk->nik", np.linalg.inv(Mn), G)
            qs, _ = solve_targets(arm0, T, rule, seeds=2, q0=q[idx])
            ok = reached_check(arm0, qs, T, rule, np.full(len(T), 1e-3), np.full(len(T), math.radians(0.5)))
            if not ok.all():
                continue
            m = float(np.min(_sv_measures(arm0, qs, s.rows, length)["inverse_condition"]))
            if m >= thr and (best is None or m > best[1]):
                best = (sign, m)
        tried.append(step)
        if best is not None:
            v = best[0] * nrm
            words = _direction_words(v)
            return (f"moving the base {fmt_mm(step)} mm towards {words} (or the path {fmt_mm(step)} mm the other way) "
                    f"keeps the inverse condition at or above {fmt_number(thr)} over this span (lowest "
                    f"{fmt_number(best[1])})")
    return (f"no sideways base move up to {fmt_mm(tried[-1])} mm clears this span: change the path (its height or "
            f"the tool orientation) here")


def _direction_words(v) -> str:
    """'+y', '-x', or '+0.71 x, -0.71 y' for a unit vector in the cell frame."""
    v = np.asarray(v, float)
    big = np.abs(v) > 0.97
    if big.any():
        i = int(np.argmax(np.abs(v)))
        return f"{'+' if v[i] > 0 else '-'}{'xyz'[i]}"
    return ", ".join(f"{c:+.2f} {ax}" for c, ax in zip(v, "xyz") if abs(c) > 0.005) + " (cell frame)"


# ----------------------------------------------------------------------------------------------
# load map


def _load_decision(ctx: _Ctx) -> Decision:
    r, arm0, cell, plan = ctx.r, ctx.arm, ctx.cell, ctx.plan
    s = plan.settings
    from .kinematics import Arm

    marm = Arm(plan.data["mounted_model"])
    M = np.asarray(marm.model.mount, float)
    x, y, h, yaw, tilt, style = _decompose(M)
    if s.mount is not None:
        src = "mount_xyz / mount_rpy of the study settings"
    elif cell is not None and cell.placement is not None:
        src = "the cell file's [placement]"
    else:
        src = "the arm file's mount"
    checked, asked, coll = collision_status(r, arm0)
    pay = np.asarray(r.arrays["payload"], float)
    lim = np.asarray(r.arrays["limiting_joint"]).astype(int)
    own = np.asarray(r.arrays["own_load"], float)
    q = np.asarray(r.arrays["q"], float)
    ok = np.isfinite(pay)
    ax = r.axes
    plane = s.grid == "plane"

    P = _plane_points(s, ax, pay.shape) if plane else None

    def where_of(flat):
        if P is not None:
            x_, y_, z_ = P.reshape(-1, 3)[flat]
            return f"x = {fmt_mm(x_)} mm, y = {fmt_mm(y_)} mm, z = {fmt_mm(z_)} mm"
        idx = np.unravel_index(flat, pay.shape)
        parts = []
        for a_, i in zip(ax, idx):
            v = a_.values[i]
            parts.append(f"{a_.name} = {fmt_mm(v)} mm" if a_.unit == "m" else f"{a_.name} = {fmt_deg(v)} deg")
        return ", ".join(reversed(parts))

    flat_ok = np.flatnonzero(ok.reshape(-1))
    verdicts = []
    req = _required_payload(ctx)
    if not ok.any():
        k = None
        verdicts.append(Verdict("reached", "Slice points reached", "-", "0", "-", FAIL))
    else:
        k = int(flat_ok[np.argmin(pay.reshape(-1)[flat_ok])])
    total = pay.size
    if plane:
        verdicts.append(Verdict("reached", "Slice points reached (information)", "-",
                                f"{int(ok.sum())} of {total} ({fmt_percent(ok.mean(), 0)})", "-",
                                NOT_CHECKED, "the slice is a survey, not a requirement", float(ok.sum()), None))
    if k is not None:
        pmin = float(pay.reshape(-1)[k])
        if req is None:
            verdicts.append(Verdict("payload", "Payload held at every reached point", "no payload stated",
                                    f"{fmt_number(pmin)} kg (smallest)", where_of(k), NOT_CHECKED,
                                    "the cell states no payload to hold", pmin, None, "kg"))
        else:
            verdicts.append(Verdict("payload", "Payload held at every reached point", f"≥ {fmt_number(req)} kg",
                                    f"{fmt_number(pmin)} kg", where_of(k), PASS if pmin >= req else FAIL, "", pmin,
                                    req, "kg"))
        ko = int(flat_ok[np.argmax(own.reshape(-1)[flat_ok])])
        omax = float(own.reshape(-1)[ko])
        verdicts.append(Verdict("own_load", "The arm holds its own weight (gravity torque / limit)", "≤ 1",
                                fmt_number(omax), where_of(ko), PASS if omax <= 1 else FAIL, "", omax, 1.0, "",
                                "lower"))
    verdicts.append(_clearance_verdict(ctx, *_map_clearance(r), checked, asked, coll))

    risks = []
    if k is not None:
        j = int(lim.reshape(-1)[k])
        # the largest payload within 10 cm (or 10 grid steps) of the weakest point: what moving buys
        grid = np.array(np.unravel_index(flat_ok, pay.shape)).T
        g0 = np.array(np.unravel_index(k, pay.shape))
        steps = np.array([abs(a_.values[1] - a_.values[0]) if len(a_.values) > 1 else 1.0 for a_ in ax])
        dd = np.linalg.norm((grid - g0) * steps, axis=1)
        near = dd <= (0.10 if all(a_.unit == "m" for a_ in ax) else 10 * steps.max()) + 1e-12
        kk = flat_ok[near][np.argmax(pay.reshape(-1)[flat_ok[near]])]
        gain = float(pay.reshape(-1)[kk])
        change = (f"within {'10 cm' if all(a_.unit == 'm' for a_ in ax) else 'ten grid steps'} of it, at "
                  f"{where_of(kk)}, it holds {fmt_number(gain)} kg" if gain > pmin * 1.02 else
                  "the payload does not grow nearby: a stronger joint or a lighter tool is needed there")
        if req is not None and pmin < req:
            sev = req / max(pmin, 1e-9)
        else:
            sev = 0.5 if req is None else req / max(pmin, 1e-9)
        risks.append(Risk("payload", where_of(k), f"the smallest payload of the slice, {fmt_number(pmin)} kg, "
                          f"set by joint {ctx.jn(j) if j >= 0 else '-'}'s torque limit", change, sev,
                          q.reshape(-1, q.shape[-1])[k], None if P is None else P.reshape(-1, 3)[k]))
        counts = np.bincount(lim.reshape(-1)[flat_ok][lim.reshape(-1)[flat_ok] >= 0], minlength=len(ctx.names))
        jt = int(np.argmax(counts))
        risks.append(Risk("limiting_joint", "the whole slice", f"joint {ctx.jn(jt)}'s torque limit sets the payload on "
                          f"{fmt_percent(counts[jt] / max(len(flat_ok), 1), 0)} of the reached points",
                          f"a heavier payload needs more torque at joint {ctx.jn(jt)} first", 0.3))
    if plane and (~ok).any():
        frac = float((~ok).mean())
        base = M[:3, 3]
        dist = np.linalg.norm(P - base, axis=-1)
        dmax = float(dist[ok].max()) if ok.any() else 0.0
        risks.append(Risk("unreached", "the slice", f"{int((~ok).sum())} of {total} points "
                          f"({fmt_percent(frac, 0)}) are not reached with the tool as set",
                          f"points farther than {fmt_mm(dmax)} mm from the base origin are out of reach; move the "
                          f"base closer if they matter", 0.4 * frac + 0.1))
    top, rest = _rank_risks(risks)
    pose = top[0].pose if top and top[0].pose is not None else None
    label = f"the arm drawn at {top[0].where} (risk 1)" if pose is not None else ""
    if k is not None:
        answer = (f"With the base at x = {fmt_mm(x)} mm, y = {fmt_mm(y)} mm, height {fmt_mm(h)} mm, yaw {fmt_deg(yaw)} "
                  f"deg ({src}), the arm holds at least {fmt_number(pmin)} kg at every reached point of the slice "
                  f"(median {fmt_number(float(np.median(pay[ok])))} kg), statics only.")
    else:
        answer = "No point of the slice is reached: nothing can be held there."
    rec = Recommendation("placement", QUESTIONS["load_map"], answer, x, y, h, yaw, style, tilt, M, src, None,
                         pose, label)
    return Decision("load_map", _s(r.name), rec.question, rec, tuple(verdicts), top, rest, (), ctx.names, ctx.revolute,
                    coll, checked, (), marm, cell, {})


def _required_payload(ctx):
    """A payload mass the cell asks for (kg), when the results state one (table 'requirements' or
    a 'payload' setting), else None."""
    t = ctx.table("requirements")
    if t is not None and "payload" in t.columns:
        v = np.asarray(t.columns["payload"], float)
        if np.isfinite(v).any():
            return float(np.nanmax(v))
    v = ctx.settings.get("payload")
    if isinstance(v, (int, float)) and not isinstance(v, bool):
        return float(v)
    if isinstance(v, dict) and isinstance(v.get("mass"), (int, float)):
        return float(v["mass"])
    return None


def _plane_points(s, axes, shape):
    from .studies.load_map import _PLANES

    a, b, c = _PLANES[s.plane]
    V, U = np.meshgrid(axes[0].values, axes[1].values, indexing="ij")
    P = np.zeros(shape + (3,))
    P[..., b] = V
    P[..., a] = U
    P[..., c] = s.at
    return P


# ----------------------------------------------------------------------------------------------
# other kinds: the measure maps of the arm itself


def _generic_decision(ctx: _Ctx) -> Decision:
    from .measures import NEAR_SINGULAR

    r, arm = ctx.r, ctx.arm
    M = np.asarray(arm.model.mount, float)
    x, y, h, yaw, tilt, style = _decompose(M)
    checked, asked, coll = collision_status(r, arm)
    thr = float(ctx.settings.get("near_singular", NEAR_SINGULAR))
    verdicts, risks = [], []
    pose, label = None, ""
    if "inverse_condition" in r.arrays:
        inv = np.asarray(r.arrays["inverse_condition"], float).reshape(-1)
        fin = np.isfinite(inv)
        if fin.any():
            k = int(np.flatnonzero(fin)[np.argmin(inv[fin])])
            w = _cell_where(r, k)
            frac = float((inv[fin] < thr).mean())
            verdicts.append(Verdict("inverse_condition", "Inverse condition over the map", f"≥ {fmt_number(thr)}",
                                    fmt_number(inv[k]), w, PASS if inv[k] >= thr else FAIL,
                                    f"{fmt_percent(frac)} of the map is below {fmt_number(thr)}", float(inv[k]), thr))
            qa = r.arrays.get("q")
            if qa is not None and np.asarray(qa).reshape(len(inv), -1).shape[1] == arm.n:
                pose = np.asarray(qa, float).reshape(len(inv), arm.n)[k]
            else:
                try:
                    pose = np.asarray(ctx.kind_obj.cell_poses(ctx.plan, np.array([k]), r.arrays), float).reshape(-1, arm.n)[0]
                except Exception:
                    pose = None
            if pose is not None and np.all(np.isfinite(pose)):
                length = ctx.settings.get("length")
                lost, cause = _cause(arm, pose, ctx.settings.get("rows", "full"), length, thr, "world frame")
                risks.append(Risk("near_singular", w, (f"{fmt_percent(frac)} of the map is near singular (inverse "
                                                       f"condition below {fmt_number(thr)}); the worst "
                                                       f"pose: {_lower_first(cause or lost).rstrip('.')}"),
                                  "keep the task away from these poses", thr / max(inv[k], 1e-300), pose))
                label = f"the arm drawn at the worst pose ({w})"
    reach = ctx.table("reach")
    if reach is not None and "reached" in reach.columns and "points" in reach.columns:
        n_ok, n_all = int(np.asarray(reach.columns["reached"])[0]), int(np.asarray(reach.columns["points"])[0])
        verdicts.append(Verdict("reached", "Slice points reached (information)", "-",
                                f"{n_ok} of {n_all} ({fmt_percent(n_ok / max(n_all, 1), 0)})", "-", NOT_CHECKED,
                                "the slice is a survey, not a requirement", float(n_ok), None))
    elif "reached" in r.arrays and r.kind == "reach_slice":
        rr = np.asarray(r.arrays["reached"]).reshape(-1) > 0
        verdicts.append(Verdict("reached", "Slice points reached (information)", "-",
                                f"{int(rr.sum())} of {rr.size} ({fmt_percent(rr.mean(), 0)})", "-", NOT_CHECKED,
                                "the slice is a survey, not a requirement", float(rr.sum()), None))
    verdicts.append(_clearance_verdict(ctx, *_map_clearance(r), checked, asked, coll))
    top, rest = _rank_risks(risks)
    answer = (f"The base stands as in the arm file (x = {fmt_mm(x)} mm, y = {fmt_mm(y)} mm, height {fmt_mm(h)} mm, "
              f"yaw {fmt_deg(yaw)} deg). ")
    v = next((v for v in verdicts if v.key == "inverse_condition"), None)
    if v is not None:
        answer += f"The worst inverse condition over the map is {v.worst} ({v.where}); {v.note}."
    rec = Recommendation("placement", QUESTIONS.get(r.kind, "What do the maps show?"), answer, x, y, h, yaw, style,
                         tilt, M, "the arm file's mount", None, pose, label)
    return Decision(r.kind, _s(r.name), rec.question, rec, tuple(verdicts), top, rest, (), ctx.names, ctx.revolute,
                    coll, checked, (), arm, ctx.cell, {"inverse_condition": thr})


def _cell_where(r, flat):
    idx = np.unravel_index(flat, r.shape)
    parts = []
    for a_, i in reversed(list(zip(r.axes, idx))):
        if a_.name == "sample":
            parts.append(f"sample {int(i) + 1}")
            continue
        v = a_.values[i]
        if a_.unit == "rad":
            parts.append(f"{a_.label} = {fmt_deg(v)} deg")
        elif a_.unit == "m":
            parts.append(f"{a_.label} = {fmt_mm(v)} mm")
        else:
            parts.append(f"{a_.label} = {fmt_number(v)}")
    return ", ".join(parts)


# ----------------------------------------------------------------------------------------------

BUILDERS = {"mount_search": _mount_decision, "path_audit": _path_decision, "load_map": _load_decision}


def decision_for(results, progress=None) -> Decision:
    """The decision a results file supports (see the module docstring).

    Parameters
    ----------
    results : workbench.results.Results
        With its arrays loaded.
    progress : callable, optional
        ``progress(fraction, text)`` with fraction in [0, 1], called between steps.

    Returns
    -------
    Decision

    Raises
    ------
    workbench.results.ResultsError
        The stored texts cannot be read back.
    """
    ctx = _Ctx(results, progress)
    builder = BUILDERS.get(results.kind, _generic_decision)
    out = builder(ctx)
    out = _with_plausibility(results, out)
    ctx.progress(1.0, "decision ready")
    return out


def _with_plausibility(results, dec: Decision) -> Decision:
    """The decision with the study's plausibility warnings (nothing or almost nothing reachable,
    :mod:`workbench.studies.plausibility`) added to its notes, so the report and the window say it."""
    from dataclasses import replace

    from .studies.plausibility import result_warnings

    try:
        warns = result_warnings(results.kind, results.arrays)
    except Exception:  # noqa: BLE001 - a warning must never stop a decision
        return dec
    if not warns:
        return dec
    return replace(dec, notes=tuple(dec.notes) + tuple(f"Warning: {w[0].upper()}{w[1:]}." for w in warns))


# ----------------------------------------------------------------------------------------------
# comparisons


@dataclass(frozen=True, eq=False)
class Comparison:
    """Several decisions of one kind side by side.

    ``labels`` names the options (A, B, ...); ``keys`` are the verdict keys in order; ``cells``
    maps key -> one Verdict (or None) per option; ``best`` is the index of the option with the
    fewest failed requirements (then the higher score), or None; ``differences`` lists what differs
    between the options (placements, arms, cells, settings) in words.
    """

    kind: str
    labels: tuple
    decisions: tuple
    keys: tuple
    cells: dict
    best: int | None
    differences: tuple


def compare_decisions(decisions, labels=None, texts=None) -> Comparison:
    """Line up decisions of one study kind.

    Parameters
    ----------
    decisions : sequence of Decision
    labels : sequence of str, optional
        Default "A", "B", ...
    texts : sequence of dict, optional
        Per option ``{"arm": text, "cell": text, "settings": dict}`` to list what differs.
    """
    decisions = tuple(decisions)
    kinds = {d.kind for d in decisions}
    if len(kinds) != 1:
        raise WorkbenchError("a comparison needs results of one study kind; got " + ", ".join(sorted(kinds)))
    labels = tuple(labels or [chr(ord("A") + i) for i in range(len(decisions))])
    keys = []
    for d in decisions:
        for v in d.verdicts:
            if v.key not in keys:
                keys.append(v.key)
    cells = {k: tuple(d.verdict(k) for d in decisions) for k in keys}

    def rank(i):
        d = decisions[i]
        return (len(d.failed), -(d.recommendation.score or 0.0))

    best = min(range(len(decisions)), key=rank) if decisions else None
    diffs = []
    recs = [d.recommendation for d in decisions]
    for lab, getter in (("x", lambda r: f"{fmt_mm(r.x)} mm"), ("y", lambda r: f"{fmt_mm(r.y)} mm"),
                        ("height", lambda r: f"{fmt_mm(r.height)} mm"), ("yaw", lambda r: f"{fmt_deg(r.yaw)} deg"),
                        ("style", lambda r: r.style)):
        vals = [getter(r) for r in recs]
        if len(set(vals)) > 1:
            diffs.append(f"base {lab}: " + ", ".join(f"{a} {v}" for a, v in zip(labels, vals)))
    names = [getattr(d.arm.model, "name", "?") if d.arm is not None else "?" for d in decisions]
    if len(set(names)) > 1:
        diffs.append("arm: " + ", ".join(f"{a} {v}" for a, v in zip(labels, names)))
    if texts:
        import hashlib

        for what in ("arm", "cell"):
            fps = [hashlib.sha256((t.get(what) or "").encode()).hexdigest()[:12] for t in texts]
            if len(set(fps)) > 1:
                diffs.append(f"{what} file text differs (sha256 " + ", ".join(f"{a} {f}" for a, f in zip(labels, fps))
                             + ")")
        keys_s = sorted({k for t in texts for k in (t.get("settings") or {})})
        for k in keys_s:
            vals = [repr((t.get("settings") or {})[k]) if k in (t.get("settings") or {}) else "(not set)"
                    for t in texts]
            if len(set(vals)) > 1:
                diffs.append(f"setting {k}: " + ", ".join(f"{a} {v}" for a, v in zip(labels, vals)))
    if not diffs:
        diffs.append("no difference in placement, arm, cell or settings")
    return Comparison(decisions[0].kind, labels, decisions, tuple(keys), cells, best, tuple(diffs))
