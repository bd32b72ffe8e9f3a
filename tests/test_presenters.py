"""The one table of per-kind presenters (workbench/presenters.py): every registered kind has one,
each names ways of showing that the window and the report implement, and a kind registered at run
time gets the defaults in the report without a change anywhere else."""
from pathlib import Path

import numpy as np
import pytest

from workbench.presenters import PRESENTERS, Presenter, presenter
from workbench.studies.base import KINDS, kind_names, register_kind
from workbench.studies.joint_sweep import JointSweep

ROOT = Path(__file__).resolve().parents[1]
ARM = (ROOT / "arms" / "demo_planar2r.toml").as_posix()

VIEWS = {"grid", "floor", "path"}          # the views workbench/gui/runs.py builds
COMPARES = {"grid", "floor", "path"}       # the comparison maps of workbench/report/content.py


def test_every_registered_kind_has_a_presenter_the_layers_implement():
    from workbench.report.content import BUILD

    names = kind_names()
    assert set(names) <= set(PRESENTERS), sorted(set(names) - set(PRESENTERS))
    for name in names:
        p = presenter(name)
        assert p.kind == name and p.view in VIEWS and p.compare in COMPARES and p.report in BUILD
    # the floor map and the per-point CSV belong to the mount search, the path series to the audit
    assert presenter("mount_search").view == "floor" and presenter("mount_search").points_csv
    assert presenter("path_audit").view == "path" and presenter("path_audit").path_drawings
    assert not any(presenter(n).points_csv for n in names if n != "mount_search")


class RenamedSweep(JointSweep):
    """A kind registered at run time: the joint sweep under another name."""

    name = "renamed_sweep"
    title = "Renamed sweep"


STUDY = f"""[study]
name = "renamed"
kind = "renamed_sweep"
arm = "{ARM}"
[settings]
mode = "grid"
joints = ["th1", "th2"]
ranges = [[0, 90], [-90, 90]]
steps = [3, 5]
rows = "vx,vy"
"""


@pytest.fixture
def renamed(tmp_path):
    register_kind(RenamedSweep.name, RenamedSweep)
    (tmp_path / "s.toml").write_text(STUDY)
    try:
        yield tmp_path / "s.toml"
    finally:
        KINDS.pop(RenamedSweep.name, None)


def test_a_new_kind_gets_the_default_presenter_and_a_report(renamed, tmp_path):
    from workbench.report import build_report
    from workbench.runner import run_study

    assert RenamedSweep.name not in PRESENTERS
    assert presenter(RenamedSweep.name) == Presenter(RenamedSweep.name)
    res = run_study(str(renamed), out=str(tmp_path / "r.h5"), executor="inprocess")
    # planar 2R, unit links, rows vx, vy: w = |sin th2| (Yoshikawa, "Manipulability of robotic
    # mechanisms", 1985, the two-link example)
    w = np.asarray(res.arrays["manipulability"]).reshape(3, 5)
    assert np.allclose(w, np.tile(np.abs(np.sin(np.radians(np.linspace(-90, 90, 5)))), (3, 1)), atol=1e-12)
    doc = build_report(res, "a4", None, None)
    assert doc.subtitle == RenamedSweep.name and doc.body and "renamed" in doc.title
