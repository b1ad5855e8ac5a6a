"""Bound or not: states held by the grid's hard walls are flagged "box state (not bound)"."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from scipy.linalg import eigh_tridiagonal

from core.bound import BOX_STATE, box_states, confinement_rim
from core.project import load_project, project_from_dict
from core.report import format_level_table, level_rows
from core.study import solve_project
from core.units import get_units

SAMPLES = Path(__file__).resolve().parents[2] / "sample_projects"
MASS = 0.067


def _fd2_ground(n: int, h: float, kin: float, v=None) -> float:
    """Lowest eigenvalue of -kin d^2/dx^2 + V on n interior points (second differences, hard walls),
    from scipy's eigh_tridiagonal (LAPACK stebz/stein): the outside reference for a face's rim."""
    d = np.full(n, 2.0 * kin / h**2) + (0.0 if v is None else np.asarray(v, dtype=float))
    e = np.full(n - 1, -kin / h**2)
    return float(eigh_tridiagonal(d, e, eigvals_only=True, select="i", select_range=(0, 0))[0])


def _project(formula: str, half: float, points: int, states: int = 8, scheme: str = "spectral"):
    kin = get_units("semiconductor").kinetic_prefactor(MASS)
    return project_from_dict({
        "schema_version": 2, "title": "t", "units": "semiconductor", "material": {"name": "GaAs", "mass": MASS},
        "grid": {"lower": [-half, -half], "upper": [half, half], "points": [points, points], "boundary": "hard-wall"},
        "parameters": {"hw": 3.0, "kin": kin},
        "potential": [{"kind": "formula", "label": "V", "enabled": True, "formula": formula}],
        "electric_field": [0.0, 0.0], "magnetic_field": [0.0, 0.0, 0.0], "spin": False,
        "solver": {"states": states, "scheme": scheme, "tolerance": 1e-9}})


def test_every_state_of_an_empty_box_is_a_box_state():
    """V = 0 in a hard-wall square: nothing binds, every level is the box's.  The rim is the ground
    level of a face (one line of the grid, V = 0 on it), compared with scipy's eigh_tridiagonal of the
    same second-difference matrix (relative 1e-12: both are LAPACK eigenvalues of one tridiagonal)."""
    p = _project("0*x", 50.0, 30, states=6, scheme="fd2")
    r = solve_project(p)
    flags = box_states(r)
    assert all(f["box"] and f["above_rim"] for f in flags)
    kin = get_units("semiconductor").kinetic_prefactor(MASS)
    ref = _fd2_ground(30, r.grid.spacing[0], kin)
    assert flags[0]["rim"] == pytest.approx(ref, rel=1e-12)
    assert confinement_rim(r.grid, r.potential, r.masses, "semiconductor") == pytest.approx(ref, rel=1e-12)


def test_a_well_contained_oscillator_is_bound():
    """A parabolic dot (hbar*omega = 3 meV, l0 = 19.5 nm) in a box reaching 6 l0: every level of the
    first four shells is bound, and they are the oscillator's E = hbar*omega (n + 1) (Fock-Darwin at
    B = 0: V. Fock, Z. Phys. 47, 446 (1928)) to 1e-6 relative (spectral scheme, converged here)."""
    p = _project("hw**2*(x**2 + y**2)/(4*kin)", 120.0, 48, states=10)
    r = solve_project(p)
    expected = 3.0 * np.array([1, 2, 2, 3, 3, 3, 4, 4, 4, 4])
    assert np.allclose(r.energies[:10], expected, rtol=1e-6)
    flags = box_states(r)
    assert not any(f["box"] for f in flags)
    assert all(f["wall_share"] < 1e-6 for f in flags)
    rows = level_rows(r)
    assert all(row["bound"] and row["box_state"] == "" for row in rows)
    assert BOX_STATE not in format_level_table(r)


def test_lens_at_small_radius_has_box_states_above_the_barrier():
    """The bundled lens dot (V0 = 400 meV barrier, wetting layer to the side walls): at R = 8 nm the levels
    above 400 meV are box states, at the default R = 12 nm none is.  The rim is the wetting layer's
    subband edge at the side faces: separable there, so it is the ground level of the line across z plus
    the one across y, each from scipy's eigh_tridiagonal (same second differences, relative 1e-9)."""
    lens = load_project(SAMPLES / "lens_dot_3d.json")
    default = solve_project(lens)
    assert not any(f["box"] for f in box_states(default))
    small = solve_project(lens, parameters={"R": 8.0})
    flags = box_states(small)
    above = small.energies > 400.0
    assert above.sum() >= 2
    assert all(f["box"] for f, a in zip(flags, above) if a)
    assert not flags[0]["box"] and small.energies[0] < 300.0
    g, kin = small.grid, get_units("semiconductor").kinetic_prefactor(0.04)
    face = small.potential[0, 0, :]                       # V along z at the side wall (the same for every y)
    assert np.allclose(small.potential[0], face[None, :])
    ref = _fd2_ground(g.points[2], g.spacing[2], kin, face) + _fd2_ground(g.points[1], g.spacing[1], kin)
    assert flags[0]["rim"] == pytest.approx(ref, rel=1e-9)
    table = format_level_table(small)
    assert BOX_STATE in table and "enlarge the grid or deepen the confinement" in table
    rows = level_rows(small)
    assert [not r["bound"] for r in rows] == [bool(any(flags[i]["box"] for i in r["levels"])) for r in rows]
