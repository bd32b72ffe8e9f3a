"""Holding-torque chart of the arm panel and the requirement verdicts tab.

Hand statics: a two-link arm in a vertical plane (both axes along +y, links along x at q = 0).
A weight m at horizontal distance x from a joint axis about +y needs a joint torque -m g x; a
force F that the tool exerts at the TCP needs tau = J^T F (Craig, Introduction to Robotics,
ch. 5, from memory); for a joint about +y at the origin and a point (x, 0, z) the Jacobian's z row
is -x (v = w x p)."""
import numpy as np
import pytest

G = 9.81

ARM = """
[arm]
name = "Vertical 2R (test)"
geometry = "origins"
length_unit = "m"
home = [0, 0]

[[joint]]
name = "a"
type = "revolute"
xyz = [0, 0, 0]
axis = [0, 1, 0]
limits = [-180, 180]
max_effort = 100
mass = 2.0
com = [0.3, 0, 0]

[[joint]]
name = "b"
type = "revolute"
xyz = [0.6, 0, 0]
axis = [0, 1, 0]
limits = [-180, 180]
max_effort = EFFORT_B
mass = 1.0
com = [0.2, 0, 0]

[tool]
xyz = [0.4, 0, 0]
"""

CELL = """
[cell]
name = "Torque test cell"
floor = false

[requirements]
payload = 3.0
force = [0, 0, -50]          # the tool presses down with 50 N
wrench_frame = "cell"

[[point]]
name = "p"
xyz = [1.0, 0.0, 0.0]

[[point]]
name = "light"
xyz = [1.0, 0.0, 0.0]
requirements = {payload = 0, force = [0, 0, 0]}
"""


def _hand(q2=0.0):
    """Parts of the holding torques by hand at q = (0, q2)."""
    c = np.cos(q2)
    x_c2, x_tcp = 0.6 + 0.2 * c, 0.6 + 0.4 * c
    links = np.array([-G * (2.0 * 0.3 + 1.0 * x_c2), -G * 1.0 * 0.2 * c])
    payload = np.array([-G * 3.0 * x_tcp, -G * 3.0 * 0.4 * c])
    wrench = np.array([-x_tcp * -50.0, -0.4 * c * -50.0])
    return links, payload, wrench


@pytest.fixture
def files(tmp_path):
    def make(effort_b=50):
        a = tmp_path / f"v2r_{effort_b}.toml"
        a.write_text(ARM.replace("EFFORT_B", str(effort_b)))
        c = tmp_path / "cell.toml"
        c.write_text(CELL)
        return str(a), str(c)
    return make


def test_torque_bars_are_the_hand_statics(window, files):
    a, c = files(50)
    assert window.open_file(a) and window.open_file(c)
    window.state.set_q([0.0, np.radians(30)])
    ch = window.arm_panel.torques
    links, payload, wrench = _hand(np.radians(30))
    assert np.allclose(ch.parts["links"], links, atol=1e-9)
    assert np.allclose(ch.parts["payload"], payload, atol=1e-9)
    assert np.allclose(ch.parts["wrench"], wrench, atol=1e-9)
    total = links + payload + wrench
    assert np.allclose(ch.parts["total"], total, atol=1e-9)
    # bars are the percentages of the limits (100 N m, 50 N m), as drawn
    assert ch.scaled
    assert np.allclose(ch.heights["total"], 100 * total / [100.0, 50.0], atol=1e-9)
    xs, hs = ch.bars["total"].opts["x"], ch.bars["total"].opts["height"]
    assert np.allclose(xs, [1.3, 2.3]) and np.allclose(hs, 100 * total / [100.0, 50.0])
    # ... and the same as workbench.measures computes them
    from workbench.measures import Payload, holding_parts

    ref = holding_parts(window.state.arm, [0.0, np.radians(30)], force=[0, 0, -50], payload=Payload(3.0),
                        frame="world")
    for k in ("links", "payload", "wrench", "total"):
        assert np.allclose(ch.parts[k], ref[k], atol=1e-12)
    assert ch.verdict.text().startswith("pass: ")
    # a point with its own requirements (no payload, no force): only the arm's weight is left
    assert ch.choose("point", "light")
    assert np.allclose(ch.parts["total"], links, atol=1e-9) and np.allclose(ch.parts["payload"], 0)


