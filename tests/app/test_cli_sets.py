"""``--set`` on solve, potential and sweep: parameters, field components and gate voltages.

Source: [FD] V. Fock, Z. Phys. 47, 446 (1928); C. G. Darwin, Proc. Camb. Phil. Soc. 27, 86 (1931):
the ground level of a 2D isotropic oscillator hbar w0 in a perpendicular field B is
hbar * sqrt(w0^2 + wc^2 / 4), wc = e B / m*.  The template project (GaAs, hbar w0 = 3 meV, 64 x 64
points over 240 nm) gives the oscillator levels to 1e-3 relative (tests/core/test_potentials.py);
at 1 T the orbit shrinks (sqrt(hbar / (m* Omega)) is 3 % smaller), so the same tolerance holds.
"""
from __future__ import annotations

import dataclasses
import json
import math

import numpy as np

from app.cli import main
from core.project import GateSpec, GatesTerm, load_project, new_project, save_project
from core.units import get_units


def run(capsys, *args):
    code = main([str(a) for a in args])
    out = capsys.readouterr()
    return code, out.out, out.err


def fock_darwin_ground(hw: float, b: float) -> float:
    hwc = get_units("semiconductor").cyclotron_energy(0.067, b)
    return math.sqrt(hw**2 + hwc**2 / 4.0)


def test_solve_set_field_component_gives_fock_darwin_ground_level(capsys, tmp_path):
    path = save_project(new_project("Sandpiper dot"), tmp_path / "dot.json")
    code, out, err = run(capsys, "solve", path, "--states", "3", "--json", "--set", "magnetic_field[2]=1",
                         "--set", "hw=2.5")
    assert code == 0, err
    doc = json.loads(out)
    assert doc["project"]["magnetic_field"] == [0.0, 0.0, 1.0] and doc["parameters"]["hw"] == 2.5
    # hw = 2.5 with the template's l0 for 3 meV: the formula's curvature is 2.5/3 of the 3 meV dot's,
    # so hbar w0 = 3 * sqrt(2.5 / 3) meV
    hw0 = 3.0 * math.sqrt(2.5 / 3.0)
    np.testing.assert_allclose(doc["energies"][0], fock_darwin_ground(hw0, 1.0), rtol=1e-3)


def test_potential_set_gate_voltage(capsys, tmp_path):
    gates = GatesTerm("gates", 50.0, (GateSpec("P1", -0.2, rectangle=(-20.0, -20.0, 20.0, 20.0)),))
    project = dataclasses.replace(new_project("Sandpiper gates"), potential=(gates,))
    path = save_project(project, tmp_path / "g.json")
    outs = []
    for volts in ("-0.2", "-0.4"):
        code, _, err = run(capsys, "potential", path, "-o", tmp_path / f"v{volts}.npy", "--set", f"gate:P1={volts}")
        assert code == 0, err
        outs.append(np.load(tmp_path / f"v{volts}.npy"))
    # the bare gate potential is linear in the gate voltage [Davies, Larkin, Sukhorukov 1995]
    np.testing.assert_allclose(outs[1], 2.0 * outs[0], rtol=1e-12)
    assert load_project(path).potential[0].gates[0].voltage == -0.2          # the file is unchanged


def test_sweep_set_fixes_a_field_component(capsys, tmp_path):
    path = save_project(new_project("Sandpiper sweep"), tmp_path / "dot.json")
    code, out, err = run(capsys, "sweep", path, "--vary", "hw", "--from", "2", "--to", "3", "--steps", "2",
                         "--states", "3", "--no-refine", "--json", "--set", "magnetic_field[2]=1")
    assert code == 0, err
    doc = json.loads(out)
    ground = [min(row) for row in doc["energies"]]
    expected = [fock_darwin_ground(3.0 * math.sqrt(hw / 3.0), 1.0) for hw in (2.0, 3.0)]
    np.testing.assert_allclose(ground, expected, rtol=1e-3)


def test_set_errors_are_one_line(capsys, tmp_path):
    path = save_project(new_project("Sandpiper errors"), tmp_path / "dot.json")
    code, _, err = run(capsys, "solve", path, "--set", "magnetic_field[7]=1")
    assert code == 2 and "unknown parameter, field component or gate" in err and "magnetic_field[2]" in err
    assert err.count("\n") == 1
    code, _, err = run(capsys, "sweep", path, "--vary", "hw", "--from", "2", "--to", "3", "--steps", "2",
                       "--set", "hw=2")
    assert code == 2 and "swept quantity" in err and err.count("\n") == 1
