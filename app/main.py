"""The desktop window: project editors on the left, views in the middle, a work strip below.

``run_gui(args)`` is what ``wellscape`` (no arguments) and ``wellscape open [FILE]
[--solve] [--screenshot PNG]`` call.  The window holds no physics and reads
no files itself: the :class:`app.session.Session` calls :mod:`core`.
"""
from __future__ import annotations

import sys
import traceback
from collections.abc import Callable
from pathlib import Path

from PySide6.QtCore import QElapsedTimer, Qt, QTimer
from PySide6.QtGui import QAction, QKeySequence
from PySide6.QtWidgets import (
    QApplication,
    QDialog,
    QFileDialog,
    QFrame,
    QHBoxLayout,
    QLabel,
    QMainWindow,
    QMessageBox,
    QProgressBar,
    QPushButton,
    QSplitter,
    QTabWidget,
    QTextBrowser,
    QVBoxLayout,
    QWidget,
)

from core.errors import WellscapeError

from .session import SAMPLES_DIR, Session, sample_projects
from .style import CAUTION, ERROR_COLOR, OK_COLOR, WARN_COLOR, configure_pyqtgraph, share_gl_contexts

__all__ = ["MainWindow", "run_gui", "VIEW_SPECS", "HELP_TEXT"]

DEFAULT_SAMPLE = "gaas_single_dot.json"

#: (tab title, module, class) of the views; each is constructed as View(session)
VIEW_SPECS = (
    ("Potential", "app.views.potential_view", "PotentialView"),
    ("Levels", "app.views.levels_view", "LevelsView"),
    ("States", "app.views.states_view", "StatesView"),
    ("Sweep", "app.views.sweep_view", "SweepView"),
)

HELP_TEXT = """
<h3>The views</h3>
<p><b>Potential</b> - the confining potential V on the grid, in the project's energy unit, with
contour lines and gate outlines. In 3D: three orthogonal slices and an isosurface of V. A line cut
shows V along a line you can drag, with the computed levels drawn on it. It follows the parameter
sliders as you move them.</p>
<p><b>Levels</b> - one bar per level; degenerate levels (closer than the tolerance shown) are drawn
side by side as one multiplet, with its multiplicity, energy and labels (mirror parity, &lt;L<sub>z</sub>&gt;,
spin). Click a level to select its state; hover for the numbers.
<b>Check convergence</b> (F6) solves on two coarser grids, extrapolates each level and draws its
estimated grid error as an error bar; every splitting is then marked ✓ resolved (larger than the
combined error of its two levels) or ≈ not resolved (a grid artefact cannot be ruled out), and the
degeneracy tolerance follows the errors. The level count (F7, and by itself after a solve when it is
quick) counts the eigenvalues below the top level independently: ✔ count verified, ✘ count NOT
verified (a level was missed), ○ count not checked.</p>
<p><b>States</b> - every computed state as |&psi;|&sup2; or as a signed/phase-coloured &psi;, labelled with
its energy, and a large view of the selected one. The probability inside a region you draw is
sum |&psi;|&sup2; dV. In 3D: an isosurface of |&psi;|&sup2; you can rotate, plus slices.</p>
<p><b>Sweep</b> - vary one parameter over a range and follow every level: crossings and anticrossings
are marked with their gaps. Click a point to see the states there.</p>
<h3>Working with the window</h3>
<p>Everything in the project is edited in the left column; every edit can be undone (Edit menu).
<b>Solve</b> (F5) runs in the background; the strip at the bottom shows progress, the elapsed time and
a Cancel button. Once solved, dragging a parameter slider re-solves as you move it (warm start); when
you let go, one full solve confirms the levels. A failed solve leaves the previous results on show.</p>
<p>Unsaved work is copied to a recovery file every few seconds; if the window does not close
normally, it is offered back the next time Wellscape starts.</p>
"""


def _about_text() -> str:
    from core import __version__
    return (f"<h3>Wellscape {__version__}</h3><p>Design quantum confinement: bound states of gate-defined "
            f"dots, heterostructure dots and atom traps.</p><p><b>Caution.</b> {CAUTION}</p>"
            "<p>Single particle, effective mass, no Coulomb interaction between particles, no self-consistent "
            "screening; the error of a result is the grid's - check it by refining the grid.</p>"
            "<p>Licence: BSD-3-Clause.</p>")


