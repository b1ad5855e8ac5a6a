"""The two-electron column of the level diagram: singlet and triplet levels and the exchange J.

Shows what :class:`core.two_electron.TwoElectronResult` gives (the session keeps it beside the
orbital result when the project has ``"electrons": 2``): singlet levels (S = 0, one state) in the
left column, triplet levels (S = 1, three states S_z = -1, 0, +1, drawn as three short bars) in
the right one, a table of the levels with their uncertainty from the basis, and
J = E(lowest triplet) - E(lowest singlet) with its uncertainty.  No physics here.
"""
from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtWidgets

from core.formatting import format_energy

from .common import StaleNote, axis_title, grey_plot, make_plot, pretty_unit, set_titles, stale_message

__all__ = ["TwoElectronPanel", "exchange_text", "spin_words"]

_PENS = {"singlet": pg.mkPen("#1d3557", width=3),
         "triplet": pg.mkPen("#7b2d26", width=3, style=QtCore.Qt.PenStyle.DashLine)}
_STALE_PEN = pg.mkPen("#8d99ae", width=3)
#: x extent of the singlet bar and of the triplet's three bars
_COLUMNS = {"singlet": [(0.0, 1.0)], "triplet": [(1.5, 1.8), (1.85, 2.15), (2.2, 2.5)]}


def spin_words(spin: str) -> str:
    """The words for a level's total spin."""
    return "singlet, S = 0" if spin == "singlet" else "triplet, S = 1 (3 states)"


def exchange_text(pair, energy_unit: str) -> str:
    """``J = E(lowest triplet) − E(lowest singlet) = 2.42 ± 0.16 µeV`` (readable sub-unit)."""
    head = "J = E(lowest triplet) − E(lowest singlet) = "
    j, dj = float(pair.exchange), float(pair.exchange_uncertainty)
    if not np.isfinite(j):
        return head + "n/a (no triplet among the levels found)"
    text = format_energy(j, dj, energy_unit)
    if not np.isfinite(dj):
        text += " (no uncertainty estimate: solve more states)"
    return head + text


