"""Linear Rashba/Dresselhaus coupling as SU(2) link phases (core.spin_orbit), against outside results."""
import numpy as np
import pytest

from core.grid import Grid
from core.hamiltonian import build_hamiltonian
from core.spin_orbit import spin_expectations, spinor_hamiltonian
from core.units import get_units

MASS = 0.014                       # an InSb-like electron mass, m0 (our own scenario)
GRID = Grid([-60.0, -50.0], [60.0, 50.0], [25, 21])


def _potential():
    x, y = GRID.mesh()
    return 0.004 * x ** 2 + 0.007 * y ** 2 + 0.3 * np.tanh((x - 0.4 * y) / 15.0)   # no symmetry


@pytest.mark.parametrize("alpha,beta", [(50.0, 50.0), (30.0, -30.0)])
def test_equal_rashba_and_dresselhaus_is_a_pure_gauge(alpha, beta):
    """|alpha| = |beta|: the coupling is a pure SU(2) gauge (J. Schliemann, J. C. Egues, D. Loss,
    Phys. Rev. Lett. 90, 146801 (2003)), so the spinor spectrum is the spin-free one (numpy eigvalsh
    of the fd2 matrix) shifted by -2 m alpha^2 / hbar^2, every level doubly degenerate.  On the grid
    the link phases are exactly a gauge transformation, so the agreement is to round-off (1e-9 meV)."""
    v = _potential()
    c = get_units("semiconductor").kinetic_prefactor(MASS)
    free = np.linalg.eigvalsh(build_hamiltonian(GRID, v, mass=MASS, units="semiconductor").to_sparse().toarray())
    spinor = np.linalg.eigvalsh(spinor_hamiltonian(GRID, v, mass=MASS, rashba=alpha,
                                                   dresselhaus=beta).toarray())
    shift = -(alpha ** 2) / c                   # 2 m alpha^2 / hbar^2 = alpha^2 / (hbar^2 / 2m)
    assert shift < -0.3                         # a shift far above the tolerance
    np.testing.assert_allclose(spinor[:40], np.repeat(free[:20] + shift, 2), rtol=0, atol=1e-9)


def test_rashba_alone_is_not_a_rigid_shift_but_keeps_kramers_pairs():
    """Rashba alone is no pure gauge: the levels move by amounts that differ from level to level; at
    B = 0 time reversal keeps every level doubly degenerate (H. A. Kramers, Proc. Amsterdam Acad. 33,
    959 (1930)), to round-off."""
    v = _potential()
    c = get_units("semiconductor").kinetic_prefactor(MASS)
    free = np.linalg.eigvalsh(build_hamiltonian(GRID, v, mass=MASS, units="semiconductor").to_sparse().toarray())
    spinor = np.linalg.eigvalsh(spinor_hamiltonian(GRID, v, mass=MASS, rashba=50.0).toarray())
    np.testing.assert_allclose(spinor[0:40:2], spinor[1:40:2], rtol=0, atol=1e-9)
    moved = spinor[0:40:2] - free[:20]
    assert np.ptp(moved) > 0.05 * 50.0 ** 2 / (2 * c)


def test_spinor_matrix_is_hermitian_with_field_and_zeeman():
    """H = H^dagger (common practice), with Rashba, Dresselhaus, an orbital field and the Zeeman term."""
    a = spinor_hamiltonian(GRID, _potential(), mass=MASS, rashba=40.0, dresselhaus=15.0,
                           magnetic_field=(0.2, -0.1, 1.5), g_factor=-50.0)
    assert abs(a - a.getH()).max() <= 1e-14 * abs(a).max()


def test_spinor_spectrum_is_gauge_invariant():
    """The orbital gauge (symmetric or Landau, any centre) does not change the spectrum (Peierls
    phases times SU(2) link matrices; R. Peierls, Z. Phys. 80, 763 (1933)): 30 levels to 1e-9 relative."""
    v = _potential()
    out = []
    for gauge, centre in (("symmetric", None), ("landau", None), ("symmetric", (7.0, -3.0))):
        a = spinor_hamiltonian(GRID, v, mass=MASS, rashba=40.0, dresselhaus=15.0, magnetic_field=(0, 0, 1.5),
                               g_factor=-50.0, gauge=gauge, gauge_centre=centre)
        out.append(np.linalg.eigvalsh(a.toarray())[:30])
    for s in out[1:]:
        np.testing.assert_allclose(s, out[0], rtol=1e-9)


def test_zeeman_without_coupling_splits_by_g_mu_b_b():
    """Without spin-orbit coupling each orbital level splits by |g| mu_B |B| with <sigma> along the field
    (mu_B from scipy.constants via core.units); the field is in-plane so the orbits do not change."""
    v = _potential()
    u = get_units("semiconductor")
    b = (0.6, 0.8, 0.0)                        # |B| = 1 T in the plane: no orbital coupling in 2D
    a = spinor_hamiltonian(GRID, v, mass=MASS, magnetic_field=b, g_factor=-50.0)
    w, vec = np.linalg.eigh(a.toarray())
    np.testing.assert_allclose(w[1] - w[0], 50.0 * u.bohr_magneton() * 1.0, rtol=1e-10)
    s = spin_expectations(vec[:, :2])
    np.testing.assert_allclose(s[0], [0.6, 0.8, 0.0], atol=1e-10)     # g < 0: the lower state along +B
    np.testing.assert_allclose(s[1], [-0.6, -0.8, 0.0], atol=1e-10)
