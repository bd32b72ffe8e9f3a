"""Load map: a 2R arm with link masses and torque limits against a statics example worked by hand."""
import math

import numpy as np
import pytest

from workbench import load_arm
from workbench.arm.model import ArmModel, Joint
from workbench.arm.transforms import translation
from workbench.kinematics import Arm
from workbench.studies.base import Chunk, StudyError
from workbench.studies.load_map import LoadMap
from workbench.studies.spec import StudySpec

ROOT = __import__("pathlib").Path(__file__).resolve().parents[2]
G = 9.81


def arm_2r(masses=(2.0, 1.0), efforts=(60.0, 20.0)):
    """l1 = l2 = 1 m, axes along z, centres of mass at the middle of each link, tool at the tip."""
    j1 = Joint("th1", "revolute", np.eye(4), np.array([0.0, 0, 1]), -math.pi, math.pi, None, efforts[0],
               masses[0], np.array([0.5, 0, 0]))
    j2 = Joint("th2", "revolute", translation(1, 0, 0), np.array([0.0, 0, 1]), -math.pi, math.pi, None,
               efforts[1], masses[1], np.array([0.5, 0, 0]))
    return Arm(ArmModel("2R with masses", (j1, j2), end=translation(1, 0, 0)))


def run_grid(arm, settings):
    kind = LoadMap()
    plan = kind.plan(StudySpec(kind="load_map", arm="2r", settings=settings), arm, None)
    return plan, kind.compute_chunk(plan, arm, None, Chunk(0, 0, plan.cells)), kind


def test_payload_matches_statics_worked_by_hand():
    # Worked by hand. Gravity g = 9.81 m/s^2 along -y, in the plane of the arm; m1 = 2 kg, m2 = 1 kg
    # at the middle of each 1 m link; torque limits 60 and 20 N m; payload m at the tip.
    # q = (0, 0), arm stretched along +x:
    #   own torques  tau1 = g (2 * 0.5 + 1 * 1.5) = 24.525,  tau2 = g (1 * 0.5) = 4.905
    #   per kg       b1 = 2 g = 19.62,  b2 = 1 g = 9.81
    #   joint 1: m <= (60 - 24.525) / 19.62 = 1.80810;  joint 2: m <= (20 - 4.905) / 9.81 = 1.53874
    #   -> payload 1.53874 kg, limited by joint 2
    # q = (0, 90 deg), link 2 points up (+y):
    #   tau1 = g (2 * 0.5 + 1 * 1.0) = 19.62, tau2 = 0; b1 = g * 1 = 9.81, b2 = 0 (tip above joint 2)
    #   -> payload (60 - 19.62) / 9.81 = 4.11621 kg, limited by joint 1
    # q = (90 deg, 0), the arm points straight up: no torque at all -> unbounded (inf), no limiting joint
    arm = arm_2r()
    plan, a, _ = run_grid(arm, {"grid": "joints", "joints": ["th1", "th2"], "ranges": [[0, 90], [0, 90]],
                                "steps": [2, 2], "gravity": [0, -G, 0]})
    assert plan.shape == (2, 2)  # rows: th2, columns: th1
    pay = a["payload"].reshape(2, 2)
    lim = a["limiting_joint"].reshape(2, 2)
    assert pay[0, 0] == pytest.approx((20 - 4.905) / 9.81, rel=1e-9)
    assert lim[0, 0] == 1
    assert pay[1, 0] == pytest.approx((60 - 19.62) / 9.81, rel=1e-9)
    assert lim[1, 0] == 0
    assert np.isinf(pay[0, 1]) and lim[0, 1] == -1
    own = a["own_load"].reshape(2, 2)
    assert own[0, 0] == pytest.approx(max(24.525 / 60, 4.905 / 20), rel=1e-9)


def test_arm_that_cannot_hold_itself_gets_zero():
    # worked by hand: q = (0, 0) needs 24.525 N m at joint 1 for the arm alone; a 20 N m limit -> 0 kg
    arm = arm_2r(efforts=(20.0, 20.0))
    _, a, kind = run_grid(arm, {"grid": "joints", "joints": ["th1"], "ranges": [[0, 10]], "steps": [2],
                                "gravity": [0, -G, 0]})
    assert a["payload"][0] == 0.0


def test_missing_masses_or_limits_are_refused_clearly():
    arm = arm_2r()
    m = arm.model
    from dataclasses import replace

    no_mass = Arm(replace(m, joints=(replace(m.joints[0], mass=None), m.joints[1])))
    with pytest.raises(StudyError, match=r"joint 1 \('th1'\) has no 'mass'"):
        LoadMap().plan(StudySpec(kind="load_map", arm="2r", settings={"joints": ["th1"], "ranges": [[0, 1]]}),
                       no_mass, None)
    no_eff = Arm(replace(m, joints=(m.joints[0], replace(m.joints[1], max_effort=None))))
    with pytest.raises(StudyError, match=r"joint 2 \('th2'\) has no 'max_effort'"):
        LoadMap().plan(StudySpec(kind="load_map", arm="2r", settings={"joints": ["th1"], "ranges": [[0, 1]]}),
                       no_eff, None)
    with pytest.raises(StudyError, match="no joint named 'elbow'"):
        LoadMap().plan(StudySpec(kind="load_map", arm="2r", settings={"joints": ["elbow"], "ranges": [[0, 1]]}),
                       arm, None)


def test_plane_slice_of_the_demo_arm():
    arm = load_arm(ROOT / "arms" / "demo_s6.toml")
    plan, a, kind = run_grid(arm, {"grid": "plane", "plane": "xz", "u": [0.3, 3.0], "v": [0.4, 0.4], "at": 0.0,
                                   "step": 0.3, "orientation": "free", "seeds": 4})
    reached = a["reached"] > 0
    assert reached[0] and not reached[-1]  # 3 m away is beyond the arm's reach
    assert np.all(np.isnan(a["payload"][~reached]))
    q = a["q"][reached]
    from workbench.measures import max_payload

    np.testing.assert_allclose(a["payload"][reached], max_payload(arm, q)[0])
    tables = kind.summarise(plan, a)
    assert tables["load"].columns["reached_cells"][0] == reached.sum()
