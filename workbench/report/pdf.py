"""PDF rendering of a :class:`~.document.Document` with ReportLab's page layout (platypus).

One page size and orientation for the whole document (A4 or Letter, portrait); page 1 is kept on
one page (shrunk to fit if it must), then a contents list with page numbers, the numbered
sections, the appendices. Text flows from page to page; long tables split with their header
repeated; headings stay with what follows them. After a build the fill of every page is measured
and the document is built again with slightly different spacing when a page would be less than
:data:`MIN_FILL` full.
"""
from __future__ import annotations

import io
import os
from xml.sax.saxutils import escape

from . import document as D

#: no page may be less full than this (fraction of the text area's height)
MIN_FILL = 0.12

_FONTS = {}


def _fonts():
    """Register the DejaVu fonts that ship with matplotlib (full Unicode: ≥, ±, °)."""
    if _FONTS:
        return _FONTS
    import matplotlib
    from reportlab.lib.fonts import addMapping
    from reportlab.pdfbase import pdfmetrics
    from reportlab.pdfbase.ttfonts import TTFont

    base = os.path.join(matplotlib.get_data_path(), "fonts", "ttf")
    names = {"wb-sans": "DejaVuSans.ttf", "wb-sans-bold": "DejaVuSans-Bold.ttf",
             "wb-sans-italic": "DejaVuSans-Oblique.ttf", "wb-sans-bolditalic": "DejaVuSans-BoldOblique.ttf",
             "wb-mono": "DejaVuSansMono.ttf"}
    try:
        for k, f in names.items():
            pdfmetrics.registerFont(TTFont(k, os.path.join(base, f)))
        addMapping("wb-sans", 0, 0, "wb-sans")
        addMapping("wb-sans", 1, 0, "wb-sans-bold")
        addMapping("wb-sans", 0, 1, "wb-sans-italic")
        addMapping("wb-sans", 1, 1, "wb-sans-bolditalic")
        _FONTS.update(sans="wb-sans", bold="wb-sans-bold", italic="wb-sans-italic", mono="wb-mono")
    except Exception:  # fonts missing: the standard ones (no ≥ sign, but a document)
        _FONTS.update(sans="Helvetica", bold="Helvetica-Bold", italic="Helvetica-Oblique", mono="Courier")
    return _FONTS


def _styles(scale=1.0):
    from reportlab.lib import colors
    from reportlab.lib.styles import ParagraphStyle

    F = _fonts()
    ink = colors.HexColor("#1a1a1a")

    def st(name, size, lead=None, font=None, **kw):
        return ParagraphStyle(name, fontName=font or F["sans"], fontSize=size, leading=lead or size * 1.28,
                              textColor=kw.pop("textColor", ink), **kw)

    return {
        "title": st("title", 15.5, 19, F["bold"], spaceAfter=2),
        "subtitle": st("subtitle", 7.6, 9.8, textColor=colors.HexColor("#555555"), spaceAfter=5),
        "h1": st("h1", 12.5, 15.5, F["bold"], spaceBefore=9 * scale, spaceAfter=4 * scale),
        "h2": st("h2", 10, 12.5, F["bold"], spaceBefore=6 * scale, spaceAfter=3 * scale),
        "h1p": st("h1p", 9.2, 11.5, F["bold"], spaceBefore=5, spaceAfter=2, keepWithNext=1),
        "body": st("body", 8.6, 11.2, spaceAfter=4 * scale),
        "small": st("small", 7.3, 9.2, spaceAfter=3 * scale),
        "note": st("note", 7.3, 9.2, textColor=colors.HexColor("#444444"), spaceAfter=3 * scale),
        "answer": st("answer", 9.4, 12.2, spaceAfter=2),
        "caution": st("caution", 7.6, 9.6),
        "bullet": st("bullet", 8.2, 10.6, leftIndent=10, bulletIndent=2, spaceAfter=2 * scale),
        "caption": st("caption", 7.3, 9.2, textColor=colors.HexColor("#333333"), spaceBefore=2, spaceAfter=7 * scale),
        "cell": st("cell", 7.3, 8.8),
        "cellr": st("cellr", 7.3, 8.8, alignment=2),
        "head": st("head", 7.1, 8.6, F["bold"]),
        "headr": st("headr", 7.1, 8.6, F["bold"], alignment=2),
        "risk": st("risk", 8.0, 10.2, leftIndent=13, bulletIndent=0, spaceAfter=3),
        "pre": st("pre", 6.3, 7.6, F["mono"]),
        "toc1": st("toc1", 9, 13, F["bold"]),
        "toc2": st("toc2", 8.2, 10.8, leftIndent=14),
        "pairk": st("pairk", 7.8, 9.8, F["bold"]),
        "pairv": st("pairv", 7.8, 9.8),
    }