class WorkStrip(QFrame):
    """The strip under the views: message, progress, elapsed time, Solve and Cancel."""

    def __init__(self, parent: QWidget | None = None):
        super().__init__(parent)
        self.setFrameShape(QFrame.Shape.StyledPanel)
        self.message = QLabel("Ready.")
        self.message.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.message.setMinimumWidth(200)
        self.message.setWordWrap(False)
        self.sweep_label = QLabel()
        self.progress = QProgressBar()
        self.progress.setRange(0, 1000)
        self.progress.setFixedWidth(220)
        self.progress.setTextVisible(True)
        self.progress.setFormat("")
        self.elapsed = QLabel("")
        self.elapsed.setMinimumWidth(64)
        self.elapsed.setAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
        self.solve_button = QPushButton("Solve")
        self.solve_button.setToolTip("Find the lowest states of the project as it is now (F5)")
        self.cancel_button = QPushButton("Cancel")
        self.cancel_button.setEnabled(False)
        lay = QHBoxLayout(self)
        lay.setContentsMargins(6, 2, 6, 2)
        lay.addWidget(self.message, 1)
        lay.addWidget(self.sweep_label)
        lay.addWidget(self.progress)
        lay.addWidget(self.elapsed)
        lay.addWidget(self.cancel_button)
        lay.addWidget(self.solve_button)

    def show_message(self, text: str, kind: str = "info") -> None:
        color = {"error": ERROR_COLOR, "warn": WARN_COLOR, "ok": OK_COLOR}.get(kind, "")
        self.message.setStyleSheet(f"color: {color};" if color else "")
        first = text.splitlines()[0] if text else ""
        self.message.setText(first if len(first) < 220 else first[:217] + "...")
        self.message.setToolTip(text)
        self.kind = kind


def _placeholder(title: str, reason: str) -> QWidget:
    w = QLabel(f"The {title.lower()} view is not available in this build.\n\n{reason}")
    w.setAlignment(Qt.AlignmentFlag.AlignCenter)
    w.setWordWrap(True)
    w.setStyleSheet("color: palette(mid);")
    return w


