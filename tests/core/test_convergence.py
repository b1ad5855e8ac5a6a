"""Convergence studies: Richardson extrapolation, observed orders, resolved / not-resolved splittings.

Sources:
* Richardson extrapolation: L. F. Richardson, Phil. Trans. R. Soc. A 210, 307 (1911): for an error
  expansion E(h) = E + a h^p + ..., E(h2) + (E(h2) - E(h1)) / ((h1/h2)^p - 1) removes the h^p term.
* 3D isotropic oscillator: E = hbar w (n + 3/2), shell n holding (n+1)(n+2)/2 states
  (C. Cohen-Tannoudji, B. Diu, F. Laloe, Quantum Mechanics, Wiley 1977, vol. 1, complement B_VII).
* Anisotropic 2D oscillator: E = hbar w_x (n_x + 1/2) + hbar w_y (n_y + 1/2) (separation of
  variables; same textbook, chapter V).
* Second-order differences converge like h^2 (the truncation error of the centred second
  difference is -(h^2/12) f''''; textbook fact, e.g. R. J. LeVeque, Finite Difference Methods for
  Ordinary and Partial Differential Equations, SIAM 2007, section 1.5).
* Linear interpolation error is at most h^2/8 max|f''| on each interval (textbook fact, e.g.
  R. L. Burden, J. D. Faires, Numerical Analysis, 9th ed., Brooks/Cole 2011, theorem 3.3).
* 1D oscillator: E_n = hbar w (n + 1/2) (common practice, the textbook result).
* Particle in a box of width L: E_n = hbar^2 pi^2 n^2 / (2 m L^2) (common practice); the sine
  (spectral) discretisation of the box reproduces its lowest levels to round-off (D. T. Colbert,
  W. H. Miller, J. Chem. Phys. 96, 1982 (1992), recalled from memory).
* Finite square well of half-width a and depth V0, even states: k tan(k a) = kappa with
  k = sqrt(2 m E)/hbar, kappa = sqrt(2 m (V0 - E))/hbar (common practice), solved with scipy's brentq.
* Rounding of uncertainties: the Particle Data Group's three-digit rule (Review of Particle Physics,
  Introduction; recalled from memory).
"""
from __future__ import annotations

import dataclasses
import math
import re

import numpy as np
import pytest

from core import Grid
from core.convergence import (
    CONVERGED,
    CONVERGES,
    DEGENERATE,
    GROWING,
    NOT_MONOTONIC,
    NOT_RESOLVED,
    RESOLVED,
    TOO_COARSE,
    PartialConvergence,
    convergence_study,
    default_degeneracy_tolerance,
    interpolate_states,
    match_levels,
    observed_order,
    richardson,
)
from core.convergence_levels import judge_level
from core.convergence_report import format_report, format_spacing, format_uncertain, level_status
from core.eigensolve import group_levels
from core.errors import Cancelled, InputError, MemoryLimitError, NotConverged
from core.project import FormulaTerm, MaterialSpec, Project, SolverSettings

SHELLS_3D = np.repeat([1.5, 2.5, 3.5], [1, 3, 6])


def oscillator_project(points=35, half=5.5, states=10, scheme="fd2", ndim=3):
    """hbar = m = omega = 1; the walls at +-5.5 shift the third shell by about exp(-30), far below anything tested."""
    axes = "xyz"[:ndim]
    return Project(title="Oscillator in a box of our own", units="dimensionless", material=MaterialSpec(mass=1.0),
                   grid=Grid([-half] * ndim, [half] * ndim, [points] * ndim),
                   potential=(FormulaTerm("trap", "0.5*(" + " + ".join(f"{a}**2" for a in axes) + ")"),),
                   electric_field=(0.0,) * ndim, solver=SolverSettings(states=states, scheme=scheme, tolerance=1e-9))


