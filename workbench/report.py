"""The layout report: a results file turned into a PDF (matplotlib's PdfPages) or a standalone HTML
page with an images folder, for a layout review.

Contents, in order: title, date, software version; the study (kind, name, settings); summaries of
the arm and the cell with the sha256 fingerprints of the stored file texts; every map as an image
with a colour bar, axis units and a scale; the kind's charts (mount ranking and sensitivity, path
audit charts); every summary table (near-singular poses, mount ranking ...); the assumptions and
the cautions.

Only matplotlib (its non-interactive "Agg" canvas) draws here: no Qt (DESIGN §2).
"""
from __future__ import annotations

import hashlib
import html
import math
import os
import re
import shutil
import tempfile
import textwrap
import time
import tomllib
from dataclasses import dataclass, field

import numpy as np

from .errors import WorkbenchError

__all__ = ["ReportError", "build_report", "write_report", "ASSUMPTIONS", "CAUTIONS", "fingerprint"]

ASSUMPTIONS = (
    "Kinematic and static only: rigid links and joints with exactly the geometry of the arm file; no "
    "dynamics (accelerations, Coriolis and friction torques are not counted), no joint or link "
    "compliance, no backlash, no controller behaviour. Payloads are held still against gravity. "
    "Inverse kinematics is solved numerically from a finite set of seeds: a point reported as not "
    "reached may still be reachable from another start. Equipment boxes are drawn only: there are no "
    "collision checks between the arm and the cell.")
CAUTIONS = (
    "The maps are kinematic and static: they do not replace a risk assessment for a robot cell, the "
    "arm maker's data, a check on the real controller, or local codes and licensed practice (robot "
    "cell safety is governed by standards such as ISO 10218-1/-2).")


class ReportError(WorkbenchError):
    """The report cannot be written (bad output name, unreadable results)."""


def fingerprint(text: str | None) -> str:
    """sha256 (hex) of a stored file text (UTF-8), or "-" when absent."""
    return hashlib.sha256(text.encode("utf-8")).hexdigest() if text is not None else "-"


# ----------------------------------------------------------------------------------------------
# report model: a list of blocks, drawn to PDF pages or HTML


@dataclass
class Figure:
    title: str
    fig: object  # matplotlib Figure
    caption: str = ""


@dataclass
class TableBlock:
    title: str
    header: list
    rows: list
    description: str = ""
    notes: list = field(default_factory=list)  # long texts listed below the table (numbered)
    more: int = 0


@dataclass
class TextBlock:
    title: str
    paragraphs: list


@dataclass
class Report:
    title: str
    meta: list  # (label, value)
    blocks: list


def _s(v):
    if isinstance(v, bytes):
        return v.decode("utf-8", "replace")
    return v


def _fmt(v, unit=""):
    v = _s(v)
    if isinstance(v, str):
        return v
    if isinstance(v, (np.integer, int)) and not isinstance(v, bool):
        return f"{int(v)}"
    try:
        x = float(v)
    except (TypeError, ValueError):
        return str(v)
    if not math.isfinite(x):
        return "-" if math.isnan(x) else ("inf" if x > 0 else "-inf")
    if unit in ("mm", "deg", "%", "mm/s") or (abs(x) >= 100 and float(x).is_integer()):
        return f"{x:.1f}"
    if x != 0 and (abs(x) < 1e-3 or abs(x) >= 1e5):
        return f"{x:.3e}"
    return f"{x:.4g}"


def _table_block(name, t, max_rows=40) -> TableBlock:
    cols = list(t.columns)
    note_cols = [c for c in cols if c == "note"]
    show = [c for c in cols if c not in note_cols]
    header = [f"{c} ({t.units[c]})" if t.units.get(c) else c for c in show]
    n = t.rows
    k = min(n, max_rows)
    rows = [[_fmt(t.columns[c][i], t.units.get(c, "")) for c in show] for i in range(k)]
    notes = [str(_s(t.columns[note_cols[0]][i])) for i in range(k)] if note_cols else []
    if notes:
        header = ["#"] + header
        rows = [[str(i + 1)] + r for i, r in enumerate(rows)]
    return TableBlock(_s(t.title) or name, header, rows, _s(t.description) or "", notes, n - k)


# ----------------------------------------------------------------------------------------------
# summaries of the inputs


