"""The workbench document (workbench/document.py) without Qt: loading arms, cells, studies and
results files, the declared events in order with their payloads, selection and picks."""
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from workbench.document import EVENTS, Document, StudyResults, results_from_spec
from workbench.errors import WorkbenchError

ROOT = Path(__file__).resolve().parents[1]
ARM = (ROOT / "arms" / "demo_planar2r.toml").as_posix()
S6 = (ROOT / "arms" / "demo_s6.toml").as_posix()

STUDY = f"""[study]
name = "tiny 2R sweep"
kind = "joint_sweep"
arm = "{ARM}"
[settings]
mode = "grid"
joints = ["th1", "th2"]
ranges = [[0, 90], [-90, 90]]
steps = [3, 5]
rows = "vx,vy"
"""

CELL = """[cell]
name = "document test cell"
[[point]]
name = "a"
xyz = [0.8, 0.0, 0.4]
rpy = [180, 0, 0]
[placement]
xyz = [0.25, -0.5, 0.0]
rpy = [0, 0, 0]
"""


class Recorder:
    def __init__(self, doc):
        self.events = []
        doc.subscribe(lambda e, p: self.events.append((e, dict(p))))

    def names(self):
        return [e for e, _ in self.events]

    def clear(self):
        self.events.clear()


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    from workbench.runner import run_study

    d = tmp_path_factory.mktemp("doc")
    (d / "s.toml").write_text(STUDY)
    (d / "cell.toml").write_text(CELL)
    run_study(str(d / "s.toml"), out=str(d / "s.h5"), executor="inprocess")
    return d


def test_every_event_declares_its_payload():
    assert set(EVENTS) == {"arm", "cell", "study", "results", "chunk", "results_file", "selection", "picked"}
    for name, (keys, what) in EVENTS.items():
        assert keys and all(isinstance(k, str) for k in keys) and what
    doc = Document()
    with pytest.raises(ValueError):
        doc.emit("arm", arm=None)                 # a payload missing a declared key is refused
    with pytest.raises(ValueError):
        doc.subscribe(lambda e, p: None, events=["no_such_event"])


def test_load_arm_and_cell_fire_in_order_and_place_the_arm(files):
    doc = Document()
    rec = Recorder(doc)
    doc.load_arm(ARM)
    assert rec.names() == ["arm"] and rec.events[0][1]["path"] == os.path.abspath(ARM)
    assert doc.arm.n == 2
    rec.clear()
    doc.load_cell(files / "cell.toml")
    # the cell fires first, then the arm standing at the cell's placement
    assert rec.names() == ["cell", "arm"]
    assert rec.events[0][1]["path"] == str(files / "cell.toml")
    assert np.allclose(doc.arm.model.mount[:3, 3], [0.25, -0.5, 0.0])
    # the placed arm's tool point at (0, 90 deg) with unit links: (1, 1, 0) in the base frame
    # (by hand), the mount moves it to (1.25, 0.5, 0) in the cell
    T = np.asarray(doc.arm.fk(np.radians([0.0, 90.0])))
    assert np.allclose(T[:3, 3], [1.0, 1.0, 0.0], atol=1e-12)
    assert np.allclose((doc.arm.model.mount @ T)[:3, 3], [1.25, 0.5, 0.0], atol=1e-12)
    rec.clear()
    doc.move_arm(np.eye(4))
    assert rec.names() == ["arm"] and rec.events[0][1]["path"] is None


def test_a_bad_file_fires_nothing_and_changes_nothing(files, tmp_path):
    doc = Document()
    doc.load_arm(ARM)
    rec = Recorder(doc)
    bad = tmp_path / "bad.toml"
    bad.write_text("[arm]\nname = 'x'\n[[joint]]\ntype = 'revolute'\n")
    with pytest.raises(WorkbenchError):
        doc.load_arm(bad)
    bad_study = tmp_path / "bad_study.toml"
    bad_study.write_text(STUDY.replace("steps = [3, 5]", "steps = [3, -5]"))
    with pytest.raises(WorkbenchError):
        doc.load_study(bad_study)
    assert rec.events == []
    assert doc.arm_path == os.path.abspath(ARM) and doc.study is None and doc.session is None


