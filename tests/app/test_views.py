"""The views (potential, levels, states, sweep) over a session: build, repaint, interact.

The views are tested against a small stand-in session (``StandInSession`` below) with exactly the
signals and attributes of the ``Session`` contract, so that they can be checked on their own.
Results come from real solves of small variants of the bundled samples (core.study.solve_project).
OpenGL is never created here (see tests/app/test_gl_views.py).
"""
from __future__ import annotations

import dataclasses
import math
import os
from pathlib import Path
from types import SimpleNamespace

if not os.environ.get("DISPLAY"):
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import numpy as np
import pytest
from PySide6 import QtCore
from scipy.special import erf

from app.views import LevelsView, PotentialView, StatesView, SweepView
from app.views.common import fmt_energy
from app.views.isosurface import gl_available
from core.analysis import box_mask, polygon_mask, probability_in_region
from core.grid import Grid
from core.potentials import evaluate_potential, gate_list, material_names, resolve_parameters
from core.project import FormulaTerm, GatesTerm, load_project, new_project
from core.study import solve_project

ROOT = Path(__file__).resolve().parents[2]
SAMPLES = ROOT / "sample_projects"


# --- a stand-in for app.session.Session (same signals and attributes) ------------------------

class StandInSession(QtCore.QObject):
    project_changed = QtCore.Signal()
    potential_changed = QtCore.Signal()
    parameters_changed = QtCore.Signal()
    solve_started = QtCore.Signal()
    progressed = QtCore.Signal(str, float)
    solved = QtCore.Signal(object)
    failed = QtCore.Signal(str)
    cancelled = QtCore.Signal()
    selection_changed = QtCore.Signal(int)
    sweep_finished = QtCore.Signal(object)

    def __init__(self, project=None, result=None):
        super().__init__()
        self.project = project
        self.result = result
        self.potential = None
        self.potential_error = None
        self.selected_state = 0
        self.degeneracy_tolerance = None
        self.sweep_result = None
        self.calls = []
        if project is not None:
            self.potential = evaluate_potential(project)

    def select_state(self, i):
        self.selected_state = int(i)
        self.selection_changed.emit(int(i))

    def set_project(self, project, text):
        self.calls.append(("set_project", text))
        self.project = project
        self.potential = evaluate_potential(project)
        self.project_changed.emit()
        self.potential_changed.emit()

    def run_sweep(self, parameter, values, states=None):
        self.calls.append(("run_sweep", parameter, np.asarray(values), states))

    def cancel_sweep(self):
        self.calls.append(("cancel_sweep",))

    def set_parameter(self, name, value, live=False):
        self.calls.append(("set_parameter", name, float(value), live))

    def finish_solve(self, result):
        self.result = result
        self.solved.emit(result)


# --- projects and results (small grids, solved once per module) -------------------------------

def _one_d_project():
    base = new_project("1D oscillator test")
    return dataclasses.replace(base, grid=Grid([-100.0], [100.0], [120]),
                               potential=(FormulaTerm("parabola", "0.5*hw*x**2/l0**2"),), electric_field=(0.0,))


def _round_dot():
    p = load_project(SAMPLES / "elliptical_dot.json")
    return dataclasses.replace(p.with_parameters(ell=0.0), grid=p.grid.with_points([40, 40]))


def _elliptical_dot():
    p = load_project(SAMPLES / "elliptical_dot.json")
    return dataclasses.replace(p, grid=p.grid.with_points([48, 48]))


def _lens_dot():
    p = load_project(SAMPLES / "lens_dot_3d.json")
    return dataclasses.replace(p, grid=p.grid.with_points([18, 18, 12]))


def _double_dot():
    p = load_project(SAMPLES / "gaas_double_dot.json")
    return dataclasses.replace(p, grid=p.grid.with_points([48, 28]))


@pytest.fixture(scope="module")
def r1():
    return solve_project(_one_d_project(), states=5)


@pytest.fixture(scope="module")
def r2():
    return solve_project(_round_dot(), states=6)


@pytest.fixture(scope="module")
def r2e():
    return solve_project(_elliptical_dot(), states=4)


@pytest.fixture(scope="module")
def r3():
    return solve_project(_lens_dot(), states=4)


def _session(result):
    return StandInSession(result.project, result)


