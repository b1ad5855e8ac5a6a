"""Two interacting electrons (core.two_electron) against the relative-motion reference and exact states.

Dimensionless units (hbar = m = |q| = 1), a parabolic dot of frequency omega and the repulsion
kappa / r.  References: tests/core/radial_reference.py (the centre-of-mass / relative-motion
separation, Merkt, Huser, Wagner, Phys. Rev. B 43, 7320 (1991), its radial equation solved with
scipy's eigh_tridiagonal), and closed-form relative states (Taut, J. Phys. A 27, 1045 (1994)).
"""
import numpy as np
import pytest
from scipy.optimize import brentq

from core import two_electron as te
from core.errors import Cancelled, InputError, MemoryLimitError
from core.grid import Grid
from core.solve import solve_states
from tests.core.radial_reference import relative_energy, two_electron_energy


def _dot(grid, states, kappa, *, omega=1.0, b=0.0, tolerance=1e-3):
    sp = solve_states(grid, lambda x, y: 0.5 * omega**2 * (x**2 + y**2), states=states, scheme="spectral",
                      magnetic_field=[0.0, 0.0, b] if b else None)
    return te.two_electron_levels(grid, sp.energies, sp.states, strength=kappa, groups=sp.groups,
                                  tolerance=tolerance)


def test_taut_closed_form_relative_states():
    """Closed-form relative states R = r^|m| (1 + kappa r / (2|m| + 1)) exp(-omega r^2 / 4), exact when
    omega = kappa^2 / (2|m| + 1), with eps_rel = (|m| + 2) omega (the 2D case of M. Taut, J. Phys. A 27,
    1045 (1994); the condition and energy were derived here by inserting the form into the radial
    equation).  The radial reference must reproduce them: checks the reference itself to 1e-8."""
    assert relative_energy(0, 1.0, 1.0) == pytest.approx(2.0, rel=1e-8)
    assert relative_energy(1, 1.0 / 3.0, 1.0) == pytest.approx(1.0, rel=1e-8)
    assert relative_energy(1, 1.0, 0.0) == pytest.approx(2.0, rel=1e-8)       # no repulsion: (2n+|m|+1) omega


def test_parabolic_dot_singlet_triplet_and_exchange():
    """omega = 1, kappa = 1 (l0 / a_B = 1): E_S = 3 exactly (Taut's m = 0 state: E_cm = omega plus
    eps_rel = 2 omega), E_T = 3.596499 (|m| = 1, radial reference), J = 0.596499.
    Tolerances from the issue: 0.3 % on the energies, 2 % on J.  Measured with 55 orbitals (10 shells)
    on 40^2 points: E_S +0.22 % (the singlet converges slowly with the basis, the pair cusp), E_T
    -0.004 % (grid quadrature), J -1.1 %.  The reported uncertainties must cover the true errors
    within a factor 1.5 (power-law tail estimates: measured 0.89 and 0.91 of the true errors)."""
    g = Grid([-7.0, -7.0], [7.0, 7.0], [40, 40])
    r = _dot(g, 55, 1.0)
    e_s, e_t = two_electron_energy(0, 1.0, 1.0), two_electron_energy(1, 1.0, 1.0)
    assert e_s == pytest.approx(3.0, rel=1e-9)
    assert r.spin[0] == "singlet" and r.spin[1] == r.spin[2] == "triplet"
    assert r.singlet_energy == pytest.approx(e_s, rel=3e-3)
    assert r.triplet_energy == pytest.approx(e_t, rel=3e-3)
    assert r.exchange == pytest.approx(e_t - e_s, rel=2e-2)
    assert abs(r.singlet_energy - e_s) <= 1.5 * r.energy_uncertainty[0]
    assert abs(r.exchange - (e_t - e_s)) <= 1.5 * r.exchange_uncertainty
    assert r.orbitals == 55 and not r.converged and "budget" in r.stop_reason
    sizes = [row[0] for row in r.convergence]
    singlets = [row[1] for row in r.convergence]
    assert sizes == sorted(sizes) and all(a >= b for a, b in zip(singlets, singlets[1:]))   # variational


def test_taut_triplet_energy():
    """omega = 1/3, kappa = 1: the lowest triplet has the closed-form |m| = 1 relative state
    (Taut 1994, 2D), E_T = omega + 3 omega = 4/3.  The triplet converges fast with the basis
    (measured +0.012 % with 28 orbitals on 36^2 points); tolerance 0.3 % (the issue's)."""
    lo = np.sqrt(3.0)
    g = Grid([-7 * lo, -7 * lo], [7 * lo, 7 * lo], [36, 36])
    r = _dot(g, 28, 1.0, omega=1.0 / 3.0)
    assert r.triplet_energy == pytest.approx(4.0 / 3.0, rel=3e-3)
    assert r.spin[0] == "singlet"


