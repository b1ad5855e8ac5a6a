"""Coulomb integrals of grid orbitals (core.coulomb) against analytic values."""
import numpy as np
import pytest
from scipy import constants as sc
from scipy import integrate
from scipy.special import zeta

from core.coulomb import coulomb_constant, coulomb_tensor, singular_weight
from core.errors import InputError
from core.grid import Grid


def test_singular_weight_is_the_square_lattice_sum():
    """The corrected-trapezoid weight of 1/|r| on a square lattice is minus the analytically continued
    lattice sum sum'_{n in Z^2} 1/|n| = 4 zeta(1/2) beta(1/2) (the two-squares identity
    sum' (m^2 + n^2)^-s = 4 zeta(s) beta(s), L. Lorenz 1871 / G. H. Hardy 1919; see M. L. Glasser,
    I. J. Zucker, in Theoretical Chemistry: Advances and Perspectives 5, 67 (1980) [recalled from memory]).
    zeta(1/2) from scipy.special; beta(1/2) = pi^-1/2 int_0^inf du / cosh(u^2) with scipy quad.
    Our weight comes from Gaussians extrapolated in width, so it should agree to about 1e-7."""
    beta_half = integrate.quad(lambda u: 2.0 * np.exp(-u * u) / (1.0 + np.exp(-2.0 * u * u)), 0.0, np.inf,
                               epsabs=0, epsrel=1e-13)[0] / np.sqrt(np.pi)
    expected = -4.0 * zeta(0.5) * beta_half
    assert singular_weight([0.5, 0.5]) * 0.5 == pytest.approx(expected, rel=1e-6)
    assert singular_weight([1.0, 1.0]) == pytest.approx(3.9002649, abs=2e-7)


def test_singular_weight_cubic_lattice():
    """Simple cubic lattice: -sum'_{n in Z^3} 1/|n| (continued) = 2.8372974794 (Glasser & Zucker 1980
    [recalled from memory]); narrower Gaussians are used in 3D, so 1e-5 relative."""
    assert singular_weight([1.0, 1.0, 1.0]) == pytest.approx(2.8372974794, rel=1e-5)


def test_oscillator_direct_integral_third_order():
    """<00|1/r|00> of the 2D oscillator ground state (l0 = 1) is sqrt(pi/2): the difference r1 - r2 of two
    Gaussian electrons is Gaussian with unit variance per axis, and <1/r> = sqrt(pi/2)/sigma
    (common practice; checked here with scipy quad of the radial integral).  The quadrature is third
    order in the spacing: measured 7.0e-4 and 9.2e-5 relative at 32 and 64 points, so the tolerances
    1.2e-3 and 1.6e-4 leave room, and the error ratio must show an order near 3."""
    exact = integrate.quad(lambda r: np.exp(-r * r / 2.0), 0.0, np.inf)[0]
    assert exact == pytest.approx(np.sqrt(np.pi / 2.0), rel=1e-12)
    errors = []
    for n in (32, 64):
        g = Grid([-6.0, -6.0], [6.0, 6.0], [n, n])
        x, y = g.mesh()
        phi = np.exp(-(x**2 + y**2) / 2.0)
        phi /= np.sqrt((phi**2).sum() * g.volume_element)
        v = coulomb_tensor(g, phi[None], 1.0)
        errors.append(abs(v[0, 0, 0, 0] / exact - 1.0))
    assert errors[0] < 1.2e-3 and errors[1] < 1.6e-4
    order = np.log(errors[0] / errors[1]) / np.log((12.0 / 33.0) / (12.0 / 65.0))
    assert 2.5 < order < 3.5


def test_tensor_symmetries_complex_orbitals():
    """<ab|V|cd> = <ba|V|dc> (relabelling the electrons) and <ab|V|cd> = conj(<cd|V|ab>) (Hermitian)
    for complex orbitals (common practice)."""
    g = Grid([-4.0, -4.0], [4.0, 4.0], [20, 20])
    x, y = g.mesh()
    rng = np.random.default_rng(3)
    phi = np.stack([np.exp(-(x - a)**2 - (y - b)**2) * np.exp(1j * (c * x + d * y))
                    for a, b, c, d in rng.normal(size=(3, 4))])
    v = coulomb_tensor(g, phi, 1.0)
    assert np.allclose(v, v.transpose(1, 0, 3, 2), atol=1e-12 * abs(v).max())
    assert np.allclose(v, np.conj(v.transpose(2, 3, 0, 1)), atol=1e-12 * abs(v).max())


def test_coulomb_constant_units():
    """e^2/(4 pi eps0) = 1.439964 eV nm (REFERENCES.md, CODATA via scipy.constants); 1 hartree bohr in
    atomic units; refused for neutral atoms."""
    assert coulomb_constant("semiconductor") == pytest.approx(1439.964, rel=1e-6)
    assert coulomb_constant("atomic") == pytest.approx(1.0, rel=1e-9)
    assert coulomb_constant("dimensionless") == 1.0
    assert sc.e**2 / (4 * np.pi * sc.epsilon_0) / (sc.e * 1e-9) == pytest.approx(1.439964, rel=1e-6)
    with pytest.raises(InputError, match="neutral"):
        coulomb_constant("atoms")


def test_one_dimension_refused():
    with pytest.raises(InputError, match="1D"):
        singular_weight([0.1])
