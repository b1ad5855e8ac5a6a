"""The compiled Chebyshev step against a matrix assembled here with scipy.sparse.

Reference: the second-order difference operator -d^2/dx^2 ~ (-u[i-1] + 2u[i] - u[i+1]) / h^2
(centred weights, B. Fornberg, Math. Comp. 51, 699 (1988)) with a zero wall value (hard wall) or
wrap-around (periodic), summed over the axes as a Kronecker sum and assembled with
``scipy.sparse.diags`` and ``scipy.sparse.kron``, independently of ``core.kinetic`` and
``Hamiltonian.to_sparse``.  Both sides evaluate the same sums in floating point, so they agree
to rounding: a few ulps of the largest term, |coefficient| * max|x| ~ 4/h^2 * 5.
"""
from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp

from core import Grid
from core.hamiltonian import build_hamiltonian


def reference_fd2(grid: Grid, potential: np.ndarray, prefactor: float) -> sp.csr_matrix:
    """H = sum_a I (x) prefactor * D2_a (x) I + diag(V), D2 the three-point -d^2/dx^2."""
    total = sp.diags(potential.ravel())
    for a, (n, h, periodic) in enumerate(zip(grid.shape, grid.spacing, grid.periodic)):
        d2 = sp.diags([-np.ones(n - 1), 2 * np.ones(n), -np.ones(n - 1)], [-1, 0, 1], format="lil")
        if periodic:
            d2[0, n - 1] = d2[n - 1, 0] = -1.0
        d2 = sp.csr_matrix(d2) * (prefactor / h**2)
        left = sp.identity(int(np.prod(grid.shape[:a])))
        right = sp.identity(int(np.prod(grid.shape[a + 1:])))
        total = total + sp.kron(sp.kron(left, d2), right)
    return sp.csr_matrix(total)


CASES = [
    ((9,), "hard-wall"),
    ((10,), "periodic"),
    ((12, 7), "hard-wall"),
    ((8, 9), "periodic"),
    ((13, 6), ["hard-wall", "periodic"]),     # a line count that is not a multiple of the lines per task
    ((7, 10), ["periodic", "hard-wall"]),
    ((6, 5, 7), "hard-wall"),
    ((6, 5, 6), ["periodic", "hard-wall", "periodic"]),
    ((3, 3, 3), "hard-wall"),
]


@pytest.mark.parametrize("shape,boundary", CASES)
def test_fused_nearest_neighbour_step_matches_assembled_matrix(shape, boundary):
    """Y = alpha (H - shift) X + beta Z, and the plain apply (beta = 0), on hard-wall and periodic axes."""
    rng = np.random.default_rng(7)
    g = Grid([0.0] * len(shape), [1.0] * len(shape), list(shape), boundary=boundary)
    v = rng.standard_normal(shape)
    h = build_hamiltonian(g, v, scheme="fd2")            # dimensionless units: prefactor hbar^2/2m = 1/2
    a = reference_fd2(g, v, 0.5)
    m = 3
    x = rng.standard_normal((m,) + shape)
    z = rng.standard_normal((m,) + shape)
    y = np.empty_like(x)
    alpha, shift, beta = 0.7, 0.3, -0.4
    h.step(x, y, alpha=alpha, shift=shift, beta=beta, z=z)
    xf = x.reshape(m, -1)
    expected = alpha * ((a @ xf.T).T - shift * xf) + beta * z.reshape(m, -1)
    scale = 4.0 * max(1.0 / s**2 for s in g.spacing) * np.abs(x).max()
    np.testing.assert_allclose(y.reshape(m, -1), expected, rtol=0, atol=1e-14 * scale)
    np.testing.assert_allclose(h.apply(x).reshape(m, -1), (a @ xf.T).T, rtol=0, atol=1e-14 * scale)
