"""Layout report: PDF pages and cautions text (pdftotext), valid HTML that references its images."""
import os
import shutil
import subprocess
from html.parser import HTMLParser

import numpy as np
import pytest

from workbench.report import CAUTIONS, ReportError, build_report, fingerprint, write_report
from workbench.runner import run_study

ROOT = __import__("pathlib").Path(__file__).resolve().parents[1]

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
[[path]]
name = "ab"
speed = 100
through = ["a", "b"]
[[box]]
name = "table"
center = [0.8, 0, 0.15]
size = [0.4, 0.8, 0.3]
[mount]
x = [-0.1, 0.1]
y = [-0.1, 0.1]
step = 0.1
yaws = [0, 90]
"""


@pytest.fixture(scope="module")
def results(tmp_path_factory):
    d = tmp_path_factory.mktemp("rep")
    (d / "cell.toml").write_text(CELL)
    arm = (ROOT / "arms" / "demo_s6.toml").as_posix()
    (d / "ms.toml").write_text(f'[study]\nkind = "mount_search"\narm = "{arm}"\ncell = "cell.toml"\n'
                               '[settings]\nseeds = 4\nrefine = 1\nrefine_evaluations = 12\n')
    (d / "pa.toml").write_text(f'[study]\nkind = "path_audit"\narm = "{arm}"\ncell = "cell.toml"\n'
                               '[settings]\nspacing = 0.01\n')
    out = {}
    for k in ("ms", "pa"):
        out[k] = run_study(str(d / f"{k}.toml"), out=str(d / f"{k}.h5"), executor="inprocess")
    return d, out


def _pdftotext(path):
    exe = shutil.which("pdftotext")
    assert exe, "pdftotext (poppler-utils) is needed for this test"
    return subprocess.run([exe, "-layout", str(path), "-"], capture_output=True, text=True, check=True).stdout


def _pages(path):
    out = subprocess.run(["pdfinfo", str(path)], capture_output=True, text=True, check=True).stdout
    return int(next(ln.split()[-1] for ln in out.splitlines() if ln.startswith("Pages:")))


def test_pdf_has_the_pages_and_the_cautions(results):
    d, res = results
    pdf = d / "ms.pdf"
    write_report(res["ms"].path, pdf)
    text = _pdftotext(pdf)
    # title page, score+settings, floor score map, reached map, per-yaw/height map, sensitivity,
    # tables (refined, ranking, sensitivity, best points), assumptions, cautions
    rep = build_report(res["ms"])
    assert _pages(pdf) >= 10
    assert "Layout report" in text and "Mount ranking" in text and "Refined mounts" in text
    assert "ISO 10218-1/-2" in text and "risk assessment" in text
    assert "Kinematic and static only" in text
    assert fingerprint(res["ms"].arm_text) in text.replace(" ", "")
    assert "score = f^2" in text
    assert any(b.title == "Cautions" and b.paragraphs == [CAUTIONS] for b in rep.blocks)


def test_path_audit_pdf_and_html(results):
    d, res = results
    pdf = d / "pa.pdf"
    write_report(res["pa"], pdf)
    text = _pdftotext(pdf)
    assert "Path audit: ab" in text and "Near-singular spans" in text and "ISO 10218" in text
    html_path = d / "pa.html"
    write_report(res["pa"], html_path)
    _check_html(html_path)


class _Checker(HTMLParser):
    VOID = {"meta", "img", "br", "hr", "link", "input"}

    def __init__(self):
        super().__init__()
        self.stack, self.imgs, self.errors, self.text = [], [], [], []

    def handle_starttag(self, tag, attrs):
        if tag == "img":
            self.imgs.append(dict(attrs))
        if tag not in self.VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"unbalanced </{tag}> (open: {self.stack[-3:]})")
        else:
            self.stack.pop()

    def handle_data(self, data):
        self.text.append(data)


def _check_html(path):
    src = path.read_text(encoding="utf-8")
    assert src.startswith("<!DOCTYPE html>")
    p = _Checker()
    p.feed(src)
    p.close()
    assert not p.errors and not p.stack, (p.errors, p.stack)
    assert p.imgs
    for img in p.imgs:
        assert img.get("alt")
        f = path.parent / img["src"]
        assert f.is_file() and f.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    text = "".join(p.text)
    assert "ISO 10218-1/-2" in text and "Assumptions" in text


def test_mount_search_html(results):
    d, res = results
    out = d / "ms.html"
    write_report(res["ms"], out)
    _check_html(out)
    assert len(os.listdir(d / "ms_files")) >= 4  # score map, reached map, per yaw/height, sensitivity


def test_bad_output_names_are_refused(results, tmp_path):
    _, res = results
    with pytest.raises(ReportError, match="expected a .pdf or .html"):
        write_report(res["pa"], tmp_path / "r.docx")
    with pytest.raises(ReportError, match="does not exist"):
        write_report(res["pa"], tmp_path / "nofolder" / "r.pdf")
    assert not list(tmp_path.iterdir())  # nothing half-written


def test_cli_report_error_is_one_line(tmp_path):
    from workbench.cli import main

    assert main(["report", str(tmp_path / "missing.h5"), "--out", str(tmp_path / "r.pdf")]) == 2