def _view(qtbot, cls, session, size=(900, 620)):
    view = cls(session)
    qtbot.addWidget(view)
    view.resize(*size)
    view.show()
    qtbot.waitExposed(view)
    return view


# --- empty session ------------------------------------------------------------------------------

@pytest.mark.parametrize("cls", [PotentialView, LevelsView, StatesView, SweepView])
def test_empty_session_shows_a_hint_not_an_error(qtbot, cls):
    view = _view(qtbot, cls, StandInSession())
    assert view.stack.showing_hint
    text = view.stack.hint_text.lower()
    assert len(text) > 40 and "error" not in text and "traceback" not in text


@pytest.mark.parametrize("cls", [LevelsView, StatesView])
def test_project_without_result_hints_to_solve(qtbot, cls):
    view = _view(qtbot, cls, StandInSession(_round_dot(), None))
    assert view.stack.showing_hint and "solve" in view.stack.hint_text.lower()


# --- potential view -----------------------------------------------------------------------------

def test_potential_view_1d_plots_v_and_levels(qtbot, r1):
    s = _session(r1)
    view = _view(qtbot, PotentialView, s)
    assert view.ndim == 1 and view.pages.currentIndex() == 0 and not view.cut_panel.isVisible()
    x, y = view.curve1d.getData()
    np.testing.assert_array_equal(y, s.potential)
    assert [g[1] for g in view.level_groups()] == list(range(5))        # 1D: no degeneracy
    assert len(view.level_lines) == 5
    assert view.plot1d.getPlotItem().getAxis("bottom").labelText == "x [nm]"


def test_potential_view_2d_map_contours_and_live_update(qtbot, r2):
    s = _session(r2)
    view = _view(qtbot, PotentialView, s)
    assert view.ndim == 2 and not view.stack.showing_hint
    np.testing.assert_array_equal(view.image.image, s.potential)
    assert view.plot2d.getPlotItem().getAxis("left").labelText == "y [nm]"
    assert view.colorbar.getAxis("right").labelText == "V [meV]"
    values = view.contour_values()
    assert len(values) == 8
    assert min(values) > s.potential.min() and max(values) < s.potential.max()
    # every drawn contour vertex lies on a cell edge where the bilinear interpolant of V (scipy's
    # RegularGridInterpolator, linear) equals one of the contour levels, to round-off
    from scipy.interpolate import RegularGridInterpolator
    cx, cy = view.contours.getData()
    ok = np.isfinite(cx)
    assert ok.sum() > 100
    v_at = RegularGridInterpolator(r2.grid.axes, s.potential)(np.column_stack([cx[ok], cy[ok]]))
    nearest = np.min(np.abs(v_at[:, None] - np.array(values)[None, :]), axis=1)
    assert nearest.max() < 1e-9 * s.potential.max()
    # a parameter changes: the map follows on potential_changed
    changed = r2.project.with_parameters(hw=6.0)
    s.project = changed
    s.potential = evaluate_potential(changed)
    s.potential_changed.emit()
    np.testing.assert_array_equal(view.image.image, s.potential)
    # an error keeps the last map and says why
    s.potential, s.potential_error = None, "potential[0].formula: unknown name 'q' at column 3"
    s.potential_changed.emit()
    assert "column 3" in view.status.text() and not view.stack.showing_hint
    np.testing.assert_array_equal(view.image.image, evaluate_potential(changed))


def test_potential_map_repaints_at_most_every_tenth_of_a_second_during_a_drag(qtbot, r2):
    """While a slider is dragged, changes closer together than DRAG_REPAINT_S are painted once,
    and the last one is always painted (nothing stale stays on screen)."""
    s = _session(r2)
    view = _view(qtbot, PotentialView, s)
    s.live_dragging = True
    values = []
    for hw in (3.1, 3.2, 3.3):
        p = r2.project.with_parameters(hw=hw)
        s.project, s.potential = p, evaluate_potential(p)
        values.append(s.potential)
        s.potential_changed.emit()
    # the first change after a quiet spell is painted at once, the next two wait for the timer
    assert view._repaint_timer.isActive()
    qtbot.waitUntil(lambda: not view._repaint_timer.isActive(), timeout=2000)
    np.testing.assert_array_equal(view.image.image, values[-1])
    s.live_dragging = False


