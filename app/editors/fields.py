"""Uniform electric field (or, for atoms, a uniform force such as gravity), magnetic field and spin."""
from __future__ import annotations

import dataclasses

from PySide6.QtWidgets import QCheckBox, QFormLayout, QHBoxLayout, QLabel, QPushButton, QVBoxLayout, QWidget

from core.project import FieldTerm

from . import edits
from .common import MessageLabel, ProjectPanel, ValueField, apply_edit

__all__ = ["FieldsPanel"]

AXES = ("x", "y", "z")


class FieldsPanel(ProjectPanel):
    def __init__(self, session, parent: QWidget | None = None):
        super().__init__(parent)
        self.session = session
        self._loading = False
        self.message = MessageLabel()
        self.electric = [ValueField(message=self.message) for _ in AXES]
        self.magnetic = [ValueField(message=self.message) for _ in AXES]
        for a, f in enumerate(self.electric):
            f.committed.connect(lambda v, a=a: self._set_component("electric_field", a, v))
        for a, f in enumerate(self.magnetic):
            f.committed.connect(lambda v, a=a: self._set_component("magnetic_field", a, v))
        self.electric_title = QLabel()
        self.electric_title.setWordWrap(True)
        self.magnetic_title = QLabel()
        self.magnetic_title.setWordWrap(True)
        erow, mrow = QHBoxLayout(), QHBoxLayout()
        self.electric_labels = []
        for a in range(3):
            lab = QLabel(AXES[a])
            self.electric_labels.append(lab)
            erow.addWidget(lab)
            erow.addWidget(self.electric[a])
            mrow.addWidget(QLabel(AXES[a]))
            mrow.addWidget(self.magnetic[a])
        self.term_hint = QLabel()
        self.term_hint.setWordWrap(True)
        self.add_term_button = QPushButton("Add a uniform-field term")
        self.add_term_button.clicked.connect(self.add_field_term)
        self.spin = QCheckBox("Include spin (Zeeman splitting)")
        self.spin.setToolTip("Each orbital level splits into two, by g* mu_B B")
        self.spin.toggled.connect(self._on_spin)
        form = QFormLayout()
        form.addRow(self.electric_title)
        form.addRow(erow)
        form.addRow(self.term_hint)
        form.addRow(self.add_term_button)
        form.addRow(self.magnetic_title)
        form.addRow(mrow)
        form.addRow(self.spin)
        lay = QVBoxLayout(self)
        lay.addLayout(form)
        note = QLabel("Each component is a number or a formula of parameters (e.g. B, to sweep it).")
        note.setWordWrap(True)
        lay.addWidget(note)
        lay.addWidget(self.message)
        lay.addStretch(1)
        self.follow_session()

    def shown_key(self, p) -> tuple:
        return (p.electric_field, p.magnetic_field, p.spin, p.units, tuple(p.parameters),
                tuple((t.kind, t.enabled) for t in p.potential))

    def show_project(self, p) -> None:
        u = self.session.units
        what = "Electric field" if u.charged else "Uniform force (e.g. gravity)"
        self.electric_title.setText(f"<b>{what}</b> [{u.field_unit}]")
        self.magnetic_title.setText(f"<b>Magnetic field</b> [{u.magnetic_unit}] (orbital effect through "
                                    f"Peierls phases; B along z acts in the xy plane)")
        ef = tuple(p.electric_field) + (0.0,) * (3 - len(p.electric_field))
        for a in range(3):
            on = a < max(len(p.electric_field), p.grid.ndim)
            self.electric[a].setVisible(on)
            self.electric_labels[a].setVisible(on)
            self.electric[a].set_parameters(p.parameters)
            self.electric[a].set_value(ef[a])
            self.magnetic[a].set_parameters(p.parameters)
            self.magnetic[a].set_value(p.magnetic_field[a])
        has_term = any(isinstance(t, FieldTerm) and t.enabled for t in p.potential)
        nonzero = any(isinstance(v, str) or float(v) != 0.0 for v in p.electric_field)
        self.term_hint.setText("" if has_term or not nonzero else
                               "This field acts only through a uniform-field term in the potential, "
                               "and there is none enabled.")
        self.term_hint.setStyleSheet("color: #9a5b00;")
        self.add_term_button.setVisible(not has_term)
        self.spin.setChecked(p.spin)

    def _set_component(self, which: str, axis: int, value) -> None:
        if self._loading:
            return

        def make(p):
            values = list(getattr(p, which))
            while len(values) <= axis:
                values.append(0.0)
            values[axis] = value
            return dataclasses.replace(p, **{which: tuple(values)})
        label = "electric field" if which == "electric_field" else "magnetic field"
        if not apply_edit(self.session, make, f"{label} {AXES[axis]}", self.message):
            self.redraw()

    def add_field_term(self) -> bool:
        return apply_edit(self.session, lambda p: edits.add_term(p, edits.new_term(p, "uniform_field")),
                          "add uniform-field term", self.message)

    def _on_spin(self, on: bool) -> None:
        if self._loading:
            return
        apply_edit(self.session, lambda p: dataclasses.replace(p, spin=bool(on)),
                   "include spin" if on else "leave out spin", self.message)
