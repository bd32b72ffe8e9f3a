"""Figures of the layout report, drawn with matplotlib's ``Figure`` (never pyplot, never Qt).

Every figure is made at the size it is printed (``WIDTH`` inches wide: the text width of both
paper sizes), so its lettering matches the document; colour bars get their own room (constrained
layout), never a plot's.
"""
from __future__ import annotations

import math

import numpy as np

from ..decision import arm_shapes, fmt_deg, fmt_mm

#: printed figure width (in): the text width of A4 and Letter with the report's margins
WIDTH = 6.85
FONT = 7.5

EQUIP = dict(fc="#d9d9d9", ec="#555555", lw=0.8)
KEEPOUT = dict(fc="none", ec="#c0392b", lw=1.0, ls="--", hatch="////")
DRAWN_ONLY = dict(fc="none", ec="#999999", lw=0.8, ls=":")
POINT_C = "#1f77b4"
PATH_C = "#e67e22"
ARM_C = "#1b2a49"
RISK_C = "#c0392b"
REGION_C = "#2e8b57"


def new_figure(height, width=WIDTH):
    """A matplotlib Figure (Agg) of the printed size, constrained layout, report fonts."""
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), layout="constrained")
    fig.set_layout_engine("constrained", h_pad=0.02, w_pad=0.02)
    return fig


def _style(ax):
    ax.tick_params(labelsize=FONT - 1)
    ax.xaxis.label.set_size(FONT)
    ax.yaxis.label.set_size(FONT)
    ax.title.set_size(FONT + 0.5)


# ----------------------------------------------------------------------------------------------
# the cell and the arm


def solids(cell):
    """What to draw of a cell: dicts with ``kind`` ("box" or "cylinder"), ``role`` ("equipment",
    "keep-out" or "drawn only"), ``name`` and the geometry in the cell frame (m): ``corners`` (8, 3)
    for boxes; ``center`` (3,), ``radius``, ``z0``, ``z1`` for cylinders."""
    out = []
    if cell is None:
        return out
    for b in getattr(cell, "boxes", ()):
        role = "keep-out" if getattr(b, "keep_out", False) or getattr(b, "kind", "") == "keep_out" else (
            "drawn only" if getattr(b, "collide", True) is False else "equipment")
        out.append({"kind": "box", "role": role, "name": b.name, "corners": b.corners()})
    for name in ("keep_out", "keepouts", "keep_outs"):
        for b in getattr(cell, name, ()) or ():
            if hasattr(b, "corners"):
                out.append({"kind": "box", "role": "keep-out", "name": b.name, "corners": b.corners()})
    for c in getattr(cell, "cylinders", ()) or ():
        ctr = np.asarray(getattr(c, "center", np.zeros(3)), float)
        hgt = float(getattr(c, "height", getattr(c, "length", 0.0)))
        z0 = float(getattr(c, "z0", ctr[2] - hgt / 2))
        role = "keep-out" if getattr(c, "keep_out", False) else (
            "drawn only" if getattr(c, "collide", True) is False else "equipment")
        out.append({"kind": "cylinder", "role": role, "name": c.name, "center": ctr, "radius": float(c.radius),
                    "z0": z0, "z1": z0 + hgt})
    return out


