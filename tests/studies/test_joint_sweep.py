"""Joint sweep study kind: grid, reduce and samples modes against workbench.measures and a closed form."""
from __future__ import annotations

import math

import numpy as np
import pytest

from workbench import load_arm
from workbench.kinematics.arm import Arm
from workbench.measures import measures
from workbench.studies import Chunk, StudyError, StudySpec, get_kind
from workbench.studies.joint_sweep import NEAR_SINGULAR, OUTSIDE_LIMITS

ROOT = __import__("pathlib").Path(__file__).resolve().parents[2]
S6 = str(ROOT / "arms" / "demo_s6.toml")

TWO_R = """
[arm]
name = "planar 2R test arm"
geometry = "dh"
[[joint]]
name = "th1"
type = "revolute"
a = {l1}
alpha = 0
d = 0
theta = 0
limits = [-180, 180]
[[joint]]
name = "th2"
type = "revolute"
a = {l2}
alpha = 0
d = 0
theta = 0
limits = [-170, 170]
"""


@pytest.fixture(scope="module")
def s6():
    return load_arm(S6)


@pytest.fixture(scope="module")
def kind():
    return get_kind("joint_sweep")


def run_all(kind, plan, arm):
    parts = [kind.compute_chunk(plan, arm, None, c) for c in plan.chunks]
    return {f.name: np.concatenate([p[f.name] for p in parts]) for f in plan.fields}


def test_planar_2r_manipulability_is_l1_l2_abs_sin_th2(tmp_path, kind):
    # Yoshikawa, "Manipulability of robotic mechanisms", IJRR 1985: for the planar two-link arm
    # w = |det J| = l1 l2 |sin th2| with the two translational rows of the tip.
    l1, l2 = 0.7, 0.4
    path = tmp_path / "two_r.toml"
    path.write_text(TWO_R.format(l1=l1, l2=l2))
    arm = load_arm(path)
    spec = StudySpec("joint_sweep", str(path), settings={"joints": ["th2"], "ranges": [[-170, 170]], "steps": [341],
                                                         "rows": ["vx", "vy"], "pose": [30, 0]})
    plan = kind.plan(spec, arm, None, chunk_cells=50)
    assert plan.shape == (341,) and plan.n_chunks == 7
    out = run_all(kind, plan, arm)
    th2 = plan.axes[0].values
    assert np.allclose(np.degrees(th2[[0, 170, 340]]), [-170, 0, 170])
    np.testing.assert_allclose(out["manipulability"], l1 * l2 * np.abs(np.sin(th2)), rtol=1e-12, atol=1e-15)
    # stretched arm (th2 = 0) is singular, flagged near singular
    assert out["manipulability"][170] < 1e-15 and out["status"][170] & NEAR_SINGULAR
    assert not out["status"][100] & NEAR_SINGULAR


