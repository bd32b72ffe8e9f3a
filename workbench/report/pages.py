"""Render report pages to PNG with poppler's ``pdftoppm`` and measure them, for looking at the
layout and for the page checks of the tests.

    python -m workbench.report.pages REPORT.pdf [--out DIR] [--dpi 80] [--first 1 --last N]

writes ``DIR/<stem>_p01.png`` ... and prints per page: its size (pdfinfo) and how full it is.

"Full" is the share of the text area's height (between the page margins of
:mod:`.document`, the footer excluded) from its top to the lowest inked pixel row: a page holding
only a heading is nearly empty, a page of running text or a large figure is nearly full.
"""
from __future__ import annotations

import argparse
import os
import re
import shutil
import subprocess
import sys
import tempfile

import numpy as np

from . import document as D


class PagesError(RuntimeError):
    pass


def _tool(name):
    exe = shutil.which(name)
    if not exe:
        raise PagesError(f"{name} (poppler-utils) is not installed; expected it on PATH")
    return exe


def page_sizes(pdf) -> list:
    """Size of every page in points, [(width, height), ...] (``pdfinfo -f 1 -l N``)."""
    out = subprocess.run([_tool("pdfinfo"), str(pdf)], capture_output=True, text=True, check=True).stdout
    n = int(re.search(r"^Pages:\s+(\d+)", out, re.M).group(1))
    out = subprocess.run([_tool("pdfinfo"), "-f", "1", "-l", str(n), str(pdf)], capture_output=True, text=True,
                         check=True).stdout
    sizes = re.findall(r"^Page\s+\d+ size:\s+([\d.]+) x ([\d.]+) pts", out, re.M)
    return [(float(w), float(h)) for w, h in sizes]


def render(pdf, out_dir, dpi=80, first=None, last=None, stem=None) -> list:
    """PNG files of the pages (sorted by page)."""
    stem = stem or os.path.splitext(os.path.basename(str(pdf)))[0]
    os.makedirs(out_dir, exist_ok=True)
    cmd = [_tool("pdftoppm"), "-png", "-r", str(dpi)]
    if first:
        cmd += ["-f", str(first)]
    if last:
        cmd += ["-l", str(last)]
    with tempfile.TemporaryDirectory() as tmp:
        subprocess.run(cmd + [str(pdf), os.path.join(tmp, "p")], check=True, capture_output=True)
        files = sorted(os.listdir(tmp), key=lambda n: int(re.search(r"(\d+)\.png$", n).group(1)))
        out = []
        for f in files:
            k = int(re.search(r"(\d+)\.png$", f).group(1))
            dst = os.path.join(out_dir, f"{stem}_p{k:02d}.png")
            shutil.move(os.path.join(tmp, f), dst)
            out.append(dst)
    return out


def _read_png(path) -> np.ndarray:
    import matplotlib.image as mpimg

    a = mpimg.imread(path)
    if a.ndim == 3:
        a = a[..., :3].mean(axis=-1)
    return a


def page_fill(png, page_height_pt=None, dpi=None) -> float:
    """How full one rendered page is: (lowest inked row in the text area - its top) / its height.

    The text area is the page less the margins of :mod:`.document` (the footer lies below it)."""
    a = _read_png(png)
    H = a.shape[0]
    mm_per_px = None
    # the page height in mm follows from the paper (A4 or Letter): pick the one whose aspect fits
    aspect = a.shape[0] / a.shape[1]
    paper = min(D.PAPERS.values(), key=lambda wh: abs(wh[1] / wh[0] - aspect))
    mm_per_px = paper[1] / H
    top = int(round(D.MARGIN_TOP / mm_per_px))
    bottom = H - int(round(D.MARGIN_BOTTOM / mm_per_px))
    body = a[top:bottom]
    ink = np.flatnonzero((body < 0.85).any(axis=1))
    if not len(ink):
        return 0.0
    return float((ink[-1] + 1) / body.shape[0])


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(prog="python -m workbench.report.pages", description=__doc__.split("\n\n")[0])
    ap.add_argument("pdf")
    ap.add_argument("--out", default=None, help="folder of the PNG files (default: beside the PDF)")
    ap.add_argument("--dpi", type=int, default=80)
    ap.add_argument("--first", type=int, default=None)
    ap.add_argument("--last", type=int, default=None)
    ap.add_argument("--stem", default=None, help="file name stem of the PNG files (default: the PDF's)")
    a = ap.parse_args(argv)
    try:
        sizes = page_sizes(a.pdf)
        files = render(a.pdf, a.out or os.path.dirname(os.path.abspath(a.pdf)), a.dpi, a.first, a.last, a.stem)
    except (PagesError, subprocess.CalledProcessError, OSError) as exc:
        print(f"error: {a.pdf}: {exc}", file=sys.stderr)
        return 2
    first = a.first or 1
    for i, f in enumerate(files):
        w, h = sizes[first - 1 + i]
        print(f"{f}: {w:.1f} x {h:.1f} pt, {page_fill(f):.0%} full")
    return 0


if __name__ == "__main__":
    sys.exit(main())
