"""The layout report: a results file turned into an engineering document (PDF or HTML) for a
layout review.

Page 1 answers the study's question: the recommendation (a mount search's mount, or the base
placement a path audit or load map used) in mm and degrees, a drawing of the cell from above and
from the side with the arm there, the verdict table, the three largest risks and the read-first
caution. Then a contents list, numbered sections (the evidence: per-point table, maps, charts,
tables), the assumptions and cautions, and appendices (settings, arm and cell, provenance and
fingerprints, the stored file texts). Several results files of one kind make a comparison.

What the report says comes from :func:`workbench.decision.decision_for` (the same model the
window renders); :mod:`.content` turns it into a :class:`~.document.Document`, which :mod:`.pdf`
(ReportLab) and :mod:`.html` render with the same blocks in the same order. Figures are
matplotlib ``Figure`` objects on the Agg canvas: no Qt (DESIGN §2).
"""
from __future__ import annotations

import csv
import hashlib
import os
import re
import shutil
import tempfile

from ..errors import WorkbenchError
from ..presenters import presenter

__all__ = ["ReportError", "build_report", "write_report", "ASSUMPTIONS", "CAUTIONS", "fingerprint", "assumptions",
           "PAPERS", "points_csv_path"]

ASSUMPTIONS = (
    "Kinematic and static only: rigid links and joints with exactly the geometry of the arm file; no "
    "dynamics (accelerations, Coriolis and friction torques are not counted), no joint or link "
    "compliance, no backlash, no controller behaviour. Payloads are held still against gravity. "
    "Inverse kinematics is solved numerically from a finite set of seeds: a point reported as not "
    "reached may still be reachable from another start.")
CAUTIONS = (
    "The maps are kinematic and static: they do not replace a risk assessment for a robot cell, the "
    "arm maker's data, a check on the real controller, or local codes and licensed practice (robot "
    "cell safety is governed by standards such as ISO 10218-1/-2).")

PAPERS = ("a4", "letter")


class ReportError(WorkbenchError):
    """The report cannot be written (bad output name, unreadable results, mixed kinds)."""


def fingerprint(text: str | None) -> str:
    """sha256 (hex) of a stored file text (UTF-8), or "-" when absent."""
    return hashlib.sha256(text.encode("utf-8")).hexdigest() if text is not None else "-"


def assumptions(results) -> str:
    """The assumptions of one results file: :data:`ASSUMPTIONS` and what the results say about
    collision checks ("Collisions checked: ... at least 10 mm ..." or "Collisions not checked: the
    arm has no collision shapes ...")."""
    from ..decision import collision_status

    arm = None
    try:
        arm = results.context()[2]
    except Exception:
        pass
    return f"{ASSUMPTIONS} {collision_status(results, arm)[2]}"


def points_csv_path(out) -> str:
    """Where the per-work-point CSV of a mount-search report goes: ``<stem>_points.csv`` beside it."""
    out = os.fspath(out)
    return os.path.join(os.path.dirname(os.path.abspath(out)), os.path.splitext(os.path.basename(out))[0]
                        + "_points.csv")


def _decision(results, progress=None):
    from ..decision import decision_for

    try:
        return decision_for(results, progress)
    except WorkbenchError as exc:
        raise ReportError(str(exc)) from None


def build_report(results, paper: str = "a4", csv_name: str | None = None, progress=None):
    """The report of one results file (or a comparison of several) as a
    :class:`~.document.Document`.

    Parameters
    ----------
    results : workbench.results.Results or sequence of them
        Several results (of one study kind) make a comparison.
    paper : {"a4", "letter"}
    csv_name : str, optional
        Name of the per-work-point CSV written beside the report (named in the text).
    progress : callable, optional
        ``progress(fraction, text)``.
    """
    from . import content

    progress = progress or (lambda f, t: None)
    if isinstance(results, (list, tuple)):
        if len(results) == 1:
            results = results[0]
        else:
            decs = []
            for i, r in enumerate(results):
                decs.append(_decision(r, _scaled(progress, 0.3 * i / len(results), 0.3 / len(results))))
            return content.build_comparison(list(results), decs, paper, progress)
    dec = _decision(results, _scaled(progress, 0.0, 0.3))
    return content.build_document(results, dec, paper, csv_name, progress)


def _scaled(progress, lo, span):
    return lambda f, t: progress(lo + span * max(0.0, min(1.0, f)), t)


# ---- output checks and writing

#: the files an HTML report puts in its ``<name>_files`` folder
_REPORT_IMAGE = re.compile(r"figure_\d+\.png")


def _usual_mode(path: str, folder: bool = False) -> None:
    """Give a file made by ``tempfile`` (mode 0600 / 0700) the mode a plain ``open`` would have
    (0666 / 0777 less the umask), so a report is readable like any other file the user writes."""
    mask = os.umask(0)
    os.umask(mask)
    os.chmod(path, (0o777 if folder else 0o666) & ~mask)


def _check_out(out, ext):
    from ..results import check_folder_takes_files

    folder = os.path.dirname(os.path.abspath(out))
    if ext not in (".pdf", ".html", ".htm"):
        raise ReportError(f"--out {out}: unknown report type {ext or '(none)'!r}; expected a .pdf or .html file")
    if os.path.isdir(out):
        raise ReportError(f"--out {out}: is a directory, expected a file name")
    check_folder_takes_files(folder, f"--out {out}", ReportError)
    if ext != ".pdf":  # the HTML page replaces its image folder: never one that holds anything else
        img_dir = os.path.join(folder, os.path.splitext(os.path.basename(out))[0] + "_files")
        if os.path.lexists(img_dir) and (os.path.islink(img_dir) or not os.path.isdir(img_dir)):
            raise ReportError(f"--out {out}: {img_dir} exists and is not a folder; the HTML report keeps its "
                              f"images in that folder; expected another report name")
        if os.path.isdir(img_dir):
            other = sorted(n for n in os.listdir(img_dir) if not _REPORT_IMAGE.fullmatch(n))
            if other:
                raise ReportError(f"--out {out}: the image folder {img_dir} holds other files ({other[0]}"
                                  f"{', ...' if len(other) > 1 else ''}) and the report would replace it; "
                                  f"expected another report name")
    return folder