def _arm_summary(text):
    if not text:
        return ["(no arm file text stored)"]
    if text.lstrip().startswith("<"):
        return ["URDF arm (see the stored text)"]
    try:
        from .arm.files import parse_arm_dict
        from .kinematics import Arm

        arm = Arm(parse_arm_dict(tomllib.loads(text), "stored arm file"))
    except Exception as exc:  # the report still shows what it can
        return [f"(arm file text could not be read: {exc})"]
    m = arm.model
    out = [f"{m.name}: {m.n} joints, nominal reach {arm.nominal_reach():.3f} m"]
    if m.description:
        out.append(m.description)
    for j in m.joints:
        sc = 180 / math.pi if j.revolute else 1.0
        u = "deg" if j.revolute else "m"
        lim = f"[{j.lower * sc:.0f}, {j.upper * sc:.0f}] {u}" if math.isfinite(j.lower) else "unlimited"
        sp = f", max speed {j.max_speed * sc:.0f} {u}/s" if j.max_speed else ""
        ef = f", max effort {j.max_effort:g} {'N m' if j.revolute else 'N'}" if j.max_effort else ""
        ms = f", mass {j.mass:g} kg" if j.mass is not None else ""
        out.append(f"  {j.name} ({j.kind}): limits {lim}{sp}{ef}{ms}")
    return out


def _cell(text):
    if not text:
        return None
    try:
        from .studies.cell import parse_cell_text

        return parse_cell_text(text, "stored cell file")
    except Exception:
        return None


def _cell_summary(cell, text):
    if text is None:
        return ["(this study has no cell file)"]
    if cell is None:
        return ["(cell file text could not be read)"]
    out = [cell.summary()]
    if cell.description:
        out.append(cell.description)
    for p in cell.points:
        x, y, z = p.position * 1000
        out.append(f"  point {p.name}: ({x:.0f}, {y:.0f}, {z:.0f}) mm, orientation {p.rule}")
    for p in cell.paths:
        out.append(f"  path {p.name}: {' -> '.join(p.point_names())}, {p.speed * 1000:g} mm/s, orientation {p.rule}")
    for b in cell.boxes:
        out.append(f"  box {b.name}: centre {tuple(round(v * 1000) for v in b.center)} mm, "
                   f"size {tuple(round(v * 1000) for v in b.size)} mm")
    return out


def _settings_lines(study_text):
    if not study_text:
        return ["(no study text stored)"]
    try:
        d = tomllib.loads(study_text)
    except tomllib.TOMLDecodeError:
        return study_text.splitlines()
    st = d.get("study", {})
    out = [f"kind: {st.get('kind', '?')}", f"arm file: {st.get('arm', '?')}"]
    if st.get("cell"):
        out.append(f"cell file: {st['cell']}")
    for k, v in (d.get("settings") or {}).items():
        out.append(f"{k} = {v!r}")
    return out


# ----------------------------------------------------------------------------------------------
# figures


def _mpl():
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure as MplFigure

    return MplFigure


def _extent(ax_x, ax_y):
    fx = ax_x.display_values()
    fy = ax_y.display_values()

    def ext(v):
        if len(v) == 1:
            return v[0] - 0.5, v[0] + 0.5
        d = (v[-1] - v[0]) / (len(v) - 1)
        return v[0] - d / 2, v[-1] + d / 2

    return (*ext(fx), *ext(fy))


def _unit_label(axis):
    u = axis.display_unit
    return f"{axis.label} ({u})" if u else axis.label


def _map_figure(title, Z, ax_x, ax_y, cbar_label, cell=None, draw_cell_xy=False, cmap="viridis",
                vmin=None, vmax=None, mark=None):
    Fig = _mpl()
    fig = Fig(figsize=(7.5, 5.6))
    ax = fig.add_subplot(111)
    Z = np.asarray(Z, float)
    finite = np.isfinite(Z)
    extend = "neither"
    if vmax is None and finite.sum() > 20:
        hi, top = np.percentile(Z[finite], 99), np.max(Z[finite])
        lo = np.min(Z[finite])
        if top - lo > 3 * (hi - lo) > 0:  # a few outliers would wash out the map: clip, say so
            vmax, extend = hi, "max"
    im = ax.imshow(np.ma.masked_invalid(Z), origin="lower", extent=_extent(ax_x, ax_y), aspect="auto",
                   cmap=cmap, interpolation="nearest",
                   vmin=vmin if vmin is not None else (np.nanmin(Z) if finite.any() else 0),
                   vmax=vmax if vmax is not None else (np.nanmax(Z) if finite.any() else 1))
    cb = fig.colorbar(im, ax=ax, extend=extend)
    cb.set_label(cbar_label + (" (top 1 % clipped)" if extend == "max" else ""))
    ax.set_xlabel(_unit_label(ax_x))
    ax.set_ylabel(_unit_label(ax_y))
    ax.set_title(title, fontsize=10)
    if draw_cell_xy and cell is not None:
        f = 1000.0 if ax_x.display_unit == "mm" else 1.0
        _draw_cell_floor(ax, cell, f)
    if mark is not None:
        ax.plot([mark[0]], [mark[1]], marker="*", ms=14, mec="k", mfc="w", ls="none", label="best (refined)")
        ax.legend(loc="upper right", fontsize=7)
    _scale_bar(ax, ax_x)
    fig.tight_layout()
    return fig