def elliptical_project(points, ell=0.01, scheme="fd2"):
    return Project(title="Slightly elliptical dot of our own", units="dimensionless", material=MaterialSpec(mass=1.0),
                   grid=Grid([-6.0, -6.0], [6.0, 6.0], [points, points]), parameters={"ell": ell},
                   potential=(FormulaTerm("trap", "0.5*((1 - ell)*x**2 + (1 + ell)*y**2)"),),
                   electric_field=(0.0, 0.0), solver=SolverSettings(states=3, scheme=scheme, tolerance=1e-9))


# --- the formulas ---------------------------------------------------------------------------------------

def test_richardson_removes_the_leading_power_exactly():
    """For E(h) = E + a h^p the two-grid formula returns E (Richardson 1911), for any ratio of spacings."""
    for p in (2.0, 4.0, 6.0):
        e = lambda h, p=p: 1.25 + 0.7 * h**p   # noqa: E731
        assert richardson(e(0.3), e(0.21), 0.3, 0.21, p) == pytest.approx(1.25, abs=1e-14)


def test_observed_order_recovers_the_power_with_unequal_ratios():
    """(E1-E2)/(E2-E3) = (h1^p - h2^p)/(h2^p - h3^p) solved for p, grids not in a constant ratio."""
    hs = np.array([0.5, 0.33, 0.2])
    for p in (1.0, 2.0, 4.0, 7.5):
        e = 3.0 - 0.4 * hs**p
        assert observed_order(e, hs) == pytest.approx(p, abs=1e-6)
    assert math.isnan(observed_order([1.0, 1.1, 1.05], hs))                 # oscillating: no order
    assert math.isinf(observed_order([1.0, 1.1, 1.1 + 1e-9], hs))           # converged: faster than any power


def test_linear_interpolation_between_grids_is_second_order():
    """A product of sines (zero at the hard walls) moved from a coarse grid to a fine one is within the
    linear-interpolation bound h^2/8 max|f''| per axis."""
    coarse = Grid([0.0, 0.0], [2.0, 1.0], [15, 11])
    fine = Grid([0.0, 0.0], [2.0, 1.0], [40, 33])
    f = lambda x, y: np.sin(math.pi * x / 2.0) * np.sin(2 * math.pi * y)   # noqa: E731
    src = f(*coarse.mesh())[None]
    got = interpolate_states(src, coarse, fine)[0]
    h = coarse.spacing
    bound = h[0] ** 2 / 8 * (math.pi / 2) ** 2 + h[1] ** 2 / 8 * (2 * math.pi) ** 2
    assert np.abs(got - f(*fine.mesh())).max() <= bound


def test_matching_pairs_reordered_and_rotated_levels():
    """Levels given in another order, with a degenerate pair mixed by a rotation, are matched to themselves
    (pure bookkeeping: orthonormal test functions on one grid)."""
    g = Grid([0.0], [1.0], [60])
    x = g.axes[0]
    basis = np.array([np.sin((n + 1) * math.pi * x) for n in range(5)])
    energies = np.array([1.0, 2.0, 2.0, 3.0, 4.0])
    c, s = math.cos(0.6), math.sin(0.6)
    other = np.array([basis[3], basis[0], c * basis[1] + s * basis[2], basis[4], -s * basis[1] + c * basis[2]])
    other_e = np.array([3.01, 1.01, 2.01, 4.01, 2.02])
    idx = match_levels(basis, energies, other, other_e)
    assert idx[0] == 1 and idx[3] == 0 and idx[4] == 3
    assert sorted(idx[1:3].tolist()) == [2, 4] and idx[1] == 2          # the pair in energy order


# --- the 3D oscillator: a grid artefact must not pass for physics --------------------------------------

@pytest.fixture(scope="module")
def oscillator_report():
    return convergence_study(oscillator_project(), factor=1.5, grids=3)