class MainWindow(QMainWindow):
    """One project per window."""

    def __init__(self, session: Session | None = None, *, confirm_close: Callable | None = None,
                 ask_restore: Callable | None = None):
        super().__init__()
        configure_pyqtgraph()
        self.session = session if session is not None else Session(self)
        self.confirm_close = confirm_close or self._ask_save_changes
        self.ask_restore = ask_restore or self._ask_restore
        self._closing = False
        self.setObjectName("WellscapeMainWindow")

        from .editors import ProjectEditors
        self.editors = ProjectEditors(self.session)
        self.editors.setMinimumWidth(360)
        self.tabs = QTabWidget()
        self.tabs.setDocumentMode(True)
        self.views: dict = {}
        self.view_errors: dict = {}
        for title, module, cls in VIEW_SPECS:
            widget = self._make_view(title, module, cls)
            self.tabs.addTab(widget, title)

        from .views.common import StaleNote
        #: over the views: says when the results shown are for an earlier version of the project
        self.stale_banner = StaleNote()
        self.stale_banner.setObjectName("stale_banner")
        self.stale_banner.setStyleSheet(self.stale_banner.styleSheet().replace("#stale_note", "#stale_banner")
                                        .replace("padding: 3px 6px", "padding: 6px 10px"))
        views_box = QWidget()
        vlay = QVBoxLayout(views_box)
        vlay.setContentsMargins(0, 0, 0, 0)
        vlay.setSpacing(2)
        vlay.addWidget(self.stale_banner)
        vlay.addWidget(self.tabs, 1)

        splitter = QSplitter(Qt.Orientation.Horizontal)
        splitter.addWidget(self.editors)
        splitter.addWidget(views_box)
        splitter.setStretchFactor(0, 0)
        splitter.setStretchFactor(1, 1)
        splitter.setSizes([400, 1040])
        splitter.setChildrenCollapsible(False)
        self.splitter = splitter

        self.strip = WorkStrip()
        self.caution = QLabel(CAUTION)
        self.caution.setWordWrap(True)
        self.caution.setObjectName("caution")
        self.caution.setStyleSheet(f"QLabel#caution {{ color: {WARN_COLOR}; font-size: small; padding: 2px 6px; }}")

        central = QWidget()
        lay = QVBoxLayout(central)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.setSpacing(0)
        lay.addWidget(splitter, 1)
        lay.addWidget(self.strip)
        lay.addWidget(self.caution)
        self.setCentralWidget(central)

        self._elapsed = QElapsedTimer()
        self._tick = QTimer(self)
        self._tick.setInterval(100)
        self._tick.timeout.connect(self._update_elapsed)
        self._help: QDialog | None = None

        self._build_menus()
        s = self.session
        s.solve_started.connect(self._on_solve_started)
        s.progressed.connect(self._on_progressed)
        s.solved.connect(self._on_solved)
        s.failed.connect(self._on_failed)
        s.cancelled.connect(self._on_cancelled)
        s.busy_changed.connect(self._on_busy_changed)
        s.estimated.connect(self._on_estimated)
        s.checks.finished.connect(self._on_check_finished)
        s.checks.failed.connect(self._on_check_failed)
        s.dirty_changed.connect(self._update_title)
        s.path_changed.connect(self._update_title)
        s.project_changed.connect(self._update_title)
        s.notice.connect(lambda text: self.strip.show_message(text, "warn"))
        s.sweep_started.connect(self._on_sweep_started)
        s.sweep_progressed.connect(lambda f: self.strip.sweep_label.setText(f"sweep {100 * f:.0f}%"))
        s.sweep_finished.connect(self._on_sweep_finished)
        s.sweep_failed.connect(self._on_sweep_failed)
        s.stale_changed.connect(self._update_stale)
        s.busy_changed.connect(lambda *_: self._update_stale())
        self.tabs.currentChanged.connect(lambda *_: self._update_stale())
        self._was_stale = False
        self.strip.solve_button.clicked.connect(self.solve)
        self.strip.cancel_button.clicked.connect(self.cancel)
        self.resize(1440, 900)
        self._update_title()

    # -- views -----------------------------------------------------------------------------------
    def _make_view(self, title: str, module: str, cls: str) -> QWidget:
        try:
            mod = __import__(module, fromlist=[cls])
            view = getattr(mod, cls)(self.session)
        except Exception as exc:    # noqa: BLE001 - a missing or broken view must not stop the window
            reason = f"{type(exc).__name__}: {exc}"
            self.view_errors[title] = reason
            if not isinstance(exc, ImportError):
                traceback.print_exc()
            return _placeholder(title, reason)
        self.views[title] = view
        return view

    # -- menus -------------------------------------------------------------------------------------
    def _action(self, text: str, slot, shortcut=None, tip: str = "") -> QAction:
        a = QAction(text, self)
        if shortcut is not None:
            a.setShortcut(QKeySequence(shortcut))
        if tip:
            a.setStatusTip(tip)
            a.setToolTip(tip)
        a.triggered.connect(slot)
        return a

    def export_sheet(self) -> None:
        from app.export_dialog import ExportSheetDialog
        dialog = ExportSheetDialog(self.session, self)
        dialog.exec()

    def _build_menus(self) -> None:
        mb = self.menuBar()
        f = mb.addMenu("&File")
        self.new_action = self._action("&New", self.new_project, QKeySequence.StandardKey.New,
                                       "Start from the template project")
        self.open_action = self._action("&Open...", self.open_dialog, QKeySequence.StandardKey.Open)
        f.addAction(self.new_action)
        f.addAction(self.open_action)
        self.samples_menu = f.addMenu("Open &sample")
        for path in sample_projects():
            self.samples_menu.addAction(path.stem.replace("_", " "), lambda p=path: self.open_file(p))
        self.recent_menu = f.addMenu("&Recent")
        self.recent_menu.aboutToShow.connect(self._fill_recent)
        f.addSeparator()
        self.save_action = self._action("&Save", self.save, QKeySequence.StandardKey.Save)
        self.save_as_action = self._action("Save &as...", self.save_as, QKeySequence.StandardKey.SaveAs)
        f.addAction(self.save_action)
        f.addAction(self.save_as_action)
        f.addSeparator()
        f.addAction(self._action("&Export figure sheet...", self.export_sheet, None,
                                 "A multi-panel figure (PDF, SVG or PNG) of the latest results, with its data"))
        f.addSeparator()
        f.addAction(self._action("&Quit", self.close, QKeySequence.StandardKey.Quit))

        e = mb.addMenu("&Edit")
        self.undo_action = self.session.undo_stack.createUndoAction(self, "&Undo")
        self.undo_action.setShortcut(QKeySequence.StandardKey.Undo)
        self.redo_action = self.session.undo_stack.createRedoAction(self, "&Redo")
        self.redo_action.setShortcut(QKeySequence.StandardKey.Redo)
        e.addAction(self.undo_action)
        e.addAction(self.redo_action)

        s = mb.addMenu("&Solve")
        from .views.common import SOLVE_KEY
        self.solve_action = self._action("&Solve", self.solve, SOLVE_KEY, "Find the lowest states")
        self.cancel_action = self._action("&Cancel", self.cancel, "Shift+F5", "Stop the running solve or sweep")
        self.cancel_action.setEnabled(False)
        s.addAction(self.solve_action)
        s.addAction(self.cancel_action)
        s.addSeparator()
        self.converge_action = self._action(
            "Check &convergence", self.check_convergence, "F6",
            "Solve on coarser grids too, extrapolate, and mark each splitting as resolved or not")
        self.count_action = self._action(
            "&Verify level count", self.verify_count, "F7",
            "Count the levels below the highest one independently: was any level missed?")
        s.addAction(self.converge_action)
        s.addAction(self.count_action)

        h = mb.addMenu("&Help")
        h.addAction(self._action("The &views explained", self.show_help, QKeySequence.StandardKey.HelpContents))
        h.addAction(self._action("&About Wellscape", self.show_about))

    def _fill_recent(self) -> None:
        self.recent_menu.clear()
        files = self.session.recent_files()
        if not files:
            a = self.recent_menu.addAction("(no recent files)")
            a.setEnabled(False)
            return
        for p in files:
            self.recent_menu.addAction(str(p), lambda p=p: self.open_file(p))
        self.recent_menu.addSeparator()
        self.recent_menu.addAction("Clear the list", self.session.clear_recent)

    # -- title --------------------------------------------------------------------------------------
    def _update_title(self, *_args) -> None:
        s = self.session
        name = s.path.name if s.path else "untitled"
        self.setWindowTitle(f"{name}{'*' if s.dirty else ''} - {s.project.title} - Wellscape")

    # -- files ------------------------------------------------------------------------------------------
    def _may_discard(self) -> bool:
        """True if the current project may be replaced (saved, or the user agreed)."""
        if not self.session.dirty:
            return True
        answer = self.confirm_close()
        if answer == "save":
            return self.save()
        return answer == "discard"

    def _ask_save_changes(self) -> str:
        box = QMessageBox(self)
        box.setIcon(QMessageBox.Icon.Question)
        box.setWindowTitle("Unsaved changes")
        box.setText(f"Save the changes to {self.session.path.name if self.session.path else 'this project'}?")
        box.setStandardButtons(QMessageBox.StandardButton.Save | QMessageBox.StandardButton.Discard
                               | QMessageBox.StandardButton.Cancel)
        box.setDefaultButton(QMessageBox.StandardButton.Save)
        answer = box.exec()
        return {QMessageBox.StandardButton.Save: "save",
                QMessageBox.StandardButton.Discard: "discard"}.get(QMessageBox.StandardButton(answer), "cancel")

    def new_project(self) -> None:
        if self._may_discard():
            self.session.new_project()
            self.strip.show_message("New project from the template: a parabolic GaAs dot.")

    def open_dialog(self) -> None:
        if not self._may_discard():
            return
        start = str(self.session.path.parent if self.session.path else SAMPLES_DIR)
        name, _ = QFileDialog.getOpenFileName(self, "Open project", start, "Wellscape projects (*.json);;All files (*)")
        if name:
            self.open_file(name, ask=False)

    def open_file(self, path, *, ask: bool = True) -> bool:
        if ask and not self._may_discard():
            return False
        try:
            self.session.open(path)
        except WellscapeError as exc:
            text = f"Could not open {Path(path).name}: {exc}"
            self.strip.show_message(text, "error")
            if not ask:        # at start (no file dialog was seen): say it in a dialog, the window lives on
                box = QMessageBox(QMessageBox.Icon.Warning, "Could not open the project", text,
                                  QMessageBox.StandardButton.Ok, self)
                box.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
                box.open()                      # not modal to the program: tests and scripts go on
                self.open_error_box = box
            return False
        self.strip.show_message(f"Opened {Path(path).name}. Press Solve (F5) to find its states.")
        return True

    def save(self) -> bool:
        if self.session.path is None:
            return self.save_as()
        return self._save_to(self.session.path)

    def save_as(self) -> bool:
        start = str(self.session.path or Path.home() / "project.json")
        if self.session.path is not None and self.session.path.parent.resolve() == SAMPLES_DIR.resolve():
            start = str(Path.home() / self.session.path.name)
        name, _ = QFileDialog.getSaveFileName(self, "Save project as", start, "Wellscape projects (*.json)")
        if not name:
            return False
        if not name.endswith(".json"):
            name += ".json"
        return self._save_to(Path(name))

    def _save_to(self, path: Path) -> bool:
        try:
            written = self.session.save(path)
        except WellscapeError as exc:
            self.strip.show_message(f"Not saved: {exc}", "error")
            return False
        self.strip.show_message(f"Saved {written}.", "ok")
        return True

    def offer_recovery(self) -> None:
        """After a crash: offer the unsaved work that was left behind."""
        for entry in self.session.recoverable():
            answer = self.ask_restore(entry)
            if answer == "restore":
                if not self._may_discard():
                    return
                try:
                    self.session.restore(entry)
                except WellscapeError as exc:
                    self.strip.show_message(f"Could not restore: {exc}", "error")
                return
            if answer == "discard":
                self.session.discard_recovery(entry)

    def _ask_restore(self, entry) -> str:
        box = QMessageBox(self)
        box.setIcon(QMessageBox.Icon.Question)
        box.setWindowTitle("Restore unsaved work?")
        where = entry.original.name if entry.original else "an unsaved project"
        box.setText(f"Wellscape did not close normally. Unsaved changes to {where} "
                    f"(\"{entry.title}\") from {entry.saved_at} were kept.\n\nRestore them?")
        restore = box.addButton("Restore", QMessageBox.ButtonRole.AcceptRole)
        discard = box.addButton("Discard", QMessageBox.ButtonRole.DestructiveRole)
        box.addButton("Not now", QMessageBox.ButtonRole.RejectRole)
        box.exec()
        clicked = box.clickedButton()
        return "restore" if clicked is restore else "discard" if clicked is discard else "later"

    # -- solving ------------------------------------------------------------------------------------------
    def solve(self) -> None:
        self.session.solve()

    def cancel(self) -> None:
        if self.session.solving:
            self.session.cancel()
        if self.session.sweeping:
            self.session.cancel_sweep()
        self.session.checks.cancel()

    def check_convergence(self) -> None:
        self.tabs.setCurrentIndex(self._tab_index("Levels"))
        if not self.session.checks.check_convergence():
            self.strip.show_message("A convergence check is already running.", "warn")

    def verify_count(self) -> None:
        if self.session.result is None:
            self.strip.show_message("Solve first: the level count checks a result.", "warn")
            return
        self.tabs.setCurrentIndex(self._tab_index("Levels"))
        self.session.checks.verify_count()

    def _tab_index(self, title: str) -> int:
        for i in range(self.tabs.count()):
            if self.tabs.tabText(i) == title:
                return i
        return self.tabs.currentIndex()

    def _on_estimated(self, estimate) -> None:
        self.strip.show_message(f"Solving {estimate.states} states on {estimate.unknowns:,} grid points "
                                f"({estimate.brief()})...")

    def _update_stale(self) -> None:
        """The banner over the views and the strip say when what is shown no longer matches the project."""
        from .views.common import stale_message
        text = stale_message(self.session)
        if not text and self.tabs.tabText(self.tabs.currentIndex()) == "Sweep":
            text = stale_message(self.session, "sweep")
        self.stale_banner.show_text(text)
        stale = bool(stale_message(self.session))
        if stale and not self._was_stale and not self.session.solving:
            self.strip.show_message(text, "warn")
        self._was_stale = stale

    def _on_check_finished(self, kind: str, value) -> None:
        if kind == "convergence":
            from core.convergence_report import summary_words
            checks = self.session.checks
            if self.session.result is not None and checks.report_for(self.session.result) is value:
                self.strip.show_message(f"Convergence checked in {value.wall_time:.1f} s: {summary_words(value)} "
                                        "(marked in the level diagram).", "ok")
            elif checks.current_report() is value:
                from .views.common import SOLVE_KEY
                self.strip.show_message(f"Convergence checked for the project as it is now ({summary_words(value)}); "
                                        f"the levels on show are of an earlier version: press {SOLVE_KEY} to solve "
                                        "again and see the marks.", "warn")
            else:
                self.strip.show_message("The convergence check finished for an earlier version of the project; "
                                        "it does not apply to what is shown. Check convergence again.", "warn")

    def _on_check_failed(self, kind: str, message: str) -> None:
        self.strip.show_message(f"The {kind} check stopped: {message}", "warn")

    def _on_solve_started(self) -> None:
        self.strip.progress.setValue(0)
        self.strip.progress.setFormat("starting")
        if not self._tick.isActive():
            self._elapsed.start()
            self._tick.start()
        self.strip.show_message("Solving...")

    def _on_progressed(self, stage: str, fraction: float) -> None:
        self.strip.progress.setValue(int(1000 * fraction))
        self.strip.progress.setFormat(f"{stage} {100 * fraction:.0f}%")

    def _on_busy_changed(self, busy: bool) -> None:
        self.strip.cancel_button.setEnabled(busy)
        self.cancel_action.setEnabled(busy)
        if not busy:
            self._tick.stop()
            self._update_elapsed()
            self.strip.progress.setValue(0)
            self.strip.progress.setFormat("")

    def _update_elapsed(self) -> None:
        if self._elapsed.isValid():
            self.strip.elapsed.setText(f"{self._elapsed.elapsed() / 1000:.1f} s")

    def _on_solved(self, result) -> None:
        spec = result.spectrum
        u = result.units
        groups = self.session.groups()
        text = (f"{spec.count} states, {len(groups)} levels, in {spec.wall_time:.2f} s "
                f"(scheme {result.scheme}); ground level {result.energies[0]:.6g} {u.energy_unit}")
        if spec.multiplet_cut:
            text += "; the highest multiplet may be cut - ask for more states to see all of it"
        self.strip.show_message(text, "warn" if spec.multiplet_cut else "ok")
        if not self.session.result_is_current and not self.session.solving:
            from .views.common import stale_message
            self.strip.show_message(stale_message(self.session), "warn")   # solved, but edited meanwhile
        if not self.session.solving:
            self._tick.stop()
            self._update_elapsed()

    def _on_failed(self, message: str) -> None:
        keep = " The previous results are still shown." if self.session.result is not None else ""
        self.strip.show_message(f"Solve failed: {message}.{keep}", "error")

    def _on_cancelled(self) -> None:
        if self.session.solve_queued:     # replaced by a newer request: not worth a message
            return
        keep = " The previous results are still shown." if self.session.result is not None else ""
        self.strip.show_message(f"Solve cancelled.{keep}", "warn")

    def _on_sweep_started(self) -> None:
        self.strip.sweep_label.setText("sweep 0%")
        if not self._tick.isActive():
            self._elapsed.start()
            self._tick.start()
        self.strip.show_message("Sweeping...")

    def _on_sweep_finished(self, _result) -> None:
        self.strip.sweep_label.setText("")
        self.strip.show_message("Sweep finished.", "ok")

    def _on_sweep_failed(self, message: str) -> None:
        self.strip.sweep_label.setText("")
        self.strip.show_message(f"Sweep: {message}", "warn" if "cancelled" in message else "error")

    # -- help ----------------------------------------------------------------------------------------------
    def show_help(self) -> None:
        if self._help is None:
            dlg = QDialog(self)
            dlg.setWindowTitle("The views explained")
            text = QTextBrowser()
            text.setHtml(HELP_TEXT + f"<h3>Caution</h3><p>{CAUTION}</p>")
            QVBoxLayout(dlg).addWidget(text)
            dlg.resize(560, 560)
            self._help = dlg
        self._help.show()
        self._help.raise_()

    def show_about(self) -> None:
        QMessageBox.about(self, "About Wellscape", _about_text())

    # -- closing ---------------------------------------------------------------------------------------------
    def closeEvent(self, event) -> None:  # noqa: N802 - Qt override
        if not self._closing and not self._may_discard():
            event.ignore()
            return
        self._closing = True
        self._tick.stop()
        self.session.shutdown()
        event.accept()


