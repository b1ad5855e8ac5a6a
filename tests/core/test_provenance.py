"""The project state a result came from: one fingerprint of the physics, blind to titles and notes,
sensitive to every physical input (parameters, grid, fields, solver, the content of map files)."""
from __future__ import annotations

import dataclasses
import shutil
from pathlib import Path

import numpy as np

from core.grid import Grid
from core.project import FormulaTerm, load_project, new_project, save_project
from core.provenance import (
    changes,
    fingerprint,
    project_fingerprint_for_sweep,
    result_fingerprint,
    sweep_changes,
    sweep_fingerprint,
    sweep_matches,
)

SAMPLES = Path(__file__).resolve().parents[2] / "sample_projects"


def small():
    p = new_project()
    return dataclasses.replace(p, grid=Grid([-120.0, -120.0], [120.0, 120.0], [24, 24]),
                               solver=dataclasses.replace(p.solver, states=4))


def test_cosmetic_edits_keep_the_state():
    p = small()
    f = fingerprint(p)
    assert len(f) == 12 and int(f, 16) >= 0
    cosmetic = [dataclasses.replace(p, title="another title", notes="some notes"),
                dataclasses.replace(p, parameter_ranges={"hw": (1.0, 9.0)}),
                dataclasses.replace(p, potential=tuple(dataclasses.replace(t, label="renamed")
                                                       for t in p.potential))]
    for q in cosmetic:
        assert fingerprint(q) == f and changes(p, q) == []


def test_physical_edits_change_the_state_and_say_what():
    p = small()
    f = fingerprint(p)
    name = next(iter(p.parameters))
    edits = {f"{name} = ": p.with_parameters(**{name: p.parameters[name] * 1.5}),
             "grid": dataclasses.replace(p, grid=Grid([-120.0, -120.0], [120.0, 120.0], [26, 24])),
             "magnetic field": dataclasses.replace(p, magnetic_field=(0.0, 0.0, 1.0)),
             "solver settings": dataclasses.replace(p, solver=dataclasses.replace(p.solver, states=5)),
             "spin": dataclasses.replace(p, spin=True),
             "potential terms": dataclasses.replace(p, potential=p.potential + (FormulaTerm("step", "0*x + 1"),))}
    seen = {f}
    for word, q in edits.items():
        g = fingerprint(q)
        assert g not in seen, word
        seen.add(g)
        assert any(c.startswith(word) for c in changes(p, q)), (word, changes(p, q))
    # a disabled term does not enter the physics; enabling it does
    off = dataclasses.replace(p, potential=p.potential + (FormulaTerm("step", "0*x + 1", enabled=False),))
    assert fingerprint(off) == f


def test_a_result_records_the_state_it_was_solved_for():
    from core.study import solve_project
    p = small()
    r = solve_project(p)
    assert r.fingerprint == fingerprint(p) == result_fingerprint(r)
    name = next(iter(p.parameters))
    r2 = solve_project(p, parameters={name: p.parameters[name] * 1.1})
    assert r2.fingerprint == fingerprint(p.with_parameters(**{name: p.parameters[name] * 1.1}))
    assert r2.fingerprint != r.fingerprint


def test_map_content_counts_not_its_path(tmp_path):
    src = load_project(SAMPLES / "imported_map_dot.json")
    f = fingerprint(src)
    # the project written into another folder (its map path rebased) is the same state
    shutil.copytree(SAMPLES / "maps", tmp_path / "maps")
    save_project(src, tmp_path / "copy.json")
    moved = load_project(tmp_path / "copy.json")
    assert fingerprint(moved) == f
    # a changed map file is another state
    term = next(t for t in moved.potential if t.kind == "map")
    arr = np.load(tmp_path / term.file, allow_pickle=False)
    np.save(tmp_path / term.file, arr * 1.01)
    assert fingerprint(moved) != f


def test_a_sweep_keeps_its_state_apart_from_the_swept_quantity():
    from core.sweep import run_sweep
    p = small()
    name = next(iter(p.parameters))
    v0 = p.parameters[name]
    sweep = run_sweep(p, name, np.linspace(v0, 1.2 * v0, 3), states=3)
    # moving the swept parameter keeps the fan current; any other edit does not
    assert sweep_matches(sweep, p) and sweep_matches(sweep, p.with_parameters(**{name: 1.1 * v0}))
    other = dataclasses.replace(p, magnetic_field=(0.0, 0.0, 0.5))
    assert not sweep_matches(sweep, other) and sweep_changes(sweep, other) == ["magnetic field"]
    # a field sweep: the same, whether its project holds the prepared field or not
    bsweep = run_sweep(p, "magnetic_field[2]", np.array([0.0, 0.5]), states=3)
    assert sweep_fingerprint(bsweep) == project_fingerprint_for_sweep(p, "magnetic_field[2]")
    assert sweep_matches(bsweep, other)               # B_z is what was swept
    assert not sweep_matches(bsweep, p.with_parameters(**{name: 1.1 * v0}))
    assert sweep_changes(bsweep, p.with_parameters(**{name: 1.1 * v0}))[0].startswith(f"{name} = ")
