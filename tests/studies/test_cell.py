"""Cell files: schema, units, validation messages (key and line), path sampling."""
import math

import numpy as np
import pytest

from workbench.studies.cell import (CellFileError, candidate_grid, mount_transforms, parse_cell_text,
                                    read_cell_file, sample_path)

ROOT = __import__("pathlib").Path(__file__).resolve().parents[2]

BASE = """[cell]
name = "t"
length_unit = "mm"
[[point]]
name = "a"
xyz = [1000, 0, 0]
rpy = [180, 0, 0]
[[point]]
name = "m"
xyz = [0, 1000, 0]
rpy = [180, 0, 90]
[[point]]
name = "b"
xyz = [-1000, 0, 0]
rpy = [180, 0, 180]
[[point]]
name = "c"
xyz = [500, 500, 200]
orientation = "axis"
axis = [0, 0, -2]
tolerance = 0.5
"""


def test_demo_cell_reads():
    cell = read_cell_file(ROOT / "arms" / "cells" / "tray_cell.toml")
    assert len(cell.points) == 16 and len(cell.paths) == 3 and len(cell.boxes) == 3
    assert cell.mount.shape == (1, 2, 8, 13, 21)
    assert len(cell.sha256) == 64


def test_units_rules_and_mount_grid():
    cell = parse_cell_text(BASE + """
[mount]
x = [0, 200]
y = 0
step = 100
heights = [0, 300]
yaws = [0, 90]
style = ["floor", "ceiling", 30]
""")
    np.testing.assert_allclose(cell.point("a").position, [1.0, 0, 0])  # mm -> m
    c = cell.point("c")
    assert c.rule == "axis" and c.tolerance == pytest.approx(5e-4)
    np.testing.assert_allclose(c.pose[:3, 2], [0, 0, -1])  # the tool z axis, normalised
    np.testing.assert_allclose(cell.point("m").pose[:3, 0], [0, 1, 0], atol=1e-12)  # Rz(90) Rx(180) x = y
    reg = cell.mount
    assert reg.shape == (3, 2, 2, 1, 3) and reg.styles == ("floor", "ceiling", "tilt 30 deg")
    np.testing.assert_allclose(reg.xs, [0, 0.1, 0.2])
    M = candidate_grid(reg)
    # ceiling: base z axis points down; wall/tilt: T(x, y, h) Rz(yaw) Ry(tilt)
    np.testing.assert_allclose(M[1, 1, 0, 0, 2, :3, 2], [0, 0, -1], atol=1e-12)
    np.testing.assert_allclose(M[1, 1, 0, 0, 2, :3, 3], [0.2, 0, 0.3])
    t = math.radians(30)
    np.testing.assert_allclose(M[2, 0, 1, 0, 0, :3, 2], [0, math.sin(t), math.cos(t)], atol=1e-12)
    np.testing.assert_allclose(mount_transforms(0, 0, 0, 0, math.pi / 2)[:3, 2], [1, 0, 0], atol=1e-12)  # wall


def test_arc_and_line_sampling():
    cell = parse_cell_text(BASE + """
[[path]]
name = "p"
speed = 100
start = "a"
segments = [{arc = "b", via = "m"}, {line = "a"}]
""")
    ps = sample_path(cell, cell.paths[0], 0.01)
    # half circle of radius 1 m then the 2 m diameter back: pi + 2 (geometry, common practice)
    assert ps.length == pytest.approx(math.pi + 2)
    arc = ps.segment == 0
    np.testing.assert_allclose(np.linalg.norm(ps.poses[arc, :3, 3], axis=1), 1.0, atol=1e-12)
    assert np.max(np.diff(ps.s)) <= 0.01 + 1e-12
    np.testing.assert_allclose(np.linalg.norm(np.diff(ps.poses[:, :3, 3], axis=0), axis=1), np.diff(ps.s), atol=1e-5)
    # passes through the via point a quarter of the way (pi/2 of pi + 2)
    k = np.argmin(np.abs(ps.s - math.pi / 2))
    np.testing.assert_allclose(ps.poses[k, :3, 3], [0, 1, 0], atol=0.01)
    # the orientation turns 180 deg about z over the arc (pi m): 1 rad/m; the line back turns -180 deg
    np.testing.assert_allclose(np.abs(ps.omega_per_m[arc][:, 2]), 1.0, atol=1e-9)
    np.testing.assert_allclose(ps.poses[-1, :3, :3], cell.point("a").pose[:3, :3], atol=1e-9)
    assert ps.speed == pytest.approx(0.1)  # mm/s -> m/s


@pytest.mark.parametrize("extra, match", [
    ('[[path]]\nname = "p"\nspeed = 0\nthrough = ["a", "b"]\n', r"\[\[path\]\] 1 'speed' \(line 2\d\): tool speed must be > 0"),
    ('[[path]]\nname = "p"\nspeed = 10\nthrough = ["a", "zz"]\n', r"path goes through 'zz', which is not a work point"),
    ('[[path]]\nname = "p"\nspeed = 10\nstart = "q"\nsegments = [{line = "a"}]\n', r"'start' .*'q'"),
    ('[mount]\nx = [1, 0]\ny = [0, 1]\nstep = 0.1\n', r"\[mount\] 'x' \(line \d+\): empty candidate region"),
    ('[mount]\nx = [0, 1]\ny = [0, 1]\nstep = 0.1\nyaws = []\n', r"\[mount\] 'yaws'.*list is empty"),
    ('[mount]\nx = [0, 1]\ny = [0, 1]\nstep = 0\n', r"'step'.*> 0"),
    ('[mount]\nx = [0, 1]\ny = [0, 1]\nstep = 0.1\nstyle = "roof"\n', r"'style'.*floor, wall, ceiling"),
    ('[[box]]\nname = "b"\ncenter = [0, 0, 0]\nsize = [1, 0, 1]\n', r"'size'.*> 0"),
    ('[[path]]\nname = "p"\nspeed = 10\nstart = "a"\nsegments = [{arc = "b", via = "a"}]\n', r"(zero length|one line)"),
    ('colour = "red"\n', r"unknown key"),
    ('[[point]]\nname = "a"\nxyz = [0, 0, 0]\n', r"duplicate work point name 'a'"),
    ('[[point]]\nname = "z"\nxyz = [0, 0]\n', r"\[\[point\]\] 5 'xyz' \(line \d+\): expected a list of 3 numbers"),
    ('[[point]]\nname = "z"\nxyz = [0, 0, 0]\norientation = "fixed"\n', r"needs 'rpy'"),
    ('x = = 1\n', r"malformed TOML: .*line \d+"),
])
def test_bad_cells_give_one_line_errors(extra, match):
    with pytest.raises(CellFileError, match=match) as exc:
        parse_cell_text(BASE + extra, "bad.toml")
    assert "\n" not in str(exc.value) and str(exc.value).startswith("bad.toml")


def test_missing_file_and_empty_cell(tmp_path):
    with pytest.raises(CellFileError, match="no such file"):
        read_cell_file(tmp_path / "nope.toml")
    with pytest.raises(CellFileError, match=r"no \[\[point\]\] tables"):
        parse_cell_text('[cell]\nname = "x"\n', "empty.toml")
