"""The level diagram: one bar per level, degenerate multiplets side by side, with labels.

Labels (multiplicity, energy, mirror parity, L_z eigenvalues, spin) come from ``core.analysis``;
the grouping uses the session's degeneracy tolerance (adjustable here) or, when it is unset, one
built from the error estimates of a convergence check, or else the solver's own.  Clicking a bar
selects that state; hovering shows its numbers.

Trust marks (``session.checks``): after a convergence check every splitting between adjacent levels
carries a mark - ✓ "resolved" (larger than the combined error estimate of its two levels) or
≈ "not resolved" (within it) - beside the bars (between levels) or between the side-by-side bars
of a multiplet, each level gets an error bar (its estimated grid error), and the labels say in
words where the grid cannot tell levels apart.  The level count's certificate is shown as
✔ "count verified", ✘ "count NOT verified" or ○ "count not checked".
"""
from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtGui, QtWidgets

from core.convergence import DEGENERATE, TOO_COARSE
from core.convergence_report import (
    coarse_words,
    format_bound,
    format_uncertain,
    level_status,
    order_words,
    summary_words,
)
from core.errors import WellscapeError
from core.labels import cluster_text, clusters, level_labels

from . import colormaps
from .common import (
    HintStack,
    StaleNote,
    axis_title,
    fmt,
    fmt_energy,
    grey_plot,
    make_plot,
    pretty_unit,
    set_titles,
    stale_message,
)

__all__ = ["LevelsView", "ToleranceBox", "level_labels"]

_HINT = ("No levels yet. Solve the project (or move a parameter) and the level diagram appears here: "
         "one bar per level, degenerate levels side by side.")
_BAR_W = 1.0
_BAR_GAP = 0.3
_BAR_PEN = pg.mkPen("#1d3557", width=3)
_SEL_PEN = pg.mkPen(colormaps.ACCENT, width=6)
_LEADER_PEN = pg.mkPen((120, 120, 120, 160), width=1)
_STALE_PEN = pg.mkPen("#8d99ae", width=3)
_BOX_PEN = pg.mkPen("#9b1c1c", width=3, style=QtCore.Qt.PenStyle.DashLine)
#: multiplets closer than this share of the diagram's energy span are drawn as one cluster, side by
#: side, and labelled together with their splitting (at 1 % of a 500-pixel diagram: 5 pixels)
_CLUSTER_FRACTION = 0.01
_CLUSTER_GAP = 0.8
_LINE_PX = 17.0
_ERR_PEN = pg.mkPen("#6c757d", width=1.5)
_BRACKET_PENS = {True: pg.mkPen("#1d3557", width=1.5),
                 False: pg.mkPen("#8a5a00", width=1.5, style=QtCore.Qt.PenStyle.DashLine)}
_MARK_COLORS = {True: "#1d3557", False: "#8a5a00"}
#: level count certificate: symbol (the verdict never rests on colour alone) and colour
_COUNT_MARKS = {"count verified": ("✔", "#1b6e3a"), "count NOT verified": ("✘", "#9b1c1c"),
                "count not checked": ("○", "#555555")}


