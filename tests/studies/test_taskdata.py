"""Real task data: paths from CSV files of TCP poses and joint trajectories from CSV, audited as
they are; round trips through CSV and one-line errors for bad rows."""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from workbench import load_arm
from workbench.studies.base import Chunk
from workbench.studies.cell import parse_cell_text, read_cell_file, sample_path
from workbench.studies.path_audit import PathAudit
from workbench.studies.spec import StudySpec
from workbench.studies.taskdata import (PoseCsv, TaskDataError, TrajectoryCsv, trajectory_rates, write_pose_csv,
                                        write_trajectory_csv)

ROOT = Path(__file__).resolve().parents[2]

BASE = """
[cell]
name = "csv cell"
length_unit = "m"
[requirements]
payload = 3.0
payload_com = [0, 0, 0.05]
[[point]]
name = "a"
xyz = [0.8, -0.3, 0.4]
rpy = [180, 0, 0]
[[point]]
name = "b"
xyz = [0.8, 0.3, 0.45]
rpy = [180, 0, 60]
[[point]]
name = "c"
xyz = [0.95, 0.0, 0.55]
rpy = [180, 10, 30]
"""
PATHS = """
[[path]]
name = "line"
speed = 200
through = ["a", "b"]
requirements = {time = 1.0}
[[path]]
name = "arc"
speed = 150
start = "a"
segments = [{arc = "b", via = "c"}]
"""


def audit(arm, cell, spacing=0.004):
    kind = PathAudit()
    spec = StudySpec(kind="path_audit", arm="demo", cell="cell", settings={"spacing": spacing})
    plan = kind.plan(spec, arm, cell)
    arrays = kind.compute_chunk(plan, arm, cell, Chunk(0, 0, plan.cells))
    return plan, arrays, kind.summarise(plan, arrays)


@pytest.mark.parametrize("rotation,unit", [("rpy", "mm"), ("quaternion", "m")])
def test_round_trip_of_sampled_paths_through_csv_gives_the_same_audit(tmp_path, rotation, unit):
    arm = load_arm(ROOT / "arms" / "demo_s6.toml")
    cell = parse_cell_text(BASE + PATHS, str(tmp_path / "cell.toml"))
    cols = {"rpy": ["X", "Y", "Z", "R", "P", "W"], "quaternion": ["x", "y", "z", "qw", "qx", "qy", "qz"]}[rotation]
    text = BASE
    for p in cell.paths:
        ps = sample_path(cell, p, 0.004)
        write_pose_csv(tmp_path / f"{p.name}.csv", ps.poses, PoseCsv(str(tmp_path / f"{p.name}.csv"), tuple(cols),
                                                                    rotation, unit))
        req = "\nrequirements = {time = 1.0}" if p.name == "line" else ""
        text += (f'\n[[path]]\nname = "{p.name}"\nspeed = {p.speed * 1000:g}\ncsv = "{p.name}.csv"\n'
                 f'columns = {cols!r}\nrotation = "{rotation}"\ncsv_unit = "{unit}"\norientation = "fixed"{req}\n'
                 ).replace("'", '"')
    (tmp_path / "csv_cell.toml").write_text(text)
    cell2 = read_cell_file(tmp_path / "csv_cell.toml")
    assert cell2.paths[0].csv.endswith("line.csv")
    _, a1, t1 = audit(arm, cell)
    _, a2, t2 = audit(arm, cell2)
    assert len(a1["q"]) == len(a2["q"])
    np.testing.assert_allclose(a2["xyz"], a1["xyz"], atol=1e-9)
    # chords of the arc vs its arc length: (h / R)^2 / 24 relative, far below 1e-5 here
    np.testing.assert_allclose(a2["distance"], a1["distance"], rtol=1e-5, atol=1e-9)
    np.testing.assert_allclose(a2["q"], a1["q"], atol=1e-6)
    for key in ("inverse_condition", "min_sv", "manipulability", "margin", "torque_margin"):
        np.testing.assert_allclose(a2[key], a1[key], rtol=1e-5, atol=1e-8, err_msg=key)
    # joint speeds: exact tangents vs differences of the rows (second order in the spacing)
    np.testing.assert_allclose(a2["speed_ratio"], a1["speed_ratio"], rtol=2e-3, atol=1e-6)
    np.testing.assert_array_equal(a2["flags"], a1["flags"])
    c1, c2 = t1["cycle_time"].columns, t2["cycle_time"].columns
    np.testing.assert_allclose(c2["time"], c1["time"], rtol=2e-3)
    assert list(c2["meets"]) == list(c1["meets"]) and list(c2["required"])[0] == 1.0
    assert t1["near_singular"].rows == t2["near_singular"].rows


