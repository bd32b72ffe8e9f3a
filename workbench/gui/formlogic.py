"""Settings-form logic for the study panel (pure Python, no Qt): text <-> setting values, unit
hints, and checking every field so each bad value gets its own reason.
"""
from __future__ import annotations

import math
import re
import tomllib

from ..errors import WorkbenchError

__all__ = ["parse_value", "format_value", "unit_hint", "check_fields", "fmt_number", "takes_pose", "pose_to_file",
           "POSE_SOURCES"]

# what the screen says next to a setting (file units; the kinds read degrees and metres)
UNIT_HINTS = {
    "ranges": "deg / m",       # degrees for turning joints, metres for sliding ones
    "pose": "deg / m",
    "steps": "points",
    "coarse_steps": "points",
    "length": "m",
    "samples": "poses",
    "near_singular": "1/k",
    "seed": "",
    "spacing": "m",
    "speed": "mm/s",
    "x": "m", "y": "m", "z": "m", "step": "m", "heights": "m", "yaws": "deg",
    "payload": "kg", "tolerance": "m",
}

_BARE = re.compile(r"^[A-Za-z_][A-Za-z0-9_:\-]*$")


def unit_hint(key: str) -> str:
    return UNIT_HINTS.get(key, "")


def parse_value(text: str):
    """Field text -> setting value: TOML values (numbers, "text", [lists], true/false); a bare
    word is taken as text, a comma list of bare words as a list of texts.

    Raises
    ------
    WorkbenchError
        When the text is not a value.
    """
    t = text.strip()
    if not t:
        raise WorkbenchError("empty: expected a value")
    try:
        return tomllib.loads(f"v = {t}")["v"]
    except tomllib.TOMLDecodeError:
        pass
    if _BARE.match(t):
        return t
    parts = [p.strip() for p in t.strip("[]").split(",")]
    if len(parts) > 1 and all(_BARE.match(p) for p in parts):
        return parts
    raise WorkbenchError(f"not a value: {t!r}; expected a number, a word, true/false or a list like [1, 2]")


def format_value(v) -> str:
    """Setting value -> field text (the inverse of :func:`parse_value`)."""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str):
        return v if _BARE.match(v) else f'"{v}"'
    if isinstance(v, float):
        return repr(round(v, 9)) if math.isfinite(v) else str(v)
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(format_value(x) for x in v) + "]"
    return str(v)


def _key_of(message: str, keys) -> str | None:
    """The setting named by a kind's one-line error (``"... [settings] steps: ..."``)."""
    best = None
    for k in keys:
        if re.search(r"(^|[\s\]'\"])" + re.escape(k) + r"(['\"]?:|\s)", message):
            if best is None or len(k) > len(best):
                best = k
    return best


def check_fields(kind, texts: dict, defaults: dict, arm, cell=None) -> tuple[dict, dict, str]:
    """Check every field of the form.

    Parameters
    ----------
    kind : StudyKind
    texts : dict
        Setting name -> field text.
    defaults : dict
        The kind's default settings (known good), used to check one field at a time.
    arm, cell
        Context of the study.

    Returns
    -------
    values : dict
        Parsed settings (only fields that parsed).
    errors : dict
        Setting name -> reason, one per bad field; key "" for a problem not tied to one field.
    summary : str
        "" when everything is valid.
    """
    values, errors = {}, {}
    for k, t in texts.items():
        try:
            values[k] = parse_value(t)
        except WorkbenchError as exc:
            errors[k] = str(exc)
    where = "settings"
    keys = list(texts)
    # one field at a time against the defaults, so each bad value is named with its own reason
    for k, v in values.items():
        trial = dict(defaults)
        trial[k] = v
        try:
            kind.validate(trial, arm, cell, where=where)
        except WorkbenchError as exc:
            msg = str(exc)
            named = _key_of(msg, keys)
            if named is None or named == k:
                errors[k] = _reason(msg, k)
    if "ranges" in values and "ranges" not in errors and "joints" not in errors and arm is not None:
        why = range_outside_limits(values.get("joints", defaults.get("joints")), values["ranges"], arm)
        if why:
            errors["ranges"] = why
    if not errors:
        try:
            kind.validate(values, arm, cell, where=where)
        except WorkbenchError as exc:
            msg = str(exc)
            named = _key_of(msg, keys)
            errors[named if named is not None else ""] = _reason(msg, named)
    summary = "" if not errors else "; ".join(f"{k or 'settings'}: {v}" for k, v in errors.items())
    return values, errors, summary


def range_outside_limits(joints, ranges, arm) -> str:
    """Why a swept range goes beyond its joint's limits ("" when every range lies within them).

    ``joints`` are names or 1-based numbers as in a study file, ``ranges`` [[lo, hi], ...] in file
    units (degrees for revolute joints, metres for sliding ones). Anything malformed is left to
    the study kind's own check.
    """
    import numpy as np

    if not isinstance(joints, (list, tuple)) or not isinstance(ranges, (list, tuple)):
        return ""
    names = list(arm.names)
    for j, r in zip(joints, ranges):
        if isinstance(j, str) and j in names:
            k = names.index(j)
        elif isinstance(j, int) and not isinstance(j, bool) and 1 <= j <= len(names):
            k = j - 1
        else:
            return ""
        if not (isinstance(r, (list, tuple)) and len(r) == 2
                and all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in r)):
            return ""
        revolute = arm.kinds[k] == 0
        lo, hi = float(arm.lower[k]), float(arm.upper[k])
        if revolute:
            lo, hi = np.degrees(lo), np.degrees(hi)
        unit = "deg" if revolute else "m"
        tol = 1e-6 * max(1.0, abs(lo), abs(hi))
        if np.isfinite(lo) and min(r) < lo - tol or np.isfinite(hi) and max(r) > hi + tol:
            return (f"{names[k]} range [{format_value(float(r[0]))}, {format_value(float(r[1]))}] {unit} goes beyond "
                    f"the joint's limits [{lo:.6g}, {hi:.6g}] {unit}")
    return ""


