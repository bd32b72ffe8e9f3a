"""Feasibility-first mount ranking: a mount serving every work point always ranks above one serving
fewer; the map, the ranking and the recommendation use one value (rank value); page 1 states the
recommended mount as the ranking gives it."""
import math
import shutil
import subprocess

import numpy as np
import pytest

from workbench import load_arm
from workbench.arm.model import ArmModel, Joint
from workbench.arm.transforms import translation
from workbench.kinematics import Arm
from workbench.studies.base import Chunk
from workbench.studies.cell import parse_cell_text
from workbench.studies.mount_search import (MountSearch, MountSettings, rank_values, score_candidates,
                                            summarise_mount_search)
from workbench.studies.spec import StudySpec

ROOT = __import__("pathlib").Path(__file__).resolve().parents[2]


def planar_2r():
    """Planar 2R arm (l1 = l2 = 1 m), both axes along z, unlimited joints (limit margin 1)."""
    j1 = Joint("th1", "revolute", np.eye(4), np.array([0.0, 0, 1]))
    j2 = Joint("th2", "revolute", translation(1.0, 0, 0), np.array([0.0, 0, 1]))
    return Arm(ArmModel("2R", (j1, j2), end=translation(1.0, 0, 0)))


def square_cell(a, z, orientation):
    """Four work points at the corners (+-a, +-a, z) of a square centred on the origin; candidate
    mounts on the 3 x 3 grid {-a, 0, a}^2 (the centre, the edge midpoints and the corners)."""
    pts = ""
    for i, (sx, sy) in enumerate([(1, 1), (-1, 1), (-1, -1), (1, -1)]):
        pts += (f'[[point]]\nname = "c{i + 1}"\nxyz = [{sx * a}, {sy * a}, {z}]\norientation = "{orientation}"\n'
                + ('rpy = [180, 0, 0]\n' if orientation == "fixed" else "tolerance = 0.000001\n"))
    return parse_cell_text(f'[cell]\nname = "square"\n{pts}[mount]\nx = [{-a}, {a}]\ny = [{-a}, {a}]\n'
                           f'step = {a}\nyaws = [0]\n', "square.toml")


def run_kind(arm, cell, settings):
    kind = MountSearch()
    plan = kind.plan(StudySpec(kind="mount_search", arm="a", cell="square.toml", settings=settings), arm, cell)
    arrays = kind.compute_chunk(plan, arm, cell, Chunk(0, 0, plan.cells))
    return plan, arrays, kind.summarise(plan, arrays)


def cell_xy(plan, flat):
    ax = {a.name: a.values for a in plan.axes}
    _s, _h, _yaw, iy, ix = np.unravel_index(flat, plan.shape)
    return float(ax["x"][ix]), float(ax["y"][iy])


def w_2r(d):
    """Manipulability of the planar 2R arm (l1 = l2 = 1) with its tip at distance d from the base:
    w = l1 l2 |sin th2|, cos th2 = (d^2 - l1^2 - l2^2) / (2 l1 l2) (Yoshikawa, "Manipulability of
    robotic mechanisms", IJRR 4(2) 1985, sec. 4; the law of cosines, common practice)."""
    c = (d * d - 2.0) / 2.0
    return math.sqrt(max(0.0, 1.0 - c * c))


def test_square_cell_2r_ranks_the_centre_first_worked_by_hand():
    # Corners at (+-a, +-a), a = 1.41: from the centre every corner is d = a sqrt 2 = 1.994 m away
    # (nearly stretched, w = 0.1538); from an edge midpoint the two near corners are d = a (w ~ 1)
    # and the far two a sqrt 5 = 3.15 m (beyond the 2 m reach). The old product f^2 w m^0.5 gave
    # the edge 0.25 * 1 > the centre 0.154; serving every point must win.
    a = 1.41
    arm = planar_2r()
    cell = square_cell(a, 0.0, "free")
    plan, arrays, tables = run_kind(arm, cell, {"measure": "manipulability", "rows": ["vx", "vy"], "seeds": 4,
                                                "refine": 1, "refine_evaluations": 60})
    served = arrays["served"].reshape(-1)
    rank = arrays["rank_value"].reshape(-1)
    w_centre = w_2r(a * math.sqrt(2))
    assert w_centre == pytest.approx(0.15382, abs=1e-5)
    k = int(np.argmax(rank))
    assert cell_xy(plan, k) == pytest.approx((0.0, 0.0), abs=1e-12)
    assert served[k] == 4
    # default exponents: Q = w^1 * m^0.5, m = 1 (unlimited joints); rank value = 4 + Q / (1 + Q)
    assert arrays["score"].reshape(-1)[k] == pytest.approx(w_centre, abs=1e-5)
    assert rank[k] == pytest.approx(4 + w_centre / (1 + w_centre), abs=1e-5)
    for flat in range(plan.cells):
        x, y = cell_xy(plan, flat)
        if (abs(x) > 0) != (abs(y) > 0):  # an edge midpoint: the near two corners only, w ~ 1
            assert served[flat] == 2
            assert arrays["score"].reshape(-1)[flat] == pytest.approx(w_2r(a), abs=1e-5)
            # the reproduction: the old score f^2 * w * m^0.5 put the edge first
            assert 0.5 ** 2 * w_2r(a) > w_centre
    rec = tables["recommended"].columns
    # by symmetry the centre is the optimum: the refinement stays there (rounded to 1 mm)
    assert float(rec["x"][0]) == pytest.approx(0.0, abs=1.0) and float(rec["y"][0]) == pytest.approx(0.0, abs=1.0)
    assert int(rec["served"][0]) == 4