def write_report(results, out, *, paper: str = "a4", progress=None) -> str:
    """Write the layout report of ``results`` to ``out``.

    Parameters
    ----------
    results : Results, str, or a sequence of them
        A results object or a results file path; several (of one study kind) make a comparison.
    out : str
        ``*.pdf`` (ReportLab) or ``*.html`` / ``*.htm`` (a standalone page plus a ``<stem>_files``
        folder of PNG images next to it). A mount search also writes the per-work-point table as
        ``<stem>_points.csv`` beside the report.
    paper : {"a4", "letter"}
        Page size of the PDF (portrait); the HTML ignores it.
    progress : callable, optional
        ``progress(fraction, text)``, fraction in [0, 1], called from the calling thread between
        steps (the window's worker forwards it as a signal).

    Returns
    -------
    str
        The path written.

    Raises
    ------
    ReportError
        Unknown extension or paper, missing folder, results that cannot be read, results of
        different kinds, or too large to load.
    """
    from ..results import read_results

    progress = progress or (lambda f, t: None)
    out = os.fspath(out)
    ext = os.path.splitext(out)[1].lower()
    paper = str(paper).lower()
    if paper not in PAPERS:
        raise ReportError(f"--paper {paper}: unknown paper size; expected one of {', '.join(PAPERS)}")
    folder = _check_out(out, ext)
    many = isinstance(results, (list, tuple))
    items = list(results) if many else [results]
    if not items:
        raise ReportError("no results files given; expected at least one")
    loaded = []
    for item in items:
        r = read_results(item) if isinstance(item, (str, os.PathLike)) else item
        if not r.arrays:
            raise ReportError(f"{r.path}: the results arrays are too large to load for a report")
        loaded.append(r)
    kinds = {r.kind for r in loaded}
    if len(kinds) > 1:
        listing = ", ".join(f"{os.path.basename(r.path or '?')} is a {r.kind.replace('_', ' ')}" for r in loaded)
        raise ReportError(f"cannot compare results of different study kinds ({listing}); expected results of one kind")
    if len(loaded) > 1:
        paths = [os.path.abspath(r.path) for r in loaded if r.path]
        if os.path.abspath(out) in paths:
            raise ReportError(f"--out {out}: is one of the results files; expected a new report name")
    progress(0.02, "results read")
    csv_path = points_csv_path(out) if (len(loaded) == 1 and presenter(loaded[0].kind).points_csv) else None
    if csv_path is not None and os.path.isdir(csv_path):
        raise ReportError(f"--out {out}: {csv_path} is a directory; the report writes its per-point table there; "
                          f"expected another report name")
    rep = build_report(loaded if len(loaded) > 1 else loaded[0], paper,
                       os.path.basename(csv_path) if csv_path else None, _scaled(progress, 0.02, 0.5))
    tmp_csv = None
    try:
        if csv_path is not None:
            from . import content

            header, rows = content.points_csv_rows(rep.meta["decision"])
            fd, tmp_csv = tempfile.mkstemp(prefix=".~points", suffix=".csv", dir=folder)
            with os.fdopen(fd, "w", newline="", encoding="utf-8") as fh:
                w = csv.writer(fh)
                w.writerow(header)
                w.writerows(rows)
            _usual_mode(tmp_csv)
        if ext == ".pdf":
            from .pdf import write_pdf

            fd, tmp = tempfile.mkstemp(prefix=".~report", suffix=".pdf", dir=folder)
            os.close(fd)
            try:
                write_pdf(rep, tmp, _scaled(progress, 0.52, 0.46))
                _usual_mode(tmp)
                os.replace(tmp, out)
            except BaseException:
                if os.path.exists(tmp):
                    os.unlink(tmp)
                raise
        else:
            _write_html(rep, out, _scaled(progress, 0.52, 0.46))
        if tmp_csv is not None:
            os.replace(tmp_csv, csv_path)
            tmp_csv = None
    finally:
        if tmp_csv is not None and os.path.exists(tmp_csv):
            os.unlink(tmp_csv)
    progress(1.0, f"wrote {out}")
    return out


def _write_html(rep, path: str, progress=None) -> None:
    from .html import render_html

    folder = os.path.dirname(os.path.abspath(path))
    stem = os.path.splitext(os.path.basename(path))[0]
    img_dir_name = f"{stem}_files"
    tmp_dir = tempfile.mkdtemp(prefix=f".~{stem}_files", dir=folder)
    tmp_html = None
    try:
        text = render_html(rep, tmp_dir, img_dir_name, progress)
        final_dir = os.path.join(folder, img_dir_name)
        fd, tmp_html = tempfile.mkstemp(prefix=f".~{stem}", suffix=".html", dir=folder)
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        _usual_mode(tmp_html)
        _usual_mode(tmp_dir, folder=True)
        if os.path.isdir(final_dir):
            shutil.rmtree(final_dir)
        os.replace(tmp_dir, final_dir)
        os.replace(tmp_html, path)
    except BaseException:
        shutil.rmtree(tmp_dir, ignore_errors=True)
        if tmp_html is not None and os.path.exists(tmp_html):
            os.unlink(tmp_html)
        raise
