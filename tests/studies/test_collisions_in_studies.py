"""Collisions where a pose is chosen (issue 9 item 4): known-answer cells worked by hand.

The arm of most cases: a planar 2R arm built in code, joint 1 at height 0.5 m turning about z, two
links of 1 m, each a capsule of radius 0.05 m along the link (no base or tool shapes unless a test
adds them). Links 1 and 2 are neighbours (never checked against each other), so only the cell's
obstacles count. Tool tip on a work point at (1.5, 0, 0.5) from a base at the origin: the elbow sits
at (0.75, +-0.661) (law of cosines, worked by hand), the tip's capsule reaches x = 1.55.
"""
import math
from dataclasses import replace

import numpy as np
import pytest

from workbench.arm.model import ArmModel, Joint
from workbench.arm.shapes import capsule, sphere
from workbench.arm.transforms import translation
from workbench.kinematics import Arm
from workbench.studies import collide
from workbench.studies.base import Chunk, StudyError
from workbench.studies.cell import parse_cell_text
from workbench.studies.mount_search import MountSearch, evaluate_mounts
from workbench.studies.plausibility import study_warnings
from workbench.studies.spec import StudySpec

R = 0.05


def arm_2r(shapes=True, base_shapes=()):
    link = (capsule([0, 0, 0], [1, 0, 0], R),) if shapes else ()
    j1 = Joint("j1", "revolute", translation(0, 0, 0.5), np.array([0.0, 0, 1]), shapes=link)
    j2 = Joint("j2", "revolute", translation(1, 0, 0), np.array([0.0, 0, 1]), shapes=link)
    return Arm(ArmModel("2R", (j1, j2), end=translation(1, 0, 0), base_shapes=tuple(base_shapes)))


def cell_text(wall_x=None, region="x = [0.0, 0.0]\ny = [0.0, 0.0]\nstep = 0.5", boxes=""):
    wall = "" if wall_x is None else (f"[[box]]\nname = \"wall\"\ncenter = [{wall_x}, 0, 0.5]\n"
                                      "size = [0.1, 6.0, 1.0]\n")
    return (f"[cell]\nname = \"c\"\nfloor = false\n[[point]]\nname = \"p\"\nxyz = [1.5, 0, 0.5]\n"
            f"orientation = \"free\"\n{wall}{boxes}[mount]\n{region}\n")


def run_mount(arm, text, settings=None):
    cell = parse_cell_text(text, "c.toml")
    kind = MountSearch()
    st = {"seeds": 8, "refine": 0, "sensitivity": False, "rows": ["vx", "vy"], "measure": "manipulability"}
    st.update(settings or {})
    plan = kind.plan(StudySpec(kind="mount_search", arm="2r", cell="c.toml", settings=st), arm, cell)
    return plan, kind.compute_chunk(plan, arm, cell, Chunk(0, 0, plan.cells))


def test_a_wall_between_base_and_point_makes_it_unreached_and_moving_it_away_flips_it_back():
    arm = arm_2r()
    # wall at x = 0.70 .. 0.80 across the whole cell: the chain from the base (x = 0) to the tip
    # (x = 1.5) must cross it (continuity: worked by hand), so no solution is clear
    plan, a = run_mount(arm, cell_text(wall_x=0.75))
    assert a["point_reached"][0, 0] == 0
    assert a["point_colliding"][0, 0] == 1       # IK reaches it, but only through the wall
    assert a["score"][0] == 0.0
    assert np.isnan(a["min_clearance"][0])
    # moved behind the point (x = 2.45 .. 2.55): reached again; nearest is the tip's capsule at
    # x = 1.5 + 0.05, so the clearance is 2.45 - 1.55 = 0.9 m (worked by hand)
    plan, b = run_mount(arm, cell_text(wall_x=2.5))
    assert b["point_reached"][0, 0] == 1 and b["point_colliding"][0, 0] == 0
    assert b["point_clearance"][0, 0] == pytest.approx(0.9, abs=1e-6)  # IK position tolerance 1e-6 m
    assert b["min_clearance"][0] == pytest.approx(0.9, abs=1e-6)  # IK position tolerance 1e-6 m
    # Yoshikawa, "Manipulability of robotic mechanisms", IJRR 1985: planar 2R w = l1 l2 |sin th2|;
    # tip at 1.5 m: cos th2 = (1.5^2 - 2) / 2 = 0.125, w = sqrt(1 - 0.125^2) (worked by hand)
    assert b["point_measure"][0, 0] == pytest.approx(math.sqrt(1 - 0.125 ** 2), abs=1e-6)


