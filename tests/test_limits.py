"""Bounded input (issue 13 item 4): every size, number and derived allocation is checked before
work starts, and each refusal is one ``error:`` line naming the file, the key, the value and the
limit. Each case here ran away (memory, time) or ended in a traceback before its check existed.
"""
from __future__ import annotations

import socket
import threading
import tomllib
from pathlib import Path

import numpy as np
import pytest

from workbench import limits
from workbench.arm.files import ArmFileError, parse_arm_text
from workbench.arm.urdf import parse_urdf_text
from workbench.cli import main
from workbench.limits import LimitError, check_toml_text
from workbench.studies.cell import CellFileError, parse_cell_text, read_cell_file, sample_path

ROOT = Path(__file__).resolve().parents[1]
S6 = ROOT / "arms" / "demo_s6.toml"
TRAY = ROOT / "arms" / "cells" / "tray_cell.toml"


def one_error_line(capsys) -> str:
    err = capsys.readouterr().err
    lines = err.splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: "), err
    assert "Traceback" not in err
    return lines[0]


# ---------------------------------------------------------------------------------------------
# TOML text before parsing


def test_a_line_of_100000_dotted_keys_is_refused_before_parsing(tmp_path, capsys):
    # the standard TOML reader needs memory growing with the square of the parts of one key: this
    # 200 KB line grew to 23 GB before the check
    arm = tmp_path / "dotted.toml"
    arm.write_text("[arm]\nname = 'x'\n" + "a" + ".k" * 100_000 + " = 1\n")
    assert main(["info", str(arm)]) == 2
    line = one_error_line(capsys)
    assert f"{arm}:3:" in line and "200,005 characters" in line and f"{limits.MAX_LINE_CHARS:,}" in line


def test_key_depth_is_counted_outside_strings_only():
    deep = "a" + ".k" * limits.MAX_KEY_DEPTH + " = 1\n"      # MAX + 1 parts
    ok = "a" + ".k" * (limits.MAX_KEY_DEPTH - 1) + " = 1\n"  # MAX parts
    with pytest.raises(LimitError, match=rf"f.toml:1: .* more than {limits.MAX_KEY_DEPTH} dotted parts"):
        check_toml_text(deep, "f.toml")
    check_toml_text(ok, "f.toml")
    # dots inside strings, numbers and comments are not key parts; tomllib agrees the text is fine
    text = ('name = "' + "a." * 500 + '"\nxyz = [' + ", ".join(["0.5"] * 500) + "]\n"
            '"q.u.o.t.e.d.k.e.y.w.i.t.h.m.a.n.y.d.o.t.s" = 1  # c.o.m.m.e.n.t.' + "x." * 50 + "\n"
            "t = {" + ", ".join(f"k{i} = 1.5" for i in range(40)) + "}\n"
            "m = '''\n" + "a." * 100 + " = 1\n'''\n")
    check_toml_text(text, "f.toml")
    assert tomllib.loads(text)["t"]["k39"] == 1.5
    # a dotted key inside an inline table counts
    with pytest.raises(LimitError):
        check_toml_text("t = {" + "a" + ".b" * limits.MAX_KEY_DEPTH + " = 1}\n", "f.toml")
    # ... and in a table header
    with pytest.raises(LimitError, match="f.toml:2:"):
        check_toml_text("x = 1\n[" + "a" + ".b" * limits.MAX_KEY_DEPTH + "]\n", "f.toml")


def test_nesting_depth_is_bounded():
    deep = "x = " + "[" * (limits.MAX_NESTING + 1) + "]" * (limits.MAX_NESTING + 1) + "\n"
    with pytest.raises(LimitError, match=f"nested more than {limits.MAX_NESTING}"):
        check_toml_text(deep, "f.toml")
    ok = "x = " + "[" * limits.MAX_NESTING + "]" * limits.MAX_NESTING + "\n"
    check_toml_text(ok, "f.toml")
    # a multi-line array stays one value (its lines are not key positions)
    check_toml_text("rot = [\n  [1.0, 0.0, 0.0],\n  [0.0, 1.0, 0.0],\n  [0.0, 0.0, 1.0],\n]\n", "f.toml")


