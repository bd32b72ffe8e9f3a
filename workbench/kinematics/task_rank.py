"""Whether an arm can serve a choice of task rows at *any* pose (its structural rank).

A Jacobian that loses rank at one pose may be at a singularity (move the arm and the rank comes
back) or may lack the rank everywhere: a planar arm mounted on a wall moves in a vertical plane, so
the world rows [vx, vy, wz] are out of its reach at every pose. The second case is not a
singularity and needs another choice of rows, not another pose. :func:`generic_rank` tells them
apart from the rank over random poses inside the joint limits (the rank of an analytic matrix
function is the same almost everywhere, so a few random poses find the generic rank).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .rows import ROW_NAMES, parse_rows

__all__ = ["RowRank", "generic_rank", "SAMPLES", "RANK_TOL"]

#: random poses tried (a rank found at one of them is the generic rank)
SAMPLES = 32
#: singular values below this fraction of the largest count as zero
RANK_TOL = 1e-9


@dataclass(frozen=True)
class RowRank:
    """What the rows ``rows`` can ever get from the arm.

    ``rank``: the largest rank of the selected rows over the poses tried; ``full``: the rank a
    non-deficient choice would have (min(rows, joints)); ``dead_rows``: rows that are zero at every
    pose tried (the arm never moves along / about them in this frame); ``live_rows``: the others.
    """

    rows: tuple
    rank: int
    full: int
    dead_rows: tuple
    live_rows: tuple

    @property
    def structural(self) -> bool:
        """True when no pose gives the selected rows their full rank (not a singularity)."""
        return self.rank < self.full

    def names(self, rows) -> str:
        return ", ".join(ROW_NAMES[r] for r in rows)


def _random_poses(arm, count: int, seed: int) -> np.ndarray:
    m = arm.model
    lo = np.where(np.isfinite(m.lower), m.lower, -np.pi)
    hi = np.where(np.isfinite(m.upper), m.upper, np.pi)
    rng = np.random.default_rng(seed)
    return lo + (hi - lo) * rng.random((count, m.n))


def generic_rank(arm, rows, frame: str = "tcp", world: bool = False, length: float = 1.0,
                 samples: int = SAMPLES, seed: int = 0) -> RowRank:
    """The generic rank of the selected task rows of ``arm`` (see the module docstring).

    Parameters
    ----------
    arm : workbench.kinematics.Arm
    rows : str or sequence
        Task rows (:func:`workbench.kinematics.rows.parse_rows`).
    frame : str
        The frame whose Jacobian is taken.
    world : bool
        Rows in the cell (world) frame, through the mount, instead of the base frame.
    length : float
        Characteristic length (m) dividing the translational rows (it does not change the rank,
        only the tolerance's scale).
    samples, seed : int
        Random poses inside the joint limits (unlimited joints: one turn).
    """
    r = parse_rows(rows)
    Q = _random_poses(arm, int(samples), int(seed))
    J = np.asarray(arm.jacobian(Q, frame=frame, world=world), dtype=float)  # (S, 6, n)
    scale = np.ones(6)
    scale[:3] = 1.0 / float(length)
    J = J * scale[:, None]
    size = np.max(np.abs(J), axis=(0, 2))  # (6,) largest entry of each row over the poses
    top = float(size.max()) if size.size else 0.0
    dead = tuple(i for i in r if size[i] <= RANK_TOL * max(top, 1e-300))
    live = tuple(i for i in r if i not in dead)
    sv = np.linalg.svd(J[:, list(r), :], compute_uv=False)  # (S, min(m, n))
    rank = int(np.max(np.sum(sv > RANK_TOL * np.maximum(sv[:, :1], 1e-300), axis=1))) if sv.size else 0
    return RowRank(rows=r, rank=rank, full=min(len(r), arm.n), dead_rows=dead, live_rows=live)
