"""What the report says, per study kind: a :class:`~.document.Document` built from a results file
and its :class:`workbench.decision.Decision`.

Page 1 answers the study's question (recommendation, drawing of the cell, verdicts, the three
largest risks, the caution); the numbered sections give the evidence; the appendices hold the
settings, the provenance and fingerprints and the stored file texts.
"""
from __future__ import annotations

import math
import os
import time
import tomllib

import numpy as np

from ..decision import (FAIL, LIMIT_MARGIN, NOT_CHECKED, SENSITIVITY_DROP, fmt_deg, fmt_mm, fmt_number,
                        fmt_percent)
from . import document as D
from . import figures as G
from .. import quantities
from ..presenters import presenter
from ..results import recommended_mount

KIND_TITLES = {"mount_search": "Mount search", "path_audit": "Path audit", "load_map": "Load map",
               "reach_slice": "Reach slice", "joint_sweep": "Joint sweep"}

#: human names of results-table columns that are not quantities (units come from the table);
#: quantities (measures, margins, payloads ...) take their label from workbench/quantities.py
COLUMN_LABELS = {
    "rank": "rank", "reached": "work points reached", "map_score": "map score (first solution)",
    "grid_score": "score on the grid", "evaluations": "evaluations", "point": "work point", "measure": "measure",
    "path": "path", "from": "from", "to": "to", "at": "at",
    "note": "note", "length": "length", "tool_speed": "tool speed", "joint": "joint",
    "unreached": "samples not reached", "branch_flips": "branch flips", "forced": "samples re-solved",
    "step": "largest joint step", "joints": "joints", "reached_cells": "points reached",
    "cannot_hold_itself": "points where the arm cannot hold itself", "cells": "grid points",
    "offset": "offset", "worst_score": "worst quality", "score_drop": "quality lost", "nominal_score": "quality at the mount",
    "grid_rank_value": "rank value on the grid",
    "grid_x": "from grid x", "grid_y": "from grid y", "grid_yaw": "from grid yaw", "points_lost": "work points lost",
}


def human(name: str) -> str:
    """A column or field name for people (never raw snake_case): the quantity registry's label,
    else the column's."""
    name = str(name)
    if name.startswith("q_"):
        return name[2:]
    if name in COLUMN_LABELS:
        return COLUMN_LABELS[name]
    return quantities.label(name)


#: columns shown with 6 significant digits (the rank value's fraction is the quality)
WIDE_COLUMNS = {"rank_value", "grid_rank_value"}


def cell_text(v, unit="") -> str:
    """One table value for people, by its unit (mm, deg, %, kg, mm/s, or none)."""
    if isinstance(v, bytes):
        v = v.decode("utf-8", "replace")
    if isinstance(v, str):
        return v
    if isinstance(v, (bool, np.bool_)):
        return "yes" if v else "no"
    if isinstance(v, (int, np.integer)):
        return str(int(v))
    try:
        x = float(v)
    except (TypeError, ValueError):
        return str(v)
    if not math.isfinite(x):
        return fmt_number(x)
    if unit == "mm":
        return fmt_mm(x / 1000.0)
    if unit == "deg":
        return fmt_deg(math.radians(x))
    if unit == "%":
        return fmt_percent(x / 100.0).replace(" %", "")
    if unit in ("mm/s",):
        return fmt_mm(x / 1000.0)
    if x.is_integer() and abs(x) < 1e6 and unit == "":
        return str(int(x))
    return fmt_number(x, trim=False)


def header_text(name, unit) -> str:
    h = human(name)
    return f"{h} ({unit})" if unit else h


def results_table(t, caption=None, max_rows=40, skip=(), labels=None, numeric_right=True) -> D.Table:
    """A results :class:`~workbench.studies.base.Table` as a document table (human headers with
    units, numbers for people)."""
    cols = [c for c in t.columns if c not in skip]
    labels = labels or {}
    header = [labels.get(c) or header_text(c, t.units.get(c, "")) for c in cols]
    n = t.rows
    k = min(n, max_rows)
    rows = [[fmt_number(float(t.columns[c][i]), 6) if c in WIDE_COLUMNS else cell_text(t.columns[c][i], t.units.get(c, ""))
             for c in cols] for i in range(k)]
    align = []
    for c in cols:
        v = t.columns[c]
        align.append("l" if (v.dtype == object or v.dtype.kind in "SU") else "r")
    widths = None
    if "note" in cols:
        widths = [3 if c == "note" else 1 for c in cols]
        widths = [w * (1 if c != "note" else 4) for w, c in zip(widths, cols)]
    note = f"{n - k} more rows in the results file (table '{caption or t.title}')." if n > k else ""
    return D.Table(header, rows, caption or _s(t.title), widths=widths, align=align, note=note)


def _s(v):
    return v.decode("utf-8", "replace") if isinstance(v, bytes) else v


# ----------------------------------------------------------------------------------------------
# shared parts


def verdict_table(dec, caption="Requirements") -> D.Table:
    rows = []
    for v in dec.verdicts:
        where = v.where
        if v.status == NOT_CHECKED and v.note and where in ("-", ""):
            where = v.note
        elif v.note and v.status != NOT_CHECKED:
            where = f"{where} ({v.note})" if where not in ("-", "") else v.note
        rows.append([v.requirement, v.threshold, v.worst, where, v.status])
    return D.Table(["Requirement", "Threshold", "Worst value", "Where (or why not checked)", "Verdict"], rows,
                   caption, widths=[3.3, 1.4, 1.5, 4.2, 1.05], align=["l", "l", "l", "l", "l"], status_col=4,
                   font=7.2)


def risk_items(risks):
    return [(r.where, r.what, r.change) for r in risks]


def recommendation_table(rec, ranking_note="") -> D.Table:
    vals = rec.values()
    header = [f"{k} ({'mm' if k in ('x', 'y', 'height') else 'deg'})" if k in ("x", "y", "height", "yaw") else k
              for k, _ in vals]
    row = [v.replace(" mm", "").replace(" deg", "") for _, v in vals]
    return D.Table(header, [row], "", align=["r"] * 4 + ["l"] + ["r"] * (len(vals) - 5), font=8.2, widths="compact")


def assumptions_text(results, dec) -> str:
    from . import ASSUMPTIONS

    return f"{ASSUMPTIONS} {dec.collisions}"


def _caution_text(dec) -> str:
    from . import CAUTIONS

    out = f"Read first. {CAUTIONS} {dec.collisions}"
    for n in dec.notes:
        out += f" {n}"
    return out


