"""The computed states: a gallery of tiles, a large view of the selected state, and the probability
inside a region drawn on the large view.

Densities |psi|^2 use a perceptually uniform map; real wavefunctions a diverging map with the nodal
line drawn; complex wavefunctions a cyclic map for the phase with brightness for |psi|.  In 3D the
large view is three slices plus a rotatable isosurface of |psi|^2 (OpenGL, made lazily).
"""
from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtGui, QtWidgets

from core.errors import WellscapeError

from . import colormaps
from .common import (
    HintStack,
    StaleNote,
    axis_title,
    colorbar,
    contour_lines,
    density_unit,
    fmt,
    fmt_energy,
    grey_plot,
    image_rect,
    make_plot,
    set_colorbar_title,
    set_titles,
    show_message,
    stale_message,
    status_label,
    wave_unit,
)
from .isosurface import IsosurfaceWidget, Surface, level_enclosing
from .pair_density_panel import PairDensityPanel
from .slices import SliceTriptych

__all__ = ["StatesView", "StateTile"]

_HINT = ("No states yet. Solve the project and its states appear here: a gallery of all of them and a "
         "large view of the one you pick (click a tile, or a level in the level diagram).")
_MAX_TILES = 60
_TILE_PX = 132
MODES = ("density", "wavefunction")
REGIONS = ("none", "rectangle", "polygon")
_REGION_PEN = pg.mkPen(colormaps.ACCENT, width=2)
_NODAL_PEN = pg.mkPen("#111111", width=1.5, style=QtCore.Qt.PenStyle.DashLine)


def _qimage(rgba_xy: np.ndarray) -> QtGui.QImage:
    """QImage of an RGBA array indexed [x, y] (y up on screen)."""
    arr = np.ascontiguousarray(np.transpose(rgba_xy, (1, 0, 2))[::-1])
    h, w = arr.shape[:2]
    img = QtGui.QImage(arr.data, w, h, 4 * w, QtGui.QImage.Format.Format_RGBA8888)
    return img.copy()


class StateTile(QtWidgets.QFrame):
    """One gallery tile: a picture of a state and its energy; clicking selects it."""

    clicked = QtCore.Signal(int)

    def __init__(self, index: int, pixmap: QtGui.QPixmap, caption: str, parent=None):
        super().__init__(parent)
        self.index = index
        self.setFrameShape(QtWidgets.QFrame.Shape.Box)
        self.setCursor(QtCore.Qt.CursorShape.PointingHandCursor)
        lay = QtWidgets.QVBoxLayout(self)
        lay.setContentsMargins(3, 3, 3, 3)
        lay.setSpacing(2)
        self.picture = QtWidgets.QLabel()
        self.picture.setPixmap(pixmap)
        self.picture.setAlignment(QtCore.Qt.AlignmentFlag.AlignCenter)
        self.caption = QtWidgets.QLabel(caption)
        self.caption.setAlignment(QtCore.Qt.AlignmentFlag.AlignCenter)
        lay.addWidget(self.picture)
        lay.addWidget(self.caption)
        self._base = caption
        self.set_selected(False)

    def update_content(self, pixmap: QtGui.QPixmap, caption: str) -> None:
        """New picture and caption for the same state number (a re-solve reuses the tile)."""
        self.picture.setPixmap(pixmap)
        self._base = caption
        self.caption.setText(f"▶ {caption}" if self.selected else caption)

    def set_selected(self, on: bool) -> None:
        """Selected tiles get a thick frame and a marker in the caption (not colour alone)."""
        self.selected = bool(on)
        self.setLineWidth(3 if on else 1)
        self.setStyleSheet(f"StateTile {{ color: {colormaps.ACCENT if on else '#9a9a9a'}; }}")
        self.caption.setText(f"▶ {self._base}" if on else self._base)
        font = self.caption.font()
        font.setBold(on)
        self.caption.setFont(font)

    def mousePressEvent(self, event):  # noqa: N802 - Qt override
        self.clicked.emit(self.index)
        super().mousePressEvent(event)


