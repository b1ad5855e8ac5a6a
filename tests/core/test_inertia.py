"""Certified level counts by Sylvester's law of inertia (J. J. Sylvester, Phil. Mag. 4, 138 (1852)).

Counts are compared with things outside this module: closed-form spectra (the hard-wall square
box, whose levels are proportional to n1^2 + n2^2 — a textbook fact, e.g. D. J. Griffiths,
Introduction to Quantum Mechanics, 2nd ed., Pearson 2005, problem 4.2 and section 2.2; and the
closed-form eigenvalues 4 sin^2(n pi / (2(N+1))) / h^2 of the second-difference matrix with
Dirichlet ends, G. Strang, Computational Science and Engineering, Wellesley-Cambridge 2007,
section 1.5 [recalled from memory; the same formula is checked against numpy here]) and dense
counts from ``numpy.linalg.eigvalsh`` (LAPACK) for the Hamiltonians with random potentials and
magnetic fields.  Counts are integers: they must agree exactly.
"""
from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from core import Grid
from core.eigensolve import lowest_states
from core.hamiltonian import build_hamiltonian
from core.inertia import CountUnavailable, certify_count, count_below, estimate_factorisation

BOX = math.pi   # a square box of side pi: sinc-DVR levels are exactly (n1^2 + n2^2) / 2 (hbar = m = 1)


def box_count(limit: float, nmax: int = 40) -> int:
    """Number of (n1, n2), n >= 1, with (n1^2 + n2^2) / 2 below ``limit``."""
    n = np.arange(1, nmax + 1)
    s = 0.5 * (n[:, None] ** 2 + n[None, :] ** 2)
    return int(np.count_nonzero(s < limit))


def box_hamiltonian(points: int = 30):
    """The sinc-DVR on a hard-wall interval reproduces the box's sine modes exactly
    (D. T. Colbert, W. H. Miller, J. Chem. Phys. 96, 1982 (1992)), so the exact box levels and
    their accidental degeneracies (50 = 1 + 49 = 25 + 25) survive discretisation."""
    g = Grid([0.0, 0.0], [BOX, BOX], [points, points])
    return build_hamiltonian(g, np.zeros(g.shape), scheme="spectral")


def test_box_levels_are_exact_on_the_spectral_grid():
    """Premise of the box tests: on each axis the discrete levels equal n^2/2 to round-off (numpy eigvalsh),
    and the 2D operator is their Kronecker sum, so its levels are (n1^2 + n2^2)/2 exactly."""
    g = Grid([0.0], [BOX], [30])
    h = build_hamiltonian(g, np.zeros(g.shape), scheme="spectral")
    w = np.linalg.eigvalsh(h.to_sparse().toarray())
    np.testing.assert_allclose(w, 0.5 * np.arange(1, 31) ** 2, rtol=1e-11)   # LAPACK on 30x30: ~1e-14


@pytest.mark.parametrize("dense_limit", [10**6, 0], ids=["dense-ldl", "sparse-superlu"])
@pytest.mark.parametrize("limit", [0.5 * 49.9, 0.5 * 50.5, 0.5 * 25.2, 0.5 * 24.9, 0.5 * 2.1, 0.5 * 1.9])
def test_count_matches_box_with_accidental_degeneracies(limit, dense_limit, monkeypatch):
    """Counts of the square box below shifts on both sides of the accidentally degenerate levels
    25 = 9 + 16 (and 25 + 0 is not allowed) and 50 = 1 + 49 = 25 + 25, by both factorisations."""
    import core.inertia as inertia
    monkeypatch.setattr(inertia, "DENSE_LIMIT", dense_limit)
    monkeypatch.setattr(inertia, "DENSE_SPECTRAL_LIMIT", dense_limit)
    h = box_hamiltonian(30)
    got = count_below(h, limit)
    assert got.count == box_count(limit)
    assert got.method.startswith("dense" if dense_limit else "sparse")


def test_spectral_scheme_counts_densely_up_to_the_spectral_limit():
    """The spectral scheme couples whole lines, so its factor is dense: 40^2 = 1600 unknowns are
    factorised by LAPACK's Bunch-Kaufman LDL^T (well above DENSE_LIMIT), and the count still equals
    the closed-form box count, on both sides of the accidental degeneracy 50 = 1 + 49 = 25 + 25."""
    import core.inertia as inertia
    h = box_hamiltonian(40)
    assert h.size > inertia.DENSE_LIMIT
    est = estimate_factorisation(h)
    assert est.method.startswith("dense") and est.unknowns == 1600
    for limit in (0.5 * 49.9, 0.5 * 50.5):
        got = count_below(h, limit)
        assert got.method.startswith("dense") and got.count == box_count(limit)


@pytest.fixture(scope="module")
def box_solve():
    h = box_hamiltonian(30)
    return h, lowest_states(h, 31, dense_limit=0)


