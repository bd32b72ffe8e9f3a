"""The report as a list of blocks, rendered the same way to PDF (:mod:`.pdf`) and HTML (:mod:`.html`).

Sections, figures and tables are numbered here, once, so that both renderings carry the same
numbers, the same content and the same order.
"""
from __future__ import annotations

from dataclasses import dataclass, field

#: page sizes (width, height) in mm, portrait
PAPERS = {"a4": (210.0, 297.0), "letter": (215.9, 279.4)}
#: page margins in mm (left/right, top, bottom); the footer sits in the bottom margin
MARGIN_X, MARGIN_TOP, MARGIN_BOTTOM = 18.0, 16.0, 17.0


@dataclass
class Heading:
    title: str
    level: int = 1          # 1 section, 2 subsection
    number: str = ""        # "1", "1.2", "A", "A.1" (set by Document.number)
    appendix: bool = False
    anchor: str = ""

    @property
    def label(self) -> str:
        return f"{self.number} {self.title}".strip()


@dataclass
class Para:
    text: str
    style: str = "body"     # body, small, answer, note, caution, bullet
    html: str = ""          # optional richer HTML (same text)


@dataclass
class Table:
    header: list
    rows: list
    caption: str = ""
    number: str = ""
    widths: list | None = None      # relative column widths
    align: list | None = None       # "l" / "r" per column
    status_col: int | None = None   # column holding pass / fail / not checked (coloured)
    font: float = 7.5
    note: str = ""                  # a line under the table (e.g. "... 12 more rows in the results file")

    @property
    def label(self) -> str:
        return f"Table {self.number}. {self.caption}" if self.number else self.caption


@dataclass
class Figure:
    fig: object                     # matplotlib Figure (printed at its own size)
    caption: str = ""
    number: str = ""
    name: str = ""                  # file name of the HTML image (set when numbering)

    @property
    def label(self) -> str:
        return f"Figure {self.number}. {self.caption}" if self.number else self.caption


@dataclass
class Pre:
    text: str
    font: float = 6.3


@dataclass
class Pairs:
    """Label: value lines (a two-column table without rules)."""
    items: list


@dataclass
class Risks:
    """The numbered risk list (same numbers as the marks in the drawing)."""
    items: list                     # (where, what, change)
    start: int = 1


@dataclass
class Document:
    title: str
    subtitle: str
    page1: list                     # blocks of page 1 (kept on one page)
    body: list                      # blocks after the contents list
    paper: str = "a4"
    meta: dict = field(default_factory=dict)

    def number(self) -> "Document":
        """Number sections (1, 1.1, appendices A, A.1), figures and tables across page 1 and the body."""
        sec = sub = 0
        app = -1
        fig = tab = 0
        for b in self.page1 + self.body:
            if isinstance(b, Heading):
                if b.appendix:
                    if b.level == 1:
                        app += 1
                        sub = 0
                        b.number = f"Appendix {chr(ord('A') + app)}"
                    else:
                        sub += 1
                        b.number = f"{chr(ord('A') + app)}.{sub}"
                else:
                    if b.level == 1:
                        sec += 1
                        sub = 0
                        b.number = f"{sec}"
                    else:
                        sub += 1
                        b.number = f"{sec}.{sub}"
                b.anchor = "s-" + b.number.replace(" ", "-").replace(".", "-").lower()
            elif isinstance(b, Figure):
                fig += 1
                b.number = str(fig)
                b.name = f"figure_{fig:02d}.png"
            elif isinstance(b, Table) and b.caption:
                tab += 1
                b.number = str(tab)
        return self

    def headings(self) -> list:
        """Headings of the body in order (the contents list)."""
        return [b for b in self.body if isinstance(b, Heading)]
