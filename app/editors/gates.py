"""Surface gates of a gates term: depth, lever arm, a table of gates and the vertices of each.

Every cell accepts a number or a formula of parameters (``VP + eps/2``).  A
rectangle is given by two opposite corners; "Make polygon" turns it into a
four-vertex outline whose vertices can be edited, added and removed.
"""
from __future__ import annotations

import dataclasses

from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QAbstractItemView,
    QFormLayout,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QPushButton,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from core.errors import WellscapeError
from core.project import GatesTerm

from . import edits
from .common import MessageLabel, TermEditor, ValueField, apply_edit, fmt, parse_value

__all__ = ["GatesEditor"]


class GatesEditor(TermEditor):
    """Edit the gates term at ``term_index`` of the session's project."""

    term_class = GatesTerm

    def __init__(self, session, parent: QWidget | None = None):
        super().__init__(session, parent)
        self.message = MessageLabel()

        self.depth = ValueField(positive=True, message=self.message)
        self.depth.setToolTip("Depth of the electron gas below the surface (length unit)")
        self.lever = ValueField(allow_empty=True, message=self.message)
        self.lever.setPlaceholderText("the particle's charge (default)")
        self.lever.setToolTip("Energy per volt of gate voltage. Empty: the particle's charge "
                              "(an electron gains -1000 meV per volt)")
        self.depth.committed.connect(lambda v: self._edit_term(depth=v))
        self.lever.committed.connect(lambda v: self._edit_term(lever=v))
        self.depth_unit = QLabel()
        form = QFormLayout()
        form.setRowWrapPolicy(QFormLayout.RowWrapPolicy.WrapLongRows)
        drow = QHBoxLayout()
        drow.addWidget(self.depth)
        drow.addWidget(self.depth_unit)
        form.addRow("Depth of the electron gas", drow)
        form.addRow("Lever arm (energy per volt)", self.lever)

        self.gates = QTableWidget(0, 3)
        self.gates.setHorizontalHeaderLabels(["gate", "voltage [V]", "outline"])
        self.gates.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Stretch)
        self.gates.verticalHeader().hide()
        self.gates.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.gates.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.gates.itemChanged.connect(self._on_gate_cell)
        self.gates.itemSelectionChanged.connect(self._show_vertices)
        self.gates.setMinimumHeight(120)

        self.add_gate = QPushButton("Add gate")
        self.remove_gate = QPushButton("Remove gate")
        self.make_polygon = QPushButton("Make polygon")
        self.make_polygon.setToolTip("Turn the selected rectangle into a polygon with editable vertices")
        self.add_gate.clicked.connect(self._on_add_gate)
        self.remove_gate.clicked.connect(self._on_remove_gate)
        self.make_polygon.clicked.connect(self._on_make_polygon)
        grow = QHBoxLayout()
        for b in (self.add_gate, self.remove_gate, self.make_polygon):
            grow.addWidget(b)
        grow.addStretch(1)

        self.vertex_title = QLabel()
        self.vertices = QTableWidget(0, 2)
        self.vertices.setHorizontalHeaderLabels(["x", "y"])
        self.vertices.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Stretch)
        self.vertices.itemChanged.connect(self._on_vertex_cell)
        self.vertices.setMinimumHeight(120)
        self.add_vertex = QPushButton("Add vertex")
        self.remove_vertex = QPushButton("Remove vertex")
        self.add_vertex.clicked.connect(self._on_add_vertex)
        self.remove_vertex.clicked.connect(self._on_remove_vertex)
        vrow = QHBoxLayout()
        vrow.addWidget(self.add_vertex)
        vrow.addWidget(self.remove_vertex)
        vrow.addStretch(1)

        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.addLayout(form)
        lay.addWidget(QLabel("Gates (the surface is at 0 V outside them)"))
        lay.addWidget(self.gates)
        lay.addLayout(grow)
        lay.addWidget(self.vertex_title)
        lay.addWidget(self.vertices)
        lay.addLayout(vrow)
        lay.addWidget(self.message)

    # -- helpers -----------------------------------------------------------------------------------
    def selected_gate(self) -> int | None:
        rows = self.gates.selectionModel().selectedRows() if self.gates.selectionModel() else []
        if rows:
            return rows[0].row()
        return None

    def _apply(self, make, text) -> bool:
        return apply_edit(self.session, make, text, self.message)

    def _edit_term(self, **changes) -> None:
        if self._loading or self.term() is None:
            return
        i = self.term_index
        self._apply(lambda p: edits.replace_term(p, i, dataclasses.replace(p.potential[i], **changes)),
                    "edit gates term")

    # -- session -> widgets ----------------------------------------------------------------------
    def refresh(self) -> None:
        t = self.term()
        if t is None:
            return
        p = self.session.project
        self._loading = True
        try:
            self.depth_unit.setText(self.session.units.length_unit)
            for f in (self.depth, self.lever):
                f.set_parameters(p.parameters)
            self.depth.set_value(t.depth)
            self.lever.set_value(t.lever)
            keep = self.selected_gate()
            self.gates.setRowCount(len(t.gates))
            for r, g in enumerate(t.gates):
                self.gates.setItem(r, 0, QTableWidgetItem(g.label))
                self.gates.setItem(r, 1, QTableWidgetItem(fmt(g.voltage)))
                kind = QTableWidgetItem(f"polygon, {len(g.polygon)} vertices" if g.polygon is not None
                                        else "rectangle")
                kind.setFlags(kind.flags() & ~Qt.ItemFlag.ItemIsEditable)
                self.gates.setItem(r, 2, kind)
            if t.gates:
                self.gates.selectRow(min(keep if keep is not None else 0, len(t.gates) - 1))
        finally:
            self._loading = False
        self._show_vertices()

    def _show_vertices(self) -> None:
        t = self.term()
        gi = self.selected_gate()
        self._loading = True
        try:
            if t is None or gi is None or gi >= len(t.gates):
                self.vertices.setRowCount(0)
                self.vertex_title.setText("Select a gate to edit its outline")
                for b in (self.add_vertex, self.remove_vertex, self.make_polygon, self.remove_gate):
                    b.setEnabled(False)
                return
            g = t.gates[gi]
            unit = self.session.units.length_unit
            if g.polygon is not None:
                rows = list(g.polygon)
                labels = [str(k + 1) for k in range(len(rows))]
                self.vertex_title.setText(f"Vertices of {g.label} [{unit}] (in order around the outline)")
            else:
                x0, y0, x1, y1 = g.rectangle
                rows = [(x0, y0), (x1, y1)]
                labels = ["corner", "opposite corner"]
                self.vertex_title.setText(f"Rectangle {g.label}: two opposite corners [{unit}]")
            self.vertices.setRowCount(len(rows))
            self.vertices.setVerticalHeaderLabels(labels)
            for r, (x, y) in enumerate(rows):
                self.vertices.setItem(r, 0, QTableWidgetItem(fmt(x)))
                self.vertices.setItem(r, 1, QTableWidgetItem(fmt(y)))
            poly = g.polygon is not None
            self.add_vertex.setEnabled(poly)
            self.remove_vertex.setEnabled(poly and len(g.polygon) > 3)
            self.make_polygon.setEnabled(not poly)
            self.remove_gate.setEnabled(True)
        finally:
            self._loading = False

    # -- widgets -> session ----------------------------------------------------------------------
    def _cell_value(self, text: str):
        return parse_value(text, self.session.project.parameters)

    def _on_gate_cell(self, item: QTableWidgetItem) -> None:
        if self._loading or self.term() is None:
            return
        i, r, c = self.term_index, item.row(), item.column()
        t = self.term()
        if r >= len(t.gates):
            return
        g = t.gates[r]
        try:
            if c == 0:
                label = item.text().strip()
                if not label:
                    raise WellscapeError("a gate needs a name")
                new = dataclasses.replace(g, label=label)
            elif c == 1:
                new = dataclasses.replace(g, voltage=self._cell_value(item.text()))
            else:
                return
        except WellscapeError as exc:
            self.message.show_error(f"gate {g.label}: {exc}")
            self.refresh()
            return
        if not self._apply(lambda p: edits.set_gate(p, i, r, new), f"edit gate {g.label}"):
            self.refresh()

    def _on_vertex_cell(self, item: QTableWidgetItem) -> None:
        if self._loading or self.term() is None:
            return
        gi = self.selected_gate()
        t = self.term()
        if gi is None or gi >= len(t.gates):
            return
        g = t.gates[gi]
        i = self.term_index
        try:
            value = self._cell_value(item.text())
        except WellscapeError as exc:
            self.message.show_error(f"gate {g.label}, vertex {item.row() + 1}: {exc}")
            self._show_vertices()
            return
        if g.polygon is not None:
            verts = [list(v) for v in g.polygon]
            verts[item.row()][item.column()] = value
            new = dataclasses.replace(g, polygon=tuple(tuple(v) for v in verts))
        else:
            rect = list(g.rectangle)
            rect[2 * item.row() + item.column()] = value
            new = dataclasses.replace(g, rectangle=tuple(rect))
        if not self._apply(lambda p: edits.set_gate(p, i, gi, new), f"move a vertex of {g.label}"):
            self._show_vertices()

    def _on_add_gate(self) -> None:
        if self.term() is None:
            return
        i = self.term_index
        if self._apply(lambda p: edits.add_gate(p, i), "add gate"):
            self.gates.selectRow(self.gates.rowCount() - 1)

    def _on_remove_gate(self) -> None:
        gi = self.selected_gate()
        if self.term() is None or gi is None:
            return
        i = self.term_index
        self._apply(lambda p: edits.remove_gate(p, i, gi), "remove gate")

    def _on_make_polygon(self) -> None:
        gi = self.selected_gate()
        t = self.term()
        if t is None or gi is None:
            return
        i = self.term_index
        verts = edits.gate_vertices(t.gates[gi])
        self._apply(lambda p: edits.set_gate_polygon(p, i, gi, verts), "make polygon")

    def _on_add_vertex(self) -> None:
        gi = self.selected_gate()
        t = self.term()
        if t is None or gi is None or t.gates[gi].polygon is None:
            return
        poly = list(t.gates[gi].polygon)
        after = max(self.vertices.currentRow(), 0) if self.vertices.currentRow() >= 0 else len(poly) - 1
        a, b = poly[after], poly[(after + 1) % len(poly)]
        try:
            mid = tuple(0.5 * (float(a[k]) + float(b[k])) for k in range(2))
        except (TypeError, ValueError):
            mid = a
        poly.insert(after + 1, mid)
        i = self.term_index
        self._apply(lambda p: edits.set_gate_polygon(p, i, gi, poly), "add vertex")

    def _on_remove_vertex(self) -> None:
        gi = self.selected_gate()
        t = self.term()
        row = self.vertices.currentRow()
        if t is None or gi is None or t.gates[gi].polygon is None or row < 0:
            return
        poly = [v for k, v in enumerate(t.gates[gi].polygon) if k != row]
        i = self.term_index
        self._apply(lambda p: edits.set_gate_polygon(p, i, gi, poly), "remove vertex")