def _scale_bar(ax, ax_x):
    """A scale bar under the plot (length unit axes only)."""
    if ax_x.unit != "m":
        return
    x0, x1 = ax.get_xlim()
    span = abs(x1 - x0)
    if span <= 0:
        return
    nice = 10 ** math.floor(math.log10(span / 4))
    for m in (5, 2, 1):
        if m * nice <= span / 3:
            nice *= m
            break
    y0, y1 = ax.get_ylim()
    y = y0 + 0.04 * (y1 - y0)
    xs = x0 + 0.04 * span
    ax.plot([xs, xs + nice], [y, y], color="k", lw=3, solid_capstyle="butt")
    ax.plot([xs, xs + nice], [y, y], color="w", lw=1, solid_capstyle="butt")
    ax.text(xs + nice / 2, y + 0.02 * (y1 - y0), f"{nice:g} {ax_x.display_unit}", ha="center", va="bottom",
            fontsize=7, bbox=dict(fc="w", ec="none", alpha=0.7, pad=1))


def _draw_cell_floor(ax, cell, f):
    for b in cell.boxes:
        c = b.corners()[[0, 2, 6, 4, 0]][:, :2] * f
        ax.plot(c[:, 0], c[:, 1], color="0.3", lw=1)
        ax.text(b.center[0] * f, b.center[1] * f, b.name, fontsize=6, ha="center", va="center", color="0.2")
    P = np.array([p.position for p in cell.points]) * f
    ax.plot(P[:, 0], P[:, 1], "o", ms=4, mfc="none", mec="r", label="work points")


def _mount_blocks(r, cell):
    from .studies.base import Axis

    blocks = []
    ax = {a.name: a for a in r.axes}
    score = np.asarray(r.arrays["score"], float)  # (S, H, Y, ny, nx)
    reached = np.asarray(r.arrays["reached_fraction"], float)
    ax_x = Axis("x", ax["x"].values, "m", "base x", "mm")
    ax_y = Axis("y", ax["y"].values, "m", "base y", "mm")
    mark = None
    ref = r.tables.get("refined")
    if ref is not None and ref.rows:
        mark = (float(ref.columns["x"][0]), float(ref.columns["y"][0]))
    formula = _s(r.field("score").description)
    best = np.nanmax(score.reshape(-1, *score.shape[-2:]), axis=0)
    blocks.append(Figure("Mount score over the floor (best over yaw, height and style)",
                         _map_figure("Best mount score over yaw, height and style", best, ax_x, ax_y, "score",
                                     cell, True, mark=mark), formula))
    bestf = np.nanmax(reached.reshape(-1, *reached.shape[-2:]), axis=0) * 100
    blocks.append(Figure("Work points reached (best over yaw, height and style)",
                         _map_figure("Work points reached, best over yaw, height and style", bestf, ax_x, ax_y,
                                     "reached (%)", cell, True, vmin=0, vmax=100), ""))
    # small multiples per yaw and height
    Fig = _mpl()
    S, H, Y = score.shape[:3]
    vmax = float(np.nanmax(score)) if np.isfinite(score).any() else 1.0
    for si in range(S):
        rows, cols = H, Y
        fig = Fig(figsize=(min(2.0 * cols + 1.2, 11), 2.0 * rows + 1.0))
        axs = fig.subplots(rows, cols, squeeze=False, sharex=True, sharey=True)
        im = None
        for hi in range(H):
            for yi in range(Y):
                a = axs[hi][yi]
                im = a.imshow(np.ma.masked_invalid(score[si, hi, yi]), origin="lower", extent=_extent(ax_x, ax_y),
                              aspect="auto", cmap="viridis", vmin=0, vmax=vmax, interpolation="nearest")
                a.set_title(f"yaw {np.degrees(ax['yaw'].values[yi]):.0f} deg\nheight {ax['height'].values[hi] * 1000:.0f} mm",
                            fontsize=6)
                a.tick_params(labelsize=5)
                if hi == H - 1:
                    a.set_xlabel("x (mm)", fontsize=6)
                if yi == 0:
                    a.set_ylabel("y (mm)", fontsize=6)
        cb = fig.colorbar(im, ax=axs, shrink=0.8)
        cb.set_label("score")
        style = ax["style"].values[si]
        blocks.append(Figure(f"Mount score per yaw and height (style {int(style)})", fig,
                             "each panel: base x, y in mm; same colour scale"))
    sens = r.tables.get("sensitivity")
    if sens is not None and sens.rows:
        fig = Fig(figsize=(7, 3.6))
        a1, a2 = fig.subplots(1, 2)
        kinds = np.array([_s(k) for k in sens.columns["offset_kind"]])
        off = np.asarray(sens.columns["offset"], float)
        drop = np.asarray(sens.columns["score_drop"], float)
        nom = float(np.asarray(sens.columns["nominal_score"])[0])
        for a, kind, unit in ((a1, "position", "mm"), (a2, "yaw", "deg")):
            m = kinds == kind
            pct = 100 * drop[m] / nom if nom > 0 else drop[m] * 0
            pct = np.where(np.abs(pct) < 1e-4, 0.0, pct)  # round-off of an unchanged score
            a.bar([f"{v:g} {unit}" for v in off[m]], pct, color="tab:orange")
            a.set_ylabel("score drop (% of best)")
            a.set_xlabel(f"placement error ({unit})")
            a.set_title(f"{kind} error", fontsize=9)
            a.axhline(0, color="k", lw=0.5)
        fig.suptitle(f"Sensitivity of the best mount (score {nom:.4g}) to placement errors", fontsize=10)
        fig.tight_layout()
        blocks.append(Figure("Sensitivity to placement errors", fig,
                             "worst score over +-x and +-y moves (position) or +-yaw turns, as a drop from the best"))
    return blocks


