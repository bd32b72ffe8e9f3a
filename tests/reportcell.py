"""A small cell and three small studies for the report and decision tests (shared, built once per
module): a mount search over 3 x 3 x 2 candidates, a path audit with a line over the base (joints 1
and 6 of the demo arm line up there) and a load map over a coarse plane."""
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
ARM = (ROOT / "arms" / "demo_s6.toml").as_posix()

CELL = """
[cell]
name = "report test cell"
[[point]]
name = "a"
xyz = [0.8, -0.2, 0.4]
rpy = [180, 0, 0]
[[point]]
name = "b"
xyz = [0.8, 0.2, 0.4]
rpy = [180, 0, 0]
[[point]]
name = "over_from"
xyz = [0.05, -0.3, 0.9]
rpy = [180, 0, 0]
[[point]]
name = "over_to"
xyz = [0.05, 0.3, 0.9]
rpy = [180, 0, 0]
[[path]]
name = "ab"
speed = 100
through = ["a", "b"]
[[path]]
name = "over"
speed = 200
through = ["over_from", "over_to"]
[[box]]
name = "table"
center = [0.8, 0, 0.15]
size = [0.4, 0.8, 0.3]
[mount]
x = [-0.1, 0.1]
y = [-0.1, 0.1]
step = 0.1
yaws = [0, 90]
[placement]
xyz = [0.05, 0.0, 0.0]
rpy = [0, 0, 0]
"""

STUDIES = {
    "ms": ('kind = "mount_search"', 'points = ["a", "b"]\nseeds = 4\nrefine = 1\nrefine_evaluations = 12\n'),
    "pa": ('kind = "path_audit"', "spacing = 0.01\n"),
    "lm": ('kind = "load_map"', 'grid = "plane"\nplane = "yz"\nat = 0.6\nu = [-0.4, 0.4]\nv = [0.2, 1.0]\n'
                                'step = 0.1\nrpy = [180, 0, 0]\nseeds = 4\n'),
}


def make_results(folder):
    """Run the three studies into ``folder``; returns {"ms": Results, "pa": ..., "lm": ...}."""
    from workbench.runner import run_study

    folder = Path(folder)
    (folder / "cell.toml").write_text(CELL)
    out = {}
    for key, (kind, settings) in STUDIES.items():
        (folder / f"{key}.toml").write_text(f'[study]\nname = "test {key}"\n{kind}\narm = "{ARM}"\n'
                                            f'cell = "cell.toml"\n[settings]\n{settings}')
        out[key] = run_study(str(folder / f"{key}.toml"), out=str(folder / f"{key}.h5"), executor="inprocess")
    return out