def test_oscillator_extrapolation_beats_finest_grid_tenfold(oscillator_report):
    """Richardson extrapolation with order 2 recovers hbar w (n + 3/2) at least 10x better than the finest
    grid, every level; the error estimates cover the true errors; the observed order is about 2."""
    r = oscillator_report
    assert r.levels == 10
    fine_err = np.abs(r.project_energies - SHELLS_3D)
    ext_err = np.abs(r.extrapolated - SHELLS_3D)
    assert np.all(ext_err <= 0.1 * fine_err)
    assert np.all(ext_err <= r.errors)
    # the estimate of the project grid's own error is close to its true error (the h^4 remainder is ~5%)
    np.testing.assert_allclose(r.grid_errors, fine_err, rtol=0.15)
    assert r.observed_order == pytest.approx(2.0, abs=0.3)
    assert r.expected_order == 2.0 and r.scheme == "fd2"
    assert r.warnings == ()


def test_oscillator_third_shell_artefact_is_not_resolved(oscillator_report):
    """On a cubic fd2 grid the 6-fold shell n = 2 splits into two triplets ((2,0,0)-like and (1,1,0)-like)
    by an O(h^2) grid artefact; the study must flag that splitting 'not resolved', and the gaps between
    shells (exactly hbar w) 'resolved'."""
    r = oscillator_report
    proj = r.project_energies
    third = list(range(4, 10))
    assert np.ptp(proj[third]) > 1e-3                           # the artefact is visible on the grid
    inside = [s for s in r.splittings() if s.lower in third and s.upper in third]
    assert len(inside) == 5 and all(s.verdict == NOT_RESOLVED for s in inside)
    assert max(abs(s.project_splitting) for s in inside) == pytest.approx(np.ptp(proj[third]))
    between = [s for s in r.splittings() if (s.lower in third) != (s.upper in third) or
               (s.lower == 0) != (s.upper == 0)]
    assert len(between) == 2
    for s in between:
        assert s.verdict == RESOLVED and s.splitting == pytest.approx(1.0, abs=0.01)
        assert s.mark == "\u2713" and s.ascii_mark == "+"


def test_default_tolerance_groups_the_whole_shells(oscillator_report):
    """The degeneracy tolerance built from the errors groups the project grid's levels into the true shells
    1, 3, 6 (the artefact split of the third shell is absorbed, the shell gaps of hbar w are not)."""
    tol = default_degeneracy_tolerance(oscillator_report)
    groups = group_levels(oscillator_report.project_energies, tol)
    assert [len(g) for g in groups] == [1, 3, 6]
    assert tol < 0.5


def test_report_as_plain_data(oscillator_report):
    d = oscillator_report.to_dict()
    assert d["scheme"] == "fd2" and len(d["levels"]) == 10 and len(d["grids"]) == 3
    assert sum(g["project_grid"] for g in d["grids"]) == 1 and d["grids"][-1]["project_grid"]
    assert {s["verdict"] for s in d["splittings"]} == {RESOLVED, NOT_RESOLVED}
    import json
    json.dumps(d)


# --- an elliptical dot: a real small splitting is resolved once the grid is fine enough -----------------

@pytest.mark.parametrize("points,verdict", [(24, NOT_RESOLVED), (48, RESOLVED)])
def test_elliptical_dot_splitting_resolved_when_grid_fine_enough(points, verdict):
    """w_x = sqrt(1 - ell), w_y = sqrt(1 + ell) with ell = 0.01: the first excited pair is split by
    w_y - w_x = 0.0100001. On a coarse grid (24 points, spacing 0.48) the grid error dwarfs it: not
    resolved. On 48 points (spacing 0.24) it is resolved, and the extrapolated splitting agrees with the
    exact one within the stated error."""
    ell = 0.01
    r = convergence_study(elliptical_project(points, ell), levels=3)
    exact = math.sqrt(1 + ell) - math.sqrt(1 - ell)
    pair = [s for s in r.splittings() if {s.lower, s.upper} == {1, 2}]
    assert len(pair) == 1
    s = pair[0]
    assert s.verdict == verdict
    if verdict == RESOLVED:
        assert abs(s.splitting - exact) <= s.error
        assert s.splitting > s.error


# --- the spectral scheme --------------------------------------------------------------------------------

