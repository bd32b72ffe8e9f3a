"""The quantity registry (workbench/quantities.py): its entries against facts, and every consumer
(studies, report, command line, PNG export) reading it. The window's use is in
tests/gui/test_quantities_window.py."""
from __future__ import annotations

import math

import numpy as np
import pytest

from workbench import quantities as Q
from workbench.arm.files import parse_arm_dict
from workbench.kinematics import Arm
from workbench.measures import measures


def dh_arm(rows, name="registry test arm"):
    data = {"arm": {"name": name, "geometry": "dh"},
            "joint": [dict(name=f"j{i + 1}", **r) for i, r in enumerate(rows)]}
    return Arm(parse_arm_dict(data, source_name=name))


def planar_2r(l1, l2):
    return dh_arm([dict(a=l1, alpha=0, d=0, theta=0), dict(a=l2, alpha=0, d=0, theta=0)], "planar 2R")


def spatial_3r(scale):
    """An invented 3R arm (elbow type) with every length times ``scale``."""
    return dh_arm([dict(a=0.0, alpha=90.0, d=0.4 * scale, theta=0), dict(a=0.5 * scale, alpha=0, d=0, theta=0),
                   dict(a=0.35 * scale, alpha=0, d=0.05 * scale, theta=0)], "3R")


RNG = np.random.default_rng(12)


# ---- content against facts ----------------------------------------------------------------------

def test_condition_number_is_at_least_one_better_lower_and_on_a_log_scale():
    # k = s1 / sm >= 1 by the ordering of the singular values (common practice); a smaller k is
    # closer to isotropic, so lower is better; k runs to infinity at a singularity, hence log10
    q = Q.quantity("condition")
    assert q.better == "lower" and q.log and Q.sign_of_better("condition") == -1.0
    J = RNG.normal(size=(500, 6, 6))
    k = measures(J, rows="full", length=1.0)["condition"]
    assert np.all(k >= 1.0 - 1e-12)
    sv = np.linalg.svd(J, compute_uv=False)                        # numpy reference
    np.testing.assert_allclose(k, sv[:, 0] / sv[:, -1], rtol=1e-9)


def test_inverse_condition_and_manipulability_are_better_higher_and_bounded_as_computed():
    # Yoshikawa, "Manipulability of robotic mechanisms", IJRR 4(2), 1985 (from memory): w =
    # sqrt(det(J J^T)) >= 0, 0 exactly at a singularity, largest for the 2R arm at th2 = +-90 deg;
    # so larger w is better. The inverse condition is 0 singular .. 1 isotropic.
    assert Q.better("manipulability") == "higher" and Q.better("inverse_condition") == "higher"
    assert Q.better("min_sv") == "higher" and not Q.is_log("manipulability")
    assert Q.sign_of_better("inverse_condition") == 1.0
    arm = planar_2r(0.9, 0.55)
    th2 = np.radians(np.arange(-180.0, 180.1, 5.0))
    qs = np.stack([np.full_like(th2, 0.3), th2], axis=-1)
    J = arm.jacobian(qs)[:, :2, :]
    m = measures(arm.jacobian(qs), rows="vx,vy")
    ref = np.sqrt(np.linalg.det(J @ np.swapaxes(J, -1, -2)).clip(0))    # numpy reference
    np.testing.assert_allclose(m["manipulability"], ref, atol=1e-12)
    np.testing.assert_allclose(m["manipulability"], 0.9 * 0.55 * np.abs(np.sin(th2)), atol=1e-12)
    assert np.all((m["inverse_condition"] >= 0) & (m["inverse_condition"] <= 1 + 1e-12))
    # the better end (higher) is away from the singularity th2 = 0 for every measure said "higher"
    i0, i90 = int(np.argmin(np.abs(th2))), int(np.argmin(np.abs(th2 - math.pi / 2)))
    for name in ("manipulability", "inverse_condition", "min_sv"):
        assert m[name][i90] > m[name][i0] + 0.1
    assert m["condition"][i90] < m["condition"][i0] or math.isinf(m["condition"][i0])


