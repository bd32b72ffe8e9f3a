"""Clearance of whole arms: small arms and cells worked by hand (elementary geometry), the batch
shapes, mounts, the nearest pair's names, the base check, self-collision and skipped pairs."""
import math

import numpy as np
import pytest

from workbench import load_arm
from workbench.arm import parse_arm_text
from workbench.collision import base_clearance, clearance, nearest, pair_distances, pair_names
from workbench.studies.cell import parse_cell_text

ARM = """[arm]
name = "two links"
geometry = "origins"
[[joint]]
name = "j1"
xyz = [0, 0, 0.5]
axis = [0, 0, 1]
radius = 0.05
[[joint]]
name = "j2"
xyz = [1, 0, 0]
axis = [0, 0, 1]
radius = 0.05
[tool]
xyz = [0.5, 0, 0]
[[base.shape]]
type = "cylinder"
a = [0, 0, 0]
b = [0, 0, 0.4]
radius = 0.2
"""
# joint 1 at z = 0.5 turning about z: link 1 is the capsule (0,0,0.5)-(1,0,0.5) r 0.05 at q1 = 0,
# link 2 the capsule from (1,0,0.5) to the flange (its joint origin, so a sphere) r 0.05, then
# the tool frame 0.5 further (no tool shape).

CELL = """[cell]
name = "c"
floor = false
[[point]]
name = "p"
xyz = [1, 0, 0.5]
[[box]]
name = "wall"
center = [0, 2, 0.5]
size = [4, 0.2, 1]
[[box]]
name = "drawn only"
center = [0, -0.6, 0.5]
size = [0.1, 0.1, 0.1]
collide = false
[[keep_out]]
name = "operator"
center = [-1.5, 0, 1]
size = [0.4, 0.4, 2]
[[cylinder]]
name = "column"
center = [0, -1.5, 1]
radius = 0.1
height = 2
"""


@pytest.fixture(scope="module")
def arm():
    return parse_arm_text(ARM, "two.toml")


@pytest.fixture(scope="module")
def cell():
    return parse_cell_text(CELL, "c.toml")


def test_floor_only_by_hand(arm):
    # link 1 lies at z = 0.5 with radius 0.05: 0.45 above the floor whatever q
    d = clearance(arm, np.zeros((3, 2)))
    assert d.shape == (3,)
    assert np.allclose(d, 0.45, atol=1e-12)


def test_cell_obstacles_by_hand(arm, cell):
    # q1 = 90 deg: link 1 points along +y to (0, 1, 0.5); the wall's face is at y = 1.9:
    # 0.9 - 0.05 from link 2's sphere at (0, 1, 0.5)
    q = np.radians([[90, 0]])
    assert clearance(arm, q, cell, self_collision=False)[0] == pytest.approx(0.85, abs=1e-12)
    d, k = nearest(arm, q, cell, self_collision=False)
    assert pair_names(arm, cell, self_collision=False)[k[0]][1] == "box 'wall'"
    # q1 = 180: link 1 points to (-1, 0, 0.5); keep-out box face at x = -1.3 -> 0.3 - 0.05
    d, k = nearest(arm, np.radians([[180, 0]]), cell, self_collision=False)
    assert d[0] == pytest.approx(0.25, abs=1e-12)
    a, b = pair_names(arm, cell, self_collision=False)[k[0]]
    assert b == "keep-out 'operator'" and a in ("link 1", "link 2")  # a tie: link 1 ends where link 2 is
    # q1 = -90: link 1 to (0, -1, 0.5), the column's axis at y = -1.5, radius 0.1: 0.5 - 0.1 - 0.05;
    # the box with collide = false at y = -0.6 is ignored (it would be 0.55 - 0.05 - 0.05 away from link 1)
    d, k = nearest(arm, np.radians([[-90, 0]]), cell, self_collision=False)
    assert d[0] == pytest.approx(0.35, abs=1e-12)
    assert pair_names(arm, cell, self_collision=False)[k[0]][1] == "cylinder 'column'"
    # with self-collision the base cylinder (r 0.2, z 0..0.4) is nearer to link 2's sphere at
    # (0, 1, 0.5): sqrt(0.8^2 + 0.1^2) - 0.05
    d, k = nearest(arm, np.radians([[90, 0]]), cell)
    assert d[0] == pytest.approx(math.hypot(0.8, 0.1) - 0.05, abs=1e-12)
    assert pair_names(arm, cell)[k[0]] == ("base", "link 2")
    assert all("drawn only" not in b for _a, b in pair_names(arm, cell, self_collision=False))


