"""Project files: round trip, schema migration, validation of bad input and atomic saving.

External references used here:
* Python's :mod:`json` module (RFC 8259 JSON): the line/column of a syntax error is
  compared with what ``json.loads`` itself reports; NaN/Infinity are not JSON (RFC 8259 §6).
* The migration checks compare against the raw version-1 document (``tests/data/project_v1.json``)
  read with ``json.loads``, following the schema history in ``core/project.py``.
"""
from __future__ import annotations

import json
import os
import pathlib
import shutil
from dataclasses import replace

import numpy as np
import pytest

from core.errors import InputError, ProjectError
from core.grid import Grid
from core.potentials import evaluate_potential
from core.project import (
    CURRENT_SCHEMA_VERSION,
    MIGRATIONS,
    FieldTerm,
    FormulaTerm,
    GateSpec,
    GatesTerm,
    MapTerm,
    MaterialSpec,
    Project,
    SolverSettings,
    load_project,
    new_project,
    project_from_dict,
    project_from_json,
    project_to_dict,
    project_to_json,
    save_project,
)

DATA = pathlib.Path(__file__).resolve().parent.parent / "data"
V1_FILE = DATA / "project_v1.json"
TOP_KEYS = {"schema_version", "title", "notes", "units", "material", "grid", "parameters",
            "parameter_ranges", "parameter_units", "potential", "electric_field", "magnetic_field", "spin",
            "solver"}


def minimal(**changes) -> dict:
    """A small valid document (current schema) with top-level keys replaced by ``changes``."""
    doc = {"schema_version": CURRENT_SCHEMA_VERSION, "title": "Wren test dot", "units": "semiconductor",
           "material": "GaAs", "grid": {"lower": [-10.0, -10.0], "upper": [10.0, 10.0], "points": [5, 5]},
           "parameters": {"k": 0.02}, "potential": [{"kind": "formula", "formula": "k*(x**2 + y**2)"}]}
    doc.update(changes)
    return doc


def write_json(folder: pathlib.Path, doc, name: str = "dot.json") -> pathlib.Path:
    path = folder / name
    path.write_text(json.dumps(doc), encoding="utf-8")
    return path


def refused(doc) -> ProjectError:
    with pytest.raises(ProjectError) as info:
        project_from_dict(doc)
    return info.value


def full_project(folder: pathlib.Path) -> Project:
    """Every term kind, with parameters used in the material, gates, map scale and fields."""
    xs = np.linspace(-60.0, 60.0, 13)
    ys = np.linspace(-60.0, 60.0, 9)
    np.save(folder / "bump.npy", np.exp(-(xs[:, None] ** 2 + ys[None, :] ** 2) / 900.0))
    return Project(
        title="Heron gate-defined dot", notes="Invented device for the round-trip test.", units="semiconductor",
        material=MaterialSpec(name=None, mass="meff*1.0", g_factor=-0.44),
        grid=Grid([-50.0, -50.0], [50.0, 50.0], [9, 9]),
        parameters={"VP": -0.3, "eps": 0.05, "B": 1.0, "meff": 0.067, "d": 40.0, "s": 2.0, "k": 0.01, "F": 0.1},
        parameter_ranges={"VP": [-1.0, 0.0], "B": [0.0, 5.0]}, parameter_units={"VP": "V", "B": "T", "d": "nm"},
        potential=(
            FormulaTerm("bowl", "0.5*k*(x**2 + y**2)"),
            GatesTerm("surface gates", depth="d", lever=None, gates=(
                GateSpec("plunger", "VP + 0.1*eps", polygon=((-20.0, -20.0), (20.0, -20.0), (0.0, 25.0))),
                GateSpec("barrier", -0.2, rectangle=(30.0, -50.0, 50.0, 50.0)))),
            MapTerm("imported bump", file="bump.npy", lower=(-60.0, -60.0), upper=(60.0, 60.0), scale="s",
                    method="linear"),
            FieldTerm("tilt", enabled=False),
        ),
        electric_field=("F", 0.0), magnetic_field=(0.0, 0.0, "B"), spin=True,
        solver=SolverSettings(states=5, scheme="fd4", tolerance=1e-8))


# --- round trip ---------------------------------------------------------------------------------

