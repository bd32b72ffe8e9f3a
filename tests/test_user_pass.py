"""A first-time user's pass over the command line and the Python API: each test pins a problem that
was found by following the README and feeding every command bad input (and failed before its fix).

Bad input must give exit status 2 and one line ``error: ...`` naming what, where and what is
expected; nothing may be written (no output file, no temporary file) and no input destroyed.
"""
from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pytest

from workbench import load_arm, measures
from workbench.cli import main
from workbench.errors import WorkbenchError
from workbench.measures import force_ellipsoid
from workbench.pool import WorkerPool
from workbench.results import export_csv, export_png, read_results
from workbench.runner import RunError, prepare, run_study
from workbench.studies.base import StudyError
from workbench.studies.cell import CellFileError, parse_cell_text
from workbench.studies.spec import StudySpec

ROOT = Path(__file__).resolve().parents[1]
S6 = ROOT / "arms" / "demo_s6.toml"
TRAY = ROOT / "arms" / "cells" / "tray_cell.toml"
SMALL = 'joints = ["j2", "j3"]\nsteps = [6, 5]\n'


def study_file(folder: Path, arm: Path = S6, name="s.toml") -> Path:
    p = folder / name
    p.write_text(f'[study]\nkind = "joint_sweep"\narm = "{arm}"\n\n[settings]\n{SMALL}')
    return p


def listing(folder: Path) -> list[str]:
    return sorted(os.listdir(folder))


def one_error_line(capsys) -> str:
    err = capsys.readouterr().err
    lines = err.splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: "), err
    assert "Traceback" not in err
    return lines[0]


# ---------------------------------------------------------------------------------------------
# workbench run


def test_run_refuses_an_output_that_is_one_of_its_inputs(tmp_path):
    # before the fix, run_study(out=<the study file>) overwrote the study file with HDF5
    arm = tmp_path / "arm.toml"
    arm.write_text(S6.read_text())
    s = study_file(tmp_path, arm=arm)
    before = {p: p.read_bytes() for p in (s, arm)}
    with pytest.raises(RunError, match=r"--out .*s\.toml: is the study's study file.*expected a new results file"):
        run_study(str(s), out=s)
    with pytest.raises(RunError, match=r"is the study's arm file"):
        run_study(str(s), out=str(tmp_path / "." / "arm.toml"))
    assert {p: p.read_bytes() for p in (s, arm)} == before
    assert listing(tmp_path) == ["arm.toml", "s.toml"]


def test_run_out_must_be_an_h5_name_and_the_scheduler_is_checked_before_any_output(tmp_path, capsys):
    s = study_file(tmp_path)
    # before: --out r.txt (or the study file itself) was accepted and written as HDF5
    assert main(["run", str(s), "--out", str(tmp_path / "r.txt")]) == 2
    line = one_error_line(capsys)
    assert "--out" in line and "r.txt" in line and "expected a name ending in .h5" in line and "got .txt" in line
    assert main(["run", str(s), "--out", str(s)]) == 2
    assert "got .toml" in one_error_line(capsys)
    # before: the estimate line was printed first, so stderr had two lines
    assert main(["run", str(s), "--out", str(tmp_path / "r.h5"), "--scheduler", "foo"]) == 2
    assert "--scheduler foo: expected 'local' or an address like tcp://host:8786" in one_error_line(capsys)
    assert listing(tmp_path) == ["s.toml"]


def test_run_given_a_results_arm_or_cell_file_says_what_it_got(results_file, capsys):
    # before: 'not UTF-8 text' for a results file and a bare 'unknown table [arm]' for an arm file
    assert main(["run", str(results_file), "--out", "x.h5"]) == 2
    assert "r.h5: is an HDF5 file (results?); expected a TOML text file" in one_error_line(capsys)
    assert main(["run", str(S6), "--out", "x.h5"]) == 2
    assert "unknown table [arm]; this looks like an arm file; expected a study file" in one_error_line(capsys)
    assert main(["run", str(TRAY), "--out", "x.h5"]) == 2
    assert "this looks like a cell file; expected a study file with [study] and [settings]" in one_error_line(capsys)


