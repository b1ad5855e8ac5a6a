"""Reduced densities of two-electron levels (core.pair_density) against the closed-form Taut state.

Dimensionless units (hbar = m = |q| = 1), parabolic dot omega = 1, repulsion kappa / r with
kappa = 1: the lowest singlet is exactly psi = exp(-omega R^2) (1 + kappa r) exp(-omega r^2 / 4)
with R = (r1 + r2) / 2 (centre of mass, mass 2) and r = |r1 - r2| (relative motion, m = 0)
(M. Taut, J. Phys. A 27, 1045 (1994), 2D case; the separation: U. Merkt, J. Huser, M. Wagner,
Phys. Rev. B 43, 7320 (1991)).  The reference moments are integrated with scipy's quad.
"""
import numpy as np
import pytest
from scipy.integrate import quad

from core import two_electron as te
from core.errors import InputError
from core.grid import Grid
from core.pair_density import conditional_density, one_electron_density
from core.solve import solve_states

GRID = Grid([-7.0, -7.0], [7.0, 7.0], [41, 41])        # spacing 1/3; the point (0, 0) is on the grid
CENTRE = (20, 20)


@pytest.fixture(scope="module")
def dot():
    sp = solve_states(GRID, lambda x, y: 0.5 * (x**2 + y**2), states=45, scheme="spectral")
    result = te.two_electron_levels(GRID, sp.energies, sp.states, strength=1.0, groups=sp.groups, tolerance=1e-3)
    return sp, result


def _radial_mean(f, power):
    """<r^power> of a 2D radial density f(r) (area element 2 pi r dr, the 2 pi cancels)."""
    num = quad(lambda r: r**power * f(r) * r, 0.0, np.inf)[0]
    return num / quad(lambda r: f(r) * r, 0.0, np.inf)[0]


def test_one_electron_density_of_the_taut_singlet(dot):
    """<r1^2> = <R^2> + <r^2> / 4 (the cross term vanishes by symmetry); <R^2> = 1 / (2 omega) for the
    centre of mass (mass 2, two axes), <r^2> from the relative factor (1 + r)^2 exp(-r^2 / 2) by quad.
    The configuration-interaction singlet with 45 orbitals is 0.3 % high in energy; its second
    moment is allowed 1 %.  The density integrates to 1 on the grid (to rounding)."""
    sp, result = dot
    assert result.spin[0] == "singlet"
    rho = one_electron_density(result, sp.states, GRID, level=0)
    assert rho.sum() * GRID.volume_element == pytest.approx(1.0, rel=1e-12)
    x, y = np.meshgrid(*GRID.axes, indexing="ij")
    r1_sq = float(np.sum((x**2 + y**2) * rho) * GRID.volume_element)
    expected = 0.5 + 0.25 * _radial_mean(lambda r: (1 + r) ** 2 * np.exp(-(r**2) / 2), 2)
    assert r1_sq == pytest.approx(expected, rel=1e-2)


def test_conditional_density_with_one_electron_at_the_centre(dot):
    """With electron 2 at the origin, psi(r, 0) = exp(-omega r^2 / 4) (1 + r) exp(-omega r^2 / 4): the
    other electron's density is (1 + r)^2 exp(-r^2) / norm.  Its mean distance from the origin <r>
    is compared with quad to 2 %, the whole density in the L1 norm to 0.06 (measured 0.033 with 45
    orbitals).  At the coalescence point itself the orbital expansion converges slowly (the cusp):
    measured 1.62, 1.53, 1.47 times the exact value with 28, 45, 66 orbitals, so that point is only
    required to lie above the exact value."""
    sp, result = dot
    rho = conditional_density(result, sp.states, GRID, CENTRE, level=0)
    assert rho.sum() * GRID.volume_element == pytest.approx(1.0, rel=1e-12)
    x, y = np.meshgrid(*GRID.axes, indexing="ij")
    mean_r = float(np.sum(np.hypot(x, y) * rho) * GRID.volume_element)
    f = lambda r: (1 + r) ** 2 * np.exp(-(r**2))     # noqa: E731
    assert mean_r == pytest.approx(_radial_mean(f, 1), rel=2e-2)
    norm = 2 * np.pi * quad(lambda r: f(r) * r, 0.0, np.inf)[0]
    reference = f(np.hypot(x, y)) / norm
    assert float(np.sum(np.abs(rho - reference)) * GRID.volume_element) < 0.06
    assert rho[CENTRE] > reference[CENTRE]


def test_triplet_has_an_exchange_hole(dot):
    """A triplet's spatial wavefunction is antisymmetric, so the other electron is never at the fixed
    one's point (the Pauli principle; common practice)."""
    sp, result = dot
    k = result.spin.index("triplet")
    where = (24, 20)                                  # off-centre, where the triplet has weight
    rho = conditional_density(result, sp.states, GRID, where, level=k)
    assert rho[where] < 1e-12 * rho.max()
    assert np.all(rho >= 0) and rho.sum() * GRID.volume_element == pytest.approx(1.0, rel=1e-12)


def test_bad_requests_are_refused(dot):
    sp, result = dot
    with pytest.raises(InputError, match="does not exist"):
        one_electron_density(result, sp.states, GRID, level=99)
    with pytest.raises(InputError, match="not on the"):
        conditional_density(result, sp.states, GRID, (50, 0))
    with pytest.raises(InputError, match="only 3 were given"):
        one_electron_density(result, sp.states[:3], GRID)
    with pytest.raises(InputError, match="never at that point"):
        conditional_density(result, sp.states, GRID, (0, 0))      # the corner, outside the dot