def test_round_trip_every_term_kind_and_parameters_everywhere(tmp_path):
    original = full_project(tmp_path)
    path = save_project(original, tmp_path / "heron.json")
    loaded = load_project(path)
    assert loaded == original
    assert loaded.warnings == ()
    assert loaded.base_dir == str(tmp_path.resolve())
    # The reloaded project evaluates to the same potential (the map is found next to the file).
    np.testing.assert_array_equal(evaluate_potential(loaded),
                                  evaluate_potential(replace(original, base_dir=str(tmp_path))))
    saved = json.loads(path.read_text(encoding="utf-8"))
    assert saved["schema_version"] == 2
    assert set(saved) == TOP_KEYS
    assert saved["magnetic_field"] == [0.0, 0.0, "B"]
    assert saved["potential"][1]["gates"][0]["voltage"] == "VP + 0.1*eps"
    assert [t["kind"] for t in saved["potential"]] == ["formula", "gates", "map", "uniform_field"]


def test_json_text_round_trip_is_stable():
    text = project_to_json(new_project())
    assert project_to_json(project_from_json(text)) == text
    assert json.loads(text) == project_to_dict(new_project())
def test_round_trip_keeps_brackets_in_text():
    original = replace(new_project(), title="Dot [ A ]", notes="gate layout [ rev 2 ]")
    assert project_from_json(project_to_json(original)) == original


# --- migration ----------------------------------------------------------------------------------

def test_migration_registry_has_step_from_version_1():
    assert CURRENT_SCHEMA_VERSION == 2
    assert set(MIGRATIONS) == {1}


def test_v1_file_is_migrated_in_memory_and_not_rewritten():
    before = V1_FILE.read_bytes()
    raw = json.loads(before)
    assert raw["schema_version"] == 1
    project = load_project(V1_FILE)
    assert project.migrated_from == 1
    assert project.schema_version == 2
    assert project.magnetic_field == (0.0, 0.0, float(raw["magnetic_field"]))
    assert project.solver.states == raw["solver"]["levels"]
    assert project.solver.scheme == raw["solver"]["scheme"]
    assert project.parameters == {k: float(v) for k, v in raw["parameters"].items()}
    assert V1_FILE.read_bytes() == before


def test_saving_over_v1_file_keeps_bak(tmp_path):
    path = tmp_path / "kestrel.json"
    shutil.copyfile(V1_FILE, path)
    old = path.read_bytes()
    project = load_project(path)
    save_project(project, path)
    bak = tmp_path / "kestrel.json.bak"
    assert bak.read_bytes() == old
    assert json.loads(path.read_text(encoding="utf-8"))["schema_version"] == 2
    assert load_project(path) == project


def test_saving_over_current_version_makes_no_bak(tmp_path):
    path = save_project(new_project(), tmp_path / "dot.json")
    save_project(replace(new_project(), title="second"), path)
    assert sorted(os.listdir(tmp_path)) == ["dot.json"]
    assert load_project(path).title == "second"


def test_newer_schema_refused_with_update_advice():
    err = refused(minimal(schema_version=CURRENT_SCHEMA_VERSION + 1))
    assert err.path == "schema_version"
    assert "update" in str(err).lower()
    assert str(CURRENT_SCHEMA_VERSION + 1) in str(err)


def test_missing_schema_version_refused():
    doc = minimal()
    del doc["schema_version"]
    err = refused(doc)
    assert err.path == "schema_version"
    assert "missing" in str(err)


# --- bad input ----------------------------------------------------------------------------------

def test_malformed_json_reports_line_and_column():
    text = '{\n  "schema_version": 2,\n  "title" "no colon"\n}\n'
    with pytest.raises(json.JSONDecodeError) as reference:
        json.loads(text)
    with pytest.raises(ProjectError) as info:
        project_from_json(text)
    assert f"line {reference.value.lineno}, column {reference.value.colno}" in str(info.value)
    assert reference.value.lineno == 3


@pytest.mark.parametrize("key", ["units", "material", "grid", "potential"])
def test_missing_required_top_level_key(key):
    doc = minimal()
    del doc[key]
    err = refused(doc)
    assert err.path == key
    assert "missing" in str(err)


