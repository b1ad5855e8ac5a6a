"""Data export (core.export): levels CSV with units, states .npz with axes and units, sweeps as
CSV and .npz (readable by core.sweep.load_sweep), optional HDF5, panel tables.

The physics check uses the two-dimensional isotropic harmonic oscillator: shell N holds N + 1
degenerate states at E = (N + 1) hbar*omega (any quantum mechanics text, e.g. C. Cohen-Tannoudji,
B. Diu, F. Laloe, Quantum Mechanics, ch. V).
"""
from __future__ import annotations

import csv
import io
import json
import sys

import numpy as np
import pytest

from core.errors import InputError
from core.export import (
    hdf5_available,
    panel_csv_text,
    parameter_unit,
    read_states_npz,
    sweep_csv_text,
    write_hdf5,
    write_levels_csv,
    write_states_npz,
    write_sweep_csv,
    write_sweep_npz,
)
from core.project import project_from_dict
from core.study import solve_project
from core.units import get_units

HW = 3.0
MASS = 0.067


def oscillator_project(points=32, half=100.0, states=6):
    kin = get_units("semiconductor").kinetic_prefactor(MASS)
    doc = {"schema_version": 2, "title": "Export oscillator", "units": "semiconductor",
           "material": {"name": "GaAs", "mass": MASS},
           "grid": {"lower": [-half, -half], "upper": [half, half], "points": [points, points],
                    "boundary": "hard-wall"},
           "parameters": {"hw": HW, "kin": kin},
           "potential": [{"kind": "formula", "label": "parabola", "enabled": True,
                          "formula": "hw**2*(x**2 + y**2)/(4*kin)"}],
           "electric_field": [0.0, 0.0], "magnetic_field": [0.0, 0.0, 0.0], "spin": False,
           "solver": {"states": states, "scheme": "spectral", "tolerance": 1e-8}}
    return project_from_dict(doc)


@pytest.fixture(scope="module")
def osc():
    return solve_project(oscillator_project())


def sweep_of(project, parameter="magnetic_field[2]", gap=0.2):
    """Two levels with an anticrossing of minimum gap ``gap`` at 0 (the two-level model)."""
    from core.sweep import Anticrossing, SweepResult
    x = np.linspace(-1.0, 1.0, 21)
    root = np.sqrt(x ** 2 + gap ** 2 / 4)
    energies = np.stack([10.0 - root, 10.0 + root, np.full_like(x, 13.0)], axis=1)
    tracks = np.tile(np.arange(3)[:, None], (1, x.size))
    ac = Anticrossing(at=0.0, gap=gap, tracks=(0, 1), kind="anticrossing", index=10, sampled_gap=gap,
                      fit={"gap": gap})
    obs = {"x": np.zeros_like(energies)}
    return SweepResult(parameter=parameter, values=x, energies=energies, tracks=tracks, anticrossings=(ac,),
                       observables=obs, project=project)


# --- levels ----------------------------------------------------------------------------------

def test_levels_csv_has_units_and_the_oscillator_shells(osc, tmp_path):
    path = write_levels_csv(osc, tmp_path / "levels.csv")
    rows = list(csv.reader(path.open(encoding="utf-8")))
    head = rows[0]
    assert head[:5] == ["level", "energy [meV]", "above ground [meV]", "multiplet", "multiplicity"]
    assert "<x> [nm]" in head and "<y> [nm]" in head and "residual [meV]" in head and "mirror parity" in head
    body = rows[1:]
    assert len(body) == osc.energies.size
    energies = np.array([float(r[1]) for r in body])
    assert np.array_equal(energies, osc.energies)                    # written at full precision
    assert [int(r[4]) for r in body] == [1, 2, 2, 3, 3, 3]            # shells of N + 1 states
    np.testing.assert_allclose(energies, [3, 6, 6, 9, 9, 9], rtol=2e-4)
    assert body[0][head.index("mirror parity")] == "x+ y+"
    assert float(body[0][head.index("<x> [nm]")]) == 0.0              # round-off positions written as 0


# --- states ----------------------------------------------------------------------------------

