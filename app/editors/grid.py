"""The grid: box, points and boundary per axis, with a live estimate of unknowns and memory."""
from __future__ import annotations

import dataclasses

from PySide6.QtWidgets import (
    QComboBox,
    QGridLayout,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QPushButton,
    QSpinBox,
    QVBoxLayout,
    QWidget,
)

from core.eigensolve import solver_memory_bytes
from core.errors import InputError, WellscapeError
from core.grid import HARD_WALL, PERIODIC, Grid
from core.resources import available_memory_bytes, format_bytes

from .common import MessageLabel, ProjectPanel, apply_edit, compact, fmt

__all__ = ["GridPanel", "memory_estimate"]

AXES = ("x", "y", "z")
BOUNDARY_NAMES = {HARD_WALL: "hard wall", PERIODIC: "periodic"}


def memory_estimate(grid: Grid, states: int, magnetic: bool) -> tuple:
    """(unknowns, bytes the solver allocates, bytes available) for ``states`` states on ``grid``.

    Uses the same block size as :func:`core.study.solve_project`'s own memory check."""
    k = int(states)
    need = solver_memory_bytes(grid.size, k + max(4, k // 2) + 8, magnetic)
    return grid.size, need, available_memory_bytes()


def _has_field(values) -> bool:
    return any(isinstance(v, str) or float(v) != 0.0 for v in values)


class GridPanel(ProjectPanel):
    def __init__(self, session, parent: QWidget | None = None):
        super().__init__(parent)
        self.session = session
        self._loading = False
        self.message = MessageLabel()
        self.dims = QComboBox()
        self.dims.addItems(["1D", "2D", "3D"])
        self.dims.currentIndexChanged.connect(self._on_dims)
        self.table = QGridLayout()
        self.table.addWidget(QLabel("axis"), 0, 0)
        self.unit_label = QLabel()
        self.table.addWidget(QLabel("from"), 0, 1)
        self.table.addWidget(QLabel("to"), 0, 2)
        self.table.addWidget(QLabel("points"), 0, 3)
        self.table.addWidget(QLabel("boundary"), 0, 4)
        self.rows = []
        for a, name in enumerate(AXES):
            lo, hi = QLineEdit(), QLineEdit()
            pts = QSpinBox()
            pts.setRange(3, 100000)
            pts.setKeyboardTracking(False)
            bnd = QComboBox()
            bnd.addItems(list(BOUNDARY_NAMES.values()))
            compact(bnd, 6)
            label = QLabel(name)
            for w in (lo, hi):
                w.setMaximumWidth(80)
                w.editingFinished.connect(self.commit)
                w.textEdited.connect(self.update_estimate)
            pts.valueChanged.connect(self.commit)
            bnd.currentIndexChanged.connect(self.commit)
            for c, w in enumerate((label, lo, hi, pts, bnd)):
                self.table.addWidget(w, a + 1, c)
            self.rows.append((label, lo, hi, pts, bnd))
        self.unit_label.setWordWrap(True)
        self.spacing = QLabel()
        self.spacing.setWordWrap(True)
        self.estimate = QLabel()
        self.estimate.setWordWrap(True)
        self.finer = QPushButton("Finer x2")
        self.coarser = QPushButton("Coarser /2")
        self.finer.setToolTip("Twice as many intervals per axis: compare the levels to check convergence")
        self.coarser.setToolTip("Half as many intervals per axis")
        self.finer.clicked.connect(lambda: self.refine(2.0))
        self.coarser.clicked.connect(lambda: self.refine(0.5))
        top = QHBoxLayout()
        top.addWidget(QLabel("Dimensions"))
        top.addWidget(self.dims)
        top.addStretch(1)
        top.addWidget(self.coarser)
        top.addWidget(self.finer)
        lay = QVBoxLayout(self)
        lay.addLayout(top)
        lay.addWidget(self.unit_label)
        lay.addLayout(self.table)
        lay.addWidget(self.spacing)
        lay.addWidget(self.estimate)
        lay.addWidget(self.message)
        lay.addStretch(1)
        self.follow_session()

    # -- session -> widgets ----------------------------------------------------------------------
    def shown_key(self, p) -> tuple:
        return (p.grid, p.solver.states, tuple(p.magnetic_field), p.units)

    def show_project(self, p) -> None:
        g = p.grid
        self.dims.setCurrentIndex(g.ndim - 1)
        self.unit_label.setText(f"Box corners in {self.session.units.length_unit}. A hard-wall axis holds "
                                f"interior points only: the wavefunction vanishes at its ends.")
        for a, (label, lo, hi, pts, bnd) in enumerate(self.rows):
            on = a < g.ndim
            for w in (label, lo, hi, pts, bnd):
                w.setVisible(on)
            if on:
                lo.setText(fmt(g.lower[a]))
                hi.setText(fmt(g.upper[a]))
                pts.setValue(g.points[a])
                bnd.setCurrentText(BOUNDARY_NAMES[g.boundary[a]])

    def after_refresh(self) -> None:
        self.update_estimate()

    def grid_from_fields(self, ndim: int | None = None) -> Grid:
        ndim = ndim or self.dims.currentIndex() + 1
        lower, upper, points, bnd = [], [], [], []
        by_name = {v: k for k, v in BOUNDARY_NAMES.items()}
        for a in range(ndim):
            _label, lo, hi, pts, b = self.rows[a]
            try:
                lower.append(float(lo.text()))
                upper.append(float(hi.text()))
            except ValueError:
                raise InputError(f"grid axis {AXES[a]}: the box corners must be numbers") from None
            points.append(pts.value())
            bnd.append(by_name[b.currentText()])
        return Grid(lower, upper, points, bnd)

    def update_estimate(self, *_args) -> None:
        p = self.session.project
        try:
            g = self.grid_from_fields()
        except WellscapeError as exc:
            self.estimate.setText(str(exc))
            return
        size, need, avail = memory_estimate(g, p.solver.states, _has_field(p.magnetic_field))
        self.spacing.setText("spacing " + ", ".join(f"{AXES[a]}: {h:.4g}" for a, h in enumerate(g.spacing))
                             + f" {self.session.units.length_unit}")
        warn = need > 0.8 * avail
        self.estimate.setStyleSheet("color: #b00020;" if warn else "")
        self.estimate.setText(f"{size:,} unknowns; solving {p.solver.states} states needs about "
                              f"{format_bytes(need)} of {format_bytes(avail)} available"
                              + (" - too much: use fewer points or the spectral scheme" if warn else ""))

    # -- widgets -> session ----------------------------------------------------------------------
    def commit(self, *_args) -> None:
        if self._loading:
            return
        self.update_estimate()
        try:
            g = self.grid_from_fields()
        except WellscapeError as exc:
            self.message.show_error(str(exc))
            return
        self.set_grid(g)

    def set_grid(self, grid: Grid) -> bool:
        p = self.session.project
        if grid == p.grid:
            return True

        def make(p):
            ef = tuple(p.electric_field)
            if len(ef) not in (3, grid.ndim):
                ef = (ef + (0.0,) * 3)[: grid.ndim]
            return dataclasses.replace(p, grid=grid, electric_field=ef)
        ok = apply_edit(self.session, make, "change grid", self.message)
        if not ok:
            self.redraw()
        return ok

    def _on_dims(self, index: int) -> None:
        if self._loading:
            return
        g = self.session.project.grid
        ndim = index + 1
        lower, upper, points, bnd = list(g.lower), list(g.upper), list(g.points), list(g.boundary)
        while len(lower) < ndim:
            lower.append(g.lower[0])
            upper.append(g.upper[0])
            points.append(g.points[0])
            bnd.append(g.boundary[0])
        grid = Grid(lower[:ndim], upper[:ndim], points[:ndim], bnd[:ndim])
        self.set_grid(grid)

    def refine(self, factor: float) -> bool:
        return self.set_grid(self.session.project.grid.refined(factor))
