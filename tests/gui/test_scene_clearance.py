"""The scene's collision shapes, obstacles, keep-out zones and the clearance note of the arm panel.

The distances are worked by hand for a two-link arm whose links are capsules (the distance of a
capsule to a box face it points at is the gap between the face and the capsule's end point minus
the radius: elementary geometry, common practice)."""
import numpy as np
import pytest

ARM = """
[arm]
name = "Two capsules (test)"
geometry = "origins"
length_unit = "m"
home = [0, 0, 0]

[[joint]]
name = "a"
type = "revolute"
xyz = [0, 0, 0.5]
axis = [0, 0, 1]
limits = [-180, 180]
radius = 0.05

[[joint]]
name = "b"
type = "revolute"
xyz = [0.5, 0, 0]
axis = [0, 0, 1]
limits = [-180, 180]
radius = 0.04

[[joint]]
name = "c"
type = "revolute"
xyz = [0.3, 0, 0]
axis = [1, 0, 0]
limits = [-180, 180]

[tool]
xyz = [0.3, 0, 0]
"""

# box face at x = 0.844: link 2 (capsule (0.5, 0, 0.5)-(0.8, 0, 0.5), r 0.04) ends 4 mm short of it
CELL = """
[cell]
name = "Clearance test cell"

[[point]]
name = "p"
xyz = [0.6, 0.0, 0.5]

[[box]]
name = "conveyor"
center = [0.944, 0.0, 0.5]
size = [0.2, 0.6, 0.4]

[[keep_out]]
name = "operator"
center = [-1.0, 0.0, 1.0]
size = [0.4, 0.4, 2.0]

[[cylinder]]
name = "pillar"
center = [0.0, 1.2, 1.0]
radius = 0.1
height = 2.0
"""


@pytest.fixture
def files(tmp_path):
    a = tmp_path / "two.toml"
    a.write_text(ARM)
    c = tmp_path / "cell.toml"
    c.write_text(CELL)
    return str(a), str(c)


def _arm_and_cell(files):
    from workbench.arm import read_arm_model
    from workbench.kinematics import Arm
    from workbench.studies.cell import read_cell_file

    return Arm(read_arm_model(files[0])), read_cell_file(files[1])


def test_pose_clearance_names_the_pair_with_the_hand_distance(files):
    from workbench.gui.cellview import pose_clearance

    arm, cell = _arm_and_cell(files)
    pc = pose_clearance(arm, [0.0, 0.0, 0.0], cell, 0.01)
    assert pc.pair == ("link 2", "box 'conveyor'")
    assert pc.distance == pytest.approx(0.844 - 0.8 - 0.04, abs=1e-9)      # 4 mm, by hand
    assert pc.close_bodies == {2}
    assert pc.text() == "link 2 within 4 mm of box 'conveyor'"
    # joint 2 at 30 deg: the end point (0.5 + 0.3 cos 30, 0.3 sin 30) is 44.2 mm from the face
    pc = pose_clearance(arm, [0.0, np.radians(30), 0.0], cell, 0.01)
    assert pc.distance == pytest.approx(0.844 - (0.5 + 0.3 * np.cos(np.radians(30))) - 0.04, abs=1e-9)
    assert pc.close_bodies == set() and not pc.too_close
    assert pc.text() == "nearest: link 2 to box 'conveyor', 44 mm"
    # a bigger clearance setting takes it in again
    assert pose_clearance(arm, [0.0, np.radians(30), 0.0], cell, 0.05).close_bodies == {2}


def test_world_shapes_follow_the_pose(files):
    from workbench.gui.cellview import body_wires, world_shapes

    arm, _cell = _arm_and_cell(files)
    q = [np.radians(90), 0.0, 0.0]                       # joint 1 at 90 deg: both links along +y
    shapes = dict((b, s) for b, s in world_shapes(arm, q))
    assert np.allclose(shapes[1].a, [0, 0, 0.5]) and np.allclose(shapes[1].b, [0, 0.5, 0.5], atol=1e-12)
    assert np.allclose(shapes[2].a, [0, 0.5, 0.5], atol=1e-12) and np.allclose(shapes[2].b, [0, 0.8, 0.5], atol=1e-12)
    w = body_wires(arm, q)[2]
    # the wireframe of the link 2 capsule lies on its surface: every point at distance r of the axis
    t = np.clip((w[:, 1] - 0.5) / 0.3, 0, 1)
    axis_pt = np.column_stack([np.zeros_like(t), 0.5 + 0.3 * t, np.full_like(t, 0.5)])
    assert np.allclose(np.linalg.norm(w - axis_pt, axis=1), 0.04, atol=1e-9)


def test_stripes_stay_on_the_box_faces():
    from workbench.gui.cellview import _corners_from_lo_hi, stripe_segments

    lo, hi = np.array([-1.2, -0.2, 0.0]), np.array([-0.8, 0.2, 2.0])
    s = stripe_segments(_corners_from_lo_hi(lo, hi), spacing=0.1)
    assert len(s) > 24 + 40                           # the 12 edges and many stripes
    assert np.all(s >= lo - 1e-12) and np.all(s <= hi + 1e-12)
    on_side = np.isclose(s[:, 0], lo[0]) | np.isclose(s[:, 0], hi[0]) | np.isclose(s[:, 1], lo[1]) | \
        np.isclose(s[:, 1], hi[1])
    assert on_side.all()