def _x(text) -> str:
    return escape(str(text))


_STATUS = {"pass": ("#1e7b34", True, False), "fail": ("#b71c1c", True, False),
           "not checked": ("#757575", False, True)}


def _status_markup(text):
    c, bold, ital = _STATUS.get(str(text), ("#1a1a1a", False, False))
    t = _x(text)
    if bold:
        t = f"<b>{t}</b>"
    if ital:
        t = f"<i>{t}</i>"
    return f'<font color="{c}">{t}</font>'


def _col_widths(tb: D.Table, total, font, bold):
    """Column widths (pt) that never break a word: each column at least as wide as its longest
    word (header or cell), the rest shared by how much more the full texts would take. Returns
    (widths, font size) - the font shrinks when even the words do not fit."""
    from reportlab.pdfbase.pdfmetrics import stringWidth

    F = _fonts()
    n = len(tb.header)
    pad = 5.5
    size = font
    while True:
        lo, want = [], []
        for j in range(n):
            words = str(tb.header[j]).split() or [""]
            wmin = max(stringWidth(w, F["bold"], size - 0.2) for w in words)
            wfull = stringWidth(str(tb.header[j]), F["bold"], size - 0.2) * 0.55
            for r in tb.rows:
                t = str(r[j])
                ws = t.split() or [""]
                wmin = max(wmin, max(stringWidth(w, F["sans"], size) for w in ws))
                wfull = max(wfull, stringWidth(t, F["sans"], size))
            lo.append(wmin + pad)
            want.append(max(wfull, wmin) + pad)
        if sum(lo) <= total or size <= 5.0:
            break
        size -= 0.3
    if sum(want) <= total:
        extra = total - sum(want)
        w = [v + extra * v / sum(want) for v in want] if tb.widths != "compact" else [v * 1.25 for v in want]
    else:
        room = total - sum(lo)
        more = [max(b - a, 0.0) for a, b in zip(lo, want)]
        k = room / sum(more) if sum(more) > 0 else 0.0
        w = [a + m * k for a, m in zip(lo, more)]
    return w, size


def _table(tb: D.Table, width, S):
    from reportlab.lib import colors
    from reportlab.platypus import Paragraph, Table, TableStyle

    n = len(tb.header)
    align = tb.align or ["l"] * n
    widths, fs = _col_widths(tb, width, tb.font, True)
    cs = S["cell"].clone("c", fontSize=fs, leading=fs * 1.22)
    csr = S["cellr"].clone("cr", fontSize=fs, leading=fs * 1.22)
    hs = S["head"].clone("h", fontSize=fs - 0.2, leading=(fs - 0.2) * 1.22)
    hsr = S["headr"].clone("hr", fontSize=fs - 0.2, leading=(fs - 0.2) * 1.22)
    data = [[Paragraph(_x(h), hsr if align[j] == "r" else hs) for j, h in enumerate(tb.header)]]
    for row in tb.rows:
        cells = []
        for j, v in enumerate(row):
            txt = _status_markup(v) if j == tb.status_col else _x(v)
            cells.append(Paragraph(txt, csr if align[j] == "r" else cs))
        data.append(cells)
    t = Table(data, colWidths=widths, repeatRows=1, hAlign="LEFT")
    style = [("VALIGN", (0, 0), (-1, -1), "TOP"),
             ("BACKGROUND", (0, 0), (-1, 0), colors.HexColor("#e8ebf0")),
             ("LINEBELOW", (0, 0), (-1, 0), 0.6, colors.HexColor("#7a869a")),
             ("LINEBELOW", (0, 1), (-1, -1), 0.25, colors.HexColor("#d0d4da")),
             ("LEFTPADDING", (0, 0), (-1, -1), 2.5), ("RIGHTPADDING", (0, 0), (-1, -1), 2.5),
             ("TOPPADDING", (0, 0), (-1, -1), 1.6), ("BOTTOMPADDING", (0, 0), (-1, -1), 1.8)]
    t.setStyle(TableStyle(style))
    return t


