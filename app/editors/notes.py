"""Title and notes of the project (what the study is about, what to look at)."""
from __future__ import annotations

import dataclasses

from PySide6.QtCore import QTimer
from PySide6.QtWidgets import QLabel, QLineEdit, QPlainTextEdit, QVBoxLayout, QWidget

from .common import MessageLabel, apply_edit

__all__ = ["NotesPanel"]


class NotesPanel(QWidget):
    def __init__(self, session, parent: QWidget | None = None):
        super().__init__(parent)
        self.session = session
        self._loading = False
        self.message = MessageLabel()
        self.title = QLineEdit()
        self.title.editingFinished.connect(self.commit)
        self.notes = QPlainTextEdit()
        self.notes.setPlaceholderText("What this study is about, what to look at, where the numbers come from")
        self._timer = QTimer(self)
        self._timer.setSingleShot(True)
        self._timer.setInterval(1500)
        self._timer.timeout.connect(self.commit)
        self.notes.textChanged.connect(lambda: None if self._loading else self._timer.start())
        lay = QVBoxLayout(self)
        lay.addWidget(QLabel("Title"))
        lay.addWidget(self.title)
        lay.addWidget(QLabel("Notes"))
        lay.addWidget(self.notes, 1)
        lay.addWidget(self.message)
        session.project_changed.connect(self.refresh)
        self.refresh()

    def refresh(self) -> None:
        p = self.session.project
        self._loading = True
        try:
            if self.title.text() != p.title and not self.title.hasFocus():
                self.title.setText(p.title)
            if self.notes.toPlainText() != p.notes and not self._timer.isActive():
                self.notes.setPlainText(p.notes)
        finally:
            self._loading = False

    def commit(self) -> None:
        self._timer.stop()
        title, notes = self.title.text(), self.notes.toPlainText()
        p = self.session.project
        if title == p.title and notes == p.notes:
            return
        apply_edit(self.session, lambda p: dataclasses.replace(p, title=title, notes=notes), "edit notes",
                   self.message)
