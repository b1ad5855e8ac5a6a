"""Where two electrons are: the one-electron density and the conditional density of a two-electron level.

A level of :class:`core.two_electron.TwoElectronResult` is psi(r1, r2) = sum_ab C_ab phi_a(r1) phi_b(r2)
in the orbitals phi (orthonormal on the grid, sum |phi|^2 dV = 1) with sum |C_ab|^2 = 1.  Then

- the probability density of finding an electron at r, the other anywhere:
  rho(r) = int |psi(r, r2)|^2 dr2 = sum_aa' phi_a(r) (C C^H)_aa' phi_a'(r)*  (integrates to 1;
  the electron density is 2 rho);
- the conditional density with the other electron fixed at r0:
  |psi(r, r0)|^2 / int |psi(r, r0)|^2 dr, with psi(r, r0) = sum_a phi_a(r) w_a, w = C phi(r0).

Both are the usual reduced densities of a two-particle wavefunction (common practice; e.g.
P.-O. Lowdin, Phys. Rev. 97, 1474 (1955) for the reduced density matrix).  For a triplet the
conditional density vanishes at r = r0 (the exchange hole).

Accuracy: the orbital expansion converges slowly where the two electrons meet (the cusp of the
exact wavefunction at r1 = r2).  Measured on a parabolic dot with l0 / a_B = 1 (Taut's closed-form
singlet): the conditional density is within 6 % of the exact one from one grid spacing away from
the fixed electron on, but 1.62, 1.53, 1.47 times too high at the fixed electron's own point with 28,
45, 66 orbitals; the one-electron density's second moment is within 1 % with 45.
"""
from __future__ import annotations

import numpy as np

from .errors import InputError

__all__ = ["one_electron_density", "conditional_density"]


def _amplitudes(result, orbitals, level: int) -> tuple:
    if not result.coefficients:
        raise InputError("these two-electron levels carry no pair amplitudes (a partial or cancelled result)")
    if not 0 <= level < len(result.coefficients):
        raise InputError(f"two-electron level {level} does not exist (0..{len(result.coefficients) - 1})")
    c = result.coefficients[level]
    phi = np.asarray(orbitals)
    n = c.shape[0]
    if phi.shape[0] < n:
        raise InputError(f"the level was computed with {n} orbitals, but only {phi.shape[0]} were given")
    return c, phi[:n]


def one_electron_density(result, orbitals, grid, level: int = 0) -> np.ndarray:
    """rho(r) of two-electron level ``level`` on the grid (1 / length^d; sum rho dV = 1)."""
    c, phi = _amplitudes(result, orbitals, level)
    flat = phi.reshape(phi.shape[0], -1)
    d = c @ c.conj().T                                  # one-particle density matrix (trace 1)
    rho = np.einsum("ap,ab,bp->p", flat, d, flat.conj(), optimize=True).real
    rho = np.clip(rho, 0.0, None).reshape(phi.shape[1:])
    return rho / (rho.sum() * grid.volume_element)


def conditional_density(result, orbitals, grid, where: tuple, level: int = 0) -> np.ndarray:
    """Density of one electron with the other fixed at the grid point ``where`` (an index tuple),
    normalised to 1; raises InputError where the level has (numerically) no weight at that point."""
    c, phi = _amplitudes(result, orbitals, level)
    idx = tuple(int(k) for k in where)
    if len(idx) != grid.ndim or any(not 0 <= k < s for k, s in zip(idx, grid.shape)):
        raise InputError(f"the fixed electron's point {where} is not on the {grid.describe()}")
    # psi(r1 = r, r2 = r0) = sum_ab C_ab phi_a(r) phi_b(r0): the amplitude on phi_a is (C phi(r0))_a
    w = c @ phi[(slice(None),) + idx]
    rho = np.abs(np.tensordot(w, phi, axes=(0, 0))) ** 2
    total = rho.sum() * grid.volume_element          # = rho_1(r0), the density at the fixed point
    if not total > 1e-8 * float(one_electron_density(result, orbitals, grid, level).max()):
        raise InputError("the other electron is (numerically) never at that point in this level; pick a point "
                         "where the density is not negligible")
    return rho / total