def test_missing_required_grid_key():
    err = refused(minimal(grid={"lower": [-10.0, -10.0], "upper": [10.0, 10.0]}))
    assert err.path == "grid.points"


def test_extra_keys_become_warnings_not_errors():
    doc = minimal(colour_scheme="teal")
    doc["grid"]["spacing_hint"] = 2
    doc["potential"][0]["comment"] = "bowl"
    project = project_from_dict(doc)
    assert project == project_from_dict(minimal())
    text = "\n".join(project.warnings)
    assert len(project.warnings) == 3
    for where in ("colour_scheme", "grid.spacing_hint", "potential[0].comment"):
        assert where in text


def test_wrong_type_names_the_field():
    err = refused(minimal(grid={"lower": [-10.0, -10.0], "upper": [10.0, 10.0], "points": ["abc", 5]}))
    assert err.path == "grid.points[0]"
    assert "grid.points[0]" in str(err) and "abc" in str(err)


def test_negative_number_of_points():
    err = refused(minimal(grid={"lower": [-10.0, -10.0], "upper": [10.0, 10.0], "points": [5, -4]}))
    assert err.path == "grid.points[1]"
    assert "-4" in str(err)


@pytest.mark.parametrize("literal", ["NaN", "Infinity", "-Infinity"])
def test_nonfinite_literals_refused(literal):
    text = json.dumps(minimal()).replace('"k": 0.02', f'"k": {literal}')
    assert literal in text
    with pytest.raises(ProjectError) as info:
        project_from_json(text)
    assert literal in str(info.value)


def test_overflowing_number_refused():
    # 1e400 is valid JSON text but overflows a double to inf.
    text = json.dumps(minimal()).replace('"k": 0.02', '"k": 1e400')
    with pytest.raises(ProjectError) as info:
        project_from_json(text)
    assert info.value.path == "parameters.k"
def test_overflowing_integer_field_refused():
    text = json.dumps(minimal()).replace('"points": [5, 5]', '"points": [1e400, 5]')
    with pytest.raises(ProjectError) as info:
        project_from_json(text)
    assert info.value.path == "grid.points[0]"


def test_unknown_material_suggests_closest_name():
    err = refused(minimal(material="GaA"))
    assert err.path == "material"
    assert "'GaAs'" in str(err) and "mean" in str(err)
    err = refused(minimal(material={"name": "InAss"}))
    assert err.path == "material.name"
    assert "'InAs'" in str(err)


def test_unknown_units():
    err = refused(minimal(units="furlongs"))
    assert err.path == "units"
    assert "furlongs" in str(err) and "semiconductor" in str(err)


def test_formula_with_unknown_parameter():
    err = refused(minimal(potential=[{"kind": "formula", "formula": "k*x**2 + V0"}]))
    assert err.path == "potential[0].formula"
    assert "potential[0].formula" in str(err) and "V0" in str(err)


def _gate_doc(polygon):
    return minimal(potential=[{"kind": "gates", "depth": 50.0,
                               "gates": [{"label": "plunger", "voltage": -0.2, "polygon": polygon}]}])


def test_self_intersecting_gate_polygon():
    err = refused(_gate_doc([[0.0, 0.0], [10.0, 10.0], [10.0, 0.0], [0.0, 10.0]]))   # a bow tie
    assert err.path == "potential[0].gates[0].polygon"
    assert "intersects itself" in str(err)


def test_gate_polygon_with_two_vertices():
    err = refused(_gate_doc([[0.0, 0.0], [10.0, 10.0]]))
    assert err.path == "potential[0].gates[0].polygon"
    assert "3" in err.reason


def test_parameter_named_like_reserved_function():
    err = refused(minimal(parameters={"sqrt": 1.0}, potential=[]))
    assert err.path == "parameters.sqrt"
    assert "reserved" in str(err)


# --- map files (read when the potential is evaluated) --------------------------------------------

def _map_project(folder, file_name, *, lower=(-10.0, -10.0), upper=(10.0, 10.0)):
    doc = minimal(potential=[{"kind": "map", "label": "imported", "file": file_name,
                              "lower": list(lower), "upper": list(upper)}])
    return load_project(write_json(folder, doc))


def _map_error(project) -> ProjectError:
    with pytest.raises(ProjectError) as info:
        evaluate_potential(project)
    return info.value