def test_certified_count_of_box_solve_includes_whole_triplet(box_solve):
    """Solving for 31 states reaches the triplet at (n1^2+n2^2) = 50; the certificate counts the 33
    levels at or below it, the analytic count, and calls the solve complete."""
    h, spec = box_solve
    assert spec.count == box_count(0.5 * 50.5) == 33
    cert = certify_count(h, spec)
    assert cert.certified, cert.reason
    assert cert.count_below == cert.expected == 33
    assert spec.energies.max() < cert.shift < 0.5 * 52          # between the top level and the next (52)
    assert cert.label == "count verified"


@pytest.mark.parametrize("drop", [30, 31, 32, 10])
def test_certificate_catches_a_dropped_multiplet_member(drop, box_solve):
    """A broken solve that loses one member of a multiplet (simulated by deleting one state from a
    correct spectrum) must not be certified, and the count must say exactly one level is missing."""
    h, spec = box_solve
    broken = dataclasses.replace(spec, energies=np.delete(spec.energies, drop),
                                 states=np.delete(spec.states, drop, axis=0),
                                 residuals=np.delete(spec.residuals, drop))
    cert = certify_count(h, broken)
    assert not cert.certified
    assert cert.count_below == 33 and cert.expected == 32 and cert.missing == 1
    assert "missed" in cert.reason
    assert cert.label == "count NOT verified"


def second_difference_levels(n: int, h: float) -> np.ndarray:
    """Eigenvalues of -(1/2) d^2/dx^2 by second differences with Dirichlet ends (closed form)."""
    j = np.arange(1, n + 1)
    return 0.5 * 4.0 / h**2 * np.sin(j * math.pi / (2 * (n + 1))) ** 2


@pytest.mark.parametrize("points", [(400,), (90, 70), (22, 18, 20)])
def test_count_matches_closed_form_second_difference_box(points):
    """fd2 box in 1D, 2D and 3D: the spectrum is a sum of closed-form 1D eigenvalues; counts below
    several shifts (mid-gap between sorted closed-form levels) must agree exactly."""
    g = Grid([0.0] * len(points), [1.0] * len(points), list(points))
    h = build_hamiltonian(g, np.zeros(g.shape), scheme="fd2")
    levels = np.zeros(())
    for a, n in enumerate(points):
        levels = np.add.outer(levels, second_difference_levels(n, g.spacing[a]))
    levels = np.sort(levels.ravel())
    for k in (1, 7, 40, 150):
        shift = 0.5 * (levels[k - 1] + levels[k])
        if levels[k] - levels[k - 1] < 1e-9 * levels[k]:
            continue
        assert count_below(h, shift).count == k