def test_states_npz_round_trip_with_axes_units_and_normalisation(osc, tmp_path):
    path = write_states_npz(osc, tmp_path / "states.npz", levels=[0, 3])
    data = read_states_npz(path)
    assert data["format"] == "wellscape-states"
    assert np.array_equal(data["states"], osc.states[[0, 3]])
    assert np.array_equal(data["energies"], osc.energies[[0, 3]])
    assert list(data["levels"]) == [0, 3]
    assert data["energy_unit"] == "meV" and data["length_unit"] == "nm"
    assert data["project"]["title"] == "Export oscillator" and data["parameters"]["hw"] == HW
    assert data["groups"][:2] == [[0], [1, 2]]
    # the file alone is enough to check the normalisation sum |psi|^2 dV = 1
    dx = np.diff(data["axis_x"])[0]
    dy = np.diff(data["axis_y"])[0]
    np.testing.assert_allclose((np.abs(data["states"]) ** 2).sum(axis=(1, 2)) * dx * dy, 1.0, rtol=1e-10)
    assert np.array_equal(data["potential"], osc.potential)


def test_states_reader_refuses_pickles_and_broken_files(tmp_path):
    bad = tmp_path / "objects.npz"
    np.savez(bad, states=np.array([{"a": 1}], dtype=object), energies=np.array([1.0]))
    with pytest.raises(InputError, match="plain arrays"):
        read_states_npz(bad)
    wrong = tmp_path / "wrong.npz"
    np.savez(wrong, states=np.zeros((2, 4, 4)), energies=np.zeros(3))
    with pytest.raises(InputError, match="energies"):
        read_states_npz(wrong)
    axes = tmp_path / "axes.npz"
    np.savez(axes, states=np.zeros((1, 4, 4)), energies=np.zeros(1), axis_x=np.zeros(5), axis_y=np.zeros(4))
    with pytest.raises(InputError, match="axes"):
        read_states_npz(axes)
    (tmp_path / "text.npz").write_text("not a zip")
    with pytest.raises(InputError):
        read_states_npz(tmp_path / "text.npz")
    with pytest.raises(InputError, match="no such"):
        read_states_npz(tmp_path / "missing.npz")


def test_the_solve_commands_states_file_reads_too(tmp_path):
    """``wellscape solve --out`` writes states.npz with a subset of these keys."""
    path = tmp_path / "states.npz"
    np.savez_compressed(path, energies=np.array([1.0, 2.0]), states=np.ones((2, 3, 3)), axis_x=np.arange(3.0),
                        axis_y=np.arange(3.0), energy_unit="meV", length_unit="nm", project=json.dumps({"title": "t"}))
    data = read_states_npz(path)
    assert data["energy_unit"] == "meV" and data["project"] == {"title": "t"}


def test_bad_requests_leave_existing_files_alone(osc, tmp_path):
    target = tmp_path / "states.npz"
    target.write_bytes(b"previous")
    with pytest.raises(InputError, match="not solved"):
        write_states_npz(osc, target, levels=[0, 99])
    assert target.read_bytes() == b"previous"
    with pytest.raises(InputError, match=r"\.npz"):
        write_states_npz(osc, tmp_path / "states.npy")
    with pytest.raises(InputError, match="folder"):
        write_levels_csv(osc, tmp_path / "nowhere" / "levels.csv")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["states.npz"]


# --- sweeps ----------------------------------------------------------------------------------

def test_sweep_csv_by_tracks_and_by_levels(osc, tmp_path):
    sweep = sweep_of(osc.project)
    assert parameter_unit(sweep) == "T"
    rows = list(csv.reader(io.StringIO(sweep_csv_text(sweep))))
    assert rows[0] == ["magnetic_field[2] [T]", "track 0 [meV]", "track 1 [meV]", "track 2 [meV]"]
    table = np.array(rows[1:], dtype=float)
    assert np.array_equal(table[:, 0], sweep.values)
    assert np.array_equal(table[:, 1:].T, sweep.track_energies())
    rows = list(csv.reader(io.StringIO(sweep_csv_text(sweep, by="levels"))))
    assert rows[0][1] == "level 0 [meV]"
    path = write_sweep_csv(sweep, tmp_path / "fan.csv")
    acs = list(csv.reader((tmp_path / "fan_anticrossings.csv").open(encoding="utf-8")))
    assert acs[0][:6] == ["at magnetic_field[2] [T]", "at uncertainty [T]", "gap [meV]", "gap uncertainty [meV]",
                          "gap upper bound [meV]", "tunnel coupling t = gap/2 [meV]"]
    assert float(acs[1][2]) == 0.2 and float(acs[1][5]) == 0.1 and acs[1][8] == "anticrossing"
    assert path.exists()
    with pytest.raises(InputError):
        sweep_csv_text(sweep, by="colour")