class _Sentinel:
    """Unpickling this object would create the folder ``target`` (a visible side effect)."""

    def __init__(self, target):
        self.target = str(target)

    def __reduce__(self):
        return (os.mkdir, (self.target,))


def test_map_file_missing(tmp_path):
    err = _map_error(_map_project(tmp_path, "absent.npy"))
    assert err.path == "potential[0].file"
    assert "absent.npy" in str(err) and "no such file" in str(err)


def test_pickled_map_refused_and_never_unpickled(tmp_path):
    sentinel = tmp_path / "unpickled"
    arr = np.empty(2, dtype=object)
    arr[0], arr[1] = _Sentinel(sentinel), 1.0
    np.save(tmp_path / "evil.npy", arr, allow_pickle=True)
    err = _map_error(_map_project(tmp_path, "evil.npy"))
    assert err.path == "potential[0].file"
    assert "pickle" in str(err)
    assert not sentinel.exists()
    # Control: the crafted file really does run code when unpickled.
    np.load(tmp_path / "evil.npy", allow_pickle=True)
    assert sentinel.is_dir()


def test_nan_filled_map_refused(tmp_path):
    np.save(tmp_path / "nan.npy", np.full((4, 4), np.nan))
    err = _map_error(_map_project(tmp_path, "nan.npy"))
    assert err.path == "potential[0].file"
    assert "not finite" in str(err)


def test_map_of_wrong_rank_refused(tmp_path):
    np.save(tmp_path / "line.npy", np.zeros(6))
    err = _map_error(_map_project(tmp_path, "line.npy"))
    assert err.path.startswith("potential[0]")
    assert "1 axes" in str(err) and "2" in str(err)


def test_map_not_covering_the_grid_refused(tmp_path):
    np.save(tmp_path / "small.npy", np.zeros((4, 4)))
    err = _map_error(_map_project(tmp_path, "small.npy", lower=(-5.0, -5.0), upper=(5.0, 5.0)))
    assert err.path.startswith("potential[0]")
    assert "does not cover" in str(err)


def test_formula_dividing_by_zero_reports_where(tmp_path):
    # grid nodes -20/3, -10/3, 0, 10/3, 20/3 along x: x = 0 is a node, 1/x is inf there.
    project = load_project(write_json(tmp_path, minimal(potential=[{"kind": "formula", "formula": "1/x"}])))
    with pytest.raises(ProjectError) as info:
        evaluate_potential(project)
    assert info.value.path.startswith("potential[0].formula")
    assert "x=0" in str(info.value)
    assert "5 grid points" in str(info.value)


# --- unreadable files --------------------------------------------------------------------------

def test_directory_is_not_a_project(tmp_path):
    with pytest.raises(ProjectError) as info:
        load_project(tmp_path)
    assert "folder" in str(info.value)


def test_nonexistent_file(tmp_path):
    with pytest.raises(ProjectError) as info:
        load_project(tmp_path / "nothing.json")
    assert "no such" in str(info.value) and "nothing.json" in str(info.value)


@pytest.mark.skipif(not hasattr(os, "geteuid") or os.geteuid() == 0,
                    reason="root can read files without read permission")
def test_file_without_read_permission(tmp_path):
    path = write_json(tmp_path, minimal())
    path.chmod(0)
    try:
        with pytest.raises(ProjectError) as info:
            load_project(path)
        assert "cannot read" in str(info.value)
    finally:
        path.chmod(0o600)


def test_huge_file_refused_without_reading(tmp_path, monkeypatch):
    path = tmp_path / "huge.json"
    with open(path, "wb") as fh:             # sparse: no 20 MiB actually written
        fh.truncate(21 * 2**20)

    def no_read(*args, **kwargs):
        raise AssertionError("the huge file was read")

    monkeypatch.setattr(pathlib.Path, "read_bytes", no_read)
    monkeypatch.setattr(pathlib.Path, "read_text", no_read)
    monkeypatch.setattr(pathlib.Path, "open", no_read)
    with pytest.raises(ProjectError) as info:
        load_project(path)
    assert "MiB" in str(info.value)


