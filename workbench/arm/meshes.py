"""Meshes (STL, binary or ASCII) turned into conservative collision shapes.

A mesh is read with trimesh, its vertices are scaled and placed in the link frame, and its convex
hull (scipy's Qhull, over every vertex) is enclosed by two convex shapes that each contain every
hull vertex, hence the whole hull and the mesh:

* an oriented box: the smallest-volume one among the boxes aligned with the principal axes of the
  hull vertices and with the link frame's axes;
* a capsule along the box's longest axis: radius = the largest distance of a vertex from that
  axis, end points pulled in as far as every vertex allows.

The kernel checks their intersection (a lower bound of the distance: never larger than the true
distance to the hull). ``volume_ratio`` is min(box, capsule) volume / hull volume, an upper bound
of how much bigger the checked shape is than the hull.

Limits (bounded time and memory): files up to ``MAX_MESH_BYTES``, meshes up to
``MAX_TRIANGLES`` triangles (a mesh of one million triangles is read and enclosed in a few
seconds); larger ones are refused with one line.
"""
from __future__ import annotations

import math
import os

import numpy as np

from .model import ArmError
from .shapes import Shape

__all__ = ["mesh_shape", "enclose_points", "MAX_TRIANGLES", "MAX_MESH_BYTES", "MeshError"]

MAX_TRIANGLES = 2_000_000
MAX_MESH_BYTES = 256 * 1024 * 1024
_EPS = 1e-7              # m added to every enclosure (rounding of the transforms)


class MeshError(ArmError):
    """A mesh file that cannot be used (missing, broken, empty, too large)."""


def _stl_triangles(path: str, where: str) -> int | None:
    """Triangle count from a binary STL header (None for ASCII)."""
    size = os.path.getsize(path)
    with open(path, "rb") as fh:
        head = fh.read(84)
    if len(head) < 84:
        return None
    count = int.from_bytes(head[80:84], "little")
    if 84 + 50 * count == size:
        return count
    if head[:5].lower() == b"solid":
        return None
    raise MeshError(f"{where}: {path}: broken binary STL (header says {count} triangles, which needs "
                    f"{84 + 50 * count} bytes; the file has {size})")


def _load_vertices(path: str, where: str) -> np.ndarray:
    if not os.path.exists(path):
        raise MeshError(f"{where}: mesh file {path} does not exist")
    if os.path.isdir(path):
        raise MeshError(f"{where}: mesh file {path} is a directory")
    ext = os.path.splitext(path)[1].lower()
    if ext != ".stl":
        raise MeshError(f"{where}: mesh file {path}: only STL meshes (.stl, binary or ASCII) are read, got "
                        f"{ext or 'no extension'!r}")
    size = os.path.getsize(path)
    if size > MAX_MESH_BYTES:
        raise MeshError(f"{where}: mesh file {path} is {size / 2**20:.0f} MB; at most {MAX_MESH_BYTES // 2**20} MB "
                        f"(simplify the mesh)")
    count = _stl_triangles(path, where)
    if count is not None and count > MAX_TRIANGLES:
        raise MeshError(f"{where}: mesh file {path} has {count} triangles; at most {MAX_TRIANGLES} "
                        f"(simplify the mesh)")
    import trimesh

    try:
        m = trimesh.load(path, file_type="stl", force="mesh", process=False)
    except Exception as exc:  # trimesh raises many kinds on broken files
        msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise MeshError(f"{where}: mesh file {path} cannot be read as STL ({msg[:80]})") from None
    v = np.asarray(getattr(m, "vertices", np.zeros((0, 3))), float).reshape(-1, 3)
    faces = np.asarray(getattr(m, "faces", np.zeros((0, 3))))
    if len(faces) > MAX_TRIANGLES:
        raise MeshError(f"{where}: mesh file {path} has {len(faces)} triangles; at most {MAX_TRIANGLES} "
                        f"(simplify the mesh)")
    if len(v) == 0 or len(faces) == 0:
        raise MeshError(f"{where}: mesh file {path} holds no triangles (empty or broken STL)")
    if not np.all(np.isfinite(v)):
        raise MeshError(f"{where}: mesh file {path} has vertices that are not finite numbers (NaN or inf)")
    return v


