"""Unit system and material: the table's values shown, effective mass and g-factor overridable."""
from __future__ import annotations

import dataclasses
import re

from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QCheckBox,
    QComboBox,
    QDoubleSpinBox,
    QFormLayout,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QVBoxLayout,
    QWidget,
)

from core.errors import InputError, WellscapeError
from core.materials import ALGAAS_X_MAX, get_material, material_names
from core.project import MaterialSpec
from core.units import UNIT_SYSTEMS

from .common import MessageLabel, ProjectPanel, ValueField, apply_edit, compact, fmt, parse_value

__all__ = ["MaterialPanel"]

CUSTOM = "custom (give the mass)"
ALLOY = "AlGaAs"
_ALLOY_RE = re.compile(r"^al(\d+(?:\.\d*)?|\.\d+)ga", re.IGNORECASE)


def _units_text(u) -> str:
    return f"{u.name} ({u.length_unit}, {u.energy_unit}, {u.mass_unit})"


class MaterialPanel(ProjectPanel):
    def __init__(self, session, parent: QWidget | None = None):
        super().__init__(parent)
        self.session = session
        self._loading = False
        self.message = MessageLabel()
        self.units = QComboBox()
        for name, u in UNIT_SYSTEMS.items():
            self.units.addItem(_units_text(u), name)
        for name, u in UNIT_SYSTEMS.items():
            self.units.setItemData(self.units.findData(name), f"lengths in {u.length_unit}, energies in "
                                   f"{u.energy_unit}, masses in {u.mass_unit}", Qt.ItemDataRole.ToolTipRole)
        compact(self.units)
        self.units.currentIndexChanged.connect(self._on_units)
        self.material = QComboBox()
        self.material.addItems([n for n in material_names() if n != ALLOY] + [ALLOY, CUSTOM])
        compact(self.material, 8)
        self.material.currentTextChanged.connect(self._on_material)
        self.fraction = QDoubleSpinBox()
        self.fraction.setRange(0.0, ALGAAS_X_MAX)
        self.fraction.setDecimals(3)
        self.fraction.setSingleStep(0.05)
        self.fraction.setValue(0.3)
        self.fraction.setKeyboardTracking(False)
        self.fraction.setToolTip(f"Al fraction x (direct-gap range 0 .. {ALGAAS_X_MAX})")
        self.fraction.valueChanged.connect(lambda _v: self._on_material(self.material.currentText()))
        self.fraction_label = QLabel("Al fraction x")
        self.table_values = QLabel()
        self.table_values.setWordWrap(True)
        self.table_values.setStyleSheet("color: palette(mid);")

        self.override_mass = QCheckBox("override")
        self.mass = QLineEdit()
        self.mass.setToolTip("One effective mass, or three (x, y, z) separated by commas; numbers or "
                             "formulas of parameters")
        self.override_mass.toggled.connect(self._on_mass_toggled)
        self.mass.editingFinished.connect(self._commit_material)
        self.override_g = QCheckBox("override")
        self.g_factor = ValueField(message=self.message)
        self.override_g.toggled.connect(self._on_g_toggled)
        self.g_factor.committed.connect(lambda _v: self._commit_material())
        self.mass_unit = QLabel()

        mrow = QHBoxLayout()
        mrow.addWidget(self.material, 1)
        mrow.addWidget(self.fraction_label)
        mrow.addWidget(self.fraction)
        mass_row = QHBoxLayout()
        mass_row.addWidget(self.mass, 1)
        mass_row.addWidget(self.mass_unit)
        mass_row.addWidget(self.override_mass)
        g_row = QHBoxLayout()
        g_row.addWidget(self.g_factor, 1)
        g_row.addWidget(self.override_g)
        form = QFormLayout()
        form.setRowWrapPolicy(QFormLayout.RowWrapPolicy.WrapLongRows)
        form.addRow("Units", self.units)
        form.addRow("Material", mrow)
        form.addRow("", self.table_values)
        form.addRow("Effective mass", mass_row)
        form.addRow("g-factor", g_row)
        self.hint = QLabel()
        self.hint.setWordWrap(True)
        self.hint.setStyleSheet("color: palette(mid);")
        lay = QVBoxLayout(self)
        lay.addLayout(form)
        lay.addWidget(self.hint)
        lay.addWidget(self.message)
        lay.addStretch(1)
        self.follow_session()

    # -- session -> widgets ----------------------------------------------------------------------
    def shown_key(self, p) -> tuple:
        return (p.units, p.material, tuple(p.parameters))

    def show_project(self, p) -> None:
        m = p.material
        u = self.session.units
        self.units.setCurrentIndex(max(0, self.units.findData(p.units)))
        self.mass_unit.setText(u.mass_unit)
        name = m.name
        if name is None:
            self.material.setCurrentText(CUSTOM)
        elif _ALLOY_RE.match(name.replace(" ", "")):
            self.material.setCurrentText(ALLOY)
            self.fraction.setValue(get_material(name).alloy_fraction or 0.0)
        else:
            try:
                self.material.setCurrentText(get_material(name).name)
            except WellscapeError:
                self.material.setCurrentText(name)
        alloy = self.material.currentText() == ALLOY
        self.fraction.setVisible(alloy)
        self.fraction_label.setVisible(alloy)
        table = None
        if name is not None:
            try:
                table = get_material(name)
            except WellscapeError:
                table = None
        if table is not None:
            masses = table.masses
            mass_text = fmt(masses[0], 4) if len(set(masses)) == 1 else ", ".join(fmt(v, 4) for v in masses)
            src = table.sources
            g_text = fmt(table.g_factor, 3) if table.g_factor is not None else "not tabulated"
            self.table_values.setText(
                f"Table: mass {mass_text} m0 (x, y, z), g-factor {g_text}, "
                f"permittivity {fmt(table.permittivity, 3) if table.permittivity is not None else '-'}. "
                f"{table.description}")
            self.table_values.setToolTip("\n".join(f"{k}: {v}" for k, v in src.items()))
        else:
            self.table_values.setText("No table values: give the mass (and g-factor if spin matters).")
            self.table_values.setToolTip("")
        self.override_mass.setChecked(m.mass is not None or name is None)
        self.override_mass.setEnabled(name is not None)
        if m.mass is not None:
            self.mass.setText(", ".join(fmt(v) for v in m.mass) if isinstance(m.mass, tuple) else fmt(m.mass))
        elif table is not None:
            self.mass.setText(", ".join(fmt(v, 4) for v in table.masses) if len(set(table.masses)) > 1
                              else fmt(table.masses[0], 4))
        self.mass.setReadOnly(not self.override_mass.isChecked())
        self.override_g.setChecked(m.g_factor is not None)
        self.g_factor.set_parameters(p.parameters)
        if m.g_factor is not None:
            self.g_factor.set_value(m.g_factor)
        else:
            self.g_factor.set_value(table.g_factor if table is not None and table.g_factor is not None else "")
        self.g_factor.setReadOnly(not self.override_g.isChecked())
        self.hint.setText("The material table gives electron masses in m0; with the atoms unit system "
                          "choose 'custom' and give the atom's mass in u." if p.units == "atoms"
                          and name is not None else "")

    # -- widgets -> session ----------------------------------------------------------------------
    def _on_units(self, _index: int) -> None:
        if self._loading:
            return
        units = self.units.currentData()
        if apply_edit(self.session, lambda p: dataclasses.replace(p, units=units), f"units: {units}", self.message):
            return
        self.redraw()

    def _material_name(self) -> str | None:
        text = self.material.currentText()
        if text == CUSTOM:
            return None
        if text == ALLOY:
            x = self.fraction.value()
            return f"Al{x:g}Ga{1 - x:g}As"
        return text

    def _parse_mass(self):
        parts = [s for s in self.mass.text().split(",") if s.strip()]
        params = self.session.project.parameters
        values = tuple(parse_value(s, params) for s in parts)
        if len(values) == 1:
            return values[0]
        if len(values) == 3:
            return values
        raise InputError("effective mass: give one value, or three (x, y, z) separated by commas")

    def _commit_material(self) -> None:
        if self._loading:
            return
        name = self._material_name()
        try:
            mass = self._parse_mass() if (self.override_mass.isChecked() or name is None) else None
            g = self.g_factor.value() if self.override_g.isChecked() else None
        except WellscapeError as exc:
            self.message.show_error(str(exc))
            return
        spec = MaterialSpec(name=name, mass=mass, g_factor=g,
                            permittivity=self.session.project.material.permittivity)   # no editor yet: kept
        if spec == self.session.project.material:
            return
        if not apply_edit(self.session, lambda p: dataclasses.replace(p, material=spec),
                          f"material: {name or 'custom'}", self.message):
            self.redraw()

    def _on_material(self, _text: str) -> None:
        if self._loading:
            return
        alloy = self.material.currentText() == ALLOY
        self.fraction.setVisible(alloy)
        self.fraction_label.setVisible(alloy)
        if self.material.currentText() == CUSTOM:
            self._loading = True
            self.override_mass.setChecked(True)
            self.mass.setReadOnly(False)
            self._loading = False
        self._commit_material()

    def _on_mass_toggled(self, on: bool) -> None:
        self.mass.setReadOnly(not on)
        if not self._loading:
            self._commit_material()

    def _on_g_toggled(self, on: bool) -> None:
        self.g_factor.setReadOnly(not on)
        if not self._loading:
            self._commit_material()