def test_units_are_the_engine_units():
    # a quantity of unit m^p grows by 1000^p when every length of the arm grows by 1000 (in m);
    # checked against the engine's values for the 2R arm (Yoshikawa's w = l1 l2 |sin th2|, m^2),
    # a 3R arm's translation rows (w in m^3, singular values in m) and the full rows divided by
    # the characteristic length (unitless)
    q2 = np.array([[0.4, 1.1], [-0.7, 2.0]])
    for rows, arm_of, q, L in (("vx,vy", lambda s: planar_2r(0.9 * s, 0.55 * s), q2, None),
                               ("translation", spatial_3r, np.array([[0.3, 0.6, -1.2]]), None),
                               ("full", spatial_3r, np.array([[0.3, 0.6, -1.2]]), 1.3)):
        kinds = [0] * q.shape[1]
        small, big = arm_of(1.0), arm_of(1000.0)
        for name in ("manipulability", "min_sv", "condition", "inverse_condition"):
            unit = Q.unit_of(name, rows, kinds)
            p = {"": 0, "m": 1, "m^2": 2, "m^3": 3}[unit]
            a = measures(small.jacobian(q), rows=rows, length=L or 1.0)[name]
            b = measures(big.jacobian(q), rows=rows, length=1000.0 * (L or 1.0))[name]
            np.testing.assert_allclose(b, a * 1000.0 ** p, rtol=1e-9, err_msg=f"{name} {rows}: unit {unit!r}")
    assert Q.unit_of("manipulability", "vx,vy", [0, 0]) == "m^2"
    assert Q.unit_of("manipulability", "translation", [0, 0, 0]) == "m^3"
    assert Q.unit_of("min_sv", "translation", [0, 0, 0]) == "m"


def test_prismatic_and_mixed_arms():
    # one prismatic joint along the tool's x: J translation column = the unit axis, so the single
    # singular value is 1 whatever the length unit: unitless (m/m)
    arm = Arm(parse_arm_dict({"arm": {"name": "slide", "geometry": "dh"},
                              "joint": [{"name": "s", "type": "prismatic", "a": 0.0, "alpha": 0.0, "d": 0.0,
                                         "theta": 0.0, "limits": [0.0, 1.0]}]}, source_name="slide"))
    m = measures(arm.jacobian(np.array([[0.2]])), rows="vz")
    assert m["min_sv"][0] == pytest.approx(1.0) and Q.unit_of("min_sv", "vz", ["prismatic"]) == ""
    # a revolute and a prismatic joint on translation rows: entries m/rad and m/m differ: no unit
    assert Q.unit_of("manipulability", "translation", [0, 1]) is None
    assert Q.unit_of("payload") == "kg" and Q.unit_of("clearance") == "m"


def test_reduced_fields_and_unknown_names():
    q = Q.quantity("condition_min")
    assert q.better == "lower" and q.log and "min over the other joints" in q.label
    assert Q.best_of("condition_mean") == "min" and Q.best_of("inverse_condition_max") == "max"
    u = Q.quantity("no_such_thing")
    assert u.label == "no such thing" and u.better is None and u.unit == ""
    assert Q.axis_label("condition") == "log10 condition number k"
    assert Q.axis_label("payload") == "payload (kg)"
    with pytest.raises(ValueError):
        Q.Quantity("x", "x", better="up")


# ---- consumers read the registry ------------------------------------------------------------------

@pytest.fixture
def relabel(monkeypatch):
    def do(name, **changes):
        from dataclasses import replace

        monkeypatch.setitem(Q.QUANTITIES, name, replace(Q.QUANTITIES[name], **changes))
    return do


def _sweep_spec(tmp_path, rows="vx,vy"):
    from pathlib import Path

    from workbench.studies.spec import read_study_file

    root = Path(__file__).resolve().parents[1]
    p = tmp_path / "s.toml"
    p.write_text(f'[study]\nname = "q"\nkind = "joint_sweep"\narm = "{(root / "arms" / "demo_planar2r.toml").as_posix()}"\n'
                 f'[settings]\nmode = "grid"\njoints = ["th1", "th2"]\nranges = [[0, 90], [-90, 90]]\n'
                 f'steps = [3, 5]\nrows = "{rows}"\n')
    return read_study_file(str(p)), p


def test_studies_take_descriptions_and_units_from_the_registry(tmp_path, relabel):
    from workbench.runner import prepare

    relabel("manipulability", description="w as the registry says")
    spec, _ = _sweep_spec(tmp_path)
    plan = prepare(spec).plan
    f = {x.name: x for x in plan.fields}
    assert f["manipulability"].description == "w as the registry says"
    assert f["manipulability"].unit == "m^2" and f["min_sv"].unit == "m" and f["condition"].unit == ""