def _shape_points(shape):
    """Points (k, 3) that span one collision shape in its link frame, or None when the shape is of
    an unknown form (the link is then drawn as a line)."""
    pts = getattr(shape, "points", None)
    if callable(pts):
        pts = pts()
    if pts is not None:
        return np.asarray(pts, float).reshape(-1, 3)
    kind = str(getattr(shape, "kind", getattr(shape, "type", type(shape).__name__))).lower()
    u = np.linspace(0, 2 * np.pi, 16, endpoint=False)
    sph = np.array([[math.cos(a) * math.cos(b), math.sin(a) * math.cos(b), math.sin(b)]
                    for a in u for b in (-1.2, -0.6, 0, 0.6, 1.2)] + [[0, 0, 1], [0, 0, -1]])

    def pose(s):
        T = getattr(s, "transform", getattr(s, "pose", getattr(s, "origin", None)))
        if T is None:
            return np.eye(4)
        T = np.asarray(T, float)
        if T.shape == (3,):
            M = np.eye(4)
            M[:3, 3] = T
            return M
        return T

    try:
        if "capsule" in kind:
            a = np.asarray(getattr(shape, "a", getattr(shape, "p0", getattr(shape, "start", None))), float)
            b = np.asarray(getattr(shape, "b", getattr(shape, "p1", getattr(shape, "end", None))), float)
            r = float(shape.radius)
            return np.vstack([a + r * sph, b + r * sph])
        if "sphere" in kind:
            c = np.asarray(getattr(shape, "center", getattr(shape, "centre", np.zeros(3))), float)
            return c + float(shape.radius) * sph
        if "box" in kind:
            size = np.asarray(getattr(shape, "size", getattr(shape, "extent", None)), float)
            c = np.array([[sx, sy, sz] for sx in (-1, 1) for sy in (-1, 1) for sz in (-1, 1)]) * size / 2
            T = pose(shape)
            return c @ T[:3, :3].T + T[:3, 3]
        if "cylinder" in kind:
            r = float(shape.radius)
            h = float(getattr(shape, "length", getattr(shape, "height", 0.0)))
            ring = np.column_stack([r * np.cos(u), r * np.sin(u), np.zeros_like(u)])
            c = np.vstack([ring + [0, 0, -h / 2], ring + [0, 0, h / 2]])
            T = pose(shape)
            return c @ T[:3, :3].T + T[:3, 3]
    except (TypeError, ValueError, AttributeError):
        return None
    return None


def arm_outline(arm, q):
    """The arm at pose q in the cell frame: ``(polyline (k, 3), shapes)`` where ``shapes`` is a list
    of (m, 3) point sets, one per collision shape (empty when the arm has none)."""
    q = np.asarray(q, float)
    F = arm.frames(q, world=True)
    tcp = arm.fk(q, world=True)
    line = np.vstack([arm.model.mount[:3, 3], F[:, :3, 3], tcp[:3, 3]])
    shapes = []
    per = arm_shapes(arm.model)
    if per:
        for k, lst in enumerate(per):
            for sh in lst:
                P = _shape_points(sh)
                if P is not None:
                    shapes.append(P @ F[k][:3, :3].T + F[k][:3, 3])
    return line, shapes


def _hull(P2):
    from scipy.spatial import ConvexHull, QhullError

    try:
        h = ConvexHull(P2)
        return P2[h.vertices]
    except (QhullError, ValueError):
        return None


def _box_2d(corners, a, b):
    """Outline of a box seen along the third axis: the hull of its corners."""
    return _hull(corners[:, [a, b]])


def _cylinder_2d(c, a, b):
    import matplotlib.patches as mp

    if (a, b) == (0, 1):
        return mp.Circle((c["center"][0], c["center"][1]), c["radius"])
    lo = c["center"][a] - c["radius"]
    return mp.Rectangle((lo, c["z0"]), 2 * c["radius"], c["z1"] - c["z0"])


