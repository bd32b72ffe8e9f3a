"""Study files: read, write back with relative paths, clear errors naming file and key."""
from __future__ import annotations

import os
from pathlib import Path

import pytest

from workbench.studies import StudyError, StudySpec, get_kind, kind_names, read_study_file, write_study_file
from workbench.studies.base import Chunk, Plan, split_chunks, block_rng
from workbench.studies.spec import load_context

ROOT = Path(__file__).resolve().parents[2]
CELLS = ROOT / "arms" / "cells"


def test_demo_study_files_read_and_plan():
    for name in ("demo_s6_sweep.toml", "demo_s6_sweep_cloud.toml", "demo_s6_sweep_reduce.toml"):
        spec = read_study_file(CELLS / name)
        assert spec.kind == "joint_sweep"
        assert Path(spec.arm_path) == ROOT / "arms" / "demo_s6.toml"
        arm, cell, arm_text, cell_text = load_context(spec)
        assert cell is None and cell_text is None and "[[joint]]" in arm_text
        plan = get_kind(spec.kind).plan(spec, arm, cell)
        assert plan.cells > 1000
    spec = read_study_file(CELLS / "demo_s6_sweep.toml")
    assert spec.settings["steps"] == [231, 281] and spec.name == "S6 demo: j2 x j3 sweep"


def test_write_back_rewrites_relative_paths(tmp_path):
    spec = read_study_file(CELLS / "demo_s6_sweep.toml")
    sub = tmp_path / "elsewhere"
    sub.mkdir()
    again = write_study_file(spec.with_settings(steps=[3, 4]), sub / "copy.toml")
    text = (sub / "copy.toml").read_text()
    assert 'arm = "' + os.path.relpath(ROOT / "arms" / "demo_s6.toml", sub) + '"' in text
    assert again.arm_path == spec.arm_path
    assert again.settings == {**spec.settings, "steps": [3, 4]}
    assert again.kind == spec.kind and again.name == spec.name
    assert [p.name for p in sub.iterdir()] == ["copy.toml"]  # no temporary file left


@pytest.mark.parametrize("text, start", [
    ('[study]\nkind = "spiral_dance"\narm = "a.toml"\n', "[study] kind: unknown study kind 'spiral_dance'"),
    ('[study]\narm = "a.toml"\n', "[study] kind: expected a non-empty string"),
    ('[study]\nkind = "joint_sweep"\n', "[study] arm: expected a non-empty string"),
    ('[study]\nkind = "joint_sweep"\narm = "a.toml"\ncolour = 1\n', "[study]: unknown key 'colour'"),
    ('[studies]\nkind = 1\n', "unknown table [studies]"),
    ('[study\n', "malformed TOML"),
])
def test_bad_study_files(tmp_path, text, start):
    p = tmp_path / "bad.toml"
    p.write_text(text)
    with pytest.raises(StudyError) as e:
        read_study_file(p)
    assert str(e.value).startswith(f"{p}: {start}" if not start.startswith("malformed") else f"{p}: malformed"), e.value
    assert "\n" not in str(e.value)


def test_missing_arm_file_named(tmp_path):
    p = tmp_path / "s.toml"
    p.write_text('[study]\nkind = "joint_sweep"\narm = "no_such_arm.toml"\n')
    with pytest.raises(StudyError, match=r"s\.toml: \[study\] arm: arm file .*no_such_arm\.toml does not exist"):
        load_context(read_study_file(p))


def test_registry_reports_unavailable_kinds():
    assert "joint_sweep" in kind_names()
    from workbench.studies import base

    base.register_kind("not_built_here", "workbench.studies.no_such_module:Nothing")
    try:
        with pytest.raises(StudyError, match="study kind 'not_built_here' is not available"):
            get_kind("not_built_here")
        assert "not_built_here" not in kind_names()
    finally:
        base.KINDS.pop("not_built_here")


def test_chunks_cover_the_grid_and_rng_blocks_do_not_depend_on_chunks():
    ch = split_chunks(10, 4)
    assert [(c.index, c.start, c.stop) for c in ch] == [(0, 0, 4), (1, 4, 8), (2, 8, 10)]
    draw = lambda rng, n: rng.uniform(size=(n, 2))  # noqa: E731
    whole = block_rng(5, 0, 9000, draw)
    parts = [block_rng(5, s, min(9000, s + 1234), draw) for s in range(0, 9000, 1234)]
    assert (whole == __import__("numpy").concatenate(parts)).all()
    assert isinstance(Chunk(0, 1, 3).size, int) and Chunk(0, 1, 3).size == 2
    assert Plan.__dataclass_params__.frozen


def test_urdf_chain_links_round_trip(tmp_path):
    p = tmp_path / "u.toml"
    p.write_text('[study]\nkind = "joint_sweep"\narm = "robot.urdf"\nbase_link = "base"\ntip_link = "tool0"\n')
    spec = read_study_file(p)
    assert (spec.base_link, spec.tip_link) == ("base", "tool0")
    again = write_study_file(spec, tmp_path / "v.toml")
    assert (again.base_link, again.tip_link) == ("base", "tool0") and again.arm_path == str(tmp_path / "robot.urdf")
    p.write_text('[study]\nkind = "joint_sweep"\narm = "robot.urdf"\ntip_link = 3\n')
    with pytest.raises(StudyError, match=r"\[study\] tip_link: expected a string, got 3"):
        read_study_file(p)