def test_singlet_triplet_transition_in_field():
    """The ground state turns from the relative m = 0 singlet to the m = -1 triplet at a field B* where
    the reference energies cross (M. Wagner, U. Merkt, A. V. Chaplik, Phys. Rev. B 45, 1951 (1992);
    B* from the radial reference with Omega = sqrt(1 + B^2/4) and the (m/2) B term, brentq).
    kappa = 2, B* = 0.9634.  The configuration interaction must put the transition within 3 % of B*:
    singlet ground at 0.97 B*, triplet at 1.03 B*.  Measured with 45 complex orbitals: the singlet is
    0.009 too high (slow convergence of the m = 0 pair in a field), the triplet within 1e-4, so the
    computed transition is 2.4 % below B* (J slope -0.379 per unit field)."""
    kappa = 2.0
    bstar = brentq(lambda b: two_electron_energy(-1, 1.0, kappa, b) - two_electron_energy(0, 1.0, kappa, b),
                   0.1, 3.0, xtol=1e-10)
    assert bstar == pytest.approx(0.9634, abs=1e-3)
    g = Grid([-6.5, -6.5], [6.5, 6.5], [32, 32])
    below = _dot(g, 45, kappa, b=0.97 * bstar)
    above = _dot(g, 45, kappa, b=1.03 * bstar)
    assert below.spin[0] == "singlet" and below.exchange > 0
    assert above.spin[0] == "triplet" and above.exchange < 0
    assert above.triplet_energy == pytest.approx(two_electron_energy(-1, 1.0, kappa, 1.03 * bstar), rel=3e-3)
    # the singlet's changes come in steps here; its reported uncertainty must still cover its error
    # (measured: 0.0183 reported, 0.0089 true)
    singlet = above.spin.index("singlet")
    error = above.energies[singlet] - two_electron_energy(0, 1.0, kappa, 1.03 * bstar)
    assert 0 < error <= above.energy_uncertainty[singlet]


def test_double_dot_singlet_ground_and_exchange_falls_with_barrier():
    """At B = 0 the two-electron ground state is a singlet (E. Lieb, D. Mattis, Phys. Rev. 125, 164
    (1962)), so J > 0; in a double dot J falls as the barrier between the dots rises (Heitler-London
    trend, G. Burkard, D. Loss, D. P. DiVincenzo, Phys. Rev. B 59, 2070 (1999)).  Quartic double well
    (x^2 - d^2)^2 / (8 d^2) + y^2 / 2 (barrier d^2 / 8) for d = 1.5, 2, 2.5; the differences of J must
    exceed the reported uncertainties."""
    js = []
    for d in (1.5, 2.0, 2.5):
        g = Grid([-d - 5.0, -5.0], [d + 5.0, 5.0], [40, 28])
        sp = solve_states(g, lambda x, y, d=d: (x**2 - d**2)**2 / (8 * d**2) + 0.5 * y**2, states=16, scheme="spectral")
        r = te.two_electron_levels(g, sp.energies, sp.states, strength=1.0, groups=sp.groups)
        assert r.spin[0] == "singlet" and r.exchange > 0
        js.append((r.exchange, r.exchange_uncertainty))
    for (j1, u1), (j2, u2) in zip(js, js[1:]):
        assert j1 - j2 > u1 + u2


def test_no_repulsion_gives_orbital_sums():
    """Without repulsion the levels are sums of orbital energies: E_S = 2 E_0 = 2, E_T = E_0 + E_1 = 3
    (2D oscillator, Fock-Darwin at B = 0)."""
    g = Grid([-6.0, -6.0], [6.0, 6.0], [24, 24])
    r = _dot(g, 6, 0.0)
    assert r.singlet_energy == pytest.approx(2.0, abs=1e-8)
    assert r.triplet_energy == pytest.approx(3.0, abs=1e-8)


def test_memory_refusal_names_fewer_orbitals(monkeypatch):
    g = Grid([-6.0, -6.0], [6.0, 6.0], [24, 24])
    sp = solve_states(g, lambda x, y: 0.5 * (x**2 + y**2), states=6, scheme="spectral")
    monkeypatch.setattr(te, "available_memory_bytes", lambda: 200_000)
    with pytest.raises(MemoryLimitError, match="fewer orbitals"):
        te.two_electron_levels(g, sp.energies, sp.states, strength=1.0)


def test_cancel_and_bad_input():
    g = Grid([-6.0, -6.0], [6.0, 6.0], [24, 24])
    sp = solve_states(g, lambda x, y: 0.5 * (x**2 + y**2), states=10, scheme="spectral")
    calls = []

    def stop():
        calls.append(1)
        return len(calls) > 1
    with pytest.raises(Cancelled):
        te.two_electron_levels(g, sp.energies, sp.states, strength=1.0, groups=sp.groups, should_stop=stop)
    with pytest.raises(InputError, match="at least 2"):
        te.two_electron_levels(g, sp.energies[:1], sp.states[:1], strength=1.0)
    with pytest.raises(InputError, match="tolerance"):
        te.two_electron_levels(g, sp.energies, sp.states, strength=1.0, tolerance=2.0)