def test_line_cut_matches_scipy_interpolation(qtbot, r2e):
    """The cut (along x through the ground state's centre) equals scipy's bilinear interpolation of V.

    Reference: scipy.interpolate.RegularGridInterpolator(method="linear"); both are bilinear on the
    same nodes, so they agree to round-off (1e-10 relative).
    """
    from scipy.interpolate import RegularGridInterpolator
    s = _session(r2e)
    view = _view(qtbot, PotentialView, s)
    dist, vals = view.cut_data()
    v = s.potential
    x, y = r2e.grid.axes
    rho = r2e.states[0] ** 2
    yc = rho.sum(axis=0) @ y / rho.sum()
    assert abs(yc) < 1e-9 * x[-1]                   # the sample is mirror-symmetric in y
    np.testing.assert_allclose(dist[-1], x[-1] - x[0], rtol=1e-12)
    reference = RegularGridInterpolator((x, y), v, method="linear")
    pts = np.column_stack([x[0] + dist, np.full_like(dist, yc)])
    np.testing.assert_allclose(vals, reference(pts), rtol=1e-10, atol=1e-12)
    assert len(view.level_lines) == len(view.level_groups()) > 0
    assert "distance along the cut [nm]" == view.cut_plot.getPlotItem().getAxis("bottom").labelText


def test_gates_are_drawn_and_dragging_edits_the_project(qtbot):
    project = _double_dot()
    s = StandInSession(project, None)
    view = _view(qtbot, PotentialView, s)
    params = resolve_parameters(project)
    expected = sum(len(gate_list(t, params)) for t in project.potential if isinstance(t, GatesTerm))
    assert len(view.gate_rois) == expected > 0
    ti, gi = view.gate_rois[0][1], view.gate_rois[0][2]
    before = project.potential[ti].gates[gi]
    verts = np.asarray(gate_list(project.potential[ti], params)[gi].vertices) + [10.0, 0.0]
    assert view.move_gate(ti, gi, verts)
    assert s.calls[-1][0] == "set_project"
    after = s.project.potential[ti].gates[gi]
    assert after.label == before.label and after.voltage == before.voltage
    moved = np.asarray(gate_list(s.project.potential[ti], params)[gi].vertices)
    np.testing.assert_allclose(np.sort(moved, axis=0), np.sort(verts, axis=0), atol=1e-9)
    if before.rectangle is not None:        # an axis-aligned move keeps a rectangle a rectangle
        assert after.rectangle is not None and after.polygon is None
    # dragging an outline on the map (the ROI reports its new place) edits the project the same way
    roi, ti, gi = view.gate_rois[-1]
    old = np.asarray(gate_list(s.project.potential[ti], params)[gi].vertices)
    n_calls = len(s.calls)
    roi.setPos(roi.pos() + QtCore.QPointF(0.0, -12.0))          # emits sigRegionChangeFinished
    qtbot.waitUntil(lambda: len(s.calls) > n_calls, timeout=2000)
    new = np.asarray(gate_list(s.project.potential[ti], params)[gi].vertices)
    np.testing.assert_allclose(np.sort(new, axis=0), np.sort(old + [0.0, -12.0], axis=0), atol=1e-6)


def test_invalid_gate_outline_is_refused_and_nothing_is_lost(qtbot):
    project = _double_dot()
    s = StandInSession(project, None)
    view = _view(qtbot, PotentialView, s)
    ti, gi = view.gate_rois[0][1], view.gate_rois[0][2]
    bow_tie = np.array([[0.0, 0.0], [50.0, 50.0], [50.0, 0.0], [0.0, 50.0]])     # edges cross
    assert not view.move_gate(ti, gi, bow_tie)
    assert s.calls == [] and s.project is project
    assert "not moved" in view.status.text()


