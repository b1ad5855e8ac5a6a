"""Sweeps: level tracking, crossings vs anticrossings, parallel and cluster runs, files, bad input."""
from __future__ import annotations

import dataclasses
import time
from pathlib import Path

import numpy as np
import pytest
import scipy.linalg as sla

from core.errors import Cancelled, InputError, WellscapeError
from core.grid import Grid
from core.project import FormulaTerm, MaterialSpec, Project, SolverSettings, load_project
from core.sweep import load_sweep, run_sweep, save_sweep, track_levels


def double_well_project(points=(48, 20)):
    """Dimensionless (hbar = m = 1) separable double well with a tilt, and a stiff y oscillator."""
    return Project(
        title="test double well", units="dimensionless", material=MaterialSpec(mass=1.0),
        grid=Grid([-4.0, -3.0], [4.0, 3.0], list(points)),
        parameters={"Vb": 3.0, "a": 1.4, "tilt": 0.0, "wy": 3.0},
        potential=(FormulaTerm("double well", "Vb*((x/a)**2 - 1)**2 + tilt*x"),
                   FormulaTerm("y oscillator", "0.5*wy**2*y**2")),
        electric_field=(0.0, 0.0), solver=SolverSettings(states=3, scheme="spectral", tolerance=1e-9))


def reference_splitting(vb=3.0, a=1.4, n=6000, half=4.0):
    """Tunnel splitting of the 1D double well from a fine FD2 grid and scipy.linalg.eigh_tridiagonal;
    FD2 error ~ h^2 = 1.8e-6 relative at n = 6000."""
    h = 2 * half / (n + 1)
    x = -half + h * np.arange(1, n + 1)
    w = sla.eigh_tridiagonal(1 / h**2 + vb * ((x / a) ** 2 - 1) ** 2, -0.5 / h**2 * np.ones(n - 1),
                             eigvals_only=True, select="i", select_range=(0, 1))
    return w[1] - w[0]


def test_anticrossing_gap_matches_fine_1d_reference():
    """Sweeping the tilt of a symmetric double well: the two lowest levels anticross at zero tilt with a
    gap equal to the tunnel splitting of the 1D well (reference: fine FD2 + scipy.linalg.eigh_tridiagonal).
    The two-level form sqrt(eps^2 + (2t)^2) is exact near the minimum (common practice)."""
    p = double_well_project()
    r = run_sweep(p, "tilt", np.linspace(-0.3, 0.3, 13), states=3)
    anti = [a for a in r.anticrossings if a.kind == "anticrossing" and set(a.tracks) == {0, 1}]
    assert len(anti) == 1
    ref = reference_splitting()
    a = anti[0]
    assert a.at == pytest.approx(0.0, abs=1e-6)
    # tilt = 0 is a sample point, so the smallest sampled gap is the splitting itself; spectral grid error ~1e-8
    assert a.sampled_gap == pytest.approx(ref, rel=1e-4)
    assert a.fit and a.gap == pytest.approx(ref, rel=2e-2)


def test_symmetry_allowed_crossing_keeps_track_identity():
    """Anisotropic oscillator: E(1,0) = 1.5 wx + 0.5 wy and E(0,1) = 0.5 wx + 1.5 wy cross at wy = wx
    (textbook separable oscillator). Their x/y parities differ, so the crossing is allowed, and tracking
    by overlap must follow each state through it (the y-excited track keeps slope 3/2)."""
    p = dataclasses.replace(double_well_project((30, 30)), grid=Grid([-6.0, -6.0], [6.0, 6.0], [30, 30]),
                            parameters={"wx": 1.0, "wy": 0.8},
                            potential=(FormulaTerm("oscillator", "0.5*wx**2*x**2 + 0.5*wy**2*y**2"),))
    values = np.linspace(0.8, 1.2, 9)
    r = run_sweep(p, "wy", values, states=3)
    cross = [c for c in r.anticrossings if c.kind == "crossing" and set(c.tracks) == {1, 2}]
    assert len(cross) == 1 and cross[0].at == pytest.approx(1.0, abs=1e-6)
    te = r.track_energies()
    np.testing.assert_allclose(te[1], 0.5 + 1.5 * values, rtol=1e-7)   # track 1 starts as (0,1)
    np.testing.assert_allclose(te[2], 1.5 + 0.5 * values, rtol=1e-7)   # track 2 starts as (1,0)


