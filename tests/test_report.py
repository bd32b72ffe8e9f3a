"""Layout report: page 1 answers the question (pdftotext), one page size (pdfinfo), no near-empty
page (pdftoppm renderings), the HTML carries the same sections in the same order (html.parser),
the per-point CSV, comparisons, bad outputs."""
import csv
import os
import re
import shutil
import subprocess
from html.parser import HTMLParser

import numpy as np
import pytest

from workbench.decision import decision_for, fmt_deg, fmt_mm
from workbench.report import (ASSUMPTIONS, CAUTIONS, ReportError, build_report, fingerprint, points_csv_path,
                              write_report)
from workbench.report import document as D
from workbench.report.pages import page_fill, page_sizes, render

pytestmark = pytest.mark.skipif(not shutil.which("pdftotext"), reason="poppler-utils (pdftotext) is needed")


@pytest.fixture(scope="module")
def res(small_cell_results):
    return small_cell_results


@pytest.fixture(scope="module")
def reports(res):
    """Each report written once: PDF and HTML of the mount search, PDF of the path audit (Letter)
    and of the load map."""
    d, r = res
    calls = []
    out = {"ms_pdf": write_report(r["ms"].path, d / "ms.pdf", progress=lambda f, t: calls.append((f, t))),
           "ms_html": write_report(r["ms"], d / "ms.html"),
           "pa_pdf": write_report(r["pa"], d / "pa.pdf", paper="letter"),
           "lm_pdf": write_report(r["lm"], d / "lm.pdf")}
    out["calls"] = calls
    return d, r, out


def _text(path, first=None, last=None, layout=False):
    """pdftotext of the pages, white space (line ends of wrapped text) made single spaces."""
    cmd = ["pdftotext"] + (["-layout"] if layout else [])
    if first:
        cmd += ["-f", str(first), "-l", str(last or first)]
    out = subprocess.run(cmd + [str(path), "-"], capture_output=True, text=True, check=True).stdout
    return out if layout else " ".join(out.split())


def test_page_one_answers_the_question(reports):
    d, r, out = reports
    p1 = _text(out["ms_pdf"], 1)
    ref = r["ms"].tables["refined"].columns
    # the recommended mount as the ranking (refined table, rank 1) gives it, in mm and degrees
    x, y, h = (f"{round(float(ref[k][0]))}" for k in ("x", "y", "height"))
    yaw = f"{float(ref['yaw'][0]):.1f}"
    assert f"x = {x} mm, y = {y} mm, height {h} mm, yaw {yaw} deg" in p1
    assert re.search(rf"\b{x}\s+{y}\s+{h}\s+{yaw}\s+floor\b", _text(out["ms_pdf"], 1, layout=True))
    # the verdicts, the risks and the read-first caution
    for words in ("Verdicts", "Work points served", "Inverse condition", "Joint-limit margin", "Largest risks",
                  "Read first", "ISO 10218-1/-2", "risk assessment", "Collisions checked",
                  "Clearance to obstacles and between links"):
        assert words in p1, words  # the demo arm has collision shapes: the mount search checks them
    dec = decision_for(r["ms"])
    for v in dec.verdicts:
        assert v.status in p1


def test_path_audit_and_load_map_state_the_base_placement(reports):
    d, r, out = reports
    p1 = _text(out["pa_pdf"], 1)
    assert "Base placement used" in p1 and "x = 50 mm, y = 0 mm, height 0 mm, yaw 0.0 deg (the cell file's" in p1
    assert "over, 220-380 mm" in p1 and "fail" in p1 and "joints 1 and 6 cancel" in p1
    p1 = _text(out["lm_pdf"], 1)
    assert "Base placement used" in p1 and "the arm holds at least" in p1 and "kg" in p1


def test_one_page_size_and_no_near_empty_page(reports, tmp_path):
    _, _, out = reports
    for key, size in (("ms_pdf", (595.3, 841.9)), ("pa_pdf", (612.0, 792.0)), ("lm_pdf", (595.3, 841.9))):
        sizes = page_sizes(out[key])
        assert len(sizes) >= 5
        assert all(s == pytest.approx(size, abs=0.2) for s in sizes), (key, sizes)
        pngs = render(out[key], tmp_path / key, dpi=40)
        assert len(pngs) == len(sizes)
        fills = [page_fill(p) for p in pngs]
        assert min(fills) >= 0.10, (key, fills)