def test_potential_view_3d_slices_and_isosurface_mesh(qtbot, r3):
    s = _session(r3)
    view = _view(qtbot, PotentialView, s)
    assert view.ndim == 3 and view.pages.currentIndex() == 2
    if not gl_available():
        assert view.isosurface.gl_view is None            # never GL on the offscreen platform
    ix, iy, iz = view.slices.index
    np.testing.assert_array_equal(view.slices.slice(0), s.potential[:, :, iz])
    np.testing.assert_array_equal(view.slices.slice(2), s.potential[ix, :, :])
    view.slices.set_plane(2, 3)
    np.testing.assert_array_equal(view.slices.images[0].image, s.potential[:, :, 3])
    normal, label = view.slices.slider_labels[0]
    assert normal == 2 and label.text() == f"z = {r3.grid.axes[2][3]:.4g} nm"
    # the default isosurface energy is the highest computed level, inside V's range
    assert view.iso_energy.value() == pytest.approx(r3.energies[-1], rel=1e-3)
    assert view.isosurface.meshes and view.isosurface.meshes[0] is not None
    verts, _faces = view.isosurface.meshes[0]
    lo = np.array([a[0] for a in r3.grid.axes]) - 1e-9
    hi = np.array([a[-1] for a in r3.grid.axes]) + 1e-9
    assert np.all(verts >= lo) and np.all(verts <= hi)


# --- levels view --------------------------------------------------------------------------------

def test_levels_view_groups_shells_with_fock_darwin_angular_momentum(qtbot, r2):
    """Round parabolic dot at B = 0: shells of 1, 2, 3 states with L_z = 0; -1, +1; -2, 0, +2.

    Source: V. Fock, Z. Phys. 47, 446 (1928); C. G. Darwin, Proc. Camb. Phil. Soc. 27, 86 (1930):
    E = (2 n_r + |m| + 1) hbar omega at B = 0.  L_z eigenvalues are shown when within 0.05 of integers.
    """
    s = _session(r2)
    view = _view(qtbot, LevelsView, s)
    assert [len(g) for g in view.groups] == [1, 2, 3]
    texts = [t.toPlainText() for t in view._label_items]
    assert "×2" in texts[1] and "L_z = −1, +1 ħ" in texts[1]
    assert "×3" in texts[2] and "L_z = −2, 0, +2 ħ" in texts[2]
    assert "meV" in texts[0] and "x+ y+" in texts[0]
    assert view.plot.getPlotItem().getAxis("left").labelText == "E [meV]"


def test_clicking_a_level_selects_its_state(qtbot, r2):
    s = _session(r2)
    view = _view(qtbot, LevelsView, s)
    with qtbot.waitSignal(s.selection_changed) as sig:
        view._on_level_clicked(4)
    assert sig.args == [4] and s.selected_state == 4
    level, x0, x1, e = next(b for b in view.bars if b[0] == 2)
    assert view.level_at((x0 + x1) / 2, e) == 2
    assert view.level_at(x0 - 3.0, e) is None
    sel = next(b for b in view.bars if b[0] == 4)
    np.testing.assert_allclose(view.sel_item.getData()[0], [sel[1], sel[2]])      # the selected bar
    text = view.describe_level(2)
    assert "level 2" in text and "meV" in text and "one of 2 degenerate levels" in text


def test_degeneracy_tolerance_is_visible_and_regroups(qtbot, r2e):
    s = _session(r2e)
    view = _view(qtbot, LevelsView, s)
    assert view.tolerance.value() == pytest.approx(r2e.spectrum.degeneracy_tolerance)
    assert view.tolerance.suffix().strip() == "meV"
    assert [len(g) for g in view.groups] == [1, 1, 1, 1]        # ell = 0.1 splits the second shell
    split = float(r2e.energies[2] - r2e.energies[1])
    view.tolerance.setValue(2 * split)
    assert s.degeneracy_tolerance == pytest.approx(2 * split)
    assert [len(g) for g in view.groups] == [1, 2, 1]
    view.solver_tolerance.click()
    assert s.degeneracy_tolerance is None and [len(g) for g in view.groups] == [1, 1, 1, 1]


def test_levels_view_1d_and_3d(qtbot, r1, r3):
    view = _view(qtbot, LevelsView, _session(r1))
    texts = [t.toPlainText() for t in view._label_items]
    assert [("x+" in t, "x-" in t) for t in texts] == [(True, False), (False, True)] * 2 + [(True, False)]
    view3 = _view(qtbot, LevelsView, _session(r3))
    assert sum(len(g) for g in view3.groups) == len(r3.energies)


# --- states view --------------------------------------------------------------------------------

