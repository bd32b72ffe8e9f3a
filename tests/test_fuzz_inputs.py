"""Fuzz test of the file readers and the command line (issue 13): mutated arm files, URDFs, cell
files and study files give exactly one ``error:`` line (exit status 2) or succeed, never a
traceback. Deterministic (fixed seed) and bounded (a fixed number of cases per file type).
"""
from __future__ import annotations

import random
import re
from pathlib import Path

import pytest

from workbench.cli import main
from workbench.errors import WorkbenchError
from workbench.studies.cell import parse_cell_text

ROOT = Path(__file__).resolve().parents[1]
ARMS = ROOT / "arms"
SEED = 20261203
BAD_NUMBERS = ["0", "-1", "1e300", "-1e300", "inf", "nan", "1e9", "2e9", "-0.0", "3.5", "1e-300", "99999999999999999999",
               '"x"', "true", "[]", "[1, 2]", "{}", "-170", "1.5708"]
BAD_ATTRS = ["", "x", "nan", "inf", "1e300", "-1e308", "1 2", "1 2 3 4", "0 0 0", "-1", "1e9", "&#0;"]


def mutate_toml(text: str, rng: random.Random) -> str:
    lines = text.splitlines()
    for _ in range(rng.randint(1, 3)):
        op = rng.randrange(6)
        k = rng.randrange(len(lines))
        if op == 0:  # a number becomes something else
            nums = list(re.finditer(r"(?<![\w.])-?\d+(\.\d+)?(e-?\d+)?", lines[k]))
            if nums:
                m = rng.choice(nums)
                lines[k] = lines[k][:m.start()] + rng.choice(BAD_NUMBERS) + lines[k][m.end():]
        elif op == 1:
            del lines[k]
        elif op == 2:
            lines.insert(k, lines[rng.randrange(len(lines))])
        elif op == 3:  # a key renamed or a table header damaged
            lines[k] = re.sub(r"^(\s*)(\w+)", lambda m: m.group(1) + m.group(2)[::-1], lines[k])
        elif op == 4:  # characters cut
            if lines[k]:
                a = rng.randrange(len(lines[k]))
                lines[k] = lines[k][:a] + lines[k][a + rng.randint(1, 4):]
        else:  # a string value replaced
            lines[k] = re.sub(r'"[^"]*"', lambda m: rng.choice(['""', '"j1"', '"zz"', '" "', '"a:b"', "1"]), lines[k],
                              count=1)
        if not lines:
            lines = ["x"]
    return "\n".join(lines) + "\n"


def mutate_xml(text: str, rng: random.Random) -> str:
    for _ in range(rng.randint(1, 3)):
        op = rng.randrange(4)
        attrs = list(re.finditer(r'="([^"]*)"', text))
        if op <= 1 and attrs:
            m = rng.choice(attrs)
            text = text[:m.start()] + f'="{rng.choice(BAD_ATTRS)}"' + text[m.end():]
        elif op == 2:  # an element dropped
            els = list(re.finditer(r"<(\w+)[^<>]*/>", text))
            if els:
                m = rng.choice(els)
                text = text[:m.start()] + text[m.end():]
        else:
            a = rng.randrange(len(text))
            text = text[:a] + text[a + rng.randint(1, 20):]
    return text


def one_line_or_success(code: int, err: str):
    assert "Traceback" not in err, err
    if code == 2:
        lines = [ln for ln in err.splitlines() if not ln.startswith(("warning: ", "note: "))]
        assert len(lines) == 1 and lines[0].startswith("error: "), err
    else:
        assert code == 0, (code, err)


@pytest.mark.parametrize("name, count", [("demo_s6.toml", 30), ("demo_p3.toml", 15), ("demo_scara4.toml", 15),
                                         ("demo_u6.urdf", 40)])
def test_fuzzed_arm_files_give_one_error_line_or_succeed(tmp_path, capsys, name, count):
    rng = random.Random(f"{SEED}-{name}")
    src = (ARMS / name).read_text()
    for i in range(count):
        text = mutate_xml(src, rng) if name.endswith(".urdf") else mutate_toml(src, rng)
        f = tmp_path / f"case{i}{Path(name).suffix}"
        f.write_text(text)
        code = main(["info", str(f), "--samples", "50"])
        one_line_or_success(code, capsys.readouterr().err)


def test_fuzzed_cell_files_give_one_line_errors_or_a_cell():
    rng = random.Random(f"{SEED}-cell")
    src = (ARMS / "cells" / "tray_cell.toml").read_text()
    for _ in range(80):
        text = mutate_toml(src, rng)
        try:
            parse_cell_text(text, "cell.toml")
        except WorkbenchError as exc:
            msg = str(exc)
            assert "\n" not in msg and msg.startswith("cell.toml"), msg


def test_fuzzed_study_files_give_one_error_line_or_run(tmp_path, capsys):
    rng = random.Random(f"{SEED}-study")
    arm = ARMS / "demo_s6.toml"
    src = (f'[study]\nkind = "joint_sweep"\narm = "{arm}"\n\n[settings]\nmode = "grid"\njoints = ["j2", "j3"]\n'
           f'ranges = [[-90, 90], [-60, 60]]\nsteps = [5, 4]\nframe = "tcp"\nrows = "full"\nnear_singular = 0.02\n'
           f'samples = 30\nseed = 3\n')
    for i in range(30):
        f = tmp_path / f"s{i}.toml"
        f.write_text(mutate_toml(src, rng))
        out = tmp_path / f"s{i}.h5"
        code = main(["run", str(f), "--in-process", "--quiet", "--out", str(out)])
        one_line_or_success(code, capsys.readouterr().err)
        if code == 2:
            assert not out.exists()
