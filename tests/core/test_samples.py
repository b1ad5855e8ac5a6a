"""Every bundled sample project loads, validates and solves, with physically sensible results."""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from core.project import load_project
from core.study import solve_project

SAMPLES = sorted((Path(__file__).resolve().parents[2] / "sample_projects").glob("*.json"))


def test_there_are_at_least_six_samples_with_notes():
    assert len(SAMPLES) >= 6
    for path in SAMPLES:
        data = json.loads(path.read_text(encoding="utf-8"))
        assert len(data.get("notes", "")) > 80, f"{path.name} needs notes on what to look at"


@pytest.mark.parametrize("path", SAMPLES, ids=[p.stem for p in SAMPLES])
def test_sample_solves(path):
    project = load_project(path)
    assert project.warnings == ()
    result = solve_project(project)
    spec = result.spectrum
    assert spec.converged and spec.energies.size >= project.solver.states
    assert np.all(np.diff(spec.energies) >= 0)
    # bound states lie above the potential minimum (variational bound; common practice)
    assert spec.energies[0] > result.potential.min()
    norms = (np.abs(spec.states) ** 2).reshape(spec.energies.size, -1).sum(axis=1) * result.grid.volume_element
    np.testing.assert_allclose(norms, 1.0, atol=1e-10)
