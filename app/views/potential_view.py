"""The potential: a map (2D), slices and an isosurface (3D) or a curve (1D), plus a line cut.

Repaints on the session's ``potential_changed`` (live while parameters move) and
``project_changed``; the levels of the last solve are drawn on the line cut.  Gate outlines on the
2D map can be dragged: the new outline goes back to the session as an edited project.
"""
from __future__ import annotations

import dataclasses
import math
import time

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtWidgets

from core.errors import WellscapeError
from core.project import GatesTerm

from . import colormaps
from .common import (
    HintStack,
    axis_title,
    clean_zero,
    colorbar,
    contour_lines,
    fmt,
    fmt_energy,
    image_rect,
    make_plot,
    pretty_unit,
    sample_line,
    set_colorbar_title,
    set_titles,
    show_message,
    stale_message,
    status_label,
    text_item,
    view_units,
)
from .isosurface import IsosurfaceWidget, Surface
from .slices import SliceTriptych

__all__ = ["PotentialView"]

_HINT = "No potential to show yet. Open or create a project: its potential appears here."
_CONTOUR_PEN = pg.mkPen((255, 255, 255, 170), width=1)
_GATE_PEN = pg.mkPen(colormaps.ACCENT, width=2)
_GATE_FIXED_PEN = pg.mkPen(colormaps.ACCENT, width=2, style=QtCore.Qt.PenStyle.DashLine)
_CUT_PEN = pg.mkPen("#000000", width=2)
_LEVEL_PEN = pg.mkPen("#0072B2", width=1.5, style=QtCore.Qt.PenStyle.DashLine)
_STALE_LEVEL_PEN = pg.mkPen("#8d99ae", width=1.5, style=QtCore.Qt.PenStyle.DotLine)
_CUT_LABEL_PX = 16.0       # height of a level label on the cut, pixels


def _is_number(v) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