def draw_cell(ax, cell, a, b, *, decision=None, pose=None, arm=None, paths=True, labels=True, region=True,
              risk_marks=None, samples=None, planes=None):
    """Draw a cell projected on axes (a, b) of the cell frame (0 = x, 1 = y, 2 = z) in mm.

    Parameters
    ----------
    ax : matplotlib Axes
    cell : Cell or None
    a, b : int
        The horizontal and vertical plot axes.
    pose, arm : the arm (mounted) and the pose (n,) to draw, optional
    risk_marks : list of (label, xyz) to mark, optional
    samples : list of (name, (N, 3) xyz) path polylines to draw instead of sampling the cell's paths
    planes : list of (4, 3) corner arrays (m) of study planes (a load map's slice), drawn dashed
    """
    import matplotlib.patches as mp

    f = 1000.0
    handles = {}
    for s in solids(cell):
        st = {"equipment": EQUIP, "keep-out": KEEPOUT, "drawn only": DRAWN_ONLY}[s["role"]]
        if s["kind"] == "box":
            poly = _box_2d(s["corners"], a, b)
            if poly is None:
                continue
            patch = mp.Polygon(poly * f, closed=True, **st)
            ctr = s["corners"].mean(axis=0)
        else:
            patch = _cylinder_2d(s, a, b)
            patch.set(**st)
            from matplotlib.transforms import Affine2D

            patch.set_transform(Affine2D().scale(f) + ax.transData)
            ctr = s["center"]
        ax.add_patch(patch)
        handles.setdefault(s["role"], patch)
        if labels:
            ax.text(ctr[a] * f, ctr[b] * f, s["name"], fontsize=FONT - 2, ha="center", va="center", color="#333333",
                    clip_on=True)
    if cell is not None and region and cell.mount is not None and (a, b) == (0, 1):
        m = cell.mount
        rect = mp.Rectangle((m.xs[0] * f, m.ys[0] * f), (m.xs[-1] - m.xs[0]) * f, (m.ys[-1] - m.ys[0]) * f,
                            fc="none", ec=REGION_C, lw=0.9, ls=(0, (4, 2)))
        ax.add_patch(rect)
        handles["candidate region"] = rect
    if cell is not None and paths:
        from ..studies.cell import sample_path

        drawn = samples
        if drawn is None:
            drawn = []
            for p in cell.paths:
                try:
                    drawn.append((p.name, sample_path(cell, p, 0.01).poses[:, :3, 3]))
                except Exception:
                    continue
        for name, P in drawn:
            ln, = ax.plot(P[:, a] * f, P[:, b] * f, color=PATH_C, lw=1.2, solid_capstyle="round")
            handles.setdefault("paths", ln)
    for C in planes or ():
        C = np.asarray(C, float)
        ln, = ax.plot(np.append(C[:, a], C[0, a]) * f, np.append(C[:, b], C[0, b]) * f, color="#7b1fa2", lw=1.1,
                      ls=(0, (5, 2)), zorder=3)
        handles["study slice"] = ln
    if cell is not None and cell.points:
        P = np.array([p.position for p in cell.points]) * f
        ln, = ax.plot(P[:, a], P[:, b], "o", ms=3.2, mfc="white", mec=POINT_C, mew=1.0, ls="none")
        handles["work points"] = ln
    if arm is not None and pose is not None and np.all(np.isfinite(pose)):
        line, shapes = arm_outline(arm, pose)
        for S in shapes:
            poly = _hull(S[:, [a, b]])
            if poly is not None:
                ax.add_patch(mp.Polygon(poly * f, closed=True, fc="#8fa8d8", ec=ARM_C, lw=0.5, alpha=0.55))
        ln, = ax.plot(line[:, a] * f, line[:, b] * f, "-", color=ARM_C, lw=2.2 if not shapes else 1.0,
                      solid_capstyle="round", zorder=5)
        ax.plot(line[1:-1, a] * f, line[1:-1, b] * f, "o", ms=2.6, color="white", mec=ARM_C, mew=0.8, zorder=6)
        ax.plot(line[-1, a] * f, line[-1, b] * f, "D", ms=3, color=ARM_C, zorder=6)
        handles["arm (links as shapes)" if shapes else "arm (links as lines)"] = ln
    if arm is not None:
        M = arm.model.mount
        o = M[:3, 3] * f
        ln, = ax.plot([o[a]], [o[b]], "s", ms=6, mfc="#ffd54f", mec="k", mew=0.9, zorder=7)
        handles["base"] = ln
        if (a, b) == (0, 1):
            d = M[:3, 0] * 150
            ax.annotate("", xy=(o[a] + d[a], o[b] + d[b]), xytext=(o[a], o[b]),
                        arrowprops=dict(arrowstyle="-|>", color="k", lw=0.9, mutation_scale=7), zorder=7)
    for lab, xyz in (risk_marks or []):
        if xyz is None:
            continue
        ax.plot(xyz[a] * f, xyz[b] * f, "o", ms=9, mfc="white", mec=RISK_C, mew=1.2, zorder=8)
        ax.text(xyz[a] * f, xyz[b] * f, lab, fontsize=FONT - 1.5, ha="center", va="center", color=RISK_C,
                weight="bold", zorder=9)
    if (a, b) != (0, 1):
        ax.axhline(0, color="#6d4c41", lw=1.2, zorder=1)
    ax.set_aspect("equal", adjustable="datalim")
    ax.set_xlabel(f"cell {'xyz'[a]} (mm)")
    ax.set_ylabel(f"cell {'xyz'[b]} (mm)")
    ax.grid(True, color="#eeeeee", lw=0.5, zorder=0)
    ax.set_axisbelow(True)
    _style(ax)
    return handles


