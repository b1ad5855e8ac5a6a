"""One-dimensional kinetic-energy matrices, -d^2/dx^2 on a uniform grid.

Every function returns the matrix of ``-d^2/dx^2`` (without the prefactor
hbar^2/2m) for one axis of a :class:`core.grid.Grid`.  The full kinetic
operator is the Kronecker sum of these, each times its own prefactor.

Schemes:

``fd2``, ``fd4``, ``fd6``, ``fd8``
    Central finite differences of order 2, 4, 6, 8 (standard centred
    coefficients, e.g. B. Fornberg, Math. Comp. 51, 699 (1988)).  At a hard
    wall the stencil is closed with odd images (psi(-x) = -psi(x) about the
    wall), which keeps the matrix symmetric and makes the box's sine modes
    exact eigenvectors with the scheme's own dispersion.
``spectral``
    Sinc discrete-variable representation: D. T. Colbert and W. H. Miller,
    J. Chem. Phys. 96, 1982 (1992), in its finite-interval (hard-wall) form;
    for a periodic axis the Fourier-grid matrix, which is the periodic form of
    the same construction.
"""
from __future__ import annotations

import numpy as np

from .errors import InputError

__all__ = ["FD_COEFFICIENTS", "SCHEMES", "scheme_order", "stencil", "kinetic_matrix_1d"]

#: Coefficients c_0..c_r of -f'' ~ (c_0 f_i + sum_s c_s (f_{i+s} + f_{i-s})) / h^2
#: (negated centred second-derivative weights, Fornberg, Math. Comp. 51, 699 (1988)).
FD_COEFFICIENTS = {
    "fd2": (2.0, -1.0),
    "fd4": (5.0 / 2.0, -4.0 / 3.0, 1.0 / 12.0),
    "fd6": (49.0 / 18.0, -3.0 / 2.0, 3.0 / 20.0, -1.0 / 90.0),
    "fd8": (205.0 / 72.0, -8.0 / 5.0, 1.0 / 5.0, -8.0 / 315.0, 1.0 / 560.0),
}
SCHEMES = ("fd2", "fd4", "fd6", "fd8", "spectral")


def scheme_order(scheme: str) -> float:
    """Formal order of accuracy in the spacing (inf for the spectral scheme)."""
    if scheme == "spectral":
        return float("inf")
    return float(scheme[2:])


def check_scheme(scheme: str) -> str:
    if scheme not in SCHEMES:
        raise InputError(f"unknown kinetic scheme {scheme!r}; choose one of {', '.join(SCHEMES)} or 'auto'")
    return scheme


def stencil(scheme: str, spacing: float) -> np.ndarray:
    """Stencil coefficients c_0..c_r divided by spacing^2."""
    return np.asarray(FD_COEFFICIENTS[check_scheme(scheme)], dtype=float) / spacing**2


def _fd_matrix(n: int, coeffs: np.ndarray, periodic: bool) -> np.ndarray:
    r = len(coeffs) - 1
    mat = np.zeros((n, n))
    idx = np.arange(n)
    mat[idx, idx] = coeffs[0]
    for s in range(1, r + 1):
        c = coeffs[s]
        for i in range(n):
            for j in (i + s, i - s):
                if periodic:
                    mat[i, j % n] += c
                elif 0 <= j < n:
                    mat[i, j] += c
                elif j < -1:                 # odd image about the wall at index -1
                    mat[i, -2 - j] -= c
                elif j > n:                  # odd image about the wall at index n
                    mat[i, 2 * n - j] -= c
    return mat


def _sinc_dvr_box(n: int, length: float) -> np.ndarray:
    """Colbert & Miller (1992), finite interval (a, b) with N = n+1 intervals, points i = 1..n."""
    big_n = n + 1
    i = np.arange(1, n + 1)
    ii, jj = np.meshgrid(i, i, indexing="ij")
    pref = np.pi**2 / (2.0 * length**2)
    with np.errstate(divide="ignore", invalid="ignore"):
        off = (-1.0) ** (ii - jj) * (1.0 / np.sin(np.pi * (ii - jj) / (2 * big_n)) ** 2
                                     - 1.0 / np.sin(np.pi * (ii + jj) / (2 * big_n)) ** 2)
    diag = (2 * big_n**2 + 1) / 3.0 - 1.0 / np.sin(np.pi * i / big_n) ** 2
    mat = np.where(ii == jj, 0.0, off)
    mat[np.arange(n), np.arange(n)] = diag
    return pref * mat


def _fourier_grid(n: int, period: float) -> np.ndarray:
    """Periodic Fourier-grid matrix of -d^2/dx^2: F^-1 diag(k^2) F (Nyquist mode kept real)."""
    k = 2.0 * np.pi * np.fft.fftfreq(n, d=period / n)
    eye = np.eye(n)
    mat = np.fft.ifft(k[:, None] ** 2 * np.fft.fft(eye, axis=0), axis=0).real
    return 0.5 * (mat + mat.T)


def kinetic_matrix_1d(scheme: str, n: int, spacing: float, periodic: bool) -> np.ndarray:
    """Dense n x n matrix of -d^2/dx^2 for one axis."""
    check_scheme(scheme)
    if scheme == "spectral":
        if periodic:
            return _fourier_grid(n, n * spacing)
        return _sinc_dvr_box(n, (n + 1) * spacing)
    coeffs = stencil(scheme, spacing)
    if not periodic and len(coeffs) - 1 > n:
        raise InputError(f"{scheme} needs at least {len(coeffs) - 1} points per axis")
    if periodic and 2 * (len(coeffs) - 1) >= n:
        raise InputError(f"{scheme} on a periodic axis needs more than {2 * (len(coeffs) - 1)} points")
    return _fd_matrix(n, coeffs, periodic)
