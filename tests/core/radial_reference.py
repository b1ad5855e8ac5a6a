"""Reference energies of two electrons in a 2D parabolic dot, from the relative-motion radial equation.

In a parabolic dot the centre of mass (mass 2m, charge 2q) and the relative coordinate
r = r1 - r2 (reduced mass m/2, charge q/2) separate exactly, both with the same cyclotron frequency
wc = |q| B / m and the same Omega = sqrt(w0^2 + wc^2/4)
(U. Merkt, J. Huser, M. Wagner, Phys. Rev. B 43, 7320 (1991); M. Wagner, U. Merkt, A. V. Chaplik,
Phys. Rev. B 45, 1951 (1992)).  Units hbar = m = 1:

  E = E_cm + E_rel,   E_cm = (2N + |M| + 1) Omega + (M/2) wc  (lowest: Omega),
  E_rel = eps_{n,m} + (m/2) wc,  with eps from
  -(1/r)(r R')' + m^2/r^2 R + (Omega^2 r^2/4 + kappa/r) R = eps R      (hbar^2/(2 mu) = 1),

kappa = 1/eps_r the repulsion strength.  The spatial state is symmetric under r -> -r for even m
(singlet) and antisymmetric for odd m (triplet).  The sign of the (m/2) wc term follows
REFERENCES.md (the l < 0 branch is lowered).

The radial equation is discretised with cell-centred second-order differences in the symmetric
(flux) form, r_i = (i - 1/2) h, which needs no condition at r = 0; the weighted problem is made a
symmetric tridiagonal one and solved with ``scipy.linalg.eigh_tridiagonal``, on two spacings
combined by Richardson extrapolation (L. F. Richardson, Phil. Trans. R. Soc. A 210, 307 (1911)).
"""
from __future__ import annotations

import numpy as np
from scipy.linalg import eigh_tridiagonal


def _radial_levels(m: int, omega: float, kappa: float, points: int, r_max: float, count: int) -> np.ndarray:
    h = r_max / points
    r = (np.arange(1, points + 1) - 0.5) * h
    r_out = r + 0.5 * h
    r_in = r - 0.5 * h
    diag = (r_out + r_in) / h**2 + r * (m * m / r**2 + 0.25 * omega**2 * r**2 + kappa / r)
    off = -r_out[:-1] / h**2
    d = diag / r
    e = off / np.sqrt(r[:-1] * r[1:])
    return eigh_tridiagonal(d, e, eigvals_only=True, select="i", select_range=(0, count - 1))


def relative_energy(m: int, omega: float, kappa: float, *, n: int = 0, points: int = 8000) -> float:
    """eps_{n,m}: the n-th relative-motion level with angular momentum |m| (frequency omega), Richardson
    extrapolated from ``points`` and 2 * ``points`` cells (second order, so (4 e_fine - e_coarse) / 3)."""
    r_max = 12.0 / np.sqrt(omega) * np.sqrt(2.0) + 4.0 * (n + 1)
    coarse = _radial_levels(abs(m), omega, kappa, points, r_max, n + 1)[n]
    fine = _radial_levels(abs(m), omega, kappa, 2 * points, r_max, n + 1)[n]
    return float((4.0 * fine - coarse) / 3.0)


def two_electron_energy(m: int, omega0: float, kappa: float, b: float = 0.0) -> float:
    """Lowest two-electron energy with relative angular momentum m (centre of mass in its ground
    state), in a field with wc = b (hbar = m = |q| = 1)."""
    big_omega = np.sqrt(omega0**2 + 0.25 * b**2)
    return big_omega + relative_energy(m, big_omega, kappa) + 0.5 * m * b