@pytest.mark.parametrize("ndim,scheme,field", [
    (1, "fd4", None), (2, "fd2", (0.0, 0.0, 0.8)), (2, "fd8", (0.0, 0.0, 0.3)),
    (3, "fd2", (0.2, -0.1, 0.5)), (3, "fd2", None), (2, "spectral", (0.0, 0.0, 0.6)),
])
def test_count_matches_dense_eigvalsh_random_potential(ndim, scheme, field):
    """Random potentials (with and without a magnetic field, so real symmetric and complex Hermitian H):
    the count below shifts across the spectrum equals the count from numpy.linalg.eigvalsh."""
    rng = np.random.default_rng(ndim * 10 + len(scheme))
    pts = {1: [300], 2: [17, 15], 3: [7, 6, 6]}[ndim]
    g = Grid([-4.0] * ndim, [4.0] * ndim, pts)
    v = 0.5 * sum(m**2 for m in g.mesh_sparse()) + rng.uniform(-1.0, 1.0, g.shape)
    h = build_hamiltonian(g, v, scheme=scheme, magnetic_field=field)
    a = h.to_sparse()
    assert np.iscomplexobj(a.toarray()) == (field is not None and ndim > 1)
    w = np.linalg.eigvalsh(a.toarray())
    import core.inertia as inertia
    for k in (3, 25, len(w) // 3):   # small dense references keep LAPACK quick
        shift = 0.5 * (w[k - 1] + w[k])
        for limit in (10**6, 0):
            old = inertia.DENSE_LIMIT, inertia.DENSE_SPECTRAL_LIMIT
            inertia.DENSE_LIMIT = inertia.DENSE_SPECTRAL_LIMIT = limit
            try:
                assert count_below(h, shift).count == k
            finally:
                inertia.DENSE_LIMIT, inertia.DENSE_SPECTRAL_LIMIT = old


def test_count_on_plain_matrices():
    """count_below also takes a sparse or dense Hermitian matrix (reference: numpy eigvalsh)."""
    import scipy.sparse as sp
    rng = np.random.default_rng(3)
    x = rng.standard_normal((60, 60)) + 1j * rng.standard_normal((60, 60))
    a = x + x.conj().T
    w = np.linalg.eigvalsh(a)
    s = 0.5 * (w[20] + w[21])
    assert count_below(a, s).count == 21
    sym = a.real + a.real.T
    assert count_below(sp.csr_matrix(sym), 0.0).count == int(np.sum(np.linalg.eigvalsh(sym) < 0))


def test_not_certified_when_the_factor_does_not_fit(box_solve):
    """A memory limit below the estimated fill gives 'not certified' with the reason, and no count."""
    h, spec = box_solve
    cert = certify_count(h, spec, max_memory_bytes=1000)
    assert not cert.certified and cert.count_below is None
    assert "memory" in cert.reason or "need" in cert.reason
    assert cert.label == "count not checked"
    with pytest.raises(CountUnavailable):
        count_below(h, 3.0, max_memory_bytes=1000)


def test_certified_count_with_magnetic_field_3d():
    """3D oscillator in a tilted field (complex Hermitian H; 392 unknowns, 784 in the real embedding, sparse path):
    the returned levels are all the levels below the shift (reference count: numpy eigvalsh)."""
    g = Grid([-5.0] * 3, [5.0] * 3, [8, 7, 7])
    h = build_hamiltonian(g, 0.5 * sum(m**2 for m in g.mesh_sparse()), scheme="fd2", magnetic_field=(0.3, 0.0, 0.4))
    spec = lowest_states(h, 10, dense_limit=0)
    cert = certify_count(h, spec)
    assert cert.certified, cert.reason
    w = np.linalg.eigvalsh(h.to_sparse().toarray())
    assert cert.count_below == int(np.sum(w < cert.shift)) == spec.count


@pytest.fixture(params=["pardiso", "superlu"])
def sparse_path(request, monkeypatch):
    """Run a test through each sparse factorisation: MKL PARDISO (when pypardiso is installed) and SuperLU."""
    import core.inertia as inertia
    if request.param == "pardiso":
        pytest.importorskip("pypardiso")
        assert inertia.use_pardiso()
    else:
        monkeypatch.setattr(inertia, "use_pardiso", lambda: False)
    return request.param


def test_fill_estimate_is_conservative(sparse_path):
    """The estimate used to refuse must not undershoot the measured fill of the factor that is used
    (SuperLU's L + U, or the factor nonzeros PARDISO reports)."""
    import scipy.sparse as sp
    import scipy.sparse.linalg as spla

    from core.inertia import count_below
    for pts, scheme in [((96, 96), "fd2"), ((18, 18, 18), "fd2"), ((60, 60), "fd4")]:
        g = Grid([-3.0] * len(pts), [3.0] * len(pts), list(pts))
        h = build_hamiltonian(g, np.zeros(g.shape), scheme=scheme)
        est = estimate_factorisation(h)
        if sparse_path == "pardiso":
            assert "PARDISO" in est.method
            measured = count_below(h, 7.0).factor_nonzeros
        else:
            m = (h.to_sparse() - 7.0 * sp.identity(g.size)).tocsc()
            lu = spla.splu(m, permc_spec="MMD_AT_PLUS_A", diag_pivot_thresh=0.0, options=dict(SymmetricMode=True))
            measured = lu.L.nnz + lu.U.nnz
        assert est.nonzeros >= measured > 0


def test_3d_count_against_the_analytic_spectrum_of_the_difference_operator(sparse_path):
    """Count below shifts in a 3D box (second differences, hard walls, 20^3 = 8000 unknowns, and in a
    field: the real embedding).  Reference: the exact eigenvalues of the second-difference matrix,
    (2 - 2 cos(k pi / (n + 1))) / h^2 for k = 1..n (common practice; e.g. G. Strang, Computational
    Science and Engineering, Wellesley-Cambridge 2007, sec. 1.5), summed over the three axes; in a
    field numpy's eigvalsh of the dense matrix at 10^3.  The count is exact: no tolerance."""
    from core.inertia import count_below
    n = 20
    g = Grid([0.0] * 3, [1.0] * 3, [n] * 3)
    h = build_hamiltonian(g, np.zeros(g.shape), scheme="fd2", mass=0.5)
    step = g.spacing[0]
    e1 = (2.0 - 2.0 * np.cos(np.arange(1, n + 1) * np.pi * step)) / step**2
    e3 = np.sort((e1[:, None, None] + e1[None, :, None] + e1[None, None, :]).ravel())
    for j in (0, 3, 9, 40):
        shift = 0.5 * (e3[j] + e3[j + 1]) if e3[j + 1] - e3[j] > 1e-9 * e3[j] else e3[j] + 1e-3 * e3[0]
        got = count_below(h, shift)
        assert got.count == int(np.sum(e3 < shift))
        assert ("PARDISO" in got.method) == (sparse_path == "pardiso")
    g = Grid([-4.0] * 3, [4.0] * 3, [10] * 3)
    hb = build_hamiltonian(g, 0.5 * sum(c**2 for c in g.mesh_sparse()), scheme="fd2", magnetic_field=(0.0, 0.3, 0.5))
    w = np.linalg.eigvalsh(hb.to_sparse().toarray())
    shift = 0.5 * (w[11] + w[12])
    assert count_below(hb, shift).count == 12