def test_sweep_from_the_circular_point_reports_no_anticrossing():
    """The bundled elliptical dot, V = hw^2 ((1 - ell) x^2 + (1 + ell) y^2) / (4 kin), swept from the
    circular point ell = 0: the potential is separable at every ell, so product states (n_x, n_y) never
    couple and no two levels anticross (textbook separable oscillator, Cohen-Tannoudji, Diu, Laloe,
    Quantum Mechanics, Wiley 1977, vol. 1, ch. VI).  At ell = 0 the square grid splits the fourth shell
    into two pairs 3e-8 meV apart (2e-9 of the energy, far inside the solver's degeneracy tolerance);
    that was reported as an anticrossing at the start of the sweep, and a crossing next to it.
    Levels at the last point: hbar w_x (n_x + 1/2) + hbar w_y (n_y + 1/2) with hbar w_x,y =
    hw sqrt(1 -/+ ell); the sample rounds hbar^2/2m* to 5 digits (kin), so 1e-4 relative."""
    project = load_project(Path(__file__).resolve().parents[2] / "sample_projects" / "elliptical_dot.json")
    r = run_sweep(project, "ell", np.linspace(0.0, 0.3, 7), states=10)
    assert [a for a in r.anticrossings if a.kind == "anticrossing"] == []
    assert all(a.at > 0.01 for a in r.anticrossings)            # nothing at the degenerate start
    hw = project.parameters["hw"]
    wx, wy = hw * np.sqrt(1 - 0.3), hw * np.sqrt(1 + 0.3)
    exact = np.sort([wx * (nx + 0.5) + wy * (ny + 0.5) for nx in range(6) for ny in range(6)])[:10]
    np.testing.assert_allclose(r.energies[-1], exact, rtol=1e-4)


def test_sweep_through_the_circular_point_reports_crossings_there():
    """The same elliptical dot swept through ell = 0 (a sampled value): the product states of the
    separable potential cross there, including pairs whose mirror parities are equal (separability,
    not mirror symmetry, lets them cross).  Every approach must be a crossing placed at ell = 0 and
    none an anticrossing with the grid's 3e-8 meV splitting as its "gap"."""
    project = load_project(Path(__file__).resolve().parents[2] / "sample_projects" / "elliptical_dot.json")
    r = run_sweep(project, "ell", np.linspace(-0.3, 0.3, 7), states=10)
    near = [a for a in r.anticrossings if abs(a.at) < 0.05]
    assert near and all(a.kind == "crossing" and a.at == 0.0 for a in near)
    assert [a for a in r.anticrossings if a.kind == "anticrossing"] == []


def test_track_levels_assignment():
    """Overlap tracking is an assignment problem (scipy.optimize.linear_sum_assignment)."""
    swap = np.array([[0.05, 0.95, 0.0], [0.95, 0.05, 0.0], [0.0, 0.0, 1.0]])
    tracks = track_levels([swap, np.eye(3)])
    np.testing.assert_array_equal(tracks, [[0, 1, 1], [1, 0, 0], [2, 2, 2]])


def test_parallel_workers_match_serial_run():
    p = double_well_project((36, 16))
    values = np.linspace(-0.2, 0.2, 6)
    serial = run_sweep(p, "tilt", values, states=2)
    parallel = run_sweep(p, "tilt", values, states=2, workers=2)
    np.testing.assert_allclose(parallel.energies, serial.energies, rtol=1e-9)
    np.testing.assert_array_equal(parallel.tracks, serial.tracks)


def test_local_dask_cluster_matches_local_run():
    distributed = pytest.importorskip("distributed")
    p = double_well_project((36, 16))
    values = np.linspace(-0.2, 0.2, 4)
    serial = run_sweep(p, "tilt", values, states=2)
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False,
                                  dashboard_address=None) as cluster:
        remote = run_sweep(p, "tilt", values, states=2, cluster=cluster.scheduler_address, workers=2)
    np.testing.assert_allclose(remote.energies, serial.energies, rtol=1e-9)