def test_states_view_gallery_and_selection(qtbot, r2):
    s = _session(r2)
    view = _view(qtbot, StatesView, s)
    assert len(view.tiles) == len(r2.energies)
    assert "meV" in view.tiles[0].caption.text()
    with qtbot.waitSignal(s.selection_changed):
        view.tiles[3].clicked.emit(3)
    assert s.selected_state == 3 and view.tiles[3].selected and not view.tiles[0].selected
    np.testing.assert_allclose(view.image.image, r2.states[3] ** 2)
    assert "State 3" in view.large_title.text()
    view.mode.setCurrentIndex(1)                          # signed psi for real states, with nodal lines
    np.testing.assert_allclose(view.image.image, r2.states[3])
    assert view.nodal.isVisible() and "nodal" in view.legend.text()
    # a re-solve with as many states reuses the tiles: new captions, selection kept
    tiles = list(view.tiles)
    shifted = dataclasses.replace(r2, spectrum=dataclasses.replace(r2.spectrum, energies=r2.spectrum.energies + 1.0))
    s.finish_solve(shifted)
    assert view.tiles == tiles and view.tiles[3].selected and view.tiles[3].caption.text().startswith("▶ 3")
    assert fmt_energy(shifted.energies[0], "meV", 6) in view.tiles[0].caption.text()


def test_nodal_lines_of_an_x_like_state_lie_on_x_equals_0(r2e):
    """State 1 of the elliptical dot is x-like: psi ~ x exp(-x^2/2lx^2 - y^2/2ly^2), whose only node is
    the line x = 0 (first excited oscillator state, a Hermite function H_1; e.g. D. J. Griffiths,
    Introduction to Quantum Mechanics, 2nd ed., sec. 2.3.2 (2005), recalled from memory).  The grid is
    mirror-symmetric about x = 0, so the interpolated node falls on x = 0 up to the state's parity
    error (tolerance 1e-3 of the spacing); the tails, where psi is round-off, draw no line."""
    psi = r2e.states[1]
    x, y = StatesView.nodal_lines(psi, r2e.grid.axes)
    ok = np.isfinite(x)
    assert ok.sum() > 10
    assert np.max(np.abs(x[ok])) < 1e-3 * r2e.grid.spacing[0]
    assert np.ptp(y[ok]) > 50.0                            # the line crosses the state (l_y = 26 nm)


def test_region_probability_matches_core_and_gaussian(qtbot, r2e):
    """P(|x| < a, |y| < b) in the ground state of an anisotropic oscillator is erf(a/l_x) erf(b/l_y).

    The ground state density is a Gaussian exp(-x^2/l_x^2 - y^2/l_y^2) with l_a = sqrt(hbar/(m omega_a))
    (harmonic oscillator ground state; D. J. Griffiths, Introduction to Quantum Mechanics, 2nd ed.,
    eq. 2.59 (2005), recalled from memory).  For the sample, omega_x = omega sqrt(1 - ell) and
    omega_y = omega sqrt(1 + ell), and l0 = sqrt(2 kin / hw).  Box edges lie midway between nodes, so
    the grid sum is the midpoint rule over the box; its error (h^2/24)(f'(c) - f'(-c)) per axis sets the
    tolerance (the spectral solver's own error is far smaller).  The view's number must equal
    probability_in_region exactly.
    """
    s = _session(r2e)
    view = _view(qtbot, StatesView, s)
    grid = r2e.grid
    x, y = grid.axes
    a = 0.5 * (x[27] + x[28])
    b = 0.5 * (y[30] + y[31])
    view.set_region("rectangle", lower=(-a, -b), upper=(a, b))
    mask = box_mask(grid, (-a, -b), (a, b))
    np.testing.assert_array_equal(view.region_mask(), mask)
    expected = probability_in_region(grid, r2e.states[:1], mask)[0]
    assert view.region_probability() == expected
    p = r2e.parameters
    l0 = math.sqrt(2 * material_names(r2e.project, p)["hbar2_over_2m"] / p["hw"])
    lx, ly = l0 * (1 - p["ell"]) ** -0.25, l0 * (1 + p["ell"]) ** -0.25
    # midpoint rule on [-c, c]: sum - integral = -(h^2/24) (f'(c) - f'(-c)) = (h^2/24) 4 c f(c) / l^2,
    # f(x) = exp(-x^2/l^2) / (sqrt(pi) l); the tolerance is 1.5 times the sum of both axes' terms
    hx, hy = grid.spacing

    def midpoint_error(h, c, ell_):
        return h ** 2 / 24 * 4 * c / ell_ ** 2 * math.exp(-(c / ell_) ** 2) / (math.sqrt(math.pi) * ell_)

    tol = 1.5 * (midpoint_error(hx, a, lx) + midpoint_error(hy, b, ly))
    assert view.region_probability() == pytest.approx(erf(a / lx) * erf(b / ly), abs=tol)
    assert "Probability" in view.region_result.text() and "%" in view.region_result.text()
    # a polygon: the left half-plane holds half of a mirror-symmetric state
    poly = [(grid.lower[0], grid.lower[1]), (0.0, grid.lower[1]), (0.0, grid.upper[1]),
            (grid.lower[0], grid.upper[1])]
    view.set_region("polygon", vertices=poly)
    np.testing.assert_array_equal(view.region_mask(), polygon_mask(grid, poly))
    assert view.region_probability() == probability_in_region(grid, r2e.states[:1], polygon_mask(grid, poly))[0]
    # the solved state is mirror-symmetric only to the solver's tolerance (relative residual 1e-7), so
    # its weight on each half differs from 1/2 by at most ~1e-7 (measured 1e-8)
    assert view.region_probability() == pytest.approx(0.5, abs=1e-6)


