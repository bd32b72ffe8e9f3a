"""``workbench run`` / ``workbench export``: bad input -> exit 2 and one line, nothing written;
kill -9 never leaves a half file under the final name; Ctrl-C leaves a readable, incomplete file."""
from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from workbench.cli import main
from workbench.results import read_results

ROOT = Path(__file__).resolve().parents[1]
S6 = ROOT / "arms" / "demo_s6.toml"


def study(tmp_path, settings='joints = ["j2", "j3"]\nsteps = [40, 50]\n', kind="joint_sweep", arm=None,
          name="s.toml"):
    p = tmp_path / name
    p.write_text(f'[study]\nkind = "{kind}"\narm = "{arm or S6}"\n\n[settings]\n{settings}')
    return p


def test_run_and_export(tmp_path, capsys):
    s = study(tmp_path)
    out = tmp_path / "r.h5"
    assert main(["run", str(s), "--out", str(out), "--in-process"]) == 0
    err = capsys.readouterr().err
    assert "run: 100% (2,000 of 2,000 cells)" in err and f"wrote {out}" in err
    r = read_results(out)
    assert r.shape == (40, 50) and not r.incomplete
    assert main(["export", str(out), "--png", str(tmp_path / "m.png"), "--measure", "min_sv",
                 "--csv", str(tmp_path / "p.csv")]) == 0
    assert (tmp_path / "m.png").stat().st_size > 5000
    assert (tmp_path / "p.csv").read_text().startswith("cell,j1 [deg]")


def test_run_names_settings_it_ignores(tmp_path, capsys):
    # a grid sweep does not read seed / samples: the run goes ahead and says so in one line
    s = study(tmp_path, 'joints = ["j2"]\nsteps = [30]\nseed = 4\nsamples = 100\n')
    assert main(["run", str(s), "--out", str(tmp_path / "r.h5"), "--in-process"]) == 0
    err = capsys.readouterr().err
    assert f"note: {s}: [settings] not used, ignored: seed, samples (mode is 'grid')\n" in err
    assert main(["run", str(study(tmp_path, name="plain.toml")), "--out", str(tmp_path / "p.h5")]) == 0
    assert "not used" not in capsys.readouterr().err


def bad_cases(tmp_path):
    s_ok = study(tmp_path, name="ok.toml")
    return [
        ([str(study(tmp_path, kind="spiral", name="k.toml"))], "[study] kind: unknown study kind 'spiral'"),
        ([str(study(tmp_path, 'joints = ["j2"]\nranges = [[30, 10]]\nsteps = [5]\n', name="e.toml"))],
         "[settings] ranges: joint j2: empty range [30, 10]"),
        ([str(study(tmp_path, 'joints = ["j2"]\nsteps = [0]\n', name="z.toml"))],
         "[settings] steps: joint j2: expected at least 1 point, got 0"),
        ([str(study(tmp_path, 'joints = ["j2", "j3"]\nsteps = [1000000, 1000000]\n', name="t.toml"))],
         "[settings] steps: 1,000,000,000,000 cells is more than"),
        ([str(study(tmp_path, arm="no_arm_here.toml", name="a.toml"))], "[study] arm: arm file"),
        ([str(tmp_path / "missing.toml")], "study file: "),
        ([str(s_ok), "--out", str(tmp_path)], "--out"),
        ([str(s_ok), "--out", "/proc/results.h5"], "--out /proc/results.h5: cannot create files"),
        ([str(s_ok), "--out", str(tmp_path / "nofolder" / "r.h5")], "folder"),
        ([str(s_ok), "--workers", "0"], "--workers: expected a whole number >= 1"),
    ]


def test_bad_input_exits_2_with_one_line_and_writes_nothing(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    cases = bad_cases(tmp_path)
    before = sorted(p.name for p in tmp_path.iterdir())
    for argv, expected in cases:
        assert main(["run", *argv]) == 2, argv
        err = capsys.readouterr().err
        assert err.startswith("error: ") and err.count("\n") == 1, err
        assert expected in err, (expected, err)
    assert sorted(p.name for p in tmp_path.iterdir()) == before  # nothing written, no temporary files
    assert main(["export", str(tmp_path / "ok.toml"), "--png", str(tmp_path / "x.png")]) == 2
    assert "not an HDF5 results file" in capsys.readouterr().err
    assert main(["export", str(tmp_path / "none.h5")]) == 2
    assert capsys.readouterr().err == "error: export: nothing to do; give --png FILE and/or --csv FILE\n"


def start_run(tmp_path, out, *extra, steps=(3000, 3000)):  # 9 M cells: signalled early, never finished
    s = study(tmp_path, f'joints = ["j2", "j3"]\nsteps = [{steps[0]}, {steps[1]}]\n', name="long.toml")
    env = dict(os.environ, PYTHONUNBUFFERED="1")
    return subprocess.Popen([sys.executable, "-m", "workbench", "run", str(s), "--out", str(out), *extra],
                            stderr=subprocess.PIPE, stdout=subprocess.DEVNULL, text=True, env=env, cwd=tmp_path)


def wait_for_progress(proc, percent=1, timeout=600):
    t0 = time.time()
    while time.time() - t0 < timeout:
        line = proc.stderr.readline()
        if not line:
            break
        if line.startswith("run: ") and int(line[5:].split("%")[0]) >= percent:
            return line
    raise AssertionError("no progress seen")


@pytest.mark.slow
def test_kill_9_leaves_no_file_or_the_earlier_complete_one(tmp_path):
    out = tmp_path / "r.h5"
    proc = start_run(tmp_path, out, "--in-process")
    wait_for_progress(proc)
    assert any(p.name.endswith(".partial") for p in tmp_path.iterdir())  # written under a temporary name
    proc.kill()
    proc.wait()
    assert not out.exists()
    # an earlier complete file under the final name survives a killed re-run untouched
    assert main(["run", str(study(tmp_path, name="small.toml")), "--out", str(out), "--quiet"]) == 0
    # (the next run to the same name removed the dead run's temporary file)
    assert not any(p.name.endswith(".partial") for p in tmp_path.iterdir())
    before = out.read_bytes()
    proc = start_run(tmp_path, out, "--in-process")
    wait_for_progress(proc)
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    assert out.read_bytes() == before
    r = read_results(out)
    assert not r.incomplete and r.shape == (40, 50)


@pytest.mark.slow
def test_ctrl_c_cancels_into_a_readable_incomplete_file(tmp_path):
    out = tmp_path / "r.h5"
    proc = start_run(tmp_path, out, "--workers", "2")
    wait_for_progress(proc)
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=600)
    assert proc.returncode == 130, err
    assert "cancelled:" in err and "marked incomplete" in err and "Traceback" not in err
    r = read_results(out)
    assert r.incomplete and 0 < r.finished.sum() < r.finished.size
    assert [p.name for p in tmp_path.iterdir() if p.name.endswith(".partial")] == []
