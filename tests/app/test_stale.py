"""The window never shows a stale or mixed result as current: an edit after a solve marks every view
that shows results, the status strip agrees with the level diagram, a sheet from two project states is
refused or names both, and box states are flagged in the level diagram."""
from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from app.main import MainWindow
from core.grid import Grid
from tests.app.test_session import SOLVE_TIMEOUT_MS, small_dot, wait_idle

CHECK_TIMEOUT_MS = 120_000


@pytest.fixture
def window(session, qtbot):
    w = MainWindow(session=session, confirm_close=lambda: "discard")
    qtbot.addWidget(w)
    w.show()
    yield w
    w.close()


def _solve(window, qtbot):
    with qtbot.waitSignal(window.session.solved, timeout=SOLVE_TIMEOUT_MS):
        window.solve()
    wait_idle(qtbot, window.session)
    qtbot.waitUntil(lambda: not window.session.checks.running(), timeout=CHECK_TIMEOUT_MS)


def _views(window):
    return window.views["Levels"], window.views["States"], window.views["Potential"], window.views["Sweep"]


def test_an_edit_after_a_solve_marks_every_view_stale(window, qtbot):
    s = window.session
    s.set_project(small_dot(), "small grid")
    _solve(window, qtbot)
    levels, states, potential, _sweep = _views(window)
    assert s.result_is_current and window.stale_banner.isHidden()
    assert not levels.stale_note.stale and not states.stale_note.stale
    # a cosmetic edit keeps everything current
    s.set_project(dataclasses.replace(s.project, title="renamed", notes="a note"), "rename")
    assert s.result_is_current and window.stale_banner.isHidden() and not levels.stale_note.stale
    # a field changes the physics: every view that shows results says so, and the strip too
    s.set_project(dataclasses.replace(s.project, magnetic_field=(0.0, 0.0, 1.0)), "B = 1 T")
    assert not s.result_is_current
    banner = window.stale_banner.text()
    assert not window.stale_banner.isHidden() and "earlier version" in banner and "F5" in banner
    assert "magnetic field" in banner
    assert levels.stale_note.stale and "magnetic field" in levels.stale_note.text()
    assert states.stale_note.stale
    assert levels.plot.backgroundBrush().color().name() == "#ececec"
    assert any(line.pen.style().name == "DotLine" for line, _plot in potential.level_lines)
    assert "earlier version" in window.strip.message.text()
    assert "(for the earlier version shown)" in levels.count_label.text()
    # a grid change as well; undoing both makes the results current again
    s.set_project(dataclasses.replace(s.project, grid=Grid([-120.0, -120.0], [120.0, 120.0], [26, 26])), "grid")
    assert "grid" in window.stale_banner.text()
    s.undo_stack.undo()
    s.undo_stack.undo()
    assert s.result_is_current and window.stale_banner.isHidden() and not levels.stale_note.stale
    # solving the edited project clears the marks
    s.set_project(dataclasses.replace(s.project, magnetic_field=(0.0, 0.0, 1.0)), "B = 1 T")
    _solve(window, qtbot)
    assert s.result_is_current and window.stale_banner.isHidden()
    assert not levels.stale_note.stale and not states.stale_note.stale
    assert levels.plot.backgroundBrush().color().name() == "#ffffff"


def test_status_strip_and_diagram_agree_after_a_check_of_an_edited_project(window, qtbot):
    s = window.session
    s.set_project(small_dot(28, 6), "small grid")
    _solve(window, qtbot)
    levels = window.views["Levels"]
    old = s.result
    s.set_project(s.project.with_parameters(hw=3.3), "hw")       # not a slider: no automatic solve
    assert s.result is old and not s.result_is_current
    with qtbot.waitSignal(s.checks.finished, timeout=CHECK_TIMEOUT_MS):
        s.checks.check_convergence()
    qtbot.waitUntil(lambda: not s.checks.running(), timeout=CHECK_TIMEOUT_MS)
    # the check is of the project as it is now, not of the levels on show: neither claims otherwise
    assert s.checks.report_for(s.result) is None and levels.report() is None
    assert "not checked" in levels.converge_label.text()
    assert "Convergence checked in" not in window.strip.message.text()
    assert "earlier version" in window.strip.message.text()
    # after solving again the marks appear, and the strip and the diagram say the same
    _solve(window, qtbot)
    assert s.checks.report_for(s.result) is not None
    assert "convergence checked" in levels.converge_label.text()
    assert "Ground level" not in window.stale_banner.text() and window.stale_banner.isHidden()


