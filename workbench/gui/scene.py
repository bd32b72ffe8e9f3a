"""The scene: the arm at the current pose, its TCP frame and velocity ellipsoid, its collision
shapes (red where a body is within the clearance setting of an obstacle or another link), ghost
arms of brushed poses and the cell (work points, paths, equipment boxes, pillars, hatched keep-out
zones, the floor, mount candidates and the recommended mount).

Two views with one interface (``set_pose``, ``set_bodies``, ``set_ghosts``, ``set_cell``,
``set_candidates``, ``set_recommended``, ``set_view``): :class:`Scene3D` (pyqtgraph.opengl) and :class:`Scene2D` (top and side projections
on plain plots) where OpenGL is not available. :func:`make_scene` picks one.
"""
from __future__ import annotations

import os

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtGui, QtWidgets

from .cellview import (CellContent, body_frames, body_meshes, body_wires, box_edges, cylinder_edges,
                       stripe_segments)
from .posestate import ELLIPSOID_DRAW_SCALE, PoseInfo

__all__ = ["make_scene", "Scene2D", "gl_available", "VIEWS", "camera_distance"]

VIEWS = ("iso", "top", "front", "side")
AXIS_LEN = 0.12         # m, TCP frame axes as drawn
ARM_COLOUR = (60, 110, 200)
GHOST_COLOUR = (230, 120, 30)
NEAR_COLOUR = (210, 40, 40)
SHAPE_COLOUR = (70, 120, 210)       # collision shapes, drawn translucent
CLOSE_COLOUR = (220, 30, 30)        # a body within the clearance setting
OBSTACLE_COLOUR = (90, 90, 90)
KEEP_OUT_COLOUR = (235, 150, 0)     # keep-out zones: amber, hatched, never solid
REC_COLOUR = (200, 0, 160)          # the recommended mount


#: legend entries for what this module adds to the scene (the window's scene legend appends them)
LEGEND_EXTRA = [(SHAPE_COLOUR + (90,), "fill", "collision shapes"),
                (CLOSE_COLOUR, "fill", "within the clearance"),
                (KEEP_OUT_COLOUR, "line", "keep-out zone"),
                (REC_COLOUR, "dot", "recommended mount")]


class KeepOutItem(pg.PlotDataItem):
    """A keep-out zone's hatched outline on a 2D view (its own item type, so it is never taken
    for equipment)."""


class RecommendedItem(pg.ScatterPlotItem):
    """The recommended mount on a 2D view."""


def gl_available() -> tuple[bool, str]:
    """(True, "") when an OpenGL context can be made here, else (False, reason)."""
    if os.environ.get("WORKBENCH_NO_GL", "") not in ("", "0"):
        return False, "WORKBENCH_NO_GL is set"
    plat = (QtGui.QGuiApplication.platformName() or os.environ.get("QT_QPA_PLATFORM", "")).lower()
    if plat in ("offscreen", "minimal", "vnc"):
        return False, f"the '{plat}' display has no OpenGL"
    try:
        import pyqtgraph.opengl  # noqa: F401
        ctx = QtGui.QOpenGLContext()
        if not ctx.create():
            return False, "no OpenGL context could be created"
        surf = QtGui.QOffscreenSurface()
        surf.setFormat(ctx.format())
        surf.create()
        if not ctx.makeCurrent(surf):
            return False, "the OpenGL context could not be made current"
        ctx.doneCurrent()
        return True, ""
    except Exception as exc:  # any failure of the GL stack means: use the 2D view
        return False, f"OpenGL failed ({exc.__class__.__name__})"


def make_scene(parent=None):
    """(scene widget, note): the 3D scene where OpenGL works, else the 2D projections and a note."""
    ok, why = gl_available()
    if ok:
        try:
            return Scene3D(parent), ""
        except Exception as exc:  # pragma: no cover - depends on the display
            why = f"the 3D view failed ({exc.__class__.__name__})"
    return Scene2D(parent), f"3D view off ({why}): showing top and side projections instead"


