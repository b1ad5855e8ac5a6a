"""Hostile and extreme input to the core library: refused by name before anything large is built."""
from __future__ import annotations

import copy
import io
import json
import os
import struct
import zipfile

import numpy as np
import pytest

from core.errors import InputError, MemoryLimitError, ProjectError
from core.grid import Grid
from core.jsonfile import parse_json
from core.limits import MASS_RANGE, MAX_ENERGY, MAX_MAP_BYTES, MAX_POINTS_PER_AXIS
from core.maps import MAP_FOLDERS_VARIABLE, allow_map_folder, load_map_file, npz_headers
from core.potentials import evaluate_potential, potential_memory_bytes
from core.project import project_from_dict

BASE = {"schema_version": 2, "units": "semiconductor", "material": "GaAs",
        "grid": {"lower": [-60, -60], "upper": [60, 60], "points": [12, 12]},
        "parameters": {"hw": 3.0}, "potential": [{"kind": "formula", "formula": "0.01*hw*(x**2+y**2)"}],
        "solver": {"states": 2}}


def doc(**changes):
    d = copy.deepcopy(BASE)
    d.update(changes)
    return d


def _header(shape, descr="<f8") -> bytes:
    text = f"{{'descr': '{descr}', 'fortran_order': False, 'shape': {tuple(shape)!r}, }}"
    text += " " * ((64 - (10 + len(text) + 1) % 64) % 64) + "\n"
    return b"\x93NUMPY\x01\x00" + struct.pack("<H", len(text)) + text.encode("latin1")


# -- sizes in exact integers -----------------------------------------------------------------------
def test_grid_size_is_exact_where_int64_wraps():
    g = Grid([-1] * 3, [1] * 3, [MAX_POINTS_PER_AXIS] * 3)       # 1e24 points: int64 would wrap
    assert g.size == MAX_POINTS_PER_AXIS ** 3 and isinstance(g.size, int)
    with pytest.raises(InputError, match="at most 100,000,000 points per axis"):
        Grid([-1], [1], [10**400])


def test_400_digit_integer_is_named_not_overflowed():
    with pytest.raises(ProjectError, match=r"grid.points\[0\]: .*a 400-digit integer"):
        project_from_dict(doc(grid={"lower": [-1, -1], "upper": [1, 1], "points": [int("9" * 400), 12]}))
    with pytest.raises(ProjectError, match=r"parameters.hw: expected a finite number, got a 400-digit"):
        project_from_dict(doc(parameters={"hw": int("9" * 400)}))


def test_potential_memory_is_checked_before_evaluation():
    p = project_from_dict(doc(grid={"lower": [-1] * 3, "upper": [1] * 3, "points": [100_000] * 3}))
    assert potential_memory_bytes(p.grid, 1) == 5 * 8 * 10**15
    with pytest.raises(MemoryLimitError, match="evaluating the potential .* needs about"):
        evaluate_potential(p)


def test_only_the_coordinates_a_formula_uses_are_built():
    g = Grid([-1, -1], [1, 1], [4, 5])
    env = g.coordinates(("x", "y"))
    assert set(env) == {"x", "y"} and env["x"].shape == (4, 1) and env["y"].shape == (1, 5)
    assert set(g.coordinates()) == {"x", "y", "z", "r"}


# -- JSON --------------------------------------------------------------------------------------------
def test_duplicate_keys_and_lone_surrogates_are_reported():
    with pytest.raises(InputError, match='the key "grid" appears twice'):
        parse_json('{"grid": 1, "grid": 2}', source="f")
    with pytest.raises(InputError, match=r"potential\[0\].label holds a lone surrogate"):
        parse_json('{"potential": [{"label": "\\udc00"}]}', source="f")
    assert parse_json('{"t": "\\ud83d\\ude00"}', source="f") == {"t": "\U0001F600"}   # a proper pair


def test_terminal_control_characters_in_texts_are_refused():
    with pytest.raises(ProjectError, match=r"title: holds the control character U\+001B"):
        project_from_dict(doc(title="dot \x1b]0;owned\x07"))
    assert project_from_dict(doc(notes="two\nlines\tand a tab")).notes == "two\nlines\tand a tab"


def test_a_term_kind_of_the_wrong_type_is_named():
    with pytest.raises(ProjectError, match=r"potential\[0\].kind: expected one of"):
        project_from_dict(doc(potential=[{"kind": ["formula"]}]))