def test_the_asked_clearance_decides():
    arm = arm_2r()
    # wall face 0.9 m from the tip's capsule: enough for 0.5 m of clearance, not for 0.95 m
    _p, a = run_mount(arm, cell_text(wall_x=2.5), {"clearance": 0.5})
    assert a["point_reached"][0, 0] == 1
    _p, b = run_mount(arm, cell_text(wall_x=2.5), {"clearance": 0.95})
    assert b["point_reached"][0, 0] == 0 and b["point_colliding"][0, 0] == 1


def test_collisions_false_gives_the_old_results():
    arm = arm_2r()
    plan0, a0 = run_mount(arm, cell_text(wall_x=0.75), {"collisions": False})
    assert a0["point_reached"][0, 0] == 1                   # the wall is ignored
    assert "point_clearance" not in a0 and "min_clearance" not in a0
    assert plan0.data["result_attrs"]["collisions"].startswith("not checked: switched off")
    # the same numbers as evaluating without any collision settings (the settings' defaults)
    cell = parse_cell_text(cell_text(wall_x=0.75), "c.toml")
    s_old = replace(plan0.settings, cell=None, collisions=False)
    from workbench.studies.cell import mount_transforms

    ev = evaluate_mounts(arm, mount_transforms(0.0, 0.0, 0.0, 0.0, 0.0)[None], cell.points, s_old,
                         choose=s_old.solutions)
    np.testing.assert_array_equal(a0["q"], ev["q"])
    np.testing.assert_array_equal(a0["point_measure"], ev["measure"])


def test_a_mount_inside_a_box_is_infeasible():
    # base shape: a sphere of 0.1 m at the base origin; a box 0.3 x 0.3 x 0.4 centred at
    # (0.5, 0, 0): from the candidate at x = 0.5 the sphere's centre lies 0.15 m inside (nearest
    # side faces), so the signed distance is -(0.15 + 0.1) = -0.25 m; from x = 0 the box's face at
    # x = 0.35 is 0.35 - 0.1 = 0.25 m away (worked by hand). The links (z >= 0.45) clear the box
    # top (z = 0.2) by 0.25 m, so both candidates reach the point by reach alone.
    arm = arm_2r(base_shapes=(sphere([0, 0, 0], 0.1),))
    box = "[[box]]\nname = \"plinth\"\ncenter = [0.5, 0, 0]\nsize = [0.3, 0.3, 0.4]\n"
    plan, a = run_mount(arm, cell_text(region="x = [0.0, 0.5]\ny = [0.0, 0.0]\nstep = 0.5", boxes=box))
    x = plan.axes[-1].values
    i0, i5 = int(np.argmin(np.abs(x - 0.0))), int(np.argmin(np.abs(x - 0.5)))
    bc = a["base_clearance"].reshape(-1)
    assert bc[i0] == pytest.approx(0.25, abs=1e-9)
    assert bc[i5] == pytest.approx(-0.25, abs=1e-9)
    pr = a["point_reached"].reshape(len(x), -1)
    assert pr[i0, 0] == 1 and pr[i5, 0] == 0
    assert a["score"].reshape(-1)[i5] == 0.0 and a["score"].reshape(-1)[i0] > 0
    # with collisions off the inside mount serves the point (the old, physically wrong answer)
    _p, b = run_mount(arm, cell_text(region="x = [0.0, 0.5]\ny = [0.0, 0.0]\nstep = 0.5", boxes=box),
                      {"collisions": False})
    assert b["point_reached"].reshape(len(x), -1)[i5, 0] == 1


