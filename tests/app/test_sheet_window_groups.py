"""The figure sheet and the window's level diagram group the same levels: one rule decides (the
solver's degeneracy grouping, ``StudyResult.groups``, itself from ``core.eigensolve.group_levels``),
and levels the sheet must draw side by side because they are too close to separate by eye are still
named one by one, as the window lists them.  A consistency check between two views (common practice),
on the bundled double dot (a tunnel doublet split by ~40 µeV, two levels in the window) and the round
dot (exact Fock-Darwin multiplets, Fock, Z. Phys. 47, 446 (1928))."""
from __future__ import annotations

import re

import pytest

from app.views import LevelsView
from core.figures import build_sheet
from core.project import load_project
from core.study import solve_project
from tests.app.test_views import SAMPLES, _session, _view


def _sheet_level_labels(sheet, tmp_path) -> list:
    """The words of the level labels the sheet draws (one list entry per drawn line)."""
    from core.figures import sheet_figure
    fig = sheet_figure(sheet)
    ax = fig._wellscape_panels[[p["kind"] for p in sheet.panels].index("levels")]
    return [line for t in ax.texts for line in t.get_text().split("\n")]


@pytest.mark.parametrize("name", ["gaas_double_dot", "gaas_single_dot"])
def test_sheet_and_window_group_the_same_levels(qtbot, tmp_path, name):
    project = load_project(str(SAMPLES / f"{name}.json"))
    result = solve_project(project, states=project.solver.states)
    view = _view(qtbot, LevelsView, _session(result))
    window_groups = [tuple(int(i) for i in g) for g in view.groups]
    sheet = build_sheet(result, template="column")
    levels = next(p for p in sheet.panels if p["kind"] == "levels")
    assert [tuple(g) for g in levels["groups"]] == window_groups
    # every window group is named on the sheet by its own label line "<members>: <energy>"
    lines = _sheet_level_labels(sheet, tmp_path)
    named = set()
    for line in lines:
        m = re.match(r"(\d+)(?:–(\d+))?: ", line)
        if m:
            lo, hi = int(m.group(1)), int(m.group(2) or m.group(1))
            named.add(tuple(range(lo, hi + 1)))
    assert named == set(window_groups)


def test_double_dot_doublet_is_two_levels_on_the_sheet(qtbot, tmp_path):
    """The issue's case: the tunnel doublet 0, 1 is two levels in the window, so two on the sheet,
    with the splitting in a readable unit (µeV)."""
    project = load_project(str(SAMPLES / "gaas_double_dot.json"))
    result = solve_project(project, states=project.solver.states)
    view = _view(qtbot, LevelsView, _session(result))
    assert (0,) in [tuple(g) for g in view.groups] and (1,) in [tuple(g) for g in view.groups]
    lines = _sheet_level_labels(build_sheet(result, template="column"), tmp_path)
    assert any(line.startswith("0: ") for line in lines) and any(line.startswith("1: ") for line in lines)
    assert not any(line.startswith("0–1") for line in lines)
    split = 1e3 * float(result.energies[1] - result.energies[0])     # meV -> µeV
    assert any(line == f"split {split:.3g} µeV" for line in lines), lines     # core.labels.splitting_text
