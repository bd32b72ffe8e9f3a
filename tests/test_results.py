"""Results files: write -> read round trip of every dataset and attribute, exports, atomic writes."""
from __future__ import annotations

import json
import os
from pathlib import Path

import h5py
import numpy as np
import pytest

import workbench
from workbench.results import (SCHEMA_VERSION, ResultsError, ResultsWriter, export_csv, export_png, read_results)
from workbench.runner import prepare, run_study
from workbench.studies import StudySpec

ROOT = Path(__file__).resolve().parents[1]
S6 = str(ROOT / "arms" / "demo_s6.toml")


def small_spec(**extra):
    s = {"joints": ["j3", "j5"], "ranges": [[-100, 140], [-60, 60]], "steps": [23, 17], "store_sv": True,
         "store_tcp": True}
    s.update(extra)
    return StudySpec("joint_sweep", S6, settings=s, name="round trip")


def test_round_trip_of_every_dataset_and_attribute(tmp_path):
    mem = run_study(small_spec(), chunk_cells=50)  # in memory
    out = tmp_path / "r.h5"
    disk = run_study(small_spec(), out=out, chunk_cells=50)
    back = read_results(out)
    assert [p.name for p in tmp_path.iterdir()] == ["r.h5"]  # the temporary name is gone
    for r in (disk, back):
        assert r.shape == mem.shape == (23, 17)
        assert [f.name for f in r.fields] == [f.name for f in mem.fields]
        for f, g in zip(r.fields, mem.fields):
            assert (f.shape, f.dtype, f.unit, f.kind, f.description, f.flags) == \
                   (g.shape, g.dtype, g.unit, g.kind, g.description, g.flags)
            np.testing.assert_array_equal(r.arrays[f.name], mem.arrays[f.name])
            assert r.arrays[f.name].shape == mem.shape + f.shape
        for a, b in zip(r.axes, mem.axes):
            assert (a.name, a.unit, a.display_unit, a.label) == (b.name, b.unit, b.display_unit, b.label)
            np.testing.assert_array_equal(a.values, b.values)
        assert r.finished.tolist() == [True] * 8 and not r.incomplete and r.chunk_cells == 50
        assert r.arm_text == Path(S6).read_text() and r.cell_text is None
        assert 'kind = "joint_sweep"' in r.study_text
        assert set(r.tables) == {"near_singular", "best"}
        for name, t in mem.tables.items():
            u = r.tables[name]
            assert (u.title, u.units, list(u.columns)) == (t.title, t.units, list(t.columns))
            for c in t.columns:
                np.testing.assert_array_equal(u.columns[c], t.columns[c])
    a = back.attrs
    assert a["schema_version"] == SCHEMA_VERSION and a["software_version"] == workbench.__version__
    assert a["kind"] == "joint_sweep" and a["name"] == "round trip" and a["cells"] == 391
    assert list(a["grid_shape"]) == [23, 17] and a["chunks_done"] == a["chunks_total"] == 8
    assert a["created"].endswith("Z") and a["finished"] >= a["created"] and a["elapsed_s"] > 0
    assert back.spec().settings == small_spec().settings and back.spec().arm_path == S6
    np.testing.assert_array_equal(back.done_mask(), np.ones((23, 17), bool))
    # the file itself: chunked and compressed datasets, flattened grid order
    with h5py.File(out) as h:
        ds = h["fields/manipulability"]
        # default compression: Blosc (HDF5 registered filter 32001) with LZ4 and byte shuffle
        assert ds.shape == (391,) and ds.chunks is not None and "32001" in ds._filters
        assert h["fields/sv"].shape == (391, 6) and h["fields/status"].dtype == np.uint8
        assert json.loads(h["axes"].attrs["order"]) == ["j3", "j5"]
        assert h["axes/j3"].attrs["unit"] == "rad" and h["axes/j3"].attrs["display_unit"] == "deg"


@pytest.mark.parametrize("compression", ["lz4", "lzf", "gzip", None])
def test_every_compression_reads_back_bit_identical(tmp_path, compression):
    # lossless: every compression must give back the computed bytes; the filters are the ones named
    prep = prepare(small_spec(), chunk_cells=100)
    mem = run_study(prep)
    out = tmp_path / "c.h5"
    run_study(prep, out=out, compression=compression)
    back = read_results(out, load=False)  # read from the file, not from the writer's mirror
    for f in mem.fields:
        np.testing.assert_array_equal(back.arrays[f.name], mem.arrays[f.name])
    with h5py.File(out) as h:
        filters = h["fields/inverse_condition"]._filters
    expect = {"lz4": "32001", "lzf": "lzf", "gzip": "gzip", None: None}[compression]
    if expect is None:
        assert filters == {}
    else:
        assert expect in filters and (compression == "lz4" or "shuffle" in filters)