def side_axis(cell, decision=None) -> int:
    """The horizontal axis (0 = x, 1 = y) of the side view: the one the work spreads along most."""
    pts = []
    if cell is not None:
        pts += [p.position for p in cell.points]
    if len(pts) < 2:
        return 0
    P = np.asarray(pts, float)
    return int(np.argmax(np.ptp(P[:, :2], axis=0)))


def cell_views(decision, height=3.0, risk_marks=True, title=True, samples=None, planes=None):
    """The cell from above and from the side with the arm at the recommendation's pose."""
    fig = new_figure(height)
    a1, a2 = fig.subplots(1, 2, width_ratios=[1, 1])
    rec = decision.recommendation
    marks = []
    if risk_marks:
        marks = [(str(i + 1), r.position) for i, r in enumerate(decision.risks) if r.position is not None]
    h = draw_cell(a1, decision.cell, 0, 1, pose=rec.pose, arm=decision.arm, risk_marks=marks, samples=samples,
                  planes=planes)
    side = side_axis(decision.cell)
    draw_cell(a2, decision.cell, side, 2, pose=rec.pose, arm=decision.arm, risk_marks=marks, labels=True,
              samples=samples, planes=planes)
    if title:
        a1.set_title("from above", fontsize=FONT + 0.5)
        a2.set_title(f"from the side (looking along {'+y' if side == 0 else '+x'})", fontsize=FONT + 0.5)
    if side == 1:
        a2.invert_xaxis()  # looking along +x: +y to the left
    labels = list(h)
    if labels:
        fig.legend([h[k] for k in labels], labels, loc="outside lower center", ncol=min(len(labels), 5),
                   fontsize=FONT - 1, frameon=False)
    return fig