def test_non_utf8_bytes_refused(tmp_path):
    raw = json.dumps(minimal(title="Caf\u00e9 dot"), ensure_ascii=False).encode("latin-1")
    path = tmp_path / "latin.json"
    path.write_bytes(raw)
    with pytest.raises(ProjectError) as info:
        load_project(path)
    assert "UTF-8" in str(info.value)
    offset = raw.index("\u00e9".encode("latin-1"))
    assert f"byte {offset}" in str(info.value)


# --- atomic save --------------------------------------------------------------------------------

def test_failed_replace_leaves_file_untouched(tmp_path, monkeypatch):
    path = save_project(new_project(), tmp_path / "dot.json")
    before = path.read_bytes()

    def broken_replace(src, dst):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "replace", broken_replace)
    with pytest.raises(InputError):
        save_project(replace(new_project(), title="changed"), path)
    assert path.read_bytes() == before
    assert os.listdir(tmp_path) == ["dot.json"]


def test_failed_write_leaves_file_untouched(tmp_path, monkeypatch):
    path = save_project(new_project(), tmp_path / "dot.json")
    before = path.read_bytes()
    real_fdopen = os.fdopen

    class HalfWriter:
        def __init__(self, fh):
            self.fh = fh

        def __enter__(self):
            return self

        def __exit__(self, *exc):
            self.fh.close()
            return False

        def write(self, data):
            self.fh.write(data[: len(data) // 2])
            raise OSError(5, "Input/output error")

    monkeypatch.setattr(os, "fdopen", lambda fd, *a, **k: HalfWriter(real_fdopen(fd, *a, **k)))
    with pytest.raises(InputError):
        save_project(replace(new_project(), title="changed"), path)
    assert path.read_bytes() == before
    assert os.listdir(tmp_path) == ["dot.json"]


def test_save_into_missing_folder(tmp_path):
    with pytest.raises(InputError):
        save_project(new_project(), tmp_path / "no" / "such" / "dot.json")
    assert not (tmp_path / "no").exists()
def test_save_keeps_file_permissions(tmp_path):
    path = save_project(new_project(), tmp_path / "dot.json")
    path.chmod(0o644)
    save_project(new_project(), path)
    assert path.stat().st_mode & 0o777 == 0o644


# --- parameter units -----------------------------------------------------------------------------

def test_parameter_units_round_trip_and_are_optional():
    """A unit per parameter survives save and load; a project without them reads as before (no
    ``parameter_units`` key written, so older readers see the same file)."""
    p = project_from_dict(minimal(parameter_units={"k": "meV/nm^2"}))
    assert p.parameter_unit("k") == "meV/nm^2"
    assert project_from_json(project_to_json(p)).parameter_units == {"k": "meV/nm^2"}
    plain = project_from_dict(minimal())
    assert plain.parameter_units == {} and plain.parameter_unit("k") == ""
    assert "parameter_units" not in project_to_dict(plain)


@pytest.mark.parametrize("units, message", [
    ({"q": "V"}, "parameter_units.q: no parameter called 'q'"),
    ({"k": 3}, "parameter_units.k"),
    ({"k": "x" * 40}, "at most 24 characters"),
    ({"k": "m\x07V"}, "parameter_units.k"),
])
def test_bad_parameter_units_are_one_line_errors(units, message):
    err = refused(minimal(parameter_units=units))
    assert message in str(err) and "\n" not in str(err)


def test_every_sample_parameter_with_a_physical_meaning_has_a_unit():
    """The bundled samples give a unit to each parameter but the dimensionless ones (ellipticity,
    scale factors); the sweep target's unit follows (a field component and a gate carry their own)."""
    from core.sweep.targets import target_unit
    samples = pathlib.Path(__file__).resolve().parents[2] / "sample_projects"
    dimensionless = {("elliptical_dot", "ell"), ("imported_map_dot", "depth_scale")}
    for path in sorted(samples.glob("*.json")):
        p = load_project(path)
        for name in p.parameters:
            if (path.stem, name) not in dimensionless:
                assert p.parameter_unit(name), (path.name, name)
                assert target_unit(p, name) == p.parameter_unit(name)
    p = load_project(samples / "gaas_double_dot.json")
    assert (target_unit(p, "magnetic_field[2]"), target_unit(p, "electric_field[0]"), target_unit(p, "gate:B")) \
        == ("T", "mV/nm", "V")
