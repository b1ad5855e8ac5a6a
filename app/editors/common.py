"""Small building blocks shared by the project editors."""
from __future__ import annotations

import math
from collections.abc import Callable, Iterable

from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import QComboBox, QFrame, QLabel, QLineEdit, QSizePolicy, QWidget

from core.errors import FormulaError, WellscapeError
from core.formula import parse_formula

ERROR_STYLE = "color: #b00020;"
HINT_STYLE = "color: palette(mid);"
FIELD_ERROR_STYLE = "QLineEdit { border: 1px solid #b00020; background: #fff3f3; }"


def fmt(value, digits: int = 6) -> str:
    """A number as short text (formulas are shown as they are)."""
    if isinstance(value, str):
        return value
    if value is None:
        return ""
    v = float(value)
    if v == 0:
        return "0"
    return f"{v:.{digits}g}"


class ProjectPanel(QWidget):
    """A set-up page that shows part of the session's project.

    Subclasses give :meth:`shown_key` (what of the project the page shows) and
    :meth:`show_project` (fill the widgets); :meth:`refresh` repaints only when the key changed,
    with ``_loading`` set so that the widgets' own signals do not write back to the project.
    """

    session = None
    _loading = False
    _shown = None

    def follow_session(self) -> None:
        """Repaint on every project change, and now."""
        self.session.project_changed.connect(self.refresh)
        self.redraw()

    def shown_key(self, project) -> tuple:      # pragma: no cover - every page overrides it
        raise NotImplementedError

    def show_project(self, project) -> None:    # pragma: no cover - every page overrides it
        raise NotImplementedError

    def refresh(self) -> None:
        project = self.session.project
        key = self.shown_key(project)
        if key == self._shown:
            return
        self._shown = key
        self._loading = True
        try:
            self.show_project(project)
        finally:
            self._loading = False
        self.after_refresh()

    def after_refresh(self) -> None:
        """Hook run after the widgets were filled (outside ``_loading``)."""

    def redraw(self) -> None:
        """Repaint even if the project did not change (e.g. to undo a refused edit in the widgets)."""
        self._shown = None
        self.refresh()


class MessageLabel(QLabel):
    """A one-line, word-wrapped message under an editor: an error (red) or a hint (grey)."""

    def __init__(self, parent: QWidget | None = None):
        super().__init__(parent)
        self.setWordWrap(True)
        self.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.setSizePolicy(QSizePolicy.Policy.Preferred, QSizePolicy.Policy.Minimum)
        self.hide()

    def show_error(self, text: str) -> None:
        self.setStyleSheet(ERROR_STYLE)
        self.setText(text)
        self.setVisible(bool(text))

    def show_hint(self, text: str) -> None:
        self.setStyleSheet(HINT_STYLE)
        self.setText(text)
        self.setVisible(bool(text))

    def clear_message(self) -> None:
        self.setText("")
        self.hide()

    @property
    def is_error(self) -> bool:
        return not self.isHidden() and bool(self.text()) and self.styleSheet() == ERROR_STYLE


def compact(combo: QComboBox, chars: int = 10) -> QComboBox:
    """Let a combo box be narrower than its longest item (the column is narrow; the list pops up wide)."""
    combo.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
    combo.setMinimumContentsLength(chars)
    combo.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Fixed)
    return combo


def wrapped(text: str = "", *, hint: bool = False) -> QLabel:
    label = QLabel(text)
    label.setWordWrap(True)
    if hint:
        label.setStyleSheet(HINT_STYLE)
    return label


def hline() -> QFrame:
    f = QFrame()
    f.setFrameShape(QFrame.Shape.HLine)
    f.setFrameShadow(QFrame.Shadow.Sunken)
    return f


def parse_value(text: str, parameters: Iterable[str]):
    """A number, or a formula of parameters (returned as its text); FormulaError if neither."""
    t = text.strip()
    if not t:
        raise FormulaError("enter a number or a formula of parameters", formula=text, column=1)
    try:
        v = float(t)
    except ValueError:
        pass
    else:
        if not math.isfinite(v):
            raise FormulaError("enter a finite number", formula=text, column=1)
        return v
    f = parse_formula(t, parameters=tuple(parameters), coordinates=())
    if f.is_constant:
        return float(f.evaluate({}))
    return t


