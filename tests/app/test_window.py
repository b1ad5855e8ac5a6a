"""The main window: samples open, solves run in the worker and can be cancelled, edits undo,
errors show in the window, projects save and reopen, and the screenshot command works."""
from __future__ import annotations

import dataclasses
import os
import struct
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from PySide6.QtCore import Qt
from PySide6.QtWidgets import QFileDialog, QLabel

from app.main import VIEW_SPECS, MainWindow
from app.session import sample_projects
from core.project import FormulaTerm, load_project, save_project
from tests.app.test_session import SOLVE_TIMEOUT_MS, oscillator_levels, slow_dot, small_dot, wait_idle

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture
def window(session, qtbot):
    answers = []
    w = MainWindow(session=session, confirm_close=lambda: answers.pop(0) if answers else "discard")
    w.answers = answers
    qtbot.addWidget(w)
    w.show()
    yield w
    w.close()


def test_window_has_the_parts(window):
    assert [window.tabs.tabText(i) for i in range(window.tabs.count())] == [t for t, _m, _c in VIEW_SPECS]
    assert "safety rules" in window.caution.text() and window.caution.isVisible()
    menus = [a.text() for a in window.menuBar().actions()]
    assert menus == ["&File", "&Edit", "&Solve", "&Help"]
    assert len(window.samples_menu.actions()) == len(sample_projects())


@pytest.mark.parametrize("path", sample_projects(), ids=lambda p: p.stem)
def test_open_every_sample(window, path, qtbot):
    assert window.open_file(path, ask=False), window.strip.message.toolTip()
    assert window.session.project == load_project(path)
    assert path.name in window.windowTitle() and "*" not in window.windowTitle()
    assert window.session.potential is not None, window.session.potential_error
    for title in window.views:
        window.tabs.setCurrentIndex([window.tabs.tabText(i) for i in range(window.tabs.count())].index(title))
        qtbot.wait(10)
    assert window.strip.kind != "error"


def test_solve_through_the_worker(window, qtbot):
    window.session.set_project(small_dot(), "small grid")
    with qtbot.waitSignal(window.session.solved, timeout=SOLVE_TIMEOUT_MS) as blocker:
        qtbot.mouseClick(window.strip.solve_button, Qt.MouseButton.LeftButton)
    wait_idle(qtbot, window.session)
    result = blocker.args[0]
    # Fock-Darwin levels at B = 0 (see tests/app/test_session.py::oscillator_levels); sinc-DVR converged
    np.testing.assert_allclose(result.energies, oscillator_levels(window.session.project, 6), rtol=1e-6)
    assert window.strip.kind == "ok" and "6 states, 3 levels" in window.strip.message.text()
    assert not window.strip.cancel_button.isEnabled()


def test_cancel_a_solve(window, qtbot):
    window.session.set_project(slow_dot(), "big grid")
    with qtbot.waitSignal(window.session.progressed, timeout=SOLVE_TIMEOUT_MS):
        window.solve()
    assert window.strip.cancel_button.isEnabled() and window.cancel_action.isEnabled()
    with qtbot.waitSignal(window.session.cancelled, timeout=SOLVE_TIMEOUT_MS):
        qtbot.mouseClick(window.strip.cancel_button, Qt.MouseButton.LeftButton)
    wait_idle(qtbot, window.session)
    assert "cancelled" in window.strip.message.text().lower()
    assert window.session.result is None


def test_failed_solve_shows_error_and_keeps_results(window, qtbot):
    window.session.set_project(small_dot(), "small grid")
    with qtbot.waitSignal(window.session.solved, timeout=SOLVE_TIMEOUT_MS):
        window.solve()
    wait_idle(qtbot, window.session)
    good = window.session.result
    bad = dataclasses.replace(window.session.project, potential=(FormulaTerm("bad", "log(x)"),))
    window.session.set_project(bad, "bad")
    with qtbot.waitSignal(window.session.failed, timeout=SOLVE_TIMEOUT_MS):
        window.solve()
    wait_idle(qtbot, window.session)
    assert window.strip.kind == "error"
    assert "Solve failed" in window.strip.message.text() and "previous results" in window.strip.message.text()
    assert "Traceback" not in window.strip.message.toolTip()
    assert window.session.result is good


def test_undo_and_redo_an_edit(window, qtbot):
    grid = window.editors.grid
    grid.rows[0][3].setValue(40)
    assert window.session.project.grid.points == (40, 64)
    assert window.windowTitle().startswith("untitled*") or "*" in window.windowTitle()
    window.undo_action.trigger()
    assert window.session.project.grid.points == (64, 64) and grid.rows[0][3].value() == 64
    assert "*" not in window.windowTitle()
    window.redo_action.trigger()
    assert window.session.project.grid.points == (40, 64) and grid.rows[0][3].value() == 40