def test_the_sweep_view_says_when_the_project_changed_since(window, qtbot):
    s = window.session
    s.set_project(small_dot(), "small grid")
    sweep_view = window.views["Sweep"]
    with qtbot.waitSignal(s.sweep_finished, timeout=SOLVE_TIMEOUT_MS):
        assert s.run_sweep("hw", np.linspace(2.5, 3.5, 3), states=3)
    wait_idle(qtbot, s)
    assert s.sweep_is_current and not sweep_view.stale_note.stale
    s.set_project(s.project.with_parameters(hw=3.1), "hw")       # along the fan: still current
    assert s.sweep_is_current and not sweep_view.stale_note.stale
    s.set_project(s.project.with_parameters(l0=25.0), "l0")
    assert not s.sweep_is_current and sweep_view.stale_note.stale
    assert "l0 = 25" in sweep_view.stale_note.text() and "sweep again" in sweep_view.stale_note.text()


def test_a_sheet_from_two_states_is_refused_or_names_both(window, qtbot):
    from app.export_dialog import ExportSheetDialog
    s = window.session
    s.set_project(small_dot(), "small grid")
    with qtbot.waitSignal(s.sweep_finished, timeout=SOLVE_TIMEOUT_MS):
        assert s.run_sweep("hw", np.linspace(2.5, 3.5, 3), states=3)
    wait_idle(qtbot, s)
    s.set_project(s.project.with_parameters(l0=25.0), "l0")
    _solve(window, qtbot)
    dialog = ExportSheetDialog(s, window)
    qtbot.addWidget(dialog)
    dialog.layout_box.setCurrentIndex(dialog.layout_box.findData("potential+states2+fan"))
    dialog.refresh()
    assert dialog.sheet is None and not dialog.save_button.isEnabled()
    assert "different project states" in dialog.message.text() and "l0 = 25" in dialog.message.text()
    dialog.mixed_box.setChecked(True)
    dialog.refresh()
    assert dialog.sheet is not None
    line = next(c for c in dialog.sheet.caption if c.startswith("Panels from two project states"))
    from core.provenance import result_fingerprint, sweep_fingerprint
    assert result_fingerprint(s.result) in line and sweep_fingerprint(s.sweep_result) in line


def test_figure_command_refuses_a_sweep_of_another_state(tmp_path, capsys):
    from app.figure_cli import main
    from core.project import save_project
    from core.sweep import run_sweep, save_sweep
    p = small_dot(24, 4)
    save_sweep(run_sweep(p, "hw", np.linspace(2.5, 3.5, 3), states=3), tmp_path / "fan")
    save_project(p.with_parameters(l0=25.0), tmp_path / "other.json")
    args = [str(tmp_path / "other.json"), "-o", str(tmp_path / "sheet.png"), "--sweep", str(tmp_path / "fan.npz"),
            "--dpi", "40"]
    assert main(["figure", *args]) == 2
    err = capsys.readouterr().err
    assert "different project states" in err and "l0 = 25" in err
    assert main(["figure", *args, "--mixed-states"]) == 0
    assert (tmp_path / "sheet.png").stat().st_size > 0
    save_project(p, tmp_path / "same.json")
    args[0] = str(tmp_path / "same.json")
    assert main(["figure", *args]) == 0


