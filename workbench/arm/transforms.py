"""Small homogeneous-transform helpers (SI units, radians), batched where it matters.

All functions accept scalars or arrays and broadcast; 4x4 results are shaped (..., 4, 4).
"""
from __future__ import annotations

import numpy as np

__all__ = [
    "rot_x", "rot_y", "rot_z", "translation", "rpy_to_matrix", "matrix_to_rpy",
    "make_transform", "inverse_transform", "axis_angle_matrix", "is_rotation",
]


def _eye(shape):
    T = np.zeros(shape + (4, 4))
    T[..., 0, 0] = T[..., 1, 1] = T[..., 2, 2] = T[..., 3, 3] = 1.0
    return T


def rot_x(a):
    """Homogeneous rotation about x by ``a`` rad -> (..., 4, 4)."""
    a = np.asarray(a, dtype=float)
    T = _eye(a.shape)
    c, s = np.cos(a), np.sin(a)
    T[..., 1, 1] = c; T[..., 1, 2] = -s
    T[..., 2, 1] = s; T[..., 2, 2] = c
    return T


def rot_y(a):
    """Homogeneous rotation about y by ``a`` rad -> (..., 4, 4)."""
    a = np.asarray(a, dtype=float)
    T = _eye(a.shape)
    c, s = np.cos(a), np.sin(a)
    T[..., 0, 0] = c; T[..., 0, 2] = s
    T[..., 2, 0] = -s; T[..., 2, 2] = c
    return T


def rot_z(a):
    """Homogeneous rotation about z by ``a`` rad -> (..., 4, 4)."""
    a = np.asarray(a, dtype=float)
    T = _eye(a.shape)
    c, s = np.cos(a), np.sin(a)
    T[..., 0, 0] = c; T[..., 0, 1] = -s
    T[..., 1, 0] = s; T[..., 1, 1] = c
    return T


def translation(x=0.0, y=0.0, z=0.0):
    """Homogeneous translation by (x, y, z) metres -> (..., 4, 4)."""
    x, y, z = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (x, y, z)))
    T = _eye(x.shape)
    T[..., 0, 3] = x; T[..., 1, 3] = y; T[..., 2, 3] = z
    return T


def rpy_to_matrix(rpy):
    """Roll-pitch-yaw (rad, fixed axes x then y then z; R = Rz(yaw) Ry(pitch) Rx(roll)) -> (..., 3, 3).

    This is the URDF convention (common practice).
    """
    rpy = np.asarray(rpy, dtype=float)
    return (rot_z(rpy[..., 2]) @ rot_y(rpy[..., 1]) @ rot_x(rpy[..., 0]))[..., :3, :3]


def matrix_to_rpy(R):
    """Inverse of :func:`rpy_to_matrix` for (..., 3, 3) rotations -> (..., 3) rad."""
    R = np.asarray(R, dtype=float)
    pitch = np.arcsin(np.clip(-R[..., 2, 0], -1.0, 1.0))
    cp = np.cos(pitch)
    gimbal = np.abs(cp) < 1e-9
    roll = np.where(gimbal, 0.0, np.arctan2(R[..., 2, 1], R[..., 2, 2]))
    yaw = np.where(gimbal, np.arctan2(-R[..., 0, 1], R[..., 1, 1]), np.arctan2(R[..., 1, 0], R[..., 0, 0]))
    return np.stack([roll, pitch, yaw], axis=-1)


def make_transform(xyz=(0.0, 0.0, 0.0), rpy=(0.0, 0.0, 0.0)):
    """Transform from a position (m) and roll-pitch-yaw (rad) -> (..., 4, 4)."""
    xyz = np.asarray(xyz, dtype=float)
    rpy = np.asarray(rpy, dtype=float)
    shape = np.broadcast_shapes(xyz.shape[:-1], rpy.shape[:-1])
    T = _eye(shape)
    T[..., :3, :3] = rpy_to_matrix(rpy)
    T[..., :3, 3] = xyz
    return T


def inverse_transform(T):
    """Inverse of rigid transforms (..., 4, 4) without a general matrix inverse."""
    T = np.asarray(T, dtype=float)
    Ti = np.zeros_like(T)
    R = T[..., :3, :3]
    Rt = np.swapaxes(R, -1, -2)
    Ti[..., :3, :3] = Rt
    Ti[..., :3, 3] = -np.einsum("...ij,...j->...i", Rt, T[..., :3, 3])
    Ti[..., 3, 3] = 1.0
    return Ti


def axis_angle_matrix(axis, angle):
    """Rotation (..., 3, 3) about unit ``axis`` (3,) by ``angle`` (...) rad (Rodrigues' formula)."""
    a = np.asarray(axis, dtype=float)
    th = np.asarray(angle, dtype=float)[..., None, None]
    K = np.array([[0, -a[2], a[1]], [a[2], 0, -a[0]], [-a[1], a[0], 0]])
    return np.eye(3) + np.sin(th) * K + (1 - np.cos(th)) * (K @ K)


def is_rotation(R, tol=1e-6):
    """True where (..., 3, 3) is orthonormal with determinant +1 within ``tol``."""
    R = np.asarray(R, dtype=float)
    err = np.abs(np.swapaxes(R, -1, -2) @ R - np.eye(3)).max(axis=(-1, -2))
    return (err < tol) & (np.abs(np.linalg.det(R) - 1.0) < tol)