class _Prep:
    def __init__(self, plan, arm, cell):
        self.plan, self.arm, self.cell = plan, arm, cell


def test_an_arm_without_shapes_gives_the_warning_and_the_note():
    arm = arm_2r(shapes=False)
    text = cell_text(wall_x=0.75)
    plan, a = run_mount(arm, text)
    assert a["point_reached"][0, 0] == 1                    # nothing to check against: reached
    assert plan.data["result_attrs"]["collisions"] == "not checked: the arm has no collision shapes"
    assert "point_clearance" not in a
    w = study_warnings(_Prep(plan, arm, parse_cell_text(text, "c.toml")))
    assert collide.NO_SHAPES_WARNING in w
    # an arm with shapes: checked, no such warning
    plan2, _ = run_mount(arm_2r(), text)
    assert plan2.data["result_attrs"] == {"collisions": "checked", "clearance": 0.01}
    assert collide.NO_SHAPES_WARNING not in study_warnings(_Prep(plan2, arm_2r(), parse_cell_text(text, "c.toml")))


@pytest.mark.parametrize("bad", [-0.01, float("nan"), "1 cm", True, 2.0])
def test_bad_clearance_settings_are_one_clear_error(bad):
    with pytest.raises(StudyError, match=r"clearance: expected a distance in metres from 0 to 1"):
        run_mount(arm_2r(), cell_text(), {"clearance": bad})
    with pytest.raises(StudyError, match=r"collisions: expected true or false"):
        run_mount(arm_2r(), cell_text(), {"collisions": "yes"})


def test_span_sentence_names_the_pair():
    assert collide.span_sentence(("link 3", "box 'conveyor'"), 0.004) == "link 3 within 4 mm of box 'conveyor'"
    assert collide.span_sentence(("tool", "floor"), -0.002) == "tool overlaps floor by 2 mm"


# ----------------------------------------------------------------------------------------------
# reach slice: the status bit "reached only by colliding solutions" and the clearance field


def _elbow_boxes(*signs):
    """Boxes 0.1 m on a side centred on the elbow of the solutions for the tip at (1.5, 0):
    law of cosines (worked by hand) puts the elbow at (0.75, +-sqrt(1 - 0.75^2)) = (0.75, +-0.6614)."""
    y = math.sqrt(1 - 0.75 ** 2)
    return "".join(f"[[box]]\nname = \"elbow {'up' if sg > 0 else 'down'}\"\ncenter = [0.75, {sg * y!r}, 0.5]\n"
                   f"size = [0.1, 0.1, 0.1]\n" for sg in signs)


def run_slice(arm, boxes, settings=None):
    from workbench.studies.reach_slice import ReachSlice

    text = f"[cell]\nname = \"c\"\nfloor = false\n[[point]]\nname = \"p\"\nxyz = [1.5, 0, 0.5]\n{boxes}"
    cell = parse_cell_text(text, "c.toml")
    st = {"grid": "plane", "plane": "xy", "at": 0.5, "u": [1.5, 1.5], "v": [0.0, 0.0], "steps": [1, 1],
          "orientation": "free", "seeds": 8, "rows": ["vx", "vy"], "best": "manipulability"}
    st.update(settings or {})
    kind = ReachSlice()
    plan = kind.plan(StudySpec(kind="reach_slice", arm="2r", cell="c.toml", settings=st), arm, cell)
    return plan, kind.compute_chunk(plan, arm, cell, Chunk(0, 0, plan.cells)), kind