def _image(fb: D.Figure, width, dpi=200, scale=1.0):
    from reportlab.lib.units import inch
    from reportlab.platypus import Image

    buf = io.BytesIO()
    fb.fig.savefig(buf, format="png", dpi=dpi)
    buf.seek(0)
    w_in, h_in = fb.fig.get_size_inches()
    w = min(width, w_in * inch) * scale
    return Image(buf, width=w, height=w * h_in / w_in)


def _flowables(blocks, S, width, height, figscale=1.0, prefont=6.3, keep=True):
    from reportlab.lib import colors
    from reportlab.platypus import CondPageBreak, KeepTogether, Paragraph, Preformatted, Spacer, Table, TableStyle

    out = []
    pending = []  # headings waiting for the first lines of what follows them

    for b in blocks:
        start = len(out)
        if isinstance(b, D.Heading):
            style = S["h1" if b.level == 1 else "h2"]
            p = Paragraph(_x(b.label), style)
            p._wb_heading = b
            pending.append(p)
            continue
        elif isinstance(b, D.Para):
            if b.style == "caution":
                box = Table([[Paragraph(_x(b.text), S["caution"])]], colWidths=[width])
                box.setStyle(TableStyle([("BOX", (0, 0), (-1, -1), 1.1, colors.HexColor("#b26a00")),
                                         ("BACKGROUND", (0, 0), (-1, -1), colors.HexColor("#fff6e8")),
                                         ("LEFTPADDING", (0, 0), (-1, -1), 5), ("RIGHTPADDING", (0, 0), (-1, -1), 5),
                                         ("TOPPADDING", (0, 0), (-1, -1), 3), ("BOTTOMPADDING", (0, 0), (-1, -1), 4)]))
                out += [box, Spacer(1, 3)]
            elif b.style == "answer":
                box = Table([[Paragraph(b.html or _x(b.text), S["answer"])]], colWidths=[width])
                box.setStyle(TableStyle([("LINEBEFORE", (0, 0), (0, -1), 2.5, colors.HexColor("#2f5597")),
                                         ("BACKGROUND", (0, 0), (-1, -1), colors.HexColor("#f1f5fb")),
                                         ("LEFTPADDING", (0, 0), (-1, -1), 6), ("TOPPADDING", (0, 0), (-1, -1), 3),
                                         ("BOTTOMPADDING", (0, 0), (-1, -1), 4)]))
                out += [box, Spacer(1, 4)]
            elif b.style == "bullet":
                out.append(Paragraph(b.html or _x(b.text), S["bullet"], bulletText="•"))
            elif b.style == "subhead":
                out.append(Paragraph(_x(b.text), S["h1p"]))
            elif b.style == "title":
                out.append(Paragraph(_x(b.text), S["title"]))
            elif b.style == "subtitle":
                out.append(Paragraph(_x(b.text), S["subtitle"]))
            else:
                out.append(Paragraph(b.html or _x(b.text), S.get(b.style, S["body"])))
        elif isinstance(b, D.Table):
            parts = [_table(b, width, S)]
            if b.caption:
                parts.insert(0, Paragraph(f"<b>Table {b.number}.</b> {_x(b.caption)}", S["caption"].clone(
                    "tc", spaceBefore=3, spaceAfter=2)))
            if not pending and keep:  # a caption never ends a page: it goes with the first rows
                parts.insert(0, CondPageBreak(_first_lines(parts, width)))
            if b.note:
                parts.append(Paragraph(_x(b.note), S["note"].clone("tn", spaceBefore=2)))
            parts.append(Spacer(1, 5))
            out += parts
        elif isinstance(b, D.Figure):
            img = _image(b, width, scale=figscale)
            cap = Paragraph(f"<b>Figure {b.number}.</b> {_x(b.caption)}", S["caption"])
            out += [KeepTogether([img, cap])] if keep and not pending else [img, cap]
        elif isinstance(b, D.Pre):
            st = S["pre"].clone("pre2", fontSize=prefont, leading=prefont * 1.21)
            per_line = max(40, int(width / (prefont * 0.602)) - 1)
            out.append(Preformatted(b.text.expandtabs(4), st, maxLineLength=per_line, newLineChars="  "))
            out.append(Spacer(1, 4))
        elif isinstance(b, D.Pairs):
            kw = max((len(str(k)) for k, _ in b.items), default=8)
            wk = min(width * 0.35, max(60.0, kw * 4.6))
            t = Table([[Paragraph(_x(k), S["pairk"]), Paragraph(_x(v), S["pairv"])] for k, v in b.items],
                      colWidths=[wk, width - wk], hAlign="LEFT")
            t.setStyle(TableStyle([("VALIGN", (0, 0), (-1, -1), "TOP"), ("LEFTPADDING", (0, 0), (-1, -1), 0),
                                   ("TOPPADDING", (0, 0), (-1, -1), 0.6), ("BOTTOMPADDING", (0, 0), (-1, -1), 0.6)]))
            out += [t, Spacer(1, 5)]
        elif isinstance(b, D.Risks):
            for i, (where, what, change) in enumerate(b.items):
                k = b.start + i
                html = (f'<font color="#c0392b"><b>{k}</b></font>&nbsp;&nbsp;<b>{_x(where)}</b>: {_x(what)}. '
                        f"<i>What to change:</i> {_x(change)}.")
                out.append(Paragraph(html, S["risk"], bulletText=" "))
        if pending and len(out) > start:
            # a heading never ends a page: a figure moves with it; before text, tables and file
            # texts, the page breaks early unless the heading and the first lines fit
            new = out[start:]
            if isinstance(b, D.Figure) and len(new) >= 2:
                out[start:] = [KeepTogether(pending + new[:2])] + new[2:]
            else:
                need = sum(_height(f, width) for f in pending) + _first_lines(new, width)
                out[start:] = [CondPageBreak(need)] + pending + new
            pending.clear()
    if pending:
        out.extend(pending)
    return out


