"""Orbital magnetic field (Peierls phases) checked against published physics.

Sources: V. Fock, Z. Phys. 47, 446 (1928); C. G. Darwin, Proc. Camb. Phil. Soc. 27, 86 (1931)
(Fock-Darwin levels); L. Landau, Z. Phys. 64, 629 (1930) (Landau levels) [citation recalled from
memory]; R. Peierls, Z. Phys. 80, 763 (1933); D. R. Hofstadter, Phys. Rev. B 14, 2239 (1976).
"""
from __future__ import annotations

import numpy as np
import pytest

from core import Grid, solve_states
from core.analysis import angular_momentum_z
from core.hamiltonian import build_hamiltonian
from core.units import get_units

SEMI = get_units("semiconductor")
M_GAAS = 0.067


def fock_darwin(hw0, hwc, count):
    """E_{n,l} = (2n + |l| + 1) hbar*Omega + (l/2) hbar*omega_c, Omega^2 = omega_0^2 + omega_c^2/4 (electron)."""
    hW = np.sqrt(hw0**2 + hwc**2 / 4)
    levels = [((2 * n + abs(l) + 1) * hW + 0.5 * l * hwc, l) for n in range(12) for l in range(-20, 21)]
    levels.sort()
    return np.array([e for e, _ in levels[:count]]), [l for _, l in levels[:count]]


def parabolic(grid, hw0, mass=M_GAAS):
    x, y = grid.mesh_sparse()
    c = SEMI.kinetic_prefactor(mass)
    return hw0**2 * (x**2 + y**2) / (4 * c)          # 1/2 m w0^2 r^2 in meV


@pytest.mark.parametrize("scheme,rtol", [("spectral", 1e-7), ("fd4", 1e-3), ("fd2", 1.5e-2)])
def test_fock_darwin_spectrum(scheme, rtol):
    """GaAs dot, hbar*w0 = 3 meV, B = 2 T perpendicular: levels follow Fock-Darwin for every scheme.
    Tolerances: spectral converges exponentially; fd4/fd2 relative errors scale as (h/l)^p with
    h = 3.75 nm and l = sqrt(hbar/(m Omega)) = 18 nm: (h/l)^2 = 0.043 and (h/l)^4 = 1.9e-3, bounded by
    1.5e-2 (fd2, measured 8e-3) and 1e-3 (fd4, measured 2.5e-4)."""
    g = Grid([-120, -120], [120, 120], [63, 63])
    b = 2.0
    hwc = SEMI.cyclotron_energy(M_GAAS, b)
    r = solve_states(g, parabolic(g, 3.0), states=8, mass=M_GAAS, units="semiconductor",
                     magnetic_field=[0, 0, b], scheme=scheme, tolerance=1e-9)
    exact, _ = fock_darwin(3.0, hwc, 8)
    np.testing.assert_allclose(r.energies[:8], exact, rtol=rtol)


def test_lowered_branch_has_negative_angular_momentum_for_an_electron():
    """For an electron (charge -e) and B along +z, the l < 0 branch is lowered: the first excited
    state carries L_z = -hbar and the second l = +1 state lies above it (Fock 1928, Darwin 1931)."""
    g = Grid([-120, -120], [120, 120], [63, 63])
    r = solve_states(g, parabolic(g, 3.0), states=4, mass=M_GAAS, units="semiconductor",
                     magnetic_field=[0, 0, 1.5], scheme="spectral", tolerance=1e-9)
    lz = angular_momentum_z(g, r.states)
    _, ls = fock_darwin(3.0, SEMI.cyclotron_energy(M_GAAS, 1.5), 4)
    np.testing.assert_allclose(lz[:4], ls, atol=1e-6)
    assert lz[1] == pytest.approx(-1.0, abs=1e-6)


def test_landau_level_limit():
    """As w0 -> 0 the Fock-Darwin levels condense into Landau levels hbar*w_c (N + 1/2)
    (Landau 1930): with hbar*w0 = 0.3 meV and B = 5 T the twelve lowest states all belong to the
    lowest Landau level, within 0.15 meV of hbar*w_c/2, and match Fock-Darwin."""
    g = Grid([-150, -150], [150, 150], [96, 96])
    b = 5.0
    hwc = SEMI.cyclotron_energy(M_GAAS, b)
    r = solve_states(g, parabolic(g, 0.3), states=12, mass=M_GAAS, units="semiconductor",
                     magnetic_field=[0, 0, b], scheme="spectral", tolerance=1e-9)
    exact, ls = fock_darwin(0.3, hwc, 12)
    np.testing.assert_allclose(r.energies[:12], exact, rtol=1e-7)
    # the lowest Landau level: every state within 0.15 meV of hbar*w_c/2 (its Fock-Darwin spread here)
    assert np.all(np.abs(r.energies[:12] - 0.5 * hwc) < 0.15)
    assert np.all(np.array(ls) <= 0)     # all of them on the lowered (l <= 0) branch


