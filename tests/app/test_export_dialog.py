"""The figure-sheet export dialog: preview, single panels with CSV, vector output."""
from __future__ import annotations

import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from app.export_dialog import ExportSheetDialog
from app.session import Session

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture
def solved_session(qtbot):
    session = Session()
    session.open(ROOT / "sample_projects" / "elliptical_dot.json")
    with qtbot.waitSignal(session.solved, timeout=120000):
        session.solve()
    yield session
    session.shutdown()


def test_preview_and_save_whole_sheet_as_svg(qtbot, solved_session, tmp_path):
    dialog = ExportSheetDialog(solved_session)
    qtbot.addWidget(dialog)
    assert dialog.sheet is not None and not dialog.preview.pixmap().isNull()
    dialog.type_box.setCurrentText("SVG (vector)")
    files = dialog.save_to(tmp_path / "sheet")
    svg = tmp_path / "sheet.svg"
    assert svg in files and (tmp_path / "sheet.sheet.json").exists()
    root = ET.parse(svg).getroot()
    assert any(el.tag.endswith("path") for el in root.iter())


def test_single_panel_export_writes_its_data(qtbot, solved_session, tmp_path):
    dialog = ExportSheetDialog(solved_session)
    qtbot.addWidget(dialog)
    dialog.panel_box.setCurrentIndex(1)          # the first panel alone
    dialog.refresh()
    assert len(dialog.sheet.panels) == 1
    files = dialog.save_to(tmp_path / "panel.png")
    assert (tmp_path / "panel.png") in files and (tmp_path / "panel.csv").read_text().strip()


def test_fan_layout_without_sweep_explains(qtbot, solved_session):
    dialog = ExportSheetDialog(solved_session)
    qtbot.addWidget(dialog)
    dialog.layout_box.setCurrentIndex(dialog.layout_box.findData("fan"))
    dialog.refresh()
    assert dialog.sheet is None and "sweep" in dialog.message.text()