def test_spectral_smooth_trap_converges_beyond_any_power():
    """Spectral scheme on the 2D oscillator: levels n + 1 (same textbook), errors below 1e-8 and covering the
    true error; no warning."""
    r = convergence_study(oscillator_project(points=30, half=6.0, states=6, scheme="spectral", ndim=2))
    exact = np.array([1.0, 2.0, 2.0, 3.0, 3.0, 3.0])
    assert np.all(np.abs(r.extrapolated - exact) <= r.errors + 1e-12)
    assert np.all(r.errors < 1e-8)
    assert r.warnings == ()


def test_spectral_scheme_with_a_step_is_flagged():
    """A finite circular well (a step in V) spoils the spectral scheme's convergence to about second
    order (Gibbs-like error at the step; DESIGN measurements, common practice): the study must say so."""
    p = Project(title="Step well of our own", units="dimensionless", material=MaterialSpec(mass=1.0),
                grid=Grid([-6.0, -6.0], [6.0, 6.0], [40, 40]),
                potential=(FormulaTerm("well", "5*(x**2 + y**2 > 9)"),), electric_field=(0.0, 0.0),
                solver=SolverSettings(states=3, scheme="spectral", tolerance=1e-9))
    r = convergence_study(p)
    assert r.observed_order < 4.0
    assert any("step" in w for w in r.warnings)
    # the error of the finest grid, estimated with the observed order, is not below the last change
    assert np.all(r.errors >= np.abs(r.energies[-1] - r.energies[-2]) - 1e-15)


# --- requests and refusals ------------------------------------------------------------------------------

def test_bad_requests_are_refused_clearly():
    p = oscillator_project(points=12, ndim=2)
    with pytest.raises(InputError, match="factor"):
        convergence_study(p, factor=1.0)
    with pytest.raises(InputError, match="2 to 5 grids"):
        convergence_study(p, grids=1)
    with pytest.raises(InputError, match="too coarse"):
        convergence_study(p, factor=2.0, grids=3)
    with pytest.raises(InputError, match="levels"):
        convergence_study(p, levels=-1)


def test_refused_before_solving_when_memory_is_short(monkeypatch):
    import core.estimate as est
    monkeypatch.setattr(est, "available_memory_bytes", lambda: 10_000)
    with pytest.raises(MemoryLimitError, match="coarser grid"):
        convergence_study(oscillator_project(points=30, ndim=2, states=4))


def test_cancel_keeps_the_grids_already_solved(monkeypatch):
    """Cancelled after two of three grids: the partial result holds both solves and a report built
    from them, marked incomplete, whose extrapolation still covers the exact levels n + 1."""
    import core.convergence as conv
    real = conv.solve_project
    solved = []

    def counting(*a, **k):
        r = real(*a, **k)
        solved.append(r)
        return r

    monkeypatch.setattr(conv, "solve_project", counting)
    with pytest.raises(Cancelled) as info:
        convergence_study(oscillator_project(points=40, ndim=2, states=4), should_stop=lambda: len(solved) >= 2)
    part = info.value.partial
    assert isinstance(part, PartialConvergence)
    assert len(part.grids) == 3 and len(part.results) == 2
    assert part.results[0] is solved[0] and part.results[1] is solved[1]
    rep = part.report
    assert rep.complete is False and len(rep.grids) == 2
    assert any("incomplete: 2 of 3 grids" in w and "own grid was not solved" in w for w in rep.warnings)
    exact = np.array([1.0, 2.0, 2.0, 3.0])
    assert np.all(np.abs(rep.extrapolated[:4] - exact) <= rep.errors[:4])


def test_cancel_before_any_grid_keeps_an_empty_partial_result():
    with pytest.raises(Cancelled) as info:
        convergence_study(oscillator_project(points=40, ndim=2, states=4), should_stop=lambda: True)
    part = info.value.partial
    assert isinstance(part, PartialConvergence)
    assert part.results == () and part.report is None and len(part.grids) == 3