def test_joint_trajectory_from_csv_speeds_and_accelerations_from_the_times(tmp_path):
    # q_i(t) = c_i + A_i sin(w t) sampled every 4 ms: the speeds and accelerations from the times
    # must match the derivatives A w cos(w t), -A w^2 sin(w t) (second-order differences: error
    # ~ (w dt)^2 / 6 relative inside the file), and the audit's measures equal those of the poses.
    arm = load_arm(ROOT / "arms" / "demo_s6.toml")
    m = arm.model
    t = np.arange(0, 2.0 + 1e-9, 0.004)
    w = 2.0
    c = np.array([0.1, -0.6, 0.9, 0.2, 0.7, -0.3])
    A = np.array([0.5, 0.2, 0.3, 0.8, 0.4, 1.2])
    q = c + A * np.sin(w * t[:, None])
    lay = TrajectoryCsv(str(tmp_path / "rec.csv"), "time_ms", tuple(f"J{k + 1}" for k in range(6)), "deg", "mm",
                        "ms")
    write_trajectory_csv(tmp_path / "rec.csv", t, np.degrees(q), lay)
    (tmp_path / "c.toml").write_text(BASE + """
[[trajectory]]
name = "recorded"
csv = "rec.csv"
time = "time_ms"
time_unit = "ms"
joints = ["J1", "J2", "J3", "J4", "J5", "J6"]
angle_unit = "deg"
requirements = {time = 1.5}
""")
    cell = read_cell_file(tmp_path / "c.toml")
    assert cell.trajectories[0].name == "recorded" and "1 joint trajectories" in cell.summary()
    plan, a, tables = audit(arm, cell)
    np.testing.assert_allclose(a["q"], q, atol=1e-9)
    inner = slice(1, -1)
    qd_true = A * w * np.cos(w * t[:, None])
    np.testing.assert_allclose(a["qdot"][inner], qd_true[inner], rtol=0, atol=1e-4 * np.max(np.abs(qd_true)))
    ratio = np.max(np.abs(qd_true) / m.max_speed, axis=1)
    np.testing.assert_allclose(a["speed_ratio"][inner], ratio[inner], rtol=1e-4)
    acc = np.max(np.abs(-A * w * w * np.sin(w * t[:, None])) / m.max_acceleration, axis=1)
    np.testing.assert_allclose(a["accel_ratio"][2:-2], acc[2:-2], rtol=0, atol=1e-3 * acc.max())
    from workbench.measures import pose_measures

    ref = pose_measures(arm, q)
    np.testing.assert_allclose(a["inverse_condition"], ref["inverse_condition"], rtol=1e-9)
    ct = tables["cycle_time"].columns
    assert ct["time"][0] == pytest.approx(2.0) and ct["required"][0] == 1.5
    assert str(ct["meets"][0]).startswith("no: 0.50 s over")
    qd, qdd = trajectory_rates(t, q)
    assert qd.shape == q.shape and qdd.shape == q.shape


@pytest.mark.parametrize("content,expect", [
    ("X,Y,Z\n1,2,3\n4,5,x\n", "line 3, column 'Z': expected a number, got 'x'"),
    ("X,Y\n1,2\n3,4\n", "line 1: no column 'Z'; the file's columns are 'X', 'Y'"),
    ("X,Y,Z\n1,2,3\n4,5\n", "line 3, column 'Z': missing (the row has only 2 fields)"),
    ("X,Y,Z\n1,2,3\n1,2,3\n", "line 3, column 'X': the same position as line 2"),
    ("X,Y,Z\n1,2,3\n", "1 data row; a pose path needs at least 2"),
    ("X,Y,Z\n1,2,3\n\n4,5,nan\n", "line 4, column 'Z': expected a finite number, got 'nan'"),
    ("X,Y,Z\n1,2,3\n4,5e7,3\n", "line 3, column 'Y': 5e+07 mm is more than 1000 m from the cell origin"),
])
def test_bad_pose_rows_give_one_line(tmp_path, content, expect):
    (tmp_path / "p.csv").write_text(content)
    text = BASE + '\n[[path]]\nname = "p"\nspeed = 100\ncsv = "p.csv"\ncolumns = ["X", "Y", "Z"]\nrotation = "none"\n'
    (tmp_path / "c.toml").write_text(text)
    with pytest.raises(TaskDataError) as e:
        read_cell_file(tmp_path / "c.toml")
    msg = str(e.value)
    assert msg.startswith(str(tmp_path / "p.csv") + ": ") and expect in msg and "\n" not in msg, msg


