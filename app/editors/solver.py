"""Solver settings: number of states, kinetic scheme, tolerance."""
from __future__ import annotations

import dataclasses

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QComboBox, QFormLayout, QLabel, QLineEdit, QSpinBox, QVBoxLayout, QWidget

from core.kinetic import SCHEMES

from .common import MessageLabel, apply_edit, compact

__all__ = ["SolverPanel", "SCHEME_NAMES"]

SCHEME_NAMES = {
    "auto": "automatic",
    "fd2": "2nd-order differences",
    "fd4": "4th-order differences",
    "fd6": "6th-order differences",
    "fd8": "8th-order differences",
    "spectral": "spectral (sinc-DVR)",
}
SCHEME_TIPS = {
    "auto": "Chosen from the potential's smoothness: spectral for smooth potentials, 2nd-order differences "
            "for steps",
    "fd2": "Robust with steps and hard walls; converges as the grid spacing squared",
    "spectral": "Converges faster than any power of the spacing on smooth potentials (few points needed)",
}


class SolverPanel(QWidget):
    def __init__(self, session, parent: QWidget | None = None):
        super().__init__(parent)
        self.session = session
        self._loading = False
        self.message = MessageLabel()
        self.states = QSpinBox()
        self.states.setRange(1, 500)
        self.states.setKeyboardTracking(False)
        self.states.setToolTip("How many of the lowest states to find; a degenerate multiplet at the top "
                               "is always returned whole")
        self.states.valueChanged.connect(self._commit)
        self.scheme = QComboBox()
        for s in ("auto",) + tuple(SCHEMES):
            self.scheme.addItem(SCHEME_NAMES.get(s, s), s)
            if s in SCHEME_TIPS:
                self.scheme.setItemData(self.scheme.count() - 1, SCHEME_TIPS[s], Qt.ItemDataRole.ToolTipRole)
        compact(self.scheme)
        self.scheme.currentIndexChanged.connect(self._commit)
        self.tolerance = QLineEdit()
        self.tolerance.setToolTip("Residual tolerance relative to the energy scale (e.g. 1e-7); energies are "
                                  "accurate to about its square")
        self.tolerance.editingFinished.connect(self._commit)
        self.last = QLabel()
        self.last.setWordWrap(True)
        self.last.setStyleSheet("color: palette(mid);")
        form = QFormLayout()
        form.addRow("States", self.states)
        form.addRow("Kinetic scheme", self.scheme)
        form.addRow("Tolerance", self.tolerance)
        lay = QVBoxLayout(self)
        lay.addLayout(form)
        lay.addWidget(self.last)
        lay.addWidget(self.message)
        lay.addStretch(1)
        session.project_changed.connect(self.refresh)
        session.solved.connect(self._on_solved)
        self.refresh()

    def refresh(self) -> None:
        s = self.session.project.solver
        self._loading = True
        try:
            self.states.setValue(s.states)
            self.scheme.setCurrentIndex(max(0, self.scheme.findData(s.scheme)))
            if not self.tolerance.hasFocus():
                self.tolerance.setText(f"{s.tolerance:g}")
        finally:
            self._loading = False

    def _on_solved(self, result) -> None:
        spec = result.spectrum
        self.last.setText(f"Last solve: scheme {result.scheme} ({result.scheme_reason}); {spec.count} states "
                          f"in {spec.wall_time:.2f} s, {spec.iterations} iterations, largest residual "
                          f"{spec.residuals.max():.2g} {result.units.energy_unit}.")

    def _commit(self, *_args) -> None:
        if self._loading:
            return
        try:
            tol = float(self.tolerance.text())
        except ValueError:
            self.message.show_error(f"tolerance: expected a number such as 1e-7, got {self.tolerance.text()!r}")
            return
        solver = dataclasses.replace(self.session.project.solver, states=self.states.value(),
                                     scheme=self.scheme.currentData(), tolerance=tol)
        if solver == self.session.project.solver:
            return
        if not apply_edit(self.session, lambda p: dataclasses.replace(p, solver=solver), "solver settings",
                          self.message):
            self.refresh()