def test_page_fill_measures_what_is_on_the_page(tmp_path):
    # a page with one heading near the top is nearly empty; a page with a figure is not
    import matplotlib.image as mpimg

    H, W = 1169, 827  # A4 at 100 dpi
    a = np.ones((H, W, 3))
    top = int(D.MARGIN_TOP / 297 * H)
    a[top + 5:top + 20, 80:400] = 0  # a heading
    a[H - 30:H - 25, 80:700] = 0  # the footer (below the text area): not counted
    mpimg.imsave(tmp_path / "p.png", a)
    assert page_fill(tmp_path / "p.png") < 0.03
    a[top + 30:top + 600, 80:700] = 0.3
    mpimg.imsave(tmp_path / "q.png", a)
    body = H - top - int(D.MARGIN_BOTTOM / 297 * H)
    assert page_fill(tmp_path / "q.png") == pytest.approx(600 / body, abs=0.01)


def test_numbers_and_headers_are_for_people(reports):
    _, _, out = reports
    for key in ("ms_pdf", "pa_pdf", "lm_pdf"):
        text = _text(out[key])
        body = text.split("Stored file texts")[0]  # the appendix quotes the files as they are
        assert not re.search(r"(?<![\w.])-0(\.0+)?(?![\d.])", body), key
        assert not re.search(r"\d\.\d+e-?\d+ mm", body), key
        for raw in ("worst_measure", "min_margin", "map_score", "min_inverse_condition", "worst_speed_ratio",
                    "reached_cells", "score_drop"):
            assert raw not in body, (key, raw)
    assert "Contents" in _text(out["ms_pdf"], 2)


class _Html(HTMLParser):
    VOID = {"meta", "img", "br", "hr", "link", "input"}

    def __init__(self):
        super().__init__()
        self.stack, self.imgs, self.errors, self.heads, self.ths, self.text = [], [], [], [], [], []
        self._cap = None

    def handle_starttag(self, tag, attrs):
        if tag == "img":
            self.imgs.append(dict(attrs))
        if tag in ("h2", "h3", "th"):
            self._cap = [tag, ""]
        if tag not in self.VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if self._cap and self._cap[0] == tag:
            (self.ths if tag == "th" else self.heads).append(self._cap[1].strip())
            self._cap = None
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"unbalanced </{tag}> (open: {self.stack[-3:]})")
        else:
            self.stack.pop()

    def handle_data(self, data):
        self.text.append(data)
        if self._cap:
            self._cap[1] += data


def test_html_has_the_same_sections_in_the_same_order(reports):
    d, r, out = reports
    path = d / "ms.html"
    src = path.read_text(encoding="utf-8")
    assert src.startswith("<!DOCTYPE html>")
    p = _Html()
    p.feed(src)
    p.close()
    assert not p.errors and not p.stack, (p.errors, p.stack)
    for img in p.imgs:
        assert img.get("alt")
        f = path.parent / img["src"]
        assert f.is_file() and f.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    rep = build_report(r["ms"])
    want = [h.label for h in rep.headings()]
    got = [h for h in p.heads if h != "Contents"]
    assert got == want
    # ... and the PDF has them in that order (after its contents page)
    text = _text(out["ms_pdf"])
    body = text[text.index(want[0], text.index("Contents") + 10 + len("".join(want))) - 2:]
    pos = -1
    for h in want:
        k = body.find(h, pos + 1)
        assert k > pos, h
        pos = k
    html_text = "".join(p.text)
    rec = decision_for(r["ms"]).recommendation
    assert f"x = {fmt_mm(rec.x)} mm, y = {fmt_mm(rec.y)} mm" in html_text and CAUTIONS in html_text
    assert "ISO 10218-1/-2" in html_text and ASSUMPTIONS.split(":")[0] in html_text
    assert not [t for t in p.ths if "_" in t and not t.startswith(("j", "q"))]
    assert fingerprint(r["ms"].arm_text) in html_text


