"""Level labels are shown only when the symmetry they name exists; close levels carry their splitting."""
from __future__ import annotations

import numpy as np
import pytest

from core.analysis import angular_momentum_z_uncertainty
from core.labels import LZ_SHARP, cluster_text, clusters, level_labels, mirror_axes_kept, splitting_text
from core.project import project_from_dict
from core.study import solve_project
from core.units import get_units

MASS = 0.067
HW = 3.0


def _project(formula: str, *, half=120.0, points=48, states=6, b=0.0, params=None):
    kin = get_units("semiconductor").kinetic_prefactor(MASS)
    return project_from_dict({
        "schema_version": 2, "title": "t", "units": "semiconductor",
        "material": {"name": "GaAs", "mass": MASS, "g_factor": -0.44},
        "grid": {"lower": [-half, -half], "upper": [half, half], "points": [points, points], "boundary": "hard-wall"},
        "parameters": {"hw": HW, "kin": kin, **(params or {})},
        "potential": [{"kind": "formula", "label": "V", "enabled": True, "formula": formula}],
        "electric_field": [0.0, 0.0], "magnetic_field": [0.0, 0.0, b], "spin": False,
        "solver": {"states": states, "scheme": "spectral", "tolerance": 1e-9}})


OSC = "hw**2*(x**2 + y**2)/(4*kin)"


def test_splitting_reads_in_the_unit_that_fits():
    assert splitting_text(0.0387, "meV") == "38.7 µeV"
    assert splitting_text(2.5, "meV") == "2.5 meV"
    assert splitting_text(3.2e-5, "meV") == "32 neV"
    assert splitting_text(0.5, "h*kHz") == "500 h·Hz"
    assert clusters([1.0, 1.00004, 2.0, 3.0, 3.0001], 0.01) == [[0, 1], [2], [3, 4]]
    assert cluster_text([1.0, 1.0000387], [0, 1], "meV") == "ΔE = 38.7 neV"


def test_circular_dot_labels_lz_quantum_numbers():
    """Isotropic oscillator: the first excited shell is the m = -1, +1 doublet and the ground state m = 0
    (Fock-Darwin at B = 0: V. Fock, Z. Phys. 47, 446 (1928)); L_z is sharp on each multiplet."""
    r = solve_project(_project(OSC))
    labs = level_labels(r, r.groups)
    assert labs[0]["lz_text"] == "L_z = 0 ħ"
    assert labs[1]["members"] == [1, 2] and labs[1]["lz_text"] == "L_z = −1, +1 ħ"
    assert labs[1]["lz_spread"] < 1e-3
    assert labs[0]["parity"] == "x+ y+" and labs[1]["parity"] == "x± y±"


def test_double_dot_shows_no_lz_but_its_mirror_parity():
    """Two Gaussian wells 60 nm apart: L_z is not conserved (the states sit off the axis), so no L_z label,
    though L_z restricted to the near-degenerate pair has eigenvalues near 0 (what used to be shown as
    "L_z = 0, 0").  The mirror x -> -x is exact: the bonding state is even and the antibonding odd
    (common practice for a symmetric double well)."""
    v = "-12*(exp(-((x - 30)**2 + y**2)/(2*14**2)) + exp(-((x + 30)**2 + y**2)/(2*14**2)))"
    r = solve_project(_project(v, states=4))
    labs = level_labels(r, r.groups)
    assert all(lab["lz_text"] == "" for lab in labs)
    assert all(lab["lz_spread"] > LZ_SHARP for lab in labs)
    pair = angular_momentum_z_uncertainty(r.grid, r.states, [0, 1])
    assert pair > 10 * LZ_SHARP
    from core.analysis import angular_momentum_z_multiplet
    assert np.all(np.abs(angular_momentum_z_multiplet(r.grid, r.states, [0, 1])) < 0.05)
    assert labs[0]["parity"].startswith("x+") and labs[1]["parity"].startswith("x-")


def test_a_field_removes_the_mirror_labels_and_keeps_fock_darwin_lz():
    """Circular dot at B_z = 2 T: mirrors are not symmetries (B is a pseudovector: x -> -x reverses B_z), so
    no parity is shown; L_z stays a good quantum number in the symmetric gauge about the dot's centre and
    the second level is the m of the lower Fock-Darwin branch, E = hbar*Omega*2 - hbar*omega_c/2 with
    Omega = sqrt(omega0^2 + omega_c^2/4) (Fock 1928; C. G. Darwin, Proc. Camb. Phil. Soc. 27, 86 (1931)),
    to 1e-6 relative (spectral scheme)."""
    r = solve_project(_project(OSC, b=2.0))
    labs = level_labels(r, r.groups)
    assert all(lab["parity"] == "" for lab in labs)
    wc = get_units("semiconductor").cyclotron_energy(MASS, 2.0)
    omega = np.sqrt(HW**2 + wc**2 / 4)
    assert r.energies[0] == pytest.approx(omega, rel=1e-6)
    assert r.energies[1] == pytest.approx(2 * omega - wc / 2, rel=1e-6)
    assert labs[0]["lz_text"] == "L_z = 0 ħ"
    assert labs[1]["lz_text"] in ("L_z = −1 ħ", "L_z = +1 ħ")


def test_mirror_axes_kept_by_a_field():
    """A mirror x -> -x keeps a field B only when B is along x (a pseudovector's parallel component)."""
    assert mirror_axes_kept(["x", "y", "z"], (1.0, 0.0, 0.0), 3) == ["x"]
    assert mirror_axes_kept(["x", "y", "z"], (0.0, 0.0, 1.0), 3) == ["z"]
    assert mirror_axes_kept(["x", "y"], (0.0, 0.0, 1.0), 2) == []
    assert mirror_axes_kept(["x", "y"], (1.0, 0.0, 0.0), 2) == ["x", "y"]     # in 2D only B_z couples
