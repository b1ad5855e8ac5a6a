"""Convergence studies and certified level counts run from a session (no window).

Physics references:
* 2D isotropic oscillator levels hbar*omega*(n + 1) with degeneracy n + 1 (textbook, e.g.
  C. Cohen-Tannoudji, B. Diu, F. Laloe, Quantum Mechanics, Wiley 1977, Vol. 1, Complement E_VI);
  the template project's hbar*omega is computed in ``test_session.oscillator_levels``.
* Counting eigenvalues below a shift by Sylvester's law of inertia (J. J. Sylvester, Phil. Mag. 4,
  138 (1852)); Richardson extrapolation (L. F. Richardson, Phil. Trans. R. Soc. A 210, 307 (1911)).
"""
from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from core.eigensolve import Spectrum

from .test_session import oscillator_levels, small_dot, wait_idle

TIMEOUT_MS = 120_000


def _solve(qtbot, session, project):
    session.set_project(project, "set up")
    with qtbot.waitSignal(session.solved, timeout=TIMEOUT_MS):
        session.solve()
    wait_idle(qtbot, session)
    return session.result


def test_count_is_verified_after_a_solve_and_matches_the_analytic_count(session, qtbot):
    """The automatic count after a solve of the 2D oscillator (10 states = shells 1 + 2 + 3 + 4)
    finds exactly as many eigenvalues below its shift as the analytic spectrum has: the fourth
    shell is complete, so the shift lies in the gap to the fifth."""
    checks = session.checks
    with qtbot.waitSignal(checks.finished, timeout=TIMEOUT_MS) as blocker:
        result = _solve(qtbot, session, small_dot(40, 10))
    kind, cert = blocker.args
    assert kind == "count"
    exact = oscillator_levels(session.project, 15)
    assert cert.certified and cert.label == "count verified"
    assert cert.count_below == int(np.sum(exact < cert.shift)) == 10
    assert checks.certificate_for(result) is cert
    qtbot.waitUntil(lambda: not checks.running(), timeout=TIMEOUT_MS)


def test_count_catches_a_dropped_member_of_a_multiplet(session, qtbot):
    """Simulated broken solve: one member of the doubly degenerate first excited shell removed.
    The inertia count below the top level must then exceed the returned count by one."""
    session.checks.auto_count = False
    result = _solve(qtbot, session, small_dot(40, 6))
    spec = result.spectrum
    keep = [0, 1, 3, 4, 5]            # level 2 (second member of shell n = 1) dropped
    broken = dataclasses.replace(result, spectrum=Spectrum(
        energies=spec.energies[keep], states=spec.states[keep], residuals=spec.residuals[keep], grid=spec.grid,
        iterations=spec.iterations, applications=spec.applications, wall_time=spec.wall_time, converged=True,
        requested=5, tolerance=spec.tolerance, degeneracy_tolerance=spec.degeneracy_tolerance,
        multiplet_cut=False, scheme=spec.scheme))
    with qtbot.waitSignal(session.checks.finished, timeout=TIMEOUT_MS) as blocker:
        assert session.checks.verify_count(broken)
    cert = blocker.args[1]
    assert not cert.certified and cert.label == "count NOT verified" and cert.missing == 1
    assert session.checks.certificate_for(broken) is cert
    assert session.checks.certificate_for(result) is None


def test_live_solves_are_not_counted(session, qtbot):
    session.checks.auto_count = True
    result = _solve(qtbot, session, small_dot(32, 6))
    qtbot.waitUntil(lambda: session.checks.certificate_for(result) is not None, timeout=TIMEOUT_MS)
    starts = []
    session.checks.started.connect(starts.append)
    with qtbot.waitSignal(session.solved, timeout=TIMEOUT_MS):
        session.set_parameter("hw", session.project.parameters["hw"] * 1.01, live=True)
    assert session.result_mode == "live"
    qtbot.wait(50)
    assert starts == []
    wait_idle(qtbot, session)
    qtbot.waitUntil(lambda: not session.checks.running(), timeout=TIMEOUT_MS)