def test_self_collision_and_skip():
    # three links in a plane: link 3 folds back onto link 1 at q3 = 180
    text = """[arm]
name = "fold"
geometry = "origins"
[[joint]]
name = "a"
xyz = [0, 0, 1]
axis = [0, 0, 1]
radius = 0.05
[[joint]]
name = "b"
xyz = [1, 0, 0]
axis = [0, 0, 1]
radius = 0.05
[[joint]]
name = "c"
xyz = [0.3, 0, 0]
axis = [0, 0, 1]
[[joint.shape]]
type = "capsule"
a = [0, 0, 0]
b = [0.8, 0, 0]
radius = 0.05
"""
    m = parse_arm_text(text, "fold.toml")
    cellfree = parse_cell_text('[cell]\nname = "x"\nfloor = false\n[[point]]\nname = "p"\nxyz = [0, 0, 1]\n', "x")
    # q = (0, 90, 90): link 2 along +y from (1,0,1) to (1,0.3,1); link 3 along -x from (1,0.3,1) to
    # (0.2,0.3,1): parallel to link 1 (z = 1, y = 0) at 0.3 -> 0.3 - 0.1
    q = np.radians([0, 90, 90])
    assert clearance(m, q, cellfree) == pytest.approx(0.2, abs=1e-12)
    assert pair_names(m, cellfree) == [("link 1", "link 3")]
    assert clearance(m, q, cellfree, self_collision=False) == math.inf
    m2 = parse_arm_text(text.replace('name = "fold"', 'name = "fold"\nskip = [["a", "c"]]'), "fold.toml")
    assert pair_names(m2, cellfree) == []


def test_mounts_broadcast_and_match_a_mounted_arm(arm, cell):
    rng = np.random.default_rng(3)
    q = rng.uniform(-3, 3, (5, 2))
    M = np.tile(np.eye(4), (4, 1, 1, 1))  # (4, 1, 4, 4) against q (5, 2) -> (4, 5)
    M[:, 0, 0, 3] = [0.0, 0.2, -0.3, 0.5]
    M[:, 0, 2, 3] = [0.0, 0.1, 0.0, 0.2]
    d = clearance(arm, q, cell, mounts=M)
    assert d.shape == (4, 5)
    from dataclasses import replace

    for k in range(4):
        mounted = replace(arm, mount=M[k, 0])
        assert np.allclose(d[k], clearance(mounted, q, cell), atol=1e-12)
    # the minimum equals the smallest of every named pair's distance
    P = pair_distances(arm, q, cell, mounts=M)
    assert P.shape == (4, 5, len(pair_names(arm, cell)))
    assert np.allclose(d, P.min(axis=-1), atol=1e-12)


def test_nan_pose_gives_nan(arm):
    d, k = nearest(arm, np.array([[np.nan, 0.0], [0.0, 0.0]]))
    assert math.isnan(d[0]) and k[0] == -1 and d[1] == pytest.approx(0.45)


def test_base_clearance(arm, cell):
    # the base cylinder (r 0.2, z 0..0.4) at x = -1.5 stands inside the keep-out box (x -1.7..-1.3)
    M = np.tile(np.eye(4), (2, 1, 1))
    M[0, :3, 3] = [-1.5, 0, 0]
    M[1, :3, 3] = [0.5, 0, 0]
    b = base_clearance(arm, cell, M)
    assert b[0] < 0
    # at x = 0.5 the nearest is the column: axis at (0, -1.5): sqrt(0.25 + 2.25) - 0.1 - 0.2
    # (beside both cylinders' sides: the capsule parts are exact)
    assert b[1] == pytest.approx(math.sqrt(2.5) - 0.3, abs=1e-9)


def test_demo_arm_has_shapes_and_floor_clearance():
    arm = load_arm("arms/demo_s6.toml")
    assert arm.model.has_shapes
    d = clearance(arm, np.zeros(6), self_collision=False)
    # upright pose (q = 0): the lowest collision shape is link 1's capsule at z = 0.45, radius 0.11
    assert d == pytest.approx(0.45 - 0.11, abs=1e-12)