def test_square_cell_demo_arm_ranks_the_centre_first_with_default_settings():
    # The demo arm, tool pointing down, corners (+-0.95, +-0.95, 0.3) m: from an edge midpoint two
    # corners are near (good inverse condition), the other two out of reach; from the centre all
    # four are reached near full stretch (poor inverse condition).
    arm = load_arm(ROOT / "arms" / "demo_s6.toml")
    cell = square_cell(0.95, 0.3, "fixed")
    plan, arrays, tables = run_kind(arm, cell, {"refine": 1, "refine_evaluations": 30})
    rank = arrays["rank_value"].reshape(-1)
    served = arrays["served"].reshape(-1)
    k = int(np.argmax(rank))
    assert cell_xy(plan, k) == pytest.approx((0.0, 0.0), abs=1e-12)
    assert served[k] == 4 and served.max() == 4
    assert (served == 4).sum() == 1  # the only candidate serving every point
    quality = arrays["score"].reshape(-1)
    old = (served / 4) ** 2 * quality  # the old score with its default reach_power 2
    assert int(np.argmax(old)) != k  # the reproduction: the old score ranked another mount first
    rk = tables["ranking"].columns
    assert int(rk["served"][0]) == 4 and float(rk["x"][0]) == pytest.approx(0.0, abs=1e-9)
    assert float(tables["recommended"].columns["served"][0]) == 4


def test_feasibility_dominates_quality_on_hand_built_arrays():
    s = MountSettings()
    # candidate 0 serves all 3 points badly, 1 serves 2 superbly, 2 serves 2 well, 3 none
    reached = np.array([[1, 1, 1], [1, 1, 0], [1, 0, 1], [0, 0, 0]], bool)
    meas = np.array([[0.01, 0.5, 0.5], [0.99, 0.99, 0.0], [0.6, 0.0, 0.5], [0, 0, 0]])
    marg = np.array([[0.04, 1.0, 1.0], [1.0, 1.0, 0.0], [1.0, 0.0, 1.0], [0, 0, 0]])
    sc = score_candidates(reached, meas, marg, s)
    # worked by hand: Q = worst measure * sqrt(smallest margin) over the served points
    np.testing.assert_allclose(sc["score"], [0.01 * 0.2, 0.99, 0.5, 0.0])
    np.testing.assert_array_equal(sc["served"], [3, 2, 2, 0])
    assert list(np.argsort(-sc["rank_value"], kind="stable")) == [0, 1, 2, 3]
    # the whole part of the rank value is the count served; the fraction orders by quality
    np.testing.assert_array_equal(np.floor(sc["rank_value"]), [3, 2, 2, 0])
    assert sc["rank_value"][0] == pytest.approx(3 + 0.002 / 1.002)
    # torque margin is a factor of the quality where it was checked (NaN: not checked, factor 1)
    tq = np.array([[0.25, 0.64, np.nan], [np.nan] * 3, [np.nan] * 3, [np.nan] * 3])
    sc2 = score_candidates(reached, meas, marg, s, torque=tq)
    assert sc2["score"][0] == pytest.approx(0.002 * 0.5)  # * 0.25^0.5
    assert sc2["score"][1] == pytest.approx(0.99)
    # the fraction never reaches 1, even for an unbounded measure (manipulability)
    big = rank_values(np.array([2, 3]), np.array([1e30, 0.0]))
    assert big[0] < 3 and big[1] == 3 and big[0] < big[1]


def test_the_map_value_is_the_ranking_value(small_cell_results):
    _folder, res = small_cell_results
    r = res["ms"]
    rank = np.asarray(r.arrays["rank_value"], float)
    ax = {a.name: a.values for a in r.axes}
    rk = r.tables["ranking"].columns
    # rank 1 of the grid ranking is the map's best cell, with the map's value
    k = np.unravel_index(int(np.nanargmax(rank)), rank.shape)
    assert float(rk["rank_value"][0]) == rank[k]
    assert float(rk["x"][0]) == pytest.approx(ax["x"][k[4]] * 1000) and float(rk["y"][0]) == pytest.approx(
        ax["y"][k[3]] * 1000)
    # every ranked grid row shows the map's value at its cell
    for i in range(r.tables["ranking"].rows):
        ix = int(np.argmin(np.abs(ax["x"] * 1000 - float(rk["x"][i]))))
        iy = int(np.argmin(np.abs(ax["y"] * 1000 - float(rk["y"][i]))))
        iyaw = int(np.argmin(np.abs(np.degrees(ax["yaw"]) - float(rk["yaw"][i]))))
        ih = int(np.argmin(np.abs(ax["height"] * 1000 - float(rk["height"][i]))))
        assert rank[0, ih, iyaw, iy, ix] == float(rk["rank_value"][i])
    # the recommended mount's grid cell carries the map's value; a refined mount never ranks lower
    rec = r.tables["recommended"].columns
    ix = int(np.argmin(np.abs(ax["x"] * 1000 - float(rec["grid_x"][0]))))
    iy = int(np.argmin(np.abs(ax["y"] * 1000 - float(rec["grid_y"][0]))))
    iyaw = int(np.argmin(np.abs(np.degrees(ax["yaw"]) - float(rec["grid_yaw"][0]))))
    ih = int(np.argmin(np.abs(ax["height"] * 1000 - float(rec["grid_height"][0]))))
    assert rank[0, ih, iyaw, iy, ix] == float(rec["grid_rank_value"][0])
    assert float(rec["rank_value"][0]) >= np.nanmax(rank)
    assert bool(rec["map_best"][0]) == (rank[0, ih, iyaw, iy, ix] >= np.nanmax(rank) - 1e-6)