class ToleranceBox(QtWidgets.QDoubleSpinBox):
    """A spin box for small positive energies: shows 3 significant figures, steps by factors of 10."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.setDecimals(15)
        self.setRange(1e-14, 1e6)
        self.setKeyboardTracking(False)
        self.setValue(1e-6)

    def textFromValue(self, value: float) -> str:  # noqa: N802 - Qt override
        return f"{value:.3g}"

    def valueFromText(self, text: str) -> float:  # noqa: N802 - Qt override
        try:
            return float(text.replace(self.suffix(), "").strip())
        except ValueError:
            return self.value()

    def validate(self, text: str, pos: int):
        body = text.replace(self.suffix(), "").strip()
        try:
            v = float(body)
            ok = v > 0
        except ValueError:
            ok = False
        state = QtGui.QValidator.State.Acceptable if ok else QtGui.QValidator.State.Intermediate
        return state, text, pos

    def stepBy(self, steps: int) -> None:  # noqa: N802 - Qt override
        self.setValue(self.value() * (10.0 ** steps))


def _span(members) -> str:
    return f"{members[0]}" if len(members) == 1 else f"{members[0]}–{members[-1]}"


class LevelsView(QtWidgets.QWidget):
    """Level diagram of the session's last result."""

    def __init__(self, session, parent=None):
        super().__init__(parent)
        self.session = session
        self.result = None
        self.groups: tuple = ()
        self.labels: list = []
        self.bars: list = []               # (level index, x0, x1, energy shown)
        self._label_items: list = []
        self._label_pool: list = []        # every label TextItem made so far (hidden when not needed)
        self._relative = False

        self.header = QtWidgets.QLabel("")
        self.header.setWordWrap(True)
        self.stale_note = StaleNote()
        self.clusters: list = []           # lists of indices into self.labels drawn (and labelled) together
        self.tolerance = ToleranceBox()
        self.tolerance.setMinimumWidth(130)
        self.tolerance.setToolTip("Two consecutive levels closer than this count as degenerate and are "
                                  "drawn side by side")
        self.tolerance.valueChanged.connect(self._on_tolerance_edited)
        self.solver_tolerance = QtWidgets.QPushButton("default")
        self.solver_tolerance.setToolTip("Group with the default tolerance: built from the error estimates of a "
                                         "convergence check when there is one, else the eigensolver's own")
        self.solver_tolerance.clicked.connect(self._on_use_solver_tolerance)
        self.relative = QtWidgets.QCheckBox("measure from the ground level")
        self.relative.toggled.connect(self._on_relative_toggled)
        row = QtWidgets.QHBoxLayout()
        row.addWidget(QtWidgets.QLabel("degenerate when closer than"))
        row.addWidget(self.tolerance)
        row.addWidget(self.solver_tolerance)
        row.addStretch(1)
        row.addWidget(self.relative)

        self.count_label = QtWidgets.QLabel("")
        self.count_label.setWordWrap(True)
        self.count_label.setTextInteractionFlags(QtCore.Qt.TextInteractionFlag.TextSelectableByMouse)
        self.verify_button = QtWidgets.QPushButton("Verify level count")
        self.verify_button.setToolTip("Count the eigenvalues below the highest level independently (Sylvester's law "
                                      "of inertia on a sparse LDL^T factorisation) to confirm that no level was missed")
        self.verify_button.clicked.connect(self._on_verify_clicked)
        self.converge_label = QtWidgets.QLabel("")
        self.converge_label.setWordWrap(True)
        self.converge_label.setTextInteractionFlags(QtCore.Qt.TextInteractionFlag.TextSelectableByMouse)
        self.converge_button = QtWidgets.QPushButton("Check convergence")
        self.converge_button.setToolTip("Solve again on two coarser grids, extrapolate every level to zero spacing "
                                        "and mark each splitting as resolved or not resolved by the grid")
        self.converge_button.clicked.connect(self._on_converge_clicked)
        checks_box = QtWidgets.QGridLayout()
        checks_box.addWidget(self.count_label, 0, 0)
        checks_box.addWidget(self.verify_button, 0, 1)
        checks_box.addWidget(self.converge_label, 1, 0)
        checks_box.addWidget(self.converge_button, 1, 1)
        checks_box.setColumnStretch(0, 1)

        self.plot = make_plot()
        item = self.plot.getPlotItem()
        item.hideAxis("bottom")
        item.setMouseEnabled(x=False, y=True)
        self.bar_item = pg.PlotDataItem(pen=_BAR_PEN, connect="pairs")
        self.box_item = pg.PlotDataItem(pen=_BOX_PEN, connect="pairs")       # bars of box states
        self.sel_item = pg.PlotDataItem(pen=_SEL_PEN, connect="pairs")
        self.leader_item = pg.PlotDataItem(pen=_LEADER_PEN, connect="pairs")
        self.error_item = pg.ErrorBarItem(x=np.zeros(0), y=np.zeros(0), height=np.zeros(0), beam=0.25, pen=_ERR_PEN)
        self.bracket_items = {ok: pg.PlotDataItem(pen=_BRACKET_PENS[ok], connect="pairs") for ok in (True, False)}
        self._mark_items: list = []
        self.marks: list = []              # (lower level, upper level, resolved, x, y) of every splitting marked
        for it in (self.leader_item, self.error_item, *self.bracket_items.values(), self.bar_item, self.box_item,
                   self.sel_item):
            self.plot.addItem(it)
        self.plot.scene().sigMouseClicked.connect(self._on_scene_clicked)
        self.plot.scene().sigMouseMoved.connect(self._on_mouse_moved)
        vb = item.getViewBox()
        vb.sigResized.connect(self._layout_labels)
        vb.sigRangeChanged.connect(lambda *_: self._layout_labels())

        self.info = QtWidgets.QLabel("Hover over a level for its numbers; click it to show its state.")
        self.info.setWordWrap(True)
        self.info.setTextInteractionFlags(QtCore.Qt.TextInteractionFlag.TextSelectableByMouse)

        inner = QtWidgets.QWidget()
        il = QtWidgets.QVBoxLayout(inner)
        il.setContentsMargins(0, 0, 0, 0)
        il.addWidget(self.stale_note)
        il.addWidget(self.header)
        il.addLayout(row)
        il.addLayout(checks_box)
        # two electrons ("electrons": 2): their singlet and triplet levels beside the single-particle ones
        from .two_electron_panel import TwoElectronPanel
        self.two_electron = TwoElectronPanel(session)
        columns = QtWidgets.QHBoxLayout()
        columns.addWidget(self.plot, 3)
        columns.addWidget(self.two_electron, 2)
        il.addLayout(columns, 1)
        il.addWidget(self.info)
        self.stack = HintStack(inner, _HINT)
        lay = QtWidgets.QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        lay.addWidget(self.stack)

        session.solved.connect(self._on_solved)
        session.selection_changed.connect(self._on_selection_changed)
        session.project_changed.connect(self._on_project_changed)
        if hasattr(session, "stale_changed"):
            session.stale_changed.connect(self._update_stale)
        if hasattr(session, "degeneracy_changed"):
            session.degeneracy_changed.connect(self._on_degeneracy_changed)
        self.checks = getattr(session, "checks", None)
        if self.checks is not None:
            self.checks.started.connect(self._on_check_started)
            self.checks.progressed.connect(self._on_check_progressed)
            self.checks.estimated.connect(self._on_check_estimated)
            self.checks.failed.connect(self._on_check_failed)
            self.checks.finished.connect(lambda *_: self._update_checks())
            self.checks.changed.connect(self._on_checks_changed)
            self.checks.running_changed.connect(self._update_checks)
        else:
            for w in (self.verify_button, self.converge_button):
                w.setEnabled(False)
        if hasattr(session, "add_result_analysis"):
            # labels need <L_z> per multiplet: compute them in the solve's worker, not on the GUI thread
            session.add_result_analysis("level_labels", lambda r: level_labels(r, r.groups))
        if getattr(session, "result", None) is not None:
            self._on_solved(session.result)

    # -- session ----------------------------------------------------------------------------------
    def _on_project_changed(self) -> None:
        if getattr(self.session, "result", None) is None:
            self.result = None
            self.stack.show_hint(_HINT)

    def _on_solved(self, result=None) -> None:
        result = result if result is not None else self.session.result
        if result is None:
            self.stack.show_hint(_HINT)
            return
        self.result = result
        self.stack.show_content()
        u = result.units
        self.tolerance.setSuffix(f" {pretty_unit(u.energy_unit)}")
        self._sync_tolerance_box()
        current = result is getattr(self.session, "result", None)
        text = stale_message(self.session, short=True) if current and hasattr(self.session, "stale_changed") else ""
        self.stale_note.show_text(text)
        grey_plot(self.plot, bool(text))
        self._regroup()

    def _on_selection_changed(self, _index: int = 0) -> None:
        self._draw_selection()

    # -- tolerance ----------------------------------------------------------------------------------
    def tolerance_in_use(self) -> float:
        tol = getattr(self.session, "degeneracy_tolerance", None)
        if tol is None and self.result is not None:
            tol = self._error_based_tolerance()
        if tol is None and self.result is not None:
            tol = float(self.result.spectrum.degeneracy_tolerance)
        return float(tol) if tol is not None else 0.0

    def _error_based_tolerance(self) -> float | None:
        fn = getattr(self.session, "error_based_tolerance", None)
        return fn() if fn is not None and self.result is self.session.result else None

    def _sync_tolerance_box(self) -> None:
        self.tolerance.blockSignals(True)
        self.tolerance.setValue(max(self.tolerance_in_use(), self.tolerance.minimum()))
        self.tolerance.blockSignals(False)

    def _on_tolerance_edited(self, value: float) -> None:
        self.set_tolerance(value)

    def set_tolerance(self, value: float | None) -> None:
        """Set the session's degeneracy tolerance (None: the solver's) and regroup."""
        try:
            self.session.degeneracy_tolerance = None if value is None else float(value)
        except WellscapeError as exc:
            self.info.setText(f"Tolerance not changed: {exc}")
        if not hasattr(self.session, "degeneracy_changed"):
            self._on_degeneracy_changed()

    def _on_degeneracy_changed(self) -> None:
        self._sync_tolerance_box()
        if self.result is not None:
            self._regroup()

    def _on_use_solver_tolerance(self) -> None:
        self.set_tolerance(None)

    def _on_relative_toggled(self, on: bool) -> None:
        self._relative = bool(on)
        if self.result is not None:
            self._draw()

    # -- grouping and drawing -------------------------------------------------------------------------
    def _regroup(self) -> None:
        from core.eigensolve import group_levels
        result = self.result
        tol = getattr(self.session, "degeneracy_tolerance", None)
        if tol is None:
            tol = self._error_based_tolerance()
        self.groups = result.groups if tol is None else group_levels(result.energies, float(tol))
        ready = getattr(result, "extra", {}).get("level_labels") if tuple(self.groups) == tuple(result.groups) else None
        self.labels = ready if ready is not None else level_labels(result, self.groups)
        self._draw()

    def _shown(self, e: float) -> float:
        return e - float(self.result.energies[0]) if self._relative else e

    def _label_text(self, lab: dict) -> str:
        u = self.result.units
        m = len(lab["members"])
        parts = []
        if m > 1:
            parts.append(f"×{m}")
        if self._relative:
            parts.append("E − E₀ = " + fmt_energy(self._shown(lab["energy"]), u.energy_unit, 6))
        else:
            parts.append(fmt_energy(lab["energy"], u.energy_unit, 6))
        if lab["parity"]:
            parts.append(lab["parity"])
        if lab["lz_text"]:
            parts.append(lab["lz_text"])
        words = self._verdict_words(lab["members"])
        if words:
            parts.append(words)
        if lab.get("box"):
            parts.append("▲ box state (not bound)")
        return "   ".join(parts)

    def _cluster_text(self, members: list) -> str:
        """The label of a cluster: its splittings on the first line, then each multiplet, highest first."""
        if len(members) == 1:
            return self._label_text(self.labels[members[0]])
        u = self.result.units
        energies = [self.labels[i]["energy"] for i in members]
        head = f"{len(members)} close levels: " + cluster_text(energies, list(range(len(members))), u.energy_unit)
        return "\n".join([head] + [self._label_text(self.labels[i]) for i in reversed(members)])

    # -- trust marks ----------------------------------------------------------------------------------
    def report(self):
        """The convergence report that applies to the shown result, or None."""
        if self.checks is None or self.result is None:
            return None
        return self.checks.report_for(self.result)

    def _applied_report(self) -> tuple | None:
        """``(grid_errors, splittings)`` of the report on the shown levels, or None without one."""
        rep = self.report()
        if rep is None:
            return None
        return rep.on_levels(self.result.energies, self.result.spectrum.degeneracy_tolerance)

    def level_errors(self) -> np.ndarray | None:
        """Estimated grid error of each shown level (nan where unknown), or None without a report."""
        applied = self._applied_report()
        return None if applied is None else applied[0]

    def splittings(self) -> list:
        """The report's splittings between shown levels (both ends matched), or [] without a report."""
        applied = self._applied_report()
        return [] if applied is None else list(applied[1])

    def _verdict_words(self, members) -> str:
        sps = self.splittings()
        if not sps:
            return ""
        group = set(int(i) for i in members)
        inside = [sp for sp in sps if sp.lower in group and sp.upper in group]
        below = [sp for sp in sps if sp.upper in group and sp.lower not in group]
        words = []
        if inside:
            if any(sp.too_coarse for sp in inside):
                words.append(f"≈ {TOO_COARSE}")
            elif all(sp.degenerate for sp in inside):
                words.append(f"≈ {DEGENERATE}")
            elif all(not sp.resolved for sp in inside):
                words.append("≈ degenerate within the grid error")
            else:
                words.append("✓ a resolved splitting inside")
        if any(sp.too_coarse for sp in below):
            words.append("≈ too coarse to judge against the level below")
        elif any(not sp.resolved for sp in below):
            words.append("≈ not resolved from the level below")
        return " · ".join(words)

    def _draw_trust(self, energies: np.ndarray) -> None:
        for it in self._mark_items:
            self.plot.removeItem(it)
        self._mark_items = []
        self.marks = []
        errors = self.level_errors()
        if errors is None:
            self.error_item.setData(x=np.zeros(0), y=np.zeros(0), height=np.zeros(0))
            for it in self.bracket_items.values():
                it.setData([], [])
            return
        centre = {level: (0.5 * (x0 + x1), x0, x1, e) for level, x0, x1, e in self.bars}
        ok = np.isfinite(errors)
        lv = [i for i in range(len(errors)) if ok[i] and i in centre]
        self.error_item.setData(x=np.array([centre[i][0] for i in lv]), y=np.array([centre[i][3] for i in lv]),
                                height=2.0 * errors[lv])
        group_of = {int(i): gi for gi, g in enumerate(self.groups) for i in g}
        brackets = {True: ([], []), False: ([], [])}
        x_col = -self._half - 0.2
        for sp in self.splittings():
            a, b = sp.lower, sp.upper
            if a not in centre or b not in centre:
                continue
            ea, eb = centre[a][3], centre[b][3]
            if group_of.get(a) == group_of.get(b):
                left, right = sorted((centre[a], centre[b]), key=lambda c: c[1])
                x = 0.5 * (left[2] + right[1]) if right[1] > left[2] else 0.5 * (left[0] + right[0])
                y, anchor = max(ea, eb), (0.5, 1.0)
            else:
                lo, hi = min(ea, eb), max(ea, eb)
                xs, ys = brackets[sp.resolved]
                inset = 0.12 * (hi - lo)           # consecutive brackets stay apart
                b0, b1 = lo + inset, hi - inset
                xs += [x_col, x_col, x_col, x_col + 0.1, x_col, x_col + 0.1]
                ys += [b0, b1, b0, b0, b1, b1]
                x, y, anchor = x_col - 0.05, 0.5 * (lo + hi), (1.0, 0.5)
            t = pg.TextItem(sp.mark, anchor=anchor, color=_MARK_COLORS[sp.resolved])
            t.setPos(x, y)
            self.plot.addItem(t)
            self._mark_items.append(t)
            self.marks.append((a, b, bool(sp.resolved), x, y))
        for resolved, (xs, ys) in brackets.items():
            self.bracket_items[resolved].setData(np.array(xs, dtype=float), np.array(ys, dtype=float))

    # -- checks (count and convergence) --------------------------------------------------------------
    def _on_verify_clicked(self) -> None:
        if self.checks is not None and self.session.result is not None:
            self.checks.verify_count(self.session.result)

    def _on_converge_clicked(self) -> None:
        if self.checks is None:
            return
        if self.checks.running("convergence"):
            self.checks.cancel("convergence")
        else:
            self.checks.check_convergence()

    def _on_check_started(self, kind: str) -> None:
        if kind == "count":
            self.count_label.setText("… counting the levels below the top one (independent check)")
        else:
            self.converge_label.setText("… checking convergence: solving on coarser grids")
        self._update_buttons()

    def _on_check_progressed(self, stage: str, fraction: float) -> None:
        counting = stage.startswith(("building", "factor"))
        if self.checks is not None and self.checks.running("convergence") and not counting:
            self.converge_label.setText(f"… checking convergence: {stage} {100 * fraction:.0f}%")

    def _on_check_estimated(self, kind: str, estimate) -> None:
        if kind == "convergence":
            grids = len(estimate.extra.get("grids", ())) or "several"
            self.converge_label.setText(f"… checking convergence: solving on {grids} grids ({estimate.brief()})")

    def _on_check_failed(self, kind: str, message: str) -> None:
        target = self.count_label if kind == "count" else self.converge_label
        target.setText(f"<span style='color:#9b1c1c'>{kind} check: {message}</span>")
        self._update_buttons()

    def _on_checks_changed(self) -> None:
        self._update_checks()
        if self.result is not None:
            self._regroup()

    def _update_buttons(self) -> None:
        if self.checks is None:
            return
        has = self.session.result is not None
        self.verify_button.setEnabled(has and not self.checks.running("count"))
        self.converge_button.setText("Cancel check" if self.checks.running("convergence") else "Check convergence")
        self.converge_button.setEnabled(True)

    def _update_checks(self) -> None:
        """Texts of the count certificate and the convergence check for the shown result; while that
        result is out of date they say that they describe it, not the project as it is now."""
        self._update_check_texts()
        if self.result is not None and self.stale_note.stale:
            for label in (self.count_label, self.converge_label):
                text = label.text()
                if text and not text.startswith("… ") and "(for the earlier version shown)" not in text:
                    label.setText(f"<span style='color:#6c757d'>{text} — <i>(for the earlier version shown)</i></span>")

    def _update_stale(self) -> None:
        """Grey the diagram and say so when the shown levels are not of the project as it is now."""
        current = self.result is not None and self.result is getattr(self.session, "result", None)
        text = stale_message(self.session, short=True) if current else ""
        was = self.stale_note.stale
        self.stale_note.show_text(text)
        grey_plot(self.plot, bool(text))
        if self.result is not None and was != bool(text):
            self._draw()

    def _update_check_texts(self) -> None:
        self._update_buttons()
        if self.checks is None or self.result is None:
            return
        u = self.result.units
        cert = self.checks.certificate_for(self.result)
        skipped = self.checks.skipped_as_too_long(self.result) if cert is not None else None
        if skipped is not None:
            self.count_label.setText(f"○ count not checked — the factorisation would take about {skipped:.0f} s, "
                                     f"too long to run after every solve; press “Verify level count” to run it")
        elif cert is not None:
            sym, colour = _COUNT_MARKS.get(cert.label, ("○", "#555555"))
            reason = cert.describe(pretty_unit(u.energy_unit))
            self.count_label.setText(f"<span style='color:{colour}'><b>{sym} {cert.label}</b></span> — {reason}")
        elif not self.checks.running("count"):
            self.count_label.setText("○ count not checked — press “Verify level count” to confirm that no level "
                                     "below the highest one was missed")
        rep = self.report()
        if rep is None and self.checks.running("convergence"):
            return
        if rep is None:
            stale = self.checks.latest_report is not None
            self.converge_label.setText(("○ convergence not checked for these parameters"
                                         if stale else "○ convergence not checked")
                                        + " — is a splitting physics or a grid artefact? “Check convergence” tells")
            return
        sps = self.splittings()
        ok_part, rest = summary_words(rep, sps).split(", ", 1)
        text = (f"<b>convergence checked</b> on {len(rep.grids)} grids ({order_words(rep)}) · "
                f"<span style='color:{_MARK_COLORS[True]}'>{ok_part}</span>, "
                f"<span style='color:{_MARK_COLORS[False]}'>{rest}</span> · "
                f"error bars: estimated grid error of each level")
        for line in coarse_words(rep):
            text += "<br>≈ " + line
        if rep.warnings:
            text += "<br><span style='color:#9b1c1c'>" + "; ".join(str(w) for w in rep.warnings) + "</span>"
        self.converge_label.setText(text)

    def _draw(self) -> None:
        result = self.result
        u = result.units
        energies = np.asarray(result.energies)
        means = [self._shown(lab["energy"]) for lab in self.labels]
        span = (max(means) - min(means)) if means else 0.0
        self.clusters = clusters(means, _CLUSTER_FRACTION * span) if span > 0 else [[i] for i in range(len(means))]
        stale = self.stale_note.stale
        self.bars = []
        xs, ys, bx, by = [], [], [], []
        widths = []
        for members in self.clusters:
            w = [len(self.labels[i]["members"]) * (_BAR_W + _BAR_GAP) - _BAR_GAP for i in members]
            widths.append(sum(w) + (len(w) - 1) * _CLUSTER_GAP)
        for members, total in zip(self.clusters, widths):
            x = -total / 2.0
            for i in members:
                lab = self.labels[i]
                for level in lab["members"]:
                    e = self._shown(float(energies[level]))
                    self.bars.append((int(level), x, x + _BAR_W, e))
                    (bx if lab.get("box") else xs).extend([x, x + _BAR_W])
                    (by if lab.get("box") else ys).extend([e, e])
                    x += _BAR_W + _BAR_GAP
                x += _CLUSTER_GAP - _BAR_GAP
        self.bar_item.setPen(_STALE_PEN if stale else _BAR_PEN)
        self.bar_item.setData(np.array(xs, dtype=float), np.array(ys, dtype=float))
        self.box_item.setData(np.array(bx, dtype=float), np.array(by, dtype=float))
        half = max(widths) / 2.0 if widths else 0.5
        self._half = half
        self._label_x = half + 0.6
        ylabel = axis_title("E − E₀" if self._relative else "E", u.energy_unit)
        set_titles(self.plot, None, ylabel)
        # label items are made once and reused: a live drag redraws the diagram several times a second
        while len(self._label_pool) < len(self.clusters):
            t = pg.TextItem("", anchor=(0, 0.5), color="#1b1b1b")
            self.plot.addItem(t)
            self._label_pool.append(t)
        for k, t in enumerate(self._label_pool):
            if k < len(self.clusters):
                t.setText(self._cluster_text(self.clusters[k]))
                t.setColor("#6c757d" if stale else "#1b1b1b")
            t.setVisible(k < len(self.clusters))
        self._label_items = self._label_pool[:len(self.clusters)]
        lo = self._shown(float(energies.min()))
        hi = self._shown(float(energies.max()))
        pad = 0.08 * (hi - lo) if hi > lo else max(abs(hi), 1.0) * 0.05
        vb = self.plot.getPlotItem().getViewBox()
        left = -half - (0.9 if self.report() is not None else 0.4)
        wordy = any(self._verdict_words(lab["members"]) or lab.get("box") for lab in self.labels)
        vb.setXRange(left, self._label_x + (7.0 if wordy else 4.0) + half, padding=0)
        vb.setYRange(lo - pad, hi + pad, padding=0)
        self._draw_trust(energies)
        self._update_header()
        self._update_checks()
        self._draw_selection()
        self._layout_labels()

    def _update_header(self) -> None:
        result = self.result
        u = result.units
        spec = result.spectrum
        n = len(result.energies)
        degenerate = sum(1 for g in self.groups if len(g) > 1)
        text = (f"<b>{n} levels</b> in {len(self.groups)} groups ({degenerate} degenerate) · "
                f"kinetic energy scheme: {result.scheme}")
        if result.grid.ndim >= 2 and any(lab["lz_text"] for lab in self.labels):
            cx, cy = self.labels[0]["lz_centre"]
            text += (f" · L_z about the ground state's centre ({fmt(cx, 3)}, {fmt(cy, 3)}) "
                     f"{pretty_unit(u.length_unit)}")
        project = result.project
        if getattr(project, "spin", False):
            spin = " · spin ½ included: each orbital level holds two spin states"
            b = float(np.linalg.norm(result.magnetic_field)) if result.magnetic_field is not None else 0.0
            if b > 0 and result.g_factor is not None:
                split = abs(result.g_factor) * u.bohr_magneton() * b
                spin += f", split by the Zeeman energy |g| µ_B B = {fmt_energy(split, u.energy_unit, 4)}"
            text += spin
        if getattr(spec, "multiplet_cut", False):
            text += ("<br><span style='color:#9b1c1c'>The highest level may belong to a multiplet that was "
                     "cut: ask for more states to see all of it.</span>")
        if not getattr(spec, "converged", True):
            text += "<br><span style='color:#9b1c1c'>The solver did not fully converge.</span>"
        boxed = [lab for lab in self.labels if lab.get("box")]
        if boxed:
            from core.bound import BOX_STATE, BOX_STATE_HINT
            levels = ", ".join(_span(lab["members"]) for lab in boxed)
            text += (f"<br><span style='color:#9b1c1c'>▲ Level{'s' if len(boxed) > 1 else ''} {levels}: "
                     f"{BOX_STATE} — held by the grid's walls, not by the potential ({boxed[0]['box_reason']}); "
                     f"{BOX_STATE_HINT}.</span>")
        self.header.setText(text)

    def _layout_labels(self, *_args) -> None:
        """Place the labels (one per cluster) right of the bars, pushed apart so that they never overlap."""
        if not self._label_items or self.result is None:
            return
        vb = self.plot.getPlotItem().getViewBox()
        px = vb.viewPixelSize()
        per_px = px[1] if px[1] > 0 else 0.0
        want = [float(np.mean([self._shown(self.labels[i]["energy"]) for i in members])) for members in self.clusters]
        # each label's own height (its lines in the font in use), at least _LINE_PX per line
        heights = [max(t.boundingRect().height(), _LINE_PX * (1 if len(m) == 1 else len(m) + 1)) * per_px
                   for t, m in zip(self._label_items, self.clusters)]
        order = np.argsort(want, kind="stable")
        placed = np.array(want, dtype=float)
        prev, prev_h = -np.inf, 0.0
        for i in order:
            placed[i] = max(placed[i], prev + 0.5 * (prev_h + heights[i]))
            prev, prev_h = placed[i], heights[i]
        top = vb.viewRange()[1][1]
        nxt, nxt_h = np.inf, 0.0
        for i in order[::-1]:                      # pull back below the top edge where possible
            limit = min(top - 0.5 * heights[i], nxt - 0.5 * (nxt_h + heights[i]))
            if placed[i] > limit:
                placed[i] = limit
            nxt, nxt_h = placed[i], heights[i]
        xs, ys = [], []
        for t, _members, y_lab, y in zip(self._label_items, self.clusters, placed, want):
            t.setPos(self._label_x, float(y_lab))
            xs += [self._half + 0.1, self._label_x - 0.05]
            ys += [y, float(y_lab)]
        self.leader_item.setData(np.array(xs), np.array(ys))

    def label_boxes(self) -> list:
        """``(text, bottom, top)`` in data units of every label shown (for checking that none overlap)."""
        vb = self.plot.getPlotItem().getViewBox()
        px = vb.viewPixelSize()
        out = []
        for t in self._label_items:
            h = t.boundingRect().height() * (px[1] if px[1] > 0 else 0.0)
            y = t.pos().y()
            out.append((t.toPlainText(), y - 0.5 * h, y + 0.5 * h))
        return out

    def _draw_selection(self) -> None:
        sel = getattr(self.session, "selected_state", None)
        for level, x0, x1, e in self.bars:
            if level == sel:
                self.sel_item.setData([x0, x1], [e, e])
                return
        self.sel_item.setData([], [])

    # -- interaction ------------------------------------------------------------------------------
    def level_at(self, x: float, y: float) -> int | None:
        """The level whose bar (or label) is at data point (x, y), within 6 pixels; None if none."""
        if not self.bars:
            return None
        vb = self.plot.getPlotItem().getViewBox()
        px = vb.viewPixelSize()
        tol_y = 6.0 * px[1] if px[1] > 0 else 1e-12
        best, best_d = None, np.inf
        for level, x0, x1, e in self.bars:
            if x0 - 0.1 <= x <= x1 + 0.1 and abs(y - e) <= tol_y and abs(y - e) < best_d:
                best, best_d = level, abs(y - e)
        if best is None and x >= self._label_x - 0.1:
            for t, members in zip(self._label_items, self.clusters):
                if abs(y - t.pos().y()) <= 8.0 * px[1] * (1 if len(members) == 1 else len(members) + 1):
                    return int(self.labels[members[0]]["members"][0])
        return best

    def _on_scene_clicked(self, event) -> None:
        vb = self.plot.getPlotItem().getViewBox()
        if not vb.sceneBoundingRect().contains(event.scenePos()):
            return
        p = vb.mapSceneToView(event.scenePos())
        level = self.level_at(p.x(), p.y())
        if level is not None:
            self._on_level_clicked(level)

    def _on_level_clicked(self, level: int) -> None:
        """Select state ``level`` in the session (the states view then shows it)."""
        self.session.select_state(int(level))

    def describe_level(self, level: int) -> str:
        """Plain-text numbers of one level (shown on hover)."""
        result = self.result
        u = result.units
        e = np.asarray(result.energies)
        lab = next(lb for lb in self.labels if level in lb["members"])
        parts = [f"level {level}", f"E = {fmt_energy(e[level], u.energy_unit, 7)}",
                 f"E − E₀ = {fmt_energy(e[level] - e[0], u.energy_unit, 5)}"]
        if level > 0:
            parts.append(f"above the level below by {fmt_energy(e[level] - e[level - 1], u.energy_unit, 4)}")
        if len(lab["members"]) > 1:
            m = lab["members"]
            parts.append(f"one of {len(m)} degenerate levels ({m[0]}–{m[-1]})")
        pos = lab["position"]
        names = "xyz"[: result.grid.ndim]
        parts.append("⟨" + ", ".join(names) + "⟩ = (" + ", ".join(fmt(p, 4) for p in pos) + ") "
                     + pretty_unit(u.length_unit))
        if lab["parity"]:
            parts.append(f"mirror parity {lab['parity']}")
        if lab["lz"] is not None:
            parts.append("L_z eigenvalues " + ", ".join(f"{v:+.3f}" for v in lab["lz"]) + " ħ")
        parts.append(f"residual {result.spectrum.residuals[level]:.2g} {pretty_unit(u.energy_unit)}")
        rep = self.report()
        errors = self.level_errors()
        if rep is not None and errors is not None and np.isfinite(errors[level]):
            eu = u.energy_unit
            pu = pretty_unit(eu)
            parts.append(f"grid error ±{fmt_energy(errors[level], eu, 2)}; extrapolated "
                         f"{format_uncertain(rep.extrapolated[level], rep.errors[level], pu)}; "
                         f"{level_status(rep, level)}")
            for sp in self.splittings():
                if level in (sp.lower, sp.upper):
                    other = sp.upper if level == sp.lower else sp.lower
                    val = (format_bound(sp.error, pu) if sp.degenerate
                           else format_uncertain(sp.splitting, sp.error, pu))
                    words = "" if sp.words == sp.verdict else f": {sp.words}"
                    parts.append(f"splitting to level {other}: {val}, {sp.mark} {sp.verdict}{words}")
        return " · ".join(parts)

    def _on_mouse_moved(self, scene_pos) -> None:
        vb = self.plot.getPlotItem().getViewBox()
        if self.result is None or not vb.sceneBoundingRect().contains(scene_pos):
            return
        p = vb.mapSceneToView(scene_pos)
        level = self.level_at(p.x(), p.y())
        if level is None:
            return
        text = self.describe_level(level)
        self.info.setText(text)
        view_pos = self.plot.mapFromScene(scene_pos)
        QtWidgets.QToolTip.showText(self.plot.mapToGlobal(view_pos), text.replace(" · ", "\n"), self.plot)
