"""Named parameters: a slider, a number field and a slider range for each; add, rename, remove.

Dragging a slider calls ``Session.set_parameter(name, value, live=True)`` at
every step (the session re-solves with a warm start, dropping requests it
cannot keep up with); releasing it, or a short pause after keyboard steps,
sends ``live=False`` so that the final value gets a full solve.
"""
from __future__ import annotations

from PySide6.QtCore import Qt, QTimer
from PySide6.QtWidgets import (
    QDialog,
    QDialogButtonBox,
    QFormLayout,
    QGridLayout,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QMenu,
    QPushButton,
    QSlider,
    QToolButton,
    QVBoxLayout,
    QWidget,
)

from core.errors import WellscapeError
from core.formatting import pretty_unit

from . import edits
from .common import MessageLabel, ValueField, apply_edit, fmt

__all__ = ["ParametersPanel", "ParameterRow"]

SLIDER_STEPS = 1000


class ParameterRow(QWidget):
    """One parameter: name, slider over its range, value field, and a menu."""

    def __init__(self, panel: ParametersPanel, name: str):
        super().__init__()
        self.panel = panel
        self.name = name
        self.lo, self.hi = 0.0, 1.0
        self.unit = ""
        self.name_label = QLabel(f"<b>{name}</b>")
        self.name_label.setMinimumWidth(42)
        self.slider = QSlider(Qt.Orientation.Horizontal)
        self.slider.setRange(0, SLIDER_STEPS)
        self.slider.setPageStep(SLIDER_STEPS // 20)
        self.slider.setSingleStep(SLIDER_STEPS // 200)
        self.field = ValueField(allow_formula=False, message=panel.message)
        self.field.setFixedWidth(82)
        self.field.setAlignment(Qt.AlignmentFlag.AlignRight)
        self.range_label = QLabel()
        self.range_label.setStyleSheet("color: palette(mid); font-size: small;")
        self.menu_button = QToolButton()
        self.menu_button.setText("...")
        self.menu_button.setToolTip(f"Rename, set the slider range or unit of, or remove {name}")
        self.menu_button.setPopupMode(QToolButton.ToolButtonPopupMode.InstantPopup)
        menu = QMenu(self.menu_button)
        menu.addAction("Slider range...", lambda: panel.edit_range_dialog(self.name))
        menu.addAction("Unit...", lambda: panel.unit_dialog(self.name))
        menu.addAction("Rename...", lambda: panel.rename_dialog(self.name))
        menu.addSeparator()
        menu.addAction("Remove", lambda: panel.remove(self.name))
        self.menu_button.setMenu(menu)

        grid = QGridLayout(self)
        grid.setContentsMargins(0, 2, 0, 2)
        grid.setHorizontalSpacing(6)
        grid.setVerticalSpacing(0)
        grid.addWidget(self.name_label, 0, 0)
        grid.addWidget(self.slider, 0, 1)
        grid.addWidget(self.field, 0, 2)
        grid.addWidget(self.menu_button, 0, 3)
        grid.addWidget(self.range_label, 1, 1)
        grid.setColumnStretch(1, 1)

        # slider events are coalesced: at most one live update per pass of the event loop, always
        # the latest position, so a busy window skips positions instead of falling behind
        self._live_pending: float | None = None
        self._live_timer = QTimer(self)
        self._live_timer.setSingleShot(True)
        self._live_timer.setInterval(0)
        self._live_timer.timeout.connect(self._send_live)
        self._settle = QTimer(self)
        self._settle.setSingleShot(True)
        self._settle.setInterval(350)
        self._settle.timeout.connect(self._settle_now)
        self.slider.valueChanged.connect(self._on_slider_moved)
        self.slider.sliderReleased.connect(self._on_slider_released)
        self.field.committed.connect(self._on_field_committed)

    # -- mapping -------------------------------------------------------------------------------
    def set_unit(self, unit: str) -> None:
        """Show the parameter's unit beside its name and range ("" when the project gives none)."""
        import html
        self.unit = unit
        shown = (f" <span style='color: palette(mid);'>[{html.escape(pretty_unit(unit))}]</span>" if unit
                 else "")
        self.name_label.setText(f"<b>{html.escape(self.name)}</b>{shown}")
        self.set_range(self.lo, self.hi)

    def set_range(self, lo: float, hi: float) -> None:
        self.lo, self.hi = float(lo), float(hi)
        unit = f" {pretty_unit(self.unit)}" if self.unit else ""
        self.range_label.setText(f"{fmt(self.lo, 4)} .. {fmt(self.hi, 4)}{unit}")
        hint = "" if self.unit else " (no unit given: set one with Unit... in the ... menu)"
        self.slider.setToolTip(f"{self.name}: drag to explore {fmt(self.lo)} .. {fmt(self.hi)}{unit}; "
                               f"the levels follow while you drag{hint}")

    def value_at(self, position: int) -> float:
        return self.lo + (self.hi - self.lo) * position / SLIDER_STEPS

    def position_of(self, value: float) -> int:
        if self.hi <= self.lo:
            return 0
        return int(round(max(0.0, min(1.0, (value - self.lo) / (self.hi - self.lo))) * SLIDER_STEPS))

    def show_value(self, value: float) -> None:
        """Show a value from the project without sending it back."""
        if not self.slider.isSliderDown():
            self.slider.blockSignals(True)
            self.slider.setValue(self.position_of(value))
            self.slider.blockSignals(False)
        if not self.field.hasFocus() or self.slider.isSliderDown():
            self.field.set_value(value)

    # -- user actions --------------------------------------------------------------------------
    def _on_slider_moved(self, position: int) -> None:
        v = self.value_at(position)
        self.field.set_value(v)
        self._live_pending = v
        if not self._live_timer.isActive():
            self._live_timer.start()
        if not self.slider.isSliderDown():
            self._settle.start()

    def _send_live(self) -> None:
        v, self._live_pending = self._live_pending, None
        if v is not None:
            self.panel.send(self.name, v, live=True)

    def flush(self) -> None:
        """Send a coalesced slider position now (tests, and before the release)."""
        self._live_timer.stop()
        self._send_live()

    def _on_slider_released(self) -> None:
        self._settle.stop()
        self._live_timer.stop()              # the final value follows as the end of the drag
        self._live_pending = None
        self.panel.send(self.name, self.value_at(self.slider.value()), live=False)

    def _settle_now(self) -> None:
        if not self.slider.isSliderDown():
            self._live_timer.stop()
            self._live_pending = None
            self.panel.send(self.name, self.value_at(self.slider.value()), live=False)

    def _on_field_committed(self, value) -> None:
        self.panel.send(self.name, float(value), live=False)


class _RangeDialog(QDialog):
    def __init__(self, parent, name: str, lo: float, hi: float):
        super().__init__(parent)
        self.setWindowTitle(f"Slider range of {name}")
        self.lo = QLineEdit(fmt(lo))
        self.hi = QLineEdit(fmt(hi))
        form = QFormLayout(self)
        form.addRow("from", self.lo)
        form.addRow("to", self.hi)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel)
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        form.addRow(buttons)


class ParametersPanel(QWidget):
    """All named parameters of the project, each with a slider, a field and its own range."""

    def __init__(self, session, parent: QWidget | None = None):
        super().__init__(parent)
        self.session = session
        self.rows: dict = {}
        self._shape = None
        self.message = MessageLabel()
        self.rows_box = QVBoxLayout()
        self.rows_box.setSpacing(0)
        self.empty_label = QLabel("No parameters yet. Name a value below, then use it in formulas "
                                  "and gate voltages.")
        self.empty_label.setWordWrap(True)
        self.empty_label.setStyleSheet("color: palette(mid);")

        self.new_name = QLineEdit()
        self.new_name.setPlaceholderText("new name")
        self.new_value = QLineEdit("0")
        self.new_value.setFixedWidth(70)
        self.add_button = QPushButton("Add")
        self.add_button.clicked.connect(self._on_add)
        self.new_name.returnPressed.connect(self._on_add)
        add_row = QHBoxLayout()
        add_row.addWidget(QLabel("Add parameter"))
        add_row.addWidget(self.new_name, 1)
        add_row.addWidget(QLabel("="))
        add_row.addWidget(self.new_value)
        add_row.addWidget(self.add_button)

        lay = QVBoxLayout(self)
        lay.addLayout(self.rows_box)
        lay.addWidget(self.empty_label)
        lay.addLayout(add_row)
        lay.addWidget(self.message)
        session.project_changed.connect(self.refresh)
        self.refresh()

    # -- session -> widgets --------------------------------------------------------------------
    def refresh(self) -> None:
        p = self.session.project
        shape = (tuple(p.parameters), tuple((k, tuple(v)) for k, v in sorted(p.parameter_ranges.items())),
                 tuple(sorted(p.parameter_units.items())))
        if shape != self._shape:
            self._rebuild(p)
            self._shape = shape
        for name, row in self.rows.items():
            row.field.set_parameters(p.parameters)
            row.show_value(p.parameters[name])

    def _rebuild(self, p) -> None:
        dragging = {n for n, r in self.rows.items() if r.slider.isSliderDown()}
        if dragging and tuple(p.parameters) == tuple(self.rows):
            for name, row in self.rows.items():        # same names: only ranges changed; keep the rows
                row.set_range(*edits.slider_range(p, name))
                row.set_unit(p.parameter_unit(name))
            return
        for row in self.rows.values():
            row.setParent(None)
            row.deleteLater()
        self.rows = {}
        for name in p.parameters:
            row = ParameterRow(self, name)
            row.set_range(*edits.slider_range(p, name))
            row.set_unit(p.parameter_unit(name))
            self.rows[name] = row
            self.rows_box.addWidget(row)
        self.empty_label.setVisible(not self.rows)

    # -- widgets -> session --------------------------------------------------------------------
    def send(self, name: str, value: float, *, live: bool) -> None:
        try:
            self.session.set_parameter(name, value, live=live)
        except WellscapeError as exc:
            self.message.show_error(str(exc))
        else:
            if self.message.is_error:
                self.message.clear_message()

    def add(self, name: str, value: float = 0.0) -> bool:
        try:
            v = float(value)
        except (TypeError, ValueError):
            self.message.show_error(f"the value of a new parameter must be a number, got {value!r}")
            return False
        return apply_edit(self.session, lambda p: edits.add_parameter(p, name, v), f"add parameter {name}",
                          self.message)

    def remove(self, name: str) -> bool:
        return apply_edit(self.session, lambda p: edits.remove_parameter(p, name), f"remove parameter {name}",
                          self.message)

    def rename(self, name: str, new: str) -> bool:
        return apply_edit(self.session, lambda p: edits.rename_parameter(p, name, new),
                          f"rename {name} to {new}", self.message)

    def set_range(self, name: str, lo, hi) -> bool:
        try:
            lo, hi = float(lo), float(hi)
        except (TypeError, ValueError):
            self.message.show_error("the slider range needs two numbers")
            return False
        return apply_edit(self.session, lambda p: edits.set_parameter_range(p, name, lo, hi),
                          f"slider range of {name}", self.message)

    def set_unit(self, name: str, unit: str) -> bool:
        return apply_edit(self.session, lambda p: edits.set_parameter_unit(p, name, unit), f"unit of {name}",
                          self.message)

    def unit_dialog(self, name: str) -> None:
        from PySide6.QtWidgets import QInputDialog
        unit, ok = QInputDialog.getText(self, "Parameter unit",
                                        f"Unit of {name}, shown in sliders, tables and axes (for example meV, V, "
                                        f"mV/nm; empty for none):", text=self.session.project.parameter_unit(name))
        if ok:
            self.set_unit(name, unit)

    def _on_add(self) -> None:
        if self.add(self.new_name.text(), self.new_value.text()):
            self.new_name.clear()
            self.new_value.setText("0")

    def edit_range_dialog(self, name: str) -> None:
        lo, hi = edits.slider_range(self.session.project, name)
        dlg = _RangeDialog(self, name, lo, hi)
        if dlg.exec() == QDialog.DialogCode.Accepted:
            self.set_range(name, dlg.lo.text(), dlg.hi.text())

    def rename_dialog(self, name: str) -> None:
        from PySide6.QtWidgets import QInputDialog
        new, ok = QInputDialog.getText(self, "Rename parameter",
                                       f"New name for {name} (every formula that uses it follows):", text=name)
        if ok and new.strip() and new.strip() != name:
            self.rename(name, new.strip())
