"""The Session model without a window: edits and undo, background solves, live parameters,
files, recovery copies, sweeps."""
from __future__ import annotations

import dataclasses
import os
import time

import numpy as np
import pytest
from scipy import constants as sc

from core.errors import ProjectError
from core.grid import Grid
from core.project import FormulaTerm, load_project, new_project

SOLVE_TIMEOUT_MS = 120_000


def small_dot(n: int = 24, states: int = 6):
    """The template parabolic dot on a small grid (solved densely: under a second)."""
    p = new_project()
    return dataclasses.replace(p, grid=Grid([-120.0, -120.0], [120.0, 120.0], [n, n]),
                               solver=dataclasses.replace(p.solver, states=states))


def slow_dot():
    """A solve that takes seconds (second-order differences, 20 states on 160^2): something to cancel."""
    p = small_dot(160, 20)
    return dataclasses.replace(p, solver=dataclasses.replace(p.solver, scheme="fd2", tolerance=1e-10))


def oscillator_levels(project, count):
    """2D isotropic oscillator at B = 0: E = hbar*omega (n + 1), n = nx + ny, degeneracy n + 1.

    Source: the Fock-Darwin spectrum at zero field (V. Fock, Z. Phys. 47, 446 (1928);
    C. G. Darwin, Proc. Camb. Phil. Soc. 27, 86 (1931)).  The template writes
    V = hw/2 * r^2 / l0^2, i.e. m* omega^2 = hw / l0^2, so hbar*omega = hbar sqrt(hw / (m* l0^2)),
    with hbar, m_e and e from scipy.constants (CODATA) and m* = 0.067 m_e for GaAs (the template's
    material).
    """
    hw, l0 = project.parameters["hw"], project.parameters["l0"]
    m = 0.067 * sc.m_e
    hw_joule = hw * 1e-3 * sc.e
    hbar_omega_mev = sc.hbar * np.sqrt(hw_joule / (m * (l0 * 1e-9) ** 2)) / sc.e * 1e3
    levels = [hbar_omega_mev * (n + 1) for n in range(8) for _ in range(n + 1)]
    return np.array(levels[:count])


def wait_idle(qtbot, session, timeout=SOLVE_TIMEOUT_MS):
    qtbot.waitUntil(lambda: not session.solving and not session.sweeping, timeout=timeout)


# --- edits and undo -------------------------------------------------------------------------

def test_edit_is_undoable_and_marks_dirty(session, qtbot):
    assert not session.dirty
    old = session.project
    new = dataclasses.replace(old, title="Renamed dot")
    with qtbot.waitSignals([session.project_changed, session.dirty_changed]):
        session.set_project(new, "rename")
    assert session.project.title == "Renamed dot" and session.dirty
    session.undo_stack.undo()
    assert session.project == old and not session.dirty
    session.undo_stack.redo()
    assert session.project.title == "Renamed dot" and session.dirty


def test_invalid_edit_is_refused_and_loses_nothing(session):
    old = session.project
    bad = dataclasses.replace(old, potential=(FormulaTerm("broken", "0.5*hw*x**2/l0**2 + q"),))
    with pytest.raises(ProjectError) as info:
        session.set_project(bad, "break it")
    assert "potential[0].formula" in str(info.value) and "'q'" in str(info.value)
    assert session.project is old and session.undo_stack.count() == 0 and not session.dirty


def test_potential_is_cached_and_follows_parameters(session, qtbot):
    v1 = session.potential
    assert v1.shape == session.project.grid.shape and session.potential_error is None
    assert session.potential is v1                      # cached
    with qtbot.waitSignals([session.potential_changed, session.parameters_changed]):
        session.set_parameter("hw", 6.0)
    np.testing.assert_allclose(session.potential, 2 * v1, rtol=1e-12)   # V is linear in hw


def test_potential_error_is_reported_not_raised(session):
    p = dataclasses.replace(session.project, potential=(FormulaTerm("log well", "log(x)"),))
    session.set_project(p, "log")
    assert session.potential is None
    assert "NaN" in session.potential_error and "potential[0]" in session.potential_error


def test_parameter_drag_is_one_undo_step(session):
    start = session.project.parameters["hw"]
    for v in np.linspace(3.0, 5.0, 9):
        session.set_parameter("hw", v, live=True)
    session.set_parameter("hw", 5.0, live=False)            # slider released
    session.set_parameter("hw", 7.0)                         # a typed value: its own step
    assert session.undo_stack.count() == 2
    session.undo_stack.undo()
    assert session.project.parameters["hw"] == 5.0
    session.undo_stack.undo()
    assert session.project.parameters["hw"] == start


