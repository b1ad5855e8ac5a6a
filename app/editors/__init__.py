"""Editors of every part of a project.  Each panel takes the :class:`app.session.Session`,
refreshes itself on ``project_changed`` and edits only through ``Session.set_project`` /
``Session.set_parameter`` (so every edit can be undone)."""
from __future__ import annotations

from PySide6.QtCore import Qt, QTimer
from PySide6.QtWidgets import QFrame, QGroupBox, QScrollArea, QSplitter, QToolBox, QVBoxLayout, QWidget

from .fields import FieldsPanel
from .grid import GridPanel
from .material import MaterialPanel
from .notes import NotesPanel
from .parameters import ParametersPanel
from .regions import RegionsPanel
from .solver import SolverPanel
from .terms import TermsPanel

__all__ = ["ProjectEditors", "ParametersPanel", "TermsPanel", "GridPanel", "MaterialPanel", "FieldsPanel",
           "SolverPanel", "NotesPanel", "RegionsPanel"]


def _scrolled(widget: QWidget) -> QScrollArea:
    area = QScrollArea()
    area.setWidget(widget)
    area.setWidgetResizable(True)
    area.setFrameShape(QFrame.Shape.NoFrame)
    area.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
    return area


class ProjectEditors(QWidget):
    """The left column: the parameters (always in view) above the set-up pages."""

    PAGES = (("terms", "Potential terms"), ("grid", "Grid"), ("material", "Material and units"),
             ("regions", "Material regions"), ("fields", "Fields and spin"), ("solver", "Solver"),
             ("notes", "Title and notes"))

    def __init__(self, session, parent: QWidget | None = None):
        super().__init__(parent)
        self.session = session
        self.parameters = ParametersPanel(session)
        self.terms = TermsPanel(session)
        self.grid = GridPanel(session)
        self.material = MaterialPanel(session)
        self.regions = RegionsPanel(session)
        self.fields = FieldsPanel(session)
        self.solver = SolverPanel(session)
        self.notes = NotesPanel(session)
        box = QGroupBox("Parameters")
        box_lay = QVBoxLayout(box)
        box_lay.setContentsMargins(4, 4, 4, 4)
        box_lay.addWidget(_scrolled(self.parameters))
        self.pages = QToolBox()
        for key, title in self.PAGES:
            self.pages.addItem(_scrolled(getattr(self, key)), title)
        # the parameters and the set-up pages share the column; drag the divider to give either more room
        self.splitter = QSplitter(Qt.Orientation.Vertical)
        self.splitter.addWidget(box)
        self.splitter.addWidget(self.pages)
        self.splitter.setChildrenCollapsible(False)
        self.splitter.setStretchFactor(0, 0)
        self.splitter.setStretchFactor(1, 1)
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        lay.addWidget(self.splitter)
        session.parameters_changed.connect(lambda: QTimer.singleShot(0, self._fit_parameters))
        self._fit_parameters()

    def _fit_parameters(self) -> None:
        """Give the parameters box room for all its rows (up to about half the column)."""
        self.parameters.layout().activate()
        want = self.parameters.sizeHint().height() + 40
        total = max(self.splitter.height(), 700)
        top = min(want, total // 2)
        self.splitter.setSizes([top, total - top])

    def resizeEvent(self, event) -> None:  # noqa: N802 - Qt override
        super().resizeEvent(event)
        if not getattr(self, "_fitted_once", False) and self.splitter.height() > 100:
            self._fitted_once = True
            QTimer.singleShot(0, self._fit_parameters)

    def show_page(self, key: str) -> None:
        for i, (k, _title) in enumerate(self.PAGES):
            if k == key:
                self.pages.setCurrentIndex(i)