def _ellipse_outline(centre, axes, plane, scale=ELLIPSOID_DRAW_SCALE, k=64):
    """Outline of the ellipsoid's shadow on a coordinate plane (k, 2)."""
    L = scale * np.asarray(axes)[list(plane)]           # (2, 3)
    M = L @ L.T
    w, V = np.linalg.eigh(M)
    w = np.sqrt(np.clip(w, 0, None))
    t = np.linspace(0, 2 * np.pi, k)
    circ = np.stack([np.cos(t), np.sin(t)])              # (2, k)
    return (np.asarray(centre)[list(plane)][:, None] + V @ (w[:, None] * circ)).T


class Scene2D(QtWidgets.QWidget):
    """Projections of the scene on two plots: top (X-Y) and front (X-Z) or side (Y-Z)."""

    is_3d = False

    def __init__(self, parent=None):
        super().__init__(parent)
        lay = QtWidgets.QHBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        self.view_name = "iso"
        self.planes = [(0, 1), (0, 2)]
        self.plots = []
        self._items = []
        for title in ("Top view (X-Y, m)", "Front view (X-Z, m)"):
            pw = pg.PlotWidget(title=title)
            pw.setAspectLocked(True)
            pw.showGrid(x=True, y=True, alpha=0.25)
            pw.setBackground("w")
            lay.addWidget(pw)
            self.plots.append(pw)
            it = {
                "boxes": pg.PlotDataItem(pen=pg.mkPen((120, 120, 120), width=1), connect="pairs"),
                "pillars": pg.PlotDataItem(pen=pg.mkPen(OBSTACLE_COLOUR, width=1), connect="pairs"),
                "keepout": KeepOutItem(pen=pg.mkPen(KEEP_OUT_COLOUR, width=1.5, style=QtCore.Qt.DashLine),
                                       connect="pairs"),
                "floor": pg.PlotDataItem(pen=pg.mkPen((150, 110, 60), width=2)),
                # what moves with the arm (redrawn on every slider step) is made of plain curves and
                # scatters: PlotDataItem costs several times as much per setData as PlotCurveItem
                "shapes": pg.PlotCurveItem(pen=pg.mkPen(SHAPE_COLOUR + (120,), width=1), connect="pairs"),
                "close": pg.PlotCurveItem(pen=pg.mkPen(CLOSE_COLOUR, width=2), connect="pairs"),
                "rec": RecommendedItem(size=20, symbol="star", brush=REC_COLOUR, pen=pg.mkPen("k", width=1)),
                "paths": pg.PlotDataItem(pen=pg.mkPen((40, 150, 60), width=2), connect="finite"),
                "points": pg.ScatterPlotItem(size=8, symbol="s", brush=(40, 150, 60), pen="k"),
                "cands": pg.ScatterPlotItem(size=7, symbol="o", pen=None),
                "ghosts": pg.PlotDataItem(pen=pg.mkPen(GHOST_COLOUR + (110,), width=1), connect="finite"),
                "ellipse": pg.PlotCurveItem(pen=pg.mkPen((150, 60, 170), width=2)),
                "arm": pg.PlotCurveItem(pen=pg.mkPen(ARM_COLOUR, width=4)),
                "joints": pg.ScatterPlotItem(size=8, symbol="o", brush=ARM_COLOUR, pen=pg.mkPen((200, 200, 200))),
                "tcp": [pg.PlotCurveItem(pen=pg.mkPen(c, width=2)) for c in ("r", "g", "b")],
            }
            for key in ("floor", "boxes", "pillars", "keepout", "paths", "points", "cands", "rec", "ghosts",
                        "shapes", "close", "ellipse", "arm", "joints"):
                pw.addItem(it[key])
            for t in it["tcp"]:
                pw.addItem(t)
            self._items.append(it)
        self._info = None
        self._ghosts = None
        self._cell = CellContent()
        self._cands = (np.zeros((0, 3)), None)
        self._bounds = (np.array([-1.0, -1.0, 0.0]), np.array([1.0, 1.0, 2.0]))
        self._wires = None              # (list of per-body segments, set of close bodies)
        self._rec = None
        self.clearance = None           # the last PoseClearance drawn
        for pw in self.plots:
            pw.disableAutoRange()

    def fit(self, lo, hi):
        """Show the box [lo, hi] (3,) (m) in every view. The ranges stay fixed while the arm moves,
        so the axes are not redrawn on every slider step."""
        self._bounds = (np.asarray(lo, float), np.asarray(hi, float))
        for pw, plane in zip(self.plots, self.planes):
            a, b = plane
            pw.setRange(xRange=(self._bounds[0][a], self._bounds[1][a]),
                        yRange=(self._bounds[0][b], self._bounds[1][b]), padding=0.05)
        self._draw_floor()

    def _draw_floor(self):
        """The floor (z = 0) as a line on the views that show z, when the cell has one."""
        lo, hi = self._bounds
        for plane, it in zip(self.planes, self._items):
            if self._cell.floor and plane[1] == 2:
                a = plane[0]
                w = hi[a] - lo[a]
                it["floor"].setData([lo[a] - w, hi[a] + w], [0.0, 0.0])
            else:
                it["floor"].setData([], [])

    # ---- content -------------------------------------------------------------------------
    def set_pose(self, info: PoseInfo):
        self._info = info
        for plane, it in zip(self.planes, self._items):
            p = info.points[:, list(plane)]
            it["arm"].setData(p[:, 0], p[:, 1])
            it["joints"].setData(p[:, 0], p[:, 1])
            colour = NEAR_COLOUR if info.near_singular else ARM_COLOUR
            if it.get("arm_colour") != colour:  # a new pen only when the colour changes
                it["arm"].setPen(pg.mkPen(colour, width=4))
                it["arm_colour"] = colour
            o = info.tcp[:3, 3]
            for a, line in enumerate(it["tcp"]):
                e = o + AXIS_LEN * info.tcp[:3, a]
                line.setData([o[plane[0]], e[plane[0]]], [o[plane[1]], e[plane[1]]])
            ell = _ellipse_outline(info.points[-1], info.ellipsoid_axes, plane)
            it["ellipse"].setData(ell[:, 0], ell[:, 1])

    def set_ghosts(self, pts):
        """Ghost arms: (k, n + 2, 3) link points, or None."""
        self._ghosts = pts
        for plane, it in zip(self.planes, self._items):
            if pts is None or len(pts) == 0:
                it["ghosts"].setData([], [])
                continue
            k, m, _ = pts.shape
            a = np.full((k, m + 1, 2), np.nan)
            a[:, :m] = pts[:, :, list(plane)]
            a = a.reshape(-1, 2)
            it["ghosts"].setData(a[:, 0], a[:, 1], connect="finite")

    def set_cell(self, cell: CellContent):
        self._cell = cell
        for plane, it in zip(self.planes, self._items):
            pl = list(plane)
            if len(cell.points):
                it["points"].setData(pos=cell.points[:, pl])
            else:
                it["points"].setData([])
            if cell.paths:
                segs = np.vstack([np.vstack([p[:, pl], [[np.nan, np.nan]]]) for p in cell.paths])
                it["paths"].setData(segs[:, 0], segs[:, 1], connect="finite")
            else:
                it["paths"].setData([], [])
            if cell.boxes:
                e = np.vstack([box_edges(b)[:, pl] for b in cell.boxes])
                it["boxes"].setData(e[:, 0], e[:, 1], connect="pairs")
            else:
                it["boxes"].setData([], [])
            if cell.cylinders:
                e = np.vstack([cylinder_edges(c.center, c.axis, c.radius, c.height)[:, pl] for c in cell.cylinders])
                it["pillars"].setData(e[:, 0], e[:, 1], connect="pairs")
            else:
                it["pillars"].setData([], [])
            if cell.keep_outs:
                e = np.vstack([stripe_segments(k)[:, pl] for k in cell.keep_outs])
                it["keepout"].setData(e[:, 0], e[:, 1], connect="pairs")
            else:
                it["keepout"].setData([], [])
        self._draw_floor()
        self.set_candidates(cell.candidates, cell.candidate_scores)

    def set_bodies(self, arm, q, clearance=None):
        """The arm's collision shapes at pose ``q``; bodies in ``clearance.close_bodies`` (a
        :class:`workbench.gui.cellview.PoseClearance`) red."""
        self.clearance = clearance
        if not arm.model.has_shapes and not arm.model.base_shapes:
            self._wires = None
        else:
            self._wires = (body_wires(arm, q), set(clearance.close_bodies) if clearance is not None else set())
        self._draw_bodies()

    def _draw_bodies(self):
        for plane, it in zip(self.planes, self._items):
            if self._wires is None:
                it["shapes"].setData([], [])
                it["close"].setData([], [])
                continue
            wires, close = self._wires
            pl = list(plane)
            for key, pick in (("shapes", lambda b: b not in close), ("close", lambda b: b in close)):
                segs = [w[:, pl] for b, w in enumerate(wires) if len(w) and pick(b)]
                if segs:
                    e = np.vstack(segs)
                    it[key].setData(e[:, 0], e[:, 1], connect="pairs")
                else:
                    it[key].setData([], [])

    def close_xy(self) -> np.ndarray:
        """(m, 2) top-view points of the shapes drawn red (for tests)."""
        x, y = self._items[0]["close"].getData()
        return np.zeros((0, 2)) if x is None else np.column_stack([x, y])

    def set_recommended(self, xyz=None, label=""):
        """Mark the recommended mount (3,) (m, cell frame), or clear the mark (None)."""
        self._rec = None if xyz is None else np.asarray(xyz, float).reshape(3)
        for plane, it in zip(self.planes, self._items):
            if self._rec is None:
                it["rec"].setData([])
            else:
                it["rec"].setData(pos=self._rec[list(plane)][None])
                it["rec"].setToolTip(label or "recommended mount")

    def recommended(self):
        return None if self._rec is None else self._rec.copy()

    def set_candidates(self, pts, scores=None):
        """Mount candidates (c, 3) coloured by ``scores`` (c,) in [0, 1] (NaN grey)."""
        pts = np.zeros((0, 3)) if pts is None else np.asarray(pts, float)
        self._cands = (pts, scores)
        brushes = _score_brushes(scores, len(pts))
        for plane, it in zip(self.planes, self._items):
            if len(pts):
                it["cands"].setData(pos=pts[:, list(plane)], brush=brushes)
            else:
                it["cands"].setData([])

    def set_view(self, name):
        """Preset views: top and iso show X-Y + X-Z, front X-Z, side Y-Z in the second plot."""
        if name not in VIEWS:
            raise ValueError(f"view: expected one of {VIEWS}, got {name!r}")
        self.view_name = name
        second = {"side": (1, 2)}.get(name, (0, 2))
        self.planes = [(0, 1), second]
        names = "XYZ"
        self.plots[1].setTitle(f"{'Side' if name == 'side' else 'Front'} view "
                               f"({names[second[0]]}-{names[second[1]]}, m)")
        if self._info is not None:
            self.set_pose(self._info)
        self.set_ghosts(self._ghosts)
        self.set_cell(self._cell)
        self._draw_bodies()
        self.set_recommended(self._rec)
        self.fit(*self._bounds)

    def arm_xy(self):
        """(n + 2, 2) arm points as drawn on the top view (for tests)."""
        x, y = self._items[0]["arm"].getData()
        return np.column_stack([x, y])

    def ghost_count(self) -> int:
        return 0 if self._ghosts is None else len(self._ghosts)


