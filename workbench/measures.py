"""Jacobian measures (batched): singular values, manipulability, condition number, isotropy.

For a selection of task rows (see :mod:`workbench.kinematics.rows`) with singular values
s1 >= ... >= sm of the selected Jacobian:

* manipulability w = s1 * ... * sm = sqrt(det(J J^T)) (Yoshikawa, "Manipulability of robotic
  mechanisms", IJRR 1985); zero when rows > joints.
* condition number k = s1 / sm (inf where sm = 0), inverse condition 1/k in [0, 1].
* minimum singular value sm.

For a row selection that mixes translation and rotation the translational rows are divided by a
characteristic length L (Tandirci, Angeles & Ranjbaran, "The characteristic point and the
characteristic length of robotic manipulators", ASME 1992) so that the units do not mix.
"""
from __future__ import annotations

import sys
import types

import numpy as np

from .kinematics import kernels
from .kinematics.rows import parse_rows, row_scale

__all__ = ["measures", "measures_from_sv", "pose_measures", "MEASURE_NAMES", "MEASURE_INFO"]

MEASURE_NAMES = ("manipulability", "condition", "inverse_condition", "min_sv")
MEASURE_INFO = {
    "manipulability": ("manipulability w", "product of singular values; larger is better"),
    "condition": ("condition number", "s1/sm; 1 is isotropic, large near singular"),
    "inverse_condition": ("inverse condition 1/k", "0 singular .. 1 isotropic"),
    "min_sv": ("minimum singular value", "smallest gain; 0 at a singularity"),
}


def measures_from_sv(sv) -> dict:
    """Measures from singular values ``sv`` (..., m) sorted descending (zero-padded when m > n)."""
    sv = np.asarray(sv, dtype=float)
    s1 = sv[..., 0]
    sm = sv[..., -1]
    w = np.prod(sv, axis=-1)
    with np.errstate(divide="ignore", invalid="ignore"):
        inv = np.where(s1 > 0, sm / np.where(s1 > 0, s1, 1.0), 0.0)
        cond = np.where(sm > 0, s1 / np.where(sm > 0, sm, 1.0), np.inf)
    return {
        "manipulability": w,
        "condition": cond,
        "inverse_condition": inv,
        "min_sv": sm.copy(),
        "sv": sv,
    }


def measures(J, rows="full", length=1.0) -> dict:
    """Measures of Jacobians ``J`` (..., 6, n).

    Parameters
    ----------
    J : array_like, shape (..., 6, n)
        Geometric Jacobians, rows [vx vy vz wx wy wz] (m/s and rad/s per unit joint speed).
    rows : str or sequence
        "full", "translation", "rotation", "planar" ([vx, vy, wz]) or a custom list of row names.
    length : float
        Characteristic length L (m) dividing the translational rows when the selection mixes
        translation and rotation; ignored otherwise. Default 1 m (studies default to the arm's
        nominal reach).

    Returns
    -------
    dict of ndarray
        ``manipulability``, ``condition``, ``inverse_condition``, ``min_sv`` each (...), and
        ``sv`` (..., m) singular values, descending.
    """
    J = np.asarray(J, dtype=float)
    if J.ndim < 2 or J.shape[-2] != 6:
        raise ValueError(f"J: expected Jacobians shaped (..., 6, n), got shape {J.shape}")
    r = np.asarray(parse_rows(rows), dtype=np.int64)
    scale = row_scale(tuple(r), length)
    lead = J.shape[:-2]
    A = np.ascontiguousarray(J.reshape((-1,) + J.shape[-2:]))
    out = np.empty((A.shape[0], len(r)))
    if A.shape[0]:
        kernels.sv_batch(A, r, scale, out)
    return measures_from_sv(out.reshape(lead + (len(r),)))


def pose_measures(arm, q, frame="tcp", rows="full", length=None, world=False) -> dict:
    """Fused FK -> Jacobian -> measures for joint values q (..., n) of ``arm`` (a kinematics.Arm).

    Same result as ``measures(arm.jacobian(q, frame), rows, length)`` but no Jacobian stack is
    stored; this is what the maps use. ``length`` defaults to the arm's nominal reach.
    """
    if length is None:
        length = arm.nominal_reach()
    sv = arm.singular_values(q, frame=frame, rows=rows, length=length, world=world)
    return measures_from_sv(sv)


class _CallableModule(types.ModuleType):
    """``from workbench import measures`` gives this module; calling it calls :func:`measures`
    (DESIGN §6: ``m = measures(J, rows="translation")``)."""

    def __call__(self, J, rows="full", length=1.0):
        return measures(J, rows=rows, length=length)


sys.modules[__name__].__class__ = _CallableModule