def page_one(r, dec, title_kind, figure, rec_block=True, extra=()) -> list:
    """The blocks of page 1: title, question and answer, placement, drawing, verdicts, risks, caution."""
    rec = dec.recommendation
    created = _s(r.attrs.get("created", "?"))
    sub = (f"{title_kind} · results file {os.path.basename(r.path) if r.path else '(in memory)'} (written "
           f"{created.replace('T', ' ').replace('Z', ' UTC')}) · report made "
           f"{time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}")
    blocks = [D.Para(f"Layout report: {_s(r.name)}", "title"), D.Para(sub, "subtitle")]
    qa = f"Question: {rec.question} Answer: {rec.answer}"
    blocks.append(D.Para(qa, "answer", html=f"<b>Question.</b> {_x(rec.question)}<br/><b>Answer.</b> "
                                          f"{_x(rec.answer)}"))
    if rec_block:
        label = "Recommended mount (cell frame)" if rec.kind == "mount" else "Base placement used (cell frame)"
        blocks.append(D.Para(label, "subhead"))
        t = recommendation_table(rec)
        t.note = f"From {rec.source}."
        blocks.append(t)
    blocks += list(extra)
    if figure is not None:
        blocks.append(figure)
    blocks.append(D.Para("Verdicts", "subhead"))
    blocks.append(verdict_table(dec, "Requirements" + (" at the recommended mount" if rec.kind == "mount" else "")))
    if dec.risks:
        blocks.append(D.Para("Largest risks (numbered as in the drawing)", "subhead"))
        blocks.append(D.Risks(risk_items(dec.risks)))
    blocks.append(D.Para(_caution_text(dec), "caution"))
    return blocks


def _x(t):
    from xml.sax.saxutils import escape

    return escape(str(t))


def decision_sections(r, dec, kind_words) -> list:
    """Section 1: the recommendation or placement, the verdicts with their thresholds, all risks."""
    rec = dec.recommendation
    b = [D.Heading("Recommendation and verdicts" if rec.kind == "mount" else "Base placement and verdicts")]
    b.append(D.Heading("Where the base is" if rec.kind != "mount" else "The recommended mount", 2))
    b.append(D.Para(rec.answer))
    items = [("source", rec.source)] + rec.values()
    b.append(D.Pairs(items))
    b.append(D.Heading("Requirements and thresholds", 2))
    b.append(verdict_table(dec, "Requirements, thresholds and verdicts"))
    thr = dec.thresholds
    lines = []
    if "inverse_condition" in thr:
        lines.append(f"Inverse condition ≥ {fmt_number(thr['inverse_condition'])}: the near-singular threshold "
                     f"(the weakest direction keeps at least {fmt_percent(thr['inverse_condition'], 0)} of the "
                     f"strongest's gain; our default, the study setting near_singular where given).")
    if "limit_margin" in thr:
        lines.append(f"Joint-limit margin ≥ {fmt_number(LIMIT_MARGIN)}: no joint within "
                     f"{fmt_percent(LIMIT_MARGIN, 0)} of its half range of a limit (our default).")
    if dec.verdict("placement_error") is not None:
        lines.append(f"Placement error: the sensitivity check's worst placement within its offsets may lose no work "
                     f"point and at most {fmt_percent(SENSITIVITY_DROP, 0)} of the quality score (our default).")
    lines.append("A requirement marked 'not checked' is not known to hold: the reason is in the table.")
    b += [D.Para(t, "bullet") for t in lines]
    b.append(D.Heading("Risks", 2))
    allr = list(dec.risks) + list(dec.other_risks)
    if allr:
        b.append(D.Para("Most important first; 1-3 are the ones on page 1. 'What to change' is worked out from the "
                        "data where it can be (a re-solved move of the point, the base or the path).", "note"))
        b.append(D.Risks(risk_items(allr)))
    else:
        b.append(D.Para("No risk found in these results."))
    return b


def _assumptions_section(r, dec) -> list:
    from . import CAUTIONS

    return [D.Heading("Assumptions and cautions"), D.Heading("Assumptions", 2), D.Para(assumptions_text(r, dec)),
            D.Heading("Cautions", 2), D.Para(CAUTIONS, "caution")]


def appendices(r, cell, arm_model) -> list:
    from . import fingerprint

    b = [D.Heading("Study settings", appendix=True)]
    st = {}
    try:
        st = tomllib.loads(r.study_text or "")
    except tomllib.TOMLDecodeError:
        pass
    study = st.get("study", {})
    items = [("kind", str(study.get("kind", r.kind))), ("arm file", str(study.get("arm", "?")))]
    if study.get("cell"):
        items.append(("cell file", str(study["cell"])))
    for k, v in (st.get("settings") or {}).items():
        items.append((k, _setting_text(v)))
    b.append(D.Pairs(items))
    if arm_model is not None:
        b.append(D.Heading("Arm", appendix=True))
        b += _arm_blocks(arm_model)
    if cell is not None:
        b.append(D.Heading("Cell", appendix=True))
        b += _cell_blocks(cell)
    b.append(D.Heading("Provenance and fingerprints", appendix=True))
    from .. import __version__

    a = r.attrs
    items = [("report software", f"manipulability-workbench {__version__}"),
             ("results written by", f"{_s(a.get('software', 'manipulability-workbench'))} "
                                    f"{_s(a.get('software_version', '?'))}, schema {_s(a.get('schema_version', '?'))}"),
             ("results file", os.path.abspath(r.path) if r.path else "(in memory)"),
             ("run", f"started {_s(a.get('created', '?'))}, finished {_s(a.get('finished', '?'))}, "
                     f"{fmt_number(float(a.get('elapsed_s', float('nan'))))} s on {_s(a.get('executor', '?'))} "
                     f"({_s(a.get('workers', '?'))} workers)"),
             ("complete", "no: the run was cancelled, unfinished cells are blank" if r.incomplete else "yes"),
             ("characteristic length used", (f"{fmt_mm(float(a['characteristic_length_m']))} mm "
                                             f"({_s(a.get('characteristic_length_source', '?'))})")
              if "characteristic_length_m" in a else "not recorded (results written before it was stored)"),
             ("study file", f"{_s(a.get('study_path', '-'))}"), ("study file sha256", fingerprint(r.study_text)),
             ("arm file", f"{_s(a.get('arm_path', '-'))}"), ("arm file sha256", fingerprint(r.arm_text)),
             ("cell file", f"{_s(a.get('cell_path', '-'))}"), ("cell file sha256", fingerprint(r.cell_text))]
    b.append(D.Pairs(items))
    b.append(D.Heading("Stored file texts", appendix=True))
    b.append(D.Para("The texts the study ran on, as stored in the results file (the files may have changed since; "
                    "compare the fingerprints).", "note"))
    for what, text in (("study file", r.study_text), ("cell file", r.cell_text), ("arm file", r.arm_text)):
        if text:
            b.append(D.Heading(f"The {what}", 2, appendix=True))
            b.append(D.Pre(text.rstrip("\n")))
    return b


