"""The ordered list of potential terms (add, remove, reorder, enable, rename) and the
editor of the selected term (harmonic oscillator, formula, surface gates, imported map, uniform field)."""
from __future__ import annotations

import dataclasses
import os
from pathlib import Path

from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QAbstractItemView,
    QComboBox,
    QFileDialog,
    QFormLayout,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QMenu,
    QPushButton,
    QStackedWidget,
    QToolButton,
    QTreeWidget,
    QTreeWidgetItem,
    QVBoxLayout,
    QWidget,
)

from core.maps import INTERPOLATION_METHODS
from core.project import FieldTerm, FormulaTerm, GatesTerm, MapTerm, OscillatorTerm

from . import edits
from .common import MessageLabel, TermEditor, ValueField, apply_edit, compact, fmt
from .formula import FormulaEditor
from .gates import GatesEditor
from .oscillator import OscillatorEditor

__all__ = ["TermsPanel", "MapEditor", "KIND_NAMES"]

KIND_NAMES = {"oscillator": "harmonic oscillator", "formula": "formula", "gates": "surface gates",
              "map": "imported map", "uniform_field": "uniform field"}
SHOWN_KIND_NAMES = dict(KIND_NAMES, points="scattered points")    # kinds shown but not offered in "add"


class MapEditor(TermEditor):
    """An imported potential map: its file, its own corners, a scale and the interpolation."""

    term_class = MapTerm

    def __init__(self, session, parent: QWidget | None = None):
        super().__init__(session, parent)
        self.message = MessageLabel()
        self.file = QLineEdit()
        self.file.setToolTip("A .npy, .npz, .csv or .txt array; a relative path is relative to the project file")
        self.file.editingFinished.connect(lambda: self._edit(file=self.file.text().strip()))
        self.browse = QPushButton("Choose...")
        self.browse.clicked.connect(self._on_browse)
        self.array = QLineEdit()
        self.array.setPlaceholderText("(only for .npz with several arrays)")
        self.array.editingFinished.connect(lambda: self._edit(array=self.array.text().strip() or None))
        self.lower = QLineEdit()
        self.upper = QLineEdit()
        for w, key in ((self.lower, "lower"), (self.upper, "upper")):
            w.setToolTip("The map's own corner, one number per axis separated by commas (length unit)")
            w.editingFinished.connect(lambda w=w, key=key: self._edit_corner(key, w.text()))
        self.scale = ValueField(message=self.message)
        self.scale.committed.connect(lambda v: self._edit(scale=v))
        self.method = QComboBox()
        self.method.addItems(list(INTERPOLATION_METHODS))
        compact(self.method, 6)
        self.method.currentTextChanged.connect(lambda m: self._edit(method=m))
        frow = QHBoxLayout()
        frow.addWidget(self.file, 1)
        frow.addWidget(self.browse)
        form = QFormLayout(self)
        form.setRowWrapPolicy(QFormLayout.RowWrapPolicy.WrapLongRows)
        form.setContentsMargins(0, 0, 0, 0)
        form.addRow("File", frow)
        form.addRow("Array name", self.array)
        form.addRow("Map corner (lower)", self.lower)
        form.addRow("Map corner (upper)", self.upper)
        form.addRow("Scale (energy unit per map unit)", self.scale)
        form.addRow("Interpolation", self.method)
        form.addRow(self.message)

    def refresh(self) -> None:
        t = self.term()
        if t is None:
            return
        self._loading = True
        try:
            self.file.setText(t.file)
            self.array.setText(t.array or "")
            self.lower.setText(", ".join(fmt(v) for v in t.lower))
            self.upper.setText(", ".join(fmt(v) for v in t.upper))
            self.scale.set_parameters(self.session.project.parameters)
            self.scale.set_value(t.scale)
            self.method.setCurrentText(t.method)
        finally:
            self._loading = False

    def _edit(self, **changes) -> None:
        t = self.term()
        if self._loading or t is None:
            return
        if all(getattr(t, k) == v for k, v in changes.items()):
            return
        i = self.term_index
        if not apply_edit(self.session, lambda p: edits.replace_term(p, i, dataclasses.replace(t, **changes)),
                          "edit map term", self.message):
            self.refresh()

    def _edit_corner(self, key: str, text: str) -> None:
        try:
            values = tuple(float(v) for v in text.replace(";", ",").split(",") if v.strip())
        except ValueError:
            self.message.show_error(f"map corner: expected numbers separated by commas, got {text!r}")
            return
        self._edit(**{key: values})

    def _on_browse(self) -> None:
        base = self.session.project.base_dir or os.getcwd()
        name, _ = QFileDialog.getOpenFileName(self, "Potential map", base,
                                              "Arrays (*.npy *.npz *.csv *.txt);;All files (*)")
        if name:
            from core.maps import allow_map_folder
            allow_map_folder(Path(name).parent)     # chosen here by the user: an explicit permission
            try:
                rel = os.path.relpath(name, base)
            except ValueError:
                rel = name
            self.file.setText(rel if not rel.startswith("..") else str(Path(name)))
            self._edit(file=self.file.text())


