"""Editors of every part of a project.  Each panel takes the :class:`app.session.Session`,
refreshes itself on ``project_changed`` and edits only through ``Session.set_project`` /
``Session.set_parameter`` (so every edit can be undone)."""
from __future__ import annotations

from typing import Optional

from PySide6.QtWidgets import QFrame, QGroupBox, QScrollArea, QToolBox, QVBoxLayout, QWidget

from .fields import FieldsPanel
from .grid import GridPanel
from .material import MaterialPanel
from .notes import NotesPanel
from .parameters import ParametersPanel
from .solver import SolverPanel
from .terms import TermsPanel

__all__ = ["ProjectEditors", "ParametersPanel", "TermsPanel", "GridPanel", "MaterialPanel", "FieldsPanel",
           "SolverPanel", "NotesPanel"]


def _scrolled(widget: QWidget) -> QScrollArea:
    area = QScrollArea()
    area.setWidget(widget)
    area.setWidgetResizable(True)
    area.setFrameShape(QFrame.Shape.NoFrame)
    return area


class ProjectEditors(QWidget):
    """The left column: the parameters (always in view) above the set-up pages."""

    PAGES = (("terms", "Potential terms"), ("grid", "Grid"), ("material", "Material and units"),
             ("fields", "Fields and spin"), ("solver", "Solver"), ("notes", "Title and notes"))

    def __init__(self, session, parent: Optional[QWidget] = None):
        super().__init__(parent)
        self.session = session
        self.parameters = ParametersPanel(session)
        self.terms = TermsPanel(session)
        self.grid = GridPanel(session)
        self.material = MaterialPanel(session)
        self.fields = FieldsPanel(session)
        self.solver = SolverPanel(session)
        self.notes = NotesPanel(session)
        box = QGroupBox("Parameters")
        QVBoxLayout(box).addWidget(_scrolled(self.parameters))
        box.setMaximumHeight(260)
        self.pages = QToolBox()
        for key, title in self.PAGES:
            self.pages.addItem(_scrolled(getattr(self, key)), title)
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        lay.addWidget(box)
        lay.addWidget(self.pages, 1)

    def show_page(self, key: str) -> None:
        for i, (k, _title) in enumerate(self.PAGES):
            if k == key:
                self.pages.setCurrentIndex(i)