def test_a_grid_that_fails_to_converge_keeps_the_others(monkeypatch):
    """The third grid's solve raises NotConverged: the study raises it too, with the two solved grids
    and their report as its partial result."""
    import core.convergence as conv
    real = conv.solve_project
    count = {"n": 0}

    def failing(*a, **k):
        count["n"] += 1
        if count["n"] == 3:
            raise NotConverged("no convergence in 3 iterations", partial="spectrum so far")
        return real(*a, **k)

    monkeypatch.setattr(conv, "solve_project", failing)
    with pytest.raises(NotConverged, match="did not converge") as info:
        convergence_study(oscillator_project(points=40, ndim=2, states=4))
    part = info.value.partial
    assert isinstance(part, PartialConvergence)
    assert len(part.results) == 2 and part.interrupted == "spectrum so far"
    assert part.report.complete is False and part.report.levels >= 4


def test_two_grids_and_progress():
    """Two grids give an extrapolation but no observed order, and say so; progress reaches 1."""
    seen = []
    r = convergence_study(oscillator_project(points=40, ndim=2, states=3), grids=2,
                          progress=lambda stage, f: seen.append((stage, f)))
    assert len(r.grids) == 2 and np.all(np.isnan(r.observed_orders))
    assert any("two grids" in w for w in r.warnings)
    assert seen and max(f for _, f in seen) == pytest.approx(1.0)
    assert all(stage.startswith("grid ") for stage, _ in seen)
    exact = np.array([1.0, 2.0, 2.0])
    assert np.all(np.abs(r.extrapolated - exact) <= r.errors)


def test_finer_direction_keeps_the_project_grid_as_reference():
    r = convergence_study(oscillator_project(points=16, ndim=2, states=3), grids=2, refine="finer")
    assert r.reference_index == 0 and r.grids[0] == oscillator_project(points=16, ndim=2).grid
    assert r.grids[1].points[0] > 16
    assert any("not the finest" in w for w in r.warnings)


def test_report_applied_to_a_solve_matches_levels_by_energy(oscillator_report):
    """on_levels: the project grid's own energies match every reported level; a solve whose fifth
    level differs (another project) matches only the four below it (the ground state and the whole
    first excited shell, whose members sort among themselves by rounding), and splittings keep to
    those: the three between the four levels."""
    r = oscillator_report
    e = r.project_energies.copy()
    errors, sps = r.on_levels(e)
    np.testing.assert_array_equal(errors, r.grid_errors)
    assert len(sps) == len(r.splittings())
    e[4] += 0.1
    errors, sps = r.on_levels(e)
    assert np.all(np.isfinite(errors[:4])) and np.all(np.isnan(errors[4:]))
    assert all(s.lower < 4 and s.upper < 4 for s in sps) and len(sps) == 3


# --- the words of a report, each on an analytic case with a known convergence order -----------------

def _project(formula, lo, hi, points, scheme, states, ndim=1, tolerance=1e-10, parameters=None):
    return Project(title="Analytic case of our own", units="dimensionless", material=MaterialSpec(mass=1.0),
                   grid=Grid([lo] * ndim, [hi] * ndim, [points] * ndim), parameters=parameters or {},
                   potential=(FormulaTerm("v", formula),), electric_field=(0.0,) * ndim,
                   solver=SolverSettings(states=states, scheme=scheme, tolerance=tolerance))


def test_oscillator_fd2_converges_with_order_two():
    """1D oscillator hbar w (n + 1/2) (hbar = m = w = 1, common practice) with second-order differences,
    60 points on [-6, 6] and two coarser grids: every level "converges (order p ≈ 2)" (fd2 is second
    order, LeVeque 2007 section 1.5; the h^4 remainder moves the three-grid order by < 0.2 here), the
    extrapolated levels lie within their errors of the exact ones, no warning."""
    r = convergence_study(_project("0.5*x**2", -6.0, 6.0, 60, "fd2", 4))
    exact = np.arange(4) + 0.5
    assert list(r.statuses) == [CONVERGES] * 4
    for i in range(4):
        assert re.fullmatch(r"converges \(order p ≈ (1\.9|2\.0|2\.1|2\.2)\)", level_status(r, i)), level_status(r, i)
    assert np.all(np.abs(r.observed_orders - 2.0) < 0.2)
    assert np.all(np.abs(r.extrapolated - exact) <= r.errors)
    assert r.warnings == ()
    text = format_report(r)
    assert "not monotonic" not in text and "converges (order p ≈ 2" in text