def _path_blocks(r, cell):
    Fig = _mpl()
    blocks = []
    dist = np.asarray(r.arrays["distance"], float) * 1000
    pidx = np.asarray(r.arrays["path_index"])
    inv = np.asarray(r.arrays["inverse_condition"], float)
    ratio = np.asarray(r.arrays["speed_ratio"], float)
    margin = np.asarray(r.arrays["margin"], float)
    qdot = np.asarray(r.arrays["qdot"], float)
    flags = np.asarray(r.arrays["flags"]).astype(int)
    thr = 0.02
    try:
        thr = float(tomllib.loads(r.study_text or "").get("settings", {}).get("near_singular", thr))
    except Exception:
        pass
    names = []
    paths = r.tables.get("paths")
    if paths is not None:
        names = [_s(v) for v in paths.columns["path"]]
    jn = []
    if r.arm_text and not r.arm_text.lstrip().startswith("<"):
        try:
            jn = [j.get("name", f"j{i + 1}") for i, j in enumerate(tomllib.loads(r.arm_text).get("joint", []))]
        except Exception:
            jn = []
    for p in np.unique(pidx[np.isfinite(dist)]).astype(int):
        m = (pidx == p) & np.isfinite(dist)
        s = dist[m]
        nm = names[p] if p < len(names) else f"path {p + 1}"
        fig = Fig(figsize=(7.5, 8.0))
        a1, a2, a3, a4 = fig.subplots(4, 1, sharex=True)
        a1.plot(s, inv[m], lw=1)
        a1.axhline(thr, color="r", lw=0.8, ls="--", label=f"near-singular threshold {thr:g}")
        bad = inv[m] < thr
        if bad.any():
            a1.fill_between(s, 0, 1, where=bad, color="r", alpha=0.15, transform=a1.get_xaxis_transform(),
                            label="near-singular span")
        a1.set_ylabel("inverse condition")
        a1.set_ylim(bottom=0)
        a1.legend(fontsize=7, loc="upper right")
        a2.plot(s, ratio[m], lw=1, color="tab:orange")
        a2.axhline(1.0, color="r", lw=0.8, ls="--", label="joint speed limit")
        a2.set_ylabel("joint speed / limit")
        a2.set_yscale("log")
        a2.legend(fontsize=7, loc="upper right")
        qd = np.degrees(qdot[m])
        for j in range(qd.shape[1]):
            a3.plot(s, qd[:, j], lw=0.8, label=jn[j] if j < len(jn) else f"j{j + 1}")
        a3.set_ylabel("joint speed (deg/s)")
        a3.legend(fontsize=6, ncol=min(qd.shape[1], 7), loc="upper right")
        a4.plot(s, margin[m], lw=1, color="tab:green")
        flips = (flags[m] & 4) > 0
        if flips.any():
            a4.plot(s[flips], margin[m][flips], "rx", label="branch flip")
            a4.legend(fontsize=7)
        a4.set_ylabel("limit margin")
        a4.set_ylim(0, 1)
        a4.set_xlabel("distance along the path (mm)")
        fig.suptitle(f"Path audit: {nm}", fontsize=11)
        fig.tight_layout()
        blocks.append(Figure(f"Path audit charts: {nm}", fig,
                             "inverse condition, joint-speed ratio (log scale), joint speeds and joint-limit margin "
                             "against the distance along the path"))
    if cell is not None:
        xyz = np.asarray(r.arrays["xyz"], float).reshape(-1, 3) * 1000
        fig = Fig(figsize=(7.5, 5.6))
        ax = fig.add_subplot(111)
        _draw_cell_floor(ax, cell, 1000.0)
        ok = np.isfinite(xyz[:, 0])
        sc = ax.scatter(xyz[ok, 0], xyz[ok, 1], c=inv[ok], s=4, cmap="viridis", vmin=0,
                        vmax=max(float(np.nanmax(inv)), 1e-9) if np.isfinite(inv).any() else 1)
        cb = fig.colorbar(sc, ax=ax)
        cb.set_label("inverse condition")
        ax.set_xlabel("cell x (mm)")
        ax.set_ylabel("cell y (mm)")
        ax.set_aspect("equal", adjustable="datalim")
        ax.set_title("Paths seen from above, coloured by inverse condition", fontsize=10)
        from .studies.base import Axis

        _scale_bar(ax, Axis("x", [0, 1], "m", "x", "mm"))
        fig.tight_layout()
        blocks.append(Figure("Paths seen from above", fig, "cell x, y in mm; equipment boxes and work points drawn"))
    return blocks


