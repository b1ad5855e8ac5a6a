"""Eigensolver checks against analytic spectra and reference libraries.

Tolerances: the spectral (sinc-DVR) scheme on the grids used here resolves a
harmonic oscillator to ~1e-9 relative (Colbert & Miller, J. Chem. Phys. 96,
1982 (1992): exponential convergence for smooth potentials), so analytic
levels are compared at 1e-7 relative.  Second-order finite differences are
compared with the exact eigenvalues of the discrete operator, which they
must match to the solver's tolerance.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.linalg as sla
import scipy.sparse.linalg as spla
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from core import Grid, solve_states
from core.eigensolve import lowest_states
from core.errors import Cancelled, InputError, MemoryLimitError, NotConverged
from core.hamiltonian import build_hamiltonian


def oscillator(grid, omega=1.0):
    mesh = grid.mesh_sparse()
    return 0.5 * omega**2 * sum(np.asarray(m) ** 2 for m in mesh)


def test_2d_isotropic_oscillator_shells():
    """E = hbar*omega*(n + 1), multiplicity n + 1: the 2D isotropic oscillator
    (Cohen-Tannoudji, Diu, Laloe, Quantum Mechanics, Wiley 1977, vol. 1, ch. VI, complement D_VI)."""
    g = Grid([-7, -7], [7, 7], [44, 44])
    r = solve_states(g, oscillator(g), states=10, scheme="spectral")
    expected = np.repeat([1.0, 2.0, 3.0, 4.0], [1, 2, 3, 4])
    assert r.energies.size == 10
    np.testing.assert_allclose(r.energies, expected, rtol=1e-7)
    assert [len(gr) for gr in r.groups] == [1, 2, 3, 4]


def test_3d_oscillator_35_states_gives_five_complete_shells():
    """3D isotropic oscillator: E = hbar*omega*(n + 3/2), shell multiplicities (n+1)(n+2)/2 = 1, 3, 6, 10, 15
    (Cohen-Tannoudji, Diu, Laloe, Quantum Mechanics, Wiley 1977, ch. VI, complement B_VII).
    A single-vector Krylov solver was seen to drop members of the 4th shell here; the block solver must not."""
    g = Grid([-6.0] * 3, [6.0] * 3, [20] * 3)
    r = solve_states(g, oscillator(g), states=35, scheme="spectral", tolerance=1e-6)
    expected = np.repeat([1.5, 2.5, 3.5, 4.5, 5.5], [1, 3, 6, 10, 15])
    assert r.energies.size == 35
    # 20 points on [-6, 6]: sinc-DVR error of the 5th shell ~1e-8 relative (measured); bound 1e-6
    np.testing.assert_allclose(r.energies, expected, rtol=1e-6)
    assert [len(gr) for gr in r.groups] == [1, 3, 6, 10, 15]


def test_cut_multiplet_is_completed():
    """Asking for 11 states of the 3D oscillator cuts the 10-fold 4th shell: all of it must come back."""
    g = Grid([-6.0] * 3, [6.0] * 3, [20] * 3)
    r = solve_states(g, oscillator(g), states=11, scheme="spectral", tolerance=1e-6)
    assert r.energies.size == 20
    assert [len(gr) for gr in r.groups] == [1, 3, 6, 10]
    assert not r.multiplet_cut


def test_anisotropic_oscillator():
    """E = hbar*wx*(nx + 1/2) + hbar*wy*(ny + 1/2) for a separable anisotropic oscillator (common textbook result)."""
    g = Grid([-8, -5], [8, 5], [48, 40])
    x, y = g.mesh_sparse()
    wx, wy = 1.0, 1.7
    r = solve_states(g, 0.5 * wx**2 * x**2 + 0.5 * wy**2 * y**2, states=8, scheme="spectral")
    levels = sorted(wx * (nx + 0.5) + wy * (ny + 0.5) for nx in range(10) for ny in range(10))[:8]
    np.testing.assert_allclose(r.energies, levels, rtol=1e-7)


def test_anisotropic_mass_in_a_box():
    """Box with masses (mx, my): E = pi^2/2 * (n^2/(mx Lx^2) + m^2/(my Ly^2)) (hbar = 1), particle in a box,
    e.g. Griffiths, Introduction to Quantum Mechanics, 2nd ed. (2005), sec. 2.2 and problem 4.2."""
    g = Grid([0, 0], [2.0, 3.0], [30, 30])
    mx, my = 0.5, 2.0
    r = solve_states(g, 0.0, states=6, mass=[mx, my], scheme="spectral")
    exact = sorted(math.pi**2 / 2 * (n**2 / (mx * 4.0) + m**2 / (my * 9.0))
                   for n in range(1, 12) for m in range(1, 12))[:6]
    np.testing.assert_allclose(r.energies, exact, rtol=1e-9)


def test_square_box_accidental_degeneracy_spectral():
    """Square box: E proportional to n1^2 + n2^2; 50 = 1+49 = 25+25 gives a triple level (1,7), (7,1), (5,5)
    that no symmetry of the square explains (accidental degeneracy; Griffiths 2005, problem 4.2)."""
    g = Grid([0, 0], [1, 1], [40, 40])
    qn = sorted((n1 * n1 + n2 * n2) for n1 in range(1, 15) for n2 in range(1, 15))
    k = qn.index(50) + 1
    r = solve_states(g, 0.0, states=k, scheme="spectral", degeneracy_tolerance=1e-8)
    exact = np.array(qn[: r.energies.size]) * math.pi**2 / 2
    np.testing.assert_allclose(r.energies, exact, rtol=1e-9)
    last = r.groups[-1]
    assert len(last) == 3 and np.allclose(r.energies[list(last)], 50 * math.pi**2 / 2, rtol=1e-9)


def test_fd2_box_matches_discrete_dispersion_3d():
    """FD2 in a hard-wall box: eigenvalues sum_a (4/h_a^2) sin^2(n_a pi / (2 (N_a + 1))) * hbar^2/2m exactly
    (eigenvalues of the tridiagonal second-difference matrix; R. J. LeVeque, Finite Difference Methods
    for Ordinary and Partial Differential Equations, SIAM 2007, sec. 2.10)."""
    pts = (14, 17, 20)
    g = Grid([0, 0, 0], [1.0, 1.3, 1.7], pts)
    r = solve_states(g, 0.0, states=12, scheme="fd2", tolerance=1e-10)
    one_d = [0.5 * 4 / h**2 * np.sin(np.arange(1, n + 1) * np.pi / (2 * (n + 1))) ** 2
             for n, h in zip(pts, g.spacing)]
    allv = np.sort((one_d[0][:, None, None] + one_d[1][None, :, None] + one_d[2][None, None, :]).ravel())
    np.testing.assert_allclose(r.energies, allv[: r.energies.size], rtol=1e-12)


def test_separable_double_well_against_tridiagonal_reference():
    """A separable 2D double well V(x) + y^2/2 on FD2 equals the sum of 1D spectra: the x part from
    scipy.linalg.eigh_tridiagonal on the same spacing, the y part likewise, to solver tolerance."""
    g = Grid([-4, -5], [4, 5], [120, 60])
    x, y = g.mesh_sparse()
    b = 4.0
    vx = b * (x**2 - 1.5**2) ** 2 / 1.5**4
    r = solve_states(g, vx + 0.5 * y**2, states=6, scheme="fd2", tolerance=1e-10)
    ax, ay = g.axes
    hx, hy = g.spacing
    ex = sla.eigh_tridiagonal(1.0 / hx**2 + b * (ax**2 - 2.25) ** 2 / 2.25**2,
                              -0.5 / hx**2 * np.ones(ax.size - 1), select="i", select_range=(0, 5))[0]
    ey = sla.eigh_tridiagonal(1.0 / hy**2 + 0.5 * ay**2, -0.5 / hy**2 * np.ones(ay.size - 1),
                              select="i", select_range=(0, 5))[0]
    ref = np.sort((ex[:, None] + ey[None, :]).ravel())[: r.energies.size]
    np.testing.assert_allclose(r.energies, ref, rtol=1e-11, atol=1e-11)
    # tunnel splitting of the lowest doublet: positive and small compared with the level spacing
    split = r.energies[1] - r.energies[0]
    assert 0 < split < 0.2 * (r.energies[2] - r.energies[0])
    np.testing.assert_allclose(split, ex[1] - ex[0], rtol=1e-7)


@pytest.mark.parametrize("scheme", ["fd2", "spectral"])
def test_stark_shift_is_exact(scheme):
    """A uniform field F on an oscillator shifts every level by -q^2 F^2 / (2 m omega^2) exactly
    (completing the square; e.g. Griffiths 2005, problem 2.49 / Sakurai, Modern QM, sec. 5.1)."""
    g = Grid([-9, -7], [9, 7], [64, 50])
    x, y = g.mesh_sparse()
    w = 1.3
    base = 0.5 * w**2 * (x**2 + y**2)
    f = 0.4
    r0 = solve_states(g, base, states=4, scheme=scheme, tolerance=1e-10)
    r1 = solve_states(g, base + f * x, states=4, scheme=scheme, tolerance=1e-10)  # -qF x with q = -1
    shift = -f**2 / (2 * w**2)
    # FD2 on h = 0.28: the displaced state samples the grid differently; error O(h^2 * shift) < 2e-3 abs
    atol = 1e-8 if scheme == "spectral" else 2e-3
    np.testing.assert_allclose(r1.energies - r0.energies, shift, atol=atol)


def test_states_normalised_and_orthogonal_within_multiplets():
    """sum |psi|^2 dV = 1 and <psi_i|psi_j> = 0 (common practice for a Hermitian eigenproblem)."""
    g = Grid([-6, -6, -6], [6, 6, 6], [18, 18, 18])
    r = solve_states(g, oscillator(g), states=10, scheme="spectral", tolerance=1e-8)
    flat = r.states.reshape(r.energies.size, -1)
    gram = np.conj(flat) @ flat.T * g.volume_element
    np.testing.assert_allclose(gram, np.eye(r.energies.size), atol=1e-10)


def test_agrees_with_scipy_eigsh_on_a_random_potential():
    """Compare with scipy.sparse.linalg.eigsh (ARPACK) on a non-degenerate random potential."""
    rng = np.random.default_rng(7)
    g = Grid([0, 0], [1, 1], [45, 41])
    v = 50 * rng.random(g.shape)
    h = build_hamiltonian(g, v, scheme="fd2")
    r = lowest_states(h, 8, tolerance=1e-10)
    ref = spla.eigsh(h.to_sparse(), k=8, sigma=float(v.min()) - 1, which="LM")[0]
    np.testing.assert_allclose(r.energies[:8], np.sort(ref), rtol=1e-10)


@settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 2**31 - 1), nx=st.integers(10, 24), ny=st.integers(10, 24),
       k=st.integers(1, 6), amp=st.floats(0.0, 500.0))
def test_property_random_symmetric_potentials(seed, nx, ny, k, amp):
    """Random potentials: energies real and ascending, residuals within tolerance, equal to the dense
    eigenvalues from numpy.linalg.eigvalsh (LAPACK) of the assembled matrix."""
    rng = np.random.default_rng(seed)
    g = Grid([0, 0], [1, 1], [nx, ny])
    v = amp * rng.random(g.shape)
    v = 0.5 * (v + v[::-1, :])                # a mirror-symmetric potential (may create degeneracies)
    h = build_hamiltonian(g, v, scheme="fd2")
    tol = 1e-9
    r = lowest_states(h, k, tolerance=tol, dense_limit=0)
    assert np.isrealobj(r.energies)
    assert np.all(np.diff(r.energies) >= 0)
    scale = max(abs(r.energies).max(), r.energies[-1] - r.energies[0])
    assert np.all(r.residuals <= 1.0001 * tol * scale)
    dense = np.linalg.eigvalsh(h.to_sparse().toarray())
    np.testing.assert_allclose(r.energies, dense[: r.energies.size], rtol=1e-8, atol=1e-8 * scale)


def test_warm_start_converges_quickly():
    """Restarting from the previous block after a 1% change in the potential needs far fewer H applications."""
    g = Grid([-7, -7], [7, 7], [96, 96])
    v = oscillator(g)
    h = build_hamiltonian(g, v, scheme="fd2")
    cold = lowest_states(h, 10)
    h2 = build_hamiltonian(g, 1.01 * v, scheme="fd2")
    warm = lowest_states(h2, 10, start=cold.block())
    cold2 = lowest_states(h2, 10)
    np.testing.assert_allclose(warm.energies, cold2.energies, rtol=1e-9)
    assert warm.applications < 0.6 * cold2.applications


def test_widened_warm_start_gives_the_lowest_eigenpairs():
    """A warm start widens its first Rayleigh-Ritz with the residuals of its poorly converged vectors
    (one Davidson step: E. R. Davidson, J. Comput. Phys. 17, 87 (1975)).  The answer must still be
    the lowest eigenpairs of the operator: energies against scipy.sparse.linalg.eigsh in shift-invert
    mode (ARPACK, an outside reference), residuals within the tolerance, states orthonormal, and the
    same energies as without widening.  Asking for 7 states of the oscillator ends inside an exactly
    degenerate pair of its fourth shell (x <-> y mirror symmetry of the grid), so the whole pair must
    come back.  An eigenvalue with residual r is within r of an exact one (Weyl / Kato bound), so
    1e-9 of the energy scale bounds the energy error."""
    g = Grid([-7, -7], [7, 7], [96, 96])
    v = oscillator(g)
    h = build_hamiltonian(g, v, scheme="fd2")
    cold = lowest_states(h, 7)
    h2 = build_hamiltonian(g, 1.01 * v, scheme="fd2")
    tol = 1e-9
    warm = lowest_states(h2, 7, start=cold.block(), tolerance=tol)
    assert warm.extra["widened_with_residuals"] > 0
    count = warm.energies.size
    ref = np.sort(spla.eigsh(h2.to_sparse().tocsc(), k=14, sigma=0.0, which="LM", tol=1e-12)[0])
    assert ref[7] - ref[6] < 1e-9 and count == 8 and not warm.multiplet_cut
    assert ref[count] - ref[count - 1] > warm.degeneracy_tolerance
    scale = max(abs(warm.energies).max(), warm.energies[-1] - warm.energies[0])
    assert np.all(warm.residuals <= 1.0001 * tol * scale)
    np.testing.assert_allclose(warm.energies, ref[:count], rtol=0, atol=tol * scale)
    flat = warm.states.reshape(warm.energies.size, -1) * math.sqrt(g.volume_element)
    np.testing.assert_allclose(flat @ flat.T, np.eye(warm.energies.size), atol=1e-12)
    plain = lowest_states(h2, 7, start=cold.block(), tolerance=tol, widen=False)
    assert plain.extra["widened_with_residuals"] == 0
    np.testing.assert_allclose(warm.energies, plain.energies, rtol=0, atol=2 * tol * scale)


def test_start_that_is_not_orthonormal_is_accepted():
    """A caller's start need not be orthonormal (here the previous states mixed and rescaled, with a
    row of zeros): the solve orthonormalises it and returns the same lowest levels as a cold solve,
    which are those of the assembled matrix (numpy.linalg.eigvalsh, 1e-8 of the energy scale)."""
    g = Grid([-7, -7], [7, 7], [40, 40])
    h = build_hamiltonian(g, oscillator(g), scheme="fd2")
    cold = lowest_states(h, 6, tolerance=1e-10)
    rng = np.random.default_rng(3)
    block = cold.block()
    mixed = np.tensordot(rng.standard_normal((len(block), len(block))), block, axes=1) * 7.0
    mixed[2] = 0.0
    warm = lowest_states(h, 6, start=mixed, tolerance=1e-10)
    exact = np.linalg.eigvalsh(h.to_sparse().toarray())[: warm.energies.size]
    scale = max(abs(exact).max(), exact[-1] - exact[0])
    np.testing.assert_allclose(warm.energies, exact, rtol=0, atol=1e-8 * scale)
    flat = warm.states.reshape(warm.energies.size, -1) * math.sqrt(g.volume_element)
    np.testing.assert_allclose(flat @ flat.T, np.eye(warm.energies.size), atol=1e-12)


def test_cancel_raises_with_partial_result():
    g = Grid([-7, -7], [7, 7], [64, 64])
    h = build_hamiltonian(g, oscillator(g), scheme="fd2")
    calls = []

    def stop():
        calls.append(1)
        return len(calls) > 1

    with pytest.raises(Cancelled) as info:
        lowest_states(h, 6, should_stop=stop)
    part = info.value.partial
    assert part is not None and part.energies.size >= 1 and not part.converged


def test_non_convergence_raises_with_partial_result():
    g = Grid([-7, -7], [7, 7], [64, 64])
    h = build_hamiltonian(g, oscillator(g), scheme="fd2")
    with pytest.raises(NotConverged) as info:
        lowest_states(h, 6, max_iterations=1, tolerance=1e-12)
    part = info.value.partial
    assert part is not None and part.energies.size >= 1 and not part.converged


def test_progress_is_reported():
    g = Grid([-7, -7], [7, 7], [64, 64])
    seen = []
    solve_states(g, oscillator(g), states=4, scheme="fd2", progress=lambda s, f: seen.append((s, f)))
    assert seen and seen[-1] == ("solving", 1.0)
    assert all(0.0 <= f <= 1.0 for _, f in seen)


# --- bad input ---------------------------------------------------------------------------------

def test_nan_potential_is_refused():
    g = Grid([0, 0], [1, 1], [10, 10])
    v = np.zeros(g.shape)
    v[3, 4] = np.nan
    with pytest.raises(InputError, match="NaN"):
        solve_states(g, v, states=2)


def test_wrong_shape_is_refused():
    g = Grid([0, 0], [1, 1], [10, 10])
    with pytest.raises(InputError, match="shape"):
        solve_states(g, np.zeros((10, 11)), states=2)


def test_too_many_states_is_refused():
    g = Grid([0, 0], [1, 1], [4, 4])
    with pytest.raises(InputError, match="only 16"):
        solve_states(g, 0.0, states=17)


@pytest.mark.parametrize("mass", [0.0, -1.0, float("nan")])
def test_bad_mass_is_refused(mass):
    g = Grid([0, 0], [1, 1], [10, 10])
    with pytest.raises(InputError, match="mass"):
        solve_states(g, 0.0, states=2, mass=mass)


def test_memory_estimate_refuses_a_huge_request(monkeypatch):
    import core.resources as res
    monkeypatch.setattr(res, "available_memory_bytes", lambda: 10 * 2**20)
    g = Grid([0, 0, 0], [1, 1, 1], [40, 40, 40])
    with pytest.raises(MemoryLimitError, match="coarser grid"):
        solve_states(g, 0.0, states=20, scheme="fd2")


def test_coarse_grid_start_gives_the_same_states():
    """A cold solve of a large grid first solves on a grid half as fine and interpolates (sine modes);
    the converged levels must not depend on that start (compared with a random start, same tolerance)."""
    g = Grid([-8, -8], [8, 8], [180, 180])
    h = build_hamiltonian(g, oscillator(g), scheme="fd2")
    coarse = lowest_states(h, 6, tolerance=1e-9)
    plain = lowest_states(h, 6, tolerance=1e-9, coarse_start=False)
    assert any("half as fine" in note for note in coarse.notes)
    np.testing.assert_allclose(coarse.energies, plain.energies, rtol=1e-11)
    assert coarse.applications < plain.applications


# --- chunked filtering and memory ---------------------------------------------------------------

def _separable_oscillator_levels(grid: Grid, count: int) -> np.ndarray:
    """FD2 levels of 0.5 * r^2 on a cubic hard-wall grid: sums of 1D levels, each from
    scipy.linalg.eigh_tridiagonal of the three-point operator (hbar = m = 1)."""
    x = grid.axes[0]
    h = grid.spacing[0]
    e1 = sla.eigh_tridiagonal(1.0 / h**2 + 0.5 * x**2, -0.5 / h**2 * np.ones(x.size - 1),
                              select="i", select_range=(0, 8))[0]
    return np.sort((e1[:, None, None] + e1[None, :, None] + e1[None, None, :]).ravel())[:count]


@pytest.mark.parametrize("chunk_bytes,column_bytes", [(1, 1), (1 << 30, 1 << 27)])
def test_chunked_filter_gives_the_same_spectrum(monkeypatch, chunk_bytes, column_bytes):
    """Filtering two rows at a time with 1024-column products, or eight rows with whole-row products,
    gives the FD2 levels of a 3D oscillator (separable: 1D eigh_tridiagonal sums).  With tolerance
    1e-10 every residual is below 1e-10 * scale, which bounds each eigenvalue error (Weyl's theorem for
    a Hermitian matrix), so levels agree with the reference to 1e-10 * scale."""
    import core.eigensolve as es
    monkeypatch.setattr(es, "_CHUNK_BYTES", chunk_bytes)
    monkeypatch.setattr(es, "_COLUMN_BYTES", column_bytes)
    g = Grid([-6.0] * 3, [6.0] * 3, [26] * 3)
    h = build_hamiltonian(g, oscillator(g), scheme="fd2")
    r = lowest_states(h, 10, tolerance=1e-10)
    assert r.energies.size == 10
    scale = max(abs(r.energies).max(), r.energies[-1] - r.energies[0])
    np.testing.assert_allclose(r.energies, _separable_oscillator_levels(g, 10), rtol=0, atol=1e-10 * scale)
    flat = r.states.reshape(10, -1) * math.sqrt(g.volume_element)
    np.testing.assert_allclose(flat @ flat.T, np.eye(10), atol=1e-12)


def test_chunked_products_of_a_complex_block(monkeypatch):
    """Complex (magnetic) blocks: Gram matrices and rotations in 1024-column chunks give the spectrum of
    scipy.linalg.eigh on the dense matrix, to the solver tolerance (residual bound, as above)."""
    import core.eigensolve as es
    monkeypatch.setattr(es, "_CHUNK_BYTES", 1)
    monkeypatch.setattr(es, "_COLUMN_BYTES", 1)
    g = Grid([-5.0, -5.0], [5.0, 5.0], [40, 40])
    h = build_hamiltonian(g, oscillator(g), scheme="fd2", magnetic_field=(0.0, 0.0, 0.7))
    r = lowest_states(h, 6, tolerance=1e-10, dense_limit=0)
    ref = sla.eigh(h.to_sparse().toarray(), eigvals_only=True, subset_by_index=(0, r.energies.size - 1))
    scale = max(abs(r.energies).max(), r.energies[-1] - r.energies[0])
    np.testing.assert_allclose(r.energies, ref, rtol=0, atol=1e-10 * scale)


def test_peak_memory_stays_within_the_stated_allocation():
    """The solve allocates what solver_memory_bytes states (block, H block, two filter-chunk buffers,
    column temporaries) plus a few grid-sized arrays; numpy allocations are traced by tracemalloc.
    Four block buffers (the previous design) would exceed this bound at 40^3 with 15 vectors."""
    import tracemalloc

    from core.eigensolve import solver_memory_bytes
    g = Grid([-7.0] * 3, [7.0] * 3, [40] * 3)
    h = build_hamiltonian(g, oscillator(g), scheme="fd2")
    tracemalloc.start()
    try:
        r = lowest_states(h, 10)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert r.energies.size == 10
    m = 10 + 5                                          # wanted + default guard vectors
    assert peak <= solver_memory_bytes(g.size, m, False) + 8 * 8 * g.size
