"""What the linked result views show: one result as flat per-cell arrays (pure numpy, no Qt).

A result is either a 2D grid map (``shape == (ny, nx)``, flat cell ``c = j * nx + i`` for x index
``i`` and y index ``j``) or a 1D series (``shape == (N,)``, e.g. samples along a path, ranked
mount candidates). Arrays are filled progressively as chunks finish; unfinished cells are NaN and
``done`` is False there.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["ResultData"]


@dataclass
class ResultData:
    """Per-cell arrays of one result.

    Parameters
    ----------
    kind : str
        Study kind ("joint sweep", "reach slice", "mount search", "path audit", "load map").
    shape : tuple
        (ny, nx) for a map, (N,) for a series.
    x, y : ndarray
        Cell-centre coordinates along the axes in display units (degrees, metres); ``y`` is
        None for a series.
    x_label, y_label : str
        Axis names with units.
    measures : dict of str -> (N,) float arrays
        Labels, units, log scale and which way is better come from
        :mod:`workbench.quantities`; ``units`` holds the unit a field was stored with where it
        depends on the study (a singular value's unit follows the task rows).
    q : (N, n) float array or None
        Joint values (rad / m) behind each cell, NaN where none.
    """

    kind: str
    shape: tuple
    x: np.ndarray
    y: np.ndarray | None
    x_label: str
    y_label: str = ""
    measures: dict = field(default_factory=dict)
    q: np.ndarray | None = None
    joint_names: tuple = ()
    joint_kinds: tuple = ()
    title: str = ""
    threshold_measure: str = "inverse_condition"
    extras: dict = field(default_factory=dict)
    source_path: str | None = None
    done: np.ndarray = None
    pose_fn: object = None          # fn(flat indices (k,)) -> (k, n) joint values, when q is None
    tcp: np.ndarray | None = None   # (N, 3) TCP points of sample studies (m), or None
    mount_fn: object = None         # fn(flat cell) -> (4, 4) arm mount for that cell, or None
    units: dict = field(default_factory=dict)   # measure -> unit as stored (the plan's fields)

    def __post_init__(self):
        if self.done is None:
            self.done = np.zeros(self.size, dtype=bool)

    @classmethod
    def empty(cls, kind, shape, x, y, x_label, y_label, measure_names, n_joints=0, **kw):
        size = int(np.prod(shape))
        ms = {m: np.full(size, np.nan) for m in measure_names}
        q = np.full((size, n_joints), np.nan) if n_joints else None
        return cls(kind=kind, shape=tuple(shape), x=np.asarray(x, float),
                   y=None if y is None else np.asarray(y, float), x_label=x_label, y_label=y_label,
                   measures=ms, q=q, **kw)

    @property
    def size(self) -> int:
        return int(np.prod(self.shape))

    @property
    def is_map(self) -> bool:
        return len(self.shape) == 2

    @property
    def measure_names(self) -> list:
        return list(self.measures)

    @property
    def fraction_done(self) -> float:
        return float(np.count_nonzero(self.done)) / max(self.size, 1)

    def fill(self, cells, measures: dict, q=None) -> None:
        """Store one finished chunk: ``cells`` a slice or int array of flat cell indices."""
        for k, v in measures.items():
            if k in self.measures:
                self.measures[k][cells] = np.asarray(v, float).reshape(-1)
        if q is not None and self.q is not None:
            self.q[cells] = np.asarray(q, float).reshape(-1, self.q.shape[1])
        self.done[cells] = True

    @property
    def has_poses(self) -> bool:
        return self.q is not None or self.pose_fn is not None

    def poses(self, cells) -> np.ndarray | None:
        """Joint values (k, n) (rad / m) behind the flat cells ``cells`` (k,), or None."""
        cells = np.asarray(cells, dtype=np.int64).reshape(-1)
        if self.q is not None:
            return self.q[cells]
        if self.pose_fn is not None:
            return np.asarray(self.pose_fn(cells), dtype=float).reshape(cells.size, -1)
        return None

    def grid(self, name) -> np.ndarray:
        """The measure ``name`` as a (ny, nx) array (a view) for maps."""
        return self.measures[name].reshape(self.shape)

    def cell_xy(self, c):
        """Axis coordinates (x, y) of flat cell ``c`` (y is None for series)."""
        if self.is_map:
            j, i = divmod(int(c), self.shape[1])
            return float(self.x[i]), float(self.y[j])
        return float(self.x[int(c)]), None