@pytest.mark.parametrize("scheme", ["fd2", "fd4", "spectral"])
def test_gauge_invariance(scheme):
    """Symmetric and Landau gauges differ by the gradient of B x y / 2, a unitary transformation of
    the lattice (Peierls 1933): spectra agree to near machine precision, and so do the densities of
    non-degenerate states."""
    g = Grid([-100, -90], [110, 95], [40, 36])
    x, y = g.mesh_sparse()
    v = parabolic(g, 2.5) + 0.01 * x        # break symmetries so the levels are non-degenerate
    v = v + 0.0003 * x * y
    kw = dict(mass=M_GAAS, units="semiconductor", scheme=scheme)
    hs = build_hamiltonian(g, v, magnetic_field=[0, 0, 1.7], gauge="symmetric", **kw)
    hl = build_hamiltonian(g, v, magnetic_field=[0, 0, 1.7], gauge="landau", **kw)
    ws, vs = np.linalg.eigh(hs.to_sparse().toarray())
    wl, vl = np.linalg.eigh(hl.to_sparse().toarray())
    np.testing.assert_allclose(ws[:10], wl[:10], rtol=1e-12, atol=1e-11)
    np.testing.assert_allclose(np.abs(vs[:, :5]) ** 2, np.abs(vl[:, :5]) ** 2, atol=1e-9)


def test_gauge_invariance_3d_tilted_field():
    """A tilted field in 3D: the symmetric gauge and our generalised Landau gauge
    A = (-Bz y, -Bx z, -By x) (curl A = B) give the same spectrum."""
    g = Grid([-30, -30, -30], [30, 30, 30], [12, 11, 10])
    x, y, z = g.mesh_sparse()
    v = 0.01 * (x**2 + 1.3 * y**2 + 0.8 * z**2)
    kw = dict(mass=M_GAAS, units="semiconductor", scheme="fd2", magnetic_field=[0.7, -1.1, 2.0])
    ws = np.linalg.eigvalsh(build_hamiltonian(g, v, gauge="symmetric", **kw).to_sparse().toarray())
    wl = np.linalg.eigvalsh(build_hamiltonian(g, v, gauge="landau", **kw).to_sparse().toarray())
    np.testing.assert_allclose(ws[:20], wl[:20], rtol=1e-12, atol=1e-11)


def test_stark_shift_with_perpendicular_field_stays_exact():
    """A uniform in-plane field F shifts every Fock-Darwin level by -q^2 F^2 / (2 m w0^2) exactly, also with
    B: displacing the origin of a parabola is a gauge transformation for uniform B."""
    g = Grid([-140, -140], [140, 140], [63, 63])
    hw0, f = 3.0, 0.02                  # meV, mV/nm
    c = SEMI.kinetic_prefactor(M_GAAS)
    x, _ = g.mesh_sparse()
    base = parabolic(g, hw0)
    kw = dict(states=5, mass=M_GAAS, units="semiconductor", magnetic_field=[0, 0, 2.0], scheme="spectral",
              tolerance=1e-10)
    r0 = solve_states(g, base, **kw)
    r1 = solve_states(g, base + f * x, **kw)            # -q F x with q = -e
    # q^2 F^2 / (2 m w0^2) = F^2 / (2 * hw0^2 / (2 c)) in meV with F in meV/nm
    shift = -f**2 * c / hw0**2
    np.testing.assert_allclose(r1.energies - r0.energies, shift, atol=1e-8)


def test_hofstadter_half_flux_bandwidth():
    """At half a flux quantum per plaquette the nearest-neighbour hopping spectrum spans
    +-2 sqrt(2) t (Hofstadter, Phys. Rev. B 14, 2239 (1976)); on a finite 50 x 50 lattice with hard
    edges the extremes approach it from inside (within 2%)."""
    n = 50
    g = Grid([0, 0], [n + 1, n + 1], [n, n])            # unit spacing
    t = 0.5                                              # hbar^2/(2 m a^2) with hbar = m = a = 1
    # flux per plaquette B a^2 (|q|/hbar) / (2 pi) = 1/2  ->  B = pi in these units
    h = build_hamiltonian(g, 0.0, scheme="fd2", magnetic_field=[0, 0, np.pi])
    w = np.linalg.eigvalsh(h.to_sparse().toarray()) - 4 * t
    assert w.max() == pytest.approx(2 * np.sqrt(2) * t, rel=0.02)
    assert w.min() == pytest.approx(-2 * np.sqrt(2) * t, rel=0.02)
    assert w.max() <= 2 * np.sqrt(2) * t + 1e-12


def test_warm_start_in_a_stronger_field_follows_fock_darwin():
    """A warm start from the 2 T states to 2.1 T (complex Hamiltonian, widened first Rayleigh-Ritz)
    lands on the Fock-Darwin levels at 2.1 T (spectral scheme: 1e-7 as in the test above), and its
    complex states are orthonormal."""
    g = Grid([-120, -120], [120, 120], [63, 63])
    v = parabolic(g, 3.0)
    cold = solve_states(g, v, states=8, mass=M_GAAS, units="semiconductor", magnetic_field=[0, 0, 2.0],
                        scheme="spectral", tolerance=1e-9)
    warm = solve_states(g, v, states=8, mass=M_GAAS, units="semiconductor", magnetic_field=[0, 0, 2.1],
                        scheme="spectral", tolerance=1e-9, start=cold.block())
    assert warm.extra["widened_with_residuals"] > 0
    exact, _ = fock_darwin(3.0, SEMI.cyclotron_energy(M_GAAS, 2.1), 8)
    np.testing.assert_allclose(warm.energies[:8], exact, rtol=1e-7)
    flat = warm.states.reshape(warm.energies.size, -1) * np.sqrt(g.volume_element)
    np.testing.assert_allclose(np.conj(flat) @ flat.T, np.eye(warm.energies.size), atol=1e-12)
