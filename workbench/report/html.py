"""HTML rendering of a :class:`~.document.Document`: one standalone page plus a ``<stem>_files``
folder of PNG images, with the same blocks, numbers and order as the PDF."""
from __future__ import annotations

import html as _html
import os

from . import document as D

_CSS = """body{font-family:"DejaVu Sans",Verdana,sans-serif;max-width:60em;margin:2em auto;padding:0 1.2em;
color:#1a1a1a;line-height:1.4;font-size:15px}
h1{font-size:1.55em;margin:0.2em 0}h2{font-size:1.25em;margin-top:1.6em;border-bottom:1px solid #ccd;
padding-bottom:2px}h3{font-size:1.05em;margin-top:1.2em}
.subtitle{color:#555;font-size:0.85em}.page1{border-bottom:3px double #99a;padding-bottom:1em;margin-bottom:1em}
.answer{border-left:4px solid #2f5597;background:#f1f5fb;padding:0.4em 0.8em;font-size:1.05em}
.caution{border:2px solid #b26a00;background:#fff6e8;padding:0.4em 0.8em;font-size:0.9em}
.note,.small{font-size:0.85em;color:#444}.subhead{font-weight:bold;margin:0.8em 0 0.2em}
table{border-collapse:collapse;font-size:0.82em;margin:0.3em 0 0.2em}
th{background:#e8ebf0;border-bottom:1px solid #7a869a;text-align:left;padding:2px 5px;vertical-align:bottom}
td{border-bottom:1px solid #d0d4da;padding:2px 5px;vertical-align:top}
td.r,th.r{text-align:right}caption{text-align:left;font-size:0.9em;padding:0.3em 0;caption-side:top}
.pass{color:#1e7b34;font-weight:bold}.fail{color:#b71c1c;font-weight:bold}
.notchecked{color:#757575;font-style:italic}
figure{margin:0.6em 0}figure img{max-width:100%;border:1px solid #ddd}figcaption{font-size:0.85em}
pre{font-size:0.78em;background:#f6f6f6;padding:0.5em;white-space:pre-wrap;word-break:break-all}
dl{display:grid;grid-template-columns:max-content auto;gap:0 1em;font-size:0.9em}dt{font-weight:bold}dd{margin:0}
ol.risks li{margin-bottom:0.35em}nav ol{padding-left:1.5em}nav li{margin:0.1em 0}"""


def _e(t) -> str:
    return _html.escape(str(t))


def _cls(status):
    return {"pass": "pass", "fail": "fail", "not checked": "notchecked"}.get(str(status), "")


def _blocks(blocks, img_dir_name, level_offset=1):
    parts = []
    for b in blocks:
        if isinstance(b, D.Heading):
            tag = f"h{b.level + level_offset}"
            parts.append(f'<{tag} id="{_e(b.anchor)}">{_e(b.label)}</{tag}>')
        elif isinstance(b, D.Para):
            if b.style == "title":
                parts.append(f"<h1>{_e(b.text)}</h1>")
            elif b.style == "bullet":
                parts.append(f'<p class="bullet">• {_e(b.text)}</p>')
            else:
                parts.append(f'<p class="{_e(b.style)}">{_e(b.text)}</p>')
        elif isinstance(b, D.Table):
            align = b.align or ["l"] * len(b.header)
            cap = f"<caption><b>Table {_e(b.number)}.</b> {_e(b.caption)}</caption>" if b.caption else ""
            head = "".join(f'<th class="{"r" if a == "r" else ""}">{_e(h)}</th>' for h, a in zip(b.header, align))
            rows = []
            for r in b.rows:
                cells = []
                for j, (v, a) in enumerate(zip(r, align)):
                    c = ["r"] if a == "r" else []
                    if j == b.status_col and _cls(v):
                        c.append(_cls(v))
                    cells.append(f'<td class="{" ".join(c)}">{_e(v)}</td>')
                rows.append("<tr>" + "".join(cells) + "</tr>")
            parts.append(f"<table>{cap}<thead><tr>{head}</tr></thead><tbody>{''.join(rows)}</tbody></table>")
            if b.note:
                parts.append(f'<p class="note">{_e(b.note)}</p>')
        elif isinstance(b, D.Figure):
            parts.append(f'<figure><img src="{_e(img_dir_name)}/{_e(b.name)}" alt="{_e(b.label)}">'
                         f"<figcaption><b>Figure {_e(b.number)}.</b> {_e(b.caption)}</figcaption></figure>")
        elif isinstance(b, D.Pre):
            parts.append(f"<pre>{_e(b.text)}</pre>")
        elif isinstance(b, D.Pairs):
            parts.append("<dl>" + "".join(f"<dt>{_e(k)}</dt><dd>{_e(v)}</dd>" for k, v in b.items) + "</dl>")
        elif isinstance(b, D.Risks):
            items = "".join(f"<li><b>{_e(w)}</b>: {_e(t)}. <i>What to change:</i> {_e(c)}.</li>"
                            for w, t, c in b.items)
            parts.append(f'<ol class="risks" start="{b.start}">{items}</ol>')
    return parts


def render_html(rep: D.Document, img_dir: str, img_dir_name: str, progress=None) -> str:
    """The page's text; the figures are written as PNG files into ``img_dir``."""
    progress = progress or (lambda f, t: None)
    figs = [b for b in rep.page1 + rep.body if isinstance(b, D.Figure)]
    for i, b in enumerate(figs):
        b.fig.savefig(os.path.join(img_dir, b.name), dpi=110)
        progress(0.3 + 0.6 * (i + 1) / max(len(figs), 1), "drawing the figures")
    parts = ["<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
             f"<title>{_e(rep.title)}</title>", f"<style>{_CSS}</style>", "</head>", "<body>",
             '<section class="page1">']
    parts += _blocks(rep.page1, img_dir_name)
    parts.append("</section>")
    parts.append('<nav><h2 id="contents">Contents</h2><ol>')
    for h in rep.headings():
        style = "" if h.level == 1 else ' style="margin-left:1.5em;list-style:none"'
        parts.append(f'<li{style}><a href="#{_e(h.anchor)}">{_e(h.label)}</a></li>')
    parts.append("</ol></nav>")
    parts += _blocks(rep.body, img_dir_name)
    parts += [f'<p class="note">{_e(rep.meta.get("footer", ""))}</p>', "</body>", "</html>"]
    return "\n".join(parts) + "\n"