def _hull(v: np.ndarray):
    """(hull vertices, hull volume or 0 when flat)."""
    from scipy.spatial import ConvexHull, QhullError

    if len(v) < 4:
        return v, 0.0
    try:
        h = ConvexHull(v)
        return v[h.vertices], float(h.volume)
    except (QhullError, ValueError):
        return v, 0.0  # flat or degenerate: enclose all vertices


def enclose_points(v: np.ndarray):
    """Box (pose (4, 4), full sizes (3,)) and capsule (a, b, radius) each containing every point of
    ``v`` (k, 3); returns (pose, size, a, b, radius, box_volume, capsule_volume)."""
    v = np.asarray(v, float)
    c0 = v.mean(axis=0)
    cands = [np.eye(3)]
    if len(v) >= 3:
        _, _, Vt = np.linalg.svd(v - c0, full_matrices=False)
        R = Vt.T.copy()
        if np.linalg.det(R) < 0:
            R[:, 2] *= -1
        cands.append(R)
    best = None
    for R in cands:
        loc = v @ R
        lo, hi = loc.min(axis=0), loc.max(axis=0)
        size = np.maximum(hi - lo, 1e-6)
        vol = float(np.prod(size))
        if best is None or vol < best[0]:
            best = (vol, R, (lo + hi) / 2, size)
    vol_box, R, mid, size = best
    pad = _EPS + 1e-9 * float(size.max())
    size = size + 2 * pad
    pose = np.eye(4)
    pose[:3, :3] = R
    pose[:3, 3] = R @ mid
    # capsule along the longest box axis through the box centre
    k = int(np.argmax(size))
    u = R[:, k]
    centre = pose[:3, 3]
    rel = v - centre
    t = rel @ u
    rho = np.linalg.norm(rel - t[:, None] * u, axis=1)
    rad = float(rho.max()) + pad
    room = np.sqrt(np.maximum(rad * rad - rho * rho, 0.0))
    s0 = float(np.min(t + room))
    s1 = float(np.max(t - room))
    if s0 > s1:  # a short, fat shape: a sphere about the mid point
        sm = (s0 + s1) / 2
        a = b = centre + sm * u
        rad = float(np.linalg.norm(v - a, axis=1).max()) + pad
    else:
        a, b = centre + s0 * u, centre + s1 * u
    vol_cap = math.pi * rad ** 2 * float(np.linalg.norm(b - a)) + 4 / 3 * math.pi * rad ** 3
    return pose, size, a, b, rad, vol_box, vol_cap


def mesh_shape(path: str, scale, origin: np.ndarray, where: str, file_name: str | None = None) -> Shape:
    """Read an STL mesh and return its conservative enclosure as a ``mesh`` :class:`Shape`.

    Parameters
    ----------
    path : str
        The resolved mesh file.
    scale : (3,) array_like
        Scale of the mesh's coordinates to metres (the file's scale times its length unit).
    origin : (4, 4) ndarray
        Mesh frame -> link frame.
    where : str
        Prefix of error messages (file, element).
    """
    v = _load_vertices(path, where)
    scale = np.asarray(scale, float).reshape(3)
    v = v * scale
    origin = np.asarray(origin, float)
    v = v @ origin[:3, :3].T + origin[:3, 3]
    hv, hull_vol = _hull(v)
    pose, size, a, b, rad, vb, vc = enclose_points(hv)
    ratio = min(vb, vc) / hull_vol if hull_vol > 0 else math.inf
    return Shape("mesh", a=np.asarray(a, float), b=np.asarray(b, float), radius=rad, pose=pose, size=size,
                 mesh=os.path.abspath(path), volume_ratio=ratio, name=file_name or os.path.basename(path),
                 mesh_scale=tuple(float(x) for x in scale), mesh_origin=origin.copy())