def test_reach_slice_status_bit_when_every_solution_collides():
    from workbench.studies.reach_slice import COLLIDING, REACHED

    arm = arm_2r()
    plan, a, kind = run_slice(arm, _elbow_boxes(1, -1))
    assert plan.fields[0].flags[COLLIDING] == "reached only by colliding solutions"
    st = int(a["status"][0])
    assert st & COLLIDING and not st & REACHED
    assert a["solutions"][0] == 0 and np.all(np.isnan(a["q"][0]))
    # each elbow's capsules run through their box's centre: the segment's deepest point is 0.05 m
    # inside (half the box), so the signed distance is -(0.05 + 0.05) = -0.1 m (worked by hand)
    assert a["clearance"][0] == pytest.approx(-0.1, abs=1e-6)
    summary = kind.summarise(plan, a)["reach"].columns
    assert summary["colliding_only"][0] == 1 and summary["reached"][0] == 0


def test_reach_slice_keeps_the_clear_branch_and_its_clearance():
    from workbench.studies.reach_slice import COLLIDING, REACHED

    arm = arm_2r()
    _plan, a, _k = run_slice(arm, _elbow_boxes(1))          # only the elbow-up branch is blocked
    st = int(a["status"][0])
    assert st & REACHED and not st & COLLIDING
    assert a["solutions"][0] == 1
    # the elbow-down solution (worked by hand): q1 = -acos(0.75), q2 = 2 acos(0.75)
    c = math.acos(0.75)
    np.testing.assert_allclose(a["q"][0], [-c, 2 * c], atol=1e-5)
    # its clearance to the elbow-up box against dense sampling of both link axes (numpy, point to
    # axis-aligned box distance), minus the capsule radius
    e = np.array([0.75, -math.sqrt(1 - 0.75 ** 2)])
    t = np.linspace(0, 1, 20001)[:, None]
    pts = np.vstack([t * e, e + t * (np.array([1.5, 0]) - e)])
    lo, hi = np.array([0.70, math.sqrt(1 - 0.75 ** 2) - 0.05]), np.array([0.80, math.sqrt(1 - 0.75 ** 2) + 0.05])
    gap = np.maximum(np.maximum(lo - pts, pts - hi), 0)
    ref = np.min(np.linalg.norm(gap, axis=1)) - R
    assert a["clearance"][0] == pytest.approx(ref, abs=1e-4)


def test_reach_slice_collisions_false_gives_the_old_results():
    from workbench.studies.reach_slice import COLLIDING, REACHED

    arm = arm_2r()
    plan, a, _k = run_slice(arm, _elbow_boxes(1, -1), {"collisions": False})
    _p0, a0, _k0 = run_slice(arm_2r(shapes=False), "", {})     # no shapes: nothing to check
    assert int(a["status"][0]) & REACHED and not int(a["status"][0]) & COLLIDING
    assert "clearance" not in a and "clearance" not in a0
    for key in ("status", "solutions", "q", "manipulability"):
        np.testing.assert_array_equal(a[key], a0[key])
    assert plan.data["result_attrs"]["collisions"] == "not checked: switched off in the study settings (collisions = false)"
    assert _p0.data["result_attrs"]["collisions"] == "not checked: the arm has no collision shapes"


# ----------------------------------------------------------------------------------------------
# path audit: clearance along the path and the spans below the setting, with the pair named

PATH_CELL = """[cell]
name = "c"
floor = false
[[point]]
name = "a"
xyz = [1.5, -0.31, 0.5]
orientation = "free"
[[point]]
name = "b"
xyz = [1.5, 0.31, 0.5]
orientation = "free"
[[path]]
name = "line"
speed = 100
through = ["a", "b"]
[[box]]
name = "post"
center = [1.75, 0, 0.5]
size = [0.1, 0.1, 1.0]
"""


def run_audit(arm, settings):
    from workbench.studies.path_audit import PathAudit

    cell = parse_cell_text(PATH_CELL, "c.toml")
    kind = PathAudit()
    st = {"spacing": 0.02, "rows": ["vx", "vy"], "seeds": 8}
    st.update(settings)
    plan = kind.plan(StudySpec(kind="path_audit", arm="2r", cell="c.toml", settings=st), arm, cell)
    a = kind.compute_chunk(plan, arm, cell, Chunk(0, 0, plan.cells))
    return plan, a, kind.summarise(plan, a)