def _height(fl, width) -> float:
    """Height of a flowable with its space before and after (pt)."""
    try:
        h = fl.wrap(width, 1e6)[1]
    except Exception:
        return 0.0
    return h + getattr(fl, "getSpaceBefore", lambda: 0)() + getattr(fl, "getSpaceAfter", lambda: 0)()


def _first_lines(flowables, width) -> float:
    """Height of the first few lines of what follows a heading: a caption and three table rows, the
    first eight lines of a file text, or the first paragraph (at most 80 pt)."""
    from reportlab.platypus import Preformatted, Table

    need = 0.0
    for f in flowables:
        if isinstance(f, Table):
            f.wrap(width, 1e6)
            return need + sum(f._rowHeights[:4])
        if isinstance(f, Preformatted):
            return need + 8 * f.style.leading
        h = _height(f, width)
        if h < 20 and len(flowables) > 1:  # a caption: keep going to the table
            need += h
            continue
        return need + min(h, 80.0)
    return need


def _make_doc_class():
    from reportlab.platypus import BaseDocTemplate, Frame, PageTemplate

    class _Doc(BaseDocTemplate):
        def __init__(self, path, rep, **kw):
            super().__init__(path, **kw)
            self.rep = rep
            frame = Frame(self.leftMargin, self.bottomMargin, self.width, self.height, id="body",
                          leftPadding=0, rightPadding=0, topPadding=0, bottomPadding=0)
            self.addPageTemplates([PageTemplate(id="page", frames=[frame], onPage=self._footer)])
            self.fill = {}
            self.pages_total = 0

        def beforeDocument(self):
            # each pass of multiBuild knows the page count of the pass before ("page N of M")
            if self.fill:
                self.pages_total = max(self.fill)
            self.fill = {}

        def afterFlowable(self, fl):
            top = self.bottomMargin + self.height
            y = getattr(self.frame, "_y", top)
            self.fill[self.page] = max(self.fill.get(self.page, 0.0), (top - y) / self.height)
            h = getattr(fl, "_wb_heading", None)
            if h is not None:
                key = h.anchor
                self.canv.bookmarkPage(key)
                self.canv.addOutlineEntry(h.label, key, level=h.level - 1, closed=h.level > 1)
                self.notify("TOCEntry", (h.level - 1, h.label, self.page, key))

        def _footer(self, canv, doc):
            F = _fonts()
            canv.saveState()
            canv.setFont(F["sans"], 6.8)
            canv.setFillGray(0.35)
            y = self.bottomMargin - 9.5
            total = self.pages_total or 0
            txt = f"page {doc.page} of {total}" if total else f"page {doc.page}"
            from reportlab.pdfbase.pdfmetrics import stringWidth

            foot = self.rep.meta.get("footer", "")
            room = self.width - stringWidth(txt, F["sans"], 6.8) - 12
            while foot and stringWidth(foot, F["sans"], 6.8) > room:
                foot = foot[:-2].rstrip() + "…"
            canv.drawString(self.leftMargin, y, foot)
            canv.drawRightString(self.leftMargin + self.width, y, txt)
            canv.setStrokeGray(0.75)
            canv.setLineWidth(0.4)
            canv.line(self.leftMargin, y + 7, self.leftMargin + self.width, y + 7)
            canv.restoreState()

    return _Doc


