"""How each study kind is shown: one table of per-kind presenters (plain Python, no Qt).

The window (``workbench.gui.runs``) and the report (``workbench.report``) look a kind's
presenter up here instead of testing kind names; each names, per part, which of the layer's
ways of showing results it takes:

``view``
    the window's result view: ``"grid"`` (the plan's axes give a map, or a series for one axis),
    ``"floor"`` (a floor map over base x, y holding the best candidate over the other axes),
    ``"path"`` (a series along the distance travelled on the paths).
``report``
    the report's document: ``"mount"``, ``"path"``, ``"load"`` or ``"generic"``.
``compare``
    the comparison's maps: ``"floor"`` (rank values on one scale, recommended mounts starred),
    ``"path"`` (inverse condition along each path), ``"grid"`` (the first measures side by side).
``points_csv``
    the report writes its per-point table as a CSV beside it.
``path_drawings``
    the report's drawings show the sampled paths.

A kind added with :func:`workbench.studies.base.register_kind` and no presenter gets
:class:`Presenter`'s defaults (grid view, generic report, grid comparison); register one with
:func:`register_presenter` to choose otherwise.
"""
from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Presenter", "PRESENTERS", "presenter", "register_presenter"]


@dataclass(frozen=True)
class Presenter:
    kind: str
    view: str = "grid"
    report: str = "generic"
    compare: str = "grid"
    points_csv: bool = False
    path_drawings: bool = False


PRESENTERS: dict[str, Presenter] = {p.kind: p for p in (
    Presenter("joint_sweep"),
    Presenter("reach_slice"),
    Presenter("mount_search", view="floor", report="mount", compare="floor", points_csv=True),
    Presenter("path_audit", view="path", report="path", compare="path", path_drawings=True),
    Presenter("load_map", report="load"),
)}


def presenter(kind: str) -> Presenter:
    """The presenter of study kind ``kind`` (the defaults for a kind without one)."""
    return PRESENTERS.get(kind) or Presenter(kind)


def register_presenter(p: Presenter) -> None:
    PRESENTERS[p.kind] = p