class StatesView(QtWidgets.QWidget):
    """Gallery and large view of the session's states."""

    def __init__(self, session, parent=None):
        super().__init__(parent)
        self.session = session
        self.result = None
        self._pending_result = None        # a result that arrived while the view was hidden
        self.tiles: list = []
        self.region_roi = None
        self._region_host = None
        self.ndim = 0

        # controls
        self.mode = QtWidgets.QComboBox()
        self.mode.addItem("probability density |ψ|²", "density")
        self.mode.addItem("wavefunction ψ (sign or phase)", "wavefunction")
        self.mode.currentIndexChanged.connect(self._on_mode_changed)
        self.region_kind = QtWidgets.QComboBox()
        self.region_kind.addItem("no region", "none")
        self.region_kind.addItem("rectangle", "rectangle")
        self.region_kind.addItem("polygon", "polygon")
        self.region_kind.setToolTip("Draw a region on the large view to get the probability of finding "
                                    "the particle inside it")
        self.region_kind.currentIndexChanged.connect(self._on_region_kind_changed)
        self.fraction = QtWidgets.QSpinBox()
        self.fraction.setRange(5, 99)
        self.fraction.setValue(50)
        self.fraction.setSuffix(" %")
        self.fraction.setToolTip("The isosurface encloses this share of the probability")
        self.fraction.valueChanged.connect(lambda *_: self._show_large())
        self.fraction_label = QtWidgets.QLabel("isosurface holds")
        bar = QtWidgets.QHBoxLayout()
        bar.addWidget(QtWidgets.QLabel("show"))
        bar.addWidget(self.mode)
        bar.addSpacing(12)
        bar.addWidget(QtWidgets.QLabel("region"))
        bar.addWidget(self.region_kind)
        bar.addSpacing(12)
        bar.addWidget(self.fraction_label)
        bar.addWidget(self.fraction)
        bar.addStretch(1)

        # gallery
        self.gallery_note = QtWidgets.QLabel("")
        self.gallery_note.setWordWrap(True)
        self.gallery_holder = QtWidgets.QWidget()
        self.gallery_grid = QtWidgets.QGridLayout(self.gallery_holder)
        self.gallery_grid.setSpacing(4)
        self.gallery_grid.setAlignment(QtCore.Qt.AlignmentFlag.AlignTop | QtCore.Qt.AlignmentFlag.AlignLeft)
        scroll = QtWidgets.QScrollArea()
        scroll.setWidgetResizable(True)
        scroll.setHorizontalScrollBarPolicy(QtCore.Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        scroll.setWidget(self.gallery_holder)
        gallery = QtWidgets.QWidget()
        gl_ = QtWidgets.QVBoxLayout(gallery)
        gl_.setContentsMargins(0, 0, 0, 0)
        gl_.addWidget(self.gallery_note)
        gl_.addWidget(scroll, 1)
        gallery.setMinimumWidth(2 * _TILE_PX + 50)

        # large views
        self.large_title = QtWidgets.QLabel("")
        self.large_title.setStyleSheet("font-weight: bold;")
        self.large_title.setWordWrap(True)
        self.plot1d = make_plot()
        self.curve1d = self.plot1d.plot(pen=pg.mkPen("#1d3557", width=2))
        self.zero1d = pg.InfiniteLine(pos=0.0, angle=0, pen=pg.mkPen("#888888", width=1))
        self.plot1d.addItem(self.zero1d)
        self.plot2d = make_plot(aspect_locked=True)
        self.image = pg.ImageItem(axisOrder="col-major")
        self.plot2d.addItem(self.image)
        self.nodal = pg.PlotDataItem(pen=_NODAL_PEN, connect="finite")
        self.nodal.setZValue(5)
        self.plot2d.addItem(self.nodal)
        self.colorbar = colorbar(self.image, self.plot2d, colormaps.colormap(colormaps.DENSITY))
        self.slices = SliceTriptych()
        self.isosurface = IsosurfaceWidget()
        self.slices.extra.addWidget(self.isosurface)
        self.pages = QtWidgets.QStackedWidget()
        for w in (self.plot1d, self.plot2d, self.slices):
            self.pages.addWidget(w)
        self.legend = QtWidgets.QLabel("")
        self.legend.setWordWrap(True)
        self.region_result = QtWidgets.QLabel("")
        self.region_result.setWordWrap(True)
        self.region_result.setTextInteractionFlags(QtCore.Qt.TextInteractionFlag.TextSelectableByMouse)
        self.status = status_label()
        large = QtWidgets.QWidget()
        ll = QtWidgets.QVBoxLayout(large)
        ll.setContentsMargins(0, 0, 0, 0)
        ll.addWidget(self.large_title)
        ll.addWidget(self.pages, 1)
        ll.addWidget(self.legend)
        ll.addWidget(self.region_result)
        ll.addWidget(self.status)

        split = QtWidgets.QSplitter(QtCore.Qt.Orientation.Horizontal)
        split.addWidget(gallery)
        split.addWidget(large)
        split.setStretchFactor(0, 1)
        split.setStretchFactor(1, 3)
        inner = QtWidgets.QWidget()
        il = QtWidgets.QVBoxLayout(inner)
        il.setContentsMargins(0, 0, 0, 0)
        self.stale_note = StaleNote()
        il.addWidget(self.stale_note)
        il.addLayout(bar)
        il.addWidget(split, 1)
        # two-electron projects: a second page with where the two electrons are
        self.pair_panel = PairDensityPanel(session)
        self.kind_tabs = QtWidgets.QTabWidget()
        self.kind_tabs.setDocumentMode(True)
        self.kind_tabs.addTab(inner, "One electron: orbitals")
        self.kind_tabs.addTab(self.pair_panel, "Two electrons: where they are")
        self._update_pair_tab()
        if hasattr(session, "two_electron_changed"):
            session.two_electron_changed.connect(self._update_pair_tab)
        self.stack = HintStack(self.kind_tabs, _HINT)
        lay = QtWidgets.QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        lay.addWidget(self.stack)

        session.solved.connect(self._on_solved)
        session.selection_changed.connect(self._on_selection_changed)
        session.project_changed.connect(self._on_project_changed)
        if hasattr(session, "stale_changed"):
            session.stale_changed.connect(self._update_stale)
        if getattr(session, "result", None) is not None:
            self._on_solved(session.result)

    def _update_pair_tab(self) -> None:
        """The two-electron page is offered only while there are two-electron levels to draw."""
        on = self.pair_panel.available
        self.kind_tabs.tabBar().setVisible(on)
        self.kind_tabs.setTabVisible(1, on)
        if not on:
            self.kind_tabs.setCurrentIndex(0)

    def _update_stale(self) -> None:
        """Grey the states and say so when they are not of the project as it is now."""
        shown = self._pending_result or self.result
        text = stale_message(self.session, short=True) if shown is not None and shown is self.session.result else ""
        self.stale_note.show_text(text)
        stale = bool(text)
        for plot in (self.plot1d, self.plot2d):
            grey_plot(plot, stale)
        self.image.setOpacity(0.45 if stale else 1.0)
        self.curve1d.setOpacity(0.45 if stale else 1.0)
        if stale and self.gallery_holder.graphicsEffect() is None:
            effect = QtWidgets.QGraphicsOpacityEffect(self.gallery_holder)
            effect.setOpacity(0.45)
            self.gallery_holder.setGraphicsEffect(effect)
        elif not stale and self.gallery_holder.graphicsEffect() is not None:
            self.gallery_holder.setGraphicsEffect(None)

    # -- helpers -------------------------------------------------------------------------------
    @property
    def selected(self) -> int:
        if self.result is None:
            return 0
        k = len(self.result.energies)
        sel = int(getattr(self.session, "selected_state", 0) or 0)
        return min(max(sel, 0), k - 1)

    @property
    def display_mode(self) -> str:
        return self.mode.currentData()

    def _psi(self, i: int) -> np.ndarray:
        return self.result.states[i]

    @staticmethod
    def _density(psi: np.ndarray) -> np.ndarray:
        return psi.real ** 2 + psi.imag ** 2 if np.iscomplexobj(psi) else psi ** 2

    # -- session -------------------------------------------------------------------------------
    def _on_project_changed(self) -> None:
        if getattr(self.session, "result", None) is None:
            self.result = None
            self._pending_result = None
            self.stack.show_hint(_HINT)

    def _on_solved(self, result=None) -> None:
        result = result if result is not None else self.session.result
        if result is None:
            self.stack.show_hint(_HINT)
            return
        if not self.isVisible():
            # a hidden tab draws nothing until it is shown: the gallery of a first result costs the
            # window 100-150 ms, which would otherwise fall right after every solve
            self._pending_result = result
            return
        self._pending_result = None
        self._show_result(result)

    def showEvent(self, event) -> None:  # noqa: N802 - Qt override
        super().showEvent(event)
        pending, self._pending_result = self._pending_result, None
        if pending is not None:
            self._show_result(pending)

    def _show_result(self, result) -> None:
        new_grid = self.result is None or self.result.grid != result.grid
        self.result = result
        self.ndim = result.grid.ndim
        self.stack.show_content()
        self.pages.setCurrentIndex(self.ndim - 1)
        self.fraction.setVisible(self.ndim == 3)
        self.fraction_label.setVisible(self.ndim == 3)
        u = result.units
        grid = result.grid
        if self.ndim == 2:
            set_titles(self.plot2d, axis_title("x", u.length_unit), axis_title("y", u.length_unit))
            if new_grid:
                self.plot2d.getPlotItem().setRange(rect=image_rect(grid), padding=0.02)
        elif self.ndim == 1:
            set_titles(self.plot1d, axis_title("x", u.length_unit), "")
        if new_grid:
            self._on_region_kind_changed()
        self._build_gallery()
        self._show_large()
        if hasattr(self.session, "stale_changed"):
            self._update_stale()

    def _on_selection_changed(self, _index: int = 0) -> None:
        if self.result is None or self._pending_result is not None:
            return                         # (a pending result is drawn with the selection when shown)
        for t in self.tiles:
            t.set_selected(t.index == self.selected)
        self._show_large()

    def _on_mode_changed(self, *_args) -> None:
        if self.result is not None:
            self._build_gallery()
            self._show_large()

    def _on_tile_clicked(self, index: int) -> None:
        self.session.select_state(int(index))

    # -- gallery -------------------------------------------------------------------------------
    def tile_picture(self, i: int) -> np.ndarray:
        """RGBA [x, y] picture of state i for its tile (1D: a drawn curve)."""
        grid = self.result.grid
        psi = self._psi(i)
        mode = self.display_mode
        if grid.ndim == 3:
            if mode == "density":
                data = self._density(psi).sum(axis=2)
                return colormaps.to_rgba(data, colormaps.DENSITY, 0.0, float(data.max()))
            iz = int(np.unravel_index(np.argmax(self._density(psi)), psi.shape)[2])
            psi = psi[:, :, iz]
        if grid.ndim >= 2:
            if mode == "density":
                data = self._density(psi)
                return colormaps.to_rgba(data, colormaps.DENSITY, 0.0, float(data.max()))
            if np.iscomplexobj(psi):
                return colormaps.phase_rgba(psi)
            m = float(np.abs(psi).max()) or 1.0
            return colormaps.to_rgba(psi, colormaps.SIGNED, -m, m)
        return None

    def _tile_pixmap(self, i: int) -> QtGui.QPixmap:
        grid = self.result.grid
        if grid.ndim == 1:
            return self._curve_pixmap(i)
        img = _qimage(self.tile_picture(i))
        w = grid.axes[0][-1] - grid.axes[0][0]
        h = grid.axes[1][-1] - grid.axes[1][0]
        size = QtCore.QSize(_TILE_PX, _TILE_PX)
        if w > 0 and h > 0:
            size = QtCore.QSize(_TILE_PX, max(24, int(_TILE_PX * h / w))) if w >= h else \
                QtCore.QSize(max(24, int(_TILE_PX * w / h)), _TILE_PX)
        return QtGui.QPixmap.fromImage(img.scaled(size, QtCore.Qt.AspectRatioMode.IgnoreAspectRatio,
                                                  QtCore.Qt.TransformationMode.SmoothTransformation))

    def _curve_pixmap(self, i: int) -> QtGui.QPixmap:
        psi = self._psi(i)
        w, h = _TILE_PX, _TILE_PX // 2
        pix = QtGui.QPixmap(w, h)
        pix.fill(QtGui.QColor("white"))
        if self.display_mode == "density":
            y = self._density(psi)
            lo, hi = 0.0, float(y.max()) or 1.0
        else:
            y = psi.real
            m = float(np.abs(y).max()) or 1.0
            lo, hi = -m, m
        xs = np.linspace(2, w - 2, y.size)
        ys = (h - 3) - (y - lo) / (hi - lo) * (h - 6)
        painter = QtGui.QPainter(pix)
        painter.setRenderHint(QtGui.QPainter.RenderHint.Antialiasing)
        painter.setPen(QtGui.QPen(QtGui.QColor("#bbbbbb"), 1))
        base = (h - 3) - (0 - lo) / (hi - lo) * (h - 6)
        painter.drawLine(QtCore.QPointF(2, base), QtCore.QPointF(w - 2, base))
        painter.setPen(QtGui.QPen(QtGui.QColor("#1d3557"), 1.5))
        painter.drawPolyline(QtGui.QPolygonF([QtCore.QPointF(float(a), float(b)) for a, b in zip(xs, ys)]))
        painter.end()
        return pix

    def _build_gallery(self) -> None:
        result = self.result
        u = result.units
        k = len(result.energies)
        count = min(k, _MAX_TILES)
        cols = 2
        reuse = len(self.tiles) == count         # a re-solve (e.g. a slider drag): same tiles, new pictures
        if not reuse:
            for t in self.tiles:
                self.gallery_grid.removeWidget(t)
                t.deleteLater()
            self.tiles = []
        for i in range(count):
            caption = f"{i} · {fmt_energy(result.energies[i], u.energy_unit, 6)}"
            if reuse:
                tile = self.tiles[i]
                tile.update_content(self._tile_pixmap(i), caption)
            else:
                tile = StateTile(i, self._tile_pixmap(i), caption)
                tile.clicked.connect(self._on_tile_clicked)
                self.gallery_grid.addWidget(tile, i // cols, i % cols)
                self.tiles.append(tile)
            tile.setToolTip(f"state {i}, E = {fmt_energy(result.energies[i], u.energy_unit, 8)}; "
                            "click to show it large")
            if tile.selected != (i == self.selected):
                tile.set_selected(i == self.selected)
        what = {"density": "|ψ|²", "wavefunction": "ψ"}[self.display_mode]
        note = f"{k} states, lowest first, showing {what}"
        if result.grid.ndim == 3:
            note += (", summed along z" if self.display_mode == "density"
                     else ", in the xy plane through each state's maximum")
        if k > count:
            note += f" (first {count})"
        self.gallery_note.setText(note + ".")

    # -- large view ----------------------------------------------------------------------------
    def _show_large(self) -> None:
        result = self.result
        if result is None:
            return
        i = self.selected
        psi = self._psi(i)
        grid = result.grid
        u = result.units
        mode = self.display_mode
        complex_ = np.iscomplexobj(psi) and float(np.abs(psi.imag).max()) > 0.0
        rho_unit = density_unit(u.length_unit, grid.ndim)
        psi_unit = wave_unit(u.length_unit, grid.ndim)
        what = axis_title("|ψ|²", rho_unit) if mode == "density" else \
            (axis_title("ψ", psi_unit) if not complex_ else "ψ (phase as colour, |ψ| as brightness)")
        self.large_title.setText(f"State {i}  ·  E = {fmt_energy(result.energies[i], u.energy_unit, 7)}"
                                 f"  ·  {what}")
        legend = ""
        if grid.ndim == 1:
            y = self._density(psi) if mode == "density" else psi.real
            self.curve1d.setData(grid.axes[0], y)
            set_titles(self.plot1d, axis_title("x", u.length_unit),
                       axis_title("|ψ|²", rho_unit) if mode == "density" else axis_title("ψ", psi_unit))
            if mode != "density" and complex_:
                legend = "Real part of ψ shown (the state is complex)."
        elif grid.ndim == 2:
            legend = self._show_2d(psi, mode, complex_, rho_unit, psi_unit)
        else:
            legend = self._show_3d(psi, mode, complex_, rho_unit, psi_unit)
        self.legend.setText(legend)
        self._update_region()

    def _show_2d(self, psi, mode, complex_, rho_unit, psi_unit) -> str:
        grid = self.result.grid
        try:
            return self._paint_2d(psi, mode, complex_, rho_unit, psi_unit)
        finally:
            self.image.setRect(image_rect(grid))          # after setImage: the rect needs the image's shape

    def _paint_2d(self, psi, mode, complex_, rho_unit, psi_unit) -> str:
        if mode == "density":
            data = self._density(psi)
            top = float(data.max()) or 1.0
            self.image.setImage(data, levels=(0.0, top), lut=colormaps.lookup_table(colormaps.DENSITY),
                                autoLevels=False)
            self._colorbar(colormaps.DENSITY, (0.0, top), "|ψ|²", rho_unit)
            self.nodal.setVisible(False)
            return ""
        if complex_:
            self.image.setImage(colormaps.phase_rgba(psi), autoLevels=False, levels=(0, 255), lut=None)
            self.colorbar.setVisible(False)
            self.nodal.setVisible(False)
            return ("Colour is the phase of ψ (a cyclic scale: the same colour at −π and +π); brightness is |ψ|. "
                    "A point where all colours meet is a vortex.")
        m = float(np.abs(psi).max()) or 1.0
        self.image.setImage(psi, levels=(-m, m), lut=colormaps.lookup_table(colormaps.SIGNED), autoLevels=False)
        self._colorbar(colormaps.SIGNED, (-m, m), "ψ", psi_unit)
        self.nodal.setData(*self.nodal_lines(psi, self.result.grid.axes[:2]), connect="finite")
        self.nodal.setVisible(True)
        return "Dashed lines: nodal lines (ψ = 0). The overall sign of a real state is arbitrary."

    @staticmethod
    def nodal_lines(psi: np.ndarray, axes: tuple, floor: float = 0.02) -> tuple:
        """``(x, y)`` of the nodal lines psi = 0 of a real 2D state, drawn only where the local amplitude
        (the largest |psi| among a point and its neighbours) reaches ``floor`` of the maximum: in the
        empty tails, round-off would otherwise draw sign changes of noise."""
        from scipy.ndimage import maximum_filter
        amp = np.abs(psi)
        top = float(amp.max()) or 1.0
        keep = maximum_filter(amp, size=3, mode="nearest") >= floor * top
        return contour_lines(psi, [0.0], axes, keep=keep)

    def _colorbar(self, cmap: str, levels, name: str, unit: str) -> None:
        self.colorbar.setVisible(True)
        self.colorbar.setColorMap(colormaps.colormap(cmap))
        self.colorbar.setLevels(levels)
        set_colorbar_title(self.colorbar, name, unit, top=max(abs(levels[0]), abs(levels[1])))

    def _show_3d(self, psi, mode, complex_, rho_unit, psi_unit) -> str:
        result = self.result
        grid = result.grid
        u = result.units
        rho = self._density(psi)
        frac = self.fraction.value() / 100.0
        level = level_enclosing(rho, frac)
        keep = self.slices._volume is not None and self.slices._grid == grid
        if mode == "density":
            self.slices.set_volume(grid, rho, cmap=colormaps.DENSITY, levels=(0.0, float(rho.max()) or 1.0),
                                   length_unit=u.length_unit, colour_title=("|ψ|²", rho_unit),
                                   keep_planes=keep)
            colour = colormaps.colormap(colormaps.DENSITY).map(0.55, mode="float")
            surfaces = [Surface(rho, level, (*colour[:3], 0.75),
                                f"surface |ψ|² = {fmt(level, 3)} {rho_unit}: it holds {self.fraction.value()} % "
                                "of the probability")]
            legend = ""
        else:
            data = psi.real
            m = float(np.abs(data).max()) or 1.0
            self.slices.set_volume(grid, data, cmap=colormaps.SIGNED, levels=(-m, m), length_unit=u.length_unit,
                                   colour_title=("Re ψ" if complex_ else "ψ", psi_unit), keep_planes=keep)
            c = float(np.sqrt(level))
            lo_col = colormaps.colormap(colormaps.SIGNED).map(0.05, mode="float")
            hi_col = colormaps.colormap(colormaps.SIGNED).map(0.95, mode="float")
            name = "Re ψ" if complex_ else "ψ"
            surfaces = [Surface(data, c, (*hi_col[:3], 0.8), f"{name} = +{fmt(c, 3)} (light)"),
                        Surface(data, -c, (*lo_col[:3], 0.8), f"{name} = −{fmt(c, 3)} (dark)")]
            legend = ("Slices and surfaces show the real part of ψ (the state is complex)." if complex_ else
                      "The overall sign of a real state is arbitrary.")
        self.isosurface.set_scene(grid, surfaces, u.length_unit)
        return legend

    # -- region probability --------------------------------------------------------------------
    def _region_plot(self):
        if self.ndim == 1:
            return self.plot1d
        if self.ndim == 2:
            return self.plot2d
        if self.ndim == 3:
            return self.slices.plots[0]
        return None

    def _on_region_kind_changed(self, *_args) -> None:
        if self.region_roi is not None and self._region_host is not None:
            self._region_host.removeItem(self.region_roi)
        self.region_roi, self._region_host = None, None
        kind = self.region_kind.currentData()
        if self.result is None or kind == "none":
            self.region_result.setText("")
            return
        grid = self.result.grid
        host = self._region_plot()
        lo = [ax[0] for ax in grid.axes]
        hi = [ax[-1] for ax in grid.axes]
        mid = [(a + b) / 2 for a, b in zip(lo, hi)]
        if grid.ndim == 1:
            if kind == "polygon":
                show_message(self.status, "On a 1D grid a region is an interval; using a rectangle (interval).")
            roi = pg.LinearRegionItem(values=(lo[0], mid[0]), brush=pg.mkBrush(213, 94, 0, 40),
                                      pen=_REGION_PEN)
            roi.sigRegionChanged.connect(self._update_region)
        elif kind == "rectangle":
            roi = pg.RectROI((lo[0], lo[1]), (mid[0] - lo[0], hi[1] - lo[1]), pen=_REGION_PEN)
            roi.sigRegionChanged.connect(self._update_region)
        else:
            pts = [(lo[0], lo[1]), (mid[0], lo[1]), (mid[0], hi[1]), (lo[0], hi[1])]
            roi = pg.PolyLineROI(pts, closed=True, pen=_REGION_PEN)
            roi.sigRegionChanged.connect(self._update_region)
        roi.setZValue(20)
        host.addItem(roi)
        self.region_roi, self._region_host = roi, host
        self._update_region()

    def set_region(self, kind: str, *, lower=None, upper=None, vertices=None) -> None:
        """Place a region: ``rectangle`` from ``lower`` to ``upper`` (x, y) or an interval in 1D, or a
        ``polygon`` with ``vertices`` [(x, y), ...] (length unit)."""
        idx = self.region_kind.findData(kind)
        if idx < 0:
            raise ValueError(f"unknown region kind {kind!r}; choose one of {', '.join(REGIONS)}")
        self.region_kind.setCurrentIndex(idx)
        self._on_region_kind_changed()
        roi = self.region_roi
        if roi is None:
            return
        if isinstance(roi, pg.LinearRegionItem):
            roi.setRegion((float(lower[0]), float(upper[0])))
        elif kind == "rectangle":
            roi.setPos((float(lower[0]), float(lower[1])), update=False, finish=False)
            roi.setSize((float(upper[0] - lower[0]), float(upper[1] - lower[1])))
        else:
            roi.setPoints([tuple(map(float, v)) for v in vertices], closed=True)
        self._update_region()

    def region_mask(self) -> np.ndarray | None:
        """Boolean mask on the result's grid of the drawn region (None without a region)."""
        from core.analysis import box_mask, polygon_mask
        from core.grid import Grid
        roi = self.region_roi
        if roi is None or self.result is None:
            return None
        grid = self.result.grid
        if isinstance(roi, pg.LinearRegionItem):
            a, b = roi.getRegion()
            return box_mask(grid, [a], [b])
        if isinstance(roi, pg.PolyLineROI):
            pts = np.array([[p.x(), p.y()] for p in (roi.mapToParent(h.pos()) for h in roi.getHandles())])
            if grid.ndim == 2:
                return polygon_mask(grid, pts)
            plane = Grid(grid.lower[:2], grid.upper[:2], grid.points[:2], grid.boundary[:2])
            return np.repeat(polygon_mask(plane, pts)[:, :, None], grid.shape[2], axis=2)
        pos, size = roi.pos(), roi.size()
        lower = [pos.x(), pos.y()] + [-np.inf] * (grid.ndim - 2)
        upper = [pos.x() + size.x(), pos.y() + size.y()] + [np.inf] * (grid.ndim - 2)
        return box_mask(grid, lower, upper)

    def region_probability(self) -> float | None:
        """sum over the region of |psi|^2 dV for the selected state (core.analysis.probability_in_region)."""
        from core.analysis import probability_in_region
        mask = self.region_mask()
        if mask is None:
            return None
        i = self.selected
        return float(probability_in_region(self.result.grid, self.result.states[i:i + 1], mask)[0])

    def _update_region(self, *_args) -> None:
        if self.region_roi is None or self.result is None:
            self.region_result.setText("")
            return
        try:
            p = self.region_probability()
        except WellscapeError as exc:
            show_message(self.status, f"The region cannot be used: {exc}", error=True)
            self.region_result.setText("")
            return
        show_message(self.status, "")
        where = "inside the interval" if self.ndim == 1 else (
            "inside the region (all z)" if self.ndim == 3 else "inside the region")
        self.region_result.setText(f"Probability {where} for state {self.selected}: <b>{p:.4f}</b> "
                                   f"({100 * p:.2f} %). Drag the orange outline or its handles to change it.")