# --- entry point ------------------------------------------------------------------------------------------

def _install_excepthook(window_ref: list) -> None:
    """Unexpected errors in slots go to stderr and to the window's strip, never as a crash."""
    previous = sys.excepthook

    def hook(exc_type, exc, tb):
        traceback.print_exception(exc_type, exc, tb, file=sys.stderr)
        win = window_ref[0] if window_ref else None
        if win is not None:
            try:
                text = str(exc) if isinstance(exc, WellscapeError) else f"unexpected error ({exc_type.__name__}: {exc})"
                win.strip.show_message(text, "error")
            except Exception:   # noqa: BLE001
                previous(exc_type, exc, tb)
    sys.excepthook = hook


def run_gui(args) -> int:
    """Open the window (``args.project`` or the default sample); ``args.solve`` solves once it is open;
    ``args.screenshot`` saves a PNG of the whole window after the solve and exits."""
    project = getattr(args, "project", None)
    do_solve = bool(getattr(args, "solve", False))
    shot = getattr(args, "screenshot", None)
    share_gl_contexts()
    app = QApplication.instance() or QApplication(sys.argv[:1])
    app.setApplicationName("Wellscape")
    app.setOrganizationName("Wellscape")
    configure_pyqtgraph()
    window = MainWindow()
    ref = [window]
    _install_excepthook(ref)
    target = Path(project) if project else SAMPLES_DIR / DEFAULT_SAMPLE
    # an installed wheel ships no sample projects: the window then starts on its new-project template
    opened = window.open_file(target, ask=False) if project or target.is_file() else True
    if not opened and shot:
        print(f"wellscape: error: {window.strip.message.toolTip()}", file=sys.stderr)
        window.session.shutdown()
        return 2
    window.show()
    status = {"code": 0}

    if shot:
        def grab_and_quit():
            app.processEvents()
            ok = window.grab().save(str(shot), "PNG")
            if not ok:
                print(f"wellscape: error: could not write the screenshot {shot}", file=sys.stderr)
                status["code"] = 2
            else:
                print(f"wrote {shot}")
            window.session.undo_stack.setClean()
            window.close()
            app.quit()

        def later(*_a):
            QTimer.singleShot(400, grab_and_quit)

        if do_solve:
            def on_failed(message):
                print(f"wellscape: solve failed: {message}", file=sys.stderr)
                status["code"] = 3
                later()
            window.session.solved.connect(later)
            window.session.failed.connect(on_failed)
            window.session.cancelled.connect(later)
            QTimer.singleShot(0, window.solve)
        else:
            later()
    else:
        QTimer.singleShot(0, window.offer_recovery)
        if do_solve:
            QTimer.singleShot(0, window.solve)
        else:
            QTimer.singleShot(300, window.session.warm_up)
    app.exec()
    window.session.shutdown()
    ref.clear()
    return status["code"]
