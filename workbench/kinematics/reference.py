"""Plain batched-numpy kinematics and a central-difference Jacobian.

These are the *references*: simple, obviously-right code used by tests and by ``workbench bench``
to measure the compiled kernels against. They follow the chain convention of
:mod:`workbench.arm.model`.
"""
from __future__ import annotations

import numpy as np

from ..arm.transforms import axis_angle_matrix


def _motion(axis, kind, q):
    """(..., 4, 4) joint motion for joint values q (...)."""
    q = np.asarray(q, dtype=float)
    M = np.zeros(q.shape + (4, 4))
    M[..., 3, 3] = 1.0
    if kind == 0:
        M[..., :3, :3] = axis_angle_matrix(axis, q)
    else:
        M[..., 0, 0] = M[..., 1, 1] = M[..., 2, 2] = 1.0
        M[..., :3, 3] = np.asarray(axis)[None, :] * q[..., None] if q.ndim else np.asarray(axis) * q
    return M


def frames_numpy(model, q):
    """All joint frames (..., n, 4, 4) in the arm base frame, by an np.matmul chain."""
    q = np.asarray(q, dtype=float)
    T = np.broadcast_to(np.eye(4), q.shape[:-1] + (4, 4))
    out = []
    for j in range(model.n):
        T = T @ model.origins[j] @ _motion(model.axes[j], model.kinds[j], q[..., j])
        out.append(T)
    return np.stack(out, axis=-3)


def fk_numpy(model, q):
    """TCP pose (..., 4, 4) in the arm base frame."""
    return frames_numpy(model, q)[..., -1, :, :] @ model.tcp_offset


def jacobian_numpy(model, q):
    """Geometric TCP Jacobian (..., 6, n) in the base frame, plain numpy."""
    q = np.asarray(q, dtype=float)
    F = frames_numpy(model, q)
    p = (F[..., -1, :, :] @ model.tcp_offset)[..., :3, 3]
    J = np.zeros(q.shape[:-1] + (6, model.n))
    T = np.broadcast_to(np.eye(4), q.shape[:-1] + (4, 4))
    for j in range(model.n):
        G = T @ model.origins[j]  # joint frame before its motion
        z = G[..., :3, :3] @ model.axes[j]
        if model.kinds[j] == 0:
            J[..., :3, j] = np.cross(z, p - G[..., :3, 3])
            J[..., 3:, j] = z
        else:
            J[..., :3, j] = z
        T = F[..., j, :, :]
    return J


def numeric_jacobian(fk, q, h=1e-6):
    """Central-difference geometric Jacobian (..., 6, n) of a pose function ``fk(q) -> (..., 4, 4)``.

    Linear rows: (p(q + h e_j) - p(q - h e_j)) / 2h. Angular rows: the axial vector of
    (R(q + h e_j) - R(q - h e_j)) / 2h @ R(q)^T. Truncation error O(h^2).
    """
    q = np.asarray(q, dtype=float)
    n = q.shape[-1]
    R0 = fk(q)[..., :3, :3]
    J = np.zeros(q.shape[:-1] + (6, n))
    for j in range(n):
        dq = np.zeros(n)
        dq[j] = h
        Tp, Tm = fk(q + dq), fk(q - dq)
        J[..., :3, j] = (Tp[..., :3, 3] - Tm[..., :3, 3]) / (2 * h)
        W = (Tp[..., :3, :3] - Tm[..., :3, :3]) / (2 * h) @ np.swapaxes(R0, -1, -2)
        J[..., 3, j] = 0.5 * (W[..., 2, 1] - W[..., 1, 2])
        J[..., 4, j] = 0.5 * (W[..., 0, 2] - W[..., 2, 0])
        J[..., 5, j] = 0.5 * (W[..., 1, 0] - W[..., 0, 1])
    return J


def sv_numpy(J, rows=(0, 1, 2, 3, 4, 5), scale=None):
    """Singular values via np.linalg.svd of the selected (scaled) rows, zero-padded to len(rows)."""
    A = np.asarray(J)[..., list(rows), :]
    if scale is not None:
        A = A * np.asarray(scale)[:, None]
    s = np.linalg.svd(A, compute_uv=False)
    m = len(rows)
    if s.shape[-1] < m:
        s = np.concatenate([s, np.zeros(s.shape[:-1] + (m - s.shape[-1],))], axis=-1)
    return s
