"""A formula editor that checks the formula as you type and shows the column and the reason."""
from __future__ import annotations

from collections.abc import Iterable

from PySide6.QtCore import Qt, QTimer, Signal
from PySide6.QtGui import QColor, QKeySequence, QShortcut, QTextCharFormat, QTextCursor, QTextFormat
from PySide6.QtWidgets import QHBoxLayout, QLabel, QPlainTextEdit, QPushButton, QTextEdit, QVBoxLayout, QWidget

from core.errors import FormulaError
from core.formula import CONSTANTS, COORDINATES, FUNCTIONS, parse_formula

from .common import MessageLabel

__all__ = ["FormulaEditor", "check_formula"]


def check_formula(text: str, parameters: Iterable[str], coordinates: Iterable[str] = COORDINATES):
    """``(None, None)`` if ``text`` is a valid formula, else ``(column, reason)`` (1-based column)."""
    try:
        parse_formula(text, parameters=tuple(parameters), coordinates=tuple(coordinates))
    except FormulaError as exc:
        return (exc.column, str(exc))
    return (None, None)


class FormulaEditor(QWidget):
    """Edit one formula of x, y, z, r and the project's parameters.

    The text is checked 120 ms after each keystroke; a problem is shown under
    the text with its column and reason, and the offending character is marked.
    ``applied(text)`` is emitted when a valid, changed formula is applied
    (Apply button, Ctrl+Return, or leaving the field).
    """

    applied = Signal(str)

    def __init__(self, parent: QWidget | None = None):
        super().__init__(parent)
        self.parameters: tuple = ()
        self._applied_text = ""
        self.edit = QPlainTextEdit()
        self.edit.setPlaceholderText("e.g. 0.5*k*(x**2 + y**2)")
        self.edit.setTabChangesFocus(True)
        self.edit.setFixedHeight(self.edit.fontMetrics().lineSpacing() * 4 + 12)
        self.edit.setLineWrapMode(QPlainTextEdit.LineWrapMode.WidgetWidth)
        self.status = MessageLabel()
        self.names = QLabel()
        self.names.setWordWrap(True)
        self.names.setStyleSheet("color: palette(mid); font-size: small;")
        self.apply_button = QPushButton("Apply")
        self.apply_button.setToolTip("Use this formula (Ctrl+Return)")
        self.apply_button.clicked.connect(self.apply)
        self.revert_button = QPushButton("Revert")
        self.revert_button.clicked.connect(self.revert)
        row = QHBoxLayout()
        row.addWidget(self.status, 1)
        row.addWidget(self.revert_button)
        row.addWidget(self.apply_button)
        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.addWidget(self.edit)
        lay.addLayout(row)
        lay.addWidget(self.names)
        self._timer = QTimer(self)
        self._timer.setSingleShot(True)
        self._timer.setInterval(120)
        self._timer.timeout.connect(self.check)
        self.edit.textChanged.connect(self._timer.start)
        for seq in ("Ctrl+Return", "Ctrl+Enter"):
            sc = QShortcut(QKeySequence(seq), self.edit)
            sc.setContext(Qt.ShortcutContext.WidgetShortcut)
            sc.activated.connect(self.apply)
        self.edit.installEventFilter(self)
        self.error_column: int | None = None
        self.error_text: str | None = None
        self._update_buttons()

    # -- public --------------------------------------------------------------------------------
    def set_parameters(self, names: Iterable[str]) -> None:
        self.parameters = tuple(names)
        funcs = ", ".join(sorted(FUNCTIONS))
        params = ", ".join(self.parameters) or "none yet"
        self.names.setText(f"Coordinates: {', '.join(COORDINATES)} (r = distance from the origin). "
                           f"Parameters: {params}. Constants: {', '.join(CONSTANTS)}. Functions: {funcs}. "
                           f"Powers are written **.")
        self.check()

    def set_formula(self, text: str) -> None:
        self._applied_text = text
        if self.edit.toPlainText() != text:
            self.edit.blockSignals(True)
            self.edit.setPlainText(text)
            self.edit.blockSignals(False)
        self.check()

    def text(self) -> str:
        return self.edit.toPlainText()

    def set_text(self, text: str) -> None:
        """Replace the text as if typed (checked at once)."""
        self.edit.setPlainText(text)
        self.check()

    def check(self) -> bool:
        self._timer.stop()
        col, reason = check_formula(self.text(), self.parameters)
        self.error_column, self.error_text = col, reason
        self._mark(col)
        if reason:
            where = f"column {col}: " if col else ""
            # the reason already ends with "at column N" for most problems: keep one of them
            text = reason if (col and f"column {col}" in reason) else where + reason
            self.status.show_error(text)
        elif self.text() != self._applied_text:
            self.status.show_hint("valid - press Apply or Ctrl+Return to use it")
        else:
            self.status.clear_message()
        self._update_buttons()
        return reason is None

    def apply(self) -> bool:
        if not self.check():
            return False
        text = self.text().strip()
        if text == self._applied_text:
            return True
        self._applied_text = text
        self.applied.emit(text)
        self.check()
        return True

    def revert(self) -> None:
        self.set_formula(self._applied_text)

    # -- internals -----------------------------------------------------------------------------
    def eventFilter(self, obj, event):  # noqa: N802 - Qt override
        from PySide6.QtCore import QEvent
        if obj is self.edit and event.type() == QEvent.Type.FocusOut and self.text() != self._applied_text:
            if check_formula(self.text(), self.parameters)[1] is None:
                QTimer.singleShot(0, self.apply)
        return super().eventFilter(obj, event)

    def _update_buttons(self) -> None:
        changed = self.text() != self._applied_text
        self.apply_button.setEnabled(changed and self.error_text is None)
        self.revert_button.setEnabled(changed)

    def _mark(self, column: int | None) -> None:
        if not column:
            self.edit.setExtraSelections([])
            return
        doc_len = len(self.text())
        pos = max(0, min(column - 1, max(doc_len - 1, 0)))
        sel = QTextEdit.ExtraSelection()
        fmt = QTextCharFormat()
        fmt.setBackground(QColor("#ffd6d6"))
        fmt.setUnderlineColor(QColor("#b00020"))
        fmt.setUnderlineStyle(QTextCharFormat.UnderlineStyle.WaveUnderline)
        sel.format = fmt
        cursor = QTextCursor(self.edit.document())
        cursor.setPosition(pos)
        if doc_len:
            cursor.movePosition(QTextCursor.MoveOperation.Right, QTextCursor.MoveMode.KeepAnchor,
                                1 if column - 1 < doc_len else 0)
        sel.cursor = cursor
        if column - 1 >= doc_len:          # "ends unexpectedly": mark the whole line lightly
            fmt2 = QTextCharFormat(fmt)
            fmt2.setProperty(QTextFormat.Property.FullWidthSelection, True)
            sel.format = fmt2
        self.edit.setExtraSelections([sel])