class TwoElectronPanel(QtWidgets.QWidget):
    """Two-electron levels of ``session.two_electron``; hidden for one-electron projects."""

    def __init__(self, session, parent=None):
        super().__init__(parent)
        self.session = session
        self.pair = None
        self.unit = ""
        self.title = QtWidgets.QLabel("")
        self.title.setWordWrap(True)
        self.stale_note = StaleNote()
        self.exchange_label = QtWidgets.QLabel("")
        self.exchange_label.setWordWrap(True)
        self.exchange_label.setTextInteractionFlags(QtCore.Qt.TextInteractionFlag.TextSelectableByMouse)
        self.message = QtWidgets.QLabel("")
        self.message.setWordWrap(True)
        self.message.setStyleSheet("color: #9b1c1c;")
        self.plot = make_plot()
        item = self.plot.getPlotItem()
        item.hideAxis("bottom")
        item.setMouseEnabled(x=False, y=True)
        self.bar_items = {k: pg.PlotDataItem(pen=pen, connect="pairs") for k, pen in _PENS.items()}
        for it in self.bar_items.values():
            self.plot.addItem(it)
        self.column_titles = []
        for text, x in (("S = 0", 0.5), ("S = 1 (×3)", 2.0)):
            t = pg.TextItem(text, anchor=(0.5, 0.0), color="#1b1b1b")
            self.plot.addItem(t)
            self.column_titles.append((t, x))
        self.table = QtWidgets.QTableWidget(0, 4)
        self.table.verticalHeader().setVisible(False)
        self.table.setEditTriggers(QtWidgets.QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.horizontalHeader().setStretchLastSection(True)
        lay = QtWidgets.QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        for w in (self.title, self.stale_note, self.exchange_label, self.message):
            lay.addWidget(w)
        lay.addWidget(self.plot, 3)
        lay.addWidget(self.table, 2)
        if hasattr(session, "two_electron_changed"):
            session.two_electron_changed.connect(self.refresh)
            session.stale_changed.connect(self._update_stale)
        self.refresh()

    @property
    def stale(self) -> bool:
        return self.stale_note.stale

    def refresh(self) -> None:
        pair = getattr(self.session, "two_electron", None)
        message = getattr(self.session, "two_electron_message", "")
        self.setVisible(pair is not None or bool(message))
        self.message.setText(message)
        self.message.setVisible(bool(message))
        self.pair = pair
        if pair is None:
            self.title.setText("<b>Two electrons</b>")
            self.exchange_label.setText("")
            self.table.setRowCount(0)
            for it in self.bar_items.values():
                it.setData([], [])
            self._update_stale()
            return
        result = self.session.result
        self.unit = result.units.energy_unit if result is not None else ""
        u = pretty_unit(self.unit)
        conv = "converged" if pair.converged else "basis budget reached, tolerance not met"
        self.title.setText(f"<b>Two electrons</b> · configuration interaction in {pair.orbitals} orbitals ({conv}) "
                           f"· ε_r = {pair.permittivity:g}")
        self.title.setToolTip(f"{pair.stop_reason}; ε_r from {pair.permittivity_source}")
        text = "<b>" + exchange_text(pair, self.unit) + "</b>"
        if pair.zeeman_splitting is not None:
            text += (f"<br>triplet split by the Zeeman energy (S_z = −1, 0, +1): "
                     f"{format_energy(pair.zeeman_splitting, float('nan'), self.unit)} per step")
        self.exchange_label.setText(text)
        self._fill_table(u)
        self._update_stale()

    def _fill_table(self, u: str) -> None:
        pair = self.pair
        self.table.setHorizontalHeaderLabels(["level", "spin", f"E [{u}]", f"± [{u}]"])
        self.table.setRowCount(len(pair.energies))
        for i, (e, s, d) in enumerate(zip(pair.energies, pair.spin, pair.energy_uncertainty)):
            cells = [str(i), spin_words(s), f"{e:.6f}", f"{d:.2g}" if np.isfinite(d) else "n/a"]
            for c, v in enumerate(cells):
                self.table.setItem(i, c, QtWidgets.QTableWidgetItem(v))
        self.table.resizeColumnsToContents()

    def _update_stale(self) -> None:
        pair = self.pair
        text = ""
        if pair is not None and not self.session.two_electron_is_current:
            text = stale_message(self.session, short=True) or "Out of date — greyed until solved again"
        self.stale_note.show_text(text)
        grey_plot(self.plot, bool(text))
        self.table.setStyleSheet("color: #6c757d;" if text else "")
        self._draw()

    def _draw(self) -> None:
        pair = self.pair
        if pair is None:
            return
        stale = self.stale_note.stale
        e = np.asarray(pair.energies, dtype=float)
        for kind, it in self.bar_items.items():
            xs, ys = [], []
            for energy in e[[s == kind for s in pair.spin]]:
                for x0, x1 in _COLUMNS[kind]:
                    xs += [x0, x1]
                    ys += [energy, energy]
            it.setPen(_STALE_PEN if stale else _PENS[kind])
            it.setData(np.array(xs, dtype=float), np.array(ys, dtype=float))
        lo, hi = float(e.min()), float(e.max())
        pad = 0.1 * (hi - lo) if hi > lo else max(abs(hi), 1.0) * 0.05
        vb = self.plot.getPlotItem().getViewBox()
        vb.setXRange(-0.3, 2.8, padding=0)
        vb.setYRange(lo - pad, hi + 2.0 * pad, padding=0)
        for t, x in self.column_titles:
            t.setPos(x, hi + 2.0 * pad)
        set_titles(self.plot, None, axis_title("E (two electrons)", self.unit))

    def level_rows(self) -> list:
        """``(spin words, energy text)`` of every row of the table (for tests and export)."""
        return [(self.table.item(r, 1).text(), self.table.item(r, 2).text()) for r in range(self.table.rowCount())]
