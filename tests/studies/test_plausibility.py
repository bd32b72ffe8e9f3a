"""Plausibility warnings (issue 13 item 5): valid files that are probably not what was meant."""
from __future__ import annotations

import math
import re
import shutil
from pathlib import Path

import numpy as np

from workbench.cli import main
from workbench.kinematics import load_arm
from workbench.studies import plausibility as P
from workbench.studies.cell import parse_cell_text

ROOT = Path(__file__).resolve().parents[2]
ARMS = ROOT / "arms"
S6 = ARMS / "demo_s6.toml"
TRAY = ROOT / "arms" / "cells" / "tray_cell.toml"


def warnings_of(capsys):
    return [ln for ln in capsys.readouterr().err.splitlines() if ln.startswith("warning: ")]


def test_demo_arms_and_cell_give_no_plausibility_warning():
    for f in sorted(ARMS.glob("*.toml")) + sorted(ARMS.glob("*.urdf")):
        assert P.arm_warnings(load_arm(f)) == [], f
    arm = load_arm(S6)
    cell = parse_cell_text(TRAY.read_text(), str(TRAY))
    assert P.cell_warnings(arm, cell) == [] and P.cell_warnings(arm, cell, uses_region=True) == []


def test_metre_values_in_an_mm_file(tmp_path, capsys):
    # the S6 demo reaches at most 1.71 m (axis chain: 0.15 + 0.60 + 0.12 + 0.62 + 0.10 + 0.12); read as millimetres 1.71 mm (1000 x less: the unit factor)
    f = tmp_path / "s6_mm.toml"
    f.write_text(S6.read_text().replace('length_unit = "m"', 'length_unit = "mm"'))
    assert main(["info", str(f)]) == 0
    w = warnings_of(capsys)
    assert len(w) == 1 and "reaches only 1.71 mm" in w[0] and "length_unit = 'mm'" in w[0]
    assert load_arm(f).nominal_reach() * 1000 == np.float64(load_arm(S6).nominal_reach()) or \
        math.isclose(load_arm(f).nominal_reach() * 1000, load_arm(S6).nominal_reach(), rel_tol=1e-12)


def test_a_urdf_in_millimetres_with_limits_in_degrees(tmp_path, capsys):
    text = (ARMS / "demo_u6.urdf").read_text()
    text = re.sub(r'<origin xyz="([^"]*)"', lambda m: '<origin xyz="' + " ".join(
        f"{float(v) * 1000:g}" for v in m.group(1).split()) + '"', text)
    text = re.sub(r'lower="([-\d.e]+)" upper="([-\d.e]+)"',
                  lambda m: f'lower="{math.degrees(float(m.group(1))):g}" upper="{math.degrees(float(m.group(2))):g}"',
                  text)
    f = tmp_path / "u6_mm.urdf"
    f.write_text(text)
    shutil.copytree(ARMS / "meshes", tmp_path / "meshes")  # the URDF's collision meshes, beside it
    assert main(["info", str(f)]) == 0
    w = " ".join(warnings_of(capsys))
    assert "a URDF written in millimetres" in w and "degrees written where URDF expects radians" in w


def test_radians_in_a_degree_field(tmp_path, capsys):
    f = tmp_path / "rad.toml"
    f.write_text(S6.read_text().replace("alpha = -90", "alpha = -1.5708", 1))
    assert main(["info", str(f)]) == 0
    w = warnings_of(capsys)
    # -1.5708 is -pi/2 to 4 digits (pi = 3.14159..., common practice): degrees -90
    assert len(w) == 1 and "joint 1 ('j1') alpha = -1.5708 looks like radians (-pi/2)" in w[0] and "write -90" in w[0]
    # whole numbers and ordinary degree values are not flagged
    assert P._looks_radian(90) is None and P._looks_radian(1.5) is None and P._looks_radian(0.7854) is not None


def test_a_placement_in_mm_read_as_metres_and_nothing_reached(tmp_path, capsys):
    cell = tmp_path / "c.toml"
    cell.write_text(TRAY.read_text().replace("xyz = [0.70, -0.18, 0.25]", "xyz = [700, -180, 250]"))
    study = tmp_path / "s.toml"
    study.write_text(f'[study]\nkind = "path_audit"\narm = "{S6}"\ncell = "{cell}"\n[settings]\n'
                     f'paths = ["glue_seam"]\nspacing = 0.05\n')
    assert main(["run", str(study), "--in-process", "--quiet", "--out", str(tmp_path / "o.h5")]) == 0
    w = warnings_of(capsys)
    # distance from [700, -180, 250] to the nearest point (seam_end [1.2, -0.42, 0.82]), numpy:
    d = np.linalg.norm(np.array([700, -180, 250]) - np.array([1.20, -0.42, 0.82]))
    assert len(w) == 2
    assert f"is {d:.4g} m from the nearest work point ('seam_end')" in w[0]
    assert "nothing is reachable: 0 of the path samples" in w[1]
    from workbench.decision import decision_for
    from workbench.results import read_results

    assert any("Nothing is reachable" in n for n in decision_for(read_results(tmp_path / "o.h5")).notes)


def test_reached_fraction_against_counts():
    st = np.array([1, 4, 4, 16, 0, 3], np.uint8)  # 0: not computed yet
    assert P.reached_fraction("reach_slice", {"status": st}) == 2 / 5
    assert P.result_warnings("reach_slice", {"status": np.array([4] * 30 + [1], np.uint8)})[0].startswith(
        "almost nothing is reachable: 3.2 %")  # 1 / 31 = 3.2 %
    assert P.result_warnings("reach_slice", {"status": np.array([1, 4], np.uint8)}) == []