class PotentialView(QtWidgets.QWidget):
    """V on the project's grid, with contours, gate outlines, slices, isosurface and a line cut."""

    def __init__(self, session, parent=None):
        super().__init__(parent)
        self.session = session
        self.ndim = 0
        self._grid = None
        self._potential: np.ndarray | None = None
        self.gate_rois: list = []          # (roi, term index, gate index)
        self.gate_labels: list = []
        self._gate_signature: list = []
        self.level_lines: list = []       # (line, plot) of the levels drawn now
        self._level_pool: dict = {}        # id(plot) -> (plot, [InfiniteLine]) made so far
        self._last_paint = 0.0
        self._repaint_timer = QtCore.QTimer(self)
        self._repaint_timer.setSingleShot(True)
        self._repaint_timer.timeout.connect(self._on_repaint_timer)
        self.cut_roi = None
        self._cut_host = None
        self._dragging = False

        # controls
        self.contour_count = QtWidgets.QSpinBox()
        self.contour_count.setRange(0, 30)
        self.contour_count.setValue(8)
        self.contour_count.setToolTip("Number of equally spaced contour lines of V")
        self.contour_count.valueChanged.connect(self._update_contours)
        self.show_gates = QtWidgets.QCheckBox("gate outlines")
        self.show_gates.setChecked(True)
        self.show_gates.setToolTip("Draw the surface gates; drag an outline or its corners to move them")
        self.show_gates.toggled.connect(self._update_gates)
        self.iso_energy = QtWidgets.QDoubleSpinBox()
        self.iso_energy.setDecimals(4)
        self.iso_energy.setRange(-1e12, 1e12)
        self.iso_energy.setKeyboardTracking(False)
        self.iso_energy.setToolTip("The isosurface encloses the region where V is below this energy")
        self.iso_energy.valueChanged.connect(self._update_isosurface)
        self.iso_label = QtWidgets.QLabel("isosurface at V =")
        self.levels_on_cut = QtWidgets.QCheckBox("levels on the cut")
        self.levels_on_cut.setChecked(True)
        self.levels_on_cut.toggled.connect(self._update_levels)
        bar = QtWidgets.QHBoxLayout()
        self.title = QtWidgets.QLabel("")
        self.title.setStyleSheet("font-weight: bold;")
        bar.addWidget(self.title, 1)
        self._contour_label = QtWidgets.QLabel("contour lines")
        for w in (self._contour_label, self.contour_count, self.show_gates, self.iso_label, self.iso_energy,
                  self.levels_on_cut):
            bar.addWidget(w)

        # 1D page
        self.plot1d = make_plot()
        self.curve1d = self.plot1d.plot(pen=pg.mkPen("#222222", width=2))
        # 2D page
        self.plot2d = make_plot(aspect_locked=True)
        self.image = pg.ImageItem(axisOrder="col-major")
        self.plot2d.addItem(self.image)
        self.colorbar = colorbar(self.image, self.plot2d, colormaps.colormap(colormaps.POTENTIAL))
        self.contours = pg.PlotDataItem(pen=_CONTOUR_PEN, connect="finite")
        self.contours.setZValue(5)
        self.plot2d.addItem(self.contours)
        # 3D page
        self.slices = SliceTriptych()
        self.slices.planes_changed.connect(lambda *_: self._update_cut())
        self.isosurface = IsosurfaceWidget()
        self.slices.extra.addWidget(self.isosurface)
        self.pages = QtWidgets.QStackedWidget()
        for w in (self.plot1d, self.plot2d, self.slices):
            self.pages.addWidget(w)

        # line cut
        self.cut_plot = make_plot()
        self.cut_curve = self.cut_plot.plot(pen=pg.mkPen("#222222", width=2))
        self.cut_caption = QtWidgets.QLabel("Drag the black line (or its ends) on the map to move the cut.")
        self.cut_caption.setWordWrap(True)
        cut_box = QtWidgets.QWidget()
        cl = QtWidgets.QVBoxLayout(cut_box)
        cl.setContentsMargins(0, 0, 0, 0)
        cl.addWidget(self.cut_plot, 1)
        cl.addWidget(self.cut_caption)
        self.cut_panel = cut_box

        self.splitter = QtWidgets.QSplitter(QtCore.Qt.Orientation.Horizontal)
        self.splitter.addWidget(self.pages)
        self.splitter.addWidget(self.cut_panel)
        self.splitter.setStretchFactor(0, 3)
        self.splitter.setStretchFactor(1, 2)
        inner = QtWidgets.QWidget()
        il = QtWidgets.QVBoxLayout(inner)
        il.setContentsMargins(0, 0, 0, 0)
        il.addLayout(bar)
        il.addWidget(self.splitter, 1)
        self.status = status_label()
        il.addWidget(self.status)
        self.stack = HintStack(inner, _HINT)
        lay = QtWidgets.QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        lay.addWidget(self.stack)

        for name, slot in (("project_changed", self._on_project_changed),
                           ("potential_changed", self._on_potential_changed),
                           ("solved", self._on_solved),
                           ("degeneracy_changed", self._update_levels),
                           ("stale_changed", self._update_levels)):
            if hasattr(session, name):
                getattr(session, name).connect(slot)
        self._on_project_changed(initial=True)

    # -- session signals ------------------------------------------------------------------------
    def _on_project_changed(self, initial: bool = False) -> None:
        project = getattr(self.session, "project", None)
        if project is None:
            self.stack.show_hint(_HINT)
            return
        if self._grid is None or self._grid != project.grid:
            self._grid = None              # force a full rebuild for the new grid
            self._gate_signature = []
        if not initial and hasattr(self.session, "potential_changed"):
            # the session follows with potential_changed whenever V (or the grid) changed: drawing
            # here too would paint every edit twice; only what depends on the project alone is set
            if self._potential is not None:
                self.title.setText(f"Potential V  ·  {project.title}")
            return
        self._on_potential_changed()

    #: during a slider drag the map is repainted at most this often (a 256^2 repaint takes ~40 ms;
    #: mouse moves arrive every ~16 ms and would otherwise leave no time for the solved results)
    DRAG_REPAINT_S = 0.1

    def _on_potential_changed(self) -> None:
        if getattr(self.session, "live_dragging", False):
            wait = self.DRAG_REPAINT_S - (time.perf_counter() - self._last_paint)
            if wait > 0:
                if not self._repaint_timer.isActive():
                    self._repaint_timer.start(max(1, int(1000 * wait)))
                return
        self._repaint_timer.stop()
        self._last_paint = time.perf_counter()
        self._paint_potential()

    def _paint_potential(self) -> None:
        project = self.session.project
        v = getattr(self.session, "potential", None)
        error = getattr(self.session, "potential_error", None)
        if error:
            kept = " The last valid potential stays on screen." if self._potential is not None else ""
            show_message(self.status, f"The potential cannot be evaluated: {error}.{kept}", error=True)
        else:
            show_message(self.status, "")
        if v is None:
            if self._potential is None:
                self.stack.show_hint(_HINT if not error else f"The potential cannot be evaluated: {error}")
            return
        v = np.asarray(v, dtype=float)
        grid = project.grid
        if v.shape != grid.shape:
            return                         # a stale array from before a grid edit; the next signal brings V
        self.stack.show_content()
        rebuild = self._grid is None or self._grid != grid
        self._grid = grid
        self._potential = v
        self.ndim = grid.ndim
        u = view_units(self.session)
        self.title.setText(f"Potential V  ·  {project.title}")
        if rebuild:
            self._build_for_grid(grid, u)
        if grid.ndim == 1:
            self.curve1d.setData(grid.axes[0], v)
        elif grid.ndim == 2:
            lo, hi = self._levels_of(v)
            self.image.setImage(v, levels=(lo, hi), lut=colormaps.lookup_table(colormaps.POTENTIAL),
                                autoLevels=False)
            self.image.setRect(image_rect(grid))
            self.colorbar.setLevels((lo, hi))
            self._update_contours()
            self._update_gates()
        else:
            lo, hi = self._levels_of(v)
            self.slices.set_volume(grid, v, cmap=colormaps.POTENTIAL, levels=(lo, hi),
                                   length_unit=u.length_unit, colour_title=("V", u.energy_unit),
                                   keep_planes=not rebuild, centre_on=self._ground_density(grid))
            if rebuild:
                self._default_iso_energy()
            self._update_isosurface()
        if rebuild:
            self._place_cut(grid)
        self._update_cut()
        self._update_levels()

    def _on_repaint_timer(self) -> None:
        self._last_paint = time.perf_counter()
        self._paint_potential()

    def _ground_density(self, grid) -> np.ndarray | None:
        """|psi_0|^2 of the last result on this grid (slices then pass through the particle), else None."""
        result = getattr(self.session, "result", None)
        if result is None or result.grid != grid:
            return None
        psi = result.states[0]
        return np.abs(psi) ** 2

    def _on_solved(self, _result=None) -> None:
        if self.ndim == 3 and self._potential is not None:
            self._default_iso_energy()
            self._update_isosurface()
        self._update_levels()

    # -- layout per dimension -------------------------------------------------------------------
    def _build_for_grid(self, grid, u) -> None:
        ndim = grid.ndim
        self.pages.setCurrentIndex(ndim - 1)
        self.cut_panel.setVisible(ndim >= 2)
        self.iso_label.setVisible(ndim == 3)
        self.iso_energy.setVisible(ndim == 3)
        self.contour_count.setVisible(ndim == 2)
        self._contour_label.setVisible(ndim == 2)
        self.show_gates.setVisible(ndim == 2 and any(isinstance(t, GatesTerm)
                                                    for t in self.session.project.potential))
        self.iso_energy.setSuffix(f" {pretty_unit(u.energy_unit)}")
        if ndim == 1:
            set_titles(self.plot1d, axis_title("x", u.length_unit), axis_title("energy", u.energy_unit))
            self.levels_on_cut.setText("levels")
        else:
            self.levels_on_cut.setText("levels on the cut")
            set_titles(self.cut_plot, axis_title("distance along the cut", u.length_unit),
                       axis_title("energy", u.energy_unit))
        if ndim == 2:
            set_titles(self.plot2d, axis_title("x", u.length_unit), axis_title("y", u.length_unit))
            set_colorbar_title(self.colorbar, "V", u.energy_unit)
            self.plot2d.getPlotItem().setRange(rect=image_rect(grid), padding=0.02)

    def _place_cut(self, grid) -> None:
        """A line cut along x on the 2D map or the xy slice: through the ground state's centre after a
        solve, else through the bottom of the potential (3D: through the current y plane)."""
        host = {2: self.plot2d, 3: self.slices.plots[0] if grid.ndim == 3 else None}.get(grid.ndim)
        if self.cut_roi is not None and self._cut_host is not None:
            self._cut_host.removeItem(self.cut_roi)
            self.cut_roi = None
        self._cut_host = host
        if host is None:
            return
        v = self._potential
        x, y = grid.axes[0], grid.axes[1]
        rho = self._ground_density(grid)
        if grid.ndim == 3:
            yc = float(y[self.slices.index[1]])
        elif rho is not None:
            yc = float(rho.sum(axis=0) @ y / rho.sum())
        else:
            yc = float(y[np.unravel_index(int(np.nanargmin(v)), v.shape)[1]])
        start, end = (float(x[0]), yc), (float(x[-1]), yc)
        self.cut_roi = pg.LineSegmentROI([start, end], pen=_CUT_PEN, movable=True)
        self.cut_roi.setZValue(20)
        self.cut_roi.sigRegionChanged.connect(self._update_cut)
        host.addItem(self.cut_roi)

    # -- 2D pieces ------------------------------------------------------------------------------
    @staticmethod
    def _levels_of(v: np.ndarray) -> tuple:
        lo, hi = float(np.nanmin(v)), float(np.nanmax(v))
        if not hi > lo:
            hi = lo + 1.0
        return lo, hi

    def contour_values(self) -> list:
        """Energies of the drawn contour lines (equally spaced strictly between min and max of V)."""
        n = self.contour_count.value()
        if self._potential is None or n == 0:
            return []
        lo, hi = self._levels_of(self._potential)
        return [float(c) for c in np.linspace(lo, hi, n + 2)[1:-1]]

    def _update_contours(self) -> None:
        if self.ndim != 2 or self._potential is None:
            return
        values = self.contour_values()
        # contours are a guide for the eye: on fine grids trace them on every k-th point (<= 100 per
        # axis), which keeps live updates fast; the map itself is always shown at full resolution
        k = max(1, int(np.ceil(max(self._potential.shape) / 100)))
        axes = tuple(a[::k] for a in self._grid.axes[:2])
        x, y = contour_lines(self._potential[::k, ::k], values, axes)
        self.contours.setData(x, y, connect="finite")
        tip = ", ".join(fmt(c, 4) for c in values)
        self.image.setToolTip(f"contour lines at V = {tip} {pretty_unit(view_units(self.session).energy_unit)}"
                              if values else "")

    def gate_outlines(self) -> list:
        """``[(term index, gate index, label, vertices (m, 2), movable)]`` of the enabled gates terms."""
        from core.potentials import gate_list, resolve_parameters
        project = self.session.project
        out = []
        try:
            params = resolve_parameters(project, None)
        except WellscapeError:
            return out
        for ti, term in enumerate(project.potential):
            if not isinstance(term, GatesTerm):
                continue
            try:
                gates = gate_list(term, params, f"potential[{ti}]")
            except WellscapeError:
                continue
            for gi, (spec, gate) in enumerate(zip(term.gates, gates)):
                geometry = spec.rectangle if spec.rectangle is not None else \
                    [c for vtx in spec.polygon for c in vtx]
                movable = all(_is_number(c) for c in geometry)
                out.append((ti, gi, f"{gate.label}: {fmt(gate.voltage, 4)} V", np.asarray(gate.vertices),
                            movable and term.enabled))
        return out

    def _clear_gates(self) -> None:
        for roi, _ti, _gi in self.gate_rois:
            self.plot2d.removeItem(roi)
        for label in self.gate_labels:
            self.plot2d.removeItem(label)
        self.gate_rois, self.gate_labels = [], []

    def _update_gates(self) -> None:
        """Draw the gates; outlines are rebuilt only when their geometry changes (a voltage change
        only rewrites the labels), so that live parameter changes stay fast."""
        if self._dragging:
            return
        outlines = self.gate_outlines() if (self.ndim == 2 and self.show_gates.isChecked()) else []
        signature = [(ti, gi, verts.tobytes(), movable) for ti, gi, _label, verts, movable in outlines]
        if self.gate_rois and signature == self._gate_signature:
            for t, (_ti, _gi, label, _v, _m) in zip(self.gate_labels, outlines):
                t.setText(label)
            return
        self._clear_gates()
        self._gate_signature = signature
        for ti, gi, label, verts, movable in outlines:
            roi = pg.PolyLineROI([tuple(map(float, p)) for p in verts], closed=True, movable=movable,
                                 pen=_GATE_PEN if movable else _GATE_FIXED_PEN)
            roi.setZValue(10)
            if not movable:
                for h in roi.getHandles():
                    h.hide()
                roi.translatable = False
                roi.setToolTip(f"{label} (its outline depends on parameters or the term is disabled; "
                               "edit it in the potential editor)")
            else:
                roi.setToolTip(f"{label}. Drag the outline or a corner to move the gate.")
            roi.sigRegionChangeStarted.connect(self._on_gate_drag_started)
            roi.sigRegionChangeFinished.connect(lambda r, ti=ti, gi=gi: self._on_gate_moved(r, ti, gi))
            self.plot2d.addItem(roi)
            self.gate_rois.append((roi, ti, gi))
            # the label sits just above the gate's top edge (kept inside the grid's box), clear of the cut
            g = self._grid
            mean_x = float(verts[:, 0].mean())
            cx = float(np.clip(mean_x, g.lower[0], g.upper[0]))
            top = float(np.clip(verts[:, 1].max(), g.lower[1], g.upper[1]))
            side = 0.0 if mean_x <= g.lower[0] else (1.0 if mean_x >= g.upper[0] else 0.5)
            t = text_item(label, anchor=(side, 1.0), colour="#222222")
            t.fill = pg.mkBrush(255, 255, 255, 210)
            t.setPos(cx, top)
            t.setZValue(11)
            self.plot2d.addItem(t)
            self.gate_labels.append(t)

    @staticmethod
    def roi_vertices(roi) -> np.ndarray:
        """Corners of a polygon ROI in physical coordinates (length unit), shape (m, 2)."""
        pts = [roi.mapToParent(h.pos()) for h in roi.getHandles()]
        return np.array([[p.x(), p.y()] for p in pts], dtype=float)

    def _on_gate_drag_started(self, _roi=None) -> None:
        self._dragging = True

    def _on_gate_moved(self, roi, term_index: int, gate_index: int) -> None:
        self._dragging = False
        vertices = self.roi_vertices(roi)
        # hand the edit over after the ROI has finished its own event: the new project rebuilds the outlines
        QtCore.QTimer.singleShot(0, self, lambda: self.move_gate(term_index, gate_index, vertices))

    def move_gate(self, term_index: int, gate_index: int, vertices) -> bool:
        """Give gate ``gate_index`` of term ``term_index`` new corners (m, 2) and send the project to the
        session.  A rectangle that stays axis-aligned stays a rectangle.  Returns False (and shows why)
        if the outline is not a valid gate; the project is then left as it was."""
        from core.gates import validate_polygon
        project = self.session.project
        term = project.potential[term_index]
        spec = term.gates[gate_index]
        verts = np.asarray(vertices, dtype=float)
        digits = max(0, int(-math.floor(math.log10(min(project.grid.spacing) / 100.0))))
        verts = np.round(verts, digits)
        try:
            validate_polygon(verts, label=spec.label)
        except WellscapeError as exc:
            show_message(self.status, f"Gate {spec.label!r} was not moved: {exc}", error=True)
            self._gate_signature = []          # redraw the outline where the project still has it
            self._update_gates()
            return False
        xs, ys = np.unique(verts[:, 0]), np.unique(verts[:, 1])
        if spec.rectangle is not None and len(verts) == 4 and xs.size == 2 and ys.size == 2:
            new_spec = dataclasses.replace(spec, rectangle=(float(xs[0]), float(ys[0]), float(xs[1]),
                                                            float(ys[1])), polygon=None)
        else:
            new_spec = dataclasses.replace(spec, polygon=tuple((float(x), float(y)) for x, y in verts),
                                           rectangle=None)
        gates = list(term.gates)
        gates[gate_index] = new_spec
        terms = list(project.potential)
        terms[term_index] = dataclasses.replace(term, gates=tuple(gates))
        new_project = dataclasses.replace(project, potential=tuple(terms))
        show_message(self.status, "")
        try:
            self.session.set_project(new_project, f"move gate {spec.label}")
        except WellscapeError as exc:
            show_message(self.status, f"Gate {spec.label!r} was not moved: {exc}", error=True)
            self._gate_signature = []
            self._update_gates()
            return False
        return True

    # -- 3D isosurface --------------------------------------------------------------------------
    def _default_iso_energy(self) -> None:
        v = self._potential
        lo, hi = self._levels_of(v)
        result = getattr(self.session, "result", None)
        if result is not None and result.energies.size and lo < float(result.energies[-1]) < hi:
            e = float(result.energies[-1])
        else:
            e = lo + 0.3 * (hi - lo)
        step = (hi - lo) / 100.0
        self.iso_energy.blockSignals(True)
        self.iso_energy.setRange(lo, hi)
        self.iso_energy.setSingleStep(float(f"{step:.1g}") if step > 0 else 1.0)
        self.iso_energy.setValue(e)
        self.iso_energy.blockSignals(False)

    def _update_isosurface(self) -> None:
        if self.ndim != 3 or self._potential is None:
            return
        u = view_units(self.session)
        e = self.iso_energy.value()
        colour = colormaps.colormap(colormaps.POTENTIAL).map(0.35, mode="float")
        legend = (f"surface V = {fmt_energy(e, u.energy_unit)}: inside it V is lower "
                  "(the classically allowed region at that energy)")
        self.isosurface.set_scene(self._grid, [Surface(self._potential, e, (*colour[:3], 0.6), legend)],
                                  u.length_unit)

    # -- line cut and levels --------------------------------------------------------------------
    def cut_data(self) -> tuple:
        """``(distance, V)`` along the current cut (length unit, energy unit), or empty arrays."""
        if self.cut_roi is None or self._potential is None or self.ndim < 2:
            return np.array([]), np.array([])
        host_item = self.cut_roi
        a, b = (host_item.mapToParent(h.pos()) for h in host_item.getHandles()[:2])
        if self.ndim == 2:
            data = self._potential
        else:
            data = self.slices.slice(0)
        axes = (self._grid.axes[0], self._grid.axes[1])
        return sample_line(data, axes, (a.x(), a.y()), (b.x(), b.y()))

    def _update_cut(self, *_args) -> None:
        if self.ndim < 2:
            return
        dist, vals = self.cut_data()
        self.cut_curve.setData(dist, vals, connect="finite")
        if self.cut_roi is not None and dist.size:
            a, b = (self.cut_roi.mapToParent(h.pos()) for h in self.cut_roi.getHandles()[:2])
            u = view_units(self.session)
            scale = max(abs(v) for v in self._grid.lower + self._grid.upper)
            ax_, ay_, bx_, by_ = (clean_zero(v, scale) for v in (a.x(), a.y(), b.x(), b.y()))
            where = f" in the plane z = {fmt(self._grid.axes[2][self.slices.index[2]], 4)} " \
                    f"{pretty_unit(u.length_unit)}" if self.ndim == 3 else ""
            self.cut_caption.setText(
                f"Cut from ({fmt(ax_, 4)}, {fmt(ay_, 4)}) to ({fmt(bx_, 4)}, {fmt(by_, 4)}) "
                f"{pretty_unit(u.length_unit)}{where}. Drag the black line or its ends to move it.")

    def level_groups(self) -> list:
        """``[(energy, first level, multiplicity)]`` of the last solve, grouped like the level diagram."""
        result = getattr(self.session, "result", None)
        if result is None:
            return []
        from core.eigensolve import group_levels
        tol = getattr(self.session, "degeneracy_tolerance", None)
        groups = result.groups if tol is None else group_levels(result.energies, tol)
        e = np.asarray(result.energies)
        return [(float(e[list(g)].mean()), g[0], len(g)) for g in groups]

    def _level_line(self, plot, k: int):
        """The k-th level line of ``plot``, made once and reused (a live drag repaints the levels many
        times a second; making pyqtgraph items each time cost ~50 ms)."""
        pool = self._level_pool.setdefault(id(plot), (plot, []))[1]
        while len(pool) <= k:
            line = pg.InfiniteLine(pos=0.0, angle=0, movable=False, pen=_LEVEL_PEN, label="",
                                   labelOpts={"position": 0.97, "color": "#0b3c5d", "anchors": [(1, 1), (1, 1)]})
            plot.addItem(line)
            pool.append(line)
        return pool[k]

    def _update_levels(self, *_args) -> None:
        plot = self.plot1d if self.ndim == 1 else self.cut_plot
        self.level_lines = []
        groups = []
        stale = bool(stale_message(self.session)) if hasattr(self.session, "stale_changed") else False
        if self.levels_on_cut.isChecked() and self._potential is not None:
            groups = self.level_groups()
            self._frame_levels(plot, groups)
            px = plot.getPlotItem().getViewBox().viewPixelSize()[1]
            close = _CUT_LABEL_PX * px if px > 0 else 0.0
            slot, previous = 0, None
            for k, (energy, first, mult) in enumerate(groups):
                # labels closer than a label's height go side by side along the line (up to 4 per row),
                # so that they never overlap
                slot = slot + 1 if previous is not None and energy - previous < close else 0
                previous = energy
                name = f"E{first}" if mult == 1 else f"E{first}–{first + mult - 1} (×{mult})"
                line = self._level_line(plot, k)
                line.setPos(energy)
                line.setPen(_STALE_LEVEL_PEN if stale else _LEVEL_PEN)       # dotted grey: out of date
                line.label.setColor("#6c757d" if stale else "#0b3c5d")
                if slot >= 4:
                    name = ""              # a fifth close level: its number is in the level diagram
                line.label.setFormat(name)
                line.label.setPosition(0.97 - 0.24 * min(slot, 3))
                line.setVisible(True)
                self.level_lines.append((line, plot))
        for host, pool in self._level_pool.values():
            for k, line in enumerate(pool):
                if host is not plot or k >= len(groups):
                    line.setVisible(False)

    def _frame_levels(self, plot, groups) -> float:
        """Show the bottom of the well and the levels: V up to twice the highest level's height above
        the bottom (a high barrier would otherwise squash the levels); the plot's "A" button shows all.
        Returns the energy span shown (for spacing the level labels)."""
        if not groups:
            return 0.0
        energies = [g[0] for g in groups]
        v = self.curve1d.getData()[1] if self.ndim == 1 else self.cut_curve.getData()[1]
        if v is None or not np.any(np.isfinite(v)):
            return max(energies) - min(energies)
        lo, hi = float(np.nanmin(v)), float(np.nanmax(v))
        top = max(energies)
        if top <= lo:
            return max(hi, top) - min(lo, min(energies))
        upper = max(min(hi, top + (top - lo)), top + 0.1 * (top - lo))     # levels always in view
        pad = 0.05 * (upper - lo)
        plot.getPlotItem().setYRange(lo - pad, upper + pad, padding=0)
        return upper - lo
