"""Linear Rashba and Dresselhaus spin-orbit coupling on a 2D grid, as SU(2) link phases (assembled).

For electrons in a [001] quantum well (plane x, y), with k = -i grad:

    H = hbar^2 k^2 / 2m + V + alpha (sigma_x k_y - sigma_y k_x) + beta (sigma_x k_x - sigma_y k_y)
        + (g mu_B / 2) B . sigma

(alpha: Rashba, beta: linear Dresselhaus, both energy * length, e.g. meV nm).  The spin-orbit
terms are a constant SU(2) vector potential: with a_x = (beta sigma_x - alpha sigma_y) m / hbar^2,
a_y = (alpha sigma_x - beta sigma_y) m / hbar^2,

    H = sum_a (hbar^2 / 2m) (k_a + a_a)^2 - m (alpha^2 + beta^2) / hbar^2 + V + Zeeman,

which is discretised gauge-covariantly by putting U_a = exp(i h_a a_a) (an SU(2) matrix, since
a_a^2 is a multiple of the identity) on every hop along axis a, times the hop's Peierls phase for an
orbital field (R. Peierls, Z. Phys. 80, 763 (1933)), exactly as in :mod:`core.hamiltonian`.  The
matrix is Hermitian by construction and time-reversal symmetric at B = 0 (Kramers pairs).  For
alpha = beta the two components of a commute and the coupling is a pure gauge, on the grid as in the
continuum (J. Schliemann, J. C. Egues, D. Loss, Phys. Rev. Lett. 90, 146801 (2003)): every spin-free
level is doubled and shifted by -2 m alpha^2 / hbar^2.

This module assembles the 2N x 2N matrix (spin-major order: all points with spin up along z, then
spin down) for scipy's solvers; the project file, the window and the fast eigensolver do not use it yet.
"""
from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from .errors import InputError
from .grid import Grid
from .hamiltonian import build_hamiltonian
from .units import get_units

__all__ = ["spinor_hamiltonian", "spin_expectations", "PAULI"]

PAULI = (np.array([[0, 1], [1, 0]], dtype=complex), np.array([[0, -1j], [1j, 0]]),
         np.array([[1, 0], [0, -1]], dtype=complex))


def _su2(h: float, matrix: np.ndarray) -> np.ndarray:
    """exp(i h M) for a Hermitian 2x2 M with M^2 = |m|^2 I: cos(h|m|) I + i sin(h|m|) M / |m|."""
    norm = float(np.sqrt(np.real(np.trace(matrix @ matrix)) / 2.0))
    if norm == 0.0:
        return np.eye(2, dtype=complex)
    return np.cos(h * norm) * np.eye(2) + 1j * np.sin(h * norm) * matrix / norm


def spinor_hamiltonian(grid: Grid, potential, *, mass: float, units="semiconductor", rashba: float = 0.0,
                       dresselhaus: float = 0.0, magnetic_field=None, g_factor=None,
                       gauge: str = "symmetric", gauge_centre=None) -> sp.csr_matrix:
    """The spinor Hamiltonian (2N x 2N CSR, energy unit) on a 2D hard-wall grid.

    ``mass`` in the mass unit; ``rashba``, ``dresselhaus`` in energy unit * length unit;
    ``magnetic_field`` (Bx, By, Bz) in the magnetic unit: Bz couples to the orbital motion (Peierls
    phases), all three to the spin through ``g_factor`` (required when the field is nonzero).
    """
    if grid.ndim != 2 or any(grid.periodic):
        raise InputError("spin-orbit coupling needs a 2D grid (the plane of a [001] well) with hard walls")
    for name, value in (("rashba", rashba), ("dresselhaus", dresselhaus)):
        if not np.isfinite(value):
            raise InputError(f"{name} must be a finite number (energy unit * length unit), got {value!r}")
    u = get_units(units)
    b = np.zeros(3) if magnetic_field is None else np.resize(np.asarray(magnetic_field, dtype=float), 3)
    h0 = build_hamiltonian(grid, potential, mass=mass, units=u, scheme="fd2",
                           magnetic_field=b if np.any(b) else None, gauge=gauge, gauge_centre=gauge_centre)
    c = u.kinetic_prefactor(float(mass))              # hbar^2 / 2m
    sx, sy, sz = PAULI
    a_vec = ((dresselhaus * sx - rashba * sy) / (2 * c), (rashba * sx - dresselhaus * sy) / (2 * c))
    n = grid.size
    flat = np.arange(n).reshape(grid.shape)
    diag = h0.diagonal().ravel() - (rashba ** 2 + dresselhaus ** 2) / (2 * c)
    total = sp.kron(sp.identity(2), sp.diags(diag), format="csr")
    for a in range(2):
        t = c / grid.spacing[a] ** 2
        here = np.take(flat, np.arange(grid.shape[a] - 1), axis=a).ravel()
        there = np.take(flat, np.arange(1, grid.shape[a]), axis=a).ravel()
        amp = np.full(here.size, -t, dtype=complex)
        if h0.phases is not None:
            p = np.broadcast_to(h0.phases[a], grid.shape).ravel()
            amp = amp * p[here] * np.conj(p[there])
        forward = sp.csr_matrix((amp, (here, there)), shape=(n, n))
        link = sp.kron(sp.csr_matrix(_su2(grid.spacing[a], a_vec[a])), forward, format="csr")
        total = total + link + link.getH()
    if np.any(b):
        if g_factor is None:
            raise InputError("a magnetic field acts on the spin through the g-factor; give g_factor")
        zeeman = 0.5 * float(g_factor) * u.bohr_magneton() * (b[0] * sx + b[1] * sy + b[2] * sz)
        total = total + sp.kron(sp.csr_matrix(zeeman), sp.identity(n), format="csr")
    return total.tocsr()


def spin_expectations(vectors: np.ndarray) -> np.ndarray:
    """<sigma_x>, <sigma_y>, <sigma_z> of each column of ``vectors`` (2N x k, spin-major), shape (k, 3)."""
    v = np.asarray(vectors)
    n = v.shape[0] // 2
    up, down = v[:n], v[n:]
    norm = np.sum(np.abs(up) ** 2 + np.abs(down) ** 2, axis=0)
    cross = np.sum(np.conj(up) * down, axis=0)
    return np.stack([2 * cross.real, 2 * cross.imag, np.sum(np.abs(up) ** 2 - np.abs(down) ** 2, axis=0)],
                    axis=1) / norm[:, None]
