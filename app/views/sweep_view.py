"""Sweeps: choose a parameter and a range, run the sweep through the session, and read the level fan.

Tracked levels keep one colour *and* one dash pattern across the whole fan; anticrossings are marked
with a bar spanning the gap and its size in the energy unit; exact crossings get a cross and a word.
Clicking a point re-solves the project at that parameter value (``session.set_parameter``) and
selects the clicked level, so the states view shows it.
"""
from __future__ import annotations

import html

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtWidgets

from core.sweep import completeness_summary

from . import colormaps
from .common import (
    HintStack,
    NumberBox,
    StaleNote,
    axis_title,
    fmt,
    fmt_energy,
    grey_plot,
    make_plot,
    set_titles,
    show_message,
    stale_message,
    status_label,
)

__all__ = ["SweepView"]

_HINT = ("No sweep yet. Pick a parameter and a range above, then press “Run sweep”: the level fan appears "
         "here, with anticrossings marked and their gaps. Click a point of the fan to see the states there.")
_NO_PARAMETERS = ("This project has no named parameters, so there is nothing to sweep. Add a parameter in "
                  "the project (and use it in the potential), then come back.")
_GAP_PEN = pg.mkPen("#111111", width=2)
#: with more close approaches than this the fan gets marks only (their words are in the summary)
_LABELLED_APPROACHES = 8
#: lines of verdicts and notes under the fan; the rest is counted
_SUMMARY_LINES = 12