def _generic_maps(r, skip=()):
    """A map per scalar measure field: 2-D grids as images (the best over leading axes for more
    dimensions), 1-D grids as curves."""
    Fig = _mpl()
    blocks = []
    axes = r.axes
    for f in r.fields:
        if f.kind != "measure" or f.shape != () or f.name in skip:
            continue
        Z = np.asarray(r.arrays[f.name], float)
        label = f"{f.name.replace('_', ' ')}" + (f" ({f.unit})" if f.unit else "")
        if len(axes) >= 2:
            note = ""
            if Z.ndim > 2:
                Z = np.nanmax(Z.reshape(-1, *Z.shape[-2:]), axis=0) if np.isfinite(Z).any() else Z.reshape(-1, *Z.shape[-2:])[0]
                note = f" (best over {', '.join(a.label for a in axes[:-2])})"
            fig = _map_figure(f"{label}{note}", Z, axes[-1], axes[-2], label)
            blocks.append(Figure(f"Map: {label}{note}", fig, _s(f.description)))
        elif len(axes) == 1 and axes[0].name == "sample":  # random samples: the distribution
            fig = Fig(figsize=(7.5, 3.6))
            a = fig.add_subplot(111)
            v = Z[np.isfinite(Z)]
            if v.size:
                hi = np.percentile(v, 99.5)
                a.hist(np.minimum(v, hi), bins=60, color="tab:blue")
            a.set_xlabel(label + (" (top 0.5 % clipped)" if v.size and hi < v.max() else ""))
            a.set_ylabel("samples")
            a.set_title(f"{label}: distribution over {v.size} samples", fontsize=10)
            fig.tight_layout()
            blocks.append(Figure(f"Histogram: {label}", fig, _s(f.description)))
        elif len(axes) == 1:
            fig = Fig(figsize=(7.5, 3.6))
            a = fig.add_subplot(111)
            a.plot(axes[0].display_values(), Z, lw=1)
            a.set_xlabel(_unit_label(axes[0]))
            a.set_ylabel(label)
            a.set_title(label, fontsize=10)
            fig.tight_layout()
            blocks.append(Figure(f"Chart: {label}", fig, _s(f.description)))
    return blocks


