"""The "Export figure sheet" dialog: layout, size and file type, a live preview, then save.

Everything is drawn by core.figures (matplotlib); the dialog only collects choices and
shows a PNG preview. Single panels (one view) can be exported too, with their data as CSV.
"""
from __future__ import annotations

import tempfile
from pathlib import Path

from PySide6 import QtCore, QtGui, QtWidgets

FILE_TYPES = {"PDF (vector)": ".pdf", "SVG (vector)": ".svg", "PNG (image)": ".png"}


class ExportSheetDialog(QtWidgets.QDialog):
    """Compose a figure sheet from the session's latest result (and sweep), preview it, save it."""

    def __init__(self, session, parent=None):
        super().__init__(parent)
        from core.figures import DEFAULT_LAYOUT, LAYOUTS, TEMPLATES
        self.session = session
        self.setWindowTitle("Export figure sheet")
        self.layout_box = QtWidgets.QComboBox()
        for name, text in LAYOUTS.items():
            self.layout_box.addItem(f"{name}  —  {text}", name)
        self.layout_box.setCurrentIndex(max(0, self.layout_box.findData(DEFAULT_LAYOUT)))
        self.panel_box = QtWidgets.QComboBox()
        self.panel_box.addItem("the whole sheet", -1)
        self.template_box = QtWidgets.QComboBox()
        for name, t in TEMPLATES.items():
            self.template_box.addItem(f"{name}: {t.description}" if hasattr(t, "description") else name, name)
        self.type_box = QtWidgets.QComboBox()
        self.type_box.addItems(list(FILE_TYPES))
        self.dpi_box = QtWidgets.QSpinBox()
        self.dpi_box.setRange(50, 1200)
        self.dpi_box.setValue(200)
        self.dpi_box.setSuffix(" dpi")
        self.mixed_box = QtWidgets.QCheckBox("allow a fan from another project state (the caption names both)")
        self.mixed_box.setToolTip("By default a sheet whose sweep fan ran on another version of the project than "
                                  "the solve is refused")
        self.preview = QtWidgets.QLabel("The preview appears here.")
        self.preview.setAlignment(QtCore.Qt.AlignmentFlag.AlignCenter)
        self.preview.setMinimumSize(640, 360)
        self.message = QtWidgets.QLabel("")
        self.message.setWordWrap(True)
        form = QtWidgets.QFormLayout()
        form.addRow("Layout", self.layout_box)
        form.addRow("Export", self.panel_box)
        form.addRow("Size", self.template_box)
        form.addRow("File type", self.type_box)
        form.addRow("Resolution of images", self.dpi_box)
        form.addRow("", self.mixed_box)
        buttons = QtWidgets.QDialogButtonBox()
        self.save_button = buttons.addButton("Save...", QtWidgets.QDialogButtonBox.ButtonRole.AcceptRole)
        buttons.addButton(QtWidgets.QDialogButtonBox.StandardButton.Close)
        buttons.accepted.connect(self.save_dialog)
        buttons.rejected.connect(self.reject)
        lay = QtWidgets.QVBoxLayout(self)
        lay.addLayout(form)
        lay.addWidget(self.preview, 1)
        lay.addWidget(self.message)
        lay.addWidget(buttons)
        self._timer = QtCore.QTimer(self, singleShot=True, interval=150, timeout=self.refresh)
        for box in (self.layout_box, self.template_box, self.panel_box):
            box.currentIndexChanged.connect(lambda *_: self._timer.start())
        self.mixed_box.toggled.connect(lambda *_: self._timer.start())
        self.sheet = None
        self.refresh()

    def build(self):
        """The sheet (or one of its panels) for the current choices; None with a message if impossible."""
        from core.errors import WellscapeError
        from core.figures import build_sheet
        result = getattr(self.session, "result", None)
        sweep = getattr(self.session, "sweep_result", None)
        layout = self.layout_box.currentData()
        if result is None and "fan" not in layout:
            self.message.setText("Solve the project first: the sheet shows its potential, states and levels.")
            return None
        if "fan" in layout and sweep is None:
            self.message.setText("This layout shows a sweep fan: run a sweep first (Sweep tab).")
            return None
        try:
            checks = getattr(self.session, "checks", None)
            report = checks.report_for(result) if checks is not None and result is not None else None
            sheet = build_sheet(result, sweep=sweep if "fan" in layout else None, layout=layout,
                                template=self.template_box.currentData(), convergence=report,
                                mixed_states="name" if self.mixed_box.isChecked() else "refuse")
        except WellscapeError as exc:
            self.message.setText(f"Cannot compose this sheet: {exc}")
            return None
        current = self.panel_box.currentData()
        self.panel_box.blockSignals(True)
        self.panel_box.clear()
        self.panel_box.addItem("the whole sheet", -1)
        for i, panel in enumerate(sheet.panels):
            self.panel_box.addItem(f"panel {i + 1}: {panel.get('title') or panel.get('kind')}", i)
        self.panel_box.setCurrentIndex(max(0, self.panel_box.findData(current)))
        self.panel_box.blockSignals(False)
        index = self.panel_box.currentData()
        return sheet if index is None or index < 0 else sheet.single_panel(index)

    def refresh(self) -> None:
        from core.figures import render_sheet
        self.sheet = self.build()
        self.save_button.setEnabled(self.sheet is not None)
        if self.sheet is None:
            self.preview.setPixmap(QtGui.QPixmap())
            return
        with tempfile.TemporaryDirectory() as tmp:
            png = Path(tmp) / "preview.png"
            render_sheet(self.sheet, png, dpi=60)
            pix = QtGui.QPixmap(str(png))
        self.preview.setPixmap(pix.scaled(self.preview.size(), QtCore.Qt.AspectRatioMode.KeepAspectRatio,
                                          QtCore.Qt.TransformationMode.SmoothTransformation))
        self.message.setText("Vector files keep maps at the grid's own resolution. The data plotted is "
                             "written beside the figure (.sheet.json); a single panel also gets a .csv.")

    def save_to(self, path) -> list:
        """Write the figure (and its data) to ``path``; returns the files written."""
        from core.export import panel_csv_text
        from core.figures import save_sheet
        path = Path(path)
        if not path.suffix:
            path = path.with_suffix(FILE_TYPES[self.type_box.currentText()])
        written = [Path(p) for p in save_sheet(self.sheet, path, dpi=self.dpi_box.value()) if p]
        if len(self.sheet.panels) == 1:
            csv = path.with_suffix(".csv")
            csv.write_text(panel_csv_text(self.sheet.panels[0]), encoding="utf-8")
            written.append(csv)
        return written

    def save_dialog(self) -> None:
        from core.errors import WellscapeError
        if self.sheet is None:
            return
        suffix = FILE_TYPES[self.type_box.currentText()]
        name, _ = QtWidgets.QFileDialog.getSaveFileName(self, "Save figure sheet", f"sheet{suffix}",
                                                        f"{self.type_box.currentText()} (*{suffix})")
        if not name:
            return
        try:
            files = self.save_to(name)
        except (WellscapeError, OSError) as exc:
            self.message.setText(f"Not saved: {exc}")
            return
        self.message.setText("Saved " + ", ".join(str(f) for f in files))
