"""Collision settings shared by the studies that choose poses (reach slice, mount search, path
audit, load map), and the collision-aware choice among IK solutions.

Settings (study file ``[settings]``)::

    clearance = 0.01     # m: a pose counts only with at least this much clearance between the
                         # arm and the cell's obstacles and between its own (non-neighbour) links
    collisions = true    # default: on when the arm has collision shapes

With ``collisions`` on, a work point, grid point or path sample is reached only by an IK solution
whose clearance (:func:`workbench.collision.clearance`) is at least ``clearance``. An arm without
shapes cannot be checked: the run prints a ``warning:`` line and the results say so
(attribute ``collisions``; no ``clearance`` field or column).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Mapping

import numpy as np

from .base import StudyError

__all__ = ["KEYS", "DEFAULT_CLEARANCE", "CollisionSettings", "collision_settings", "arm_has_shapes",
           "no_shapes_warning", "NO_SHAPES_WARNING", "result_attrs", "clear_of", "first_clear", "span_sentence"]

#: the study settings this module reads
KEYS = frozenset({"clearance", "collisions"})
#: default clearance asked (m); the same value as :data:`workbench.decision.DEFAULT_CLEARANCE`
DEFAULT_CLEARANCE = 0.01
#: largest clearance setting accepted (m)
MAX_CLEARANCE = 1.0


@dataclass(frozen=True)
class CollisionSettings:
    """Whether poses are checked for collisions, and the clearance asked (m).

    ``reason`` says why collisions are off ("" when on): "switched off in the study settings
    (collisions = false)" or "the arm has no collision shapes".
    """

    on: bool
    clearance: float = DEFAULT_CLEARANCE
    reason: str = ""


def arm_has_shapes(arm) -> bool:
    """True when a moving body of the arm (a link or the tool) has at least one collision shape."""
    model = getattr(arm, "model", arm)
    shapes = model.body_shapes() if hasattr(model, "body_shapes") else []
    return any(len(s) for s in shapes[1:])


def collision_settings(settings: Mapping, arm, where: str) -> CollisionSettings:
    """Validate ``clearance`` and ``collisions`` of a study's settings (``where`` starts each error)."""
    c = settings.get("clearance", DEFAULT_CLEARANCE)
    if isinstance(c, bool) or not isinstance(c, (int, float)) or not math.isfinite(c) or not 0 <= c <= MAX_CLEARANCE:
        raise StudyError(f"{where} clearance: expected a distance in metres from 0 to {MAX_CLEARANCE:g}, got {c!r}")
    on = settings.get("collisions", None)
    if on is not None and not isinstance(on, bool):
        raise StudyError(f"{where} collisions: expected true or false, got {on!r}")
    if on is False:
        return CollisionSettings(False, float(c), "switched off in the study settings (collisions = false)")
    if not arm_has_shapes(arm):
        return CollisionSettings(False, float(c), "the arm has no collision shapes")
    return CollisionSettings(True, float(c), "")


#: the ``warning:`` sentence of ``workbench run`` for an arm without collision shapes
NO_SHAPES_WARNING = ("collisions not checked: the arm has no collision shapes, so poses may pass links through "
                     "equipment, keep-out zones or the floor (give the arm file shapes, e.g. radius = ... per joint)")


def no_shapes_warning(cs: CollisionSettings) -> str | None:
    """The ``warning:`` sentence of ``workbench run`` when collisions cannot be checked (None otherwise)."""
    if cs.on or "no collision shapes" not in cs.reason:
        return None
    return NO_SHAPES_WARNING


def result_attrs(cs: CollisionSettings) -> dict:
    """Root attributes of a results file that record the collision check."""
    if cs.on:
        return {"collisions": "checked", "clearance": float(cs.clearance)}
    return {"collisions": f"not checked: {cs.reason}", "clearance": float(cs.clearance)}


def clear_of(arm, q, cell, cs: CollisionSettings, mounts=None):
    """Clearance (m) of poses ``q`` (..., n) and whether it is at least the setting.

    Returns
    -------
    d : (...,) ndarray (m; +inf when collisions are off)
    ok : (...,) bool ndarray (all True when collisions are off; False where q holds NaN)
    """
    q = np.asarray(q, float)
    if not cs.on:
        lead = q.shape[:-1]
        return np.full(lead, np.inf), np.ones(lead, bool)
    from ..collision import clearance

    d = clearance(arm, q, cell, mounts=mounts)
    with np.errstate(invalid="ignore"):
        ok = d >= cs.clearance
    return d, ok


def first_clear(ok):
    """Per row of ``ok`` (N, K) the index of the first True column and whether there is one."""
    ok = np.asarray(ok, bool)
    return np.argmax(ok, axis=1), ok.any(axis=1)


def span_sentence(pair: tuple, distance: float) -> str:
    """Plain words for a clearance shortfall: ``link 3 within 4 mm of box 'conveyor'`` (overlap:
    ``link 3 overlaps box 'conveyor' by 2 mm``)."""
    a, b = pair
    mm = distance * 1000.0
    if -0.5 < mm < 0.5:  # rounds to 0 mm either way
        return f"{a} touches {b}"
    if mm < 0:
        return f"{a} overlaps {b} by {-mm:.0f} mm"
    return f"{a} within {mm:.0f} mm of {b}"