def test_states_view_1d_and_3d(qtbot, r1, r3):
    s1 = _session(r1)
    v1 = _view(qtbot, StatesView, s1)
    assert len(v1.tiles) == 5 and v1.pages.currentIndex() == 0
    v1.set_region("rectangle", lower=(-1e9,), upper=(0.0,))
    assert v1.region_probability() == pytest.approx(0.5, abs=1e-9)     # even density, node-symmetric grid
    s3 = _session(r3)
    v3 = _view(qtbot, StatesView, s3)
    assert v3.pages.currentIndex() == 2
    assert (v3.isosurface.gl_view is None) == (not gl_available())
    rho = r3.states[0] ** 2
    np.testing.assert_allclose(v3.slices._volume, rho)
    mesh = v3.isosurface.meshes[0]
    assert mesh is not None and len(mesh[1]) > 0
    v3.set_region("rectangle", lower=(-5.0, -5.0), upper=(5.0, 5.0))
    mask = box_mask(r3.grid, (-5.0, -5.0, -np.inf), (5.0, 5.0, np.inf))
    assert v3.region_probability() == probability_in_region(r3.grid, r3.states[:1], mask)[0]
    v3.mode.setCurrentIndex(1)
    assert len(v3.isosurface.meshes) == 2                 # psi = +c and psi = -c


# --- sweep view ---------------------------------------------------------------------------------

from core.sweep import Anticrossing  # noqa: E402


@dataclasses.dataclass
class _Anticrossing:
    at: float
    gap: float
    tracks: tuple
    kind: str = "anticrossing"
    fit: dict = dataclasses.field(default_factory=dict)


def _two_level_sweep(project):
    """A two-level model E = c +- sqrt((eps/2)^2 + t^2) plus a flat third level crossing nothing."""
    eps = np.linspace(-2.0, 2.0, 21)
    t = 0.3
    lo = -np.sqrt((eps / 2) ** 2 + t ** 2)
    hi = -lo
    flat = np.full_like(eps, 1.5)
    energies = np.stack([lo, hi, flat], axis=1)
    tracks = np.tile(np.arange(3)[:, None], (1, eps.size))
    return SimpleNamespace(parameter=next(iter(project.parameters)), values=eps, energies=energies, tracks=tracks,
                           track_energies=lambda: energies.T.copy(),
                           anticrossings=[Anticrossing(at=0.0, gap=2 * t, tracks=(0, 1), kind="anticrossing", index=10,
                                                       sampled_gap=2 * t, at_uncertainty=1e-4,
                                                       gap_uncertainty=1e-3, samples=((0.05, -0.3, 0.3),))],
                           observables={}, states=None, project=project, units=None)