def test_a_failing_summary_leaves_no_temporary_file(tmp_path, monkeypatch):
    from workbench.studies.base import get_kind

    kind = get_kind("joint_sweep")

    def broken(plan, arrays):
        raise RuntimeError("summary broke")

    monkeypatch.setattr(kind, "summarise", broken)
    # before: the .r.h5.PID.partial file stayed behind, open, until a later run to the same name
    with pytest.raises(RuntimeError, match="summary broke"):
        run_study(str(study_file(tmp_path)), out=tmp_path / "r.h5")
    assert listing(tmp_path) == ["s.toml"]


def test_info_given_a_cell_or_study_file_says_what_it_got(capsys):
    # before: a bare "unknown table 'box'" / "unknown table 'settings'"
    assert main(["info", str(TRAY)]) == 2
    assert "unknown table 'box'; this looks like a cell file; allowed in an arm file: [arm]" in one_error_line(capsys)
    assert main(["jacobian", str(ROOT / "arms" / "cells" / "demo_s6_sweep.toml")]) == 2
    assert "unknown table 'settings'; this looks like a study file" in one_error_line(capsys)


def test_run_refuses_a_fork_bomb_of_workers(tmp_path, capsys):
    s = study_file(tmp_path)
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
    # before: --workers 1000 was accepted and started up to 1000 worker processes
    assert main(["run", str(s), "--out", str(tmp_path / "r.h5"), "--workers", "1000"]) == 2
    assert (f"--workers: 1000 local worker processes on {cores} core(s); expected at most {4 * cores}"
            in one_error_line(capsys))
    with pytest.raises(RunError, match="--workers: expected a whole number >= 1, got True"):
        run_study(str(s), workers=True)
    assert listing(tmp_path) == ["s.toml"]


def test_a_dead_worker_pool_is_one_clear_error_and_leaves_no_file(tmp_path):
    # before: concurrent.futures BrokenProcessPool escaped with a traceback (e.g. a script starting
    # processes without the __main__ guard); a pool whose workers exit at once stands in for that
    pool = WorkerPool(1, initializer=os._exit, initargs=(3,))
    try:
        with pytest.raises(RunError, match=r"worker processes: a worker stopped .*__main__"):
            run_study(str(study_file(tmp_path)), out=tmp_path / "r.h5", executor="processes", pool=pool)
        assert pool.pids == []  # the dead pool was taken down, nothing left behind
    finally:
        pool.terminate()
    assert listing(tmp_path) == ["s.toml"]


# ---------------------------------------------------------------------------------------------
# workbench export


@pytest.fixture(scope="module")
def results_file(tmp_path_factory):
    folder = tmp_path_factory.mktemp("res")
    run_study(StudySpec("joint_sweep", str(S6), settings={"joints": ["j2", "j3"], "steps": [6, 5]}),
              out=folder / "r.h5")
    return folder / "r.h5"


def test_export_checks_every_output_before_writing_any(results_file, tmp_path, capsys):
    r = str(results_file)
    good = results_file.read_bytes()
    cases = [
        # before: a PNG went to any name, including the results file itself (destroying it)
        (["--png", r], "--png " + r + ": expected a file name ending in .png, got .h5"),
        (["--csv", r], "expected a file name ending in .csv, got .h5"),
        (["--png", str(tmp_path / "map.txt")], "--png"),
        (["--csv", str(tmp_path / "map.png")], "--csv"),
        # before: the message named the temporary file ('/proc/.x.png.123.partial No such file')
        (["--png", "/proc/x.png"], "--png /proc/x.png: cannot create files in /proc"),
        # before: the PNG was written, then the CSV failed (two lines, a half-done export)
        (["--png", str(tmp_path / "m.png"), "--csv", "/proc/x.csv"], "--csv /proc/x.csv: cannot create files"),
        (["--png", str(tmp_path / "m.png"), "--csv", str(tmp_path / "p.csv"), "--table", "nope"],
         "--table nope: no such table"),
        (["--png", str(tmp_path / "m.png"), "--csv", str(tmp_path / "p.csv"), "--measure", "nope"],
         "--measure nope: not a map of these results"),
    ]
    for extra, expected in cases:
        assert main(["export", r, *extra]) == 2, extra
        assert expected in one_error_line(capsys), extra
    assert listing(tmp_path) == []
    assert results_file.read_bytes() == good
    read_results(results_file)  # still a results file