def test_lz4_compresses_a_measure_map(tmp_path):
    # a 200 x 200 map of smooth measures plus a status mask must shrink well below its raw size
    spec = StudySpec("joint_sweep", S6, settings={"joints": ["j2", "j3"], "steps": [200, 200]})
    sizes = {}
    for c in ("lz4", None):
        out = tmp_path / f"{c}.h5"
        run_study(spec, out=out, compression=c, summary=False)
        with h5py.File(out) as h:
            sizes[c] = sum(h["fields"][k].id.get_storage_size() for k in h["fields"])
    assert sizes["lz4"] < 0.7 * sizes[None]


def test_unknown_compression_is_refused(tmp_path):
    prep = prepare(small_spec())
    with pytest.raises(ResultsError, match="compression: expected one of"):
        ResultsWriter(tmp_path / "x.h5", prep.plan, prep.texts, compression="brotli")
    assert list(tmp_path.iterdir()) == []


def test_unfinished_chunks_hold_the_fill_value_and_are_reported(tmp_path):
    prep = prepare(small_spec(), chunk_cells=100)
    w = ResultsWriter(tmp_path / "p.h5", prep.plan, prep.texts, compression="gzip")
    c = prep.plan.chunk(1)
    w.write_chunk(c, prep.kind.compute_chunk(prep.plan, prep.arm, None, c))
    assert not (tmp_path / "p.h5").exists()  # nothing under the final name before close
    w.close(incomplete=True)
    r = read_results(tmp_path / "p.h5")
    assert r.incomplete and r.finished.tolist() == [False, True, False, False]
    flat = r.flat("manipulability")
    assert np.isnan(flat[:100]).all() and np.isfinite(flat[100:200]).all() and np.isnan(flat[200:]).all()
    assert (r.flat("status")[:100] == 0).all()
    assert r.done_mask().reshape(-1)[100:200].all() and r.done_mask().sum() == 100


def test_abort_leaves_nothing(tmp_path):
    prep = prepare(small_spec())
    w = ResultsWriter(tmp_path / "a.h5", prep.plan, prep.texts)
    w.abort()
    assert list(tmp_path.iterdir()) == []


def test_read_errors(tmp_path):
    with pytest.raises(ResultsError, match="no such file"):
        read_results(tmp_path / "none.h5")
    (tmp_path / "x.h5").write_text("hello")
    with pytest.raises(ResultsError, match="not an HDF5 results file"):
        read_results(tmp_path / "x.h5")
    with h5py.File(tmp_path / "y.h5", "w") as h:
        h.attrs["format"] = "something else"
    with pytest.raises(ResultsError, match="not a workbench results file"):
        read_results(tmp_path / "y.h5")


def test_csv_and_png_exports(tmp_path):
    r = run_study(small_spec(), out=tmp_path / "r.h5")
    n = export_csv(r, tmp_path / "poses.csv")
    lines = (tmp_path / "poses.csv").read_text().splitlines()
    assert n == len(lines) - 1 == r.tables["near_singular"].rows > 0
    head = lines[0].split(",")
    assert head[:3] == ["cell", "j1 [deg]", "j2 [deg]"] and "inverse_condition" in head
    row = dict(zip(head, lines[1].split(",")))
    # near-singular rows of this j3 x j5 sweep sit at j5 = 0 (wrist axes 4 and 6 aligned)
    assert float(row["j5 [deg]"]) == 0.0 and float(row["j2 [deg]"]) == pytest.approx(0.0)  # j2 at the home pose
    cells = export_csv(r, tmp_path / "cells.csv", table="cells")
    assert cells == r.cells
    allrows = np.loadtxt(tmp_path / "cells.csv", delimiter=",", skiprows=1)
    hdr = (tmp_path / "cells.csv").read_text().splitlines()[0].split(",")
    assert hdr[1:3] == ["j3 [deg]", "j5 [deg]"]
    np.testing.assert_allclose(allrows[:, hdr.index("manipulability")], r.flat("manipulability"), rtol=1e-9)
    np.testing.assert_allclose(np.unique(allrows[:, 1]), np.linspace(-100, 140, 23))
    p = export_png(r, tmp_path / "map.png", measure="min_sv")
    import matplotlib.image as mpimg

    img = mpimg.imread(p)
    assert img.ndim == 3 and img.shape[0] > 300 and img.shape[1] > 400
    with pytest.raises(ResultsError, match="--measure nope: not a map"):
        export_png(r, tmp_path / "bad.png", measure="nope")
    assert not (tmp_path / "bad.png").exists()
    with pytest.raises(ResultsError, match="is a directory"):
        export_csv(r, tmp_path)
    assert sorted(q.name for q in tmp_path.iterdir()) == ["cells.csv", "map.png", "poses.csv", "r.h5"]