def _setting_text(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, list):
        return "[" + ", ".join(_setting_text(x) for x in v) + "]"
    if isinstance(v, str):
        return f'"{v}"'
    return str(v)


def _arm_blocks(m) -> list:
    from ..kinematics import Arm

    arm = Arm(m)
    how = ("stated in the arm file" if m.stated_length is not None else
           "its axis chain: the reach from the first joint axis, the same for every file form of the arm")
    out = [D.Para(f"{m.name}: {m.n} joints, characteristic length {fmt_mm(arm.characteristic_length())} mm "
                  f"({how}; the default length dividing the translational rows of the measures)."
                  + (f" {m.description}" if m.description else ""))]
    rows = []
    for j in m.joints:
        rev = j.revolute
        f = (lambda v: fmt_deg(v)) if rev else (lambda v: fmt_mm(v))
        lim = "unlimited" if not math.isfinite(j.lower) else f"{f(j.lower)} to {f(j.upper)}"
        sp = "-" if not j.max_speed else f(j.max_speed)
        rows.append([j.name, j.kind, lim, sp, "-" if not j.max_effort else fmt_number(j.max_effort),
                     "-" if j.mass is None else fmt_number(j.mass)])
    out.append(D.Table(["joint", "type", "limits (deg or mm)", "max speed (deg/s or mm/s)",
                        "max torque (N m) or force (N)", "link mass (kg)"], rows, "Joints of the arm",
                       align=["l", "l", "l", "r", "r", "r"]))
    return out


def _cell_blocks(cell) -> list:
    out = [D.Para(cell.summary() + (f". {cell.description}" if cell.description else "."))]
    rows = [[p.name, fmt_mm(p.position[0]), fmt_mm(p.position[1]), fmt_mm(p.position[2]), p.rule,
             fmt_mm(p.tolerance)] for p in cell.points]
    out.append(D.Table(["work point", "x (mm)", "y (mm)", "z (mm)", "orientation rule", "tolerance (mm)"], rows,
                       "Work points of the cell", align=["l", "r", "r", "r", "l", "r"]))
    if cell.paths:
        rows = [[p.name, " → ".join(p.point_names()) or f"rows of {os.path.basename(p.csv or '')}", fmt_mm(p.speed),
                 p.rule] for p in cell.paths]
        out.append(D.Table(["path", "through", "tool speed (mm/s)", "orientation rule"], rows, "Paths of the cell",
                           widths=[1.3, 4, 1.2, 1.2], align=["l", "l", "r", "l"]))
    sol = G.solids(cell)
    if sol:
        rows = []
        for s in sol:
            if s["kind"] == "box":
                c = s["corners"]
                lo, hi = c.min(axis=0), c.max(axis=0)
                rows.append([s["name"], s["role"], "box", " ".join(fmt_mm(v) for v in (lo + hi) / 2),
                             " × ".join(fmt_mm(v) for v in hi - lo)])
            else:
                rows.append([s["name"], s["role"], "cylinder", " ".join(fmt_mm(v) for v in s["center"]),
                             f"r {fmt_mm(s['radius'])}, z {fmt_mm(s['z0'])} to {fmt_mm(s['z1'])}"])
        out.append(D.Table(["name", "role", "shape", "centre x y z (mm)", "size (mm, outer)"], rows,
                           "Equipment and zones of the cell", align=["l", "l", "l", "r", "r"]))
    if cell.mount is not None:
        m = cell.mount
        out.append(D.Para(f"Mount candidates: x {fmt_mm(m.xs[0])} to {fmt_mm(m.xs[-1])} mm, y {fmt_mm(m.ys[0])} to "
                          f"{fmt_mm(m.ys[-1])} mm ({len(m.xs)} × {len(m.ys)} positions), heights "
                          f"{', '.join(fmt_mm(h) for h in m.heights)} mm, yaws "
                          f"{', '.join(fmt_deg(y, 0) for y in m.yaws)} deg, styles {', '.join(m.styles)}: "
                          f"{m.count} candidates."))
    return out


# ----------------------------------------------------------------------------------------------
# mount search


def point_table(dec) -> D.Table:
    """Per work point at the recommended mount: joint values, measures, margins, clearance, checks."""
    pts = dec.points
    has_c = any(p.clearance is not None for p in pts)
    has_t = any(p.torque_margin is not None for p in pts)
    header = ["work point"] + [f"{n} ({'deg' if rev else 'mm'})" for n, rev in zip(dec.joint_names, dec.joint_revolute)]
    header += [human(k) for k in ("inverse_condition", "min_sv", "manipulability", "limit_margin")] + ["nearest limit"]
    if has_c:
        header.append("clearance (mm)")
    if has_t:
        header.append("torque margin")
    header.append("checks")
    rows = []
    labels = {"points_served": "not served", "torque_margin": "torque"}
    for p in pts:
        if p.reached:
            js = [fmt_deg(v) if rev else fmt_mm(v) for v, rev in zip(p.q, dec.joint_revolute)]
            lim = f"{p.margin_joint}, {fmt_deg(p.limit_distance) + ' deg' if _rev(dec, p.margin_joint) else fmt_mm(p.limit_distance) + ' mm'}"
            vals = [fmt_number(p.inverse_condition, trim=False), fmt_number(p.min_sv, trim=False),
                    fmt_number(p.manipulability, trim=False), fmt_number(p.margin, trim=False), lim]
        else:
            js = ["-"] * len(dec.joint_names)
            vals = ["-"] * 5
        if has_c:
            vals.append("-" if p.clearance is None else fmt_mm(p.clearance))
        if has_t:
            vals.append("-" if p.torque_margin is None else fmt_percent(p.torque_margin))
        bad = [labels.get(k) or human(k) for k, s in p.checks.items() if s == FAIL]
        vals.append("fail: " + ", ".join(bad) if bad else "pass")
        rows.append([p.name] + js + vals)
    n = len(dec.joint_names)
    widths = [2.1] + [1.05] * n + [1.2, 1.2, 1.25, 1.0, 1.6] + ([1.0] if has_c else []) + ([1.0] if has_t else []) + [1.3]
    nc = [k for k in ("clearance", "torque_margin") if dec.verdict(k) is not None and dec.verdict(k).status == NOT_CHECKED]
    note = ""
    if nc:
        note = ("Not checked per point: " + " and ".join(
            "clearance" if k == "clearance" else "holding torques" for k in nc) + " (see the verdicts).")
    return D.Table(header, rows, "Work points at the recommended mount", widths=widths,
                   align=["l"] + ["r"] * (len(header) - 3) + ["l", "l"], status_col=len(header) - 1, font=6.6,
                   note=note)