def test_load_study_and_results_events_and_values(files):
    doc = Document()
    rec = Recorder(doc)
    spec = doc.load_study(files / "s.toml")
    assert rec.names() == ["arm", "study", "results"]
    assert rec.events[1][1] == {"spec": spec, "path": str(files / "s.toml")}
    assert rec.events[2][1] == {"session": None, "path": None}
    rec.clear()
    s = doc.open_results(files / "s.h5")
    assert rec.names() == ["arm", "results"]
    assert rec.events[1][1]["session"] is s and rec.events[1][1]["path"] == str(files / "s.h5")
    assert s.complete and doc.results_file == str(files / "s.h5")
    # planar 2R with unit links, rows vx, vy: manipulability w = |det J| = l1 l2 |sin th2|
    # (Yoshikawa, "Manipulability of robotic mechanisms", 1985, the two-link example)
    th2 = np.radians(np.linspace(-90, 90, 5))
    w = s.arrays["manipulability"].reshape(3, 5)
    assert np.allclose(w, np.tile(np.abs(np.sin(th2)), (3, 1)), atol=1e-12)
    # the smallest singular value of J^T J = [[3 + 2c, 1 + c], [1 + c, 1]] (hand algebra)
    c, sn = np.cos(th2), np.sin(th2)
    a = 3 + 2 * c
    smin = np.sqrt((a - np.sqrt(a * a - 4 * sn * sn)) / 2)
    assert np.allclose(s.arrays["min_sv"].reshape(3, 5), np.tile(smin, (3, 1)), atol=1e-9)
    rec.clear()
    doc.clear_results()
    assert rec.events == [("results", {"session": None, "path": None})]


def test_a_run_streams_chunks_then_names_its_file(files):
    from workbench.studies import read_study_file

    doc = Document()
    doc.load_study(files / "s.toml")
    rec = Recorder(doc)
    session = results_from_spec(doc.study)
    doc.start_results(session)
    assert rec.events == [("results", {"session": session, "path": None})]
    ref = Document().open_results(files / "s.h5")
    assert type(ref) is StudyResults and type(session) is StudyResults
    doc.store_chunk(0, 5, {k: v[:5] for k, v in ref.arrays.items()})
    doc.store_chunk(5, 15, {k: v[5:] for k, v in ref.arrays.items()})
    assert rec.names()[1:] == ["chunk", "chunk"]
    assert rec.events[1][1] == {"start": 0, "stop": 5} and rec.events[2][1] == {"start": 5, "stop": 15}
    assert session.complete
    assert np.array_equal(session.arrays["manipulability"], ref.arrays["manipulability"])
    doc.set_results_file(files / "s.h5")
    assert rec.events[-1] == ("results_file", {"path": str(files / "s.h5")})
    assert read_study_file(files / "s.toml").kind == "joint_sweep"


def test_selection_and_picks():
    doc = Document()
    rec = Recorder(doc)
    mask = np.zeros(15, bool)
    mask[[2, 3, 9]] = True
    doc.select(mask, source="map")
    assert np.array_equal(doc.selection, [2, 3, 9])
    doc.select([9, 2, 2], source="list")
    assert np.array_equal(doc.selection, [2, 9])
    doc.select(None)
    doc.pick(7)
    assert rec.events == [("selection", {"count": 3, "source": "map"}),
                          ("selection", {"count": 2, "source": "list"}),
                          ("selection", {"count": None, "source": None}),
                          ("picked", {"cell": 7})]
    only = []
    off = doc.subscribe(lambda e, p: only.append(e), events="picked")
    doc.select([1])
    doc.pick(None)
    off()
    doc.pick(3)
    assert only == ["picked"] and doc.picked == 3


def test_the_document_needs_no_qt(files):
    code = (f"import sys\nfrom workbench.document import Document\nd = Document()\n"
            f"d.load_study({str(files / 's.toml')!r})\nd.load_cell({str(files / 'cell.toml')!r})\n"
            f"s = d.open_results({str(files / 's.h5')!r})\nd.select(s.cells_done)\n"
            f"bad = [m for m in sys.modules if m.split('.')[0] in ('PySide6', 'pyqtgraph', 'shiboken6')]\n"
            f"print(len(d.selection), bad)\n")
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=600)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip().splitlines()[-1] == "15 []"
