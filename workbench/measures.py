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

The functions above are the fast path (compiled kernels, millions of poses). For a few picked
poses the module also gives singular directions (:func:`svd_directions`), velocity and force
ellipsoids (:func:`velocity_ellipsoid`, :func:`force_ellipsoid`, optionally weighted by joint
speed / torque limits), a plain-words note on a near-singular pose (:func:`explain_singularity`,
:func:`singularity_note`), the joint-limit penalty (:func:`joint_limit_penalty`,
:func:`limit_aware_manipulability`) and statics (:func:`joint_torques`, :func:`gravity_torques`,
:func:`max_payload`).
"""
from __future__ import annotations

import sys
import types
from dataclasses import dataclass

import numpy as np

from .errors import WorkbenchError
from .kinematics import kernels, lanes
from .kinematics.rows import parse_rows, row_scale

__all__ = ["measures", "measures_from_sv", "pose_measures", "MEASURE_NAMES",
           "svd_directions", "Ellipsoid", "velocity_ellipsoid", "force_ellipsoid",
           "joint_limit_penalty", "joint_limit_factors", "penalty_of_product", "limit_aware_manipulability",
           "SingularityNote", "singularity_note",
           "explain_singularity", "NEAR_SINGULAR", "joint_torques", "gravity_torques", "max_payload",
           "Payload", "holding_parts", "holding_torques", "TorqueCheck", "torque_check", "largest_along",
           "largest_force", "largest_payload"]

MEASURE_NAMES = ("manipulability", "condition", "inverse_condition", "min_sv")


def measures_from_sv(sv) -> dict:
    """Measures from singular values ``sv`` (..., m) sorted descending (zero-padded when m > n).

    manipulability = prod(sv); inverse_condition = sm / s1 (0 where s1 = 0); condition = s1 / sm
    (inf where sm = 0); min_sv = sm. The compiled lane kernels write the same values."""
    return lanes.measures_from_sv(sv)


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
    J = _as_jacobians(J)
    r = np.asarray(parse_rows(rows), dtype=np.int64)
    scale = row_scale(tuple(r), length)
    lead = J.shape[:-2]
    A = np.ascontiguousarray(J.reshape((-1,) + J.shape[-2:]))
    if lanes.covers(A.shape[2]):
        kernels.dynamic_schedule()
        kernels.announce_compile("lanes")
        sv, w, cond, inv = lanes.sv_measures(A, r, scale)
        return lanes.measures_dict(sv, w, cond, inv, lead, len(r))
    out = np.empty((A.shape[0], len(r)))
    if A.shape[0]:
        kernels.dynamic_schedule()
        kernels.announce_compile("kernels")
        kernels.sv_batch(A, r, scale, out)
    return measures_from_sv(out.reshape(lead + (len(r),)))


def pose_measures(arm, q, frame="tcp", rows="full", length=None, world=False) -> dict:
    """Fused FK -> Jacobian -> measures for joint values q (..., n) of ``arm`` (a kinematics.Arm).

    Same result as ``measures(arm.jacobian(q, frame), rows, length)`` but no Jacobian stack is
    stored; this is what the maps use. ``length`` defaults to the arm's nominal reach.
    """
    if length is None:
        length = arm.nominal_reach()
    return arm.pose_measures(q, frame=frame, rows=rows, length=length, world=world)


# ==============================================================================================
# Below: tools for a few picked poses (ellipsoids, singular directions, plain-words notes) and
# statics. They use np.linalg.svd / plain numpy; the maps use the fast path above.
# ==============================================================================================

#: Default near-singularity threshold on the inverse condition 1/k (see :func:`explain_singularity`).
NEAR_SINGULAR = 0.02
#: Joints whose share of the null motion v_m is at least this fraction of the largest share take part.
PARTICIPATION = 0.3
#: Two axis directions count as parallel when the angle between them is below this (rad, 5 degrees).
PARALLEL_ANGLE = np.radians(5.0)
#: Two crossing revolute axes of joints that dominate v_m "nearly line up" below this angle (rad,
#: 30 degrees).
ALIGN_NEAR = np.radians(30.0)
#: The point of a "nearly stretched / folded" arm may lie up to this angle (rad, 20 degrees) off
#: the plane of two parallel axes, seen from the second axis.
PLANE_NEAR = np.radians(20.0)
#: Two axis lines count as meeting / a point lies on a line or plane when closer than this fraction
#: of the arm's nominal reach.
NEAR_FRACTION = 0.02


def _selected(J, rows, length):
    """Selected, scaled rows of J: (A (..., m, n), row indices, scale (m,))."""
    J = _as_jacobians(J)
    r = parse_rows(rows)
    scale = row_scale(tuple(r), length)
    A = J[..., list(r), :] * scale[:, None]
    return A, r, scale


def svd_directions(J, rows="full", length=1.0):
    """Singular directions of the selected, scaled rows of ``J``.

    Parameters
    ----------
    J : array_like, shape (..., 6, n)
        Geometric Jacobians, rows [vx vy vz wx wy wz].
    rows : str or sequence
        Task rows (see :func:`workbench.kinematics.rows.parse_rows`).
    length : float
        Characteristic length L (m) dividing the translational rows when the selection mixes
        translation and rotation.

    Returns
    -------
    U : ndarray, shape (..., m, m)
        Left singular vectors (task directions) as columns; column i belongs to s_i.
    s : ndarray, shape (..., m)
        Singular values, descending, zero-padded when m > n.
    V : ndarray, shape (..., n, n)
        Right singular vectors (joint motions) as columns; ``J V[:, i] = s_i U[:, i]``.

    Notes
    -----
    Uses ``np.linalg.svd`` (fine for a small batch of picked poses; the maps use the compiled
    kernels). With m > n the columns n..m-1 of U span directions the arm can never move in;
    with n > m the columns m..n-1 of V span the self-motions.
    """
    A, r, _ = _selected(J, rows, length)
    U, s, Vh = np.linalg.svd(A, full_matrices=True)
    m, n = A.shape[-2], A.shape[-1]
    if m > n:
        pad = np.zeros(s.shape[:-1] + (m - n,))
        s = np.concatenate([s, pad], axis=-1)
    return U, s, np.swapaxes(Vh, -1, -2)


@dataclass(frozen=True)
class Ellipsoid:
    """Principal axes of a velocity or force ellipsoid (centred at the tool point).

    Attributes
    ----------
    directions : ndarray, shape (..., m, m)
        Unit axis directions as columns, in the coordinates of the selected rows (base or world
        frame of the Jacobian).
    radii : ndarray, shape (..., m)
        Semi-axis lengths; column i of ``directions`` has radius ``radii[..., i]``. Velocity:
        m/s and rad/s (per unit joint speed, or at the speed limits when weighted). Force: N and
        N m (per unit joint torque, or at the torque limits when weighted); ``inf`` along
        directions the arm holds without any joint torque.
    rows : tuple of str
        Names of the selected rows, e.g. ("vx", "vy", "vz").
    kind : str
        "velocity" or "force".
    weighted : bool
        True when joint speed (velocity) or torque (force) limits shaped the ellipsoid.
    """

    directions: np.ndarray
    radii: np.ndarray
    rows: tuple
    kind: str
    weighted: bool = False

    @property
    def axes(self) -> np.ndarray:
        """Semi-axis vectors (..., m, m): column i is ``radii[i] * directions[:, i]`` (inf-safe:
        a zero direction component stays 0)."""
        with np.errstate(invalid="ignore"):
            out = self.directions * self.radii[..., None, :]
        return np.where(self.directions == 0.0, 0.0, out)

    def radius_along(self, d) -> np.ndarray:
        """Extent of the ellipsoid along unit direction(s) ``d`` (..., m): the largest speed
        (velocity) or force (force ellipsoid) available along ``d``, 1 / sqrt(sum_i (d.e_i / r_i)^2)."""
        d = np.asarray(d, dtype=float)
        m = self.directions.shape[-2]
        if d.ndim < 1 or d.shape[-1] != m:
            raise WorkbenchError(f"d: expected direction(s) shaped (..., {m}) in the ellipsoid's rows, got shape {d.shape}")
        norm = np.linalg.norm(d, axis=-1, keepdims=True)
        if not np.all(np.isfinite(norm) & (norm > 0)):
            raise WorkbenchError("d: expected non-zero, finite direction(s), got a zero-length or non-finite one")
        d = d / norm
        c = np.einsum("...ij,...i->...j", self.directions, d)
        r = np.broadcast_to(self.radii, c.shape)
        # a flat ellipsoid (radius 0: more task rows than joints, or an exact singularity) has no
        # extent off its span: a direction with a real component along a zero axis gets 0; one in
        # the span (component at rounding level) ignores that axis instead of dividing 0 by 0
        finite = np.where(np.isfinite(r), r, 0.0)
        scale = np.max(finite, axis=-1, keepdims=True)
        flat = finite <= FLAT_RADIUS * scale
        off_span = np.any(flat & np.isfinite(r) & (np.abs(c) > FLAT_COMPONENT), axis=-1)
        with np.errstate(divide="ignore", invalid="ignore"):
            inv = np.where(np.isinf(r) | flat, 0.0, 1.0 / np.where(flat, 1.0, r))
        quad = np.sum((c * inv) ** 2, axis=-1)
        with np.errstate(divide="ignore"):
            out = np.where(quad > 0, 1.0 / np.sqrt(np.where(quad > 0, quad, 1.0)), np.inf)
        return np.where(off_span, 0.0, out)


#: radii at most this fraction of an ellipsoid's largest finite radius count as 0 (a flat axis)
FLAT_RADIUS = 1e-12
#: a unit direction whose component along a flat axis is at most this lies in the ellipsoid's span
FLAT_COMPONENT = 1e-9


_ROWN = ("vx", "vy", "vz", "wx", "wy", "wz")


def _as_jacobians(J) -> np.ndarray:
    """``J`` as a float array shaped (..., 6, n) with n >= 1, or a WorkbenchError (a ValueError)
    naming the parameter, the expected shape and the shape received."""
    try:
        J = np.asarray(J, dtype=float)
    except (TypeError, ValueError):
        raise WorkbenchError(f"J: expected Jacobians shaped (..., 6, n) of numbers, got {type(J).__name__} "
                             f"with values that are not numbers") from None
    if J.ndim < 2 or J.shape[-2] != 6 or J.shape[-1] < 1:
        raise WorkbenchError(f"J: expected Jacobians shaped (..., 6, n) with n >= 1 joints, got shape {J.shape}")
    return J


def _limits_vector(values, n, what, unit):
    v = np.asarray(values, dtype=float)
    if v.shape != (n,):
        raise WorkbenchError(f"{what}: expected {n} joint limits, got shape {v.shape}")
    bad = np.flatnonzero(~np.isfinite(v) | (v <= 0))
    if bad.size:
        raise WorkbenchError(f"{what}: joint {bad[0] + 1} has no usable limit ({v[bad[0]]!r}); "
                             f"expected a positive {unit} for every joint")
    return v


def velocity_ellipsoid(J, rows="translation", length=1.0, max_speed=None) -> Ellipsoid:
    """Velocity ellipsoid {J q_dot : |q_dot| <= 1} of the selected rows (Yoshikawa 1985).

    Parameters
    ----------
    J : array_like, shape (..., 6, n)
        Geometric Jacobians.
    rows : str or sequence
        Task rows; default "translation" (units do not mix).
    length : float
        Characteristic length (m) for selections mixing translation and rotation.
    max_speed : array_like, shape (n,), optional
        Joint speed limits (rad/s, m/s). When given the ellipsoid is that of ``J @ diag(max_speed)``:
        the tool speeds reached with joint speeds inside sum_i (q_dot_i / max_speed_i)^2 <= 1, an
        ellipsoid inscribed in the box of speed limits.

    Returns
    -------
    Ellipsoid
        Axes s_i u_i: ``directions`` = U, ``radii`` = s (descending, zero-padded when m > n).
    """
    J = np.asarray(J, dtype=float)
    weighted = max_speed is not None
    if weighted:
        J = J * _limits_vector(max_speed, J.shape[-1], "max_speed", "joint speed")
    U, s, _ = svd_directions(J, rows, length)
    return Ellipsoid(U, s, tuple(_ROWN[i] for i in parse_rows(rows)), "velocity", weighted)


def force_ellipsoid(J, rows="translation", length=1.0, max_effort=None) -> Ellipsoid:
    """Force ellipsoid {F : |J^T F| <= 1} of the selected rows (Yoshikawa 1985).

    Derivation: with J = U S V^T, |J^T F|^2 = sum_i s_i^2 (u_i . F)^2, so the set is an
    ellipsoid with axes u_i / s_i (radius ``inf`` where s_i = 0: a wrench along u_i costs no
    joint torque).

    Parameters
    ----------
    J : array_like, shape (..., 6, n)
        Geometric Jacobians.
    rows : str or sequence
        Task rows; default "translation" (forces in N).
    length : float
        Characteristic length (m) for mixed selections; forces are then given in the dual
        scaled coordinates (force components multiplied by L, i.e. in N m like the moments).
    max_effort : array_like, shape (n,), optional
        Joint torque/force limits tau_max (N m, N). With joint torques tau = J^T F the wrenches
        with sum_i (tau_i / tau_max_i)^2 <= 1 form {F : |diag(1/tau_max) J^T F| <= 1}, i.e. the
        force ellipsoid of J' = J diag(1/tau_max): axes u'_i / s'_i from the SVD of J'. This
        ellipsoid is inscribed in the polytope of wrenches allowed by the box of torque limits
        (it touches it where one joint is at its limit and the others are idle).

    Returns
    -------
    Ellipsoid
        ``directions`` = U (or U'), ``radii`` = 1 / s (column i belongs to s_i, so radii ascend).
    """
    J = np.asarray(J, dtype=float)
    weighted = max_effort is not None
    if weighted:
        J = J / _limits_vector(max_effort, J.shape[-1], "max_effort", "joint torque or force")
    U, s, _ = svd_directions(J, rows, length)
    with np.errstate(divide="ignore"):
        radii = np.where(s > 0, 1.0 / np.where(s > 0, s, 1.0), np.inf)
    return Ellipsoid(U, radii, tuple(_ROWN[i] for i in parse_rows(rows)), "force", weighted)


# ----------------------------------------------------------------------------------------------
# joint-limit-aware manipulability
#
# What was verified and what not (searches of the stored documentation and web pages did not
# turn up the text of either paper, so nothing below was read in the source):
#   * The penalty P(q) = 1 - exp(-k * prod_i (q_i - l_i)(u_i - q_i) / (u_i - l_i)^2) and its use
#     as a factor on Yoshikawa's manipulability are attributed to Tsai (1986, PhD thesis,
#     "Multiple robot coordination ...") as reported by Vahrenkamp, Asfour, Metta, Sandini &
#     Dillmann, "Manipulability analysis", IEEE-RAS Humanoids 2012 -- the formula is taken as
#     given in our issue/brief and is FROM MEMORY, not checked against either paper.
#   * The direction-aware penalty of Vahrenkamp et al. 2012 (a per-joint factor that depends on
#     whether the requested tool motion drives a joint towards or away from its limit) is NOT
#     implemented because we could not verify its exact form.
#   * The default k is our own choice (below), not a value from either paper.
# ----------------------------------------------------------------------------------------------


def joint_limit_penalty(q, lower, upper, k=None):
    """Joint-limit penalty P(q) in [0, 1) (Tsai 1986, as reported by Vahrenkamp et al. 2012;
    formula from memory, see the comment above).

    P(q) = 1 - exp(-k * prod_i (q_i - l_i)(u_i - q_i) / (u_i - l_i)^2)

    Parameters
    ----------
    q : array_like, shape (..., n)
        Joint values (rad, m).
    lower, upper : array_like, shape (n,)
        Joint limits; joints with an infinite limit are left out of the product.
    k : float, optional
        Steepness. Default ``3 * 4**n_lim`` (n_lim = number of limited joints): each factor of
        the product is at most 1/4 (at mid-range), so with this k the penalty is
        1 - e^-3 = 0.950 when every limited joint is at mid-range and falls towards 0 as any
        joint nears a limit. This default is our choice, not the papers'.

    Returns
    -------
    ndarray, shape (...)
        The penalty; 0 on or outside a limit; 1 (no penalty) when no joint is limited.
    """
    f, n_lim = joint_limit_factors(q, lower, upper)
    return penalty_of_product(np.prod(f, axis=-1), n_lim, k)


def joint_limit_factors(q, lower, upper):
    """The per-joint factors of :func:`joint_limit_penalty`: f_i = (q_i - l_i)(u_i - q_i) / (u_i - l_i)^2
    clipped at 0 (1/4 at mid-range, 0 at a limit), and 1 for a joint without finite limits.

    Returns (f (..., n), number of limited joints)."""
    q = np.asarray(q, dtype=float)
    lo = np.asarray(lower, dtype=float)
    hi = np.asarray(upper, dtype=float)
    if q.ndim == 0 or q.shape[-1] != lo.shape[-1] or lo.shape != hi.shape:
        raise WorkbenchError(f"q: expected joint values shaped (..., {lo.shape[-1]}) to match the "
                             f"limits, got shape {q.shape}")
    lim = np.isfinite(lo) & np.isfinite(hi)
    lo_f, hi_f = np.where(lim, lo, 0.0), np.where(lim, hi, 1.0)
    f = np.where(lim, np.clip((q - lo_f) * (hi_f - q) / (hi_f - lo_f) ** 2, 0.0, None), 1.0)
    return f, int(lim.sum())


def penalty_of_product(prod, n_lim: int, k=None):
    """P = 1 - exp(-k * prod) from the product of :func:`joint_limit_factors` (see
    :func:`joint_limit_penalty` for k); 1 when no joint is limited."""
    prod = np.asarray(prod, dtype=float)
    if n_lim == 0:
        return np.ones(prod.shape)
    if k is None:
        k = 3.0 * 4.0 ** n_lim
    if not (np.isfinite(k) and k > 0):
        raise WorkbenchError(f"k: expected a positive penalty steepness, got {k!r}")
    return -np.expm1(-k * prod)


def limit_aware_manipulability(arm, q, frame="tcp", rows="full", length=None, k=None, world=False):
    """Manipulability multiplied by the joint-limit penalty: w_pen = P(q) * w (see
    :func:`joint_limit_penalty`).

    Parameters
    ----------
    arm : workbench.kinematics.Arm
    q : array_like, shape (..., n)
        Joint values (rad, m).
    frame, rows, length, world
        As for :func:`pose_measures` (``length`` defaults to the arm's nominal reach).
    k : float, optional
        Penalty steepness (default as in :func:`joint_limit_penalty`).

    Returns
    -------
    ndarray, shape (...)
        Penalised manipulability (units of the plain manipulability of those rows).
    """
    w = pose_measures(arm, q, frame=frame, rows=rows, length=length, world=world)["manipulability"]
    return joint_limit_penalty(q, arm.model.lower, arm.model.upper, k=k) * w


# ----------------------------------------------------------------------------------------------
# singular directions in plain words


@dataclass(frozen=True)
class SingularityNote:
    """Structured explanation of the weakest direction at one pose (see :func:`explain_singularity`).

    Attributes
    ----------
    near_singular : bool
        ``inverse_condition < threshold``.
    inverse_condition : float
        s_m / s_1 of the selected, scaled rows (0 when rows > joints).
    threshold : float
    rows : tuple of str
    singular_values : ndarray (m,)
    lost_direction : ndarray (m,)
        u_m, unit, in the selected (scaled) rows, base or world frame.
    lost_translation, lost_rotation : ndarray (3,)
        The translational and rotational parts of u_m (zeros for rows not selected).
    null_motion : ndarray (n,)
        v_m: the unit joint motion that moves the tool least (``J v_m = s_m u_m``); zeros when
        the arm has fewer joints than rows and the weakest direction is structural.
    joints : tuple of int
        0-based joints taking part in v_m (|v_k| >= PARTICIPATION * max |v|).
    cause : str
        "aligned_axes", "stretched", "folded", "point_on_axis", "parallel_slides",
        "too_few_joints", "joints_after_frame", "joints_combine" or "none" (not near singular).
    pairs : tuple
        Joint index tuples (0-based) the cause refers to.
    sentences : tuple of str
    """

    near_singular: bool
    inverse_condition: float
    threshold: float
    rows: tuple
    singular_values: np.ndarray
    lost_direction: np.ndarray
    lost_translation: np.ndarray
    lost_rotation: np.ndarray
    null_motion: np.ndarray
    joints: tuple
    cause: str
    pairs: tuple
    sentences: tuple

    @property
    def text(self) -> str:
        return " ".join(self.sentences)


def _vec_words(v) -> str:
    return ", ".join(f"{c:+.2f} {a}" for c, a in zip(v, "xyz"))


def _unit(v):
    nrm = float(np.linalg.norm(v))
    return v / nrm if nrm > 0 else v


def _line_distance(p, z, x):
    """Distance of point x from the line through p with unit direction z."""
    d = x - p
    return float(np.linalg.norm(d - np.dot(d, z) * z))


def _meeting_point(points, dirs):
    """Least-squares point closest to all lines; (point, worst distance) or (None, inf) when the
    lines are (nearly) parallel."""
    A = np.zeros((3, 3))
    b = np.zeros(3)
    for p, z in zip(points, dirs):
        P = np.eye(3) - np.outer(z, z)
        A += P
        b += P @ p
    if np.linalg.cond(A) > 1e6:
        return None, np.inf
    x = np.linalg.solve(A, b)
    return x, max(_line_distance(p, z, x) for p, z in zip(points, dirs))


def singularity_note(arm, q, frame="tcp", rows="full", length=None, threshold=NEAR_SINGULAR,
                     world=False) -> SingularityNote:
    """Structured form of :func:`explain_singularity` for one pose q (n,) (rad, m).

    Parameters are those of :func:`explain_singularity`; returns a :class:`SingularityNote`
    whose ``text`` is what :func:`explain_singularity` returns.

    The geometric tests use the joint axis lines at q (from ``arm.frames``) and tolerances
    stated at the top of this section: axes parallel within ``PARALLEL_ANGLE`` (5 deg), lines
    meeting / points on lines or planes within ``NEAR_FRACTION`` (2 %) of the nominal reach;
    looser "nearly" matches (axes crossing below ``ALIGN_NEAR`` = 30 deg, a point up to
    ``PLANE_NEAR`` = 20 deg off the plane of two parallel axes) are used only when no exact
    cause fits.
    """
    m_ = arm.model
    q = np.asarray(q, dtype=float)
    if q.shape != (m_.n,):
        raise WorkbenchError(f"q: explain one pose at a time; expected {m_.n} joint values, got shape {q.shape}")
    if not np.all(np.isfinite(q)):
        raise WorkbenchError(f"q: expected {m_.n} finite joint values (rad / m), got {q.tolist()!r}")
    if not (0.0 < float(threshold) < 1.0):
        raise WorkbenchError(f"threshold: expected an inverse condition between 0 and 1, got {threshold!r}")
    if length is None:
        length = arm.nominal_reach()
    r = parse_rows(rows)
    names = tuple(_ROWN[i] for i in r)
    J = arm.jacobian(q, frame=frame, world=world)
    U, s, V = svd_directions(J, r, length)
    mrows, n = len(r), m_.n
    inv = float(measures_from_sv(s)["inverse_condition"])
    near = inv < threshold

    def jn(k):
        nm = m_.names[k]
        plain = {f"j{k + 1}", f"joint{k + 1}", f"joint_{k + 1}", f"joint {k + 1}", str(k + 1)}
        return f"{k + 1}" if nm.lower() in plain else f"{k + 1} ({nm})"

    def joint_list(ks):
        ks = [jn(k) for k in ks]
        return ks[0] if len(ks) == 1 else ", ".join(ks[:-1]) + " and " + ks[-1]

    # index of the weakest direction that has a joint motion behind it
    structural = mrows > n
    iw = min(mrows, n) - 1 if structural else mrows - 1
    u = U[:, mrows - 1].copy()
    if structural and s[iw] > threshold * s[0]:
        v = np.zeros(n)
    else:
        if structural:
            u = U[:, iw].copy()
        v = V[:, iw].copy()
    # a sign convention: the largest component of u is positive
    if u[np.argmax(np.abs(u))] < 0:
        u, v = -u, -v
    lt, lr = np.zeros(3), np.zeros(3)
    for a, ri in enumerate(r):
        (lt if ri < 3 else lr)[ri % 3] = u[a]
    where = "world" if world else "base"
    what = "the tool" if str(frame).lower() in ("tcp", "flange") else f"frame {frame!r}"
    sentences = []
    cause, pairs = "none", ()
    joints = ()
    if np.any(v):
        big = np.abs(v) >= PARTICIPATION * np.max(np.abs(v))
        joints = tuple(int(k) for k in np.flatnonzero(big))

    # -- lost direction in words
    nt, nr = float(np.linalg.norm(lt)), float(np.linalg.norm(lr))
    if structural:
        sentences.append(f"This arm has {n} joints for {mrows} task rows ({', '.join(names)}): "
                         f"at most {n} tool directions can be controlled at once; choose rows that "
                         f"match the arm.")
        cause = "too_few_joints"
    if nr < 1e-9 or nt >= 0.95:
        lost = f"move along {_vec_words(_unit(lt))}"
    elif nt < 1e-9 or nr >= 0.95:
        lost = f"rotate about {_vec_words(_unit(lr))}"
    else:
        lost = (f"rotate about {_vec_words(_unit(lr))} while moving along {_vec_words(_unit(lt))} "
                f"(a mixed direction: {nt:.0%} of it translation, scaled by L = {length:.3g} m)")
    if near:
        head = (f"Near a singularity (inverse condition {inv:.3g} < {threshold:g}): {what} "
                f"can hardly {lost} ({where} frame).")
        if s[iw] <= 1e-9 * max(s[0], 1e-300):
            head = (f"At a singularity (inverse condition {inv:.3g}): {what} cannot {lost} "
                    f"({where} frame).")
    else:
        head = (f"Not near a singularity (inverse condition {inv:.3g} >= {threshold:g}); the weakest "
                f"direction of {what} is: {lost} ({where} frame).")
    sentences.insert(0, head)

    if near and np.any(v):
        # -- geometry of the joint axes at this pose
        F = arm.frames(q, world=world)
        Z = np.einsum("kij,kj->ki", F[:, :3, :3], m_.axes)
        P = F[:, :3, 3]
        reach = arm.nominal_reach()
        tol = NEAR_FRACTION * reach
        sin_tol = np.sin(PARALLEL_ANGLE)
        rev = m_.kinds == 0
        part = list(joints)

        def parallel(i, j):
            return float(np.linalg.norm(np.cross(Z[i], Z[j]))) < sin_tol

        def collinear(i, j):
            return parallel(i, j) and max(_line_distance(P[i], Z[i], P[j]),
                                          _line_distance(P[j], Z[j], P[i])) < tol

        # reference point: the wrist centre (last three revolute axes meet) for rows with
        # rotation, else the frame's point
        Tf = arm.fk(q, frame=frame, world=world)
        ref, ref_name = Tf[:3, 3], "the tool point"
        through_ref = set()  # joints whose axes pass through the reference point by construction
        if any(ri >= 3 for ri in r) and n >= 3 and np.all(rev[-3:]):
            x, err = _meeting_point(P[-3:], Z[-3:])
            if x is not None and err < tol:
                ref, ref_name = x, "the wrist centre"
                through_ref = {n - 3, n - 2, n - 1}
        found = False
        # 0. joints that come after the frame's link do not move it at all
        Jsel = J[list(r), :]
        idle = [k for k in range(n) if not np.any(Jsel[:, k])]
        if idle and all(k in idle for k in part):
            sentences.append(f"Joint{'s' if len(idle) > 1 else ''} {joint_list(idle)} "
                             f"{'come' if len(idle) > 1 else 'comes'} after the chosen frame and "
                             f"{'do' if len(idle) > 1 else 'does'} not move it.")
            cause, pairs, found = "joints_after_frame", (tuple(idle),), True
        # 1. two revolute axes on one line (or crossing at a shallow angle: nearly on one line)
        best = None
        for a in range(len(part) if not found else 0):
            for b in range(a + 1, len(part)):
                i, j = part[a], part[b]
                if not (rev[i] and rev[j]):
                    continue
                cr = np.cross(Z[i], Z[j])
                sang = min(1.0, float(np.linalg.norm(cr)))
                if sang < 1e-9:
                    gap = max(_line_distance(P[i], Z[i], P[j]), _line_distance(P[j], Z[j], P[i]))
                else:
                    gap = abs(float(np.dot(P[j] - P[i], cr))) / sang
                if gap < tol and sang < np.sin(ALIGN_NEAR) and (best is None or sang < best[0]):
                    best = (sang, i, j)
        near_cand = []  # looser matches, used only when no exact geometric cause is found:
        #                 (sine of the angle off, cause, joints, sentence)
        if best is not None:
            sang, i, j = best
            ang = np.degrees(np.arcsin(sang))
            if sang < sin_tol:
                sentences.append(f"Joints {joint_list([i, j])} cancel: their axes line up (angle "
                                 f"between them {ang:.2g} deg), so turning one against the other "
                                 f"moves nothing.")
                cause, pairs, found = "aligned_axes", ((i, j),), True
            else:
                near_cand.append((sang, "aligned_axes", (i, j),
                                  f"Joints {joint_list([i, j])} nearly cancel: their axes cross at "
                                  f"a shallow angle of {ang:.0f} deg, so turning one against the "
                                  f"other moves little."))
        # 2. two sliding joints along parallel axes
        if not found:
            for a in range(len(part)):
                for b in range(a + 1, len(part)):
                    i, j = part[a], part[b]
                    if not rev[i] and not rev[j] and parallel(i, j):
                        sentences.append(f"Joints {joint_list([i, j])} slide along parallel axes "
                                         f"and cancel each other.")
                        cause, pairs, found = "parallel_slides", ((i, j),), True
                        break
                if found:
                    break
        # 3.-5. parallel revolute axes in one plane with the reference point, three or more
        # parallel revolute axes in one plane, or the reference point on a joint axis: keep the
        # candidate whose geometric condition holds best (smallest residual distance)
        if not found:
            cand = []  # (residual, cause, joints, sentence)
            seen = set()
            for i0 in part:
                for j0 in range(n):
                    i, j = min(i0, j0), max(i0, j0)
                    if i == j or (i, j) in seen:
                        continue
                    seen.add((i, j))
                    if not (rev[i] and rev[j] and parallel(i, j)) or collinear(i, j):
                        continue
                    if i in through_ref or j in through_ref:
                        continue
                    z = Z[i]
                    A2 = P[i] - np.dot(P[i], z) * z
                    B2 = P[j] - np.dot(P[j], z) * z
                    C2 = ref - np.dot(ref, z) * z
                    ab = _unit(B2 - A2)
                    off = float(np.linalg.norm((C2 - A2) - np.dot(C2 - A2, ab) * ab))
                    lever = float(np.linalg.norm(C2 - B2))
                    dev = float(np.arcsin(min(1.0, off / lever))) if lever > 0 else np.pi / 2
                    if (off < tol or dev < PLANE_NEAR) and min(np.linalg.norm(C2 - A2), lever) > off:
                        stretched = bool(np.dot(B2 - A2, C2 - B2) > 0)
                        word = "stretched out" if stretched else "folded back"
                        lie, can, into = "lie", "cannot", cand
                        if off >= tol:
                            word = f"nearly {word} ({np.degrees(dev):.0f} deg from it)"
                            lie, can, into = "nearly lie", "can hardly", near_cand
                        into.append((off if into is cand else off / lever,
                                     "stretched" if stretched else "folded", (i, j),
                                     f"The arm is {word}: joints {joint_list([i, j])} turn about "
                                     f"parallel axes that {lie} in one plane with {ref_name}, so "
                                     f"together they {can} move it towards or away from joint "
                                     f"{jn(i)}'s axis."))
            if any(ri >= 3 for ri in r):
                for a in range(len(part)):
                    i0 = part[a]
                    group = [i0] + [k for k in range(i0 + 1, n) if rev[k] and parallel(i0, k)]
                    if not rev[i0] or len(group) < 3 or sum(k in part for k in group) < 2:
                        continue
                    z = Z[group[0]]
                    pts = np.array([P[k] - np.dot(P[k], z) * z for k in group])
                    ab = _unit(pts[-1] - pts[0])
                    rel = pts - pts[0]
                    off = float(np.max(np.linalg.norm(rel - np.outer(rel @ ab, ab), axis=1)))
                    if off < tol:
                        t = np.append(rel @ ab, np.dot(ref - np.dot(ref, z) * z - pts[0], ab))
                        stretched = bool(np.all(np.diff(t) > 0) or np.all(np.diff(t) < 0))
                        word = "stretched out" if stretched else "folded back"
                        cand.append((off, "stretched" if stretched else "folded", tuple(group),
                                     f"The arm is {word}: joints {joint_list(group)} turn about "
                                     f"parallel axes that lie in one plane, so their motions "
                                     f"are dependent and the direction above is lost."))
                    break
            for i in part:
                dist = _line_distance(P[i], Z[i], ref)
                if rev[i] and dist < tol and i not in through_ref:
                    cand.append((dist, "point_on_axis", (i,),
                                 f"{ref_name[0].upper() + ref_name[1:]} lies on the axis of joint "
                                 f"{jn(i)}, so turning joint {jn(i)} does not move it."))
            if not cand:
                cand = near_cand
            if cand:
                _, cause, grp, sent = min(cand, key=lambda c: c[0])
                sentences.append(sent)
                pairs, found = (grp,), True
        if not found:
            ratios = " : ".join(f"{v[k]:+.2f}" for k in part)
            still = "stands still" if s[iw] <= 1e-9 * max(s[0], 1e-300) else "hardly moves"
            sentences.append(f"Joints {joint_list(part)} move together so that the frame {still} "
                             f"(joint speed ratios {ratios}).")
            cause, pairs = ("too_few_joints" if structural and cause == "too_few_joints" else
                            "joints_combine"), (tuple(part),)
    return SingularityNote(bool(near), inv, float(threshold), names, s.copy(), u, lt, lr, v,
                           joints, cause, pairs, tuple(sentences))


def explain_singularity(arm, q, frame="tcp", rows="full", length=None, threshold=NEAR_SINGULAR,
                        world=False) -> str:
    """Plain-words note on the weakest direction of one pose: which tool direction is (nearly)
    lost and which joints cancel, derived from the joint-axis geometry.

    Parameters
    ----------
    arm : workbench.kinematics.Arm
    q : array_like, shape (n,)
        One pose (rad, m).
    frame : str
        Frame whose point and orientation define the task (default "tcp").
    rows : str or sequence
        Task rows (default "full").
    length : float, optional
        Characteristic length (m) for mixed rows; default the arm's nominal reach.
    threshold : float
        Near-singularity threshold on the inverse condition 1/k = s_m / s_1; default
        ``NEAR_SINGULAR`` = 0.02 (the weakest direction has less than 2 % of the strongest gain,
        i.e. condition number above 50). Our choice of default, not a published value.
    world : bool
        Directions in the world (cell) frame instead of the arm's base frame.

    Returns
    -------
    str
        One to three sentences. The lost direction is u_m (last left singular vector); the
        joints named are those with large components of v_m (the joint motion that moves the
        tool least). Causes are recognised from the axes at this pose: two revolute axes on one
        line ("cancel: their axes line up"), parallel revolute axes in one plane with the wrist
        centre / tool point ("stretched out" / "folded back"), the point on a joint axis, two
        parallel sliding joints; otherwise a generic sentence names the joints.
    """
    return singularity_note(arm, q, frame=frame, rows=rows, length=length, threshold=threshold,
                            world=world).text


# ----------------------------------------------------------------------------------------------
# statics


def joint_torques(J, wrench):
    """Joint torques tau = J^T F balancing a tool wrench (kineto-statics duality).

    Parameters
    ----------
    J : array_like, shape (..., 6, n)
        Geometric Jacobians of the point where the wrench acts.
    wrench : array_like, shape (..., 6)
        F = [fx fy fz mx my mz] (N, N m) that the tool exerts on its surroundings, in the frame
        of J's rows (moments about J's point). Broadcasts against J's leading dims.

    Returns
    -------
    ndarray, shape (..., n)
        Joint torques (N m) / forces (N) the joints must supply.
    """
    J = _as_jacobians(J)
    F = np.asarray(wrench, dtype=float)
    if F.ndim == 0 or F.shape[-1] != 6:
        raise WorkbenchError(f"wrench: expected [fx fy fz mx my mz] shaped (..., 6), got shape {F.shape}")
    return np.einsum("...ij,...i->...j", J, F)


def _gravity_vector(g):
    g = np.asarray(g, dtype=float)
    if g.shape != (3,) or not np.all(np.isfinite(g)):
        raise WorkbenchError(f"g: expected a gravity vector of 3 finite numbers (m/s^2), got {g!r}")
    return g


def gravity_torques(arm, q, g=(0.0, 0.0, -9.81), world=True):
    """Joint torques that hold the arm still against gravity.

    tau_g(q) = - sum_k m_k J_{v,k}(q)^T g  -  m_tool J_{v,tool}(q)^T g

    with J_{v,k} the translational rows of the Jacobian of link k's centre of mass.

    Parameters
    ----------
    arm : workbench.kinematics.Arm
        Every link needs a mass (arm files: ``mass``/``com`` per joint; the tool's ``mass``/``com``
        in ``[tool]``, the tool's centre of mass taken in the flange frame).
    q : array_like, shape (..., n)
        Joint values (rad, m).
    g : array_like, shape (3,)
        Gravity (m/s^2), in the world frame when ``world`` is true (the mount is respected),
        else in the arm's base frame.
    world : bool

    Returns
    -------
    ndarray, shape (..., n)
        Torques (N m) / forces (N) the joints must supply.

    Raises
    ------
    WorkbenchError
        When a link has no mass.
    """
    m_ = arm.model
    g = _gravity_vector(g)
    missing = [k for k in range(m_.n) if not np.isfinite(m_.masses[k])]
    if missing:
        k = missing[0]
        raise WorkbenchError(f"arm {m_.name!r}: joint {k + 1} ({m_.names[k]!r}) has no link mass; gravity "
                             f"torques need 'mass' (and 'com') for every joint")
    q = np.asarray(q, dtype=float)
    tau = np.zeros(q.shape[:-1] + (m_.n,)) if q.ndim else np.zeros(m_.n)
    for k in range(m_.n):
        if m_.masses[k] == 0.0:
            continue
        Jc = arm.jacobian(q, frame=k, point=m_.coms[k], world=world)
        tau -= m_.masses[k] * np.einsum("...ij,i->...j", Jc[..., :3, :], g)
    if m_.tool_mass:
        Jt = arm.jacobian(q, frame="flange", point=m_.tool_com, world=world)
        tau -= m_.tool_mass * np.einsum("...ij,i->...j", Jt[..., :3, :], g)
    return tau


def max_payload(arm, q, g=(0.0, 0.0, -9.81), world=True, frame="tcp"):
    """Largest point mass at the TCP that every joint can hold within its torque limit.

    For each joint i, with a_i the gravity torque of the arm itself (:func:`gravity_torques`) and
    b_i = -J_{v,tcp}[:, i] . g the torque per kilogram of payload, the payload m >= 0 must satisfy
    |a_i + m b_i| <= tau_max_i, so m <= (tau_max_i - sign(b_i) a_i) / |b_i| (no bound where
    b_i = 0). The result is the minimum over the joints; 0 where some joint is already over its
    limit at m = 0.

    Parameters
    ----------
    arm : workbench.kinematics.Arm
        Needs link masses and ``max_effort`` for every joint.
    q : array_like, shape (..., n)
    g : array_like, shape (3,)
        Gravity (m/s^2), world frame when ``world`` is true.
    world : bool
    frame : str
        Where the payload sits (default "tcp").

    Returns
    -------
    mass : ndarray, shape (...)
        Largest payload (kg); ``inf`` where no joint carries any of it.
    limiting : ndarray of int, shape (...)
        0-based joint whose limit sets the payload (-1 where the payload is unbounded).
    """
    m_ = arm.model
    g = _gravity_vector(g)
    tmax = m_.max_effort
    bad = np.flatnonzero(~np.isfinite(tmax))
    if bad.size:
        k = int(bad[0])
        raise WorkbenchError(f"arm {m_.name!r}: joint {k + 1} ({m_.names[k]!r}) has no max_effort; the "
                             f"payload needs a torque/force limit for every joint")
    a = gravity_torques(arm, q, g=g, world=world)
    Jt = arm.jacobian(q, frame=frame, world=world)
    b = -np.einsum("...ij,i->...j", Jt[..., :3, :], g)
    b = np.where(np.abs(b) <= 1e-12 * max(1.0, float(np.abs(g).max())) * arm.nominal_reach(), 0.0, b)
    with np.errstate(divide="ignore", invalid="ignore"):
        per = np.where(b != 0.0, (tmax - np.sign(b) * a) / np.abs(np.where(b != 0.0, b, 1.0)), np.inf)
    per = np.where(np.abs(a) > tmax, 0.0, per)
    per = np.maximum(per, 0.0)
    mass = np.min(per, axis=-1)
    limiting = np.where(np.isinf(mass), -1, np.argmin(per, axis=-1))
    return mass, limiting


# ----------------------------------------------------------------------------------------------
# What the work asks of the arm at a pose: holding torques, torque margins, the largest force
# along a direction and the largest payload within the joint torque limits.
#
# Sign convention (used throughout): a tool wrench W = [f; m] is what the TOOL EXERTS ON ITS
# SURROUNDINGS (pressing a part with 150 N along tool z is f = [0, 0, 150] in the tool frame),
# moments about the TCP; tau are the torques / forces the JOINTS MUST SUPPLY to hold the pose
# still. Statics relation tau = J^T W: Craig, "Introduction to Robotics: Mechanics and Control",
# 3rd ed. 2005, ch. 5 (Jacobians in the force domain) -- from memory.
# A payload of mass m hanging at the point c (offset from the TCP, in the tool frame) is held by
# the tool with the force -m g at c, i.e. tau_payload = -m J_{v,c}^T g.
# ----------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class Payload:
    """A payload held by the tool (SI units).

    Parameters
    ----------
    mass : float
        kg, >= 0.
    com : (3,) array_like
        Centre of mass, offset from the TCP in the tool (TCP) frame, m.
    inertia : (3, 3) array_like or None
        Inertia about the centre of mass in the tool frame, kg m^2. Statics does not use it; it is
        kept with the payload for the record (the cycle-time estimate neglects dynamics).
    """

    mass: float
    com: np.ndarray = None
    inertia: np.ndarray | None = None

    def __post_init__(self):
        try:
            m = float(self.mass)
        except (TypeError, ValueError):
            raise WorkbenchError(f"payload mass: expected a number of kg, got {self.mass!r}") from None
        if not np.isfinite(m) or m < 0:
            raise WorkbenchError(f"payload mass: expected a finite number of kg >= 0, got {self.mass!r}")
        c = np.zeros(3) if self.com is None else np.asarray(self.com, dtype=float).reshape(-1)
        if c.shape != (3,) or not np.all(np.isfinite(c)):
            raise WorkbenchError(f"payload com: expected 3 finite coordinates in metres (tool frame), got "
                                 f"{self.com!r}")
        object.__setattr__(self, "mass", m)
        object.__setattr__(self, "com", c)
        if self.inertia is not None:
            shown = np.asarray(self.inertia).tolist() if isinstance(self.inertia, np.ndarray) else self.inertia
            try:
                I = np.asarray(self.inertia, dtype=float)
            except (TypeError, ValueError):
                raise WorkbenchError(f"payload inertia: expected numbers (kg m^2), got {shown!r}") from None
            if I.shape == (3,):
                I = np.diag(I)
            if I.shape == (6,):  # ixx iyy izz ixy ixz iyz
                xx, yy, zz, xy, xz, yz = I
                I = np.array([[xx, xy, xz], [xy, yy, yz], [xz, yz, zz]])
            if I.shape != (3, 3) or not np.all(np.isfinite(I)) or not np.allclose(I, I.T, atol=1e-12):
                raise WorkbenchError(f"payload inertia: expected a symmetric 3x3 matrix, 3 principal values or "
                                     f"[ixx, iyy, izz, ixy, ixz, iyz] in kg m^2, got {shown!r}")
            if np.linalg.eigvalsh(I).min() < -1e-12 * max(1.0, float(np.abs(I).max())):
                raise WorkbenchError(f"payload inertia: not positive semi-definite: {shown!r}")
            object.__setattr__(self, "inertia", I)


def _g_vector(g):
    """Gravity from a magnitude (m/s^2, pointing along world -z) or a vector."""
    ga = np.asarray(g, dtype=float)
    if ga.ndim == 0:
        if not np.isfinite(ga) or ga < 0:
            raise WorkbenchError(f"g: expected a gravity magnitude >= 0 (m/s^2) or a vector of 3, got {g!r}")
        return np.array([0.0, 0.0, -float(ga)])
    return _gravity_vector(ga)


def _vec3(v, what):
    a = np.asarray(v, dtype=float)
    if a.ndim == 0 or a.shape[-1] != 3 or not np.all(np.isfinite(a)):
        raise WorkbenchError(f"{what}: expected 3 finite components (shaped (..., 3)), got shape {a.shape}")
    return a


def _frame_name(frame, what="frame"):
    f = str(frame).lower()
    if f in ("tool", "tcp"):
        return "tool"
    if f in ("world", "cell", "base"):
        return "world"
    raise WorkbenchError(f"{what}: expected 'tool' or 'world' (the cell frame), got {frame!r}")


def _to_rows_frame(arm, q, v, frame, world):
    """Vectors v (..., 3) given in the tool frame or the world frame, in the frame of the Jacobian rows."""
    if _frame_name(frame) == "tool":
        R = arm.fk(q, frame="tcp", world=world)[..., :3, :3]
        return np.einsum("...ij,...j->...i", R, v)
    if world:
        return np.broadcast_to(v, np.shape(q)[:-1] + (3,)) if np.ndim(v) == 1 else v
    Rm = arm.model.mount[:3, :3]  # world -> base
    return np.einsum("ji,...j->...i", Rm, v)


def holding_parts(arm, q, force=None, moment=None, payload=None, g=9.81, frame="tool", links=True, world=True):
    """The holding torques at poses ``q`` split by cause.

    Parameters
    ----------
    arm : workbench.kinematics.Arm
    q : array_like, shape (..., n)
        Joint values (rad, m).
    force, moment : array_like, shape (3,) or (..., 3), optional
        The wrench the tool exerts on its surroundings at the TCP (N, N m; moment about the TCP),
        in the tool frame (``frame="tool"``) or the world / cell frame (``frame="world"``).
    payload : Payload, optional
        Mass held by the tool, with its centre of mass offset from the TCP.
    g : float or (3,) array_like
        Gravity: a magnitude along world -z (m/s^2; 0 turns gravity off) or a world vector.
    frame : {"tool", "world"}
        Frame of ``force`` and ``moment``.
    links : bool
        Include the arm's own link and tool masses (refused with a clear message when the arm file
        gives no masses).
    world : bool
        Work in the world frame (the arm's mount respected; default) or in its base frame. ``g`` and
        world-frame vectors are always given in the world frame, so the torques are the same either
        way (joint torques do not depend on the frame the sums are made in).

    Returns
    -------
    dict of ndarray, each (..., n)
        ``links`` (the arm's own weight and the tool's), ``payload``, ``wrench`` (J^T W) and
        ``total`` (their sum), N m / N that the joints must supply.
    """
    Q = np.asarray(q, dtype=float)
    gv = _g_vector(g)
    n = arm.model.n
    shape = Q.shape[:-1] + (n,)
    out = {"links": np.zeros(shape), "payload": np.zeros(shape), "wrench": np.zeros(shape)}
    if not world:
        gv = arm.model.mount[:3, :3].T @ gv  # given in the world frame -> base frame
    if links and np.any(gv != 0):
        out["links"] = np.broadcast_to(gravity_torques(arm, Q, g=gv, world=world), shape).copy()
    if payload is not None:
        if not isinstance(payload, Payload):
            raise WorkbenchError(f"payload: expected a workbench.measures.Payload, got {type(payload).__name__}")
        if payload.mass and np.any(gv != 0):
            Jc = arm.jacobian(Q, frame="tcp", point=payload.com, world=world)
            out["payload"] = -payload.mass * np.einsum("...ij,i->...j", Jc[..., :3, :], gv)
    if force is not None or moment is not None:
        fv = None if force is None else _vec3(force, "force")
        mv = None if moment is None else _vec3(moment, "moment")
        J = arm.jacobian(Q, frame="tcp", world=world)
        W = np.zeros(np.broadcast_shapes(Q.shape[:-1] + (3,), np.shape(fv) if fv is not None else (3,),
                                         np.shape(mv) if mv is not None else (3,))[:-1] + (6,))
        if fv is not None:
            W[..., :3] = _to_rows_frame(arm, Q, fv, frame, world)
        if mv is not None:
            W[..., 3:] = _to_rows_frame(arm, Q, mv, frame, world)
        out["wrench"] = np.einsum("...ij,...i->...j", J, W)
    out["total"] = out["links"] + out["payload"] + out["wrench"]
    return out


def holding_torques(arm, q, force=None, moment=None, payload=None, g=9.81, frame="tool", links=True, world=True):
    """Torques (..., n) the joints must supply to hold poses ``q`` still: link and tool gravity +
    payload gravity + J^T of the tool wrench. See :func:`holding_parts` for the parameters and the
    sign convention (the wrench is what the tool exerts on its surroundings; tau = J^T W, Craig,
    Introduction to Robotics, ch. 5, from memory)."""
    return holding_parts(arm, q, force, moment, payload, g, frame, links, world)["total"]


def _effort_limits(arm, what):
    tmax = np.asarray(arm.model.max_effort, dtype=float)
    bad = np.flatnonzero(~np.isfinite(tmax) | (tmax <= 0))
    if bad.size:
        k = int(bad[0])
        raise WorkbenchError(f"arm {arm.model.name!r}: joint {k + 1} ({arm.model.names[k]!r}) has no max_effort; "
                             f"{what} needs a torque/force limit for every joint")
    return tmax


@dataclass(frozen=True)
class TorqueCheck:
    """Holding torques against the joint limits.

    Attributes
    ----------
    tau : ndarray (..., n)
        Holding torques, N m / N.
    limit : ndarray (n,)
        Joint torque/force limits.
    margin : ndarray (..., n)
        Per joint (limit - |tau|) / limit: 1 unloaded, 0 at the limit, negative over it.
    worst : ndarray (...)
        Smallest margin over the joints.
    joint : ndarray of int (...)
        0-based joint of the smallest margin (the limiting joint).
    ok : ndarray of bool (...)
        Every joint within its limit.
    """

    tau: np.ndarray
    limit: np.ndarray
    margin: np.ndarray
    worst: np.ndarray
    joint: np.ndarray
    ok: np.ndarray


def torque_check(arm, tau=None, q=None, **holding) -> TorqueCheck:
    """Check holding torques against the arm's ``max_effort``.

    Give either ``tau`` (..., n) or ``q`` (..., n) with the keywords of :func:`holding_torques`.
    """
    limit = _effort_limits(arm, "a torque check")
    if tau is None:
        if q is None:
            raise WorkbenchError("torque_check: give the holding torques tau or the poses q")
        tau = holding_torques(arm, q, **holding)
    tau = np.asarray(tau, dtype=float)
    if tau.ndim == 0 or tau.shape[-1] != arm.model.n:
        raise WorkbenchError(f"tau: expected torques shaped (..., {arm.model.n}), got shape {tau.shape}")
    margin = (limit - np.abs(tau)) / limit
    worst = np.min(margin, axis=-1)
    joint = np.argmin(margin, axis=-1)
    return TorqueCheck(tau, limit, margin, worst, joint, worst >= 0)


def largest_along(a, b, limit, tiny=1e-12):
    """Largest s >= 0 with |a_i + s b_i| <= limit_i for every joint i (batched, exact).

    Each joint allows an interval of s: with b_i != 0, s in [(-L_i - sgn(b_i) a_i) / |b_i|,
    (L_i - sgn(b_i) a_i) / |b_i|]; with b_i = 0 every s when |a_i| <= L_i, none otherwise. The
    answer is the smallest upper end if it is >= max(0, the largest lower end): the closed form of
    the LP max s subject to -L <= a + s b <= L, s >= 0.

    Parameters
    ----------
    a : (..., n) torques at s = 0; b : (..., n) torques per unit s; limit : (n,) or (..., n) > 0.
    tiny : float
        |b_i| <= tiny * limit_i counts as b_i = 0.

    Returns
    -------
    s : ndarray (...)
        The largest s; ``inf`` where no joint bounds it; NaN where no s >= 0 keeps every joint in
        its limit.
    joint : ndarray of int (...)
        0-based joint whose limit sets s; -1 where unbounded; where infeasible the joint furthest
        over its limit at the smallest feasible-looking s.
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    L = np.broadcast_to(np.asarray(limit, dtype=float), a.shape)
    zero = np.abs(b) <= tiny * L
    sb = np.sign(b)
    ab = np.where(zero, 1.0, np.abs(b))
    hi = np.where(zero, np.inf, (L - sb * a) / ab)
    lo = np.where(zero, -np.inf, (-L - sb * a) / ab)
    blocked = zero & (np.abs(a) > L)
    s = np.min(hi, axis=-1)
    joint = np.argmin(hi, axis=-1)
    low = np.maximum(np.max(lo, axis=-1), 0.0)
    eps = 1e-12 * (1.0 + np.abs(s))
    bad = (s < low - np.where(np.isfinite(s), eps, 0.0)) | np.any(blocked, axis=-1)
    if np.any(bad):
        s0 = np.where(np.isfinite(low), low, 0.0)
        over = (np.abs(a + s0[..., None] * b) - L) / L
        joint = np.where(bad, np.argmax(over, axis=-1), joint)
    joint = np.where(np.isinf(s) & ~bad, -1, joint)
    s = np.where(bad, np.nan, np.maximum(s, 0.0))
    return s, joint


def largest_force(arm, q, direction, force=None, moment=None, payload=None, g=9.81, frame="world",
                  wrench_frame="tool", links=True, world=True):
    """Largest force along ``direction`` the tool can exert at the TCP with every joint inside
    its own torque limit (the exact box-constrained answer, batched).

    With a the holding torques of everything else (the arm's weight, the payload, the fixed part
    ``force`` / ``moment`` of the wrench) and b = J_v^T d, the force s d is allowed when
    |a_i + s b_i| <= tau_max_i for each joint: a linear programme in one variable with the closed
    form of :func:`largest_along` (checked against scipy.optimize.linprog in the tests). This is
    the true largest force; the torque-weighted force ellipsoid (:func:`force_ellipsoid`) is the
    isotropic measure inscribed in that box and gives less (or equal) along any direction.

    Parameters
    ----------
    arm : workbench.kinematics.Arm
        Needs ``max_effort`` for every joint (and masses when ``links`` is true).
    q : array_like, shape (..., n)
    direction : array_like, shape (3,) or (..., 3)
        Direction of the force the tool exerts (normalised here), in ``frame``.
    force, moment : array_like, optional
        A fixed part of the tool wrench, in ``wrench_frame`` (see :func:`holding_parts`).
    payload : Payload, optional
    g : float or (3,) array_like
    frame : {"world", "tool"}
        Frame of ``direction`` (default the world / cell frame).
    wrench_frame : {"tool", "world"}
        Frame of ``force`` and ``moment``.
    links, world : bool
        As in :func:`holding_parts`.

    Returns
    -------
    force : ndarray (...)
        N; ``inf`` where no joint bounds it, NaN where even zero force breaks a limit and no
        force along ``direction`` brings every joint back inside.
    joint : ndarray of int (...)
        0-based limiting joint (-1 where unbounded).
    """
    limit = _effort_limits(arm, "the largest force")
    Q = np.asarray(q, dtype=float)
    d = _vec3(direction, "direction")
    nrm = np.linalg.norm(d, axis=-1, keepdims=True)
    if np.any(nrm == 0):
        raise WorkbenchError("direction: expected a non-zero direction, got a zero vector")
    d = _to_rows_frame(arm, Q, d / nrm, frame, world)
    a = holding_parts(arm, Q, force, moment, payload, g, wrench_frame, links, world)["total"]
    J = arm.jacobian(Q, frame="tcp", world=world)
    b = np.einsum("...ij,...i->...j", J[..., :3, :], d)
    return largest_along(a, b, limit)


def largest_payload(arm, q, com=(0.0, 0.0, 0.0), force=None, moment=None, g=9.81, frame="tool", links=True,
                    world=True):
    """Largest payload mass (kg) held with its centre of mass at ``com`` (offset from the TCP, tool
    frame, m) with every joint inside its torque limit, together with the tool wrench
    ``force`` / ``moment`` (in ``frame``) and the arm's own weight.

    One kilogram at ``com`` costs b = -J_{v,com}^T g; the answer is the closed form of
    :func:`largest_along` (``inf`` where no joint carries the payload, NaN where the arm is over a
    limit already and no payload helps). Returns (mass (...), limiting joint (...)).
    """
    limit = _effort_limits(arm, "the largest payload")
    Q = np.asarray(q, dtype=float)
    gv = _g_vector(g)
    c = Payload(0.0, com).com
    a = holding_parts(arm, Q, force, moment, None, g, frame, links, world)["total"]
    if not world:
        gv = arm.model.mount[:3, :3].T @ gv
    Jc = arm.jacobian(Q, frame="tcp", point=c, world=world)
    b = -np.einsum("...ij,i->...j", Jc[..., :3, :], gv)
    return largest_along(a, b, limit)


def bench_largest_force(quick: bool = False) -> dict:
    """The batched largest force along a direction (demo_s6, gravity and a 5 kg payload with an
    offset) against a per-pose ``scipy.optimize.linprog`` loop on the same torques.

    The engine's time includes everything (holding torques, Jacobians, the closed-form solve); the
    reference gets the torques a and b precomputed and times only the LP per pose. Bar (issue 10):
    at least 100x.
    """
    import time

    from scipy.optimize import linprog

    from .benchutil import best_time, demo_arm_path
    from .kinematics import load_arm

    arm = load_arm(demo_arm_path())
    rng = np.random.default_rng(5)
    N = 20_000 if quick else 100_000
    Q = arm.random_q(N, rng)
    d = rng.normal(size=(N, 3))
    pay = Payload(5.0, [0.0, 0.0, 0.1])
    largest_force(arm, Q[:8], d[:8], payload=pay)  # compile / load kernels outside the timing
    t_engine, (f, j) = best_time(lambda: largest_force(arm, Q, d, payload=pay), repeat=2 if quick else 3)
    K = 100 if quick else 300
    a = holding_torques(arm, Q[:K], payload=pay)
    J = arm.jacobian(Q[:K], world=True)
    dn = d[:K] / np.linalg.norm(d[:K], axis=1, keepdims=True)
    b = np.einsum("kij,ki->kj", J[:, :3, :], dn)
    L = arm.model.max_effort
    ref = np.empty(K)
    t0 = time.perf_counter()
    for k in range(K):
        r = linprog([-1.0], A_ub=np.concatenate([b[k], -b[k]])[:, None], b_ub=np.concatenate([L - a[k], L + a[k]]),
                    bounds=[(0, None)], method="highs")
        ref[k] = r.x[0] if r.status == 0 else (np.nan if r.status == 2 else np.inf)
    t_ref = time.perf_counter() - t0
    rate, ref_rate = N / t_engine, K / t_ref
    both = np.isfinite(ref) & np.isfinite(f[:K])
    err = float(np.max(np.abs(f[:K][both] - ref[both]) / np.maximum(1.0, ref[both]))) if both.any() else 0.0
    ratio = rate / ref_rate
    return {"name": "largest force",
            "metrics": {"poses": N, "engine_poses_per_s": rate, "linprog_poses_per_s": ref_rate,
                        "max_relative_difference": err,
                        "same_infeasible": bool(np.array_equal(np.isnan(ref), np.isnan(f[:K])))},
            "ratios": {"batched_vs_linprog_loop": ratio},
            "bars": {"largest_force_vs_linprog_loop>=100": [ratio, 100.0, bool(ratio >= 100)]},
            "notes": ["demo_s6, random in-limit poses and directions, 5 kg payload 0.1 m ahead of the TCP; "
                      "the engine time includes the holding torques and Jacobians, the linprog loop only the LP"]}



class _CallableModule(types.ModuleType):
    """``from workbench import measures`` gives this module; calling it calls :func:`measures`
    (DESIGN §6: ``m = measures(J, rows="translation")``)."""

    def __call__(self, J, rows="full", length=1.0):
        return measures(J, rows=rows, length=length)


sys.modules[__name__].__class__ = _CallableModule
