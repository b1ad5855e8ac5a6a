"""Two electrons in the window: the session computes the singlet/triplet levels beside the orbital
result, the Levels view shows them with their spin and J, an edit marks them out of date, a failure
is one line, and the Sweep view plots J against the swept value."""
from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from app.views import LevelsView, SweepView
from app.views.exchange_plot import exchange_points
from core.errors import MemoryLimitError
from core.formatting import format_energy
from core.project import load_project
from core.sweep import run_sweep
from tests.app.test_session import SOLVE_TIMEOUT_MS, wait_idle
from tests.app.test_views import SAMPLES

SAMPLE = SAMPLES / "gaas_double_dot_two_electrons.json"


def _solve(session, qtbot):
    with qtbot.waitSignal(session.solved, timeout=SOLVE_TIMEOUT_MS):
        session.solve()
    wait_idle(qtbot, session)


@pytest.fixture
def solved(session, qtbot):
    session.open(SAMPLE)
    view = LevelsView(session)
    qtbot.addWidget(view)
    _solve(session, qtbot)
    return session, view


def test_levels_view_shows_singlet_triplet_labels_and_j(solved):
    """At B = 0 the two-electron ground state is a singlet (E. Lieb, D. Mattis, Phys. Rev. 125, 164
    (1962)), so J > 0; the view shows what the session's TwoElectronResult says, nothing else."""
    session, view = solved
    pair = session.two_electron
    assert pair is not None and session.two_electron_is_current
    assert pair.spin[0] == "singlet" and pair.exchange > 0           # Lieb & Mattis
    panel = view.two_electron
    assert not panel.isHidden() and not panel.stale
    rows = panel.level_rows()
    assert len(rows) == len(pair.energies)
    assert rows[0][0] == "singlet, S = 0"
    assert "triplet, S = 1 (3 states)" in [r[0] for r in rows]
    assert [float(r[1]) for r in rows] == pytest.approx(pair.energies.tolist(), abs=1e-6)
    text = panel.exchange_label.text()
    assert "J = E(lowest triplet) − E(lowest singlet)" in text
    assert format_energy(pair.exchange, pair.exchange_uncertainty, "meV") in text and "µeV" in text
    assert "meV" in panel.table.horizontalHeaderItem(2).text()


def test_an_edit_after_the_solve_marks_the_two_electron_levels_out_of_date(solved, qtbot):
    session, view = solved
    panel = view.two_electron
    session.set_project(session.project.with_parameters(Vb=3.0), "Vb")
    assert not session.two_electron_is_current and panel.stale
    assert "Out of date" in panel.stale_note.text() and "Vb" in panel.stale_note.text()
    assert panel.plot.backgroundBrush().color().name() == "#ececec"
    session.undo_stack.undo()
    assert session.two_electron_is_current and not panel.stale
    # a one-electron project drops the column
    session.set_project(dataclasses.replace(session.project, electrons=1), "one electron")
    _solve(session, qtbot)
    assert session.two_electron is None and panel.isHidden()


def test_a_refused_two_electron_solve_is_one_line_and_keeps_the_orbitals(session, qtbot, monkeypatch):
    import core.two_electron as te

    def refuse(*_a, **_k):
        raise MemoryLimitError("the Coulomb integrals of 45 orbitals need 9 GiB; use fewer orbitals")

    monkeypatch.setattr(te, "two_electron_for_study", refuse)
    session.open(SAMPLE)
    view = LevelsView(session)
    qtbot.addWidget(view)
    _solve(session, qtbot)
    assert session.result is not None and session.two_electron is None
    msg = session.two_electron_message
    assert "\n" not in msg and "9 GiB" in msg and msg.startswith("two-electron levels:")
    assert view.two_electron.message.text() == msg and not view.two_electron.isHidden()


@pytest.fixture(scope="module")
def j_sweep():
    project = load_project(SAMPLE)
    return run_sweep(project, "eps", np.array([0.0, 1.0, 2.0]), refine=False)


def test_sweep_view_draws_j_on_a_log_scale(session, qtbot, j_sweep):
    """J of a real 3-point sweep of the sample; Lieb & Mattis (Phys. Rev. 125, 164 (1962)): J > 0 at B = 0."""
    assert j_sweep.two_electron is not None
    view = SweepView(session)
    qtbot.addWidget(view)
    view._on_sweep_finished(j_sweep)
    assert not view.exchange.plot.isHidden()
    item = view.exchange.plot.getPlotItem()
    assert item.getAxis("left").logMode and "J [µeV]" in item.getAxis("left").labelText
    assert "eps" in item.getAxis("bottom").labelText
    x, y = view.exchange.curve.getData()
    j = np.array(j_sweep.two_electron["exchange"])
    assert np.all(j > 0)
    np.testing.assert_allclose(x, j_sweep.values)
    np.testing.assert_allclose(10 ** np.asarray(y), j * 1e3, rtol=1e-9)      # meV -> µeV, log axis