def _load_blocks(r):
    blocks = _generic_maps(r, skip=())
    if "limiting_joint" in r.arrays and len(r.axes) == 2:
        import matplotlib.colors as mcolors

        Z = np.asarray(r.arrays["limiting_joint"], float)
        Z = np.where(Z < 0, np.nan, Z)
        n = r.arrays["q"].shape[-1]
        jn = []
        try:
            jn = [j.get("name", f"j{i + 1}") for i, j in enumerate(tomllib.loads(r.arm_text or "").get("joint", []))]
        except Exception:
            pass
        cmap = mcolors.ListedColormap([f"C{k}" for k in range(n)])
        fig = _map_figure("Joint whose torque limit sets the payload", Z, r.axes[-1], r.axes[-2],
                          "limiting joint", cmap=cmap, vmin=-0.5, vmax=n - 0.5)
        cb = fig.axes[-1]
        cb.set_yticks(range(n))
        cb.set_yticklabels(jn if len(jn) == n else [f"j{k + 1}" for k in range(n)])
        blocks.append(Figure("Map: limiting joint", fig, "which joint's torque limit is reached first"))
    return blocks


# ----------------------------------------------------------------------------------------------


def build_report(results) -> Report:
    """Assemble the report blocks of a :class:`workbench.results.Results`."""
    from . import __version__

    r = results
    cell = _cell(r.cell_text)
    title = f"Layout report: {_s(r.name)}"
    now = time.strftime("%Y-%m-%d %H:%M UTC", time.gmtime())
    meta = [("Report date", now), ("Software", f"manipulability-workbench {__version__} (results written by "
                                                f"{_s(r.attrs.get('software_version', '?'))})"),
            ("Study kind", _s(r.kind)), ("Results file", r.path or "(in memory)"),
            ("Results created", _s(r.attrs.get("created", "?"))),
            ("Complete", "no: the run was cancelled, unfinished cells are blank" if r.incomplete else "yes"),
            ("Arm file sha256", fingerprint(r.arm_text)), ("Cell file sha256", fingerprint(r.cell_text)),
            ("Study file sha256", fingerprint(r.study_text)),
            ("Read first", "kinematic and static maps only, not a risk assessment; see Cautions")]
    blocks = [TextBlock("Study settings", _settings_lines(r.study_text)),
              TextBlock("Arm", _arm_summary(r.arm_text)),
              TextBlock("Cell", _cell_summary(cell, r.cell_text))]
    if r.kind == "mount_search":
        blocks.append(TextBlock("Score", [_s(r.field("score").description)]))
        blocks += _mount_blocks(r, cell)
        order = ["unreachable", "refined", "ranking", "sensitivity", "best_points"]
    elif r.kind == "path_audit":
        blocks += _path_blocks(r, cell)
        order = ["near_singular", "paths", "branch_flips"]
    elif r.kind == "load_map":
        blocks += _load_blocks(r)
        order = ["load", "limiting"]
    else:
        blocks += _generic_maps(r)
        order = []
    names = [n for n in order if n in r.tables] + [n for n in r.tables if n not in order]
    for n in names:
        blocks.append(_table_block(n, r.tables[n]))
    blocks.append(TextBlock("Assumptions", [ASSUMPTIONS]))
    blocks.append(TextBlock("Cautions", [CAUTIONS]))
    return Report(title, meta, blocks)


# ---- PDF


def _text_page(Fig, title, lines, meta=None):
    """Pages of wrapped text (returns a list of figures)."""
    width = 100
    wrapped = []
    for ln in lines:
        ind = len(ln) - len(ln.lstrip())
        parts = textwrap.wrap(ln, width - ind, subsequent_indent=" " * (ind + 2)) or [""]
        wrapped += [" " * ind + p if i == 0 else p for i, p in enumerate(parts)]
    per = 52 if meta is None else 40
    pages = []
    for k in range(0, max(1, len(wrapped)), per):
        fig = Fig(figsize=(8.27, 11.69))
        y = 0.95
        if k == 0:
            fig.text(0.07, y, title, fontsize=14 if meta is None else 18, weight="bold", va="top")
            y -= 0.05
            if meta:
                for lab, val in meta:
                    fig.text(0.07, y, f"{lab}:", fontsize=9, weight="bold", va="top")
                    fig.text(0.30, y, str(val), fontsize=8, va="top", family="monospace")
                    y -= 0.022
                y -= 0.02
        else:
            fig.text(0.07, y, f"{title} (continued)", fontsize=12, weight="bold", va="top")
            y -= 0.04
        fig.text(0.07, y, "\n".join(wrapped[k:k + per]), fontsize=8, va="top", family="monospace",
                 linespacing=1.35)
        pages.append(fig)
    return pages