def write_pdf(rep: D.Document, path: str, progress=None) -> dict:
    """Write ``rep`` to ``path``; returns ``{"pages": N, "fill": {page: fraction}}``.

    progress(fraction, text) is called as the figures are drawn and the pages are laid out.
    """
    from reportlab.lib.units import mm
    from reportlab.platypus import KeepInFrame, PageBreak, Paragraph, Spacer
    from reportlab.platypus.tableofcontents import TableOfContents

    progress = progress or (lambda f, t: None)
    W, H = D.PAPERS[rep.paper]
    Doc = _make_doc_class()
    attempts = [(1.0, 1.0, 6.3), (0.97, 0.9, 6.0), (1.0, 1.12, 6.7), (0.93, 0.8, 5.8)]
    result = None
    last_fill = None
    for n_try, (figscale, space, prefont) in enumerate(attempts):
        S = _styles(space)
        doc = Doc(path, rep, pagesize=(W * mm, H * mm), leftMargin=D.MARGIN_X * mm, rightMargin=D.MARGIN_X * mm,
                  topMargin=D.MARGIN_TOP * mm, bottomMargin=D.MARGIN_BOTTOM * mm, title=rep.title,
                  author="manipulability-workbench", creator="manipulability-workbench", subject=rep.subtitle)
        width, height = doc.width, doc.height
        progress(0.1 + 0.2 * n_try, "drawing the figures")
        first = _flowables(rep.page1, S, width, height, figscale=1.0, keep=False)
        story = [KeepInFrame(width, height, first, mode="shrink"), PageBreak()]
        toc = TableOfContents()
        toc.levelStyles = [S["toc1"], S["toc2"]]
        toc.dotsMinLevel = 0
        story += [Paragraph("Contents", S["h1"]), Paragraph(
            "Page 1 holds the answer, the verdicts, the largest risks and the caution; the sections below give "
            "the evidence.", S["note"]), toc, Spacer(1, 6)]
        story += _flowables(rep.body, S, width, height, figscale=figscale, prefont=prefont)
        progress(0.25 + 0.2 * n_try, "laying out the pages")
        # passes until the contents' page numbers settle (multiBuild); each knows the page count
        doc.multiBuild(list(story))
        fill = dict(doc.fill)
        result = {"pages": doc.pages_total, "fill": fill}
        worst = min(fill.values()) if fill else 1.0
        last_fill = fill
        if worst >= MIN_FILL:
            break
    if last_fill and min(last_fill.values()) < MIN_FILL:
        pass  # the best we could do; the page check in the tests will say so
    progress(0.95, "PDF written")
    return result
