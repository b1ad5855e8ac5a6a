"""Figure sheets never mix project states silently: a fan swept on another state than the solve is
refused, or drawn with both states named in the caption; every panel records its state."""
from __future__ import annotations

import dataclasses
import json

import numpy as np
import pytest

from core.errors import InputError
from core.figures import build_sheet, load_sheet, sheet_to_dict
from core.grid import Grid
from core.project import new_project
from core.provenance import result_fingerprint, sweep_fingerprint
from core.study import solve_project
from core.sweep import run_sweep


@pytest.fixture(scope="module")
def dot():
    p = new_project()
    return dataclasses.replace(p, grid=Grid([-120.0, -120.0], [120.0, 120.0], [24, 24]),
                               solver=dataclasses.replace(p.solver, states=4))


@pytest.fixture(scope="module")
def sweep(dot):
    return run_sweep(dot, "hw", np.linspace(2.5, 3.5, 3), states=4)


def test_a_sheet_of_one_state_names_it(dot, sweep):
    result = solve_project(dot, parameters={"hw": 3.2})     # a point of the fan: the same state
    sheet = build_sheet(result, sweep=sweep)
    states = {p["kind"]: p["state"] for p in sheet.panels}
    assert states["fan"] == sweep_fingerprint(sweep)
    assert states["potential"] == states["state"] == result_fingerprint(result)
    assert any(line.startswith(f"Project state {result_fingerprint(result)}: every panel") for line in sheet.caption)


def test_a_sheet_from_two_states_is_refused_or_names_both(dot, sweep, tmp_path):
    other = solve_project(dot, parameters={"l0": 25.0})
    with pytest.raises(InputError) as err:
        build_sheet(other, sweep=sweep)
    text = str(err.value)
    assert "different project states" in text and sweep_fingerprint(sweep) in text
    assert result_fingerprint(other) in text and "l0 = 25" in text
    sheet = build_sheet(other, sweep=sweep, mixed_states="name")
    line = next(c for c in sheet.caption if c.startswith("Panels from two project states"))
    assert sweep_fingerprint(sweep) in line and result_fingerprint(other) in line and "l0 = 25" in line
    # the states are kept with the plotted values
    path = tmp_path / "mixed.sheet.json"
    path.write_text(json.dumps(sheet_to_dict(sheet)), encoding="utf-8")
    again = load_sheet(path)
    assert [p.get("state") for p in again.panels] == [p["state"] for p in sheet.panels]
    with pytest.raises(InputError):
        build_sheet(other, sweep=sweep, mixed_states="maybe")