def _table_pages(Fig, tb: TableBlock):
    pages = []
    per = 28
    chunks = [tb.rows[i:i + per] for i in range(0, len(tb.rows), per)] or [[]]
    for ci, rows in enumerate(chunks):
        fig = Fig(figsize=(11.69, 8.27))
        fig.text(0.04, 0.95, tb.title + (" (continued)" if ci else ""), fontsize=13, weight="bold", va="top")
        if tb.description and ci == 0:
            fig.text(0.04, 0.91, textwrap.fill(tb.description, 170), fontsize=8, va="top")
        ax = fig.add_axes([0.04, 0.08 if not tb.notes else 0.40, 0.92, 0.78 if not tb.notes else 0.46])
        ax.axis("off")
        if rows:
            t = ax.table(cellText=rows, colLabels=tb.header, loc="upper center", cellLoc="right")
            t.auto_set_font_size(False)
            t.set_fontsize(8)
            t.scale(1, 1.25)
            t.auto_set_column_width(list(range(len(tb.header))))
        else:
            ax.text(0.0, 0.95, "(no rows)", fontsize=9, va="top")
        if tb.notes:
            lo = ci * per
            notes = [f"{lo + i + 1}. {n}" for i, n in enumerate(tb.notes[lo:lo + per])]
            txt = "\n".join(textwrap.fill(n, 190, subsequent_indent="    ") for n in notes)
            fig.text(0.04, 0.37, "Notes:\n" + txt, fontsize=6.5, va="top", linespacing=1.3)
        if tb.more and ci == len(chunks) - 1:
            fig.text(0.04, 0.03, f"... {tb.more} more rows in the results file", fontsize=8)
        pages.append(fig)
    return pages


def _write_pdf(rep: Report, path: str) -> None:
    from matplotlib.backends.backend_pdf import PdfPages

    Fig = _mpl()
    first = []
    lead = 4 if len(rep.blocks) > 3 and rep.blocks[3].title == "Score" else 3
    for b in [rep.blocks[3]] + rep.blocks[:3] if lead == 4 else rep.blocks[:3]:
        first += [b.title, *b.paragraphs, ""]
    with PdfPages(path) as pdf:
        for fig in _text_page(Fig, rep.title, first, rep.meta):
            pdf.savefig(fig)
        for b in rep.blocks[lead:]:
            if isinstance(b, TextBlock):
                for fig in _text_page(Fig, b.title, list(b.paragraphs)):
                    pdf.savefig(fig)
            elif isinstance(b, Figure):
                if b.caption:
                    import warnings

                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        try:
                            b.fig.tight_layout(rect=(0, 0.045, 1, 1))
                        except Exception:
                            pass
                    b.fig.text(0.01, 0.005, textwrap.fill(b.caption, 150), fontsize=6, va="bottom", color="0.3")
                pdf.savefig(b.fig)
            elif isinstance(b, TableBlock):
                for fig in _table_pages(Fig, b):
                    pdf.savefig(fig)
        d = pdf.infodict()
        d["Title"] = rep.title
        d["Creator"] = "manipulability-workbench"


# ---- HTML

_CSS = """body{font-family:sans-serif;max-width:1100px;margin:2em auto;padding:0 1em;color:#222}
table{border-collapse:collapse;font-size:0.85em;margin:0.5em 0}th,td{border:1px solid #bbb;padding:2px 6px;
text-align:right}th{background:#eee}td.t{text-align:left}pre{font-size:0.85em;background:#f6f6f6;padding:0.5em;
white-space:pre-wrap}img{max-width:100%;border:1px solid #ddd}.caution{border:2px solid #b60;padding:0.5em 1em;
background:#fff6ea}dl{display:grid;grid-template-columns:14em auto}dt{font-weight:bold}dd{margin:0;
font-family:monospace;word-break:break-all}"""


#: the files an HTML report puts in its ``<name>_files`` folder
_REPORT_IMAGE = re.compile(r"figure_\d+\.png")


def _usual_mode(path: str, folder: bool = False) -> None:
    """Give a file made by ``tempfile`` (mode 0600 / 0700) the mode a plain ``open`` would have
    (0666 / 0777 less the umask), so a report is readable like any other file the user writes."""
    mask = os.umask(0)
    os.umask(mask)
    os.chmod(path, (0o777 if folder else 0o666) & ~mask)


