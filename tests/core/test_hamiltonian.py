"""Kinetic schemes and the assembled Hamiltonian.

Convergence orders are measured on the 1D harmonic oscillator, whose levels
hbar*omega*(n + 1/2) are exact (any QM text, e.g. Griffiths, Introduction to
Quantum Mechanics, 2nd ed. (2005), sec. 2.3).  The finite-difference
coefficients are the centred weights of B. Fornberg, Math. Comp. 51, 699
(1988); the spectral scheme is the sinc-DVR of D. T. Colbert and
W. H. Miller, J. Chem. Phys. 96, 1982 (1992).
"""
from __future__ import annotations

import ast
import math
import pathlib

import numpy as np
import pytest
import scipy.linalg as sla

from core import Grid, solve_states
from core.errors import InputError
from core.hamiltonian import build_hamiltonian
from core.kinetic import kinetic_matrix_1d
from core.solve import choose_scheme


def oscillator_error(scheme, n, level=2, half_width=8.0):
    g = Grid([-half_width], [half_width], [n])
    x = g.axes[0]
    h = build_hamiltonian(g, 0.5 * x**2, scheme=scheme)
    w = np.linalg.eigvalsh(h.to_sparse().toarray())
    return abs(w[level] - (level + 0.5))


@pytest.mark.parametrize("scheme,expected,tol", [("fd2", 2.0, 0.1), ("fd4", 4.0, 0.3), ("fd6", 6.0, 0.5)])
def test_measured_convergence_order(scheme, expected, tol):
    """Error ~ h^p: halving h divides the error by 2^p (p = 2, 4, 6 for the centred stencils)."""
    e1 = oscillator_error(scheme, 79)
    e2 = oscillator_error(scheme, 159)
    order = math.log2(e1 / e2)
    assert abs(order - expected) < tol, order


def test_spectral_converges_faster_than_any_power():
    """Sinc-DVR on a smooth potential: each refinement gains far more than a fixed power would
    (Colbert & Miller 1992); the error reaches round-off."""
    errs = [oscillator_error("spectral", n, half_width=7.0) for n in (20, 28, 36, 44)]
    # from 20 to 28 points an order-8 scheme would gain (28/20)^8 ~ 15; spectral gains > 1e3
    assert errs[0] / errs[1] > 1e3
    assert errs[-1] < 1e-11


def test_box_eigenvalues_of_each_scheme():
    """Hard-wall box [0, L]: exact levels (n pi / L)^2 / 2 (Griffiths 2005, sec. 2.2). The odd-image
    closure keeps the sine modes exact eigenvectors, so every scheme converges at its full order."""
    for scheme, n, rtol in [("fd2", 400, 1e-4), ("fd4", 200, 1e-7), ("fd8", 100, 1e-10), ("spectral", 30, 1e-12)]:
        t = kinetic_matrix_1d(scheme, n, 1.0 / (n + 1), False)
        w = 0.5 * np.linalg.eigvalsh(t)[:3]
        np.testing.assert_allclose(w, 0.5 * (np.pi * np.arange(1, 4)) ** 2, rtol=rtol)


def test_fd2_matrix_matches_tridiagonal_reference():
    """The FD2 matrix is the standard tridiagonal (2, -1)/h^2: compare eigenvalues with
    scipy.linalg.eigh_tridiagonal to machine precision."""
    n, h = 50, 0.1
    t = kinetic_matrix_1d("fd2", n, h, False)
    ref = sla.eigh_tridiagonal(np.full(n, 2 / h**2), np.full(n - 1, -1 / h**2), eigvals_only=True)
    np.testing.assert_allclose(np.linalg.eigvalsh(t), ref, rtol=1e-13)


def test_periodic_fourier_grid_is_exact_for_plane_waves():
    """Periodic spectral matrix: eigenvalues k^2 with k = 2 pi j / period (|j| <= n/2), exactly."""
    n, period = 16, 3.0
    t = kinetic_matrix_1d("spectral", n, period / n, True)
    k = 2 * np.pi * np.fft.fftfreq(n, d=period / n)
    np.testing.assert_allclose(np.sort(np.linalg.eigvalsh(t)), np.sort(k**2), atol=1e-10)


@pytest.mark.parametrize("scheme", ["fd2", "fd4", "fd8", "spectral"])
@pytest.mark.parametrize("ndim", [1, 2, 3])
def test_matrix_free_apply_equals_sparse_matrix(scheme, ndim):
    """apply(block) must equal the assembled scipy.sparse matrix times each vector (round-off)."""
    rng = np.random.default_rng(ndim)
    pts = [14, 11, 9][:ndim]
    bnd = ["hard-wall", "periodic", "hard-wall"][:ndim]
    if scheme == "fd8":
        bnd = ["hard-wall"] * ndim
    g = Grid([-2] * ndim, [2] * ndim, pts, bnd)
    v = rng.normal(size=g.shape)
    h = build_hamiltonian(g, v, mass=[1.0, 0.3, 2.0][:ndim], scheme=scheme)
    x = rng.normal(size=(3,) + g.shape)
    y = h.apply(x)
    a = h.to_sparse()
    ref = (a @ x.reshape(3, -1).T).T.reshape(x.shape)
    np.testing.assert_allclose(y, ref, atol=1e-11 * np.abs(ref).max())
    assert abs(a - a.T).max() < 1e-12
    np.testing.assert_allclose(h.diagonal().ravel(), a.diagonal(), rtol=1e-13)


def test_bounds_contain_the_spectrum():
    """Weyl's inequality: lambda(A + B) lies within [min A + min B, max A + max B] (R. A. Horn, C. R. Johnson,
    Matrix Analysis, CUP 1985, thm 4.3.1)."""
    g = Grid([0, 0], [1, 2], [12, 15])
    v = np.random.default_rng(3).normal(size=g.shape)
    for scheme in ("fd2", "fd4", "spectral"):
        h = build_hamiltonian(g, v, scheme=scheme)
        w = np.linalg.eigvalsh(h.to_sparse().toarray())
        lo, hi = h.bounds()
        assert lo <= w[0] + 1e-9 and w[-1] <= hi + 1e-9


def test_auto_scheme_picks_by_smoothness():
    """A smooth trap gets the spectral scheme; a potential with a band-offset step gets FD2
    (common practice: steps spoil high-order convergence)."""
    g = Grid([-10, -10], [10, 10], [60, 60])
    x, y = g.mesh_sparse()
    smooth = 0.5 * (x**2 + y**2) + 0 * y
    step = np.where(x**2 + y**2 < 25, 0.0, 100.0)
    assert choose_scheme(g, smooth)[0] == "spectral"
    assert choose_scheme(g, step)[0] == "fd2"
    r = solve_states(g, step, states=2)
    assert r.scheme == "fd2" and "step" in r.extra["scheme_reason"]


def test_unknown_scheme_is_refused():
    g = Grid([0], [1], [10])
    with pytest.raises(InputError, match="scheme"):
        build_hamiltonian(g, np.zeros(10), scheme="fd3")


def test_core_never_imports_qt():
    """core/ stays a plain library: no PySide6, pyqtgraph or app imports (static check of every module)."""
    root = pathlib.Path(__file__).resolve().parents[2] / "core"
    banned = ("PySide6", "pyqtgraph", "app", "PyQt5", "PyQt6")
    for path in root.glob("*.py"):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            names = []
            if isinstance(node, ast.Import):
                names = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom) and node.level == 0:
                names = [node.module or ""]
            for name in names:
                assert name.split(".")[0] not in banned, f"{path.name} imports {name}"