def _rev(dec, name):
    try:
        return dec.joint_revolute[list(dec.joint_names).index(name)]
    except ValueError:
        return True


def points_csv_rows(dec) -> tuple:
    """(header, rows) of the per-point CSV: the values of :func:`point_table` at full precision."""
    has_c = any(p.clearance is not None for p in dec.points)
    has_t = any(p.torque_margin is not None for p in dec.points)
    header = ["work point", "reached", "x (mm)", "y (mm)", "z (mm)"]
    header += [f"{n} ({'deg' if rev else 'mm'})" for n, rev in zip(dec.joint_names, dec.joint_revolute)]
    header += ["inverse condition", "minimum singular value", "manipulability", "limit margin",
               "nearest limit joint", "distance to that limit (deg or mm)"]
    if has_c:
        header.append("clearance (mm)")
    if has_t:
        header.append("torque margin")
    keys = []
    for p in dec.points:
        for k in p.checks:
            if k not in keys:
                keys.append(k)
    header += [f"check: {human(k)}" for k in keys]
    rows = []
    for p in dec.points:
        row = [p.name, "yes" if p.reached else "no"] + [f"{v * 1000:.3f}" for v in p.position]
        for v, rev in zip(p.q, dec.joint_revolute):
            row.append("" if not np.isfinite(v) else (f"{math.degrees(v):.4f}" if rev else f"{v * 1000:.4f}"))
        for v in (p.inverse_condition, p.min_sv, p.manipulability, p.margin):
            row.append("" if not np.isfinite(v) else f"{v:.6g}")
        row.append(p.margin_joint if p.reached else "")
        lim = p.limit_distance
        row.append("" if not (p.reached and np.isfinite(lim)) else
                   (f"{math.degrees(lim):.4f}" if _rev(dec, p.margin_joint) else f"{lim * 1000:.4f}"))
        if has_c:
            row.append("" if p.clearance is None else f"{p.clearance * 1000:.3f}")
        if has_t:
            row.append("" if p.torque_margin is None else f"{p.torque_margin:.6g}")
        row += [p.checks.get(k, "") for k in keys]
        rows.append(row)
    return header, rows