def test_path_audit_clearance_along_the_path_and_the_span_named():
    from workbench.studies.path_audit import COLLIDING, REACHED

    arm = arm_2r()
    plan, a, tables = run_audit(arm, {"clearance": 0.2})
    y = -0.31 + a["distance"]
    # reference: dense sampling of both link axes at the tracked joint values (planar FK by hand:
    # elbow (cos q1, sin q1), tip elbow + (cos(q1 + q2), sin(q1 + q2))), point to the post's
    # footprint x 1.70 .. 1.80, y -0.05 .. 0.05, minus the capsule radius
    q = a["q"]
    e = np.stack([np.cos(q[:, 0]), np.sin(q[:, 0])], axis=1)
    tip = e + np.stack([np.cos(q.sum(axis=1)), np.sin(q.sum(axis=1))], axis=1)
    t = np.linspace(0, 1, 4001)[None, :, None]
    pts = np.concatenate([t * e[:, None], e[:, None] + t * (tip - e)[:, None]], axis=1)
    gap = np.maximum(np.maximum(np.array([1.70, -0.05]) - pts, pts - np.array([1.80, 0.05])), 0)
    ref = np.linalg.norm(gap, axis=2).min(axis=1) - R
    np.testing.assert_allclose(a["clearance"], ref, atol=1e-5)
    # inside the span the tip is the nearest point (worked by hand): the face x = 1.70 for
    # |y| <= 0.05 (0.15 m), else the edge at y = +-0.05: sqrt(0.2^2 + (|y| - 0.05)^2) - 0.05
    span = np.abs(y) < 0.2
    hand = np.where(np.abs(y) <= 0.05, 0.15, np.hypot(0.2, np.abs(y) - 0.05) - R)
    np.testing.assert_allclose(a["clearance"][span], hand[span], atol=1e-5)
    # below 0.2 m exactly where |y| < 0.2, i.e. path distance 0.11 .. 0.51: samples 0.12 .. 0.50
    low = a["clearance"] < 0.2
    np.testing.assert_array_equal(low, np.abs(y) < 0.2)
    assert np.all((a["flags"][low] & COLLIDING) > 0) and not np.any(a["flags"][~low] & COLLIDING)
    assert np.all((a["flags"] & REACHED) > 0)   # the tracked branch reaches them: measures kept
    t = tables["clearance_spans"].columns
    assert len(t["path"]) == 1 and t["path"][0] == "line"
    assert t["from"][0] == pytest.approx(120, abs=1e-6) and t["to"][0] == pytest.approx(500, abs=1e-6)
    assert t["min_clearance"][0] == pytest.approx(150, abs=1e-2)
    assert t["note"][0] == "link 2 within 150 mm of box 'post'"
    assert plan.data["result_attrs"] == {"collisions": "checked", "clearance": 0.2}


def test_path_audit_collisions_false_gives_the_old_results():
    from workbench.studies.path_audit import REACHED

    _p, a, tables = run_audit(arm_2r(), {"clearance": 0.2, "collisions": False})
    _p0, a0, _t0 = run_audit(arm_2r(shapes=False), {})
    assert "clearance" not in a and "clearance_spans" not in tables
    assert np.all((a["flags"] & REACHED) > 0)
    for key in ("flags", "q", "manipulability", "speed_ratio"):
        np.testing.assert_array_equal(a[key], a0[key])


# ----------------------------------------------------------------------------------------------
# load map: only clear solutions hold the payload; clearance per cell at the chosen pose


def arm_2r_masses():
    """The 2R arm above with link masses 2 and 1 kg (centres mid-link) and torque limits 60 / 20 N m."""
    link = (capsule([0, 0, 0], [1, 0, 0], R),)
    j1 = Joint("j1", "revolute", translation(0, 0, 0.5), np.array([0.0, 0, 1]), -math.pi, math.pi, None, 60.0,
               2.0, np.array([0.5, 0, 0]), shapes=link)
    j2 = Joint("j2", "revolute", translation(1, 0, 0), np.array([0.0, 0, 1]), -math.pi, math.pi, None, 20.0,
               1.0, np.array([0.5, 0, 0]), shapes=link)
    return Arm(ArmModel("2R with masses", (j1, j2), end=translation(1, 0, 0)))


