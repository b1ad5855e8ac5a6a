"""The window keeps and lists material regions (read-only page)."""
from __future__ import annotations

from app.editors import NotesPanel, ProjectEditors, RegionsPanel


def test_regions_page_lists_regions_and_edits_keep_them(session, sample_path, qtbot):
    session.open(sample_path("inas_lens_regions"))
    panel = RegionsPanel(session)
    qtbot.addWidget(panel)
    assert panel.table.rowCount() == 1
    assert panel.table.item(0, 0).text() == "InAs lens and wetting layer"
    assert panel.table.item(0, 1).text() == "InAs"
    assert "hgt" in panel.table.item(0, 2).text()
    assert "table" in panel.table.item(0, 3).text()
    notes = NotesPanel(session)
    qtbot.addWidget(notes)
    notes.title.setText("Renamed lens")
    notes.commit()
    assert session.project.title == "Renamed lens"
    assert session.project.regions and session.project.regions[0].material.name == "InAs"


def test_editors_open_a_project_without_regions(session, sample_path, qtbot):
    session.open(sample_path("gaas_single_dot"))
    editors = ProjectEditors(session)
    qtbot.addWidget(editors)
    assert editors.regions.table.rowCount() == 0
    assert "No material regions" in editors.regions.hint.text()