def test_window_turns_the_near_link_red_and_names_the_pair(window, files):
    from workbench.gui.scene import KeepOutItem

    assert window.open_file(files[0]) and window.open_file(files[1])
    window.state.set_q([0.0, 0.0, 0.0])
    assert window.arm_panel.clear_label.text() == "link 2 within 4 mm of box 'conveyor'"
    red = window.scene.close_xy()
    red = red[np.isfinite(red).all(axis=1)]
    # only link 2 is red: its capsule spans x 0.46 .. 0.84 on the top view
    assert len(red) and red[:, 0].min() == pytest.approx(0.46, abs=1e-6) and red[:, 0].max() == pytest.approx(0.84, abs=1e-6)
    x, _y = window.scene._items[0]["shapes"].getData()
    assert np.nanmin(x) == pytest.approx(-0.05, abs=1e-6)          # link 1 still drawn, not red
    # move joint 2 away: nothing red, the panel gives the nearest pair and its distance
    window.state.set_joint(1, np.radians(30))
    assert len(window.scene.close_xy()) == 0
    assert window.arm_panel.clear_label.text() == "nearest: link 2 to box 'conveyor', 44 mm"
    # a larger clearance setting in the panel turns it red again
    window.arm_panel.clear_spin.setValue(50.0)
    assert len(window.scene.close_xy()) > 0
    # the keep-out zone has its own item type and is not among the equipment boxes
    ko = window.scene._items[0]["keepout"]
    assert isinstance(ko, KeepOutItem)
    kx, ky = ko.getData()
    assert np.nanmin(kx) == pytest.approx(-1.2) and np.nanmax(kx) == pytest.approx(-0.8)
    bx, _ = window.scene._items[0]["boxes"].getData()
    assert np.nanmin(bx) == pytest.approx(0.844)
    from workbench.gui.scene import KEEP_OUT_COLOUR

    assert {e[2]: e[0] for e in window.scene_legend.entries}["keep-out zone"] == KEEP_OUT_COLOUR
    px, py = window.scene._items[0]["pillars"].getData()
    assert np.nanmax(np.hypot(px, py - 1.2)) == pytest.approx(0.1)


@pytest.mark.skipif(not __import__("shutil").which("xvfb-run"), reason="needs xvfb-run for a real OpenGL context")
def test_the_3d_scene_draws_shapes_keep_out_and_the_red_link(tmp_path):
    """The 3D scene under a virtual display (offscreen Qt has no OpenGL): its own keep-out item
    type, drawn amber on screen; link 2 (within 4 mm of the box) red, link 1 in the shape colour."""
    import json
    import os
    import subprocess
    import sys

    from workbench.gui.scene import CLOSE_COLOUR, SHAPE_COLOUR

    env = {k: v for k, v in os.environ.items() if k != "QT_QPA_PLATFORM"}
    probe = os.path.join(os.path.dirname(__file__), "scene3d_probe.py")
    r = subprocess.run(["xvfb-run", "-a", "-s", "-screen 0 1280x1024x24", sys.executable, probe, str(tmp_path)],
                       capture_output=True, text=True, env=env, timeout=300)
    line = [ln for ln in r.stdout.splitlines() if ln.startswith("{")]
    assert line, r.stderr[-2000:]
    out = json.loads(line[-1])
    if not out["is_3d"]:
        pytest.skip(f"no OpenGL under the virtual display: {out['note']}")
    assert out["keepout_type"] == "KeepOut3D" and out["boxes_type"] != "KeepOut3D"
    assert out["keepout_points"] > 24                       # edges and stripes
    assert out["amber_pixels"] > 50                         # and they are on screen
    cols = out["shape_colours"]
    assert np.allclose(cols["2"][:3], np.array(CLOSE_COLOUR) / 255)
    assert np.allclose(cols["1"][:3], np.array(SHAPE_COLOUR) / 255)
    assert out["recommended"] == [0.5, 0.5, 0.0]
    assert out["obstacles"] == 2                            # the box and the pillar as solids


def test_the_base_inside_a_box_is_named_and_red(tmp_path):
    """The fixed base against the equipment: a base capsule (0, 0, 0.1)-(0, 0, 0.3), r 0.1, and a
    box whose face is at x = 0.07 overlaps it by 0.1 - 0.07 = 30 mm (by hand)."""
    from workbench.arm import read_arm_model
    from workbench.gui.cellview import pose_clearance
    from workbench.kinematics import Arm
    from workbench.studies.cell import read_cell_file

    a = tmp_path / "based.toml"
    a.write_text(ARM.replace("[tool]", "[[base.shape]]\ntype = \"capsule\"\na = [0, 0, 0.1]\nb = [0, 0, 0.3]\n"
                                       "radius = 0.1\n\n[tool]"))
    c = tmp_path / "cell.toml"
    c.write_text("[cell]\nname = \"base test\"\n[[point]]\nname = \"p\"\nxyz = [0.6, 0, 0.5]\n"
                 "[[box]]\nname = \"cabinet\"\ncenter = [0.27, 0, 0.2]\nsize = [0.4, 0.4, 0.4]\n")
    arm, cell = Arm(read_arm_model(str(a))), read_cell_file(str(c))
    pc = pose_clearance(arm, [0.0, np.radians(90), 0.0], cell, 0.01)   # link 2 turned away from the box
    assert pc.pair == ("base", "box 'cabinet'")
    assert pc.distance == pytest.approx(-0.03, abs=1e-9)
    assert 0 in pc.close_bodies
    assert pc.text() == "base overlaps box 'cabinet' by 30 mm"
    # moved clear of the box (face at x = 0.2): 100 mm, not red
    c.write_text(c.read_text().replace("center = [0.27, 0, 0.2]", "center = [0.4, 0, 0.2]"))
    pc = pose_clearance(arm, [0.0, np.radians(90), 0.0], read_cell_file(str(c)), 0.01)
    assert 0 not in pc.close_bodies