def _mount_doc(r, dec, csv_name, progress) -> D.Document:
    from ..studies.base import Axis

    rec = dec.recommendation
    ax = {a.name: a for a in r.axes}
    progress(0.35, "drawing the cell")
    fig1 = D.Figure(G.cell_views(dec), _views_caption(dec, "the recommended mount"))
    page1 = page_one(r, dec, "Mount search", fig1)
    body = decision_sections(r, dec, "mount")
    # 2 work points
    body.append(D.Heading("Work points at the recommended mount"))
    if dec.points:
        body.append(D.Para("Joint values of the IK solution behind the rank value at each work point, the "
                           "measures of the study's task rows there, the joint-limit margin and the joint nearest "
                           "its limit, and which requirement checks pass." +
                           (f" The same table with full precision is written beside this report as {csv_name}."
                            if csv_name else "")))
        body.append(point_table(dec))
    else:
        body.append(D.Para("No mount serves any work point: there is nothing to list."))
    # 3 maps
    progress(0.45, "drawing the maps")
    body.append(D.Heading("Maps of the candidate region"))
    rank_name = "rank_value" if "rank_value" in r.arrays else "score"
    score = np.asarray(r.arrays[rank_name], float)
    reached = np.asarray(r.arrays["reached_fraction"], float)
    ax_x = Axis("x", ax["x"].values, "m", "base x")
    ax_y = Axis("y", ax["y"].values, "m", "base y")
    mark = (rec.x, rec.y) if rec.kind == "mount" else None
    best = np.nanmax(score.reshape(-1, *score.shape[-2:]), axis=0) if np.isfinite(score).any() else score.reshape(
        -1, *score.shape[-2:])[0]
    recm = recommended_mount(r)
    extra, where_from = [], ""
    fin = np.isfinite(best)
    top = float(np.nanmax(best)) if fin.any() else 0.0
    k_top = math.floor(top) if rank_name == "rank_value" else 0
    if recm is not None and recm.get("source") == "refined" and "grid_x" in recm:
        extra = [(recm["grid_x"], recm["grid_y"], "grid cell it was refined from", "s")]
        where_from = (f" The ranking refines the best grid cells off the grid: the recommended mount "
                      f"({fmt_mm(rec.x)}, {fmt_mm(rec.y)} mm, rank value {fmt_number(recm['rank_value'], 6)}) comes from "
                      f"the grid cell ({fmt_mm(recm['grid_x'])}, {fmt_mm(recm['grid_y'])} mm, square; rank value "
                      f"{fmt_number(recm['grid_rank_value'], 6)})")
        if recm["map_best"]:
            where_from += ", the map's best cell."
        else:
            k = np.unravel_index(int(np.nanargmax(np.where(fin, best, -np.inf))), best.shape)
            bx, by = float(ax["x"].values[k[1]]), float(ax["y"].values[k[0]])
            extra.append((bx, by, "map's best cell (grid rank 1)", "D"))
            where_from += (f"; the map's best cell ({fmt_mm(bx)}, {fmt_mm(by)} mm, diamond; rank value "
                           f"{fmt_number(top, 6)}) refined to less.")
    under = None
    if rank_name == "rank_value":
        title, label = "Rank value over the floor", f"rank value {k_top} + Q / (1 + Q) (best over yaw, height, style)"
        if fin.any() and (best[fin] < k_top).any():
            under = ("#d9d9d9", f"fewer than {k_top} work points served")
        caption = ("Rank value over the candidate positions, the best over yaw, height and style: the value the "
                   "ranking sorts (whole part: work points served; fraction: the quality Q as Q / (1 + Q)), from the "
                   f"same IK solutions. The colours span the positions serving the most points ({k_top}); grey: "
                   "fewer (the next map shows how many). The star is the recommended mount." + where_from + " "
                   + _s(r.field(rank_name).description))
    else:  # older results files
        title, label = "Mount score over the floor", "map score (best over yaw, height and style)"
        caption = ("Map score over the candidate positions, the best over yaw, height and style; the star is the "
                   "recommended mount. This results file was written before the feasibility-first ranking: its map "
                   "keeps the first IK solution per work point and need not show the ranking's values. "
                   + _s(r.field(rank_name).description))
    body.append(D.Heading(title, 2))
    body.append(D.Figure(G.map_figure(best, ax_x, ax_y, label, cell=dec.cell, draw_floor=True, mark=mark,
                                      mark_label=(f"recommended mount ({fmt_mm(rec.x)}, {fmt_mm(rec.y)} mm)"
                                                  if mark else ""), extra_marks=extra,
                                      vmin=float(k_top) if under is not None else None,
                                      vmax=top if rank_name == "rank_value" and top > k_top else None,
                                      under=under),
                         caption))
    bestf = np.nanmax(reached.reshape(-1, *reached.shape[-2:]), axis=0) * 100
    body.append(D.Heading("Work points reached", 2))
    body.append(D.Figure(G.map_figure(bestf, ax_x, ax_y, "work points reached (%)", cell=dec.cell, draw_floor=True,
                                      vmin=0, vmax=100, mark=mark, mark_label="recommended mount", height=3.6),
                         "Share of the work points reached from each position, the best over yaw, height and style."))
    S, H, Y = score.shape[:3]
    vmax = float(np.nanmax(score)) if np.isfinite(score).any() else 1.0
    vmin_sm = float(k_top) if rank_name == "rank_value" else 0.0
    yaws = ax["yaw"].values
    heights = ax["height"].values
    for si in range(S):
        mc = None
        if rec.kind == "mount":
            hi = int(np.argmin(np.abs(heights - rec.height)))
            yi = int(np.argmin(np.abs(((yaws - rec.yaw + np.pi) % (2 * np.pi)) - np.pi)))
            mc = (hi, yi, rec.x, rec.y)
        title = (("Rank value" if rank_name == "rank_value" else "Mount score") + " per yaw and height"
                 + (f" (style {si + 1})" if S > 1 else ""))
        body.append(D.Heading(title, 2))
        body.append(D.Figure(G.small_multiples(score[si], ax_x, ax_y, [f"height {fmt_mm(h)} mm" for h in heights],
                                               [f"yaw {fmt_deg(y, 0)} deg" for y in yaws],
                                               "rank value" if rank_name == "rank_value" else "map score", vmin_sm,
                                               vmax, mark_cell=mc, under="#d9d9d9" if rank_name == "rank_value" else None),
                             ("Rank value" if rank_name == "rank_value" else "Map score") +
                             " per base yaw (columns) and height (rows), x and y in mm, one colour scale"
                             + (f" over the positions serving {k_top} work points (grey: fewer)"
                                if rank_name == "rank_value" else "") + "; "
                             "the star marks the grid panel nearest the recommended mount's yaw and height."))
    sens = r.tables.get("sensitivity")
    if sens is not None and sens.rows:
        body.append(D.Heading("Sensitivity to placement errors", 2))
        kinds = np.array([str(_s(k)) for k in sens.columns["offset_kind"]])
        off = np.asarray(sens.columns["offset"], float)
        drop = np.asarray(sens.columns["score_drop"], float)
        nom = float(np.asarray(sens.columns["nominal_score"], float)[0])
        pct = 100 * drop / nom if nom > 0 else drop * 0
        body.append(D.Figure(G.sensitivity_figure(kinds, off, pct),
                             f"Quality lost when the recommended mount (quality Q = {fmt_number(nom)}) is placed off: the "
                             f"worst (lowest rank value) of the moves along ±x and ±y, or of the turns ±yaw."))
        lost = (np.asarray(sens.columns["points_lost"], float) if "points_lost" in sens.columns
                else np.zeros(len(off)))
        rows = [["moved" if k == "position" else "turned", f"{fmt_number(o)} {'mm' if k == 'position' else 'deg'}",
                 fmt_number(w), fmt_percent(max(p, 0) / 100), f"{int(n)}"] for k, o, w, p, n in
                zip(kinds, off, np.asarray(sens.columns["worst_score"], float), pct, lost)]
        body.append(D.Table(["base", "by", "worst quality", "quality lost", "work points lost"], rows,
                            "Sensitivity of the recommended mount", align=["l", "r", "r", "r", "r"]))
    # 4 candidates
    progress(0.55, "tables")
    body.append(D.Heading("Candidates"))
    formula = _s(r.field("rank_value" if "rank_value" in r.arrays else "score").description)
    rank = r.tables.get("ranking")
    feasible_first = rank is not None and ("feasib" in (_s(rank.description) or "") or "feasible" in rank.columns)
    body.append(D.Para(f"How the candidates are ordered: {formula}." + (
        "" if feasible_first else " Serving every work point is part of the score, not a hard rule: a mount "
                                  "serving fewer points can rank above one serving all, so read the 'Work points "
                                  "served' verdict.")))
    meas_word = str(getattr(r.plan.settings, "measure", "") if r.plan is not None else "") or _measure_setting(r)
    labels = {"worst_measure": f"worst {human(meas_word)}"} if meas_word else {}
    ref = r.tables.get("refined")
    if ref is not None and ref.rows:
        body.append(D.Heading("Refined mounts", 2))
        body.append(D.Para("The best grid candidates polished off the grid over x, y and yaw (Nelder-Mead); "
                           "rank 1 is the recommendation.", "note"))
        body.append(results_table(ref, "Refined mounts (off the grid)", labels=labels))
    if rank is not None and rank.rows:
        body.append(D.Heading("Grid ranking", 2))
        body.append(results_table(rank, "Mount ranking on the grid", labels=labels))
    un = r.tables.get("unreachable")
    if un is not None and un.rows:
        body.append(D.Heading("Work points no candidate reaches", 2))
        body.append(results_table(un, _s(un.title)))
    return D.Document(f"Layout report: {_s(r.name)}", "mount search", page1, body)


def _measure_setting(r):
    try:
        return str((tomllib.loads(r.study_text or "").get("settings") or {}).get("measure", "inverse_condition"))
    except tomllib.TOMLDecodeError:
        return "inverse_condition"


def _views_caption(dec, what) -> str:
    rec = dec.recommendation
    shapes = "its collision shapes" if _has_shapes(dec) else "lines between its joints (the arm has no shapes)"
    txt = (f"The {'cell' if dec.cell is not None else 'arm'} from above and from the side with the arm at {what}, "
           f"{rec.pose_label or 'at its home pose'}; links drawn as {shapes}. ")
    if dec.cell is not None:
        txt += ("Equipment grey, keep-out zones red hatched, work points blue circles, paths orange, the candidate "
                "region green dashed, the base yellow with its x axis as an arrow")
    else:
        txt += "The study has no cell: the arm alone, its base yellow with its x axis as an arrow"
    if any(r.position is not None for r in dec.risks):
        txt += "; circled numbers mark the risks"
    return txt + ". Lengths in mm, cell frame."


def _has_shapes(dec):
    from ..decision import arm_shapes

    return dec.arm is not None and arm_shapes(dec.arm.model) is not None


# ----------------------------------------------------------------------------------------------
# path audit