def test_sweep_view_shows_points_without_a_positive_j(session, qtbot, j_sweep):
    two = dict(j_sweep.two_electron)
    two["exchange"] = [two["exchange"][0], -1e-4, float("nan")]
    two["exchange_uncertainty"] = [two["exchange_uncertainty"][0], None, None]
    sweep = dataclasses.replace(j_sweep, two_electron=two)
    pts = exchange_points(sweep)
    assert pts["positive"].tolist() == [True, False, False]
    view = SweepView(session)
    qtbot.addWidget(view)
    view._on_sweep_finished(sweep)
    x, _y = view.exchange.curve.getData()
    assert x.tolist() == [0.0]
    assert view.exchange.missing.getData()[0].tolist() == [1.0, 2.0]
    note = view.exchange.note.text()
    assert "J ≤ 0 at eps = 1" in note and "no triplet at eps = 2" in note


def test_a_slider_drag_skips_the_two_electron_step_and_the_release_computes_it(solved, qtbot):
    session, view = solved
    with qtbot.waitSignal(session.solved, timeout=SOLVE_TIMEOUT_MS):
        session.set_parameter("eps", 0.5, live=True)
    qtbot.waitUntil(lambda: not session.solving, timeout=SOLVE_TIMEOUT_MS)
    # the live solve's result is shown: no two-electron levels, and the column says why
    assert session.two_electron is None and "slider is released" in session.two_electron_message
    assert "slider is released" in view.two_electron.message.text()
    with qtbot.waitSignal(session.solved, timeout=SOLVE_TIMEOUT_MS):
        session.set_parameter("eps", 0.5)
    wait_idle(qtbot, session)
    assert session.two_electron is not None and session.two_electron_is_current
    assert session.two_electron_message == "" and view.two_electron.message.isHidden()
    assert session.result.parameters["eps"] == 0.5


def test_opening_another_project_drops_the_two_electron_levels(solved):
    session, view = solved
    session.new_project()
    assert session.two_electron is None and session.two_electron_message == ""
    assert view.two_electron.pair is None and view.two_electron.isHidden()


def test_states_view_shows_where_the_two_electrons_are(session, qtbot):
    """The States view's second page draws core.pair_density's maps of the session's levels: the
    one-electron density (normalised to 1 on the grid) and, after a click, the conditional density
    with the other electron fixed there.  In the double dot's singlet ground state, fixing one
    electron in the left dot puts the other mostly in the right one (the Coulomb repulsion; at B = 0
    the ground state is a singlet, E. Lieb, D. Mattis, Phys. Rev. 125, 164 (1962))."""
    from app.views import StatesView
    from core.pair_density import conditional_density
    session.open(SAMPLE)
    view = StatesView(session)
    qtbot.addWidget(view)
    view.show()
    _solve(session, qtbot)
    panel = view.pair_panel
    assert panel.available and view.kind_tabs.isTabVisible(1)
    grid = session.result.grid
    rho = panel.shown_density()
    assert rho.shape == grid.shape
    assert float(rho.sum()) * grid.volume_element == pytest.approx(1.0, rel=1e-9)
    x = grid.axes[0]
    left = (int(np.argmin(np.abs(x - 0.5 * x.min()))), grid.shape[1] // 2)
    panel.set_fixed_point(left)
    assert panel.mode == "conditional" and "fixed at" in panel.title.text()
    shown = panel.shown_density()
    expected = conditional_density(session.two_electron, session.result.states, grid, left, 0)
    assert np.allclose(shown, expected)
    w = grid.volume_element
    assert float(shown[x > 0].sum()) * w > float(shown[x < 0].sum()) * w       # the other one sits right
    # a triplet has the exchange hole at the fixed point
    k = session.two_electron.spin.index("triplet")
    panel.level.setCurrentIndex(k)
    assert panel.shown_density()[left] < 1e-10 * panel.shown_density().max()
    # an edit greys the page; a one-electron project removes it
    session.set_project(session.project.with_parameters(Vb=3.0), "Vb")
    assert "Out of date" in panel.stale_note.text()
    session.set_project(dataclasses.replace(session.project, electrons=1), "one electron")
    _solve(session, qtbot)
    assert not panel.available and not view.kind_tabs.isTabVisible(1)