def _score_brushes(scores, n):
    if n == 0:
        return []
    cmap = pg.colormap.get("viridis")
    if scores is None:
        return [pg.mkBrush(90, 90, 90, 160)] * n
    s = np.asarray(scores, float)
    cols = cmap.map(np.nan_to_num(np.clip(s, 0, 1)), mode="byte")
    return [pg.mkBrush(*c[:3], 220) if np.isfinite(v) else pg.mkBrush(160, 160, 160, 120)
            for c, v in zip(cols, s)]


class Scene3D(QtWidgets.QWidget):
    """The 3D scene (pyqtgraph.opengl): orbit with the left mouse button, pan with the middle,
    zoom with the wheel."""

    is_3d = True

    def __init__(self, parent=None):
        super().__init__(parent)
        import pyqtgraph.opengl as gl

        self._gl = gl
        lay = QtWidgets.QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        self.view = gl.GLViewWidget()
        self.view.setBackgroundColor((245, 245, 248))
        lay.addWidget(self.view)
        grid = gl.GLGridItem(color=(0, 0, 0, 60))
        grid.setSize(4, 4)
        grid.setSpacing(0.25, 0.25)
        self.view.addItem(grid)
        world = gl.GLAxisItem(size=QtGui.QVector3D(0.3, 0.3, 0.3))
        self.view.addItem(world)
        tr = "translucent"   # the pyqtgraph default for points and lines adds colours: white on white
        self.arm = gl.GLLinePlotItem(width=6, color=_c(ARM_COLOUR), antialias=True, mode="line_strip",
                                     glOptions=tr)
        self.joints = gl.GLScatterPlotItem(size=12, color=_c((30, 30, 30)), glOptions=tr)
        self.tcp = gl.GLLinePlotItem(width=3, mode="lines", glOptions=tr)
        self.ghosts = gl.GLLinePlotItem(width=2, color=_c(GHOST_COLOUR, 0.7), mode="lines", glOptions=tr)
        sv, sf = _sphere()
        self._sphere = sv
        self.ellipsoid = gl.GLMeshItem(vertexes=sv, faces=sf, color=(0.6, 0.25, 0.7, 0.35),
                                       smooth=True, glOptions="translucent", drawEdges=False)
        self.points = gl.GLScatterPlotItem(size=10, color=_c((40, 150, 60)), glOptions=tr)
        self.paths = gl.GLLinePlotItem(width=3, color=_c((40, 150, 60)), mode="lines", glOptions=tr)
        self.boxes = gl.GLLinePlotItem(width=2, color=_c((80, 80, 80)), mode="lines", glOptions=tr)
        self.cands = gl.GLScatterPlotItem(size=8, glOptions=tr)
        self.keepout = _keep_out_class(gl)(width=2, color=_c(KEEP_OUT_COLOUR), mode="lines", glOptions=tr)
        self.rec = gl.GLScatterPlotItem(size=22, color=_c(REC_COLOUR), glOptions=tr)
        self.rec_line = gl.GLLinePlotItem(width=4, color=_c(REC_COLOUR), mode="lines", glOptions=tr)
        for it in (self.boxes, self.keepout, self.paths, self.points, self.cands, self.rec, self.rec_line,
                   self.ghosts, self.arm, self.joints, self.tcp, self.ellipsoid):
            self.view.addItem(it)
        self._cyl = []
        self._ghosts = None
        self._obstacle_meshes = []      # translucent boxes and pillars of the cell
        self._floor = None
        self._shape_items = []          # (body, GLMeshItem) of the arm's collision shapes
        self._shape_model = None
        self._rec = None
        self.clearance = None
        self.set_view("iso")

    def set_pose(self, info: PoseInfo):
        gl = self._gl
        p = info.points
        self.arm.setData(pos=p, color=_c(NEAR_COLOUR if info.near_singular else ARM_COLOUR))
        self.joints.setData(pos=p[1:-1])
        o = info.tcp[:3, 3]
        segs, cols = [], []
        for a, c in enumerate(((1, 0, 0, 1), (0, 0.6, 0, 1), (0, 0, 1, 1))):
            segs += [o, o + AXIS_LEN * info.tcp[:3, a]]
            cols += [c, c]
        self.tcp.setData(pos=np.asarray(segs), color=np.asarray(cols))
        # the unit sphere mesh stays; the ellipsoid is its affine image (no mesh rebuild per pose)
        M = np.eye(4)
        M[:3, :3] = ELLIPSOID_DRAW_SCALE * np.asarray(info.ellipsoid_axes)
        M[:3, 3] = p[-1]
        self.ellipsoid.setTransform(QtGui.QMatrix4x4(*M.reshape(-1)))
        n = len(info.joint_axes)
        while len(self._cyl) < n:
            md = gl.MeshData.cylinder(rows=1, cols=16, radius=[0.045, 0.045], length=0.12)
            it = gl.GLMeshItem(meshdata=md, color=(0.35, 0.45, 0.7, 1), smooth=True, shader="shaded")
            self.view.addItem(it)
            self._cyl.append(it)
        for k in range(n):
            z = info.joint_axes[k] / max(np.linalg.norm(info.joint_axes[k]), 1e-12)
            x = np.cross(z, [1, 0, 0] if abs(z[0]) < 0.9 else [0, 1, 0])
            x /= np.linalg.norm(x)
            y = np.cross(z, x)
            M = np.eye(4)
            M[:3, :3] = np.column_stack([x, y, z])
            M[:3, 3] = p[k + 1] - 0.06 * z
            self._cyl[k].setTransform(QtGui.QMatrix4x4(*M.reshape(-1)))

    @property
    def _faces(self):
        return _sphere()[1]

    def set_ghosts(self, pts):
        self._ghosts = pts
        if pts is None or len(pts) == 0:
            self.ghosts.setData(pos=np.zeros((0, 3)))
            return
        segs = np.stack([pts[:, :-1], pts[:, 1:]], axis=2).reshape(-1, 3)
        self.ghosts.setData(pos=segs)

    def set_cell(self, cell: CellContent):
        self.points.setData(pos=cell.points if len(cell.points) else np.zeros((0, 3)))
        if cell.paths:
            segs = np.vstack([np.stack([p[:-1], p[1:]], 1).reshape(-1, 3) for p in cell.paths if len(p) > 1])
            self.paths.setData(pos=segs)
        else:
            self.paths.setData(pos=np.zeros((0, 3)))
        edges = [box_edges(b) for b in cell.boxes] + [cylinder_edges(c.center, c.axis, c.radius, c.height)
                                                      for c in cell.cylinders]
        self.boxes.setData(pos=np.vstack(edges) if edges else np.zeros((0, 3)))
        self.keepout.setData(pos=np.vstack([stripe_segments(k) for k in cell.keep_outs]) if cell.keep_outs
                             else np.zeros((0, 3)))
        self._draw_obstacles(cell)
        self.set_candidates(cell.candidates, cell.candidate_scores)

    def _draw_obstacles(self, cell):
        """Translucent solid boxes and pillars (keep-out zones stay hatched only) and the floor."""
        from .cellview import _BOX_FACES, _cylinder_mesh

        gl = self._gl
        for it in self._obstacle_meshes:
            self.view.removeItem(it)
        self._obstacle_meshes = []
        solids = [(b, _BOX_FACES, collide) for b, collide in
                  zip(cell.boxes, cell.box_collide or [True] * len(cell.boxes))]
        solids += [(*_cylinder_mesh(c.center, c.axis, c.radius, c.height), c.collide) for c in cell.cylinders]
        for v, f, collide in solids:
            it = gl.GLMeshItem(vertexes=np.asarray(v, float), faces=f, smooth=False, drawEdges=False,
                               color=(0.45, 0.45, 0.45, 0.28 if collide else 0.12), glOptions="translucent")
            self.view.addItem(it)
            self._obstacle_meshes.append(it)
        if self._floor is not None:
            self.view.removeItem(self._floor)
            self._floor = None
        if cell.floor:
            s = 2.0
            v = np.array([[-s, -s, 0], [s, -s, 0], [s, s, 0], [-s, s, 0]], float)
            self._floor = gl.GLMeshItem(vertexes=v, faces=np.array([[0, 1, 2], [0, 2, 3]]), smooth=False,
                                        color=(0.75, 0.65, 0.5, 0.25), glOptions="translucent")
            self.view.addItem(self._floor)

    def set_bodies(self, arm, q, clearance=None):
        """The arm's collision shapes at pose ``q`` as translucent solids; bodies within the
        clearance setting (``clearance.close_bodies``) red."""
        gl = self._gl
        self.clearance = clearance
        model = arm.model
        if self._shape_model is not model:          # new arm: build the meshes once, in body frames
            for _b, it in self._shape_items:
                self.view.removeItem(it)
            self._shape_items = []
            for b, v, f in body_meshes(model):
                it = gl.GLMeshItem(vertexes=v, faces=f, smooth=True, drawEdges=False, glOptions="translucent",
                                   color=_c(SHAPE_COLOUR, 0.3))
                self.view.addItem(it)
                self._shape_items.append((b, it))
            self._shape_model = model
        if not self._shape_items:
            return
        F = body_frames(arm, q)
        close = set(clearance.close_bodies) if clearance is not None else set()
        for b, it in self._shape_items:
            it.setTransform(QtGui.QMatrix4x4(*np.asarray(F[b], float).reshape(-1)))
            it.setColor(_c(CLOSE_COLOUR, 0.55) if b in close else _c(SHAPE_COLOUR, 0.3))

    def set_recommended(self, xyz=None, label=""):
        self._rec = None if xyz is None else np.asarray(xyz, float).reshape(3)
        if self._rec is None:
            self.rec.setData(pos=np.zeros((0, 3)))
            self.rec_line.setData(pos=np.zeros((0, 3)))
            return
        self.rec.setData(pos=self._rec[None])
        self.rec_line.setData(pos=np.array([self._rec, self._rec + [0, 0, 0.5]]))

    def recommended(self):
        return None if self._rec is None else self._rec.copy()

    def set_candidates(self, pts, scores=None):
        pts = np.zeros((0, 3)) if pts is None else np.asarray(pts, float)
        if not len(pts):
            self.cands.setData(pos=np.zeros((0, 3)))
            return
        cmap = pg.colormap.get("viridis")
        if scores is None:
            col = np.tile([0.4, 0.4, 0.4, 0.7], (len(pts), 1))
        else:
            col = cmap.map(np.nan_to_num(np.clip(np.asarray(scores, float), 0, 1)), mode="float")
        self.cands.setData(pos=pts, color=np.asarray(col, float))

    def fit(self, lo, hi):
        """Aim the camera at the box [lo, hi] (3,) (m): the whole box in view from any side."""
        lo, hi = np.asarray(lo, float), np.asarray(hi, float)
        self._bounds = (lo, hi)
        c = (lo + hi) / 2
        self._centre = QtGui.QVector3D(float(c[0]), float(c[1]), float(c[2]))
        self._distance = camera_distance(lo, hi, self.view.opts.get("fov", 60),   # the view fills this widget
                                         max(self.width(), 1), max(self.height(), 1))
        self.set_view(getattr(self, "view_name", "iso"))

    def resizeEvent(self, ev):
        super().resizeEvent(ev)
        if getattr(self, "_bounds", None) is not None:   # a narrower window needs the camera further off
            self.fit(*self._bounds)

    def set_view(self, name):
        if name not in VIEWS:
            raise ValueError(f"view: expected one of {VIEWS}, got {name!r}")
        self.view_name = name
        elev, azim = {"iso": (25, 45), "top": (90, -90), "front": (0, -90), "side": (0, 0)}[name]
        self.view.setCameraPosition(pos=getattr(self, "_centre", QtGui.QVector3D(0.4, 0, 0.7)),
                                    distance=getattr(self, "_distance", 4.4),
                                    elevation=elev, azimuth=azim)

    def ghost_count(self) -> int:
        return 0 if self._ghosts is None else len(self._ghosts)