def test_complete_basis_equals_exact_diagonalisation_on_the_grid():
    """With every orbital of a small grid the configuration interaction is exact in the grid basis, so it
    must reproduce the plain diagonalisation (scipy.linalg.eigh) of the two-particle grid Hamiltonian
    h x 1 + 1 x h + W(r1 - r2) (same kernel values), each eigenvector labelled by its exchange parity
    <P12> = +1 (singlet) or -1 (triplet).  Tolerance 1e-9 (rounding).  A double well, so the levels
    are not degenerate."""
    import scipy.linalg as la

    from core.coulomb import _kernel_values
    from core.hamiltonian import build_hamiltonian
    g = Grid([-4.0, -3.0], [4.0, 3.0], [7, 5])
    v = (lambda x, y: (x**2 - 2.0)**2 / 8.0 + 0.5 * y**2)(*g.mesh())
    h = build_hamiltonian(g, v, mass=1.0, units="dimensionless", scheme="fd2").to_sparse().toarray().real
    e, phi = la.eigh(h)
    phi = phi.T.reshape(-1, *g.shape) / np.sqrt(g.volume_element)
    r = te.two_electron_levels(g, e, phi, strength=0.7, levels=6, tolerance=1e-12)
    assert r.orbitals == g.size
    pts = np.stack([c.ravel() for c in g.mesh()], axis=1)
    idx = np.rint(np.abs(pts[:, None, :] - pts[None, :, :]) / np.asarray(g.spacing)).astype(int)
    table = _kernel_values(g, [np.arange(m) * s for m, s in zip(g.shape, g.spacing)])
    n = g.size
    eye = np.eye(n)
    big = np.kron(h, eye) + np.kron(eye, h) + np.diag(0.7 * table[idx[..., 0], idx[..., 1]].ravel())
    w, vecs = la.eigh(big, subset_by_index=[0, 9])
    parity = np.einsum("ik,ik->k", vecs, vecs.reshape(n, n, -1).transpose(1, 0, 2).reshape(n * n, -1))
    labels = ["singlet" if p > 0.5 else "triplet" for p in parity]
    assert np.all(np.abs(np.abs(parity) - 1.0) < 1e-9)
    np.testing.assert_allclose(r.energies, w[:6], rtol=0, atol=1e-9)
    assert list(r.spin) == labels[:6]


def test_three_dimensional_hooke_atom():
    """3D: two electrons in an isotropic oscillator with omega = 1/2 and repulsion 1/r have the
    closed-form relative state u = r (1 + r/2) exp(-r^2/8), E = (3/2) omega + (5/2) omega = 2
    (M. Taut, Phys. Rev. A 48, 3561 (1993); S. Kais, D. R. Herschbach, R. D. Levine, J. Chem. Phys. 91,
    7791 (1989) [recalled from memory]; the condition and energy were derived here and are checked
    below with scipy's eigh_tridiagonal on -u'' + (omega^2 r^2/4 + 1/r) u, u(0) = 0).  Configuration
    interaction in 20 orbitals (4 shells) on 20^3 points: measured +0.21 %; tolerance 0.5 %."""
    from scipy.linalg import eigh_tridiagonal
    h, m = 20.0 / 20000, 20000
    r = h * np.arange(1, m + 1)
    eps = eigh_tridiagonal(2 / h**2 + r**2 / 16 + 1 / r, np.full(m - 1, -1 / h**2), eigvals_only=True,
                           select="i", select_range=(0, 0))[0]
    assert 0.75 + eps == pytest.approx(2.0, rel=1e-6)
    g = Grid([-8.5] * 3, [8.5] * 3, [20] * 3)
    sp = solve_states(g, lambda x, y, z: 0.125 * (x**2 + y**2 + z**2), states=20, scheme="spectral")
    pair = te.two_electron_levels(g, sp.energies, sp.states, strength=1.0, groups=sp.groups, tolerance=1e-6)
    assert pair.orbitals == 20 and pair.spin[0] == "singlet"
    assert pair.singlet_energy == pytest.approx(2.0, rel=5e-3)


def test_cancel_during_the_interaction_stage_keeps_the_sizes_done():
    """Cancelled after the first basis size: the partial result holds that size's levels."""
    g = Grid([-6.0, -6.0], [6.0, 6.0], [24, 24])
    sp = solve_states(g, lambda x, y: 0.5 * (x**2 + y**2), states=15, scheme="spectral")
    stages = []
    with pytest.raises(Cancelled) as info:
        te.two_electron_levels(g, sp.energies, sp.states, strength=1.0, groups=sp.groups, tolerance=1e-6,
                               progress=lambda stage, f: stages.append(stage),
                               should_stop=lambda: "interaction" in stages)
    partial = info.value.partial
    assert isinstance(partial, te.TwoElectronResult) and len(partial.convergence) == 1
    assert partial.spin[0] == "singlet" and not partial.converged