def _reason(message: str, key) -> str:
    """The reason part of a kind's error (after 'settings KEY:')."""
    m = message
    if key:
        i = m.find(f"{key}:")
        if i >= 0:
            return m[i + len(key) + 1:].strip()
    return m.split(": ", 1)[-1] if m.startswith("settings") else m


# ---- choice settings: offered as drop-downs ----------------------------------------------
#: (kind or "*", key) -> (values, editable). Editable lists offer the usual values and still take
#: any other valid text (task rows as "0,1,2", frames as "joint:3" or "com:NAME").
_CHOICES = {
    ("joint_sweep", "mode"): (("grid", "reduce", "samples"), False),
    ("joint_sweep", "best_by"): (("manipulability", "condition", "inverse_condition", "min_sv",
                                  "limit_margin", "limit_aware_manipulability"), False),
    ("mount_search", "measure"): (("inverse_condition", "min_sv", "manipulability"), False),
    ("reach_slice", "grid"): (("plane", "box"), False),
    ("reach_slice", "plane"): (("xy", "xz", "yz", "frame"), False),
    ("reach_slice", "orientation"): (("fixed", "axis", "free", "sampled"), False),
    ("reach_slice", "best"): (("inverse_condition", "manipulability", "min_sv", "condition"), False),
    ("load_map", "grid"): (("joints", "plane"), False),
    ("load_map", "plane"): (("xy", "xz", "yz"), False),
    ("load_map", "orientation"): (("fixed", "axis", "free"), False),
}


def choices(kind_name: str, key: str, arm=None, value=None):
    """The values offered for setting ``key`` of a study kind, or None for a free field.

    Returns
    -------
    (values, editable) or None
        ``values`` is a tuple of texts; the current ``value`` is added when it is a text not
        among them (a file may hold a valid value the list does not name).
    """
    from ..kinematics.rows import NAMED_ROWS

    hit = _CHOICES.get((kind_name, key))
    if hit is None and key == "rows":
        hit = (tuple(NAMED_ROWS), True)
    if hit is None and key == "frame" and kind_name == "joint_sweep":
        names = tuple(arm.names) if arm is not None else ()
        hit = (("tcp", "flange", "base") + names, True)
    if hit is None and isinstance(value, bool):
        hit = (("true", "false"), False)
    if hit is None:
        return None
    vals, editable = hit
    if isinstance(value, str) and value not in vals:
        vals = vals + (value,)
    return tuple(vals), editable


# ---- numbers for people --------------------------------------------------------------------
def fmt_number(v, digits=4, scale=None) -> str:
    """A number as people read it: ``digits`` significant figures, thousands separated, no
    exponent between 0.001 and 10^7, no "-0", and values below 1e-9 of ``scale`` (e.g. the
    largest magnitude of their column) shown as 0 (rounding noise such as 5.6e-14).

    >>> fmt_number(12345.678), fmt_number(-0.0), fmt_number(5.551e-14, scale=1.0), fmt_number(0.05)
    ('12,350', '0', '0', '0.05')
    """
    try:
        x = float(v)
    except (TypeError, ValueError):
        return str(v)
    if math.isnan(x):
        return ""
    if math.isinf(x):
        return "∞" if x > 0 else "-∞"
    if scale is not None and math.isfinite(scale) and abs(x) < 1e-9 * abs(scale):
        x = 0.0
    r = float(f"{x:.{digits}g}")
    if r == 0.0:
        return "0"
    a = abs(r)
    if a < 1e-3 or a >= 1e7:
        m, e = f"{r:.{digits - 1}e}".split("e")
        m = m.rstrip("0").rstrip(".")
        return f"{m}e{int(e)}"
    dec = max(0, digits - 1 - int(math.floor(math.log10(a))))
    s = f"{r:,.{dec}f}"
    if "." in s:
        s = s.rstrip("0").rstrip(".")
    return s


# ---- the pose of the joints a study does not sweep -------------------------------------------
#: study kinds whose ``pose`` setting fixes the joints they do not sweep
POSE_KINDS = ("joint_sweep", "load_map")
POSE_SOURCES = ("home pose", "current sliders", "explicit")


def takes_pose(kind_name: str) -> bool:
    return kind_name in POSE_KINDS


def pose_to_file(arm, q) -> list:
    """Joint values (n,) in rad / m -> a study file's ``pose`` (degrees / metres, rounded)."""
    import numpy as np

    return [round(float(np.degrees(v)) if arm.kinds[k] == 0 else float(v), 6) for k, v in enumerate(q)]
