"""Material regions with their own effective mass: the BenDaniel-Duke operator against outside references.

References: D. J. BenDaniel, C. B. Duke, Phys. Rev. 152, 683 (1966) (psi and (1/m) dpsi/dn continuous
at an interface); G. Bastard, Wave Mechanics Applied to Semiconductor Heterostructures (Les Editions de
Physique, 1988), ch. 2 and 3 (the finite well with a mass step and its transcendental equation).  The
roots of the transcendental equations are found with scipy.optimize.brentq (xtol 1e-14 meV).
"""
import numpy as np
import pytest
from scipy.optimize import brentq

from core.eigensolve import lowest_states
from core.grid import Grid
from core.hamiltonian import build_hamiltonian
from core.hamiltonian_regions import build_region_hamiltonian
from core.regions import MaterialMap
from core.units import get_units

U = get_units("semiconductor")
M_DOT, M_BARRIER, V0 = 0.026, 0.067, 300.0       # an InAs-like well in a GaAs-like barrier, meV


def _well_level(a: float) -> float:
    """Even ground level (meV above the well bottom) of a finite well of width a (nm) with a mass
    step: k tan(k a / 2) / m_w = kappa / m_b (Bastard 1988; BenDaniel & Duke 1966)."""
    def f(e):
        k = np.sqrt(e / U.kinetic_prefactor(M_DOT))
        q = np.sqrt((V0 - e) / U.kinetic_prefactor(M_BARRIER))
        return k * np.tan(k * a / 2) / M_DOT - q / M_BARRIER
    top = min(U.kinetic_prefactor(M_DOT) * (np.pi / a) ** 2 * (1 - 1e-12), V0 - 1e-9)
    return brentq(f, 1e-9, top, xtol=1e-14)


def _sphere_level(radius: float) -> float:
    """l = 0 ground level of a spherical dot with a mass step: with u = r psi, u = sin(kr) inside,
    exp(-kappa r) outside, and (1/m) dpsi/dr continuous:
    (kR cot kR - 1) / m_in = (-kappa R - 1) / m_out (BenDaniel & Duke 1966)."""
    def f(e):
        k = np.sqrt(e / U.kinetic_prefactor(M_DOT))
        q = np.sqrt((V0 - e) / U.kinetic_prefactor(M_BARRIER))
        return (k * radius / np.tan(k * radius) - 1) / M_DOT - (-q * radius - 1) / M_BARRIER
    top = min(U.kinetic_prefactor(M_DOT) * (np.pi / radius) ** 2 * (1 - 1e-12), V0 - 1e-9)
    return brentq(f, 1e-9, top, xtol=1e-14)


def _materials(inside: str, rule: str = "cell") -> MaterialMap:
    return MaterialMap.from_formulas(["dot"], [inside], [[M_BARRIER] * 3, [M_DOT] * 3], [0.0, -V0], {},
                                     link_rule=rule)


def _well_error(intervals: int, half_width: float, rule: str) -> float:
    g = Grid([-30.0], [30.0], [intervals - 1])
    mm = _materials(f"abs(x) < {half_width!r}", rule)
    h = build_region_hamiltonian(g, mm.offset_map(g), mm, units="semiconductor")
    e = np.linalg.eigvalsh(h.to_sparse().toarray())[0] + V0
    return e - _well_level(2 * half_width)


def test_1d_mass_step_well_converges_at_second_order():
    """Finite well with a mass step (Bastard 1988), interfaces one third of a spacing past a point on
    every grid (box +-30 nm, 120 and 480 intervals): with second-order convergence the error falls
    by 4^2 = 16 when the spacing falls by 4; asserted >= 12 (higher-order terms), and the finer grid
    within 0.02 meV of the root (49.793 meV).  Measured: -0.158 -> -0.0120 meV (ratio 13.2)."""
    half = -30.0 + (70 + 1.0 / 3.0) * 0.5          # 5.1667 nm: fraction 1/3 of h = 0.5 and of h = 0.125
    coarse = _well_error(120, half, "cell")
    fine = _well_error(480, half, "cell")
    assert abs(coarse / fine) >= 12.0
    assert abs(fine) < 0.02