def test_png_of_samples_and_single_joint(tmp_path):
    cloud = run_study(StudySpec("joint_sweep", S6, settings={"mode": "samples", "samples": 3000}))
    line = run_study(StudySpec("joint_sweep", S6, settings={"joints": ["j5"], "steps": [50]}))
    for r, name in ((cloud, "cloud.png"), (line, "line.png")):
        export_png(r, tmp_path / name)
        assert os.path.getsize(tmp_path / name) > 5000


def test_context_rebuilds_plan_and_poses_from_the_stored_texts(tmp_path):
    arm_copy = tmp_path / "arm.toml"
    arm_copy.write_text(Path(S6).read_text())
    spec = StudySpec("joint_sweep", str(arm_copy), settings={"joints": ["j2", "j6"], "steps": [5, 4]})
    run_study(spec, out=tmp_path / "r.h5", chunk_cells=7)
    arm_copy.unlink()  # the results file carries the arm text
    r = read_results(tmp_path / "r.h5")
    kind, plan, arm, cell = r.context()
    assert cell is None and plan.chunk_cells == 7 and plan.shape == (5, 4)
    q = kind.cell_poses(plan, [0, 7, 19], r.arrays)
    j2, j6 = plan.axes[0].values, plan.axes[1].values
    np.testing.assert_allclose(q[:, 1], [j2[0], j2[1], j2[4]])
    np.testing.assert_allclose(q[:, 5], [j6[0], j6[3], j6[3]])
    np.testing.assert_allclose(q[:, [0, 2, 3, 4]], np.radians([[0, 0, 0, 90]] * 3))
    # the measures stored for those cells are the ones of those poses
    from workbench.measures import pose_measures

    ref = pose_measures(arm, q)
    np.testing.assert_allclose(r.flat("inverse_condition")[[0, 7, 19]], ref["inverse_condition"], rtol=1e-12)


def test_text_columns_round_trip_and_reach_the_csv(tmp_path):
    from workbench.studies import Table

    prep = prepare(small_spec(), chunk_cells=400)
    w = ResultsWriter(tmp_path / "t.h5", prep.plan, prep.texts)
    c = prep.plan.chunk(0)
    w.write_chunk(c, prep.kind.compute_chunk(prep.plan, prep.arm, None, c))
    t = Table("joints that limit", {"joint": np.array(["j1", "wrist, 2", None], dtype=object),
                                    "cells": np.array([3, 0, 7])}, {"cells": ""})
    empty = Table("no spans", {"path": np.array([], dtype=object), "at": np.array([], dtype=float)})
    w.close(incomplete=False, tables={"limiting": t, "spans": empty})
    r = read_results(tmp_path / "t.h5")
    assert list(r.tables["limiting"].columns["joint"]) == ["j1", "wrist, 2", ""]
    assert r.tables["spans"].rows == 0
    assert export_csv(r, tmp_path / "l.csv", table="limiting") == 3
    assert (tmp_path / "l.csv").read_text() == 'joint,cells\nj1,3\n"wrist, 2",0\n,7\n'


def test_png_of_a_three_joint_grid_reduces_the_first_axis(tmp_path):
    r = run_study(StudySpec("joint_sweep", S6, settings={"joints": ["j1", "j2", "j3"], "steps": [3, 10, 12]}))
    export_png(r, tmp_path / "m.png")
    assert os.path.getsize(tmp_path / "m.png") > 5000


def test_lazy_read_gives_the_same_arrays(tmp_path):
    r = run_study(small_spec(), out=tmp_path / "r.h5")
    lazy = read_results(tmp_path / "r.h5", load=False)
    assert set(lazy.arrays) == set(r.arrays) and len(lazy.arrays) == len(r.fields)
    np.testing.assert_array_equal(lazy.arrays["sv"], r.arrays["sv"])
    assert lazy.arrays["sv"].shape == (23, 17, 6)
    np.testing.assert_array_equal(lazy.flat("min_sv"), r.flat("min_sv"))
    with pytest.raises(KeyError):
        lazy.arrays["nothing"]
