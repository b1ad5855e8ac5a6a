"""Three orthogonal slices of a 3D array with movable planes (one slider per plane)."""
from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtWidgets

from . import colormaps
from .common import axis_title, colorbar, fmt, image_rect, make_plot, pretty_unit, set_colorbar_title

__all__ = ["SliceTriptych"]

#: (shown axes, normal axis) of the three slices
_PLANES = (((0, 1), 2), ((0, 2), 1), ((1, 2), 0))
_NAMES = ("x", "y", "z")


class SliceTriptych(QtWidgets.QWidget):
    """xy, xz and yz slices through a volume indexed ``[x, y, z]``; sliders move the planes.

    ``planes_changed`` is emitted with the three plane indices ``(ix, iy, iz)``.
    """

    planes_changed = QtCore.Signal(int, int, int)

    def __init__(self, parent=None, *, colour_title: str = ""):
        super().__init__(parent)
        self._grid = None
        self._volume: np.ndarray | None = None
        self._cmap = colormaps.DENSITY
        self._levels = (0.0, 1.0)
        self._unit = ""
        self.index = [0, 0, 0]                      # plane index along x, y, z
        self.plots, self.images, self.sliders, self.slider_labels = [], [], [], []
        self.cross_lines = []                       # per plot: lines showing the other two planes
        self.contours: list = []
        lay = QtWidgets.QGridLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        for k, ((a, b), normal) in enumerate(_PLANES):
            plot = make_plot(aspect_locked=True)
            img = pg.ImageItem(axisOrder="col-major")
            plot.addItem(img)
            lines = []
            for ax_in_plot, along in ((a, 90), (b, 0)):
                line = pg.InfiniteLine(angle=along, movable=False,
                                       pen=pg.mkPen("#8a8a8a", width=1, style=QtCore.Qt.PenStyle.DashLine))
                plot.addItem(line)
                lines.append((ax_in_plot, line))
            slider = QtWidgets.QSlider(QtCore.Qt.Orientation.Horizontal)
            slider.setObjectName(f"plane_{_NAMES[normal]}")
            slider.valueChanged.connect(lambda v, n=normal: self._on_slider(n, v))
            label = QtWidgets.QLabel("")
            box = QtWidgets.QVBoxLayout()
            box.addWidget(plot, 1)
            row = QtWidgets.QHBoxLayout()
            row.addWidget(label)
            row.addWidget(slider, 1)
            box.addLayout(row)
            lay.addLayout(box, k // 2, k % 2)
            self.plots.append(plot)
            self.images.append(img)
            self.sliders.append((normal, slider))
            self.slider_labels.append((normal, label))
            self.cross_lines.append(lines)
        self.colorbar = colorbar(self.images, self.plots[0], colormaps.colormap(self._cmap))
        self.extra = QtWidgets.QVBoxLayout()         # the fourth cell: for an isosurface or notes
        lay.addLayout(self.extra, 1, 1)

    # -- public ---------------------------------------------------------------------------
    def set_volume(self, grid, volume: np.ndarray, *, cmap: str, levels: tuple, length_unit: str,
                   colour_title: tuple = ("", ""), keep_planes: bool = True,
                   centre_on: np.ndarray | None = None) -> None:
        """Show ``volume`` (indexed [x, y, z] on ``grid``) with colour map ``cmap`` and ``levels``.

        New planes go through the weighted centre of ``centre_on`` (default: of ``volume``)."""
        first = self._grid is None or self._grid.shape != grid.shape or not keep_planes
        self._grid = grid
        self._volume = np.asarray(volume)
        self._cmap = cmap
        self._levels = (float(levels[0]), float(levels[1]))
        self._unit = length_unit
        if first:
            self.index = self._default_index(self._volume if centre_on is None else np.asarray(centre_on))
        self.colorbar.setColorMap(colormaps.colormap(cmap))
        self.colorbar.setLevels(self._levels)
        if colour_title[0]:
            set_colorbar_title(self.colorbar, colour_title[0], colour_title[1],
                               top=max(abs(self._levels[0]), abs(self._levels[1])))
        for k, ((a, b), _normal) in enumerate(_PLANES):
            set_titles = self.plots[k].getPlotItem().setLabel
            set_titles("bottom", axis_title(_NAMES[a], length_unit), color="#222222")
            set_titles("left", axis_title(_NAMES[b], length_unit), color="#222222")
        for normal, slider in self.sliders:
            slider.blockSignals(True)
            slider.setRange(0, grid.shape[normal] - 1)
            slider.setValue(self.index[normal])
            slider.blockSignals(False)
        self._refresh()

    def slice(self, plot_index: int) -> np.ndarray:
        """The 2D array shown in plot ``plot_index`` (0: xy, 1: xz, 2: yz), indexed [first, second]."""
        (_a, _b), normal = _PLANES[plot_index]
        return np.take(self._volume, self.index[normal], axis=normal)

    def set_plane(self, axis: int, index: int) -> None:
        """Move the plane normal to ``axis`` (0, 1, 2) to grid index ``index``."""
        for normal, slider in self.sliders:
            if normal == axis:
                slider.setValue(int(index))

    # -- internals ------------------------------------------------------------------------
    @staticmethod
    def _default_index(volume: np.ndarray) -> list:
        """Planes through the weighted centre of |value - median| (a state's centre, a well's middle)."""
        w = np.abs(np.nan_to_num(volume - np.nanmedian(volume)))
        total = float(w.sum())
        if total <= 0:
            return [n // 2 for n in volume.shape]
        out = []
        for axis, n in enumerate(volume.shape):
            other = tuple(a for a in range(volume.ndim) if a != axis)
            marginal = w.sum(axis=other)
            out.append(int(np.clip(round(float(marginal @ np.arange(n)) / total), 0, n - 1)))
        return out

    def _on_slider(self, normal: int, value: int) -> None:
        self.index[normal] = int(value)
        self._refresh()
        self.planes_changed.emit(*self.index)

    def _refresh(self) -> None:
        if self._volume is None:
            return
        grid = self._grid
        lut = colormaps.lookup_table(self._cmap)
        for k, ((a, b), _normal) in enumerate(_PLANES):
            data = self.slice(k)
            self.images[k].setImage(data, levels=self._levels, lut=lut, autoLevels=False)
            self.images[k].setRect(image_rect(grid, (a, b)))      # after setImage: the rect needs the shape
            for ax_in_plot, line in self.cross_lines[k]:
                line.setValue(float(grid.axes[ax_in_plot][self.index[ax_in_plot]]))
        unit = pretty_unit(self._unit)
        for normal, label in self.slider_labels:
            value = grid.axes[normal][self.index[normal]]
            label.setText(f"{_NAMES[normal]} = {fmt(value, 4)} {unit}".rstrip())