def test_export_functions_refuse_the_results_file_itself(tmp_path):
    # a results file whose name ends in .png: the exports must not write over it
    res = run_study(StudySpec("joint_sweep", str(S6), settings={"joints": ["j2"], "steps": [4]}),
                    out=tmp_path / "r.png")
    before = (tmp_path / "r.png").read_bytes()
    with pytest.raises(WorkbenchError, match=r"--png .*r\.png: is the results file being exported"):
        export_png(res, tmp_path / "r.png")
    assert (tmp_path / "r.png").read_bytes() == before
    assert export_csv(res, tmp_path / "cells.csv", table="cells") == 4
    assert listing(tmp_path) == ["cells.csv", "r.png"]


def test_a_damaged_results_file_is_one_error_line(results_file, tmp_path, capsys):
    import shutil

    import h5py

    # our format attribute but parts missing or wrong: before, KeyError / ValueError tracebacks
    damage = {
        "no_grid_shape.h5": lambda h: h.attrs.__delitem__("grid_shape"),
        "no_field.h5": lambda h: h["fields"].__delitem__("min_sv"),
        "wrong_shape.h5": lambda h: h.attrs.__setitem__("grid_shape", np.array([7, 7])),
        "no_chunks.h5": lambda h: h.__delitem__("chunks"),
    }
    for name, hurt in damage.items():
        shutil.copy(results_file, tmp_path / name)
        with h5py.File(tmp_path / name, "a") as h:
            hurt(h)
    for name in damage:
        for argv in (["export", str(tmp_path / name), "--png", str(tmp_path / "m.png")],
                     ["report", str(tmp_path / name), "--out", str(tmp_path / "r.pdf")]):
            assert main(argv) == 2, argv
            line = one_error_line(capsys)
            assert f"{name}: damaged results file (" in line and "expected the layout of results schema" in line
    assert listing(tmp_path) == sorted(damage)


def test_export_csv_defaults_to_the_pose_list_of_kinds_without_near_singular(tmp_path):
    # before: the alphabetically first table: a reach slice gave its one-row summary ('reach'), a
    # mount search its per-point table ('best_points') instead of the ranking
    res = run_study(StudySpec("reach_slice", str(S6), settings={
        "plane": "xz", "u": [0.3, 1.2], "v": [0.2, 1.0], "steps": [6, 5], "seeds": 4}))
    assert set(res.tables) == {"reach", "worst"}
    n = export_csv(res, tmp_path / "p.csv")
    head = (tmp_path / "p.csv").read_text().splitlines()[0]
    assert n == res.tables["worst"].rows > 1 and head.startswith("x [") and "inverse_condition" in head


# ---------------------------------------------------------------------------------------------
# workbench report


def test_report_to_an_unwritable_folder_and_the_mode_of_written_reports(results_file, tmp_path, capsys):
    for out in ("/proc/r.pdf", "/proc/r.html"):
        assert main(["report", str(results_file), "--out", out]) == 2
        # before: 'error: /proc/.~report1v3cnf0b.pdf No such file or directory'
        assert f"--out {out}: cannot create files in /proc" in one_error_line(capsys)
    # before: reports came out as 0600 (and the image folder 0700), unlike every other output
    mask = os.umask(0o022)
    try:
        assert main(["report", str(results_file), "--out", str(tmp_path / "r.html")]) == 0
    finally:
        os.umask(mask)
    assert (tmp_path / "r.html").stat().st_mode & 0o777 == 0o644
    assert (tmp_path / "r_files").stat().st_mode & 0o777 == 0o755
    assert listing(tmp_path) == ["r.html", "r_files"]