class ValueField(QLineEdit):
    """A number, or a formula of the project's parameters (``"VP + eps/2"``), checked as you type.

    ``committed(value)`` is emitted when editing finishes with a valid value that
    differs from the one shown; ``value`` is a float or the formula's text.
    ``allow_formula=False`` accepts plain numbers only; ``positive=True`` refuses <= 0.
    """

    committed = Signal(object)

    def __init__(self, parent: QWidget | None = None, *, allow_formula: bool = True, positive: bool = False,
                 allow_empty: bool = False, message: MessageLabel | None = None):
        super().__init__(parent)
        self.allow_formula = allow_formula
        self.positive = positive
        self.allow_empty = allow_empty
        self.message = message
        self.parameters: tuple = ()
        self._shown = None
        self.error: str | None = None
        self.textEdited.connect(self._check)
        self.editingFinished.connect(self._finish)

    def set_parameters(self, names: Iterable[str]) -> None:
        self.parameters = tuple(names)

    def set_value(self, value) -> None:
        self._shown = value
        self.setText(fmt(value) if value is not None else "")
        if self.error:
            self._set_error(None)

    def value(self):
        """The current valid value (float, formula text, or None when empty and allowed); raises if invalid."""
        text = self.text().strip()
        if not text and self.allow_empty:
            return None
        if self.allow_formula:
            v = parse_value(text, self.parameters)
        else:
            try:
                v = float(text)
            except ValueError:
                raise FormulaError(f"expected a number, got {text!r}", formula=text, column=1) from None
            if not math.isfinite(v):
                raise FormulaError("enter a finite number", formula=text, column=1)
        if self.positive and isinstance(v, float) and v <= 0:
            raise FormulaError("must be positive", formula=text, column=1)
        return v

    def _check(self, *_args) -> bool:
        try:
            self.value()
        except WellscapeError as exc:
            self._set_error(str(exc))
            return False
        self._set_error(None)
        return True

    def _set_error(self, message: str | None) -> None:
        had = self.error
        self.error = message
        self.setStyleSheet(FIELD_ERROR_STYLE if message else "")
        self.setToolTip(message or "")
        if self.message is not None:
            if message:
                self.message.show_error(message)
            elif had and self.message.text() == had:       # clear only this field's own message
                self.message.clear_message()

    def _finish(self) -> None:
        if not self._check():
            return
        v = self.value()
        if v == self._shown or (isinstance(v, float) and isinstance(self._shown, (int, float))
                                and fmt(v) == fmt(self._shown)):
            return
        self._shown = v
        self.committed.emit(v)


def apply_edit(session, make: Callable, text: str, message: MessageLabel | None = None) -> bool:
    """Build a new project with ``make(project)`` and hand it to the session (undoable).

    Errors (bad edit, validation) go to ``message``; nothing is lost. Returns True on success."""
    try:
        project = make(session.project)
        session.set_project(project, text)
    except WellscapeError as exc:
        if message is not None:
            message.show_error(str(exc))
        return False
    if message is not None and message.is_error:
        message.clear_message()
    return True


class TermEditor(QWidget):
    """Base of the editors of one potential term: the term at ``term_index`` of the session's project,
    when it is of ``term_class`` (subclasses set it and write ``refresh``)."""

    term_class: type = object

    def __init__(self, session, parent: QWidget | None = None):
        super().__init__(parent)
        self.session = session
        self.term_index: int | None = None
        self._loading = False

    def term(self):
        p = self.session.project
        if self.term_index is None or self.term_index >= len(p.potential):
            return None
        t = p.potential[self.term_index]
        return t if isinstance(t, self.term_class) else None

    def set_term(self, index: int | None) -> None:
        self.term_index = index
        self.refresh()

    def refresh(self) -> None:  # pragma: no cover - every subclass writes its own
        raise NotImplementedError