class SweepView(QtWidgets.QWidget):
    """Form, progress and level fan of a parameter sweep."""

    #: (parameter value, level index) of a clicked fan point, after asking the session to re-solve there
    point_opened = QtCore.Signal(float, int)

    def __init__(self, session, parent=None):
        super().__init__(parent)
        self.session = session
        self.sweep = None
        self.curves: list = []             # one PlotDataItem per track
        self.gap_items: list = []
        self.track_labels: list = []
        self._running = False
        self._pending_select: int | None = None

        # form
        self.parameter = QtWidgets.QComboBox()
        self.parameter.currentIndexChanged.connect(self._on_parameter_changed)
        self.start = self._number_box()
        self.stop = self._number_box()
        self.steps = QtWidgets.QSpinBox()
        self.steps.setRange(3, 2001)
        self.steps.setValue(21)
        self.steps.setToolTip("Number of parameter values, both ends included")
        self.states = QtWidgets.QSpinBox()
        self.states.setRange(1, 500)
        self.states.setToolTip("Number of levels solved at each point")
        self.run_button = QtWidgets.QPushButton("Run sweep")
        self.run_button.clicked.connect(self._on_run)
        self.cancel_button = QtWidgets.QPushButton("Cancel")
        self.cancel_button.setEnabled(False)
        self.cancel_button.clicked.connect(self._on_cancel)
        self.progress = QtWidgets.QProgressBar()
        self.progress.setRange(0, 1000)
        self.progress.setTextVisible(False)
        self.progress.setVisible(False)
        self.progress_text = QtWidgets.QLabel("")
        form = QtWidgets.QHBoxLayout()
        for text, w in (("sweep", self.parameter), ("from", self.start), ("to", self.stop),
                        ("in", self.steps), ("steps,", None), ("levels", self.states)):
            form.addWidget(QtWidgets.QLabel(text))
            if w is not None:
                form.addWidget(w)
        form.addWidget(self.run_button)
        form.addWidget(self.cancel_button)
        form.addStretch(1)
        self.form = QtWidgets.QWidget()
        self.form.setLayout(form)
        prog = QtWidgets.QHBoxLayout()
        prog.addWidget(self.progress, 1)
        prog.addWidget(self.progress_text)

        # fan
        self.plot = make_plot()
        self.marker = pg.InfiniteLine(angle=90, movable=False,
                                      pen=pg.mkPen("#777777", width=1, style=QtCore.Qt.PenStyle.DotLine))
        self.plot.addItem(self.marker, ignoreBounds=True)
        self.summary = QtWidgets.QLabel("")
        self.summary.setWordWrap(True)
        self.summary.setTextInteractionFlags(QtCore.Qt.TextInteractionFlag.TextSelectableByMouse)
        fan = QtWidgets.QWidget()
        fl = QtWidgets.QVBoxLayout(fan)
        fl.setContentsMargins(0, 0, 0, 0)
        self.stale_note = StaleNote()          # the project changed since the sweep ran
        fl.addWidget(self.stale_note)
        from .exchange_plot import ExchangePlot
        self.exchange = ExchangePlot()         # J against the swept value, beside the fan, for two electrons
        plots = QtWidgets.QWidget()
        plots.setMinimumHeight(260)            # a long summary below must not squash the plots
        pl = QtWidgets.QHBoxLayout(plots)
        pl.setContentsMargins(0, 0, 0, 0)
        pl.addWidget(self.plot, 3)
        pl.addWidget(self.exchange, 2)
        fl.addWidget(plots, 1)
        fl.addWidget(self.summary)
        self.stack = HintStack(fan, _HINT)
        self.status = status_label()

        lay = QtWidgets.QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        lay.addWidget(self.form)
        lay.addLayout(prog)
        lay.addWidget(self.stack, 1)
        lay.addWidget(self.status)

        session.project_changed.connect(self._on_project_changed)
        session.sweep_finished.connect(self._on_sweep_finished)
        if hasattr(session, "sweep_failed"):
            # sweep-specific signals: a solve's progress or failure never touches the sweep form
            session.sweep_progressed.connect(lambda f: self._on_progressed("sweep", f))
            session.sweep_failed.connect(self._on_sweep_failed)
        if hasattr(session, "sweep_estimated"):
            session.sweep_estimated.connect(
                lambda est: show_message(self.status, f"Sweeping: {est.unknowns:,} grid points, "
                                                      f"{est.states} states per point ({est.brief()})…"))
        else:
            session.progressed.connect(self._on_progressed)
            session.failed.connect(self._on_failed)
            session.cancelled.connect(self._on_cancelled)
        if hasattr(session, "busy_changed"):
            session.busy_changed.connect(self._on_busy_changed)
        session.solved.connect(self._on_solved)
        if hasattr(session, "parameters_changed"):
            session.parameters_changed.connect(self._update_marker)
        if hasattr(session, "stale_changed"):
            session.stale_changed.connect(self._update_stale)
        self._on_project_changed()
        if getattr(session, "sweep_result", None) is not None:
            self._on_sweep_finished(session.sweep_result)

    def _update_stale(self) -> None:
        text = stale_message(self.session, "sweep") if getattr(self, "sweep", None) is not None else ""
        self.stale_note.show_text(text)
        grey_plot(self.plot, bool(text))
        self.exchange.set_stale(bool(text))

    @staticmethod
    def _number_box() -> QtWidgets.QDoubleSpinBox:
        box = NumberBox()
        box.setMinimumWidth(90)
        return box

    # -- form ------------------------------------------------------------------------------------
    def _on_project_changed(self) -> None:
        project = getattr(self.session, "project", None)
        names = list(project.parameters) if project is not None else []
        current = self.parameter.currentText()
        self.parameter.blockSignals(True)
        self.parameter.clear()
        self.parameter.addItems(names)
        if current in names:
            self.parameter.setCurrentText(current)
        self.parameter.blockSignals(False)
        self.form.setEnabled(bool(names) and not self._running)
        if project is None:
            return
        if not names:
            show_message(self.status, _NO_PARAMETERS)
            if self.sweep is None:
                self.stack.show_hint(_NO_PARAMETERS)
            return
        show_message(self.status, "")
        if self.sweep is None:
            self.stack.show_hint(_HINT)
        if current not in names:
            self.states.setValue(int(project.solver.states))
            self._on_parameter_changed()
        self._update_marker()

    def _on_parameter_changed(self, *_args) -> None:
        project = self.session.project
        name = self.parameter.currentText()
        if not name:
            return
        value = float(project.parameters[name])
        rng = project.parameter_ranges.get(name)
        if rng is not None and len(rng) == 2 and rng[1] > rng[0]:
            lo, hi = float(rng[0]), float(rng[1])
        else:
            half = max(abs(value) * 0.5, 1.0)
            lo, hi = value - half, value + half
        step = (hi - lo) / 100.0
        for box, v in ((self.start, lo), (self.stop, hi)):
            box.setSingleStep(float(f"{step:.1g}"))
            box.setValue(v)
        self._update_marker()

    def sweep_values(self) -> np.ndarray:
        return np.linspace(self.start.value(), self.stop.value(), self.steps.value())

    def _on_run(self) -> None:
        name = self.parameter.currentText()
        if not name:
            show_message(self.status, _NO_PARAMETERS, error=True)
            return
        if self.start.value() == self.stop.value():
            show_message(self.status, "The start and the end of the range are equal; give a range to sweep.",
                         error=True)
            return
        values = self.sweep_values()
        self._set_running(True)
        show_message(self.status, f"Sweeping {name} over {values.size} values…")
        try:
            accepted = self.session.run_sweep(name, values, states=self.states.value())
        except Exception as exc:  # noqa: BLE001 - shown in the window, never as a traceback
            self._set_running(False)
            show_message(self.status, f"The sweep could not start: {exc}", error=True)
            return
        if accepted is False and self._running:      # refused at once; the reason came via sweep_failed
            self._set_running(False)

    def _on_cancel(self) -> None:
        self.session.cancel_sweep()
        show_message(self.status, "Cancelling the sweep…")

    def _set_running(self, on: bool) -> None:
        self._running = bool(on)
        self.run_button.setEnabled(not on)
        self.cancel_button.setEnabled(on)
        self.progress.setVisible(on)
        self.progress.setValue(0)
        self.progress_text.setText("")
        for w in (self.parameter, self.start, self.stop, self.steps, self.states):
            w.setEnabled(not on)

    def _on_progressed(self, stage: str, fraction: float) -> None:
        if not self._running:
            return
        f = min(max(float(fraction), 0.0), 1.0)
        self.progress.setValue(int(round(1000 * f)))
        self.progress_text.setText(f"{stage} {100 * f:.0f} %")

    def _on_sweep_failed(self, message: str) -> None:
        if "cancel" in str(message).lower():
            self._on_cancelled()
        else:
            self._on_failed(message)

    def _on_busy_changed(self, busy: bool) -> None:
        """The session stopped its work without a result for us (e.g. the project changed meanwhile)."""
        if not busy and self._running and not getattr(self.session, "sweeping", False):
            self._set_running(False)
            show_message(self.status, "The sweep stopped before it finished (the project changed?).")

    def _on_failed(self, message: str) -> None:
        if self._running:
            self._set_running(False)
            kept = " The previous fan stays on screen." if self.sweep is not None else ""
            show_message(self.status, f"The sweep failed: {message}.{kept}", error=True)

    def _on_cancelled(self) -> None:
        if self._running:
            self._set_running(False)
            kept = " The previous fan stays on screen." if self.sweep is not None else ""
            show_message(self.status, f"The sweep was cancelled.{kept}")

    # -- fan -------------------------------------------------------------------------------------
    def _on_sweep_finished(self, sweep) -> None:
        self._set_running(False)
        if sweep is None:
            return
        self.sweep = sweep
        self.stack.show_content()
        show_message(self.status, "")
        self._show_request(sweep)
        self._draw_fan()
        self.exchange.show_sweep(sweep)
        if hasattr(self.session, "stale_changed"):
            self._update_stale()

    def _show_request(self, sweep) -> None:
        """Set the form to the sweep on show (it may have been started elsewhere, e.g. from a script)."""
        try:
            values = np.asarray(sweep.values, dtype=float).ravel()
        except (TypeError, ValueError, AttributeError):
            return
        index = self.parameter.findText(str(getattr(sweep, "parameter", "")))
        if index < 0 or values.size < 2:
            return
        for w in (self.parameter, self.start, self.stop, self.steps):
            w.blockSignals(True)
        try:
            self.parameter.setCurrentIndex(index)
            self.start.setValue(float(values[0]))
            self.stop.setValue(float(values[-1]))
            self.steps.setValue(int(min(max(values.size, self.steps.minimum()), self.steps.maximum())))
            energies = getattr(sweep, "energies", None)
            if energies is not None and np.ndim(energies) == 2:
                self.states.setValue(int(np.shape(energies)[1]))
        finally:
            for w in (self.parameter, self.start, self.stop, self.steps):
                w.blockSignals(False)

    def _units(self):
        units = getattr(self.sweep, "units", None)
        if units is None:
            from core.units import get_units
            units = get_units(self.sweep.project.units)
        elif isinstance(units, str):
            from core.units import get_units
            units = get_units(units)
        return units

    def _clear(self) -> None:
        for it in self.curves + self.gap_items + self.track_labels:
            self.plot.removeItem(it)
        self.curves, self.gap_items, self.track_labels = [], [], []

    def _draw_fan(self) -> None:
        sweep = self.sweep
        u = self._units()
        self._clear()
        x = np.asarray(sweep.values, dtype=float)
        tracks = np.asarray(sweep.track_energies(), dtype=float)
        set_titles(self.plot, f"{sweep.parameter} (swept parameter)", axis_title("E", u.energy_unit))
        for t, y in enumerate(tracks):
            pen = colormaps.track_pen(t)
            colour = colormaps.TRACK_COLOURS[t % len(colormaps.TRACK_COLOURS)]
            curve = pg.PlotDataItem(x, y, pen=pen, connect="finite", symbol="o", symbolSize=5,
                                    symbolPen=None, symbolBrush=colour, name=f"track {t}")
            curve.sigPointsClicked.connect(lambda _item, points, _ev=None, t=t: self._on_points_clicked(t, points))
            curve.setToolTip(f"level track {t}: click a point to solve there and show the state")
            self.plot.addItem(curve)
            self.curves.append(curve)
            finite = np.flatnonzero(np.isfinite(y))
            if finite.size:
                lab = pg.TextItem(f"{t}", anchor=(0, 0.5), color=colour)
                lab.setPos(float(x[finite[-1]]), float(y[finite[-1]]))
                self.plot.addItem(lab)
                self.track_labels.append(lab)
        lines = []
        marked = set()                 # crossing marks drawn: one per point, one label per neighbourhood
        approaches = list(getattr(sweep, "anticrossings", ()) or ())
        many = len(approaches) > _LABELLED_APPROACHES     # then marks only: words would cover the fan
        e_span = float(np.nanmax(tracks) - np.nanmin(tracks)) if np.isfinite(tracks).any() else 1.0
        x_span = float(np.ptp(x)) if x.size else 1.0
        for ac in approaches:
            a, b = (int(v) for v in ac.tracks)
            at = float(ac.at)
            ea = float(np.interp(at, x, tracks[a]))
            eb = float(np.interp(at, x, tracks[b]))
            lo_e, hi_e = min(ea, eb), max(ea, eb)
            kind = getattr(ac, "kind", "anticrossing")
            describe = getattr(ac, "describe", None)
            lines.append(describe(sweep.parameter, u.energy_unit) if describe is not None else
                         f"tracks {a} and {b}: {kind} at {sweep.parameter} = {fmt(at, 4)}")
            items = []
            samples = np.asarray(getattr(ac, "samples", ()) or (), dtype=float).reshape(-1, 3)
            if samples.size:                    # values inserted to settle it: hollow rings on both levels
                ring = pg.ScatterPlotItem(np.repeat(samples[:, 0], 2), samples[:, 1:].ravel(), symbol="o", size=7,
                                          pen=pg.mkPen("#111111", width=1), brush=None)
                ring.setToolTip(f"{len(samples)} value(s) inserted to settle this close approach")
                items.append(ring)
            if kind == "crossing":
                fx, fe = at / max(x_span, 1e-300), (ea + eb) / 2 / max(e_span, 1e-300)
                if any(abs(fx - px) < 1e-3 and abs(fe - pe) < 1e-3 for px, pe, _ in marked):
                    continue                            # the same point: one mark
                mark = pg.ScatterPlotItem([at], [(ea + eb) / 2], symbol="x", size=14,
                                          pen=pg.mkPen("#111111", width=2), brush=None)
                items.append(mark)
                if not many and not any(labelled and abs(fx - px) < 0.04 and abs(fe - pe) < 0.04
                                        for px, pe, labelled in marked):
                    text = pg.TextItem("crossing", anchor=(-0.1, 1.0), color="#111111")
                    text.setPos(at, (ea + eb) / 2)
                    items.append(text)
                marked.add((fx, fe, len(items) > 1))
            elif kind == "anticrossing":
                bar = pg.PlotDataItem([at, at], [lo_e, hi_e], pen=_GAP_PEN, symbol="_", symbolSize=12,
                                      symbolPen=pg.mkPen("#111111", width=2))
                label = ac.gap_text(u.energy_unit) if hasattr(ac, "gap_text") else \
                    f"gap {fmt_energy(float(ac.gap), u.energy_unit, 3)}"
                bar.setToolTip(label)
                items.append(bar)
                if not many:
                    text = pg.TextItem(label, anchor=(-0.08, 0.5), color="#111111",
                                       fill=pg.mkBrush(255, 255, 255, 210))
                    text.setPos(at, (lo_e + hi_e) / 2)
                    items.append(text)
            else:                               # not settled: a question mark where the verdict is open
                text = pg.TextItem("? not settled", anchor=(-0.08, 0.5), color="#8a3b00",
                                   fill=pg.mkBrush(255, 255, 255, 210))
                text.setPos(at, (lo_e + hi_e) / 2)
                items.append(text)
            for it in items:
                it.setZValue(15)
                self.plot.addItem(it)
                self.gap_items.append(it)
        head = (f"{tracks.shape[0]} tracked levels over {x.size} values of {sweep.parameter}. "
                "Each track keeps its colour and line style; its number is at its right end.")
        checks = [c for c in (getattr(sweep, "checks", ()) or ()) if c is not None]
        if checks:
            head += " " + completeness_summary(checks, x.size, u.energy_unit) + "."
        for note in getattr(sweep, "notes", ()) or ():
            lines.append(f"note: {note}")
        if not getattr(sweep, "complete", True):
            head += " <b>Incomplete sweep</b> (stopped before its last value)."
        # anticrossings first, then what is not settled, then crossings; a long list is cut with a count
        # (every verdict is in the sweep's export); the words are plain text, so "<" must be escaped
        order = {"anticrossing": 0, "not settled": 1, "crossing": 2}
        ranked = sorted(zip(approaches, lines[:len(approaches)]),
                        key=lambda al: order.get(getattr(al[0], "kind", ""), 3))
        shown = [t for _, t in ranked] + lines[len(approaches):]
        hidden = max(0, len(shown) - _SUMMARY_LINES)
        shown = [html.escape(t) for t in shown[:_SUMMARY_LINES]]
        if hidden:
            shown.append(f"… and {hidden} more (wellscape sweep --json lists every verdict)")
        self.summary.setText(head + ("<br>" + "<br>".join(shown) if shown else
                                     "<br>No close approaches of the tracked levels in this range."))
        self._update_marker()

    def _update_marker(self, *_args) -> None:
        project = getattr(self.session, "project", None)
        name = self.sweep.parameter if self.sweep is not None else self.parameter.currentText()
        if project is not None and name in project.parameters:
            self.marker.setValue(float(project.parameters[name]))
            self.marker.setVisible(True)
            self.marker.setToolTip(f"the project's current value of {name}")
        else:
            self.marker.setVisible(False)

    # -- opening a point -------------------------------------------------------------------------
    def _on_points_clicked(self, track: int, points) -> None:
        if not len(points):
            return
        self.open_point(float(points[0].pos().x()), track)

    def open_point(self, value: float, track: int) -> int | None:
        """Re-solve at ``value`` of the swept parameter and select the level that ``track`` holds there."""
        sweep = self.sweep
        if sweep is None:
            return None
        x = np.asarray(sweep.values, dtype=float)
        p = int(np.argmin(np.abs(x - value)))
        level = int(np.asarray(sweep.tracks)[track, p])
        if level < 0:
            show_message(self.status, f"Track {track} has no level at {sweep.parameter} = {fmt(x[p], 5)}.")
            return None
        self._pending_select = level
        show_message(self.status, f"Solving at {sweep.parameter} = {fmt(x[p], 6)}; the states view will show "
                     f"level {level} (track {track}).")
        self.session.set_parameter(sweep.parameter, float(x[p]))
        if getattr(self.session, "result", None) is None and hasattr(self.session, "solve"):
            self.session.solve()          # set_parameter re-solves only when a result is on show
        self.point_opened.emit(float(x[p]), level)
        return level

    def _on_solved(self, _result=None) -> None:
        if self._pending_select is not None:
            level, self._pending_select = self._pending_select, None
            self.session.select_state(level)
        self._update_marker()