def _write_html(rep: Report, path: str) -> None:
    e = html.escape
    folder = os.path.dirname(os.path.abspath(path))
    stem = os.path.splitext(os.path.basename(path))[0]
    img_dir_name = f"{stem}_files"
    tmp_dir = tempfile.mkdtemp(prefix=f".~{stem}_files", dir=folder)
    tmp_html = None
    parts = ["<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
             f"<title>{e(rep.title)}</title>", f"<style>{_CSS}</style>", "</head>", "<body>",
             f"<h1>{e(rep.title)}</h1>", "<dl>"]
    for lab, val in rep.meta:
        parts.append(f"<dt>{e(lab)}</dt><dd>{e(str(val))}</dd>")
    parts.append("</dl>")
    k = 0
    try:
        for b in rep.blocks:
            if isinstance(b, TextBlock):
                cls = ' class="caution"' if b.title == "Cautions" else ""
                parts.append(f"<h2>{e(b.title)}</h2>")
                if b.title in ("Assumptions", "Cautions", "Score"):
                    parts += [f"<p{cls}>{e(p)}</p>" for p in b.paragraphs]
                else:
                    parts.append("<pre>" + e("\n".join(b.paragraphs)) + "</pre>")
            elif isinstance(b, Figure):
                k += 1
                name = f"figure_{k:02d}.png"
                b.fig.savefig(os.path.join(tmp_dir, name), dpi=100)
                parts.append(f"<h2>{e(b.title)}</h2>")
                parts.append(f'<figure><img src="{e(img_dir_name)}/{name}" alt="{e(b.title)}">'
                             f"<figcaption>{e(b.caption)}</figcaption></figure>")
            elif isinstance(b, TableBlock):
                parts.append(f"<h2>{e(b.title)}</h2>")
                if b.description:
                    parts.append(f"<p>{e(b.description)}</p>")
                parts.append("<table><thead><tr>" + "".join(f"<th>{e(h)}</th>" for h in b.header)
                             + "</tr></thead><tbody>")
                for row in b.rows:
                    parts.append("<tr>" + "".join(
                        f'<td class="t">{e(c)}</td>' if not _numeric(c) else f"<td>{e(c)}</td>" for c in row)
                        + "</tr>")
                parts.append("</tbody></table>")
                if b.notes:
                    parts.append("<ol>" + "".join(f"<li>{e(n)}</li>" for n in b.notes) + "</ol>")
                if b.more:
                    parts.append(f"<p>... {b.more} more rows in the results file</p>")
        parts += ["</body>", "</html>"]
        final_dir = os.path.join(folder, img_dir_name)
        fd, tmp_html = tempfile.mkstemp(prefix=f".~{stem}", suffix=".html", dir=folder)
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write("\n".join(parts) + "\n")
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


def _numeric(c):
    try:
        float(c)
        return True
    except (TypeError, ValueError):
        return c in ("-", "inf", "-inf")


def write_report(results, out) -> str:
    """Write the layout report of ``results`` (a Results or a results file path) to ``out``.

    Parameters
    ----------
    results : workbench.results.Results or str
    out : str
        ``*.pdf`` (matplotlib PdfPages) or ``*.html`` / ``*.htm`` (a standalone page plus a
        ``<stem>_files`` folder of PNG images next to it).

    Returns
    -------
    str
        The path written.

    Raises
    ------
    ReportError
        Unknown extension, missing folder, or results that cannot be read.
    """
    from .results import check_folder_takes_files, read_results

    out = os.fspath(out)
    ext = os.path.splitext(out)[1].lower()
    if ext not in (".pdf", ".html", ".htm"):
        raise ReportError(f"--out {out}: unknown report type {ext or '(none)'!r}; expected a .pdf or .html file")
    folder = os.path.dirname(os.path.abspath(out))
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
    if isinstance(results, (str, os.PathLike)):
        results = read_results(results)
    if not results.arrays:
        raise ReportError(f"{results.path}: the results arrays are too large to load for a report")
    rep = build_report(results)
    if ext == ".pdf":
        fd, tmp = tempfile.mkstemp(prefix=".~report", suffix=".pdf", dir=folder)
        os.close(fd)
        try:
            _write_pdf(rep, tmp)
            _usual_mode(tmp)
            os.replace(tmp, out)
        except BaseException:
            if os.path.exists(tmp):
                os.unlink(tmp)
            raise
    else:
        _write_html(rep, out)
    return out