def test_an_html_report_never_replaces_a_folder_of_other_files(results_file, tmp_path, capsys):
    import shutil

    # before: 'report files/r.h5 --out r.html' deleted the folder r_files with the results file in it
    (tmp_path / "r_files").mkdir()
    shutil.copy(results_file, tmp_path / "r_files" / "r.h5")
    assert main(["report", str(tmp_path / "r_files" / "r.h5"), "--out", str(tmp_path / "r.html")]) == 2
    assert "r_files holds other files (r.h5) and the report would replace it" in one_error_line(capsys)
    assert read_results(tmp_path / "r_files" / "r.h5").cells == 30
    # before: the message named a temporary folder ('.~y_filesrefrmw4y Not a directory')
    (tmp_path / "y_files").write_text("notes")
    assert main(["report", str(results_file), "--out", str(tmp_path / "y.html")]) == 2
    assert "y_files exists and is not a folder" in one_error_line(capsys)
    assert listing(tmp_path) == ["r_files", "y_files"] and (tmp_path / "y_files").read_text() == "notes"


# ---------------------------------------------------------------------------------------------
# study and cell files


def test_a_huge_mount_region_is_refused_before_allocating_it():
    text = TRAY.read_text().replace("x = [0.0, 1.0]", "x = [0, 1000]", 1).replace("step = 0.05", "step = 5e-8", 1)
    # before: MemoryError (numpy tried to allocate a 2e10-value axis)
    with pytest.raises(CellFileError, match=r"\[mount\] 'step' \(line \d+\): 20000000001 grid values along x; "
                                            r"at most 2000000"):
        parse_cell_text(text, "tray_cell.toml")
    # an x of 1e9 m is refused as a position before any step is worked out (workbench.limits)
    with pytest.raises(CellFileError, match=r"\[mount\] 'x' \(line \d+\): value 1e\+09 m is beyond the limit"):
        parse_cell_text(TRAY.read_text().replace("x = [0.0, 1.0]", "x = [0, 1e9]", 1), "tray_cell.toml")


def test_an_unknown_table_in_a_cell_file_is_called_a_table():
    text = TRAY.read_text().replace("[placement]", "[placements]", 1)
    # before: "tray_cell.toml 'placements': unknown key; allowed keys: box, cell, ..."
    with pytest.raises(CellFileError, match=r"^tray_cell\.toml: unknown table or key 'placements'; allowed tables: "
                                            r"\[\[box\]\], \[cell\], \[\[cylinder\]\], \[\[keep_out\]\], \[mount\], \[\[path\]\], "
                                            r"\[placement\]"):
        parse_cell_text(text, "tray_cell.toml")


@pytest.mark.parametrize("kind, settings, message", [
    # before: accepted, then ran for hours (a million IK seeds per target)
    ("mount_search", {"seeds": 1_000_000}, r"\[settings\] seeds: expected an integer from 1 to 64, got 1000000"),
    ("path_audit", {"seeds": 65}, r"\[settings\] seeds: expected an integer from 1 to 64, got 65"),
    ("load_map", {"grid": "plane", "seeds": 100}, r"\[settings\] seeds: expected an integer from 1 to 64, got 100"),
    # before: 'T_goal: target poses contain NaN or infinite values' (no file, no key)
    ("path_audit", {"mount_xyz": [float("nan"), 0, 0]}, r"\[settings\] mount_xyz: expected a list of 3 finite"),
    ("load_map", {"grid": "plane", "at": float("nan")}, r"\[settings\] at: expected a finite number \(m\), got nan"),
    # before: 'step' was silently ignored when 'steps' was given too
    ("reach_slice", {"steps": [5, 5], "step": 0}, r"\[settings\] step: give either 'step' .* or 'steps' .*not both"),
    # before: '[settings] rows: rows: unknown row'
    ("mount_search", {"rows": "nope"}, r"\[settings\] rows: unknown row 'nope'"),
    ("path_audit", {"rows": "nope"}, r"\[settings\] rows: unknown row 'nope'"),
])
def test_cell_study_settings_name_the_key(kind, settings, message):
    spec = StudySpec(kind, str(S6), cell=str(TRAY), settings=settings)
    with pytest.raises(StudyError, match=message) as exc:
        prepare(spec)
    assert "rows: rows:" not in str(exc.value) and "\n" not in str(exc.value)


# ---------------------------------------------------------------------------------------------
# Python API