class TermsPanel(QWidget):
    """The potential is the sum of the enabled terms, in this order."""

    def __init__(self, session, parent: QWidget | None = None):
        super().__init__(parent)
        self.session = session
        self._loading = False
        self.message = MessageLabel()
        self.tree = QTreeWidget()
        self.tree.setColumnCount(2)
        self.tree.setHeaderLabels(["term (tick to include)", "kind"])
        self.tree.setRootIsDecorated(False)
        self.tree.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.tree.setEditTriggers(QAbstractItemView.EditTrigger.DoubleClicked
                                  | QAbstractItemView.EditTrigger.EditKeyPressed)
        self.tree.setMinimumHeight(90)
        self.tree.setMaximumHeight(150)
        self.tree.setColumnWidth(0, 180)
        self.tree.itemChanged.connect(self._on_item_changed)
        self.tree.itemSelectionChanged.connect(self._show_selected)

        self.add_button = QToolButton()
        self.add_button.setText("Add term")
        self.add_button.setPopupMode(QToolButton.ToolButtonPopupMode.InstantPopup)
        menu = QMenu(self.add_button)
        for kind, name in KIND_NAMES.items():
            menu.addAction(name, lambda k=kind: self.add(k))
        self.add_button.setMenu(menu)
        self.remove_button = QPushButton("Remove")
        self.up_button = QPushButton("Up")
        self.down_button = QPushButton("Down")
        self.remove_button.clicked.connect(lambda: self.remove(self.selected()))
        self.up_button.clicked.connect(lambda: self.move(self.selected(), -1))
        self.down_button.clicked.connect(lambda: self.move(self.selected(), +1))
        brow = QHBoxLayout()
        brow.addWidget(self.add_button)
        brow.addWidget(self.remove_button)
        brow.addStretch(1)
        brow.addWidget(self.up_button)
        brow.addWidget(self.down_button)

        self.formula = FormulaEditor()
        self.formula.applied.connect(self._on_formula_applied)
        self.gates = GatesEditor(session)
        self.map = MapEditor(session)
        self.oscillator = OscillatorEditor(session)
        self.field_note = QLabel("This term adds the uniform electric field (or, for atoms, a uniform force "
                                 "such as gravity) set under Fields: V = -q F.r.")
        self.field_note.setWordWrap(True)
        self.nothing = QLabel("Select a term to edit it.")
        self.other_note = QLabel("This term has no editor here yet; change it in the project file.")
        self.other_note.setWordWrap(True)
        self.detail = QStackedWidget()
        for w in (self.nothing, self.formula, self.gates, self.map, self.oscillator, self.field_note,
                  self.other_note):
            self.detail.addWidget(w)
        self.detail_title = QLabel()
        self.detail_title.setWordWrap(True)

        lay = QVBoxLayout(self)
        lay.addWidget(self.tree)
        lay.addLayout(brow)
        lay.addWidget(self.message)
        lay.addWidget(self.detail_title)
        lay.addWidget(self.detail)
        lay.addStretch(1)
        session.project_changed.connect(self.refresh)
        self.refresh()

    # -- session -> widgets ----------------------------------------------------------------------
    def selected(self) -> int | None:
        items = self.tree.selectedItems()
        return self.tree.indexOfTopLevelItem(items[0]) if items else None

    def refresh(self) -> None:
        p = self.session.project
        keep = self.selected()
        self._loading = True
        try:
            if self.tree.topLevelItemCount() != len(p.potential):
                self.tree.clear()
                for _ in p.potential:
                    item = QTreeWidgetItem()
                    item.setFlags(item.flags() | Qt.ItemFlag.ItemIsEditable | Qt.ItemFlag.ItemIsUserCheckable)
                    self.tree.addTopLevelItem(item)
            for i, t in enumerate(p.potential):
                item = self.tree.topLevelItem(i)
                if item.text(0) != t.label:
                    item.setText(0, t.label)
                item.setCheckState(0, Qt.CheckState.Checked if t.enabled else Qt.CheckState.Unchecked)
                item.setText(1, SHOWN_KIND_NAMES.get(t.kind, t.kind))
                item.setToolTip(0, "Double-click to rename; untick to leave this term out of the potential")
            if p.potential:
                sel = keep if keep is not None and keep < len(p.potential) else 0
                if self.selected() != sel:
                    self.tree.setCurrentItem(self.tree.topLevelItem(sel))
        finally:
            self._loading = False
        self._show_selected()

    def _show_selected(self) -> None:
        if self._loading:
            return
        p = self.session.project
        i = self.selected()
        n = len(p.potential)
        self.remove_button.setEnabled(i is not None)
        self.up_button.setEnabled(i is not None and i > 0)
        self.down_button.setEnabled(i is not None and i < n - 1)
        if i is None or i >= n:
            self.detail.setCurrentWidget(self.nothing)
            self.detail_title.setText("")
            return
        t = p.potential[i]
        self.detail_title.setText(f"<b>{t.label}</b> ({SHOWN_KIND_NAMES.get(t.kind, t.kind)}, "
                                  f"energy in {self.session.units.energy_unit})")
        if isinstance(t, FormulaTerm):
            self.formula.set_parameters(p.parameters)
            same_term = self.formula.property("term_index") == i
            editing = same_term and self.formula.text() != self.formula._applied_text
            if not editing or t.formula != self.formula._applied_text:
                self.formula.set_formula(t.formula)
            self.formula.setProperty("term_index", i)
            self.detail.setCurrentWidget(self.formula)
        elif isinstance(t, GatesTerm):
            self.gates.set_term(i)
            self.detail.setCurrentWidget(self.gates)
        elif isinstance(t, MapTerm):
            self.map.set_term(i)
            self.detail.setCurrentWidget(self.map)
        elif isinstance(t, OscillatorTerm):
            self.oscillator.set_term(i)
            self.detail.setCurrentWidget(self.oscillator)
        elif isinstance(t, FieldTerm):
            self.detail.setCurrentWidget(self.field_note)
        else:                       # e.g. a "points" term (scattered potential samples)
            self.detail.setCurrentWidget(self.other_note)

    # -- widgets -> session ----------------------------------------------------------------------
    def _apply(self, make, text) -> bool:
        ok = apply_edit(self.session, make, text, self.message)
        if not ok:
            self.refresh()
        return ok

    def add(self, kind: str) -> bool:
        def make(p):
            return edits.add_term(p, edits.new_term(p, kind))
        ok = self._apply(make, f"add {KIND_NAMES.get(kind, kind)} term")
        if ok:
            self.tree.setCurrentItem(self.tree.topLevelItem(self.tree.topLevelItemCount() - 1))
        return ok

    def remove(self, index: int | None) -> bool:
        if index is None:
            return False
        return self._apply(lambda p: edits.remove_term(p, index), "remove term")

    def move(self, index: int | None, step: int) -> bool:
        if index is None:
            return False
        ok = self._apply(lambda p: edits.move_term(p, index, index + step), "reorder terms")
        if ok:
            self.tree.setCurrentItem(self.tree.topLevelItem(index + step))
        return ok

    def set_enabled(self, index: int, enabled: bool) -> bool:
        return self._apply(lambda p: edits.set_term_enabled(p, index, enabled),
                           "include term" if enabled else "leave out term")

    def rename(self, index: int, label: str) -> bool:
        return self._apply(lambda p: edits.rename_term(p, index, label), "rename term")

    def _on_item_changed(self, item: QTreeWidgetItem, column: int) -> None:
        if self._loading:
            return
        i = self.tree.indexOfTopLevelItem(item)
        t = self.session.project.potential[i]
        enabled = item.checkState(0) == Qt.CheckState.Checked
        if enabled != t.enabled:
            self.set_enabled(i, enabled)
        elif item.text(0) != t.label:
            self.rename(i, item.text(0))

    def _on_formula_applied(self, text: str) -> None:
        i = self.selected()
        if i is None:
            return
        t = self.session.project.potential[i]
        if isinstance(t, FormulaTerm):
            self._apply(lambda p: edits.replace_term(p, i, dataclasses.replace(t, formula=text)),
                        f"edit formula of {t.label}")