def test_box_with_the_spectral_scheme_is_converged_to_the_solver_accuracy():
    """Particle in a box, E_n = pi^2 n^2 / 2 (hbar = m = 1, L = 1; common practice): the spectral
    (sine) scheme gives it to round-off on every grid, so the three grids differ only by solver noise:
    every level "converged to the solver's accuracy", none "not monotonic", the errors at the solver's
    accuracy (tolerance x energy scale) and covering the exact values."""
    r = convergence_study(_project("0*x", 0.0, 1.0, 30, "spectral", 4, tolerance=1e-10))
    exact = math.pi ** 2 * np.arange(1, 5) ** 2 / 2
    assert list(r.statuses) == [CONVERGED] * 4
    assert np.all(np.abs(r.extrapolated - exact) <= r.errors)
    assert np.all(r.errors <= 10 * 1e-10 * exact[-1])
    assert "not monotonic" not in format_report(r)


def test_noise_level_differences_are_never_called_not_monotonic():
    """The single-dot case of issue 20: the two finest grids agree to far below the solver's accuracy
    while the change from the coarsest is only a few times it, with a sign change in the noise: that is
    converged to the solver's accuracy (pure bookkeeping of the rule, no physics)."""
    hs = [14.4, 9.63, 6.42]
    noise = 1e-5
    j = judge_level([96.49733135, 96.49730068, 96.49730068 + 3e-9], hs, noise, math.inf, 96.4973)
    assert j.status == CONVERGED and j.error == pytest.approx(noise)
    j = judge_level([1.0 + 3e-5, 1.0 - 2e-5, 1.0 + 1e-5], hs, noise, 2.0, 1.0)
    assert j.status == CONVERGED
    # the same sign change far above the noise is a true oscillation
    j = judge_level([1.0 + 3e-2, 1.0 - 2e-2, 1.0 + 1e-2], hs, noise, 2.0, 1.0)
    assert j.status == NOT_MONOTONIC and j.error >= 1e-2
    # a change that grows on the finer grid is not converging yet
    j = judge_level([1.0, 1.0 + 1e-6, 1.0 + 1e-2], hs, noise, 2.0, 1.0)
    assert j.status == GROWING and j.error >= 1e-2 - 1e-6


def _finite_well_ground(v0, a):
    """Even ground state of a finite square well (hbar = m = 1): k tan(k a) = kappa (common practice)."""
    from scipy.optimize import brentq
    f = lambda e: math.sqrt(2 * e) * math.tan(math.sqrt(2 * e) * a) - math.sqrt(2 * (v0 - e))   # noqa: E731
    return brentq(f, 1e-9, min(v0, (math.pi / (2 * a)) ** 2 / 2) - 1e-12)


def test_step_well_with_fd2_is_truly_not_monotonic():
    """A finite square well (depth 5, half-width 1.3) whose walls fall between grid points differently
    on each grid: the fd2 error of the step changes sign between grids by far more than the solver's
    accuracy; the study says "not monotonic" (and warns), and the ground state is within its widened
    error of the exact value from the transcendental equation."""
    r = convergence_study(_project("5*(abs(x) > 1.3)", -4.0, 4.0, 30, "fd2", 3))
    changes = np.diff(r.energies[:, 0])
    assert changes[0] * changes[1] < 0 and np.all(np.abs(changes) > 100 * r.noise[0])
    assert r.statuses[0] == NOT_MONOTONIC
    assert any("not monotonic" in w for w in r.warnings)
    assert abs(r.extrapolated[0] - _finite_well_ground(5.0, 1.3)) <= r.errors[0]


