"""Task-row selection: which rows of the 6 x n Jacobian [vx vy vz wx wy wz] a measure looks at."""
from __future__ import annotations

import numpy as np

from ..errors import WorkbenchError

ROW_NAMES = ("vx", "vy", "vz", "wx", "wy", "wz")
NAMED_ROWS = {
    "full": (0, 1, 2, 3, 4, 5),
    "translation": (0, 1, 2),
    "rotation": (3, 4, 5),
    "planar": (0, 1, 5),
}


class RowsError(WorkbenchError):
    """A bad task-row selection or characteristic length."""


def parse_rows(rows) -> tuple[int, ...]:
    """Row indices from a name ("full", "translation", "rotation", "planar"), a comma list
    ("vx,vy,wz") or a sequence of names or 0-based ints."""
    if isinstance(rows, str):
        key = rows.strip().lower()
        if key in NAMED_ROWS:
            return NAMED_ROWS[key]
        items = [s.strip() for s in key.split(",") if s.strip()]
    else:
        try:
            items = list(rows)
        except TypeError:
            raise RowsError(f"rows: expected a name (full, translation, rotation, planar) or a list of "
                            f"row names {ROW_NAMES}, got {rows!r}") from None
    out = []
    for it in items:
        if isinstance(it, (int, np.integer)) and not isinstance(it, bool):
            if not 0 <= int(it) < 6:
                raise RowsError(f"rows: index {it} is out of range 0..5")
            out.append(int(it))
        elif isinstance(it, str) and it.strip().lower() in ROW_NAMES:
            out.append(ROW_NAMES.index(it.strip().lower()))
        else:
            raise RowsError(f"rows: unknown row {it!r}; expected one of {', '.join(ROW_NAMES)} or a name "
                            f"full, translation, rotation, planar")
    if not out:
        raise RowsError("rows: the row list is empty")
    if len(set(out)) != len(out):
        raise RowsError(f"rows: repeated row in {rows!r}")
    return tuple(out)


def row_scale(rows: tuple[int, ...], length: float | None) -> np.ndarray:
    """Per-row scale: translational rows divided by the characteristic length ``length`` (m)
    when the selection mixes translation and rotation rows (Tandirci, Angeles & Ranjbaran 1992);
    ones otherwise."""
    rows = tuple(rows)
    mixed = any(r < 3 for r in rows) and any(r >= 3 for r in rows)
    scale = np.ones(len(rows))
    if mixed:
        if length is None:
            length = 1.0
        if not np.isfinite(length) or length <= 0:
            raise RowsError(f"characteristic length: expected a positive number of metres, got {length!r}")
        for a, r in enumerate(rows):
            if r < 3:
                scale[a] = 1.0 / length
    return scale
