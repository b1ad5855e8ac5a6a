"""Parameter edits reach the scale and fill of a points term (pure functions of app.editors.edits)."""
from __future__ import annotations

from app.editors.edits import parameter_uses, rename_parameter
from core.grid import Grid
from core.project import MaterialSpec, PointsTerm, Project


def test_rename_and_uses_cover_points_term():
    project = Project(title="Avocet", units="semiconductor", material=MaterialSpec(name="GaAs"),
                      grid=Grid([-1.0, -1.0], [1.0, 1.0], [4, 4]), parameters={"s": 2.0, "f": 1.0},
                      potential=(PointsTerm("export", "v.csv", scale="-1000*s", fill="f"),),
                      electric_field=(0.0, 0.0))
    assert parameter_uses(project, "s") == ["term 'export'"]
    assert parameter_uses(project, "f") == ["term 'export'"]
    renamed = rename_parameter(rename_parameter(project, "s", "lever"), "f", "outside")
    assert renamed.potential[0].scale == "-1000*lever" and renamed.potential[0].fill == "outside"


def test_terms_panel_names_a_points_term_and_offers_no_wrong_editor(session, qtbot, tmp_path):
    import dataclasses

    import numpy as np

    from app.editors import TermsPanel
    from core.project import FormulaTerm

    pts = np.array([[-200, -200], [200, -200], [200, 200], [-200, 200], [0, 0]], dtype=float)
    np.savetxt(tmp_path / "v.csv", np.column_stack([pts, np.zeros(5)]), delimiter=",")
    project = dataclasses.replace(session.project, base_dir=str(tmp_path),
                                  potential=(FormulaTerm("well", "0.5*hw*(x**2 + y**2)/l0**2"),
                                             PointsTerm("export", "v.csv")))
    session.set_project(project, "points term")
    panel = TermsPanel(session)
    qtbot.addWidget(panel)
    assert panel.tree.topLevelItem(1).text(1) == "scattered points"
    panel.tree.setCurrentItem(panel.tree.topLevelItem(0))
    assert panel.detail.currentWidget() is panel.formula
    panel.tree.setCurrentItem(panel.tree.topLevelItem(1))
    assert panel.detail.currentWidget() is panel.other_note
    assert "scattered points" in panel.detail_title.text()