def test_cluster_that_does_not_answer_fails_fast():
    pytest.importorskip("distributed")
    t = time.perf_counter()
    with pytest.raises(InputError, match="did not answer"):
        run_sweep(double_well_project((36, 16)), "tilt", [0.0, 0.1, 0.2, 0.3], cluster="tcp://127.0.0.1:9",
                  cluster_timeout=2.0)
    assert time.perf_counter() - t < 15


def test_cancel_keeps_partial_result():
    p = double_well_project((36, 16))
    calls = []

    def stop():
        calls.append(1)
        return len(calls) > 3

    with pytest.raises(Cancelled) as info:
        run_sweep(p, "tilt", np.linspace(-0.2, 0.2, 8), states=2, should_stop=stop)
    part = info.value.partial
    assert part is not None and part.values.size == 3 and not part.complete


def test_save_and_load_round_trip(tmp_path):
    p = double_well_project((36, 16))
    r = run_sweep(p, "tilt", np.linspace(-0.2, 0.2, 5), states=2)
    npz, csv = save_sweep(r, tmp_path / "run")
    back = load_sweep(npz)
    np.testing.assert_allclose(back.energies, r.energies)
    np.testing.assert_array_equal(back.tracks, r.tracks)
    assert back.project == r.project and back.parameter == "tilt"
    head = csv.read_text().splitlines()[0]
    assert head.startswith("tilt,") and "[1]" in head      # dimensionless energy unit "1"


def test_sweep_a_field_component_and_spin_crossings():
    """Zeeman: each orbital level splits by g mu_B B (no spin-orbit coupling); levels of opposite spin
    cross freely, and the two orbital levels of the double well (opposite parity under r -> -r, which a
    perpendicular B preserves) cross too (common practice): every close approach here is a crossing."""
    p = dataclasses.replace(double_well_project((36, 16)), spin=True,
                            material=MaterialSpec(mass=1.0, g_factor=2.0))
    r = run_sweep(p, "magnetic_field[2]", np.linspace(0.0, 8.0, 9), states=2)
    assert r.energies.shape == (9, 4)
    assert set(np.unique(r.observables["spin"])) == {-0.5, 0.5}
    # at B: splitting of the ground orbital level = g mu_B B = 2 * 0.5 * B in dimensionless units
    # at B = 8 the Zeeman splitting g mu_B B = 2 * 0.5 * 8 = 8 exceeds the orbital tunnel splitting, so the
    # four levels are (E0 - 4, E1 - 4, E0 + 4, E1 + 4): pairs 0/2 and 1/3 differ by exactly 8
    e = r.energies[-1]
    assert e[2] - e[0] == pytest.approx(8.0, rel=1e-9) and e[3] - e[1] == pytest.approx(8.0, rel=1e-9)
    assert all(c.kind == "crossing" for c in r.anticrossings)


def test_bad_sweeps_get_clear_errors():
    p = double_well_project((36, 16))
    with pytest.raises(InputError, match="cannot sweep 'nope'"):
        run_sweep(p, "nope", [0.0, 1.0])
    with pytest.raises(InputError, match="at least one value"):
        run_sweep(p, "tilt", [])
    bad = dataclasses.replace(p, potential=p.potential + (FormulaTerm("root", "sqrt(4 - Vb)*x"),))
    with pytest.raises(WellscapeError, match=r"at Vb = 5"):
        run_sweep(bad, "Vb", [5.0, 6.0])


def test_two_electron_sweep_reports_exchange_per_point():
    """A sweep of the bundled two-electron double dot in detuning carries J per point; by Lieb & Mattis
    (Phys. Rev. 125, 164 (1962)) the ground state is a singlet, so J > 0, and J grows as the detuning
    pulls both electrons towards one dot (the doubly occupied singlet takes over)."""
    project = load_project(Path(__file__).resolve().parents[2] / "sample_projects"
                           / "gaas_double_dot_two_electrons.json")
    r = run_sweep(project, "eps", [0.0, 2.0, 4.0], refine=False)
    two = r.to_json_dict()["two_electron"]
    j = np.array(two["exchange"])
    dj = np.array(two["exchange_uncertainty"])
    assert j.shape == (3,) and np.all(j > 0)
    assert np.all(np.diff(j) > dj[1:] + dj[:-1])
    assert all(s[0] == "singlet" for s in two["spin"])