def test_grid_values_match_measures_on_the_same_poses(s6, kind):
    spec = StudySpec("joint_sweep", S6, settings={"joints": ["j2", "j3", "j5"], "steps": [7, 6, 5],
                                                  "ranges": [[-140, 90], [-120, 160], [-125, 125]],
                                                  "pose": [10, 0, 0, 20, 0, 30], "rows": "full", "store_sv": True,
                                                  "store_tcp": True})
    plan = kind.plan(spec, s6, None, chunk_cells=37)
    assert plan.shape == (7, 6, 5)
    out = run_all(kind, plan, s6)
    g = np.meshgrid(*[a.values for a in plan.axes], indexing="ij")
    q = np.tile(np.radians([10, 0, 0, 20, 0, 30]), (plan.cells, 1))
    q[:, 1], q[:, 2], q[:, 4] = g[0].ravel(), g[1].ravel(), g[2].ravel()
    ref = measures(s6.jacobian(q), rows="full", length=s6.nominal_reach())
    for name in ("manipulability", "inverse_condition", "min_sv"):
        np.testing.assert_allclose(out[name], ref[name], rtol=1e-9, atol=1e-12)
    finite = np.isfinite(ref["condition"])
    np.testing.assert_allclose(out["condition"][finite], ref["condition"][finite], rtol=1e-8)
    np.testing.assert_allclose(out["sv"], ref["sv"], rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(out["limit_margin"], s6.limit_margin(q), rtol=0, atol=0)
    np.testing.assert_allclose(out["tcp"], s6.fk(q)[:, :3, 3], atol=1e-12)
    # j5 = 0 (middle of its 5 steps) lines up the wrist axes 4 and 6: singular everywhere
    assert np.all(out["min_sv"].reshape(plan.shape)[:, :, 2] < 1e-9)


def test_samples_are_in_limits_and_independent_of_chunking(s6, kind):
    spec = StudySpec("joint_sweep", S6, settings={"mode": "samples", "samples": 5000, "seed": 3,
                                                  "rows": "translation"})
    a = run_all(kind, kind.plan(spec, s6, None, chunk_cells=999), s6)
    b = run_all(kind, kind.plan(spec, s6, None, chunk_cells=4096), s6)
    for name in a:
        np.testing.assert_array_equal(a[name], b[name])
    assert a["q"].shape == (5000, 6) and np.all(s6.in_limits(a["q"]))
    assert not np.any(a["status"] & OUTSIDE_LIMITS)
    np.testing.assert_allclose(a["tcp"], s6.fk(a["q"])[:, :3, 3], atol=1e-12)
    ref = measures(s6.jacobian(a["q"]), rows="translation")
    np.testing.assert_allclose(a["inverse_condition"], ref["inverse_condition"], rtol=1e-9, atol=1e-12)
    other = run_all(kind, kind.plan(spec.with_settings(seed=4), s6, None), s6)
    assert not np.array_equal(other["q"], a["q"])


def test_reduce_equals_brute_force(s6, kind):
    spec = StudySpec("joint_sweep", S6, settings={"mode": "reduce", "joints": ["j2", "j3"], "steps": [4, 3],
                                                  "ranges": [[-90, 60], [-60, 120]], "coarse_steps": [2, 3, 3, 2]})
    plan = kind.plan(spec, s6, None, chunk_cells=5)
    out = run_all(kind, plan, s6)
    st = plan.settings
    L = s6.nominal_reach()
    others = [0, 3, 4, 5]
    for cell in (0, 7, 11):
        i, j = np.unravel_index(cell, plan.shape)
        grids = [np.linspace(s6.lower[k], s6.upper[k], c) for k, c in zip(others, st.coarse_steps)]
        mesh = np.stack([m.ravel() for m in np.meshgrid(*grids, indexing="ij")], axis=-1)
        q = np.zeros((mesh.shape[0], 6))
        q[:, others] = mesh
        q[:, 1], q[:, 2] = plan.axes[0].values[i], plan.axes[1].values[j]
        ref = measures(s6.jacobian(q), rows="full", length=L)
        inv = ref["inverse_condition"]
        assert math.isclose(out["inverse_condition_min"][cell], inv.min(), rel_tol=1e-9, abs_tol=1e-12)
        assert math.isclose(out["inverse_condition_max"][cell], inv.max(), rel_tol=1e-9)
        assert math.isclose(out["manipulability_mean"][cell], ref["manipulability"].mean(), rel_tol=1e-9)
        np.testing.assert_allclose(out["best_q"][cell], q[np.argmax(inv)])
        np.testing.assert_allclose(out["worst_q"][cell], q[np.argmin(inv)])
        assert math.isclose(out["limit_margin_min"][cell], s6.limit_margin(q).min(), rel_tol=1e-12)
        from workbench.measures import limit_aware_manipulability
        assert math.isclose(out["limit_aware_manipulability_max"][cell],
                            limit_aware_manipulability(s6, q).max(), rel_tol=1e-9)


def test_summary_lists_the_most_singular_poses_in_degrees(s6, kind):
    spec = StudySpec("joint_sweep", S6, settings={"joints": ["j5"], "ranges": [[-20, 20]], "steps": [41],
                                                  "near_singular": 0.02})
    plan = kind.plan(spec, s6, None)
    out = run_all(kind, plan, s6)
    tables = kind.summarise(plan, out)
    t = tables["near_singular"]
    # j5 = 0 (wrist axes 4 and 6 aligned) is the most singular pose of this sweep
    assert t.columns["j5"][0] == 0.0 and t.units["j5"] == "deg"
    assert np.all(np.diff(t.columns["inverse_condition"]) >= 0)
    assert np.all(t.columns["inverse_condition"] < 0.02)
    assert t.columns["j2"][0] == pytest.approx(0.0)  # the home pose, in degrees
    best = tables["best"]
    assert best.columns["inverse_condition"][0] == out["inverse_condition"].max()


@pytest.mark.parametrize("settings, key", [
    ({"joints": ["j2"], "ranges": [[10, -10]], "steps": [5]}, "ranges"),
    ({"joints": ["j2"], "ranges": [[10, 10]], "steps": [5]}, "ranges"),
    ({"joints": ["j2"], "steps": [0]}, "steps"),
    ({"joints": ["j2", "j3"], "steps": [1000000, 1000000]}, "steps"),
    ({"joints": ["j9"]}, "joints"),
    ({"joints": ["j1", "j2", "j3", "j4"]}, "joints"),
    ({"mode": "reduce", "joints": ["j1", "j2", "j3"]}, "joints"),
    ({"joints": ["j2"], "rows": "sideways"}, "rows"),
    ({"joints": ["j2"], "length": -1}, "length"),
    ({"joints": ["j2"], "frame": "nowhere"}, "frame"),
    ({"joints": ["j2"], "colour": "red"}, "colour"),
    ({"mode": "samples", "samples": 0}, "samples"),
    ({"mode": "spiral"}, "mode"),
])
def test_bad_settings_name_the_key(s6, kind, settings, key):
    with pytest.raises(StudyError) as e:
        kind.plan(StudySpec("joint_sweep", S6, settings=settings, source="my_study.toml"), s6, None)
    msg = str(e.value)
    assert msg.startswith("my_study.toml: [settings] " + key), msg
    assert "\n" not in msg


def test_arm_and_plan_pickle(s6, kind):
    import pickle

    plan = kind.plan(StudySpec("joint_sweep", S6, settings={"joints": ["j2"], "steps": [5]}), s6, None)
    arm2, plan2 = pickle.loads(pickle.dumps((s6, plan)))
    assert isinstance(arm2, Arm)
    c = Chunk(0, 0, 5)
    np.testing.assert_array_equal(kind.compute_chunk(plan2, arm2, None, c)["manipulability"],
                                  kind.compute_chunk(plan, s6, None, c)["manipulability"])


@pytest.mark.parametrize("n,k,ties,excluded", [(300_000, 50, False, False), (300_000, 50, True, False),
                                               (200_000, 50, False, True), (70_000, 3000, True, True),
                                               (1000, 50, True, False)])
def test_pose_lists_pick_exactly_what_a_full_sort_picks(n, k, ties, excluded):
    # the summary tables select the k smallest values without sorting everything; numpy's full
    # stable sort (lexsort by value, then cell) is the reference, ties and excluded (inf) cells included
    from workbench.studies.joint_sweep import _smallest

    rng = np.random.default_rng(n + k)
    v = rng.normal(size=n)
    if ties:
        v = np.round(v, 1)
    if excluded:
        v[rng.random(n) < 0.6] = np.inf
    got = _smallest(v, k)
    np.testing.assert_array_equal(got, np.lexsort((np.arange(n), v))[:k])


@pytest.mark.parametrize("n,k,ties,bad", [(300_000, 50, False, False), (300_000, 50, True, True),
                                          (100_000, 50, True, True), (70_000, 3000, False, True),
                                          (500, 50, True, True), (200_000, 10, False, "mostly")])
def test_best_pose_list_picks_exactly_what_a_full_sort_picks(n, k, ties, bad):
    # the k largest finite values, ties by cell: numpy's stable sort of the finite cells is the
    # reference; NaN (unfinished cells) and +-inf must never be picked
    from workbench.studies.joint_sweep import _largest_finite

    rng = np.random.default_rng(n + k + 1)
    v = rng.normal(size=n)
    if ties:
        v = np.round(v, 1)
    if bad:
        share = 0.97 if bad == "mostly" else 0.3
        pick = rng.random(n) < share
        v[pick] = rng.choice([np.nan, np.inf, -np.inf], size=int(pick.sum()))
    fin = np.flatnonzero(np.isfinite(v))
    ref = fin[np.lexsort((fin, -v[fin]))][:k]
    np.testing.assert_array_equal(_largest_finite(v, k), ref)


@pytest.mark.parametrize("mode,extra", [
    ("grid", {"seed": 3, "samples": 50, "coarse_steps": 2, "reduce": ["max"], "best_by": "min_sv"}),
    ("reduce", {"pose": [10, 20, 30, 40, 50, 60], "seed": 3, "samples": 50}),
    ("samples", {"joints": ["j2", "j3"], "ranges": [[0, 10], [0, 10]], "steps": [3, 3], "pose": [1] * 6,
                 "coarse_steps": 2}),
])
def test_settings_named_as_unused_really_change_nothing(s6, kind, mode, extra):
    # every key reported as ignored is checked to be ignored: same arrays with and without it
    base = {"grid": {"joints": ["j2", "j3"], "steps": [5, 4]},
            "reduce": {"joints": ["j2", "j3"], "steps": [4, 3], "coarse_steps": 2},
            "samples": {"samples": 40, "seed": 2}}[mode]
    plain = dict(base, mode=mode)
    noisy = dict(plain, **extra)
    assert set(kind.unused_settings(noisy)) == set(extra)
    assert kind.unused_settings(plain) == {}

    def arrays(settings):
        plan = kind.plan(StudySpec("joint_sweep", S6, settings=settings), s6, None)
        return kind.compute_chunk(plan, s6, None, Chunk(0, 0, plan.cells))

    a, b = arrays(plain), arrays(noisy)
    assert a.keys() == b.keys()
    for k in a:
        np.testing.assert_array_equal(a[k], b[k], err_msg=k)


def test_grid_limit_margin_and_status_equal_the_arms_per_pose_answers(s6, kind):
    # the grid works limits out per axis value; the arm's per-pose functions are the reference,
    # on ranges that run past the limits (negative margins, the outside-limits bit) and a fixed
    # pose with one joint outside its limits too
    for pose in ([10, 0, 0, 20, 0, 30], [10, 0, 0, 20, 0, 400]):
        spec = StudySpec("joint_sweep", S6, settings={"joints": ["j3", "j1"], "steps": [41, 23],
                                                      "ranges": [[-200, 200], [-190, 185]], "pose": pose})
        plan = kind.plan(spec, s6, None, chunk_cells=97)
        out = run_all(kind, plan, s6)
        q = kind.cell_poses(plan, np.arange(plan.cells))
        np.testing.assert_array_equal(out["limit_margin"], s6.limit_margin(q))
        outside = (out["status"] & OUTSIDE_LIMITS) != 0
        np.testing.assert_array_equal(outside, ~s6.in_limits(q))
        assert outside.any() and (pose[5] == 400) == outside.all()
        # grid values that land on a limit may sit an ulp outside it: inside by the 1e-12 slack
        assert (out["limit_margin"] < -1e-9).sum() == outside.sum()



def test_limit_aware_manipulability_per_cell_is_the_measure_at_that_pose(s6, kind):
    # grid (per-axis products), samples and reduce against workbench.measures.limit_aware_manipulability
    # at the same poses; that function's own checks (Tsai 1986 penalty, from memory) are in test_measures
    from workbench.measures import limit_aware_manipulability

    grid = StudySpec("joint_sweep", S6, settings={"joints": ["j3", "j5"], "steps": [9, 7],
                                                  "ranges": [[-130, 170], [-125, 125]], "pose": [10, 5, 0, 20, 0, 30]})
    plan = kind.plan(grid, s6, None, chunk_cells=20)
    out = run_all(kind, plan, s6)
    q = kind.cell_poses(plan, np.arange(plan.cells))
    ref = limit_aware_manipulability(s6, q)
    np.testing.assert_allclose(out["limit_aware_manipulability"], ref, rtol=1e-12, atol=0)
    assert (ref == 0).any() and (ref > 0).any()  # the -130 deg and 170 deg columns are past j3's limits
    cloud = StudySpec("joint_sweep", S6, settings={"mode": "samples", "samples": 300, "seed": 5})
    plan = kind.plan(cloud, s6, None)
    out = run_all(kind, plan, s6)
    np.testing.assert_allclose(out["limit_aware_manipulability"], limit_aware_manipulability(s6, out["q"]),
                               rtol=1e-12, atol=0)
    assert np.all(out["limit_aware_manipulability"] <= out["manipulability"])