def _path_doc(r, dec, progress) -> D.Document:
    progress(0.35, "drawing the cell")
    samples = _path_polylines(r, dec)
    fig1 = D.Figure(G.cell_views(dec, samples=samples), _views_caption(dec, "the base placement used"))
    page1 = page_one(r, dec, "Path audit", fig1)
    body = decision_sections(r, dec, "path")
    body.append(D.Heading("Paths"))
    for name, title in (("paths", "Paths: worst joint speed and tracking"), ("near_singular", "Near-singular spans"),
                        ("branch_flips", "Branch flips")):
        t = r.tables.get(name)
        if t is not None and t.rows:
            body.append(D.Heading(title, 2))
            body.append(D.Para(_s(t.description) + ".", "note"))
            body.append(results_table(t, _s(t.title)))
    progress(0.5, "drawing the charts")
    body.append(D.Heading("Charts along the paths"))
    a = r.arrays
    dist = np.asarray(a["distance"], float) * 1000
    pidx = np.asarray(a["path_index"]).astype(int)
    inv = np.asarray(a["inverse_condition"], float)
    ratio = np.asarray(a["speed_ratio"], float)
    margin = np.asarray(a["margin"], float)
    qdot = np.degrees(np.asarray(a["qdot"], float))
    flags = np.asarray(a["flags"]).astype(int)
    thr = dec.thresholds.get("inverse_condition", 0.02)
    names = _path_names(r)
    has_speed = dec.verdict("speed_ratio") is not None and dec.verdict("speed_ratio").status != NOT_CHECKED
    for p in np.unique(pidx[np.isfinite(dist)]):
        m = (pidx == p) & np.isfinite(dist)
        nm = names[p] if p < len(names) else f"path {p + 1}"
        body.append(D.Heading(f"Path {nm}", 2))
        body.append(D.Figure(G.path_charts(dist[m], inv[m], ratio[m], qdot[m], margin[m], (flags[m] & 4) > 0, thr,
                                           list(dec.joint_names), has_speed),
                             f"Path {nm}: inverse condition (the red band marks near-singular spans), joint speed "
                             f"needed over its limit (log scale), joint speeds and the joint-limit margin against the "
                             f"distance along the path."))
    if dec.cell is not None:
        body.append(D.Heading("Paths seen from above", 2))
        xyz = np.asarray(a["xyz"], float).reshape(-1, 3)
        body.append(D.Figure(G.scatter_from_above(dec.cell, xyz, inv, "inverse condition", arm=dec.arm),
                             "The path samples seen from above, coloured by the inverse condition; equipment and work "
                             "points drawn, the base yellow. Lengths in mm."))
    return D.Document(f"Layout report: {_s(r.name)}", "path audit", page1, body)


def _path_names(r):
    t = r.tables.get("paths")
    if r.plan is not None and "names" in r.plan.data:
        return list(r.plan.data["names"])
    return [str(_s(v)) for v in t.columns["path"]] if t is not None else []


def _path_polylines(r, dec):
    xyz = np.asarray(r.arrays["xyz"], float).reshape(-1, 3)
    pidx = np.asarray(r.arrays["path_index"]).astype(int)
    names = _path_names(r)
    out = []
    for p in np.unique(pidx):
        m = (pidx == p) & np.isfinite(xyz[:, 0])
        if m.any():
            out.append((names[p] if p < len(names) else str(p), xyz[m]))
    return out


# ----------------------------------------------------------------------------------------------
# load map and the other kinds


def _slice_corners(r):
    """The load map's plane as 4 corners in the cell frame (m), or None (a joint grid)."""
    try:
        st = tomllib.loads(r.study_text or "").get("settings") or {}
    except tomllib.TOMLDecodeError:
        return None
    if st.get("grid") != "plane" or len(r.axes) != 2:
        return None
    from ..studies.load_map import _PLANES

    a, b, c = _PLANES[st.get("plane", "xz")]
    v, u = r.axes[0].values, r.axes[1].values
    C = np.zeros((4, 3))
    for i, (uu, vv) in enumerate(((u[0], v[0]), (u[-1], v[0]), (u[-1], v[-1]), (u[0], v[-1]))):
        C[i, a], C[i, b], C[i, c] = uu, vv, float(st.get("at", 0.0))
    return C


def _load_doc(r, dec, progress) -> D.Document:
    progress(0.35, "drawing the cell")
    C = _slice_corners(r)
    fig1 = D.Figure(G.cell_views(dec, planes=None if C is None else [C]),
                    _views_caption(dec, "the base placement used") + (" The slice of the map is drawn purple dashed."
                                                                      if C is not None else ""))
    extra = []
    page1 = page_one(r, dec, "Load map", fig1, extra=extra)
    body = decision_sections(r, dec, "load")
    body.append(D.Heading("Maps"))
    progress(0.5, "drawing the maps")
    body += _measure_maps(r, dec)
    if "limiting_joint" in r.arrays and len(r.axes) == 2:
        Z = np.asarray(r.arrays["limiting_joint"], float)
        Z = np.where(Z < 0, np.nan, Z)
        body.append(D.Heading("Joint that sets the payload", 2))
        body.append(D.Figure(G.map_figure(Z, r.axes[-1], r.axes[-2], "limiting joint",
                                          categories=list(dec.joint_names)),
                             "Which joint's torque limit is reached first as the payload grows; blank: not reached."))
    body.append(D.Heading("Tables"))
    for name in ("load", "limiting"):
        t = r.tables.get(name)
        if t is not None and t.rows:
            body.append(results_table(t, _s(t.title)))
    return D.Document(f"Layout report: {_s(r.name)}", "load map", page1, body)


def _shown(name, values) -> np.ndarray:
    """Values of quantity ``name`` as drawn: log10 where the registry says so; inf -> NaN."""
    Z = np.asarray(values, float)
    if quantities.is_log(name):
        with np.errstate(divide="ignore", invalid="ignore"):
            Z = np.log10(Z)
    return np.where(np.isfinite(Z), Z, np.nan)


def _best(name, flat) -> np.ndarray:
    """The best value over the first axis of ``flat``: the smallest where lower is better."""
    return np.nanmin(flat, axis=0) if quantities.best_of(name) == "min" else np.nanmax(flat, axis=0)