def test_cell_and_study_files_are_checked_before_parsing(tmp_path, capsys):
    cell = tmp_path / "c.toml"
    cell.write_text("[cell]\nname = 'c'\n" + "p" + ".q" * 40 + " = 1\n")
    with pytest.raises(CellFileError, match="c.toml:3: a key"):
        read_cell_file(cell)
    study = tmp_path / "s.toml"
    study.write_text(f'[study]\nkind = "joint_sweep"\narm = "{S6}"\n[settings]\n' + "a" + ".b" * 40 + " = 1\n")
    assert main(["run", str(study), "--out", str(tmp_path / "o.h5")]) == 2
    assert "s.toml:5: a key" in one_error_line(capsys)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["c.toml", "s.toml"]


# ---------------------------------------------------------------------------------------------
# URDF


URDF = """<?xml version="1.0"{enc}?>
<robot name="r">
  <link name="base"/><link name="l1"/>
  <joint name="j1" type="revolute"><parent link="base"/><child link="l1"/>
    <origin xyz="{x} 0 0.1"/><axis xyz="0 0 1"/>
    <limit lower="-1" upper="1" effort="10" velocity="{v}"/></joint>
</robot>
"""


def test_urdf_numbers_are_bounded_like_the_arm_file_reader():
    # the TOML reader refuses any number over 1e9; so does the URDF reader now
    parse_urdf_text(URDF.format(enc="", x="0.5", v="2"), "u.urdf")
    with pytest.raises(ArmFileError, match=r"u.urdf: joint 'j1': origin xyz: .*at most 1e\+09, got '1e300'"):
        parse_urdf_text(URDF.format(enc="", x="1e300", v="2"), "u.urdf")
    with pytest.raises(ArmFileError, match=r"limit velocity: .*at most 1e\+09, got '1e308'"):
        parse_urdf_text(URDF.format(enc="", x="0.5", v="1e308"), "u.urdf")
    with pytest.raises(ArmFileError, match="magnitude below 1e"):
        parse_arm_text("[arm]\nname='x'\ngeometry='dh'\n[[joint]]\nname='a'\na=1e300\nalpha=0\nd=0\ntheta=0\n")


def test_urdf_with_an_unknown_encoding_is_one_line(tmp_path, capsys):
    u = tmp_path / "enc.urdf"
    u.write_text(URDF.format(enc=' encoding="no-such-codec"', x="0.5", v="2"))
    assert main(["info", str(u)]) == 2
    line = one_error_line(capsys)
    assert "enc.urdf" in line and "no-such-codec" in line and "encoding" in line


# ---------------------------------------------------------------------------------------------
# study sizes and derived allocations


def _study(tmp_path, kind, settings, cell=None, name="s.toml"):
    p = tmp_path / name
    cell_line = f'cell = "{cell}"\n' if cell else ""
    p.write_text(f'[study]\nkind = "{kind}"\narm = "{S6}"\n{cell_line}\n[settings]\n{settings}')
    return p


def test_ten_billion_samples_are_refused_before_allocating(tmp_path, capsys):
    s = _study(tmp_path, "joint_sweep", 'mode = "samples"\nsamples = 10000000000\n')
    assert main(["run", str(s), "--in-process", "--out", str(tmp_path / "o.h5")]) == 2
    line = one_error_line(capsys)
    assert "s.toml: [settings] samples: 10,000,000,000 cells" in line and f"{limits.MAX_CELLS:,}" in line