def test_sweep_npz_reads_back_with_load_sweep(osc, tmp_path):
    from core.sweep import load_sweep
    sweep = sweep_of(osc.project, parameter="gate:P1")
    path = write_sweep_npz(sweep, tmp_path / "fan.npz")
    back = load_sweep(path)
    assert back.parameter == "gate:P1" and parameter_unit(back) == "V"
    assert np.array_equal(back.values, sweep.values) and np.array_equal(back.energies, sweep.energies)
    assert np.array_equal(back.tracks, sweep.tracks)
    assert back.anticrossings[0].gap == 0.2 and back.anticrossings[0].tracks == (0, 1)
    assert np.array_equal(back.observables["x"], sweep.observables["x"])
    with np.load(path, allow_pickle=False) as z:
        assert str(z["energy_unit"]) == "meV" and np.array_equal(z["track_energies"], sweep.track_energies())


# --- HDF5 --------------------------------------------------------------------------------------

def test_hdf5_holds_the_solve_and_the_sweep_with_units(osc, tmp_path):
    h5py = pytest.importorskip("h5py")
    sweep = sweep_of(osc.project)
    path = write_hdf5(tmp_path / "data.h5", result=osc, sweep=sweep, levels=[0, 1, 2])
    with h5py.File(path, "r") as f:
        assert f.attrs["format"] == "wellscape-data"
        g = f["solve"]
        assert g.attrs["energy_unit"] == "meV" and g.attrs["length_unit"] == "nm"
        assert np.array_equal(g["energies"][()], osc.energies[:3])
        assert np.array_equal(g["states"][()], osc.states[:3])
        assert np.array_equal(g["axes/x"][()], osc.grid.axes[0]) and g["axes/x"].attrs["unit"] == "nm"
        assert json.loads(g.attrs["project"])["parameters"]["hw"] == HW
        s = f["sweep"]
        assert s.attrs["parameter_unit"] == "T"
        assert np.array_equal(s["track_energies"][()], sweep.track_energies())
        assert s["approaches/gap"][()][0] == 0.2
        assert s["approaches/kind"].asstr()[()][0] == "anticrossing"


def test_hdf5_without_h5py_says_what_to_install(osc, tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "h5py", None)
    assert hdf5_available() is False
    with pytest.raises(InputError, match="h5py"):
        write_hdf5(tmp_path / "data.h5", result=osc)
    assert list(tmp_path.iterdir()) == []
    with pytest.raises(InputError, match="nothing to write"):
        write_hdf5(tmp_path / "data.h5")


# --- one panel as a table ------------------------------------------------------------------------

def test_panel_tables_give_back_the_plotted_values(osc):
    from core.figures import build_sheet
    sheet = build_sheet(osc, layout="potential+cut+levels+states1")
    pot, cut, levels, state = sheet.panels
    rows = list(csv.reader(io.StringIO(panel_csv_text(pot))))
    assert "x [nm]" in rows[0][0] and "V [meV]" in rows[0][0]
    assert np.array_equal(np.array(rows[0][1:], dtype=float), pot["y"])
    table = np.array(rows[1:], dtype=float)
    assert np.array_equal(table[:, 0], pot["x"]) and np.array_equal(table[:, 1:], pot["values"])
    rows = list(csv.reader(io.StringIO(panel_csv_text(cut))))
    assert rows[0] == ["x [nm]", "V [meV]"]
    assert np.array_equal(np.array(rows[1:], dtype=float)[:, 1], cut["values"])
    rows = list(csv.reader(io.StringIO(panel_csv_text(levels))))
    assert rows[0][1] == "energy [meV]" and len(rows) == osc.energies.size + 1
    rows = list(csv.reader(io.StringIO(panel_csv_text(state))))
    assert np.array_equal(np.array([r[1:] for r in rows[1:]], dtype=float), state["values"])
    with pytest.raises(InputError):
        panel_csv_text({"kind": "unknown"})