def _measure_maps(r, dec, skip=()) -> list:
    """A map (or chart) per scalar measure field, with human labels and units."""
    out = []
    axes = r.axes
    for f in r.fields:
        if f.kind != "measure" or f.shape != () or f.name in skip:
            continue
        Z = _shown(f.name, r.arrays[f.name])
        label = quantities.axis_label(f.name, unit=f.unit)      # the registry: label, unit, log10
        cap = (_s(f.description) or label)
        cap = cap[:1].upper() + cap[1:]
        if len(axes) >= 2:
            note = ""
            if Z.ndim > 2:
                flat = Z.reshape(-1, *Z.shape[-2:])
                Z = _best(f.name, flat) if np.isfinite(Z).any() else flat[0]
                note = f", the best over {', '.join(a.label for a in axes[:-2])}"
            out.append(D.Heading(label[:1].upper() + label[1:], 2))
            out.append(D.Figure(G.map_figure(Z, axes[-1], axes[-2], label, height=3.6),
                                f"{cap}{note}; blank cells: not reached or not computed."))
        elif len(axes) == 1:
            fig = G.new_figure(2.4)
            a = fig.add_subplot(111)
            v = Z[np.isfinite(Z)]
            if axes[0].name == "sample":
                if v.size:
                    hi = np.percentile(v, 99.5)
                    a.hist(np.minimum(v, hi), bins=60, color="#1f77b4")
                a.set_xlabel(label)
                a.set_ylabel("samples")
            else:
                a.plot(axes[0].values * G._disp(axes[0])[0], Z, lw=1)
                a.set_xlabel(G.axis_label(axes[0]))
                a.set_ylabel(label)
            G._style(a)
            out.append(D.Heading(label[:1].upper() + label[1:], 2))
            out.append(D.Figure(fig, f"{cap}."))
    return out


def _generic_doc(r, dec, progress) -> D.Document:
    fig1 = None
    if dec.recommendation.pose is not None:
        fig1 = D.Figure(G.cell_views(dec), _views_caption(dec, "its base as in the arm file"))
    page1 = page_one(r, dec, KIND_TITLES.get(r.kind, r.kind), fig1)
    body = decision_sections(r, dec, "generic")
    body.append(D.Heading("Maps"))
    progress(0.5, "drawing the maps")
    body += _measure_maps(r, dec)
    if r.tables:
        body.append(D.Heading("Tables"))
        for name, t in r.tables.items():
            if t.rows:
                body.append(results_table(t, _s(t.title) or human(name)))
    return D.Document(f"Layout report: {_s(r.name)}", r.kind, page1, body)


#: the report layouts a presenter names (``Presenter.report``)
BUILD = {"mount": _mount_doc, "path": _path_doc, "load": _load_doc, "generic": _generic_doc}


def build_document(r, dec, paper="a4", csv_name=None, progress=None) -> D.Document:
    """The whole document of one results file."""
    progress = progress or (lambda f, t: None)
    layout = presenter(r.kind).report           # workbench/presenters.py
    if layout == "mount":
        doc = _mount_doc(r, dec, csv_name, progress)
    else:
        doc = BUILD.get(layout, _generic_doc)(r, dec, progress)
    doc.body += _assumptions_section(r, dec)
    arm_model = dec.arm.model if dec.arm is not None else None
    doc.body += appendices(r, dec.cell, arm_model)
    doc.paper = paper
    doc.meta["decision"] = dec
    doc.meta["footer"] = (f"{_s(r.name)} · kinematic and static maps, not a risk assessment")
    return doc.number()


# ----------------------------------------------------------------------------------------------
# comparison


def build_comparison(results, decisions, paper="a4", progress=None) -> D.Document:
    """Several results of one kind side by side: options, verdicts, differences, maps on one scale."""
    from ..decision import compare_decisions

    progress = progress or (lambda f, t: None)
    texts = []
    for r in results:
        try:
            st = tomllib.loads(r.study_text or "").get("settings") or {}
        except tomllib.TOMLDecodeError:
            st = {}
        texts.append({"arm": r.arm_text, "cell": r.cell_text, "settings": st})
    cmp = compare_decisions(decisions, texts=texts)
    L = cmp.labels
    kind = KIND_TITLES.get(cmp.kind, cmp.kind)
    title = f"Comparison of {len(results)} {kind.lower()} results"
    sub = (f"{kind} · " + " · ".join(f"{l}: {os.path.basename(r.path) if r.path else '(in memory)'}"
                                     for l, r in zip(L, results))
           + f" · report made {time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}")
    page1 = [D.Para(title, "title"), D.Para(sub, "subtitle")]
    q = decisions[0].question
    best = cmp.best
    fails = [len(d.failed) for d in decisions]

    def key(i):
        return (fails[i], -round(decisions[i].recommendation.score or 0.0, 12))

    tied = [L[i] for i in range(len(L)) if key(i) == key(best)]
    sc = decisions[best].recommendation.score
    if len(tied) > 1:
        ans = (f"Options {', '.join(tied)} tie: {fails[best]} failed requirement{'s' if fails[best] != 1 else ''}"
               + (f", score {fmt_number(sc)}" if sc is not None else "") + ".")
    else:
        ans = (f"Option {L[best]} ({_s(results[best].name)}) has the fewest failed requirements ({fails[best]})"
               + (f" and then the highest score ({fmt_number(sc)})" if sc is not None else "") + ".")
    ans += " Failed requirements: " + ", ".join(f"{l} {f}" for l, f in zip(L, fails)) + "."
    page1.append(D.Para(f"Question: {q} {ans}", "answer", html=f"<b>Question.</b> {_x(q)}<br/><b>Comparison.</b> "
                                                              f"{_x(ans)}"))
    page1.append(D.Para("The options", "subhead"))
    rows = []
    for l, r, d in zip(L, results, decisions):
        rec = d.recommendation
        rows.append([l, _s(r.name), getattr(d.arm.model, "name", "?") if d.arm is not None else "?",
                     fmt_mm(rec.x), fmt_mm(rec.y), fmt_mm(rec.height), fmt_deg(rec.yaw), rec.style,
                     "-" if rec.score is None else fmt_number(rec.score)])
    page1.append(D.Table(["option", "study", "arm", "x (mm)", "y (mm)", "height (mm)", "yaw (deg)", "style",
                          "score"], rows, "The options and their base placements",
                         widths=[0.8, 3.2, 1.6, 1, 1, 1.1, 1, 0.9, 0.9],
                         align=["l", "l", "l", "r", "r", "r", "r", "l", "r"]))
    samples = [(_path_polylines(r, d) if presenter(r.kind).path_drawings else None)
               for r, d in zip(results, decisions)]
    page1.append(D.Figure(G.top_views(decisions, L, samples), "The options seen from above (cell frame, mm), each arm "
                          "drawn at its own risk 1 or weakest point; equipment grey, work points blue, paths orange, "
                          "the base yellow."))
    page1.append(D.Para("Verdicts side by side", "subhead"))
    page1.append(_compare_verdicts(cmp))
    page1.append(D.Para("Differences between the options", "subhead"))
    page1 += [D.Para(t, "bullet") for t in cmp.differences[:8]]
    from . import CAUTIONS

    coll = "; ".join(sorted({d.collisions for d in decisions}))
    page1.append(D.Para(f"Read first. {CAUTIONS} {coll}", "caution"))
    body = [D.Heading("The options in detail")]
    for l, r, d in zip(L, results, decisions):
        body.append(D.Heading(f"Option {l}: {_s(r.name)}", 2))
        body.append(D.Para(d.recommendation.answer))
        if d.risks:
            body.append(D.Risks(risk_items(d.risks)))
    progress(0.4, "drawing the maps on one scale")
    body.append(D.Heading("Maps on one colour scale"))
    body += _compare_maps(results, decisions, L)
    body.append(D.Heading("Drawings of the options"))
    for l, r, d in zip(L, results, decisions):
        samples = _path_polylines(r, d) if presenter(r.kind).path_drawings else None
        body.append(D.Figure(G.cell_views(d, height=2.9, samples=samples),
                             f"Option {l}: " + _views_caption(d, "its base")))
    if len(cmp.differences) > 8:
        body.append(D.Heading("All differences"))
        body += [D.Para(t, "bullet") for t in cmp.differences]
    body += _assumptions_section(results[0], decisions[0])
    body.append(D.Heading("Provenance and fingerprints", appendix=True))
    from . import fingerprint

    for l, r in zip(L, results):
        body.append(D.Heading(f"Option {l}", 2, appendix=True))
        body.append(D.Pairs([("results file", os.path.abspath(r.path) if r.path else "(in memory)"),
                             ("written", f"{_s(r.attrs.get('created', '?'))} by "
                                         f"{_s(r.attrs.get('software_version', '?'))}"),
                             ("study file sha256", fingerprint(r.study_text)),
                             ("arm file sha256", fingerprint(r.arm_text)),
                             ("cell file sha256", fingerprint(r.cell_text))]))
    doc = D.Document(title, cmp.kind, page1, body, paper=paper)
    doc.meta["comparison"] = cmp
    doc.meta["footer"] = f"{title} · kinematic and static maps, not a risk assessment"
    return doc.number()