_KEEP_OUT_3D = None


def _keep_out_class(gl):
    """The 3D keep-out item type (made on first use: pyqtgraph.opengl loads only with OpenGL)."""
    global _KEEP_OUT_3D
    if _KEEP_OUT_3D is None:
        class KeepOut3D(gl.GLLinePlotItem):
            """A keep-out zone's hatched outline in the 3D view."""

        _KEEP_OUT_3D = KeepOut3D
    return _KEEP_OUT_3D


def camera_distance(lo, hi, fov_deg, width, height, margin=1.08) -> float:
    """How far a perspective camera aimed at the centre of the box [lo, hi] must stand so the whole
    box is in view from any direction: the box's bounding sphere (radius r) must fit in the
    narrower of the two view angles, d = r / sin(half angle) (common practice).

    ``fov_deg`` is the horizontal field of view (as pyqtgraph's GLViewWidget uses it); the
    vertical half angle is atan(tan(fov / 2) * height / width).
    """
    r = 0.5 * float(np.linalg.norm(np.asarray(hi, float) - np.asarray(lo, float)))
    th = np.tan(np.radians(fov_deg) / 2)
    half = np.arctan(th * min(1.0, height / width))
    return float(margin * max(r, 1e-3) / np.sin(half))


def _c(rgb, a=1.0):
    return (rgb[0] / 255, rgb[1] / 255, rgb[2] / 255, a)


_SPHERE = None


def _sphere():
    global _SPHERE
    if _SPHERE is None:
        from .posestate import sphere_mesh

        _SPHERE = sphere_mesh()
    return _SPHERE