def test_1d_point_link_rules_are_less_accurate():
    """The same well with the inverse mass taken only from the two end points of each link (the mean of
    1/m, i.e. the harmonic mean of the masses; or 1 / mean of m) and offsets sampled at the points does
    not converge steadily when the interface falls between points: measured errors at 480 intervals
    +0.066 meV (mean of 1/m, its sign changed from the coarse grid) and -0.28 meV (mean of m), against
    -0.012 meV for the cell rule.  Asserted: both point rules at least 4 times worse than the cell rule,
    which is why the cell rule is the default."""
    half = -30.0 + (70 + 1.0 / 3.0) * 0.5
    cell = abs(_well_error(480, half, "cell"))
    for rule in ("inverse-mean", "mass-mean"):
        assert abs(_well_error(480, half, rule)) > 4.0 * cell


def test_1d_cell_rule_accurate_wherever_the_interface_falls():
    """For generic interface positions (a = 10.3 nm) the cell rule's error stays below a second-order
    envelope 1.0 meV nm^-2 * h^2 (measured constant <= 0.85), on grids where the point rules are off by
    up to 0.35 meV."""
    for intervals in (100, 200, 400, 800):
        h = 60.0 / intervals
        assert abs(_well_error(intervals, 5.15, "cell")) <= 1.0 * h * h


@pytest.mark.parametrize("rule", ["cell"])
def test_3d_spherical_dot_with_mass_step(rule):
    """Spherical dot, R = 4 nm, l = 0 ground level (BenDaniel & Duke 1966 matching; root 220.30 meV above
    the dot's band edge) in a box +-12 nm.  A curved interface staircased on a cubic grid converges at
    about first order (common practice; the link rule is exact only for interfaces across the link):
    measured errors 2.41 meV (h = 1 nm) and 1.02 meV (h = 0.5 nm).  Asserted: the error falls by at
    least 1.8 (first order, 10 % allowance) and the finer grid is within 1 % of the root."""
    exact = _sphere_level(4.0)
    errors = []
    for n in (24, 48):
        g = Grid([-12.0] * 3, [12.0] * 3, [n - 1] * 3)
        mm = _materials("r < 4", rule)
        h = build_region_hamiltonian(g, mm.offset_map(g), mm, units="semiconductor")
        errors.append(lowest_states(h, 1, tolerance=1e-9).energies[0] + V0 - exact)
    assert abs(errors[0] / errors[1]) >= 1.8
    assert abs(errors[1]) < 0.01 * exact


def _random_materials(anisotropic=True):
    m_in = [0.026, 0.03, 0.05] if anisotropic else [0.026] * 3
    return MaterialMap.from_formulas(["a", "b"], ["x**2/30 + y**2/20 < 1", "y > 2"],
                                     [[0.067] * 3, m_in, [0.04, 0.09, 0.07]], [0.0, -50.0, 10.0], {})


@pytest.mark.parametrize("field", [None, (0.0, 0.0, 2.0)])
def test_assembled_matrix_is_hermitian_and_matches_apply(field):
    """H = H^dagger for the assembled sparse matrix (to 1e-14 relative), and the matrix-free kernel
    applies the same matrix (common practice: the operator and its assembled form must agree)."""
    g = Grid([-10.0, -8.0], [10.0, 8.0], [21, 17])
    mm = _random_materials()
    h = build_region_hamiltonian(g, mm.offset_map(g), mm, units="semiconductor", magnetic_field=field)
    a = h.to_sparse()
    scale = abs(a).max()
    assert abs(a - a.conj().T).max() <= 1e-14 * scale
    x = np.random.default_rng(3).standard_normal((2,) + g.shape).astype(h.dtype)
    y = (a @ x.reshape(2, -1).T).T.reshape(x.shape)
    np.testing.assert_allclose(h.apply(x), y, rtol=0, atol=1e-13 * scale)


@pytest.mark.parametrize("shape,field", [((40,), None), ((21, 17), None), ((21, 17), (0, 0, 1.5)),
                                         ((9, 8, 7), (0.3, -0.2, 1.0))])
