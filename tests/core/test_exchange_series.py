"""Singlet-triplet crossings along a sweep (core.exchange_series) and the two-electron sweep columns
in sweep files."""
from types import SimpleNamespace

import numpy as np
import pytest
from scipy.optimize import brentq

from core import two_electron as te
from core.errors import InputError
from core.exchange_series import exchange_points, singlet_triplet_crossings, spin_tracks
from core.grid import Grid
from core.solve import solve_states
from core.sweepfile import validate_two_electron
from tests.core.radial_reference import two_electron_energy


def _sweep(values, j, dj=None, zeeman=None):
    n = len(values)
    energies = [[0.0, float(v)] if v is not None else [0.0] for v in j]
    spins = [["singlet", "triplet"] if v is not None else ["singlet"] for v in j]
    return SimpleNamespace(values=np.asarray(values, float), two_electron={
        "energies": energies, "spin": spins, "exchange": list(j),
        "exchange_uncertainty": list(dj) if dj is not None else [0.0] * n,
        "zeeman_splitting": list(zeeman) if zeeman is not None else [None] * n})


def test_crossing_of_a_smooth_j_is_placed_within_its_stated_interpolation_error():
    """J(x) = 0.8 - x^2 sampled every 0.25: the root sqrt(0.8) (analytic) must lie within the reported
    uncertainty of the linear interpolation (|J''| h^2 / 8 over the slope), which is itself small."""
    x = np.arange(0.0, 1.51, 0.25)
    found = singlet_triplet_crossings(_sweep(x, 0.8 - x**2))
    assert len(found) == 1
    c = found[0]
    assert c.component == "S_z = 0" and c.ground_before == "singlet" and c.between == (3, 4)
    assert abs(c.at - np.sqrt(0.8)) <= c.uncertainty < 0.02
    assert "exact (total spin is conserved)" in c.words("B", "T")


def test_zeeman_component_and_missing_triplets():
    """With a Zeeman splitting E_z the S_z = -1 component meets the singlet where J = E_z (linear J:
    the root is exact); points without a triplet are skipped, never made a crossing."""
    x = np.linspace(0.0, 1.0, 5)
    j = 1.0 - x
    found = singlet_triplet_crossings(_sweep(x, j, zeeman=[0.5] * 5))
    assert [c.component for c in found] == ["S_z = -1", "S_z = 0"]
    assert found[0].at == pytest.approx(0.5, abs=1e-12) and found[1].at == pytest.approx(1.0, abs=1e-12)
    gap = _sweep(x, [1.0, None, -1.0, -1.0, -1.0])
    assert singlet_triplet_crossings(gap) == []
    assert exchange_points(gap)["no_triplet"].tolist() == [False, True, False, False, False]
    tracks = spin_tracks(gap)
    assert tracks["singlet"].shape == (1, 5) and np.isnan(tracks["triplet"][0, 1])


def test_ground_state_transition_in_field_from_the_sweep_columns():
    """A parabolic dot (omega = 1, repulsion kappa / r with kappa = 2) in a perpendicular field: the
    ground state turns from singlet to triplet at B* = 0.9634 (M. Wagner, U. Merkt, A. V. Chaplik,
    Phys. Rev. B 45, 1951 (1992); B* from the radial reference, brentq).  From four fields around it,
    the crossing must be within 3 % of B* (the issue's tolerance) and its uncertainty (interpolation
    plus J's basis uncertainty over the slope) must cover the true distance."""
    kappa = 2.0
    bstar = brentq(lambda b: two_electron_energy(-1, 1.0, kappa, b) - two_electron_energy(0, 1.0, kappa, b),
                   0.1, 3.0, xtol=1e-10)
    g = Grid([-6.5, -6.5], [6.5, 6.5], [32, 32])
    fields = bstar * np.array([0.85, 0.95, 1.05, 1.15])
    points = []
    for b in fields:
        sp = solve_states(g, lambda x, y: 0.5 * (x**2 + y**2), states=45, scheme="spectral",
                          magnetic_field=[0.0, 0.0, b])
        points.append(te.two_electron_levels(g, sp.energies, sp.states, strength=kappa, groups=sp.groups,
                                             tolerance=1e-3))
    sweep = SimpleNamespace(values=fields, two_electron=te.sweep_columns(points))
    found = singlet_triplet_crossings(sweep)
    assert len(found) == 1 and found[0].ground_before == "singlet"
    assert found[0].at == pytest.approx(bstar, rel=3e-2)
    assert abs(found[0].at - bstar) <= found[0].uncertainty


def test_sweep_file_columns_are_checked():
    good = _sweep([0.0, 1.0], [1.0, -1.0]).two_electron
    validate_two_electron(good, 2, "two_electron")
    for bad, words in ((dict(good, exchange=[1.0]), "one entry per swept value"),
                       (dict(good, exchange=[float("nan"), 1.0]), "finite number or null"),
                       (dict(good, spin=[["singlet", "quartet"], ["singlet", "triplet"]]), "singlet"),
                       (dict(good, energies=[[0.0], [0.0, 1.0]]), "as many energies as spins"),
                       ("nope", "must be an object")):
        with pytest.raises(InputError, match=words):
            validate_two_electron(bad, 2, "two_electron")


def test_sweep_file_keeps_the_two_electron_columns(tmp_path):
    """A saved sweep of a two-electron project reads back with the same J per point (bookkeeping;
    the values themselves are tested against references above and in test_two_electron.py)."""
    from core.project import project_from_dict
    from core.sweep import load_sweep, run_sweep, save_sweep
    from tests.core.test_two_electron_project import _doc
    p = project_from_dict(_doc(electrons=2, solver={"states": 10, "scheme": "spectral"}))
    sweep = run_sweep(p, "hw", [3.0, 4.0, 5.0], refine=False)
    assert sweep.two_electron is not None
    npz, _csv = save_sweep(sweep, tmp_path / "j")
    back = load_sweep(npz)
    assert back.two_electron["exchange"] == sweep.two_electron["exchange"]
    assert back.two_electron["spin"] == sweep.two_electron["spin"]
    doc = back.to_json_dict()["two_electron"]
    # J > 0 at B = 0 (E. Lieb, D. Mattis, Phys. Rev. 125, 164 (1962))
    assert doc["singlet_triplet_crossings"] == []
    assert all(j > 0 for j in doc["exchange"])