def test_unknown_parameter_and_bad_value_are_clear_errors(session):
    with pytest.raises(Exception, match="no parameter called 'nope'"):
        session.set_parameter("nope", 1.0)
    with pytest.raises(Exception, match="finite"):
        session.set_parameter("hw", float("nan"))


# --- solving in the background ----------------------------------------------------------------

def test_solve_in_worker_matches_oscillator(session, qtbot):
    session.set_project(small_dot(), "small grid")
    with qtbot.waitSignal(session.solved, timeout=SOLVE_TIMEOUT_MS) as blocker:
        session.solve()
    result = blocker.args[0]
    assert session.result is result
    # sinc-DVR on 24 points across +-6 oscillator lengths: converged far below 1e-6 (measured 3e-9)
    np.testing.assert_allclose(result.energies, oscillator_levels(session.project, 6), rtol=1e-6)
    assert [len(g) for g in session.groups()] == [1, 2, 3]
    assert session.result_is_current
    wait_idle(qtbot, session)


def test_failed_solve_keeps_previous_result(session, qtbot):
    session.set_project(small_dot(), "small grid")
    with qtbot.waitSignal(session.solved, timeout=SOLVE_TIMEOUT_MS):
        session.solve()
    wait_idle(qtbot, session)
    good = session.result
    broken = dataclasses.replace(session.project, potential=(FormulaTerm("bad", "log(x)"),))
    session.set_project(broken, "bad formula")
    with qtbot.waitSignal(session.failed, timeout=SOLVE_TIMEOUT_MS) as blocker:
        session.solve()
    assert "NaN" in blocker.args[0] and "potential[0]" in blocker.args[0]
    assert session.result is good
    wait_idle(qtbot, session)


def test_cancel_a_solve(session, qtbot):
    session.set_project(slow_dot(), "big grid")
    with qtbot.waitSignal(session.progressed, timeout=SOLVE_TIMEOUT_MS):
        session.solve()
    assert session.solving
    with qtbot.waitSignal(session.cancelled, timeout=SOLVE_TIMEOUT_MS):
        session.cancel()
    wait_idle(qtbot, session)
    assert session.result is None


def test_shutdown_joins_a_running_solve(session, qtbot):
    session.set_project(slow_dot(), "big grid")
    with qtbot.waitSignal(session.solve_started):
        session.solve()
    t0 = time.perf_counter()
    session.shutdown()
    assert not session.solving
    assert time.perf_counter() - t0 < 30


def test_live_drag_follows_slider_and_drops_intermediate_requests(session, qtbot):
    session.set_project(small_dot(), "small grid")
    with qtbot.waitSignal(session.solved, timeout=SOLVE_TIMEOUT_MS):
        session.solve()
    wait_idle(qtbot, session)
    solved = []
    session.solved.connect(solved.append)
    values = np.linspace(3.0, 6.0, 25)
    for v in values:
        session.set_parameter("hw", v, live=True)
    session.set_parameter("hw", 6.0, live=False)
    wait_idle(qtbot, session)
    qtbot.wait(50)
    assert 1 <= len(solved) < len(values)            # requests made while busy were dropped
    final = session.result
    assert final.parameters["hw"] == 6.0 and session.result_is_current
    # the final levels are those of the final parameters (cold confirmation solve after the drag)
    np.testing.assert_allclose(final.energies, oscillator_levels(final.project, 6), rtol=1e-6)


# --- files -----------------------------------------------------------------------------------

def test_save_and_reopen(session, qtbot, tmp_path):
    session.set_project(dataclasses.replace(session.project, title="Saved dot", notes="line 1\nline 2"), "edit")
    target = tmp_path / "dot.json"
    with qtbot.waitSignal(session.path_changed):
        session.save(target)
    assert not session.dirty and session.path == target.resolve()
    assert load_project(target) == session.project
    session.new_project()
    assert session.path is None and session.project.title != "Saved dot"
    session.open(target)
    assert session.project.title == "Saved dot" and session.project.notes == "line 1\nline 2"
    assert session.recent_files()[0] == target.resolve()
    assert session.undo_stack.count() == 0 and not session.dirty