def _compare_verdicts(cmp) -> D.Table:
    header = ["Requirement"] + [f"{l}: worst (verdict)" for l in cmp.labels]
    rows = []
    for k in cmp.keys:
        vs = cmp.cells[k]
        name = next(v.requirement for v in vs if v is not None)
        row = [name]
        for v in vs:
            if v is None:
                row.append("-")
            elif v.status == NOT_CHECKED:
                row.append("not checked")
            else:
                row.append(f"{v.worst} ({v.status})")
        rows.append(row)
    return D.Table(header, rows, "Requirements of each option", widths=[3.2] + [2.0] * len(cmp.labels),
                   align=["l"] * (1 + len(cmp.labels)), font=7.2)


def _compare_maps(results, decisions, L) -> list:
    from ..studies.base import Axis

    compare = presenter(results[0].kind).compare     # workbench/presenters.py
    out = []
    if compare == "floor":
        Zs, axx, axy, marks, cells = [], [], [], [], []
        for r, d in zip(results, decisions):
            s = np.asarray(r.arrays["rank_value" if "rank_value" in r.arrays else "score"], float)
            Zs.append(np.nanmax(s.reshape(-1, *s.shape[-2:]), axis=0))
            ax = {a.name: a for a in r.axes}
            axx.append(Axis("x", ax["x"].values, "m", "base x"))
            axy.append(Axis("y", ax["y"].values, "m", "base y"))
            marks.append((d.recommendation.x, d.recommendation.y) if d.recommendation.kind == "mount" else None)
            cells.append(d.cell)
        vmax = max(float(np.nanmax(z)) for z in Zs if np.isfinite(z).any()) if any(
            np.isfinite(z).any() for z in Zs) else 1.0
        out.append(D.Figure(G.side_by_side_maps(Zs, [f"option {l}" for l in L], axx, axy,
                                                "rank value (best over yaw, height, style)", 0.0, vmax, cells, marks),
                            "Rank values of the options on one colour scale (0 to the largest of all; whole part: "
                            "work points served); stars: the recommended mounts."))
        rows = []
        for l, d in zip(L, decisions):
            iv = d.verdict("inverse_condition")
            lm = d.verdict("limit_margin")
            rows.append([l, "-" if d.recommendation.score is None else fmt_number(d.recommendation.score, 4),
                         iv.worst if iv else "-", lm.worst if lm else "-"])
        out.append(D.Table(["option", "rank value", "worst inverse condition", "smallest limit margin"], rows,
                           "Rank values and worst values of the recommended mounts", align=["l", "r", "r", "r"]))
    elif compare == "path":
        names = sorted({n for r in results for n in _path_names(r)}, key=lambda n: [
            _path_names(results[0]).index(n) if n in _path_names(results[0]) else 99])
        thr = decisions[0].thresholds.get("inverse_condition", 0.02)
        for nm in names:
            series = []
            for l, r in zip(L, results):
                pn = _path_names(r)
                if nm not in pn:
                    continue
                p = pn.index(nm)
                pidx = np.asarray(r.arrays["path_index"]).astype(int)
                d_ = np.asarray(r.arrays["distance"], float) * 1000
                m = (pidx == p) & np.isfinite(d_)
                series.append((f"option {l}", d_[m], np.asarray(r.arrays["inverse_condition"], float)[m]))
            out.append(D.Figure(G.overlay_chart(series, "distance along the path (mm)", "inverse condition", thr),
                                f"Path {nm}: the inverse condition of every option on one scale."))
    else:
        fields = [f.name for f in results[0].fields if f.kind == "measure" and f.shape == ()]
        for fname in fields[:3]:
            if not all(fname in r.arrays and len(r.axes) >= 2 for r in results):
                continue
            Zs = []
            for r in results:
                Z = _shown(fname, r.arrays[fname])
                Zs.append(_best(fname, Z.reshape(-1, *Z.shape[-2:])) if Z.ndim > 2 else Z)
            fin = [z[np.isfinite(z)] for z in Zs]
            lo = min(float(v.min()) for v in fin if v.size) if any(v.size for v in fin) else 0.0
            hi = max(float(v.max()) for v in fin if v.size) if any(v.size for v in fin) else 1.0
            label = quantities.axis_label(fname, unit=results[0].field(fname).unit)
            out.append(D.Figure(G.side_by_side_maps(Zs, [f"option {l}" for l in L], [r.axes[-1] for r in results],
                                                    [r.axes[-2] for r in results], label, lo, hi),
                                f"{label[:1].upper() + label[1:]} of every option on one colour scale."))
    return out