def test_a_solve_reports_its_estimate_before_it_runs(session, qtbot):
    session.set_project(small_dot(48, 6), "set up")
    seen = []
    session.estimated.connect(lambda e: seen.append(("estimated", e)))
    session.solved.connect(lambda r: seen.append(("solved", r)))
    with qtbot.waitSignal(session.solved, timeout=TIMEOUT_MS):
        session.solve()
    assert [name for name, _ in seen] == ["estimated", "solved"]
    est = seen[0][1]
    assert est.unknowns == 48 * 48 and est.states == 6 and est.fits and est.memory_bytes > 0
    wait_idle(qtbot, session)
    qtbot.waitUntil(lambda: not session.checks.running(), timeout=TIMEOUT_MS)


def test_convergence_study_in_the_background_gives_an_error_based_tolerance(session, qtbot):
    """Second-order grid: the 2D oscillator's shells are split only by grid artefacts, which the
    study must call "not resolved"; the gaps between shells (hbar*omega) are "resolved".  The
    extrapolated levels are closer to the exact ones than the project grid's."""
    checks = session.checks
    checks.auto_count = False
    p = small_dot(36, 6)
    p = dataclasses.replace(p, solver=dataclasses.replace(p.solver, scheme="fd2"))
    result = _solve(qtbot, session, p)
    seen = []
    checks.estimated.connect(lambda k, e: seen.append(k))
    with qtbot.waitSignal(checks.finished, timeout=TIMEOUT_MS) as blocker:
        assert checks.check_convergence(factor=1.5, grids=3)
    kind, report = blocker.args
    assert seen == ["convergence"]
    assert kind == "convergence"
    assert checks.report_for(result) is report and checks.current_report() is report
    exact = oscillator_levels(session.project, report.levels)
    assert np.max(np.abs(report.extrapolated - exact)) < np.max(np.abs(report.project_energies - exact))
    verdicts = {(s.lower, s.upper): s.resolved for s in report.splittings()}
    for (a, b), ok in verdicts.items():
        same_shell = abs(exact[a] - exact[b]) < 1e-9 * exact[0]
        assert ok == (not same_shell), (a, b, ok)
    tol = session.error_based_tolerance()
    assert tol is not None and session.effective_degeneracy_tolerance() == tol
    assert [len(g) for g in session.groups()][:3] == [1, 2, 3]
    # an edit makes the report stale for the project as it is now
    session.set_parameter("hw", session.project.parameters["hw"] * 1.1)
    assert checks.current_report() is None
    qtbot.waitUntil(lambda: not checks.running() and not session.solving, timeout=TIMEOUT_MS)


def test_a_count_in_its_own_process_is_cancelled_at_once(session, qtbot, monkeypatch):
    import app.checks as checks_mod
    monkeypatch.setattr(checks_mod, "_IN_THREAD_SECONDS", -1.0)
    session.checks.auto_count = False
    result = _solve(qtbot, session, small_dot(32, 6))
    with qtbot.waitSignal(session.checks.started, timeout=TIMEOUT_MS):
        session.checks.verify_count(result)
    with qtbot.waitSignal(session.checks.failed, timeout=30_000) as blocker:
        session.checks.cancel()
    assert blocker.args == ["count", "count check cancelled"]
    qtbot.waitUntil(lambda: not session.checks.running(), timeout=30_000)


def test_a_count_in_its_own_process_gives_the_same_certificate(session, qtbot, monkeypatch):
    import app.checks as checks_mod
    monkeypatch.setattr(checks_mod, "_IN_THREAD_SECONDS", -1.0)
    session.checks.auto_count = False
    result = _solve(qtbot, session, small_dot(32, 6))
    with qtbot.waitSignal(session.checks.finished, timeout=TIMEOUT_MS) as blocker:
        session.checks.verify_count(result)
    cert = blocker.args[1]
    exact = oscillator_levels(session.project, 15)
    assert cert.certified and cert.count_below == int(np.sum(exact < cert.shift)) == 6


