"""Headless command line: solve, potential, check; exit codes and messages."""
from __future__ import annotations

import csv
import json
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from app.cli import main

ROOT = Path(__file__).resolve().parents[2]
SAMPLE = ROOT / "sample_projects" / "elliptical_dot.json"


def run(capsys, *args):
    code = main(list(args))
    out = capsys.readouterr()
    return code, out.out, out.err


def test_solve_prints_grouped_table(capsys):
    code, out, err = run(capsys, "solve", str(SAMPLE), "--states", "4")
    assert code == 0
    assert "E [meV]" in out and "<x> [nm]" in out and "parity" in out
    assert "x- y+" in out          # the x-like level of the split second shell


def test_solve_json_and_out_files(capsys, tmp_path):
    code, out, err = run(capsys, "solve", str(SAMPLE), "--states", "3", "--json", "--out", str(tmp_path))
    assert code == 0
    doc = json.loads(out)
    assert set(doc) >= {"energies", "groups", "units", "project", "solver"}
    assert doc["units"]["energy"] == "meV" and len(doc["energies"]) >= 3
    assert doc["project"]["schema_version"] == 2
    rows = list(csv.reader((tmp_path / "levels.csv").open(encoding="utf-8")))
    assert rows[0][1] == "energy [meV]" and len(rows) == len(doc["energies"]) + 1
    with np.load(tmp_path / "states.npz", allow_pickle=False) as npz:
        assert npz["states"].shape[0] == len(doc["energies"])
        np.testing.assert_allclose(npz["energies"], doc["energies"])
        assert json.loads(str(npz["project"]))["title"] == doc["project"]["title"]


def test_set_overrides_a_parameter(capsys):
    _, out0, _ = run(capsys, "solve", str(SAMPLE), "--states", "1", "--json")
    _, out1, _ = run(capsys, "solve", str(SAMPLE), "--states", "1", "--json", "--set", "hw=8")
    e0 = json.loads(out0)["energies"][0]
    e1 = json.loads(out1)["energies"][0]
    assert e1 == pytest.approx(2 * e0, rel=1e-4)   # levels scale with hbar*omega


def test_potential_export_csv_and_npy(capsys, tmp_path):
    code, out, _ = run(capsys, "potential", str(SAMPLE), "-o", str(tmp_path / "v.csv"))
    assert code == 0
    table = np.loadtxt(tmp_path / "v.csv", delimiter=",")
    assert table.shape == (64, 65)
    code, _, _ = run(capsys, "potential", str(SAMPLE), "-o", str(tmp_path / "v.npy"))
    v = np.load(tmp_path / "v.npy", allow_pickle=False)
    np.testing.assert_allclose(v, table[:, 1:], rtol=1e-9)


def test_check_reports_without_solving(capsys):
    code, out, _ = run(capsys, "check", str(SAMPLE))
    assert code == 0 and "valid" in out and "memory" in out


def test_user_errors_exit_nonzero_without_traceback(capsys, tmp_path):
    bad = tmp_path / "bad.json"
    bad.write_text('{"schema_version": 2, "units": "semiconductor", "material": "GaAs", '
                   '"grid": {"lower": [0, 0], "upper": [1, 1], "points": [10, "abc"]}, "potential": []}')
    code, out, err = run(capsys, "solve", str(bad))
    assert code == 2 and "grid.points[1]" in err and "Traceback" not in err
    code, out, err = run(capsys, "solve", str(tmp_path / "missing.json"))
    assert code == 2 and "no such project file" in err
    code, out, err = run(capsys, "solve", str(SAMPLE), "--set", "nope=1")
    assert code == 2 and "unknown parameter" in err


def test_command_line_does_not_import_qt():
    """The console script must run headless: solving must not load PySide6 or pyqtgraph."""
    code = (f"import sys; from app.cli import main; main(['check', {str(SAMPLE)!r}]); "
            "bad = [m for m in sys.modules if m.startswith(('PySide6', 'pyqtgraph'))]; "
            "sys.exit(1 if bad else 0)")
    proc = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr


def test_sweep_command_json_and_table(capsys, tmp_path):
    """`wellscape sweep` prints the documented JSON and writes sweep.npz/csv."""
    double = ROOT / "sample_projects" / "atom_tilted_double_well.json"
    code, out, err = run(capsys, "sweep", str(double), "--vary", "tilt", "--from", "-0.02", "--to", "0.02",
                         "--steps", "5", "--states", "2", "--json", "--out", str(tmp_path))
    assert code == 0, err
    doc = json.loads(out)
    assert set(doc) >= {"parameter", "values", "energies", "tracks", "anticrossings"}
    assert doc["parameter"] == "tilt" and len(doc["values"]) == 5
    assert any(a["levels"] == [0, 1] for a in doc["anticrossings"])
    assert (tmp_path / "sweep.npz").exists() and (tmp_path / "sweep.csv").exists()
    code, out, err = run(capsys, "sweep", str(double), "--vary", "tilt", "--from", "-0.02", "--to", "0.02",
                         "--steps", "5", "--states", "2")
    assert code == 0 and "anticrossing of levels 0 & 1 at tilt = " in out and "h*kHz" in out
    assert "from -0.02 to 0.02 h·kHz/µm" in out                  # the parameter's unit from the project
    assert re.search(r"at tilt = [-0-9.e±() ]+ h·kHz/µm", out), out
    assert "checked for missed levels at 5 of 5 values" in out
    assert "a sweep of 5 solves of 2 states" in err          # the estimate comes first
    code, out, err = run(capsys, "sweep", str(double), "--vary", "tilt", "--from", "0", "--to", "1",
                         "--steps", "0")
    assert code == 2 and "steps" in err


def test_solve_count_verifies_against_the_analytic_elliptical_oscillator(capsys):
    """``--count``: the eigenvalues below the shift, counted by Sylvester's law of inertia
    (J. J. Sylvester, Phil. Mag. 4, 138 (1852)), equal the number of levels of the anisotropic
    oscillator E = hw sqrt(1 - ell) (nx + 1/2) + hw sqrt(1 + ell) (ny + 1/2) below it (textbook
    separable oscillator; the sample writes omega_x = omega sqrt(1 - ell), omega_y = omega sqrt(1 + ell))."""
    code, out, err = run(capsys, "solve", str(SAMPLE), "--states", "6", "--count", "--json")
    assert code == 0
    doc = json.loads(out)
    count = doc["count"]
    params = doc["project"]["parameters"]
    wx, wy = params["hw"] * np.sqrt(1 - params["ell"]), params["hw"] * np.sqrt(1 + params["ell"])
    exact = np.array([wx * (i + 0.5) + wy * (j + 0.5) for i in range(20) for j in range(20)])
    assert count["certified"] and count["label"] == "count verified"
    assert count["count_below"] == int(np.sum(exact < count["shift"])) == len(doc["energies"])
    code, out, err = run(capsys, "solve", str(SAMPLE), "--states", "6", "--count")
    assert code == 0 and "[ok] count verified" in out and "meV, as many as the solve returned" in out


def test_sweep_interrupted_writes_what_was_solved(capsys, tmp_path, monkeypatch):
    """Ctrl-C during `wellscape sweep --json --out DIR`: the points solved so far are printed and written,
    marked incomplete, and the exit code is 130 (interrupted)."""
    import core.sweep.points as points
    original = points.PointSolver.solve
    calls = []

    def flaky(self, *args, **kwargs):
        calls.append(1)
        if len(calls) == 4:
            raise KeyboardInterrupt
        return original(self, *args, **kwargs)

    monkeypatch.setattr(points.PointSolver, "solve", flaky)
    double = ROOT / "sample_projects" / "atom_tilted_double_well.json"
    code, out, err = run(capsys, "sweep", str(double), "--vary", "tilt", "--from", "-0.02", "--to", "0.02",
                         "--steps", "6", "--states", "2", "--json", "--out", str(tmp_path))
    assert code == 130
    doc = json.loads(out)
    assert doc["complete"] is False and len(doc["values"]) == 3
    assert "incomplete" in err
    from core.sweep import load_sweep
    back = load_sweep(tmp_path / "sweep.npz")
    assert not back.complete and back.values.size == 3


def test_a_long_call_without_fractions_shows_its_elapsed_time_only_on_a_terminal(capsys):
    """Progress.waiting: a line with the elapsed time while a long call runs (a factorisation),
    nothing when stderr is not a terminal (enabled=False, as when piped)."""
    import time

    from app.cli_common import Progress
    with Progress("counting levels", enabled=True).waiting("factorising", after=0.05):
        time.sleep(0.8)
    err = capsys.readouterr().err
    assert "counting levels: factorising ..." in err and err.endswith("\n")
    with Progress("counting levels", enabled=False).waiting("factorising", after=0.0):
        time.sleep(0.2)
    assert capsys.readouterr().err == ""