def test_bad_trajectory_rows_and_layouts(tmp_path):
    (tmp_path / "t.csv").write_text("t,a,b\n0,1,2\n0.1,1,2\n0.1,1,2\n")
    text = BASE + '\n[[trajectory]]\nname = "r"\ncsv = "t.csv"\ntime = "t"\njoints = ["a", "b"]\n'
    (tmp_path / "c.toml").write_text(text)
    with pytest.raises(TaskDataError, match=r"t.csv: line 4, column 't': time 0.1 does not increase from line 3"):
        read_cell_file(tmp_path / "c.toml")
    # a trajectory of 2 joints for a 6-joint arm: said when audited, naming the file and columns
    (tmp_path / "t.csv").write_text("t,a,b\n0,1,2\n0.1,1,2\n")
    cell = read_cell_file(tmp_path / "c.toml")
    arm = load_arm(ROOT / "arms" / "demo_s6.toml")
    with pytest.raises(TaskDataError, match="has 2 joint columns \\(a, b\\) but arm .* has 6 joints"):
        audit(arm, cell)
    from workbench.studies.cell import CellFileError
    for bad, key in (('rotation = "euler"', "rotation"), ('csv_unit = "inch"', "csv_unit"),
                     ('columns = ["X", "Y"]', "columns")):
        t2 = BASE + f'\n[[path]]\nname = "p"\nspeed = 100\ncsv = "p.csv"\ncolumns = ["X", "Y", "Z"]\n{bad}\n'
        if key == "columns":
            t2 = t2.replace('columns = ["X", "Y", "Z"]\n', "")
        with pytest.raises(CellFileError, match=f"'{key}'"):
            parse_cell_text(t2, str(tmp_path / "c.toml"))
    with pytest.raises(CellFileError, match="orientation 'fixed' needs rotation columns"):
        parse_cell_text(BASE + '\n[[path]]\nname = "p"\nspeed = 100\ncsv = "p.csv"\ncolumns = ["X", "Y", "Z"]\n'
                        'rotation = "none"\norientation = "fixed"\n', str(tmp_path / "c.toml"))


def test_results_keep_the_csv_files_they_were_run_with(tmp_path):
    # The results file holds the cell text with the CSV files it names embedded: it reads back
    # (and its decision is made) after the files are gone.
    import shutil

    from workbench.results import read_results
    from workbench.runner import run_study

    src = ROOT / "arms" / "cells" / "press"
    work = tmp_path / "cell"
    shutil.copytree(src, work)
    study = work / "press_path_audit.toml"
    study.write_text(study.read_text().replace("../../demo_s6.toml", str(ROOT / "arms" / "demo_s6.toml")))
    out = tmp_path / "audit.h5"
    run_study(str(study), out=str(out))
    for f in ("press_seam.csv", "press_pick.csv"):
        (work / f).unlink()
    r = read_results(str(out))
    assert "[[embedded_csv]]" in r.cell_text and 'file = "press_seam.csv"' in r.cell_text
    _, plan, arm, cell = r.context()
    assert cell.paths[0].poses.shape == (121, 4, 4) and cell.trajectories[0].t[-1] == pytest.approx(2.4)
    from workbench.decision import decision_for

    d = decision_for(r)
    assert {v.key: v.status for v in d.verdicts}["cycle_time"] == "fail"
    # the cell file itself (with the files gone) now says which file is missing
    with pytest.raises(TaskDataError, match="press_seam.csv: no such file"):
        read_cell_file(work / "press_cell.toml")