def run_load(arm, boxes, settings=None):
    from workbench.studies.load_map import LoadMap

    text = f"[cell]\nname = \"c\"\nfloor = false\n[[point]]\nname = \"p\"\nxyz = [1.5, 0, 0.5]\n{boxes}"
    cell = parse_cell_text(text, "c.toml")
    st = {"grid": "plane", "plane": "xy", "at": 0.5, "u": [1.5, 1.5], "v": [0.0, 0.0], "step": 0.1,
          "orientation": "free", "seeds": 8, "gravity": [0, -9.81, 0]}
    st.update(settings or {})
    kind = LoadMap()
    plan = kind.plan(StudySpec(kind="load_map", arm="2r", cell="c.toml", settings=st), arm, cell)
    return plan, kind.compute_chunk(plan, arm, cell, Chunk(0, 0, plan.cells))


def test_load_map_holds_only_with_clear_solutions():
    arm = arm_2r_masses()
    plan, a = run_load(arm, _elbow_boxes(1, -1))
    assert int(a["reached"][0]) == 2 and np.isnan(a["payload"][0])   # both branches collide
    assert a["clearance"][0] == pytest.approx(-0.1, abs=1e-6)      # as in the reach slice, by hand
    plan, b = run_load(arm, _elbow_boxes(1))
    assert int(b["reached"][0]) == 1
    c = math.acos(0.75)
    np.testing.assert_allclose(b["q"][0], [-c, 2 * c], atol=1e-5)     # the elbow-down branch
    # statics worked by hand, gravity 9.81 along -y, tau_z = -m g x about each joint: joint 2 (elbow
    # at x = 0.75): 9.81 (1 kg * 0.375 m + m * 0.75 m) <= 20 N m gives m <= 2.218 kg; joint 1:
    # 9.81 (2 * 0.375 + 1 * 1.125 + m * 1.5) <= 60 gives m <= 2.828 kg: joint 2 limits
    assert b["payload"][0] == pytest.approx((20 / 9.81 - 0.375) / 0.75, rel=1e-6)
    assert b["limiting_joint"][0] == 1
    assert b["clearance"][0] > 0.01
    plan, o = run_load(arm, _elbow_boxes(1, -1), {"collisions": False})
    assert int(o["reached"][0]) == 1 and "clearance" not in o
    assert o["payload"][0] == pytest.approx((20 / 9.81 - 0.375) / 0.75, rel=1e-6)


def test_workbench_run_warns_when_the_arm_has_no_shapes(tmp_path):
    # the demo planar 2R arm file has no collision shapes: a real `workbench run` of a reach slice
    # prints the warning line and stores the note in the results file
    import os
    import subprocess
    import sys
    from pathlib import Path

    from workbench.results import read_results

    root = Path(__file__).resolve().parents[2]
    study = tmp_path / "s.toml"
    study.write_text(f"[study]\nname = \"no shapes\"\nkind = \"reach_slice\"\narm = \"{(root / 'arms' / 'demo_planar2r.toml').as_posix()}\"\n"
                     "[settings]\nplane = \"xy\"\nu = [0.2, 0.6]\nv = [-0.2, 0.2]\nsteps = [3, 3]\n"
                     "orientation = \"free\"\nrows = [\"vx\", \"vy\"]\nseeds = 2\n")
    out = tmp_path / "r.h5"
    env = dict(os.environ, PYTHONPATH=str(root))
    p = subprocess.run([sys.executable, "-m", "workbench", "run", str(study), "--out", str(out), "--in-process"],
                       capture_output=True, text=True, env=env, cwd=tmp_path, timeout=600)
    assert p.returncode == 0, p.stderr
    assert f"warning: {collide.NO_SHAPES_WARNING}" in p.stderr.splitlines()
    r = read_results(out)
    assert r.attrs["collisions"] == "not checked: the arm has no collision shapes"
    assert not any(f.name == "clearance" for f in r.fields)
    from workbench.decision import collision_status

    checked, _asked, sentence = collision_status(r)
    assert not checked and "the arm has no collision shapes" in sentence  # from the results' note alone