def test_a_grid_too_coarse_says_so_and_the_grid_it_names_resolves_the_splitting():
    """Anisotropic oscillator w_x = sqrt(1 - ell), w_y = sqrt(1 + ell), ell = 0.01 (separation of
    variables, Cohen-Tannoudji et al. ch. V): the first excited pair is split by 0.0100001.  On 14
    points (spacing 0.8) the level errors exceed a quarter of the gap to the ground state: "the grid is
    too coarse to judge these levels", with a finer grid and its cost; a study on that grid resolves the
    pair, and its extrapolated splitting is within its error of the exact one."""
    ell = 0.01
    p = _project("0.5*((1 - ell)*x**2 + (1 + ell)*y**2)", -6.0, 6.0, 14, "fd2", 3, ndim=2, parameters={"ell": ell})
    r = convergence_study(p)
    pair = r.splittings()[1]
    assert (pair.lower, pair.upper) == (1, 2) and pair.words == TOO_COARSE and pair.too_coarse
    assert r.splittings()[0].verdict == RESOLVED
    (cluster,) = r.coarse
    assert cluster.levels == (1, 2) and cluster.tolerance > 0.25 * cluster.gap
    assert cluster.needed.points[0] > 14 * 5 and cluster.estimate is not None and cluster.estimate.fits
    text = format_report(r)
    assert TOO_COARSE + ": 1, 2 (" in text and "to judge them: about" in text
    assert "degeneracy tolerance" not in text           # no tolerance that would merge levels it cannot judge
    import json
    doc = json.loads(json.dumps(r.to_dict()))
    assert doc["too_coarse_to_judge"][0]["levels"] == [1, 2]
    assert doc["too_coarse_to_judge"][0]["needed_points"] == list(cluster.needed.points)
    assert doc["splittings"][1]["words"] == TOO_COARSE
    fine = convergence_study(dataclasses.replace(p, grid=cluster.needed))
    sp = fine.splittings()[1]
    exact = math.sqrt(1 + ell) - math.sqrt(1 - ell)
    assert sp.verdict == RESOLVED and abs(sp.splitting - exact) <= sp.error
    assert fine.coarse == ()


def test_degenerate_pairs_on_every_grid_are_named_so(oscillator_report):
    """The 3D oscillator's shells on a cubic fd2 grid: the (1,0,0)-like triplet is exactly degenerate on
    every grid by the cube's symmetry (common practice): those pairs are "degenerate on every grid"; the
    O(h^2) split of the third shell is "not resolved" (within the errors, which stay far below the
    hbar w gap: judged, not too coarse)."""
    sps = oscillator_report.splittings()
    words = {(s.lower, s.upper): s.words for s in sps}
    assert words[(1, 2)] == DEGENERATE and words[(2, 3)] == DEGENERATE
    assert words[(6, 7)] == NOT_RESOLVED
    assert oscillator_report.coarse == ()


# --- printing -----------------------------------------------------------------------------------------

@pytest.mark.parametrize("value,unc,text", [
    (199.8335256, 14.2, "200 ± 15"),
    (199.8335256, 1.43, "199.8 ± 1.5"),
    (199.8335256, 0.62, "199.8 ± 0.7"),
    (96.49730068, 1.05e-5, "96.497301 ± 0.000011"),
    (3.28341, 0.0005, "3.2834 ± 0.0005"),
    (2.0, 0.0987, "2.00 ± 0.10"),
    (2.03e-6, 1.4e-7, "(2.03 ± 0.14)e-06"),
])
def test_values_carry_the_digits_their_uncertainty_allows(value, unc, text):
    """Uncertainty to two significant digits when its leading digits are 100-354, one for 355-949, and
    950-999 as two digits of 1000 (the Particle Data Group's digit rule), rounded up so that a printed
    error bar is never smaller than the estimate; the value to the same decimal place."""
    assert format_uncertain(value, unc) == text


def test_spacings_are_printed_per_axis_with_units():
    g = Grid([-22.0, -22.0, -8.0], [22.0, 22.0, 12.0], [40, 40, 22])
    assert format_spacing(g, "nm") == "1.073 x 1.073 x 0.870 nm"
