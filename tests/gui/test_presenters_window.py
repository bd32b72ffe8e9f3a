"""The window builds a kind's result view from its presenter: a kind registered at run time (no
presenter of its own) is shown as a grid map without a change in the window's code."""
from pathlib import Path

import numpy as np

from workbench.studies.base import KINDS, register_kind
from workbench.studies.joint_sweep import JointSweep

ROOT = Path(__file__).resolve().parents[2]
ARM = (ROOT / "arms" / "demo_planar2r.toml").as_posix()


class RenamedSweep(JointSweep):
    name = "renamed_sweep_gui"
    title = "Renamed sweep"


def test_a_new_kind_is_shown_as_a_grid_map(window, tmp_path):
    from workbench.runner import run_study

    register_kind(RenamedSweep.name, RenamedSweep)
    try:
        study = tmp_path / "s.toml"
        study.write_text(f'[study]\nname = "renamed"\nkind = "{RenamedSweep.name}"\narm = "{ARM}"\n[settings]\n'
                         f'mode = "grid"\njoints = ["th1", "th2"]\nranges = [[0, 90], [-90, 90]]\nsteps = [3, 5]\n'
                         f'rows = "vx,vy"\n')
        run_study(str(study), out=str(tmp_path / "r.h5"), executor="inprocess")
        assert window.open_file(str(tmp_path / "r.h5")), window.last_error
        d = window.result
        assert d.is_map and d.shape == (3, 5)      # rows: th1 (3 steps), columns: th2 (5 steps)
        # the map holds w = |sin th2| (Yoshikawa 1985, the two-link example) row by row
        w = d.measures["manipulability"].reshape(3, 5)
        assert np.allclose(w, np.tile(np.abs(np.sin(np.radians(np.linspace(-90, 90, 5)))), (3, 1)), atol=1e-12)
        assert window.doc.session.kind.name == RenamedSweep.name
    finally:
        KINDS.pop(RenamedSweep.name, None)