def test_cell_positions_are_bounded(tmp_path, capsys):
    text = TRAY.read_text().replace("xyz = [0.55, 0.72, 0.35]", "xyz = [1000000.0, 0.75, 0.35]")
    with pytest.raises(CellFileError, match=r"\[\[point\]\] 1 'xyz' \(line 13\): value 1e\+06 m is beyond the "
                                            r"limit of 1000 m"):
        parse_cell_text(text, "c.toml")
    mm = "[cell]\nname = 'c'\nlength_unit = 'mm'\n[[point]]\nname = 'p'\nxyz = [2000000, 0, 0]\n"
    with pytest.raises(CellFileError, match=r"2e\+06 mm \(2000 m\)"):
        parse_cell_text(mm, "c.toml")
    parse_cell_text(mm.replace("2000000", "900000"), "c.toml")  # 900 m is allowed
    with pytest.raises(CellFileError, match=r"\[mount\] 'x'"):
        parse_cell_text(TRAY.read_text().replace("x = [0.0, 1.0]", "x = [0.0, 5000.0]"), "c.toml")
    with pytest.raises(CellFileError, match=r"\[placement\] 'xyz'"):
        parse_cell_text(TRAY.read_text().replace("xyz = [0.70, -0.18, 0.25]", "xyz = [0.70, -0.18, 2500]"),
                        "c.toml")


def test_path_audit_sample_count_is_known_before_sampling(tmp_path, capsys):
    from workbench.studies.path_audit import expected_samples

    cell = parse_cell_text(TRAY.read_text(), str(TRAY))
    for path in cell.paths:  # the count worked out from the lengths is the count sample_path makes
        for spacing in (0.002, 0.0137, 0.3):
            assert expected_samples(cell, path, spacing) == len(sample_path(cell, path, spacing).s)
    long_cell = tmp_path / "long.toml"
    long_cell.write_text(TRAY.read_text().replace("xyz = [0.30, -0.42, 0.82]", "xyz = [-500.0, -0.42, 0.82]")
                         .replace("xyz = [1.20, -0.42, 0.82]", "xyz = [500.0, -0.42, 0.82]"))
    s = _study(tmp_path, "path_audit", 'paths = ["glue_seam"]\nspacing = 0.00001\n', cell=long_cell)
    assert main(["run", str(s), "--in-process", "--out", str(tmp_path / "o.h5")]) == 2
    line = one_error_line(capsys)
    # 1000 m at 1e-5 m: 1e8 intervals, 1e8 + 1 samples (common practice: fence posts)
    assert "s.toml: [settings] spacing: 1e-05 m gives 100,000,001 samples along glue_seam" in line
    assert f"{limits.MAX_PATH_SAMPLES:,}" in line


def test_load_map_step_inf_names_file_and_key(tmp_path, capsys):
    s = _study(tmp_path, "load_map", 'grid = "plane"\nplane = "yz"\nu = [-1.0, 1.0]\nv = [0.0, 1.6]\nstep = inf\n',
               cell=TRAY)
    assert main(["run", str(s), "--in-process", "--out", str(tmp_path / "o.h5")]) == 2
    line = one_error_line(capsys)
    assert "s.toml: [settings] step:" in line and "inf" in line


def test_grid_count_matches_numpy():
    # the count is the length numpy's arange makes for the same grid
    for lo, hi, step in ((0.0, 1.0, 0.05), (-0.3, 0.3, 0.1), (0.0, 0.0, 1.0), (0.0, 0.999, 0.25)):
        assert limits.grid_count(lo, hi, step, "w") == np.arange(lo, hi + 1e-9 * step, step).size
    with pytest.raises(LimitError, match="w: step 1e-12 gives"):
        limits.grid_count(0.0, 1.0, 1e-12, "w")


# ---------------------------------------------------------------------------------------------
# a Dask scheduler that accepts and never answers


def test_a_silent_scheduler_gives_one_line_within_the_stated_time():
    distributed = pytest.importorskip("distributed")
    from workbench.runner import RunError, _connect

    srv = socket.socket()
    srv.bind(("127.0.0.1", 0))
    srv.listen(8)
    port = srv.getsockname()[1]
    held = []
    stop = threading.Event()

    def accept():
        srv.settimeout(0.2)
        while not stop.is_set():
            try:
                held.append(srv.accept()[0])
            except OSError:
                continue

    t = threading.Thread(target=accept, daemon=True)
    t.start()
    try:
        with pytest.raises(RunError, match=rf"--scheduler tcp://127.0.0.1:{port}: no answer within 2 s"):
            _connect(distributed.Client, f"tcp://127.0.0.1:{port}", timeout=2)
    finally:
        stop.set()
        t.join(2)
        for c in held:
            c.close()
        srv.close()
