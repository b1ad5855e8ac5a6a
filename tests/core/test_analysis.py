"""Observables of computed states, checked against analytic results.

Sources:
* [CDL] C. Cohen-Tannoudji, B. Diu, F. Laloë, Quantum Mechanics, Vol. 1 (Wiley, 1977):
  ch. V (one-dimensional harmonic oscillator: x = sqrt(hbar/2m omega) (a + a^dagger),
  parity (-1)^n of phi_n, <x^2> = hbar/(2 m omega) in the ground state) and the
  complement of ch. VI on the angular momentum of the two-dimensional isotropic
  oscillator (the shell of energy (n+1) hbar omega holds m = -n, -n+2, ..., n);
  complement letter recalled from memory.
* [FD] V. Fock, Z. Phys. 47, 446 (1928); C. G. Darwin, Proc. Camb. Phil. Soc. 27, 86 (1931):
  E_{n,l} = (2n + |l| + 1) hbar Omega - (q B / 2m) hbar l, Omega^2 = omega0^2 + (qB/2m)^2
  (citations recalled from memory).
* [TRK] Thomas-Reiche-Kuhn sum rule sum_j f_0j = 1: W. Kuhn, Z. Phys. 33, 408 (1925);
  F. Reiche, W. Thomas, Z. Phys. 34, 510 (1925) (recalled from memory).

Units are dimensionless (hbar = m = 1, particle charge -1).  Tolerances: the sinc-DVR
("spectral") scheme and derivative converge exponentially; on [-6, 6]^2 with 40 points
per axis the box truncation of the oscillator states (|psi| ~ exp(-18) at the wall times
a polynomial) and the eigensolver's residual tolerance 1e-8 bound the errors to ~1e-8,
so 1e-6 is used.  The 8th-order derivative has error O(h^8), h = 12/41 gives
h^8 ~ 5e-5, so 1e-4 is used for it.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from core.analysis import (
    angular_momentum_z,
    angular_momentum_z_matrix,
    angular_momentum_z_multiplet,
    box_mask,
    derivative_matrix_1d,
    mirror_parity,
    norms,
    oscillator_strengths,
    overlap_matrix,
    parity_label,
    polygon_mask,
    position_expectation,
    position_spread,
    probability_in_region,
    transition_dipoles,
)
from core.eigensolve import lowest_states
from core.errors import InputError
from core.grid import Grid
from core.hamiltonian import build_hamiltonian

TOL = 1e-6        # spectral scheme + solver residual 1e-8 (see module docstring)
TOL_FD8 = 1e-4    # 8th-order derivative, h^8 ~ 5e-5 at h = 12/41


@pytest.fixture(scope="module")
def grid2():
    return Grid([-6, -6], [6, 6], [40, 40])


@pytest.fixture(scope="module")
def oscillator2(grid2):
    """Six lowest states of the 2D isotropic oscillator, omega = 1: shells n = 0, 1, 2."""
    x, y = grid2.mesh()
    v = 0.5 * (x ** 2 + y ** 2)
    return lowest_states(build_hamiltonian(grid2, v, scheme="spectral"), 6), v


@pytest.fixture(scope="module")
def oscillator1():
    g = Grid([-8], [8], [101])
    x = g.axes[0]
    return lowest_states(build_hamiltonian(g, 0.5 * x ** 2, scheme="spectral"), 8)


def _hermite_function(n, x):
    """Normalised 1D oscillator eigenfunction phi_n (hbar = m = omega = 1), [CDL] ch. V."""
    h = np.polynomial.hermite.hermval(x, [0] * n + [1])
    return h * np.exp(-x ** 2 / 2) / math.sqrt(2 ** n * math.factorial(n) * math.sqrt(math.pi))


# --- norms, positions, spreads --------------------------------------------------------------

def test_norms_of_sampled_gaussian_match_gaussian_integral(grid2):
    """Integral of exp(-(x^2+y^2)) over the plane is pi (Gaussian integral, common practice).

    Grid sums of a smooth decaying function are spectrally accurate; box truncation
    exp(-36) is negligible, so 1e-10 relative."""
    x, y = grid2.mesh()
    states = np.stack([np.exp(-(x ** 2 + y ** 2) / 2), 2.0 * np.exp(-(x ** 2 + y ** 2) / 2)])
    np.testing.assert_allclose(norms(grid2, states), [math.pi, 4 * math.pi], rtol=1e-10)


def test_solver_states_have_unit_norm_and_are_orthonormal(grid2, oscillator2):
    """Eigenvectors of a Hermitian matrix are orthonormal (common practice)."""
    spec, _ = oscillator2
    np.testing.assert_allclose(norms(grid2, spec.states), 1.0, atol=1e-12)
    np.testing.assert_allclose(overlap_matrix(grid2, spec.states, spec.states), np.eye(6), atol=1e-10)


def test_ground_state_position_and_spread(grid2, oscillator2):
    """2D oscillator ground state: <r> = 0 and spread sqrt(hbar/(2 m omega)) per axis [CDL ch. V]."""
    spec, _ = oscillator2
    pos = position_expectation(grid2, spec.states)
    np.testing.assert_allclose(pos[0], [0.0, 0.0], atol=TOL)
    np.testing.assert_allclose(position_spread(grid2, spec.states[:1])[0], [math.sqrt(0.5)] * 2, atol=TOL)


def test_displaced_oscillator_position_and_angular_momentum(grid2):
    """Oscillator centred at (x0, y0): <x> = x0, <y> = y0, spread sqrt(1/2) unchanged, and the
    n = 1 shell about its own centre has L_z eigenvalues -1, +1 [CDL ch. VI complement].
    Tolerance 1e-5: the far wall is 5.3 from the centre, |psi| ~ exp(-5.3^2/2) ~ 8e-7 there."""
    x0, y0 = 0.7, -0.4
    x, y = grid2.mesh()
    v = 0.5 * ((x - x0) ** 2 + (y - y0) ** 2)
    spec = lowest_states(build_hamiltonian(grid2, v, scheme="spectral"), 3)
    # box truncation is worse on the far side: |psi| ~ exp(-(6-0.7)^2/2) ~ 8e-7 at the wall
    np.testing.assert_allclose(position_expectation(grid2, spec.states)[0], [x0, y0], atol=1e-5)
    np.testing.assert_allclose(position_spread(grid2, spec.states)[0], [math.sqrt(0.5)] * 2, atol=1e-5)
    lz = angular_momentum_z_multiplet(grid2, spec.states, (1, 2), centre=(x0, y0))
    np.testing.assert_allclose(lz, [-1.0, 1.0], atol=1e-5)
    # about its own centre L_z does not couple the ground state to the shell; about the origin
    # L_z(0) = L_z(c) + c_x p_y - c_y p_x, and p links phi_0 only to the n = 1 shell, so
    # sum_j |<0|L_z(0)|j>|^2 = c_x^2 <p_y^2> + c_y^2 <p_x^2> = |c|^2 / 2 [CDL ch. V, <p^2> = 1/2]
    m = angular_momentum_z_matrix(grid2, spec.states[:3], centre=(x0, y0))
    np.testing.assert_allclose(m[0, 1:], 0.0, atol=1e-5)
    m0 = angular_momentum_z_matrix(grid2, spec.states[:3], centre=(0.0, 0.0))
    assert (np.abs(m0[0, 1:]) ** 2).sum() == pytest.approx((x0 ** 2 + y0 ** 2) / 2, abs=1e-5)


def test_position_of_analytic_displaced_state():
    """|phi_0(x - a)|^2 has mean a and spread sqrt(1/2) [CDL ch. V]; 1D grid, spectral sums (1e-10)."""
    g = Grid([-10], [10], [200])
    x = g.axes[0]
    states = np.stack([_hermite_function(0, x - 1.5), _hermite_function(1, x + 2.0)])
    pos = position_expectation(g, states)[:, 0]
    np.testing.assert_allclose(pos, [1.5, -2.0], atol=1e-10)
    # phi_1: <x^2> = 3/2 (ladder operators, [CDL] ch. V)
    np.testing.assert_allclose(position_spread(g, states)[:, 0], [math.sqrt(0.5), math.sqrt(1.5)], atol=1e-10)


# --- derivatives and angular momentum --------------------------------------------------------

@pytest.mark.parametrize("periodic", [False, True])
@pytest.mark.parametrize("derivative, tol", [("spectral", 1e-9), ("fd8", 1e-6)])
def test_derivative_of_gaussian(periodic, derivative, tol):
    """d/dx exp(-x^2/2) = -x exp(-x^2/2) (calculus).  On [-10, 10] with 120 points (h ~ 0.165):
    spectral error is set by the truncation exp(-50); fd8 error ~ h^8 f^(9) ~ 1e-7."""
    g = Grid([-10], [10], [120], "periodic" if periodic else "hard-wall")
    x = g.axes[0]
    d = derivative_matrix_1d(g.shape[0], g.spacing[0], periodic, derivative=derivative)
    np.testing.assert_allclose(d @ np.exp(-x ** 2 / 2), -x * np.exp(-x ** 2 / 2), atol=tol)
    np.testing.assert_allclose(d, -d.T, atol=1e-12)


def test_spectral_derivative_exact_on_box_sine_modes():
    """Galerkin derivative in the box's sine basis: int_0^L sin(m pi x/L) d/dx sin(n pi x/L) dx
    = 2mn/(m^2-n^2) for m+n odd (elementary integral, common practice); the grid sum of a product
    of box modes is exact (discrete orthogonality), so agreement is to rounding (1e-10)."""
    g = Grid([0.0], [3.0], [30])
    x = g.axes[0]
    big_l = 3.0
    d = derivative_matrix_1d(30, g.spacing[0], False)
    m, n = 4, 7
    sm, sn = np.sin(m * np.pi * x / big_l), np.sin(n * np.pi * x / big_l)
    value = sm @ (d @ sn) * g.spacing[0]
    assert value == pytest.approx(2.0 * m * n / (m * m - n * n), rel=1e-10)
    # m + n even: the integral vanishes
    assert np.sin(5 * np.pi * x / big_l) @ (d @ sn) * g.spacing[0] == pytest.approx(0.0, abs=1e-10)


@pytest.mark.parametrize("derivative, tol", [("spectral", TOL), ("fd8", TOL_FD8)])
def test_angular_momentum_in_oscillator_shells(grid2, oscillator2, derivative, tol):
    """2D isotropic oscillator: L_z eigenvalues in shell n are {-n, -n+2, ..., n}:
    {0}, {-1, 1}, {-2, 0, 2} [CDL ch. VI complement on the 2D oscillator]."""
    spec, _ = oscillator2
    assert spec.groups == ((0,), (1, 2), (3, 4, 5))
    expected = {(0,): [0.0], (1, 2): [-1.0, 1.0], (3, 4, 5): [-2.0, 0.0, 2.0]}
    for group in spec.groups:
        got = angular_momentum_z_multiplet(grid2, spec.states, group, derivative=derivative)
        np.testing.assert_allclose(got, expected[group], atol=tol)


def test_multiplet_result_is_basis_independent(grid2, oscillator2):
    """A unitary rotation of a degenerate multiplet leaves the L_z spectrum unchanged (linear
    algebra, common practice); single-state <L_z> of real states is 0 and of the rotated
    complex states is not."""
    spec, _ = oscillator2
    sub = spec.states[[3, 4, 5]]
    rng = np.random.default_rng(7)
    q, _ = np.linalg.qr(rng.standard_normal((3, 3)) + 1j * rng.standard_normal((3, 3)))
    rotated = np.tensordot(q, sub, axes=1)
    np.testing.assert_allclose(angular_momentum_z_multiplet(grid2, rotated, [0, 1, 2]), [-2, 0, 2], atol=TOL)
    np.testing.assert_allclose(angular_momentum_z(grid2, sub), 0.0, atol=1e-12)
    assert np.abs(angular_momentum_z(grid2, rotated)).max() > 1e-3
    m = angular_momentum_z_matrix(grid2, rotated)
    np.testing.assert_allclose(m, m.conj().T, atol=1e-12)
    np.testing.assert_allclose(np.trace(m).real, 0.0, atol=TOL)


def test_angular_momentum_of_complex_eigenfunctions_2d_and_3d():
    """(x + i y)^l exp(-r^2/2) is an L_z eigenfunction with eigenvalue l [CDL ch. VI complement
    on the 2D oscillator]; in 3D the same times exp(-z^2/2).  Grids [-7, 7] with 36 (2D) and
    24 (3D, h = 0.56: sampling error ~exp(-(pi/h)^2/2) ~ 1e-7) points."""
    g = Grid([-7, -7], [7, 7], [36, 36])
    x, y = g.mesh()
    gauss = np.exp(-(x ** 2 + y ** 2) / 2)
    states = np.stack([(x + 1j * y) * gauss, (x - 1j * y) ** 2 * gauss, (x + 1j * y) ** 3 * gauss])
    np.testing.assert_allclose(angular_momentum_z(g, states), [1.0, -2.0, 3.0], atol=TOL)
    g3 = Grid([-7] * 3, [7] * 3, [24] * 3)
    x, y, z = g3.mesh()
    psi = ((x + 1j * y) * np.exp(-(x ** 2 + y ** 2 + z ** 2) / 2))[None]
    np.testing.assert_allclose(angular_momentum_z(g3, psi), [1.0], atol=1e-5)


def test_fock_darwin_levels_carry_their_angular_momentum(grid2):
    """Fock-Darwin [FD]: omega0 = 1, charge q = -1, B_z = 1 (dimensionless), symmetric gauge about
    the origin: Omega = sqrt(5/4); the four lowest levels are (n, l) = (0,0), (0,-1), (0,-2), (0,1)
    with E = (|l|+1) Omega + l/2, and the (non-degenerate, complex) states have <L_z> = l."""
    x, y = grid2.mesh()
    h = build_hamiltonian(grid2, 0.5 * (x ** 2 + y ** 2), scheme="spectral", magnetic_field=(0, 0, 1.0))
    spec = lowest_states(h, 4)
    omega = math.sqrt(1.25)
    ls = np.array([0, -1, -2, 1])
    np.testing.assert_allclose(spec.energies, (np.abs(ls) + 1) * omega + ls / 2, atol=TOL)
    np.testing.assert_allclose(angular_momentum_z(grid2, spec.states), ls, atol=TOL)


# --- mirror parity ---------------------------------------------------------------------------

def test_parity_alternates_for_1d_oscillator(oscillator1):
    """phi_n(-x) = (-1)^n phi_n(x) [CDL ch. V]."""
    spec = oscillator1
    par = mirror_parity(spec.grid, spec.states, spec.grid.axes[0] ** 2)
    assert [p["x"] for p in par] == [(-1) ** n for n in range(8)]
    assert [parity_label(p) for p in par[:2]] == ["x+", "x-"]


def test_parity_of_anisotropic_oscillator():
    """Anisotropic oscillator omega_x = 1, omega_y = sqrt(2): states phi_nx(x) phi_ny(y) with
    parities ((-1)^nx, (-1)^ny) [CDL ch. V]; levels nx + sqrt2 ny ordered (0,0), (1,0), (0,1),
    (2,0), (1,1), (0,2)."""
    g = Grid([-6, -6], [6, 6], [36, 36])
    x, y = g.mesh()
    v = 0.5 * (x ** 2 + 2.0 * y ** 2)
    spec = lowest_states(build_hamiltonian(g, v, scheme="spectral"), 6)
    quanta = [(0, 0), (1, 0), (0, 1), (2, 0), (1, 1), (0, 2)]
    np.testing.assert_allclose(spec.energies, [nx + 0.5 + math.sqrt(2) * (ny + 0.5) for nx, ny in quanta],
                               atol=TOL)
    par = mirror_parity(g, spec.states, v)
    assert par == [{"x": (-1) ** nx, "y": (-1) ** ny} for nx, ny in quanta]
    assert parity_label(par[4]) == "x- y-"


def test_broken_mirror_is_omitted(grid2):
    """V = (x^2 + y^2)/2 + 0.3 x is symmetric under y -> -y only (elementary), so only a "y"
    parity is reported; the ground state is even in y [CDL ch. V, displaced oscillator]."""
    x, y = grid2.mesh()
    v = 0.5 * (x ** 2 + y ** 2) + 0.3 * x
    spec = lowest_states(build_hamiltonian(grid2, v, scheme="spectral"), 1)
    par = mirror_parity(grid2, spec.states, v)
    assert par == [{"y": 1}]
    assert parity_label(par[0]) == "y+"
    # without the potential every axis of the (symmetric) grid is considered
    assert set(mirror_parity(grid2, spec.states)[0]) == {"x", "y"}


def test_mixed_parity_in_a_rotated_multiplet(grid2):
    """(phi_1(x) phi_0(y) + phi_0(x) phi_1(y)) / sqrt2 is neither even nor odd under either mirror,
    while (x + i y) exp(-r^2/2) is odd under the inversion but mixed under each mirror:
    <psi|P_x psi> = -<x+iy|x-iy> = 0 (elementary, [CDL ch. V] parities)."""
    x, y = grid2.mesh()
    a = (_hermite_function(1, x) * _hermite_function(0, y) + _hermite_function(0, x) * _hermite_function(1, y))
    b = (x + 1j * y) * np.exp(-(x ** 2 + y ** 2) / 2)
    par = mirror_parity(grid2, np.stack([a / math.sqrt(2), b]))
    assert par == [{"x": 0, "y": 0}, {"x": 0, "y": 0}]
    assert parity_label(par[0]) == "x? y?"


def test_grid_not_centred_on_potential_gives_no_parity():
    """The mirror is about the grid centre: on [-5, 7] the even oscillator potential about 0 is not
    symmetric about x = 1, so no "x" parity; the odd function x exp(-x^2/2) sampled on a grid centred
    at 0 is odd (elementary)."""
    g = Grid([-5], [7], [60])
    x = g.axes[0]
    assert mirror_parity(g, _hermite_function(1, x)[None], 0.5 * x ** 2) == [{}]
    assert parity_label({}) == ""
    gc = Grid([-6], [6], [61])
    xc = gc.axes[0]
    assert mirror_parity(gc, _hermite_function(1, xc)[None], 0.5 * xc ** 2) == [{"x": -1}]


def test_parity_on_periodic_axis():
    """On a periodic axis [-L/2, L/2), cos(2 pi x / L) is even and sin(2 pi x / L) is odd about the
    centre x = 0 (elementary); a phase-shifted cosine potential is not mirror symmetric."""
    g = Grid([-2.0], [2.0], [32], "periodic")
    x = g.axes[0]
    k = 2 * np.pi / 4.0
    states = np.stack([np.cos(k * x), np.sin(k * x)])
    assert mirror_parity(g, states, np.cos(k * x)) == [{"x": 1}, {"x": -1}]
    assert mirror_parity(g, states, np.cos(k * x + 0.3)) == [{}, {}]


# --- dipoles and oscillator strengths --------------------------------------------------------

def test_oscillator_dipole_selection_rules(oscillator1):
    """x = sqrt(hbar/(2 m omega)) (a + a^dagger) [CDL ch. V]: |<0|x|1>| = sqrt(1/2),
    <0|x|2> = 0, |<1|x|2>| = 1, <0|x|0> = 0."""
    spec = oscillator1
    d = transition_dipoles(spec.grid, spec.states)[:, :, 0]
    assert d.shape == (8, 8)
    assert abs(d[0, 1]) == pytest.approx(math.sqrt(0.5), abs=TOL)
    assert abs(d[1, 2]) == pytest.approx(1.0, abs=TOL)
    assert abs(d[0, 2]) < TOL and abs(d[0, 0]) < TOL
    for m in range(8):
        for n in range(8):
            if abs(m - n) != 1:
                assert abs(d[m, n]) < TOL
            else:
                assert abs(d[m, n]) == pytest.approx(math.sqrt(max(m, n) / 2), abs=TOL)
    sub = transition_dipoles(spec.grid, spec.states, i=0, j=[1, 2])
    np.testing.assert_allclose(sub[0, :, 0], d[0, 1:3], atol=1e-14)


def test_dipoles_in_degenerate_2d_shell(grid2, oscillator2):
    """Basis-independent: sum over the n = 1 shell of |<0|x|j>|^2 = 1/2 and the same for y
    [CDL ch. V, ladder operators per axis]; <0|r|j> = 0 for the n = 2 shell (parity)."""
    spec, _ = oscillator2
    d = transition_dipoles(grid2, spec.states, i=[0])
    np.testing.assert_allclose((np.abs(d[0, 1:3]) ** 2).sum(axis=0), [0.5, 0.5], atol=TOL)
    np.testing.assert_allclose(d[0, 3:6], 0.0, atol=TOL)


def test_dipoles_of_complex_states_are_complex(grid2):
    """g0 = exp(-r^2/2)/sqrt(pi), g1 = (x + i y) exp(-r^2/2)/sqrt(pi) (both normalised):
    <g0|x|g1> = 1/2 and <g0|y|g1> = i/2 (Gaussian moments, common practice); real input gives
    a real result, complex input a complex one."""
    x, y = grid2.mesh()
    g0 = np.exp(-(x ** 2 + y ** 2) / 2) / math.sqrt(math.pi)
    g1 = (x + 1j * y) * np.exp(-(x ** 2 + y ** 2) / 2) / math.sqrt(math.pi)
    d = transition_dipoles(grid2, np.stack([g0.astype(complex), g1]))
    assert np.iscomplexobj(d)
    np.testing.assert_allclose(d[0, 1], [0.5, 0.5j], atol=1e-10)
    assert not np.iscomplexobj(transition_dipoles(grid2, g0[None]))


def test_oscillator_strengths_sum_rule():
    """Harmonic oscillator: f_01 = 1 and all other f_0j = 0 [CDL ch. V with TRK]; quartic well
    V = x^4/4: sum_j f_0j = 1 [TRK] with 40 states (higher f_0j fall off like |<0|x|j>|^2, the
    spectral grid converges exponentially, so 1e-8)."""
    g = Grid([-8], [8], [101])
    x = g.axes[0]
    spec = lowest_states(build_hamiltonian(g, 0.5 * x ** 2, scheme="spectral"), 6)
    f = oscillator_strengths(spec.energies, transition_dipoles(g, spec.states))[:, :, 0]
    assert f[0, 1] == pytest.approx(1.0, abs=TOL)
    np.testing.assert_allclose(f[0, 2:], 0.0, atol=TOL)
    np.testing.assert_allclose(f, -f.T, atol=1e-12)
    quart = lowest_states(build_hamiltonian(g, 0.25 * x ** 4, scheme="spectral"), 40)
    f0 = oscillator_strengths(quart.energies, transition_dipoles(g, quart.states, i=0), i=0)
    assert f0[0, :, 0].sum() == pytest.approx(1.0, abs=1e-8)
    # heavier particle: f scales as m (prefactor hbar^2/2m), the sum rule still holds
    heavy = lowest_states(build_hamiltonian(g, 0.25 * x ** 4, mass=2.0, scheme="spectral"), 40)
    fh = oscillator_strengths(heavy.energies, transition_dipoles(g, heavy.states, i=0), i=0, mass=2.0)
    assert fh[0, :, 0].sum() == pytest.approx(1.0, abs=1e-8)
    fp = oscillator_strengths(heavy.energies, transition_dipoles(g, heavy.states, i=0), i=0, prefactor=0.25)
    np.testing.assert_allclose(fp, fh, rtol=1e-12)


# --- regions ---------------------------------------------------------------------------------

def test_half_plane_holds_half_of_a_symmetric_state(grid2, oscillator2):
    """|psi|^2 of an x-even or x-odd state is even in x, so the half plane x > 0 holds 1/2
    (symmetry, [CDL ch. V]); 40 points put no node on x = 0, so the grid sum is exactly symmetric."""
    spec, _ = oscillator2
    half = box_mask(grid2, (0.0, -np.inf), (np.inf, np.inf))
    assert half.sum() == 40 * 20
    # exact mirror symmetry of the grid sum; the solver's residual 1e-8 leaves ~1e-9 asymmetry
    np.testing.assert_allclose(probability_in_region(grid2, spec.states[:1], half), [0.5], atol=TOL)
    quadrant = box_mask(grid2, (0.0, 0.0), (np.inf, np.inf))
    # ground state is even in x and y separately: a quadrant holds 1/4
    assert probability_in_region(grid2, spec.states[:1], quadrant)[0] == pytest.approx(0.25, abs=TOL)


def test_polygon_covering_grid_holds_everything(grid2, oscillator2):
    """Total probability is 1 (normalisation, common practice); a polygon equal to the box x > 0
    selects the same points as the box."""
    spec, _ = oscillator2
    whole = polygon_mask(grid2, [(-7, -7), (7, -7), (7, 7), (-7, 7)])
    assert whole.all()
    np.testing.assert_allclose(probability_in_region(grid2, spec.states, whole), 1.0, atol=1e-12)
    right = polygon_mask(grid2, [(0, -7), (7, -7), (7, 7), (0, 7)])
    np.testing.assert_array_equal(right, box_mask(grid2, (0, -7), (7, 7)))
    # below the line x + y = 0.1, which passes through no grid point (x + y = -12 + m 12/41)
    tri = polygon_mask(grid2, [(-7, -7), (7.1, -7), (-7, 7.1)])
    xx, yy = grid2.mesh()
    np.testing.assert_array_equal(tri, xx + yy < 0.1)


def test_overlap_of_displaced_gaussians():
    """<phi_0(x)|phi_0(x - d)> = exp(-d^2/4) (Gaussian integral, common practice); 1D spectral
    grid sums on [-10, 10], 1e-10."""
    g = Grid([-10], [10], [160])
    x = g.axes[0]
    a = _hermite_function(0, x)[None]
    b = np.stack([_hermite_function(0, x - d) for d in (0.0, 1.0, 2.5)])
    np.testing.assert_allclose(overlap_matrix(g, a, b)[0], np.exp(-np.array([0.0, 1.0, 2.5]) ** 2 / 4),
                               atol=1e-10)


# --- validation ------------------------------------------------------------------------------

def test_bad_input_raises_input_error(grid2):
    good = np.zeros((2, 40, 40))
    good[:, 20, 20] = 1.0
    with pytest.raises(InputError, match=r"expected \(k, 40, 40\)"):
        norms(grid2, np.zeros((40, 40)))
    with pytest.raises(InputError, match=r"expected \(k, 40, 40\)"):
        position_expectation(grid2, np.zeros((3, 40, 41)))
    with pytest.raises(InputError, match="NaN"):
        norms(grid2, np.full((1, 40, 40), np.nan))
    with pytest.raises(InputError, match="2D or 3D"):
        g1 = Grid([-1], [1], [10])
        angular_momentum_z(g1, np.ones((1, 10)))
    with pytest.raises(InputError, match="out of range"):
        angular_momentum_z_multiplet(grid2, good, (0, 5))
    with pytest.raises(InputError, match="centre"):
        angular_momentum_z(grid2, good, centre=(0.0,))
    with pytest.raises(InputError, match="boolean"):
        probability_in_region(grid2, good, np.ones((40, 40)))
    with pytest.raises(InputError, match=r"\(40, 40\)"):
        probability_in_region(grid2, good, np.ones((40, 39), dtype=bool))
    with pytest.raises(InputError, match="2D grid"):
        polygon_mask(Grid([-1] * 3, [1] * 3, [5] * 3), [(0, 0), (1, 0), (0, 1)])
    with pytest.raises(InputError, match=r"\(m, 2\)"):
        polygon_mask(grid2, [(0, 0), (1, 0)])
    with pytest.raises(InputError, match="upper"):
        box_mask(grid2, (1, 1), (0, 2))
    with pytest.raises(InputError, match="potential has shape"):
        mirror_parity(grid2, good, np.zeros((3, 3)))
    with pytest.raises(InputError, match="derivative"):
        angular_momentum_z(grid2, good, derivative="fd3")
    with pytest.raises(InputError, match="dipoles have shape"):
        oscillator_strengths([0.0, 1.0], np.zeros((3, 3, 1)))
