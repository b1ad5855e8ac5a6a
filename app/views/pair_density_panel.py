"""Where the two electrons are: the density of a two-electron level, and with one electron held fixed.

Draws what :mod:`core.pair_density` computes from the session's two-electron levels and the orbitals
they were built from: the probability density of finding an electron at r with the other anywhere,
or the density of one electron with the other fixed at a point the user clicks (marked with a cross).
2D grids only (3D: a message).  No physics here.
"""
from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtWidgets

from core.errors import WellscapeError

from . import colormaps
from .common import (
    StaleNote,
    axis_title,
    colorbar,
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
)

__all__ = ["PairDensityPanel", "SHOW_MODES"]

#: (data key, words) of what the panel can show
SHOW_MODES = (("density", "electron density (the other electron anywhere)"),
              ("conditional", "one electron, the other fixed at the cross (click to move it)"))
_MARK_PEN = pg.mkPen("#ffffff", width=2)
_MARK_BRUSH = pg.mkBrush(colormaps.ACCENT)
_CUSP_NOTE = ("Near the fixed electron the orbital expansion converges slowly (the Coulomb cusp): "
              "there the density is too high (measured 1.5× at the point itself with 45 orbitals "
              "on a parabolic dot); from one grid spacing away it is within about 6 %.")


class PairDensityPanel(QtWidgets.QWidget):
    """Density maps of ``session.two_electron`` on the grid of the result it was built from."""

    def __init__(self, session, parent=None):
        super().__init__(parent)
        self.session = session
        self.pair = None
        self.result = None                 # the orbital result the pair was built from
        self.fixed: tuple | None = None    # grid index of the fixed electron
        self.level = QtWidgets.QComboBox()
        self.level.currentIndexChanged.connect(lambda *_: self.draw())
        self.show_mode = QtWidgets.QComboBox()
        for key, words in SHOW_MODES:
            self.show_mode.addItem(words, key)
        self.show_mode.currentIndexChanged.connect(lambda *_: self.draw())
        bar = QtWidgets.QHBoxLayout()
        bar.addWidget(QtWidgets.QLabel("two-electron level"))
        bar.addWidget(self.level)
        bar.addSpacing(12)
        bar.addWidget(QtWidgets.QLabel("show"))
        bar.addWidget(self.show_mode)
        bar.addStretch(1)
        self.stale_note = StaleNote()
        self.title = QtWidgets.QLabel("")
        self.title.setStyleSheet("font-weight: bold;")
        self.title.setWordWrap(True)
        self.plot = make_plot(aspect_locked=True)
        self.image = pg.ImageItem(axisOrder="col-major")
        self.plot.addItem(self.image)
        self.mark = pg.ScatterPlotItem(symbol="+", size=16, pen=_MARK_PEN, brush=_MARK_BRUSH)
        self.mark.setZValue(5)
        self.plot.addItem(self.mark)
        self.colorbar = colorbar(self.image, self.plot, colormaps.colormap(colormaps.DENSITY))
        self.plot.scene().sigMouseClicked.connect(self._on_click)
        self.note = QtWidgets.QLabel("")
        self.note.setWordWrap(True)
        self.status = status_label()
        lay = QtWidgets.QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.addWidget(self.stale_note)
        lay.addLayout(bar)
        lay.addWidget(self.title)
        lay.addWidget(self.plot, 1)
        lay.addWidget(self.note)
        lay.addWidget(self.status)
        if hasattr(session, "two_electron_changed"):
            session.two_electron_changed.connect(self.refresh)
            session.stale_changed.connect(self._update_stale)
        self.refresh()

    @property
    def available(self) -> bool:
        """True when there are two-electron levels with pair amplitudes to draw."""
        return self.pair is not None and bool(getattr(self.pair, "coefficients", ()))

    @property
    def mode(self) -> str:
        return self.show_mode.currentData()

    def refresh(self) -> None:
        """Take the session's two-electron levels and the orbital result they came with."""
        pair = getattr(self.session, "two_electron", None)
        self.pair = pair
        self.result = self.session.result if pair is not None else None
        self.level.blockSignals(True)
        self.level.clear()
        if pair is not None:
            unit = self.result.units.energy_unit
            for i, (e, s) in enumerate(zip(pair.energies, pair.spin)):
                self.level.addItem(f"{i} · {s} · E = {fmt_energy(e, unit)}", i)
        self.level.blockSignals(False)
        if self.result is not None and self.result.grid.ndim == 2:
            grid = self.result.grid
            if self.fixed is None or len(self.fixed) != 2 or any(k >= n for k, n in zip(self.fixed, grid.shape)):
                self.fixed = self._densest_point()
            self.plot.getPlotItem().setRange(rect=image_rect(grid), padding=0.02)
        self.draw()

    def _densest_point(self) -> tuple | None:
        from core.pair_density import one_electron_density
        try:
            rho = one_electron_density(self.pair, self.result.states, self.result.grid, 0)
        except WellscapeError:
            return None
        return tuple(int(k) for k in np.unravel_index(int(np.argmax(rho)), rho.shape))

    def set_fixed_point(self, index: tuple) -> None:
        """Fix the other electron at grid point ``index`` and show the conditional density."""
        self.fixed = tuple(int(k) for k in index)
        self.show_mode.setCurrentIndex(1)           # draws (or draw below when already selected)
        self.draw()

    def _on_click(self, event) -> None:
        if self.result is None or self.result.grid.ndim != 2 or event.button() != QtCore.Qt.MouseButton.LeftButton:
            return
        vb = self.plot.getPlotItem().getViewBox()
        if not vb.sceneBoundingRect().contains(event.scenePos()):
            return
        p = vb.mapSceneToView(event.scenePos())
        axes = self.result.grid.axes
        index = tuple(int(np.argmin(np.abs(a - v))) for a, v in zip(axes, (p.x(), p.y())))
        self.set_fixed_point(index)

    def draw(self) -> None:
        """Compute (core.pair_density) and draw the map chosen."""
        from core.pair_density import conditional_density, one_electron_density
        if not self.available:
            self.image.clear()
            self.mark.setData([], [])
            self.title.setText("")
            self.note.setText("")
            self._update_stale()
            return
        grid = self.result.grid
        if grid.ndim != 2:
            self.image.clear()
            self.mark.setData([], [])
            self.title.setText("")
            show_message(self.status, "Pair densities are drawn for 2D grids; this project's grid is "
                         f"{grid.ndim}D.")
            return
        level = max(self.level.currentIndex(), 0)
        spin = self.pair.spin[level]
        unit = self.result.units.length_unit
        try:
            if self.mode == "conditional":
                if self.fixed is None:
                    raise WellscapeError("click on the map to fix the other electron")
                rho = conditional_density(self.pair, self.result.states, grid, self.fixed, level)
                x0, y0 = (grid.axes[a][self.fixed[a]] for a in range(2))
                self.mark.setData([x0], [y0])
                title = (f"Level {level} ({spin}): density of one electron with the other fixed at "
                         f"x = {fmt(x0)}, y = {fmt(y0)} {unit}")
                note = _CUSP_NOTE + (" A triplet's density is zero at the fixed electron (the Pauli "
                                     "principle)." if spin == "triplet" else "")
            else:
                rho = one_electron_density(self.pair, self.result.states, grid, level)
                self.mark.setData([], [])
                title = (f"Level {level} ({spin}): probability density of finding an electron at (x, y), "
                         f"the other anywhere (integrates to 1; the electron density is twice this)")
                note = ""
        except WellscapeError as exc:
            show_message(self.status, str(exc), error=True)
            return
        show_message(self.status, "")
        top = float(rho.max()) or 1.0
        self.image.setImage(rho, levels=(0.0, top), lut=colormaps.lookup_table(colormaps.DENSITY), autoLevels=False)
        self.image.setRect(image_rect(grid))
        self.colorbar.setLevels((0.0, top))
        set_colorbar_title(self.colorbar, "ρ", density_unit(unit, 2), top=top)
        set_titles(self.plot, axis_title("x", unit), axis_title("y", unit))
        self.title.setText(title)
        self.note.setText(note)
        self._update_stale()

    def _update_stale(self) -> None:
        text = ""
        if self.pair is not None and not self.session.two_electron_is_current:
            text = stale_message(self.session, short=True) or "Out of date — greyed until solved again"
        self.stale_note.show_text(text)
        grey_plot(self.plot, bool(text))
        self.image.setOpacity(0.45 if text else 1.0)

    def shown_density(self) -> np.ndarray | None:
        """The map drawn now (for tests and export)."""
        return None if self.image.image is None else np.asarray(self.image.image)
