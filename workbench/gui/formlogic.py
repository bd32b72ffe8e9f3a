"""Settings-form logic for the study panel (pure Python, no Qt): text <-> setting values, unit
hints, and checking every field so each bad value gets its own reason.
"""
from __future__ import annotations

import math
import re
import tomllib

from ..errors import WorkbenchError

__all__ = ["parse_value", "format_value", "unit_hint", "check_fields"]

# what the screen says next to a setting (file units; the kinds read degrees and metres)
UNIT_HINTS = {
    "ranges": "deg (m: sliding)",
    "pose": "deg (m: sliding)",
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
    if not errors:
        try:
            kind.validate(values, arm, cell, where=where)
        except WorkbenchError as exc:
            msg = str(exc)
            named = _key_of(msg, keys)
            errors[named if named is not None else ""] = _reason(msg, named)
    summary = "" if not errors else "; ".join(f"{k or 'settings'}: {v}" for k, v in errors.items())
    return values, errors, summary


def _reason(message: str, key) -> str:
    """The reason part of a kind's error (after 'settings KEY:')."""
    m = message
    if key:
        i = m.find(f"{key}:")
        if i >= 0:
            return m[i + len(key) + 1:].strip()
    return m.split(": ", 1)[-1] if m.startswith("settings") else m