def test_reach_slice_with_collisions_does_not_depend_on_the_chunking():
    from workbench.studies.reach_slice import COLLIDING, ReachSlice

    arm = arm_2r()
    text = f"[cell]\nname = \"c\"\nfloor = false\n[[point]]\nname = \"p\"\nxyz = [1.5, 0, 0.5]\n{_elbow_boxes(1)}"
    cell = parse_cell_text(text, "c.toml")
    st = {"grid": "plane", "plane": "xy", "at": 0.5, "u": [0.3, 1.9], "v": [-0.9, 0.9], "steps": [9, 7],
          "orientation": "free", "seeds": 2, "rows": ["vx", "vy"], "best": "manipulability"}
    kind = ReachSlice()
    plan = kind.plan(StudySpec(kind="reach_slice", arm="2r", cell="c.toml", settings=st), arm, cell)
    whole = kind.compute_chunk(plan, arm, cell, Chunk(0, 0, plan.cells))
    small = plan.with_chunk_cells(4)
    parts = [kind.compute_chunk(small, arm, cell, c) for c in small.chunks]
    for key in ("status", "q", "clearance", "solutions"):
        np.testing.assert_array_equal(np.concatenate([p[key] for p in parts]), whole[key])
    # the grid holds (1.5, 0): the box leaves it the elbow-down solution only (as above)
    k = int(np.argmin(np.linalg.norm(whole["target"] - [1.5, 0, 0.5], axis=1)))
    assert np.allclose(whole["target"][k], [1.5, 0, 0.5]) and whole["solutions"][k] == 1
    assert not whole["status"][k] & COLLIDING


def test_the_quality_grades_the_clearance_to_obstacles_not_the_arm_to_itself():
    """The arm's clearance to itself decides whether a pose counts; the quality's clearance factor
    min(1, c / 0.1 m)^0.5 reads the clearance to the cell's obstacles (a property of the mount)."""
    from workbench.studies.mount_search import CLEARANCE_FULL, score_candidates

    # a base housing: sphere of radius 0.93 m about the first joint (base frame, arm plane z = 0.5)
    arm = arm_2r(base_shapes=(sphere([0, 0, 0.5], 0.93),))
    # tip at (1.5, 0): the elbow angle has cos th2 = 0.125 (worked by hand), so the angle at the
    # elbow in the base-elbow-tip triangle is pi - th2 = 97.2 deg > 90 deg: link 2's nearest point
    # to the base centre is the elbow, 1 m away -> self clearance 1 - 0.93 - 0.05 = 0.02 m;
    # wall face at x = 1.61, tip capsule ends at 1.55 -> obstacle clearance 0.06 m (by hand)
    plan, a = run_mount(arm, cell_text(wall_x=1.66))
    assert a["point_reached"][0, 0] == 1
    assert a["min_clearance"][0] == pytest.approx(0.02, abs=1e-6)          # what decides feasibility
    assert a["min_obstacle_clearance"][0] == pytest.approx(0.06, abs=1e-6)  # what the quality grades
    s = plan.settings
    q0 = score_candidates(a["point_reached"].astype(bool), a["point_measure"],
                          np.asarray([[a["min_margin"][0]]]), s)["score"][0]
    assert a["score"][0] == pytest.approx(q0 * (0.06 / CLEARANCE_FULL) ** 0.5, rel=1e-6)
    assert a["score"][0] != pytest.approx(q0 * (0.02 / CLEARANCE_FULL) ** 0.5, rel=1e-3)