def test_sweep_form_runs_through_the_session(qtbot, r2):
    s = _session(r2)
    view = _view(qtbot, SweepView, s)
    assert view.stack.showing_hint
    assert view.parameter.count() == len(r2.project.parameters)
    view.parameter.setCurrentText("ell")
    assert (view.start.value(), view.stop.value()) == tuple(r2.project.parameter_ranges["ell"])
    view.steps.setValue(11)
    view.run_button.click()
    name, values, states = s.calls[-1][1:]
    assert name == "ell" and values.size == 11 and values[0] == -0.5 and values[-1] == 0.5
    assert view.cancel_button.isEnabled() and not view.run_button.isEnabled()
    s.progressed.emit("sweep", 0.5)
    assert view.progress.value() == 500
    view.cancel_button.click()
    assert s.calls[-1] == ("cancel_sweep",)
    s.cancelled.emit()
    assert view.run_button.isEnabled() and "cancelled" in view.status.text()


def test_fan_draws_one_curve_per_track_and_labels_gaps(qtbot, r2):
    s = _session(r2)
    view = _view(qtbot, SweepView, s)
    sweep = _two_level_sweep(r2.project)
    s.sweep_finished.emit(sweep)
    assert not view.stack.showing_hint
    assert len(view.curves) == 3
    for t, curve in enumerate(view.curves):
        np.testing.assert_array_equal(curve.getData()[1], sweep.track_energies()[t])
    texts = [it.toPlainText() for it in view.gap_items if hasattr(it, "toPlainText")]
    assert texts == ["gap 2t = 600.0 ± 1.0 µeV"]          # the words of Anticrossing.gap_text
    # the label is rich text, so the words are HTML-escaped ("&" as "&amp;", "<" of a bound as "&lt;")
    assert "anticrossing of levels 0 &amp; 1 at hw = 0 ± 0.0001: gap 2t = 600.0 ± 1.0 µeV" in view.summary.text()
    assert view.plot.getPlotItem().getAxis("left").labelText == "E [meV]"


def test_clicking_a_fan_point_resolves_there_and_selects_the_level(qtbot, r2):
    s = _session(r2)
    view = _view(qtbot, SweepView, s)
    s.sweep_finished.emit(_two_level_sweep(r2.project))
    assert view.open_point(0.41, 1) == 1
    assert s.calls[-1] == ("set_parameter", "hw", pytest.approx(0.4), False)
    s.finish_solve(r2)
    assert s.selected_state == 1


def test_fan_from_the_sweep_engine(qtbot):
    """With core.sweep (when present): a 1D symmetric double well swept in tilt gives one curve per track."""
    sweep_mod = pytest.importorskip("core.sweep")
    project = _one_d_project()
    project = dataclasses.replace(project, parameters={"d": 1.0, "tilt": 0.0},
                                  potential=(FormulaTerm("double well", "d*((x/40)**2 - 1)**2 + tilt*x/40"),))
    result = sweep_mod.run_sweep(project, "tilt", np.linspace(-0.2, 0.2, 9), states=3)
    s = StandInSession(project, None)
    view = _view(qtbot, SweepView, s)
    s.sweep_finished.emit(result)
    assert len(view.curves) == result.track_energies().shape[0]


# --- pictures for a human to look at ---------------------------------------------------------------

def test_render_views_to_png(qtbot, tmp_path, r2e, r3):
    """Each view renders to a non-blank PNG (set WELLSCAPE_SHOTS=DIR to keep them for inspection)."""
    out = Path(os.environ.get("WELLSCAPE_SHOTS", tmp_path))
    out.mkdir(parents=True, exist_ok=True)
    for tag, result in (("2d", r2e), ("3d", r3)):
        s = _session(result)
        s.select_state(1)
        views = {"potential": PotentialView(s), "levels": LevelsView(s), "states": StatesView(s),
                 "sweep": SweepView(s)}
        s.sweep_finished.emit(_two_level_sweep(result.project))
        for name, view in views.items():
            qtbot.addWidget(view)
            view.resize(1100, 700)
            path = out / f"{tag}_{name}.png"
            assert view.grab().save(str(path))
            img = view.grab().toImage()
            colours = {img.pixel(x, y) for x in range(0, img.width(), 5) for y in range(0, img.height(), 5)}
            assert len(colours) > 20, f"{path.name} looks blank"


# --- with the application's own Session (worker threads, undo) -----------------------------------