def test_box_states_are_flagged_in_the_level_diagram(window, qtbot, sample_path):
    s = window.session
    window.open_file(sample_path("lens_dot_3d"), ask=False)
    _solve(window, qtbot)
    levels = window.views["Levels"]
    assert "box state" not in levels.header.text()
    assert not any(lab["box"] for lab in levels.labels)
    s.set_parameter("R", 8.0)                  # a typed value: re-solves at once
    qtbot.waitUntil(lambda: s.result is not None and s.result.parameters["R"] == 8.0 and not s.solving,
                    timeout=SOLVE_TIMEOUT_MS)
    qtbot.waitUntil(lambda: levels.result is s.result, timeout=SOLVE_TIMEOUT_MS)
    assert "box state (not bound)" in levels.header.text()
    assert "enlarge the grid or deepen the confinement" in levels.header.text()
    for lab in levels.labels:
        assert lab["box"] == (lab["energy"] > 378.0), lab
    above = [lab for lab in levels.labels if lab["energy"] > 400.0]
    assert above and all(lab["box"] for lab in above)
    texts = [t.toPlainText() for t in levels._label_items]
    assert any("box state (not bound)" in t for t in texts)
    assert len(levels.box_item.getData()[0]) > 0


def test_close_levels_are_a_cluster_with_their_splitting_and_labels_never_overlap(window, qtbot):
    """A double dot with a small tunnel splitting: the pair is one cluster labelled with its ΔE."""
    s = window.session
    p = small_dot(40, 4)
    from core.project import FormulaTerm
    v = "-12*(exp(-((x - 45)**2 + y**2)/(2*14**2)) + exp(-((x + 45)**2 + y**2)/(2*14**2)))"
    p = dataclasses.replace(p, potential=(FormulaTerm("double dot", v),),
                            solver=dataclasses.replace(p.solver, scheme="spectral"))
    s.set_project(p, "double dot")
    _solve(window, qtbot)
    window.tabs.setCurrentIndex(1)
    levels = window.views["Levels"]
    qtbot.wait(50)
    e = s.result.energies
    assert e[1] - e[0] < 0.01 * (e[-1] - e[0])
    pair = next(c for c in levels.clusters if len(c) > 1)
    text = levels._label_items[levels.clusters.index(pair)].toPlainText()
    assert "ΔE = " in text and ("µeV" in text or "neV" in text)
    assert all(lab["lz_text"] == "" for lab in levels.labels)          # no L_z in a double dot
    boxes = sorted(levels.label_boxes(), key=lambda b: b[1])
    assert all(b[1] >= a[2] - 1e-12 for a, b in zip(boxes, boxes[1:]))
    levels.relative.setChecked(True)
    assert all("E − E₀ = " in t.toPlainText() for t in levels._label_items)


def test_a_potential_made_invalid_after_a_solve_gives_messages_not_tracebacks(window, qtbot):
    """A formula that gives NaN: the potential view and the strip say so in one line, the results stay on
    show marked as out of date, and nothing raises."""
    from core.project import FormulaTerm
    s = window.session
    s.set_project(small_dot(), "small grid")
    _solve(window, qtbot)
    bad = dataclasses.replace(s.project, potential=s.project.potential + (FormulaTerm("bad", "sqrt(x - 1000)"),))
    s.set_project(bad, "bad term")
    for i in range(window.tabs.count()):
        window.tabs.setCurrentIndex(i)
        qtbot.wait(20)
    assert "NaN" in window.views["Potential"].status.text()
    assert "potential terms" in window.stale_banner.text()
    with qtbot.waitSignal(s.failed, timeout=SOLVE_TIMEOUT_MS):
        window.solve()
    wait_idle(qtbot, s)
    assert window.strip.kind == "error" and "NaN" in window.strip.message.text()
    assert s.result is not None and not window.stale_banner.isHidden()


def test_a_slider_drag_is_not_marked_stale_while_its_live_solve_runs(window, qtbot):
    s = window.session
    s.set_project(small_dot(), "small grid")
    _solve(window, qtbot)
    levels = window.views["Levels"]
    hw = s.project.parameters["hw"]
    s.set_parameter("hw", hw * 1.02, live=True)
    assert s.solving_current and not s.result_is_current
    assert window.stale_banner.isHidden() and not levels.stale_note.stale
    s.set_parameter("hw", hw * 1.02, live=False)
    wait_idle(qtbot, s)
    assert s.result_is_current and window.stale_banner.isHidden()