# -- extreme numbers ---------------------------------------------------------------------------------
@pytest.mark.parametrize("mass", [1e-300, 1e300, "hw*1e-300"])
def test_masses_outside_the_range_are_refused(mass):
    from core.potentials import project_masses, resolve_parameters
    with pytest.raises(ProjectError, match=r"material.mass: .*outside the accepted range"):
        p = project_from_dict(doc(material={"mass": mass}))
        project_masses(p, resolve_parameters(p))
    assert MASS_RANGE[0] <= 0.067 <= MASS_RANGE[1]


def test_a_huge_potential_is_refused_before_the_solver():
    from core.study import solve_project
    p = project_from_dict(doc(potential=[{"kind": "formula", "label": "steep", "formula": "1e300*r**2"}]))
    with pytest.raises(ProjectError, match=r"potential\[0\] \(steep\): reaches .* beyond the 1e\+15 meV"):
        solve_project(p)
    from core.hamiltonian import build_hamiltonian
    g = Grid([-1], [1], [10])
    with pytest.raises(InputError, match="beyond the"):
        build_hamiltonian(g, np.full(10, 10 * MAX_ENERGY))
    with pytest.raises(InputError, match="kinetic energy scale"):
        build_hamiltonian(Grid([0], [1e-9], [50]), np.zeros(50), mass=1e-6)


# -- map files ---------------------------------------------------------------------------------------
def test_npy_header_declaring_terabytes_is_refused_before_reading(tmp_path):
    p = tmp_path / "huge.npy"
    p.write_bytes(_header((1 << 20, 1 << 20, 8)) + b"\0" * 64)
    with pytest.raises(InputError, match="more than the 2 GiB a map may hold"):
        load_map_file(p)
    q = tmp_path / "short.npy"
    np.save(q, np.ones((30, 30)))
    q.write_bytes(q.read_bytes()[:-100])
    with pytest.raises(InputError, match="truncated"):
        load_map_file(q)


def test_npz_member_is_judged_by_its_header(tmp_path):
    p = tmp_path / "bomb.npz"
    with zipfile.ZipFile(p, "w", zipfile.ZIP_DEFLATED) as z:
        z.writestr("potential.npy", _header((30000, 30000)) + b"\0" * 1024)
    with pytest.raises(InputError, match=r"array 'potential': declares an array of 30000 x 30000"):
        load_map_file(p)
    assert npz_headers(p, source="s", max_bytes=8 * 30000 * 30000)["potential"][0] == (30000, 30000)
    assert 8 * 30000 * 30000 > MAX_MAP_BYTES


def test_links_are_resolved_before_the_suffix_and_content_is_never_quoted(tmp_path):
    secret = tmp_path / "secret"
    secret.write_text("password: swordfish\n", encoding="utf-8")
    link = tmp_path / "map.csv"
    link.symlink_to(secret)
    with pytest.raises(InputError) as info:
        load_map_file(link)
    assert "unsupported file type" in str(info.value) and f"resolves to {secret}" in str(info.value)
    words = tmp_path / "words.csv"
    words.write_text("1,2\nswordfish,3\n", encoding="utf-8")
    with pytest.raises(InputError, match="line 2 holds something that is not a number") as info:
        load_map_file(words)
    assert "swordfish" not in str(info.value)


def test_map_paths_are_confined_to_the_project_folder(tmp_path, monkeypatch):
    monkeypatch.delenv(MAP_FOLDERS_VARIABLE, raising=False)
    project_dir, other = tmp_path / "project", tmp_path / "other"
    project_dir.mkdir()
    other.mkdir()
    np.save(other / "v.npy", np.zeros((8, 8)))
    np.save(project_dir / "v.npy", np.zeros((8, 8)))
    term = {"kind": "map", "label": "m", "lower": [-70, -70], "upper": [70, 70]}
    inside = project_from_dict(doc(potential=[dict(term, file="v.npy")]), base_dir=str(project_dir))
    assert evaluate_potential(inside).shape == (12, 12)
    outside = project_from_dict(doc(potential=[dict(term, file="../other/v.npy")]), base_dir=str(project_dir))
    with pytest.raises(ProjectError, match=r"potential\[0\].file: .* is outside the project's folder"):
        evaluate_potential(outside)
    allow_map_folder(other)
    assert os.environ[MAP_FOLDERS_VARIABLE] == str(other.resolve())
    assert evaluate_potential(outside).shape == (12, 12)


def test_an_archive_of_pickles_is_refused_by_its_header(tmp_path):
    p = tmp_path / "objects.npz"
    buf = io.BytesIO()
    np.save(buf, np.array([None, {"a": 1}], dtype=object), allow_pickle=True)
    with zipfile.ZipFile(p, "w") as z:
        z.writestr("potential.npy", buf.getvalue())
    with pytest.raises(InputError, match="pickled Python objects"):
        load_map_file(p)
    assert json.dumps("ok")