def test_torque_over_the_limit_is_a_fail(window, files):
    a, c = files(5)
    assert window.open_file(a) and window.open_file(c)
    window.state.set_q([0.0, 0.0])
    ch = window.arm_panel.torques
    links, payload, wrench = _hand(0.0)
    tb = (links + payload + wrench)[1]          # -1.962 - 11.772 + 20 = 6.266 N m > 5 N m
    assert tb == pytest.approx(6.266, abs=1e-3)
    assert ch.verdict.text().startswith("FAIL: over the limit at b")
    assert f"{abs(tb):.1f} of 5 N m" in ch.verdict.text()


def test_verdicts_tab_and_the_recommended_mount(window, small_cell_results, qtbot):
    from workbench.results import read_results

    _folder, res = small_cell_results
    ms = res["ms"].path
    assert window.open_file(ms), window.last_error
    vv = window.verdict_view
    qtbot.waitUntil(lambda: vv.decision is not None and vv.path == ms, timeout=20000)
    rows = {r[0]: r for r in vv.rows()}
    served = rows["Work points served (reached, inside the joint limits)"]
    assert served[2] == "2 of 2" and served[4] == "pass"
    # the scene marks the results file's own recommended mount (its 'recommended' table, mm -> m)
    ref = read_results(ms, load=False).tables["recommended"].columns
    want = np.array([ref["x"][0], ref["y"][0], ref["height"][0]]) / 1000.0
    assert np.allclose(window.scene.recommended(), want)
    # a path audit: samples reached counted from its arrays; a failed row is shown red
    pa = res["pa"].path
    assert window.open_file(pa), window.last_error
    qtbot.waitUntil(lambda: vv.decision is not None and vv.path == pa, timeout=20000)
    arr = read_results(pa).arrays
    from workbench.studies.path_audit import REACHED

    n_ok = int(((np.asarray(arr["flags"]).astype(int) & REACHED) > 0).sum())     # the study's reached bit
    rows = {r[0]: (i, r) for i, r in enumerate(vv.rows())}
    i, r = rows["Path samples reached"]
    assert r[2] == f"{n_ok} of {len(arr['q'])}"
    assert r[4] == ("pass" if n_ok == len(arr["q"]) else "fail")
    from workbench.gui.verdict_view import STATUS_COLOURS

    assert vv.table.item(i, 4).background().color().getRgb()[:3] == STATUS_COLOURS[r[4]]
    assert window.scene.recommended() is None          # a path audit recommends no mount


def test_while_a_slider_is_dragged_the_torque_chart_follows_the_latest_pose_on_release(window, files, qtbot):
    """A drag redraws the scene and the measures every step; the torque chart is throttled (the latest
    pose wins) and shows the released pose at once, equal to the hand statics there."""
    a, c = files(50)
    assert window.open_file(a) and window.open_file(c)
    panel = window.arm_panel
    row = panel.rows[1]
    row.slider.setSliderDown(True)
    row.slider.setValue(int(round(10 * 10)))        # first step: drawn after the throttle at the latest
    for deg in (15, 20, 25, 30):
        row.slider.setValue(int(round(deg * 10)))
    assert panel._torque_pending is not None         # pending: a drag step does not redraw the chart
    assert np.isclose(window.state.q[1], np.radians(30), atol=np.radians(0.2))   # the pose follows every step
    row.slider.setSliderDown(False)
    row.slider.sliderReleased.emit()
    assert panel._torque_pending is None
    assert np.allclose(panel.torques.q, window.state.q)
    links, payload, wrench = _hand(window.state.q[1])
    assert np.allclose(panel.torques.parts["total"], links + payload + wrench, atol=1e-9)


def test_the_tcp_and_angles_never_read_minus_zero(window):
    from workbench.gui.arm_panel import _one_decimal

    # before: f"{-0.04:.1f}" printed "-0.0" in the TCP and angle fields
    assert [_one_decimal(v) for v in (-0.04, -0.0, 0.04, -0.06, 12.34)] == ["0.0", "0.0", "0.0", "-0.1", "12.3"]
    for q in (np.zeros(window.state.arm.n), np.full(window.state.arm.n, 1e-9)):
        window.state.set_q(q)
        for key in ("tcp", "rpy"):
            assert all(t != "-0.0" for t in window.arm_panel.m_labels[key].text().split(", "))