def test_recommended_values_are_reproduced_by_the_per_point_table(small_cell_results):
    _folder, res = small_cell_results
    r = res["ms"]
    s = r.plan.settings if r.plan is not None else MountSettings()
    bp = r.tables["best_points"].columns
    reached = np.asarray(bp["reached"]).astype(bool)[None]
    # the quality's clearance factor reads the clearance to the cell's obstacles; the clearance of the
    # feasibility check (obstacles and the arm's own links) can only be smaller
    clear = np.asarray(bp["obstacle_clearance"], float)[None] / 1000 if "clearance" in bp else None  # mm -> m
    if clear is not None:
        both = np.asarray(bp["clearance"], float)[None] / 1000
        assert np.all(both[reached] <= clear[reached] + 1e-12)
    sc = score_candidates(reached, np.asarray(bp["measure"], float)[None], np.asarray(bp["margin"], float)[None], s,
                          clearance=clear)
    if clear is not None:  # the clearance factor min(1, c / 100 mm)^0.5 is part of the quality
        q0 = score_candidates(reached, np.asarray(bp["measure"], float)[None],
                              np.asarray(bp["margin"], float)[None], s)["score"][0]
        c = np.nanmin(np.where(reached[0], clear[0], np.nan))
        assert sc["score"][0] == pytest.approx(q0 * min(1.0, c / 0.1) ** 0.5, rel=1e-12)
    rec = r.tables["recommended"].columns
    assert sc["rank_value"][0] == pytest.approx(float(rec["rank_value"][0]), rel=1e-9)


@pytest.mark.skipif(not shutil.which("pdftotext"), reason="poppler-utils (pdftotext) is needed")
def test_report_page_one_states_the_recommended_mount(small_cell_results, tmp_path):
    from workbench.decision import fmt_deg, fmt_mm
    from workbench.report import write_report

    _folder, res = small_cell_results
    r = res["ms"]
    out = tmp_path / "ms.pdf"
    write_report(r, str(out))
    text = subprocess.run(["pdftotext", "-f", "1", "-l", "1", str(out), "-"], capture_output=True, text=True,
                          check=True).stdout
    text = " ".join(text.split())
    rec = r.tables["recommended"].columns
    x, y, h = (float(rec[k][0]) / 1000 for k in ("x", "y", "height"))
    yaw = math.radians(float(rec["yaw"][0]))
    for v in (f"x = {fmt_mm(x)} mm", f"y = {fmt_mm(y)} mm", f"height {fmt_mm(h)} mm", f"yaw {fmt_deg(yaw)} deg"):
        assert v.replace("-", "−") in text.replace("-", "−"), v
    # the stored values are what page 1 prints (rounded to 1 mm and 0.1 deg before scoring)
    assert float(rec["x"][0]) == pytest.approx(round(float(rec["x"][0])), abs=1e-6)
    assert float(rec["yaw"][0]) == pytest.approx(round(float(rec["yaw"][0]), 1), abs=1e-6)
    assert "rank value" in text


def test_png_export_marks_the_recommended_mount(small_cell_results, tmp_path):
    from matplotlib.figure import Figure

    from workbench.results import _mark_recommended, export_png, recommended_mount
    from workbench.studies.base import Axis

    _folder, res = small_cell_results
    r = res["ms"]
    rec = recommended_mount(r)
    assert rec is not None and rec["served"] >= 1
    assert r.measure_names()[0] == "rank_value"  # the default map of --png
    ax = Figure().add_subplot(1, 1, 1)
    _mark_recommended(ax, r, Axis("x", [0.0, 1.0], "m", "base x", "mm"))
    star = [ln for ln in ax.lines if ln.get_marker() == "*"]
    assert len(star) == 1
    assert star[0].get_xdata()[0] == pytest.approx(rec["x"] * 1000) and star[0].get_ydata()[0] == pytest.approx(
        rec["y"] * 1000)
    assert f"({rec['x'] * 1000:.0f}, {rec['y'] * 1000:.0f} mm)" in star[0].get_label()
    out = export_png(r, tmp_path / "map.png")
    assert out.endswith("map.png")