@pytest.mark.parametrize("kind", ["convergence", "count"])
def test_shutdown_joins_a_running_check(session, qtbot, kind):
    session.checks.auto_count = False
    result = _solve(qtbot, session, small_dot(32, 6))
    if kind == "convergence":
        session.checks.check_convergence()
    else:
        session.checks.verify_count(result)
    session.shutdown()
    assert not session.checks.running()


def test_level_diagram_marks_every_splitting_and_the_count(session, qtbot):
    """The level diagram after a convergence check of the 2D oscillator on a second-order grid:
    every splitting carries a mark, the shells' artefact splittings are "not resolved" (≈), the
    gaps of hbar*omega between shells "resolved" (✓), and each level has an error bar."""
    from app.views import LevelsView
    view = LevelsView(session)
    qtbot.addWidget(view)
    view.resize(900, 640)
    view.show()
    p = small_dot(36, 6)
    p = dataclasses.replace(p, solver=dataclasses.replace(p.solver, scheme="fd2"))
    with qtbot.waitSignal(session.checks.finished, timeout=TIMEOUT_MS):
        _solve(qtbot, session, p)
    assert view.count_label.text().count("✔ count verified") == 1
    assert "○ convergence not checked" in view.converge_label.text()
    assert view.marks == []
    with qtbot.waitSignal(session.checks.finished, timeout=TIMEOUT_MS):
        view.converge_button.click()
    qtbot.waitUntil(lambda: bool(view.marks), timeout=5000)
    report = session.checks.report_for(session.result)
    exact = oscillator_levels(session.project, report.levels)
    marked = {(a, b): ok for a, b, ok, _x, _y in view.marks}
    assert len(marked) == len(report.splittings()) == 5
    for (a, b), ok in marked.items():
        assert ok == (abs(exact[a] - exact[b]) > 1e-9 * exact[0])
    assert [len(g) for g in view.groups] == [1, 2, 3]
    texts = [t.toPlainText() for t in view._label_items]
    # the N = 1 pair is exact on every grid (square-grid symmetry); the N = 2 shell has an O(h^2) artefact
    assert "≈ degenerate on every grid (to the solver's accuracy)" in texts[1]
    assert "≈ degenerate within the grid error" in texts[2]
    assert "≈" not in texts[0]
    assert "✓ 2 resolved" in view.converge_label.text() and "≈ 3 not resolved" in view.converge_label.text()
    errs = view.level_errors()
    assert errs.shape == (6,) and np.all(np.isfinite(errs)) and np.all(errs > 0)
    hover = view.describe_level(2)
    assert "not resolved" in hover and "grid error ±" in hover
    qtbot.waitUntil(lambda: not session.checks.running() and not session.solving, timeout=TIMEOUT_MS)


def test_a_count_too_long_for_every_solve_is_offered_not_run(session, qtbot):
    """With a time limit below the estimate, the automatic count is skipped and says so; the
    button then runs it, and it agrees with the analytic oscillator count (as above)."""
    from app.views import LevelsView
    view = LevelsView(session)
    qtbot.addWidget(view)
    session.checks.auto_count_seconds = 1e-9
    with qtbot.waitSignal(session.checks.finished, timeout=TIMEOUT_MS):
        result = _solve(qtbot, session, small_dot(32, 6))
    assert session.checks.skipped_as_too_long(result) > 1e-9
    assert "too long to run after every solve" in view.count_label.text()
    with qtbot.waitSignal(session.checks.finished, timeout=TIMEOUT_MS) as blocker:
        view.verify_button.click()
    cert = blocker.args[1]
    assert cert.certified and session.checks.skipped_as_too_long(result) is None
    assert cert.count_below == int(np.sum(oscillator_levels(session.project, 15) < cert.shift))
    qtbot.waitUntil(lambda: "✔ count verified" in view.count_label.text(), timeout=5000)
    qtbot.waitUntil(lambda: not session.checks.running(), timeout=TIMEOUT_MS)
