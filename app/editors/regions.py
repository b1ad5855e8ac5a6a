"""Material regions of the project, shown read-only (label, material, where, band offset).

Regions are edited in the project file for now; this page lists them so that a project with
regions opens, shows what it holds and keeps its regions through every other edit."""
from __future__ import annotations

from PySide6.QtWidgets import QLabel, QTableWidget, QTableWidgetItem, QVBoxLayout, QWidget

from .common import ProjectPanel

__all__ = ["RegionsPanel", "region_rows"]

HEADERS = ("label", "material", "inside (formula)", "band offset")


def region_rows(project) -> list:
    """One row of plain text per region: label, material, formula, offset with its unit."""
    from core.units import get_units
    unit = get_units(project.units).energy_unit
    rows = []
    for reg in project.regions:
        m = reg.material
        parts = [m.name] if m.name else []
        if m.mass is not None:
            mass = ", ".join(str(v) for v in m.mass) if isinstance(m.mass, tuple) else str(m.mass)
            parts.append(f"mass {mass} (mass unit)")
        if m.g_factor is not None:
            parts.append(f"g {m.g_factor}")
        if reg.offset is None:
            offset = "none"
        elif reg.offset == "table":
            offset = "from the materials table (unstrained)"
        else:
            offset = f"{reg.offset} {unit}"
        rows.append((reg.label, ", ".join(parts), reg.inside, offset))
    return rows


class RegionsPanel(ProjectPanel):
    def __init__(self, session, parent: QWidget | None = None):
        super().__init__(parent)
        self.session = session
        self.table = QTableWidget(0, len(HEADERS))
        self.table.setHorizontalHeaderLabels(HEADERS)
        self.table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        self.table.horizontalHeader().setStretchLastSection(True)
        self.hint = QLabel()
        self.hint.setWordWrap(True)
        lay = QVBoxLayout(self)
        lay.addWidget(self.hint)
        lay.addWidget(self.table, 1)
        self.follow_session()

    def shown_key(self, p) -> tuple:
        return (p.regions, p.units)

    def show_project(self, p) -> None:
        rows = region_rows(p)
        self.table.setRowCount(len(rows))
        for i, row in enumerate(rows):
            for j, text in enumerate(row):
                self.table.setItem(i, j, QTableWidgetItem(text))
        self.table.resizeColumnsToContents()
        self.hint.setText("Where a region's formula is nonzero its material holds (later regions win); "
                          "elsewhere the project's material. Edit regions in the project file."
                          if rows else "No material regions: the project's material holds everywhere.")
