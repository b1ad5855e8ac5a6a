"""J against the swept value, on a log scale, for a sweep of a two-electron project.

Draws ``SweepResult.two_electron`` (core.two_electron.sweep_columns: "exchange" and
"exchange_uncertainty" per point) as it is: error bars from the uncertainty, and points where J is
not positive (no logarithm) or not a number (no triplet among the levels found) drawn as open
triangles on the bottom edge and named in the note under the plot, never dropped silently.
"""
from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtWidgets

from core.exchange_series import exchange_points
from core.export import parameter_unit
from core.formatting import readable_energy

from .common import axis_title, fmt, grey_plot, make_plot, set_titles

__all__ = ["ExchangePlot", "exchange_points"]

_PEN = pg.mkPen("#1d3557", width=2)
_ERR_PEN = pg.mkPen("#6c757d", width=1.5)
_MISSING_PEN = pg.mkPen("#9b1c1c", width=1.5)


class ExchangePlot(QtWidgets.QWidget):
    """A small log-scale plot of J along a sweep, with a note for the points it cannot place."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.plot = make_plot()
        item = self.plot.getPlotItem()
        item.setLogMode(x=False, y=True)
        item.setMouseEnabled(x=False, y=False)
        self.curve = pg.PlotDataItem(pen=_PEN, symbol="o", symbolSize=6, symbolPen=None, symbolBrush="#1d3557",
                                     connect="finite")
        self.errors = pg.ErrorBarItem(x=np.zeros(0), y=np.zeros(0), height=np.zeros(0), beam=0.0, pen=_ERR_PEN)
        self.missing = pg.ScatterPlotItem(symbol="t", size=11, pen=_MISSING_PEN, brush=None)
        for it in (self.errors, self.curve):
            item.addItem(it)
        item.addItem(self.missing)
        self.note = QtWidgets.QLabel("")
        self.note.setWordWrap(True)
        self.note.setTextInteractionFlags(QtCore.Qt.TextInteractionFlag.TextSelectableByMouse)
        lay = QtWidgets.QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.addWidget(self.plot, 1)
        lay.addWidget(self.note)
        self.hide()

    def show_sweep(self, sweep) -> None:
        if getattr(sweep, "two_electron", None) is None:
            self.hide()
            return
        pts = exchange_points(sweep)
        x, j, dj, ok = pts["x"], pts["exchange"], pts["uncertainty"], pts["positive"]
        unit = sweep.units.energy_unit
        factor, shown = readable_energy(float(np.max(np.abs(j[ok]))) if ok.any() else 0.0, unit)
        js, djs = j * factor, dj * factor
        xu = parameter_unit(sweep)
        x_title = axis_title(sweep.parameter, xu) if xu else f"{sweep.parameter} (swept parameter)"
        set_titles(self.plot, x_title, axis_title("J", shown) + " (log scale)")
        self.curve.setData(x[ok], js[ok])
        ly = np.log10(js[ok]) if ok.any() else np.zeros(0)
        with np.errstate(invalid="ignore", divide="ignore"):
            top = np.log10(js[ok] + djs[ok]) - ly
            low = js[ok] - djs[ok]
            # an error bar reaching J <= 0 runs to the bottom edge of the plot
            floor = (float(ly.min()) - 0.5) if ly.size else 0.0
            bottom = np.where(low > 0, ly - np.log10(np.where(low > 0, low, 1.0)), ly - floor)
        has = np.isfinite(top)
        self.errors.setData(x=x[ok][has], y=ly[has], height=None, top=top[has], bottom=bottom[has])
        bad = ~ok
        self.missing.setData(x[bad], np.full(int(bad.sum()), floor))
        self.note.setText(self._note(sweep.parameter, xu, pts, shown, factor))
        self.show()

    @staticmethod
    def _note(name: str, xu: str, pts: dict, shown: str, factor: float) -> str:
        at = lambda i: f"{name} = {fmt(float(pts['x'][i]), 4)}{(' ' + xu) if xu else ''}"  # noqa: E731
        parts = ["J = E(lowest triplet) − E(lowest singlet) at each point; bars: its uncertainty from the basis"]
        nonpos = np.flatnonzero(~pts["positive"] & ~pts["no_triplet"])
        if nonpos.size:
            parts.append("▽ J ≤ 0 at " + ", ".join(f"{at(i)} (J = {fmt(pts['exchange'][i] * factor, 3)} {shown})"
                                                 for i in nonpos) + " — not on the log scale")
        none = np.flatnonzero(pts["no_triplet"])
        if none.size:
            parts.append("▽ no triplet at " + ", ".join(at(i) for i in none) + " among the levels found")
        unknown = np.flatnonzero(pts["positive"] & ~np.isfinite(pts["uncertainty"]))
        if unknown.size:
            parts.append("no uncertainty estimate at " + ", ".join(at(i) for i in unknown))
        return "; ".join(parts) + "."

    def set_stale(self, stale: bool) -> None:
        grey_plot(self.plot, stale)
