"""The editor of an oscillator term: hbar*omega and the centre along each axis."""
from __future__ import annotations

import dataclasses

from PySide6.QtWidgets import QFormLayout, QLabel, QWidget

from core.project import OscillatorTerm

from . import edits
from .common import MessageLabel, TermEditor, ValueField, apply_edit

__all__ = ["OscillatorEditor"]

AXES = "xyz"


class OscillatorEditor(TermEditor):
    """V = sum over axes of 1/2 m* omega_i^2 (x_i - c_i)^2, written by its quanta hbar*omega_i and
    centre c_i (numbers or formulas of parameters); m* is the project's material mass along each axis."""

    term_class = OscillatorTerm

    def __init__(self, session, parent: QWidget | None = None):
        super().__init__(session, parent)
        self.message = MessageLabel()
        self.quanta = [ValueField(message=self.message) for _ in AXES]
        self.centre = [ValueField(message=self.message) for _ in AXES]
        self.form = QFormLayout(self)
        self.form.setContentsMargins(0, 0, 0, 0)
        self.labels: list = []
        for i, axis in enumerate(AXES):
            self.quanta[i].committed.connect(lambda v, i=i: self._edit("hbar_omega", i, v))
            self.centre[i].committed.connect(lambda v, i=i: self._edit("centre", i, v))
            self.quanta[i].setToolTip(f"The oscillator quantum along {axis}, in the energy unit (0: no confinement "
                                      f"along {axis}); a number or a formula of parameters")
            self.centre[i].setToolTip(f"Where the oscillator is centred along {axis}, in the length unit")
            lq, lc = QLabel(), QLabel()
            self.labels.append((lq, lc))
            self.form.addRow(lq, self.quanta[i])
            self.form.addRow(lc, self.centre[i])
        note = QLabel("The mass is the material's along each axis, so the quanta stay right when the "
                      "material changes.")
        note.setWordWrap(True)
        self.form.addRow(note)
        self.form.addRow(self.message)

    def refresh(self) -> None:
        t = self.term()
        if t is None:
            return
        u = self.session.units
        ndim = len(t.hbar_omega)
        self._loading = True
        try:
            for i, axis in enumerate(AXES):
                shown = i < ndim
                lq, lc = self.labels[i]
                lq.setText(f"ħω along {axis} [{u.energy_unit}]")
                lc.setText(f"centre {axis} [{u.length_unit}]")
                for w in (lq, lc, self.quanta[i], self.centre[i]):
                    w.setVisible(shown)
                if shown:
                    for field, value in ((self.quanta[i], t.hbar_omega[i]), (self.centre[i], t.centre[i])):
                        field.set_parameters(self.session.project.parameters)
                        field.set_value(value)
        finally:
            self._loading = False

    def _edit(self, key: str, axis: int, value) -> None:
        t = self.term()
        if self._loading or t is None:
            return
        values = list(getattr(t, key))
        if values[axis] == value:
            return
        values[axis] = value
        i = self.term_index
        new = dataclasses.replace(t, **{key: tuple(values)})
        if not apply_edit(self.session, lambda p: edits.replace_term(p, i, new), "edit oscillator term",
                          self.message):
            self.refresh()