def test_uniform_mass_regions_give_the_constant_mass_operator(shape, field):
    """Regions whose mass equals the project's give the constant-mass second-order operator of
    core.hamiltonian (assembled matrices equal to 1e-12 relative), with and without a field."""
    lo, hi = [-10.0, -8.0, -6.0][: len(shape)], [10.0, 8.0, 6.0][: len(shape)]
    g = Grid(lo, hi, list(shape))
    mm = MaterialMap.from_formulas(["a"], ["r < 4"], [[0.067] * 3, [0.067] * 3], [0.0, 0.0], {})
    v = np.random.default_rng(0).standard_normal(g.shape)
    h0 = build_hamiltonian(g, v, mass=0.067, units="semiconductor", scheme="fd2", magnetic_field=field)
    h1 = build_region_hamiltonian(g, v, mm, units="semiconductor", magnetic_field=field)
    a0, a1 = h0.to_sparse().toarray(), h1.to_sparse().toarray()
    assert np.abs(a0 - a1).max() <= 1e-12 * np.abs(a0).max()
    x = np.random.default_rng(1).standard_normal((3,) + g.shape).astype(h1.dtype)
    assert np.abs(h0.apply(x) - h1.apply(x)).max() <= 1e-12 * np.abs(h0.apply(x)).max()


def test_gauge_invariance_with_regions():
    """The spectrum in a field does not depend on the gauge (symmetric vs Landau, and the gauge
    centre): the Peierls-phased BenDaniel-Duke operators are unitarily equivalent (R. Peierls,
    Z. Phys. 80, 763 (1933)).  Lowest 6 eigenvalues equal to 1e-9 relative (dense eigvalsh)."""
    g = Grid([-12.0, -10.0], [12.0, 10.0], [23, 19])
    mm = _random_materials(anisotropic=False)
    v = mm.offset_map(g) + 0.02 * (g.mesh()[0] ** 2 + g.mesh()[1] ** 2)
    spectra = []
    for gauge, centre in (("symmetric", None), ("landau", None), ("symmetric", (1.5, -2.0))):
        h = build_region_hamiltonian(g, v, mm, units="semiconductor", magnetic_field=(0, 0, 3.0),
                                     gauge=gauge, gauge_centre=centre)
        spectra.append(np.linalg.eigvalsh(h.to_sparse().toarray())[:6])
    for s in spectra[1:]:
        np.testing.assert_allclose(s, spectra[0], rtol=1e-9)
    h0 = build_region_hamiltonian(g, v, mm, units="semiconductor")
    assert np.abs(np.linalg.eigvalsh(h0.to_sparse().toarray())[:6] - spectra[0]).max() > 1e-3


def test_bounds_enclose_the_spectrum():
    """bounds() encloses every eigenvalue of the assembled matrix (Gershgorin, and a lower bound from
    the smallest link; checked against numpy's eigvalsh)."""
    g = Grid([-10.0, -8.0], [10.0, 8.0], [21, 17])
    mm = _random_materials()
    h = build_region_hamiltonian(g, mm.offset_map(g), mm, units="semiconductor", magnetic_field=(0, 0, 1.0))
    w = np.linalg.eigvalsh(h.to_sparse().toarray())
    lo, hi = h.bounds()
    assert lo <= w[0] and w[-1] <= hi


def test_higher_order_schemes_refuse_a_position_dependent_mass():
    g = Grid([-10.0], [10.0], [20])
    with pytest.raises(Exception, match="cannot carry a position-dependent"):
        build_region_hamiltonian(g, np.zeros(g.shape), _materials("abs(x) < 3"), units="semiconductor",
                                 scheme="fd4")


def test_certified_level_count_with_regions():
    """Sylvester's law of inertia (core.inertia, from the assembled sparse matrix) certifies the level
    count of a region solve in a field, and its count equals that of numpy's dense eigvalsh."""
    from core.inertia import certify_count, count_below
    g = Grid([-12.0, -10.0], [12.0, 10.0], [31, 27])
    mm = _random_materials()
    v = mm.offset_map(g) + 0.02 * (g.mesh()[0] ** 2 + g.mesh()[1] ** 2)
    h = build_region_hamiltonian(g, v, mm, units="semiconductor", magnetic_field=(0, 0, 2.0))
    spec = lowest_states(h, 6, tolerance=1e-9)
    cert = certify_count(h, spec)
    assert cert.certified and cert.count_below == spec.energies.size
    w = np.linalg.eigvalsh(h.to_sparse().toarray())
    shift = 0.5 * (w[7] + w[8])
    assert count_below(h, shift).count == 8