def top_views(decisions, labels, samples=None, height=2.7):
    """The cells of several options from above, side by side on the same scale."""
    k = len(decisions)
    cols = min(k, 3)
    rows = math.ceil(k / cols)
    fig = new_figure(height * rows)
    axs = fig.subplots(rows, cols, squeeze=False)
    handles = {}
    boxes = []
    for i in range(rows * cols):
        a = axs[i // cols][i % cols]
        if i >= k:
            a.axis("off")
            continue
        d = decisions[i]
        handles.update(draw_cell(a, d.cell, 0, 1, pose=d.recommendation.pose, arm=d.arm, labels=False,
                                 samples=None if samples is None else samples[i]))
        a.set_title(f"option {labels[i]}", fontsize=FONT + 0.5)
        a.autoscale_view()
        boxes.append((a.get_xlim(), a.get_ylim()))
    if boxes:  # one scale for all
        x0, x1 = min(b[0][0] for b in boxes), max(b[0][1] for b in boxes)
        y0, y1 = min(b[1][0] for b in boxes), max(b[1][1] for b in boxes)
        for i in range(k):
            a = axs[i // cols][i % cols]
            a.set_xlim(x0, x1)
            a.set_ylim(y0, y1)
            a.set_aspect("equal", adjustable="box")
    return fig


# ----------------------------------------------------------------------------------------------
# maps and charts


def _extent(ax_x, ax_y, scale_x=1.0, scale_y=1.0):
    def ext(v, s):
        v = np.asarray(v, float) * s
        if len(v) == 1:
            return v[0] - 0.5 * s, v[0] + 0.5 * s
        d = (v[-1] - v[0]) / (len(v) - 1)
        return v[0] - d / 2, v[-1] + d / 2

    return (*ext(ax_x.values, scale_x), *ext(ax_y.values, scale_y))


def _disp(axis):
    """(scale from SI to display, display unit) of an axis: m -> mm, rad -> deg."""
    if axis.unit == "m":
        return 1000.0, "mm"
    if axis.unit == "rad":
        return 180.0 / math.pi, "deg"
    return 1.0, axis.unit


def axis_label(axis) -> str:
    s, u = _disp(axis)
    return f"{axis.label} ({u})" if u else axis.label


def map_figure(Z, ax_x, ax_y, label, *, cell=None, draw_floor=False, mark=None, mark_label="", vmin=None,
               vmax=None, cmap="viridis", height=3.9, categories=None, title="", extra_marks=(), under=None):
    """A heat map with its colour bar beside it (never over it).

    Parameters
    ----------
    Z : (ny, nx) array
    ax_x, ax_y : Axis
    label : str
        Colour bar label (with unit).
    mark : (x, y) in SI, optional
        Marked with a star (the recommendation) and labelled ``mark_label`` in the legend.
    extra_marks : sequence of (x, y, label) or (x, y, label, marker) in SI
        Marked with open symbols (default a square; e.g. the grid cell the recommendation was
        refined from).
    under : (colour, label), optional
        Values below ``vmin`` drawn in this colour (a colour-bar extension), named in the legend.
    categories : list of str, optional
        Discrete values 0..k-1 (colour bar ticks named).
    """
    import matplotlib.colors as mcolors

    fig = new_figure(height)
    ax = fig.add_subplot(111)
    Z = np.asarray(Z, float)
    fin = np.isfinite(Z)
    sx, _ = _disp(ax_x)
    sy, _ = _disp(ax_y)
    extend = "neither"
    if categories is not None:
        cmap = mcolors.ListedColormap([f"C{k}" for k in range(len(categories))])
        vmin, vmax = -0.5, len(categories) - 0.5
    elif vmax is None and fin.sum() > 20:
        hi, top, lo = np.percentile(Z[fin], 99), Z[fin].max(), Z[fin].min()
        if top - lo > 3 * (hi - lo) > 0:
            vmax, extend = hi, "max"
    lo = vmin if vmin is not None else (float(np.nanmin(Z)) if fin.any() else 0.0)
    hi = vmax if vmax is not None else (float(np.nanmax(Z)) if fin.any() else 1.0)
    if hi <= lo:
        hi = lo + 1.0
    if under is not None:
        import matplotlib

        cmap = (matplotlib.colormaps[cmap] if isinstance(cmap, str) else cmap).with_extremes(under=under[0])
        extend = "min" if extend == "neither" else "both"
    im = ax.imshow(np.ma.masked_invalid(Z), origin="lower", extent=_extent(ax_x, ax_y, sx, sy), aspect="auto",
                   cmap=cmap, interpolation="nearest", vmin=lo, vmax=hi)
    cb = fig.colorbar(im, ax=ax, extend=extend, shrink=0.9, pad=0.02)
    cb.set_label(label + (" (top 1 % clipped)" if extend == "max" else ""), fontsize=FONT)
    cb.ax.tick_params(labelsize=FONT - 1)
    if categories is not None:
        cb.set_ticks(range(len(categories)))
        cb.set_ticklabels(categories)
    ax.set_xlabel(axis_label(ax_x))
    ax.set_ylabel(axis_label(ax_y))
    if title:
        ax.set_title(title)
    if draw_floor and cell is not None:
        draw_cell(ax, cell, 0, 1, paths=False, labels=False, region=False)
        ax.set_xlim(_extent(ax_x, ax_y, sx, sy)[:2])
        ax.set_ylim(_extent(ax_x, ax_y, sx, sy)[2:])
        ax.set_aspect("equal", adjustable="box")
    for em in extra_marks or ():
        ax.plot([em[0] * sx], [em[1] * sy], marker=em[3] if len(em) > 3 else "s", ms=8, mec="k", mfc="none",
                mew=1.3, ls="none", label=em[2], zorder=8)
    if mark is not None:
        ax.plot([mark[0] * sx], [mark[1] * sy], marker="*", ms=14, mec="k", mfc="white", ls="none",
                label=mark_label or "recommended", zorder=9)
    handles = [ln for ln in ax.lines if not ln.get_label().startswith("_") and ln.get_marker() in ("*", "s", "D")]
    if under is not None and (Z[fin] < lo).any():
        from matplotlib.patches import Patch

        handles.append(Patch(facecolor=under[0], edgecolor="0.5", label=under[1]))
    if handles:
        ax.legend(handles=handles, loc="upper right", fontsize=FONT - 1, framealpha=0.85)
    if (~fin).any() and fin.any():
        ax.set_facecolor("#f2f2f2")
    _style(ax)
    return fig


def small_multiples(Zs, ax_x, ax_y, row_labels, col_labels, label, vmin, vmax, mark_cell=None, under=None):
    """A grid of maps on one colour scale with one colour bar at the right (its own column).

    Zs : (rows, cols, ny, nx); mark_cell : (row, col, x, y) to star, optional; under : colour of
    values below ``vmin`` (a colour-bar extension), optional.
    """
    import matplotlib

    cmap = matplotlib.colormaps["viridis"]
    if under is not None:
        cmap = cmap.with_extremes(under=under)
    R, C = Zs.shape[:2]
    cols = min(C, 4)
    blocks = math.ceil(C / cols)
    fig = new_figure(1.55 * R * blocks + 0.6)
    axs = fig.subplots(R * blocks, cols, squeeze=False, sharex=True, sharey=True)
    sx, _ = _disp(ax_x)
    sy, _ = _disp(ax_y)
    ext = _extent(ax_x, ax_y, sx, sy)
    im = None
    for bi in range(blocks):
        for r in range(R):
            for cc in range(cols):
                c = bi * cols + cc
                a = axs[bi * R + r][cc]
                if c >= C:
                    a.axis("off")
                    continue
                im = a.imshow(np.ma.masked_invalid(Zs[r, c]), origin="lower", extent=ext, aspect="auto",
                              cmap=cmap, vmin=vmin, vmax=vmax, interpolation="nearest")
                a.set_title(f"{col_labels[c]}, {row_labels[r]}", fontsize=FONT - 1.5, pad=2)
                a.tick_params(labelsize=FONT - 2.5)
                if mark_cell is not None and mark_cell[0] == r and mark_cell[1] == c:
                    a.plot([mark_cell[2] * sx], [mark_cell[3] * sy], "*", ms=9, mec="k", mfc="white")
                if cc == 0:
                    a.set_ylabel(f"y (mm)", fontsize=FONT - 1.5)
                if bi * R + r == R * blocks - 1 or (bi == blocks - 1 and r == R - 1):
                    a.set_xlabel("x (mm)", fontsize=FONT - 1.5)
    cb = fig.colorbar(im, ax=axs, shrink=0.6, pad=0.01, location="right",
                      extend="min" if under is not None else "neither")
    cb.set_label(label, fontsize=FONT)
    cb.ax.tick_params(labelsize=FONT - 1)
    return fig


def sensitivity_figure(kinds, offsets, drops_pct):
    fig = new_figure(2.3)
    a1, a2 = fig.subplots(1, 2, sharey=True)
    kinds = np.asarray(kinds)
    for a, kind, unit in ((a1, "position", "mm"), (a2, "yaw", "deg")):
        m = kinds == kind
        vals = np.where(np.abs(drops_pct[m]) < 1e-4, 0.0, drops_pct[m])
        a.bar([f"{v:g} {unit}" for v in offsets[m]], vals, color="#e67e22", width=0.5)
        a.set_ylabel("quality lost (%)")
        a.set_ylim(0, max(1.0, 1.15 * float(np.nanmax(drops_pct)) if np.isfinite(drops_pct).any() else 1.0))
        a.set_xlabel("base moved by" if kind == "position" else "base turned by")
        a.axhline(0, color="k", lw=0.5)
        a.set_title("moved along ±x and ±y" if kind == "position" else "turned about z", fontsize=FONT)
        _style(a)
    return fig


def path_charts(s_mm, inv, ratio, qdot_deg, margin, flips, thr, joint_names, has_speed=True, title=""):
    """Inverse condition, joint-speed ratio, joint speeds and limit margin against distance."""
    fig = new_figure(4.05)
    axs = fig.subplots(4, 1, sharex=True)
    a1, a2, a3, a4 = axs
    a1.plot(s_mm, inv, lw=1, color="#1f77b4")
    a1.axhline(thr, color=RISK_C, lw=0.8, ls="--", label=f"near-singular threshold {thr:g}")
    bad = inv < thr
    if bad.any():
        a1.fill_between(s_mm, 0, 1, where=bad, color=RISK_C, alpha=0.15, transform=a1.get_xaxis_transform(),
                        label="near-singular span")
    a1.set_ylabel("inverse\ncondition")
    a1.set_ylim(bottom=0)
    a1.legend(fontsize=FONT - 2, loc="best")
    if has_speed:
        a2.plot(s_mm, ratio, lw=1, color="#e67e22")
        a2.axhline(1.0, color=RISK_C, lw=0.8, ls="--", label="joint speed limit")
        a2.set_yscale("log")
        a2.legend(fontsize=FONT - 2, loc="best")
    a2.set_ylabel("speed needed\n/ limit")
    for j in range(qdot_deg.shape[1]):
        a3.plot(s_mm, qdot_deg[:, j], lw=0.8, label=joint_names[j] if j < len(joint_names) else f"j{j + 1}")
    a3.set_ylabel("joint speed\n(deg/s)")
    a3.legend(fontsize=FONT - 2.5, ncol=min(qdot_deg.shape[1], 7), loc="best")
    a4.plot(s_mm, margin, lw=1, color="#2e8b57")
    if flips.any():
        a4.plot(s_mm[flips], margin[flips], "x", color=RISK_C, label="branch flip")
        a4.legend(fontsize=FONT - 2, loc="upper right")
    a4.set_ylabel("limit\nmargin")
    a4.set_ylim(0, 1)
    a4.set_xlabel("distance along the path (mm)")
    for a in axs:
        _style(a)
    return fig


def scatter_from_above(cell, xyz, values, label, vmin=0.0, vmax=None, arm=None):
    fig = new_figure(3.6)
    ax = fig.add_subplot(111)
    draw_cell(ax, cell, 0, 1, paths=False, region=False, arm=arm)
    ok = np.isfinite(xyz[:, 0]) & np.isfinite(values)
    sc = ax.scatter(xyz[ok, 0] * 1000, xyz[ok, 1] * 1000, c=values[ok], s=4, cmap="viridis", vmin=vmin,
                    vmax=vmax if vmax is not None else (float(np.nanmax(values)) if ok.any() else 1.0), zorder=4)
    cb = fig.colorbar(sc, ax=ax, shrink=0.9, pad=0.02)
    cb.set_label(label, fontsize=FONT)
    cb.ax.tick_params(labelsize=FONT - 1)
    return fig


def overlay_chart(series, xlabel, ylabel, thr=None, log=False):
    """Curves of several options on one chart: series = [(label, x, y)]."""
    fig = new_figure(2.6)
    ax = fig.add_subplot(111)
    for lab, x, y in series:
        ax.plot(x, y, lw=1.0, label=lab)
    if thr is not None:
        ax.axhline(thr, color=RISK_C, lw=0.8, ls="--", label=f"threshold {thr:g}")
    if log:
        ax.set_yscale("log")
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
    ax.legend(fontsize=FONT - 1.5)
    _style(ax)
    return fig


def side_by_side_maps(Zs, labels, ax_x, ax_y, label, vmin, vmax, cell=None, marks=None, categories=None):
    """Maps of several options on one colour scale, one colour bar (its own column)."""
    k = len(Zs)
    cols = min(k, 3)
    rows = math.ceil(k / cols)
    fig = new_figure(2.5 * rows + 0.5)
    axs = fig.subplots(rows, cols, squeeze=False)
    im = None
    for i in range(rows * cols):
        a = axs[i // cols][i % cols]
        if i >= k:
            a.axis("off")
            continue
        ax_xi, ax_yi = (ax_x[i], ax_y[i]) if isinstance(ax_x, (list, tuple)) else (ax_x, ax_y)
        sx, _ = _disp(ax_xi)
        sy, _ = _disp(ax_yi)
        ext = _extent(ax_xi, ax_yi, sx, sy)
        im = a.imshow(np.ma.masked_invalid(np.asarray(Zs[i], float)), origin="lower", extent=ext, aspect="auto",
                      cmap="viridis", vmin=vmin, vmax=vmax, interpolation="nearest")
        if cell is not None and cell[i] is not None:
            draw_cell(a, cell[i], 0, 1, paths=False, labels=False, region=False)
            a.set_xlim(ext[:2])
            a.set_ylim(ext[2:])
            a.set_aspect("equal", adjustable="box")
        if marks is not None and marks[i] is not None:
            a.plot([marks[i][0] * sx], [marks[i][1] * sy], "*", ms=10, mec="k", mfc="white")
        a.set_title(labels[i], fontsize=FONT)
        a.set_xlabel(axis_label(ax_xi))
        a.set_ylabel(axis_label(ax_yi))
        _style(a)
    cb = fig.colorbar(im, ax=axs, shrink=0.8, pad=0.01)
    cb.set_label(label, fontsize=FONT)
    cb.ax.tick_params(labelsize=FONT - 1)
    return fig


__all__ = ["WIDTH", "new_figure", "draw_cell", "cell_views", "map_figure", "small_multiples", "sensitivity_figure",
           "path_charts", "scatter_from_above", "overlay_chart", "side_by_side_maps", "solids", "arm_outline",
           "axis_label", "fmt_mm", "fmt_deg"]