def test_api_bad_arguments_name_the_parameter_and_shape():
    arm = load_arm(S6)
    # before: TypeError 'expected str, bytes or os.PathLike object, not NoneType'
    with pytest.raises(WorkbenchError, match=r"path: expected an arm file path \(.toml or .urdf\), got NoneType"):
        load_arm(None)
    # before: "could not convert string to float: np.str_('a')" (no parameter named)
    with pytest.raises(WorkbenchError, match=r"q: expected numbers shaped \(\.\.\., 6\)"):
        arm.fk(["a"] * 6)
    # before: 'cannot reshape array of size 0 into shape (6,0)'
    with pytest.raises(WorkbenchError, match=r"J: expected Jacobians shaped \(\.\.\., 6, n\) with n >= 1 joints, "
                                             r"got shape \(6, 0\)"):
        measures(np.zeros((6, 0)))
    with pytest.raises(ValueError, match=r"J: .*got shape \(5, 6\)"):  # WorkbenchError is a ValueError
        measures(np.zeros((5, 6)))
    f = force_ellipsoid(arm.jacobian(np.deg2rad([0, -90, 90, 0, 45, 0])))
    # before: a numpy broadcasting error / a divide warning and NaN
    with pytest.raises(WorkbenchError, match=r"d: expected direction\(s\) shaped \(\.\.\., 3\).*got shape \(2,\)"):
        f.radius_along([0, 0])
    with pytest.raises(WorkbenchError, match=r"d: expected non-zero, finite direction"):
        f.radius_along([0, 0, 0])
    # a good direction still gives the extent: along an axis of the ellipsoid it is that radius
    # (common practice: the extent of x^T A^-2 x = 1 along a principal axis is its semi-axis)
    axis = f.directions[:, 0]
    assert f.radius_along(axis) == pytest.approx(f.radii[0], rel=1e-12)


def test_api_refuses_nan_poses_non_rigid_targets_and_non_paths():
    from workbench.kinematics.ik import IKError
    from workbench.measures import explain_singularity

    arm = load_arm(S6)
    # before: numpy's LinAlgError 'SVD did not converge' (no parameter named)
    with pytest.raises(WorkbenchError, match=r"q: expected 6 finite joint values \(rad / m\), got \[nan"):
        explain_singularity(arm, np.full(6, np.nan))
    # before: a scaled matrix was taken as a target and "solved" (status 1, garbage q)
    T = arm.fk(np.deg2rad([0, -90, 90, 0, 45, 0]))
    bad = np.stack([T, T * 2.0])
    with pytest.raises(IKError, match=r"T_goal: expected rigid poses .*\(target \(1,\)\); got rotation error 3"):
        arm.ik(bad)
    q, status = arm.ik(T)  # the rigid one still solves: FK of the answer is the target
    assert int(status) == 0 and np.allclose(arm.fk(q), T, atol=1e-6)
    # before: TypeError from os.fspath
    with pytest.raises(WorkbenchError, match=r"path: expected a results file path \(.h5\), got NoneType"):
        read_results(None)


def test_jacobian_q_with_an_empty_value(capsys):
    # before: '0,,90,...' dropped the empty value and complained about the count (or, with one value
    # too many, silently shifted the rest onto the wrong joints)
    assert main(["jacobian", str(S6), "--q", "0,,90,0,45,0,0"]) == 2
    assert "--q: value 2 is empty in '0,,90,0,45,0,0'; expected 6 numbers" in one_error_line(capsys)
    # comma-and-space lists as a shell splits them still work
    assert main(["jacobian", str(S6), "--q", "0,", "-90,", "90,", "0,", "45,", "0", "--json"]) == 0
    assert '"q": [' in capsys.readouterr().out


def test_info_says_what_the_reach_sample_holds(capsys):
    # before: numpy's 'expected non-negative integer' traceback
    assert main(["info", str(S6), "--seed", "-1"]) == 2
    assert "--seed: expected a whole number >= 0, got -1" in one_error_line(capsys)
    assert main(["info", str(S6)]) == 0
    out = capsys.readouterr().out
    # before: 'largest over 20001 random in-limit poses' (20 000 random ones plus the home pose)
    assert "(largest over 20000 random in-limit poses and the home pose)" in out