def test_open_a_bad_file_keeps_the_project(session, tmp_path):
    bad = tmp_path / "bad.json"
    bad.write_text('{"schema_version": 2, "units": "semiconductor", "grid": {"points": ["abc"]}}', encoding="utf-8")
    before = session.project
    with pytest.raises(ProjectError, match="material: missing"):
        session.open(bad)
    assert session.project is before


def test_save_as_elsewhere_keeps_imported_maps_working(session, sample_path, tmp_path):
    session.open(sample_path("imported_map_dot"))
    v_before = session.potential.copy()
    target = tmp_path / "elsewhere" / "copy.json"
    target.parent.mkdir()
    session.save(target)
    reopened = load_project(target)
    from core.potentials import evaluate_potential
    np.testing.assert_array_equal(evaluate_potential(reopened), v_before)


# --- recovery ----------------------------------------------------------------------------------

def test_autosave_and_restore_after_a_crash(session, settings, qtbot, tmp_path):
    session.set_project(dataclasses.replace(session.project, title="Unsaved work"), "edit")
    qtbot.waitUntil(lambda: session.recovery_file.is_file(), timeout=5000)
    # pretend the window that wrote it crashed: its entry now belongs to a dead process
    dead = "999999999"
    assert not _alive(int(dead))
    value = list(settings.value(f"recovery/{session._recovery_key}"))
    crashed = tmp_path / "left-behind.json"
    crashed.write_bytes(session.recovery_file.read_bytes())
    settings.setValue(f"recovery/{dead}", [str(crashed)] + value[1:])
    entries = session.recoverable()
    assert [e.title for e in entries] == ["Unsaved work"]
    session.new_project()
    session.restore(entries[0])
    assert session.project.title == "Unsaved work" and session.dirty
    assert session.recoverable() == [] and not crashed.exists()


def _alive(pid):
    try:
        os.kill(pid, 0)
    except OSError:
        return False
    return True


def test_clean_shutdown_removes_the_recovery_copy(session, qtbot):
    session.set_project(dataclasses.replace(session.project, title="x"), "edit")
    qtbot.waitUntil(lambda: session.recovery_file.is_file(), timeout=5000)
    session.shutdown()
    assert not session.recovery_file.exists()


# --- sweeps ------------------------------------------------------------------------------------

def test_sweep_refuses_unknown_parameter(session, qtbot):
    with qtbot.waitSignal(session.sweep_failed) as blocker:
        assert session.run_sweep("nope", [1, 2, 3]) is False
    assert "nope" in blocker.args[0] or "sweep engine" in blocker.args[0]


def test_sweep_runs_in_worker(session, qtbot):
    pytest.importorskip("core.sweep")
    session.set_project(small_dot(), "small grid")
    estimates = []
    session.sweep_estimated.connect(estimates.append)
    with qtbot.waitSignal(session.sweep_finished, timeout=SOLVE_TIMEOUT_MS) as blocker:
        assert session.run_sweep("hw", [2.0, 3.0, 4.0], states=3)
    wait_idle(qtbot, session)
    assert len(estimates) == 1 and estimates[0].states == 3 and "a sweep of 3 solves" in estimates[0].what
    sweep = blocker.args[0]
    assert session.sweep_result is sweep
    # ground level = hbar*omega (Fock-Darwin at B = 0, see oscillator_levels) at each hw
    ground = np.asarray(sweep.energies)[:, 0]
    expected = [oscillator_levels(small_dot().with_parameters(hw=hw), 1)[0] for hw in (2.0, 3.0, 4.0)]
    np.testing.assert_allclose(ground, expected, rtol=1e-6)


def test_result_analysis_runs_in_the_worker(session, qtbot):
    import threading
    seen = {}

    def analyse(result):
        seen["thread"] = threading.current_thread() is threading.main_thread()
        return float(result.energies[0])

    def broken(result):
        raise ValueError("no labels today")

    session.add_result_analysis("ground", analyse)
    session.add_result_analysis("labels", broken)
    session.set_project(small_dot(), "small grid")
    with qtbot.waitSignal(session.solved, timeout=SOLVE_TIMEOUT_MS) as blocker:
        session.solve()
    wait_idle(qtbot, session)
    result = blocker.args[0]
    assert seen["thread"] is False
    assert result.extra["ground"] == result.energies[0]
    assert "no labels today" in result.extra["labels_error"]