def test_views_follow_a_real_session_through_solve_and_sweep(qtbot, session):
    """The views over app.session.Session: a solve through its worker repaints levels and states, a
    sweep through its worker draws one fan curve per track, a gate-free project shows no gates."""
    project = dataclasses.replace(_elliptical_dot(), grid=_elliptical_dot().grid.with_points([24, 24]),
                                  solver=dataclasses.replace(_elliptical_dot().solver, states=4))
    session.set_project(project, "smaller grid for the test")
    views = [PotentialView(session), LevelsView(session), StatesView(session), SweepView(session)]
    for v in views:
        qtbot.addWidget(v)
    pot, lev, sta, swe = views
    assert lev.stack.showing_hint and not pot.stack.showing_hint
    np.testing.assert_array_equal(pot.image.image, session.potential)
    with qtbot.waitSignal(session.solved, timeout=60000):
        session.solve()
    assert not lev.stack.showing_hint
    assert sta.tiles == [] and sta._pending_result is session.result     # hidden: drawn when shown
    sta.show()
    qtbot.waitExposed(sta)
    assert len(sta.tiles) == len(session.result.energies) and sta._pending_result is None
    lev._on_level_clicked(2)
    assert session.selected_state == 2 and sta.tiles[2].selected
    lev.set_tolerance(1.0)                                  # 1 meV merges the split second shell
    assert session.degeneracy_tolerance == 1.0 and [len(g) for g in lev.groups][:2] == [1, 2]
    swe.parameter.setCurrentText("ell")
    swe.steps.setValue(4)
    swe.states.setValue(3)
    with qtbot.waitSignal(session.sweep_finished, timeout=120000):
        swe.run_button.click()
    assert not swe.stack.showing_hint and swe.run_button.isEnabled()
    assert len(swe.curves) == session.sweep_result.track_energies().shape[0]
    for t, curve in enumerate(swe.curves):
        np.testing.assert_array_equal(curve.getData()[1], session.sweep_result.track_energies()[t])
    qtbot.waitUntil(lambda: not getattr(session, "sweeping", False), timeout=10000)
    # a sweep started elsewhere (a script, the session directly): the form shows what was swept
    with qtbot.waitSignal(session.sweep_finished, timeout=120000):
        assert session.run_sweep("ell", [0.0, 0.02, 0.04], states=2)
    assert (swe.parameter.currentText(), swe.start.value(), swe.stop.value(), swe.steps.value()) == \
        ("ell", 0.0, 0.04, 3)
    qtbot.waitUntil(lambda: not getattr(session, "sweeping", False), timeout=10000)


@pytest.fixture(scope="module")
def r_field():
    """The round InAs dot in B = 1 T along z with spin switched on (complex states)."""
    p = dataclasses.replace(_round_dot(), grid=_round_dot().grid.with_points([28, 28]),
                            magnetic_field=(0.0, 0.0, 1.0), spin=True)
    return solve_project(p, states=3)


def test_spin_note_gives_the_zeeman_energy(qtbot, r_field):
    """|g| mu_B B for InAs (g from the material table) at B = 1 T, against scipy.constants' Bohr magneton
    (CODATA): mu_B = 0.057884 meV/T."""
    from scipy import constants
    view = _view(qtbot, LevelsView, _session(r_field))
    mu_b = constants.physical_constants["Bohr magneton"][0] / (1e-3 * constants.e)       # meV/T
    expected = abs(r_field.g_factor) * mu_b * 1.0
    text = view.header.text()
    assert "spin ½ included" in text and f"{expected:.4g} meV" in text


def test_complex_states_show_phase_with_a_legend_in_words(qtbot, r_field):
    s = _session(r_field)
    view = _view(qtbot, StatesView, s)
    assert np.iscomplexobj(r_field.states)
    view.mode.setCurrentIndex(1)
    img = view.image.image
    assert img.shape == r_field.grid.shape + (4,) and img.dtype == np.uint8
    assert not view.colorbar.isVisible() and "phase" in view.legend.text()
    # brightness follows |psi|: black where the state vanishes, bright only where |psi| is large
    amp = np.abs(r_field.states[0]) / np.abs(r_field.states[0]).max()
    lum = img[..., :3].astype(float).max(axis=2)
    assert lum[amp < 0.01].max() <= 0.01 * 255 + 1
    assert amp[np.unravel_index(np.argmax(lum), lum.shape)] > 0.5