def test_per_point_csv_beside_the_report(reports):
    d, r, out = reports
    path = points_csv_path(out["ms_pdf"])
    assert os.path.basename(path) == "ms_points.csv" and os.path.isfile(path)
    assert "ms_points.csv" in _text(out["ms_pdf"])  # the report says where it is
    rows = list(csv.reader(open(path, newline="", encoding="utf-8")))
    head, rows = rows[0], rows[1:]
    dec = decision_for(r["ms"])
    assert [row[0] for row in rows] == [p.name for p in dec.points]
    assert "j1 (deg)" in head and "inverse condition" in head and "limit margin" in head
    j = head.index("j1 (deg)")
    for row, p in zip(rows, dec.points):
        assert float(row[j]) == pytest.approx(np.degrees(p.q[0]), abs=1e-4)
        assert float(row[head.index("inverse condition")]) == pytest.approx(p.inverse_condition, rel=1e-5)
    # the PDF's table shows the same joint values rounded to 0.1 deg
    p3 = _text(out["ms_pdf"])
    assert fmt_deg(dec.points[0].q[0]) in p3


def test_progress_is_reported_up_to_the_end(reports):
    calls = reports[2]["calls"]
    fr = [f for f, _ in calls]
    assert fr == sorted(fr) and fr[-1] == 1.0 and len(fr) >= 5
    assert all(isinstance(t, str) and t for _, t in calls)


def test_colour_bars_never_cover_a_plot(res):
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    _, r = res
    rep = build_report(r["ms"])
    figs = [b.fig for b in rep.body if isinstance(b, D.Figure)]
    assert figs
    for fig in figs:
        FigureCanvasAgg(fig).draw()
        boxes = [a.get_window_extent() for a in fig.axes if a.get_label() != "<colorbar>"]
        bars = [a.get_window_extent() for a in fig.axes if a.get_label() == "<colorbar>"]
        for cb in bars:
            for b in boxes:
                assert not cb.overlaps(b), (cb, b)


def test_comparison_of_two_and_refusal_of_mixed_kinds(res, tmp_path, capsys):
    from workbench.cli import main

    d, r = res
    out = write_report([r["pa"].path, r["pa"].path], tmp_path / "cmp.pdf")
    p1 = _text(out, 1)
    assert "Comparison of 2 path audit results" in p1 and "Verdicts side by side" in p1
    assert "A: worst (verdict)" in p1 and "B: worst (verdict)" in p1 and "ISO 10218" in p1
    assert all(s == pytest.approx((595.3, 841.9), abs=0.2) for s in page_sizes(out))
    assert main(["report", str(r["ms"].path), str(r["pa"].path), "--out", str(tmp_path / "mixed.pdf")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("error: cannot compare results of different study kinds")
    assert not (tmp_path / "mixed.pdf").exists()


def test_bad_output_names_are_refused(res, tmp_path):
    _, r = res
    with pytest.raises(ReportError, match="expected a .pdf or .html"):
        write_report(r["pa"], tmp_path / "r.docx")
    with pytest.raises(ReportError, match="does not exist"):
        write_report(r["pa"], tmp_path / "nofolder" / "r.pdf")
    with pytest.raises(ReportError, match="unknown paper size"):
        write_report(r["pa"], tmp_path / "r.pdf", paper="a3")
    assert not list(tmp_path.iterdir())  # nothing half-written


def test_cli_report_error_is_one_line(tmp_path):
    from workbench.cli import main

    assert main(["report", str(tmp_path / "missing.h5"), "--out", str(tmp_path / "r.pdf")]) == 2


def test_no_text_touches_the_page_edges(reports):
    # every word of every page (title included) lies inside the page margins (pdftotext -bbox)
    _, _, out = reports
    for key in ("ms_pdf", "pa_pdf"):
        xml = subprocess.run(["pdftotext", "-bbox", str(out[key]), "-"], capture_output=True, text=True,
                             check=True).stdout
        pages = re.findall(r'<page width="([\d.]+)" height="([\d.]+)">(.*?)</page>', xml, re.S)
        assert pages
        margin = D.MARGIN_X * 72 / 25.4
        for w, h, body in pages:
            for x0, y0, x1, y1 in re.findall(r'<word xMin="([\d.]+)" yMin="([\d.]+)" xMax="([\d.]+)" '
                                             r'yMax="([\d.]+)"', body):
                assert float(x0) >= margin - 1 and float(x1) <= float(w) - margin + 1, (key, x0, x1)
                assert float(y0) >= 10 and float(y1) <= float(h) - 10, (key, y0, y1)