def test_invalid_formula_shows_its_error(window, qtbot):
    terms = window.editors.terms
    before = window.session.project
    terms.formula.edit.setFocus()
    qtbot.keyClicks(terms.formula.edit, " + sqrt(")
    qtbot.wait(200)                                            # checked 120 ms after typing
    assert terms.formula.status.is_error and "column" in terms.formula.status.text()
    assert not terms.formula.apply() and window.session.project is before
    # valid syntax, but not finite on the grid: applied, and the potential reports why
    terms.formula.set_text("log(x)")
    assert terms.formula.apply()
    assert window.session.potential is None and "NaN" in window.session.potential_error
    qtbot.wait(50)
    assert window.isVisible()


def test_save_and_reopen(window, qtbot, tmp_path, monkeypatch):
    target = tmp_path / "my dot.json"
    monkeypatch.setattr(QFileDialog, "getSaveFileName", lambda *a, **k: (str(target), ""))
    window.editors.parameters.add("tilt", 0.25)
    assert window.save_as()
    assert target.is_file() and "my dot.json" in window.windowTitle() and "*" not in window.windowTitle()
    window.new_project()
    assert "tilt" not in window.session.project.parameters
    assert window.open_file(target)
    assert window.session.project.parameters["tilt"] == 0.25
    assert Path(window.session.recent_files()[0]) == target.resolve()
    window._fill_recent()
    assert str(target.resolve()) in [a.text() for a in window.recent_menu.actions()]


def test_close_asks_when_there_are_unsaved_changes(window, qtbot):
    window.editors.parameters.add("extra", 1.0)
    window.answers.append("cancel")
    window.close()
    assert window.isVisible()                                   # the user said cancel
    window.answers.append("discard")
    window.close()
    assert not window.isVisible()


def test_open_a_bad_file_shows_the_reason(window, tmp_path):
    bad = tmp_path / "broken.json"
    bad.write_text("{ not json", encoding="utf-8")
    before = window.session.project
    assert not window.open_file(bad, ask=False)
    assert window.strip.kind == "error" and "not valid JSON" in window.strip.message.text()
    assert window.session.project is before


def test_missing_view_gets_a_placeholder(session, qtbot, monkeypatch):
    import app.main as main
    monkeypatch.setattr(main, "VIEW_SPECS", VIEW_SPECS + (("Extra", "app.views.no_such_view", "NoSuchView"),))
    w = MainWindow(session=session, confirm_close=lambda: "discard")
    qtbot.addWidget(w)
    placeholder = w.tabs.widget(w.tabs.count() - 1)
    assert isinstance(placeholder, QLabel) and "not available" in placeholder.text()
    assert "Extra" in w.view_errors
    w.close()


def _png_size(path: Path) -> tuple:
    with path.open("rb") as fh:
        head = fh.read(24)
    assert head[:8] == b"\x89PNG\r\n\x1a\n", "not a PNG file"
    return struct.unpack(">II", head[16:24])


def test_screenshot_command(tmp_path):
    """`wellscape open FILE --solve --screenshot OUT.png` solves and writes the whole window."""
    project = tmp_path / "dot.json"
    save_project(small_dot(), project)
    out = tmp_path / "window.png"
    env = dict(os.environ)
    env.setdefault("QT_QPA_PLATFORM", "offscreen")
    env["XDG_CONFIG_HOME"] = str(tmp_path / "config")
    env["XDG_DATA_HOME"] = str(tmp_path / "data")
    proc = subprocess.run([sys.executable, "-m", "app.cli", "open", str(project), "--solve", "--screenshot", str(out)],
                          cwd=ROOT, env=env, capture_output=True, text=True, timeout=600)
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert "Traceback" not in proc.stderr
    width, height = _png_size(out)
    assert width >= 800 and height >= 500


def test_offers_to_restore_after_a_crash(session, settings, qtbot, tmp_path):
    # a window that crashed left its recovery copy behind (its process, 999999999, is gone)
    left = tmp_path / "left-behind.json"
    save_project(dataclasses.replace(small_dot(), title="Work from before the crash"), left)
    settings.setValue("recovery/999999999", [str(left), "", "2024-01-01 12:00:00", "Work from before the crash"])
    asked = []
    w = MainWindow(session=session, confirm_close=lambda: "discard",
                   ask_restore=lambda entry: asked.append(entry.title) or "restore")
    qtbot.addWidget(w)
    w.offer_recovery()
    assert asked == ["Work from before the crash"]
    assert session.project.title == "Work from before the crash" and session.dirty
    assert w.windowTitle().startswith("untitled*")
    assert session.recoverable() == [] and not left.exists()
    w.close()