def test_reduced_sweep_best_pose_follows_the_better_side():
    # best_q / worst_q of a reduced sweep are the poses with the best / worst value of best_by:
    # for the condition number (lower is better) the smallest / largest k, checked against a
    # brute-force numpy SVD (k = s1 / sm) of every pose of one cell
    from workbench import load_arm
    from workbench.studies import StudySpec, get_kind

    from pathlib import Path

    path = str(Path(__file__).resolve().parents[1] / "arms" / "demo_s6.toml")
    arm, kind = load_arm(path), get_kind("joint_sweep")
    spec = StudySpec("joint_sweep", path, settings={"mode": "reduce", "joints": ["j3", "j5"], "steps": [2, 2],
                                                    "ranges": [[45, 120], [30, 80]], "coarse_steps": [2, 3, 2, 2],
                                                    "best_by": "condition"})
    plan = kind.plan(spec, arm, None)
    parts = [kind.compute_chunk(plan, arm, None, c) for c in plan.chunks]
    out = {k: np.concatenate([p[k] for p in parts]) for k in ("best_q", "worst_q")}
    others = [0, 1, 3, 5]
    L = arm.nominal_reach()

    def cond(q):
        J = arm.jacobian(q).copy()
        J[..., :3, :] /= L                                          # full rows: translation / L
        sv = np.linalg.svd(J, compute_uv=False)
        return sv[..., 0] / sv[..., -1]

    for cell in range(4):
        i, j = np.unravel_index(cell, plan.shape)
        grids = [np.linspace(arm.lower[k], arm.upper[k], c) for k, c in zip(others, plan.settings.coarse_steps)]
        q = np.zeros((2 * 3 * 2 * 2, 6))
        q[:, others] = np.stack([m.ravel() for m in np.meshgrid(*grids, indexing="ij")], axis=-1)
        q[:, 2], q[:, 4] = plan.axes[0].values[i], plan.axes[1].values[j]
        k = cond(q)
        assert np.all(k < 1e3) and k.max() > 1.05 * k.min()      # no singular pose; k varies over the others
        # j1 turns the whole arm (k does not change): compare the k of the pose picked, not the pose
        assert cond(out["best_q"][cell]) == pytest.approx(k.min(), rel=1e-9)
        assert cond(out["worst_q"][cell]) == pytest.approx(k.max(), rel=1e-9)
    f = {x.name: x for x in plan.fields}
    assert "best condition" in f["best_q"].description


def test_report_tables_and_maps_read_the_registry(relabel):
    from workbench.report.content import human, results_table
    from workbench.studies.base import Table

    t = Table(columns={"payload": np.array([1.5, 2.0]), "rank": np.array([1, 2])}, units={"payload": "kg"},
              title="t")
    assert results_table(t).header[0] == "payload (kg)"
    relabel("payload", label="largest load held")
    assert results_table(t).header[0] == "largest load held (kg)" and human("payload") == "largest load held"


def test_report_map_of_a_log_quantity_is_log10_and_reduced_to_the_best(relabel):
    from types import SimpleNamespace

    from workbench.report import content as C
    from workbench.studies.base import Axis, Field

    # 2 x 2 x 3 condition numbers; the map keeps the best (smallest) over the first axis, in log10
    Z = np.array([[[1.0, 10.0, 100.0], [2.0, 3.0, 4.0]], [[5.0, 1.0, 1000.0], [1.0, 30.0, 40.0]]])
    axes = (Axis("a", np.arange(2.0), "", "a"), Axis("y", np.arange(2.0), "m", "y"), Axis("x", np.arange(3.0), "m", "x"))
    r = SimpleNamespace(axes=axes, fields=(Field("condition", (), "float64", "", "k"),), arrays={"condition": Z})
    seen = {}
    orig = C.G.map_figure
    try:
        C.G.map_figure = lambda Zm, ax_x, ax_y, label, **kw: seen.update(Z=Zm, label=label) or None
        relabel("condition", label="conditioning")
        C._measure_maps(r, None)
    finally:
        C.G.map_figure = orig
    np.testing.assert_allclose(seen["Z"], np.log10(np.minimum(Z[0], Z[1])))
    assert seen["label"] == "log10 conditioning"


def test_cli_jacobian_prints_the_registry_labels_and_units(capsys, relabel):
    from pathlib import Path

    from workbench.cli import main

    arm = Path(__file__).resolve().parents[1] / "arms" / "demo_planar2r.toml"
    relabel("manipulability", label="w of the registry")
    assert main(["jacobian", str(arm), "--q", "0,90", "--rows", "vx,vy"]) == 0
    out = capsys.readouterr().out
    line = next(s for s in out.splitlines() if "w of the registry" in s)
    # the printed value is the engine's w for these rows (planar 2R, translation rows: m^2)
    from workbench import load_arm

    assert line.split(":")[0].strip() == "w of the registry (m^2)"
    J = load_arm(str(arm)).jacobian(np.radians([0.0, 90.0]))[:2]
    assert float(line.split(":")[1]) == pytest.approx(math.sqrt(np.linalg.det(J @ J.T)), rel=1e-5)


def test_cli_export_png_colour_bar_reads_the_registry(tmp_path, relabel, monkeypatch):
    from workbench import results as R
    from workbench.runner import run_study

    spec, p = _sweep_spec(tmp_path)
    run_study(str(p), out=str(tmp_path / "r.h5"), executor="inprocess")
    res = R.read_results(str(tmp_path / "r.h5"))
    labels = []
    from matplotlib.figure import Figure

    orig = Figure.colorbar
    monkeypatch.setattr(Figure, "colorbar", lambda self, *a, **kw: labels.append(kw.get("label")) or orig(self, *a, **kw))
    relabel("manipulability", label="registry w")
    R.export_png(res, str(tmp_path / "m.png"), measure="manipulability")
    assert labels == ["registry w (m^2)"]
