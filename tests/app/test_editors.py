"""Project editors: every edit goes through the session (undoable), bad input shows a clear
message and changes nothing."""
from __future__ import annotations

import dataclasses

import pytest
from PySide6.QtCore import Qt

from app.editors import (
    FieldsPanel,
    GridPanel,
    MaterialPanel,
    NotesPanel,
    ParametersPanel,
    SolverPanel,
    TermsPanel,
    edits,
)
from app.editors.formula import check_formula
from app.editors.grid import memory_estimate
from core.eigensolve import solver_memory_bytes
from core.errors import InputError
from core.grid import Grid
from core.project import FormulaTerm, GatesTerm, load_project


@pytest.fixture
def double_dot(session, sample_path):
    session.open(sample_path("gaas_double_dot"))
    return session


def make(cls, session, qtbot):
    w = cls(session)
    qtbot.addWidget(w)
    return w


# --- pure edits ---------------------------------------------------------------------------------

def test_rename_parameter_follows_every_reference(sample_path):
    p = load_project(sample_path("gaas_double_dot"))
    q = edits.rename_parameter(p, "VP", "V_plunger")
    assert list(q.parameters) == ["VS", "VB", "V_plunger", "eps"]
    volts = {g.label: g.voltage for g in q.potential[0].gates}
    assert volts["P1"] == "V_plunger + eps/2" and volts["P2"] == "V_plunger - eps/2"
    assert "V_plunger" in q.parameter_ranges and "VP" not in q.parameter_ranges


def test_rename_respects_word_boundaries():
    from core.project import new_project
    p = new_project()
    p = edits.add_parameter(p, "hw2", 1.0)
    p = dataclasses.replace(p, potential=(FormulaTerm("t", "0.5*hw*(x**2+y**2)/l0**2 + hw2*1.5e-3*x"),))
    q = edits.rename_parameter(p, "hw", "E")
    assert q.potential[0].formula == "0.5*E*(x**2+y**2)/l0**2 + hw2*1.5e-3*x"


def test_remove_used_parameter_is_refused(sample_path):
    p = load_project(sample_path("gaas_double_dot"))
    with pytest.raises(InputError, match="eps is still used by gate 'P1'"):
        edits.remove_parameter(p, "eps")


def test_bad_parameter_names():
    from core.project import new_project
    p = new_project()
    for bad, why in (("2x", "not a valid name"), ("x", "reserved"), ("sin", "reserved"), ("hw", "already")):
        with pytest.raises(InputError, match=why):
            edits.add_parameter(p, bad, 1.0)


def test_memory_estimate_matches_the_solver_check():
    g = Grid([0, 0], [1, 1], [100, 50])
    size, need, avail = memory_estimate(g, 10, False)
    assert size == 5000 and need == solver_memory_bytes(5000, 10 + 5 + 8, False) and avail > 0


# --- parameters ---------------------------------------------------------------------------------

def test_parameter_rows_follow_the_project(double_dot, qtbot):
    panel = make(ParametersPanel, double_dot, qtbot)
    assert list(panel.rows) == ["VS", "VB", "VP", "eps"]
    row = panel.rows["eps"]
    assert (row.lo, row.hi) == (-0.002, 0.002)
    assert row.slider.value() == 500                        # eps = 0 sits mid-range
    double_dot.set_parameter("eps", 0.001)
    assert row.slider.value() == 750 and float(row.field.text()) == pytest.approx(0.001)
    assert "[V]" in row.name_label.text() and row.range_label.text().endswith(" V")


def test_a_parameter_unit_is_one_undo_step(double_dot, qtbot):
    panel = make(ParametersPanel, double_dot, qtbot)
    assert panel.set_unit("eps", "mV")
    assert double_dot.project.parameter_unit("eps") == "mV" and "[mV]" in panel.rows["eps"].name_label.text()
    double_dot.undo_stack.undo()
    panel.refresh()
    assert double_dot.project.parameter_unit("eps") == "V" and "[V]" in panel.rows["eps"].name_label.text()
    assert not panel.set_unit("eps", "x" * 40)              # refused with a message, nothing changed
    assert double_dot.project.parameter_unit("eps") == "V"


def test_slider_drag_is_live_and_one_undo_step(double_dot, qtbot):
    panel = make(ParametersPanel, double_dot, qtbot)
    calls = []
    real = double_dot.set_parameter
    double_dot.set_parameter = lambda name, v, *, live=False: (calls.append((name, round(v, 9), live)),
                                                                real(name, v, live=live))
    try:
        row = panel.rows["eps"]
        row.slider.setSliderDown(True)
        for pos in (600, 700, 800):
            row.slider.setValue(pos)
            row.flush()                                      # slider events are coalesced per event-loop pass
        row.slider.setSliderDown(False)           # emits sliderReleased
    finally:
        double_dot.set_parameter = real
    assert [c[2] for c in calls] == [True, True, True, False]
    assert calls[-1][1] == pytest.approx(0.0012)
    assert double_dot.project.parameters["eps"] == pytest.approx(0.0012)
    assert double_dot.undo_stack.count() == 1
    double_dot.undo_stack.undo()
    assert double_dot.project.parameters["eps"] == 0.0


def test_slider_events_are_coalesced(double_dot, qtbot):
    panel = make(ParametersPanel, double_dot, qtbot)
    row = panel.rows["eps"]
    row.slider.setSliderDown(True)
    for pos in range(510, 610, 10):                          # ten moves before the loop runs
        row.slider.setValue(pos)
    qtbot.waitUntil(lambda: double_dot.project.parameters["eps"] != 0.0, timeout=2000)
    assert double_dot.project.parameters["eps"] == pytest.approx(row.value_at(600))
    row.slider.setSliderDown(False)
    assert double_dot.undo_stack.count() == 1


def test_typed_value_and_bad_value(double_dot, qtbot):
    panel = make(ParametersPanel, double_dot, qtbot)
    field = panel.rows["VB"].field
    field.setText("-0.1")
    field.editingFinished.emit()
    assert double_dot.project.parameters["VB"] == -0.1
    field.setText("abc")
    field.textEdited.emit("abc")
    field.editingFinished.emit()
    assert double_dot.project.parameters["VB"] == -0.1
    assert panel.message.is_error and "number" in panel.message.text()


def test_add_rename_remove_and_range(double_dot, qtbot):
    panel = make(ParametersPanel, double_dot, qtbot)
    assert panel.add("B", 0.5)
    assert "B" in panel.rows and double_dot.project.parameters["B"] == 0.5
    assert panel.rename("B", "Bz")
    assert "Bz" in panel.rows and "B" not in double_dot.project.parameters
    assert panel.set_range("Bz", 0, 4)
    assert double_dot.project.parameter_ranges["Bz"] == [0.0, 4.0]
    assert not panel.set_range("Bz", 4, 0)
    assert panel.message.is_error and "lower end below the upper end" in panel.message.text()
    assert not panel.remove("eps")
    assert "still used" in panel.message.text()
    assert panel.remove("Bz")
    assert "Bz" not in panel.rows
    for _ in range(3):                                       # remove, range, rename
        double_dot.undo_stack.undo()
    assert "B" in double_dot.project.parameters and "B" in panel.rows


# --- potential terms ----------------------------------------------------------------------------

def test_terms_add_reorder_disable_rename_remove(session, qtbot):
    panel = make(TermsPanel, session, qtbot)
    assert panel.add("formula") and panel.add("uniform_field")
    kinds = [t.kind for t in session.project.potential]
    assert kinds == ["formula", "formula", "uniform_field"]
    assert panel.move(2, -2)
    assert [t.kind for t in session.project.potential][0] == "uniform_field"
    item = panel.tree.topLevelItem(1)
    item.setCheckState(0, Qt.CheckState.Unchecked)
    assert session.project.potential[1].enabled is False
    item.setText(0, "confinement")
    assert session.project.potential[1].label == "confinement"
    assert panel.remove(0)
    assert len(session.project.potential) == 2
    n = session.undo_stack.count()
    assert n == 6
    for _ in range(n):
        session.undo_stack.undo()
    assert [t.label for t in session.project.potential] == ["parabolic confinement"]
    assert panel.tree.topLevelItemCount() == 1


def test_oscillator_term_editor_edits_each_axis_with_undo(session, qtbot):
    """A new oscillator term is centred in the box with a ground state about a tenth of the box wide
    (l0 = sqrt(2 K / hbar omega), K = hbar^2/(2 m*)); the editor edits hbar*omega per axis, a parameter
    rename follows into it, and each edit is one undo step."""
    from core.potentials import material_names
    panel = make(TermsPanel, session, qtbot)
    assert panel.add("oscillator")
    t = session.project.potential[-1]
    assert t.kind == "oscillator" and panel.detail.currentWidget() is panel.oscillator
    g = session.project.grid
    kin = material_names(session.project, session.project.parameters)["hbar2_over_2m"]
    l0 = (2 * kin / t.hbar_omega[0]) ** 0.5
    assert l0 == pytest.approx(0.1 * (g.upper[0] - g.lower[0]), rel=0.01)
    assert t.centre == pytest.approx([0.5 * (lo + hi) for lo, hi in zip(g.lower, g.upper)])
    assert not panel.oscillator.quanta[2].isVisibleTo(panel)          # a 2D grid has no z row
    session_params = dict(session.project.parameters)
    name = next(iter(session_params))
    panel.oscillator.quanta[1].setText(f"2*{name}")
    panel.oscillator.quanta[1].editingFinished.emit()
    assert session.project.potential[-1].hbar_omega[1] == f"2*{name}"
    session.set_project(edits.rename_parameter(session.project, name, "renamed"), "rename")
    assert session.project.potential[-1].hbar_omega[1] == "2*renamed"
    session.undo_stack.undo()
    session.undo_stack.undo()
    assert session.project.potential[-1].hbar_omega == t.hbar_omega


def test_gates_term_needs_a_2d_grid(session, qtbot):
    panel = make(TermsPanel, session, qtbot)
    g = session.project.grid
    session.set_project(dataclasses.replace(session.project, grid=Grid([g.lower[0]], [g.upper[0]], [64]),
                                            electric_field=(0.0,),
                                            potential=(FormulaTerm("well", "0.5*hw*x**2/l0**2"),)), "1D")
    assert not panel.add("gates")
    assert "2D grid" in panel.message.text()


def test_formula_editor_shows_column_and_reason(session, qtbot):
    panel = make(TermsPanel, session, qtbot)
    ed = panel.formula
    before = session.project
    ed.set_text("0.5*hw*(x**2 + y**2)/l0** + q")
    assert ed.error_column is not None and ed.status.is_error
    assert "column" in ed.status.text()
    assert not ed.apply_button.isEnabled()
    assert ed.apply() is False and session.project is before
    assert ed.edit.extraSelections()                        # the offending place is marked
    ed.set_text("0.5*hw*(x**2 + y**2)/l0**2 + 0.1*x")
    assert ed.error_text is None and ed.apply_button.isEnabled()
    assert ed.apply()
    assert session.project.potential[0].formula == "0.5*hw*(x**2 + y**2)/l0**2 + 0.1*x"
    session.undo_stack.undo()
    assert ed.text() == before.potential[0].formula


def test_check_formula_reports_unknown_names():
    col, reason = check_formula("hw*qq", ["hw"])
    assert col == 4 and "unknown name 'qq'" in reason
    assert check_formula("hw*x", ["hw"]) == (None, None)


def test_formula_editor_keeps_typing_through_slider_moves(session, qtbot):
    ed_panel = make(TermsPanel, session, qtbot)
    ed_panel.formula.set_text("0.5*hw*(x**2 + y**2)/l0**2 + 0.")
    session.set_parameter("hw", 4.0, live=True)           # a slider moves elsewhere: the text stays
    assert ed_panel.formula.text().endswith("+ 0.")


def test_gate_cells(double_dot, qtbot):
    panel = make(TermsPanel, double_dot, qtbot)
    gates = panel.gates
    assert panel.detail.currentWidget() is gates
    assert gates.gates.rowCount() == 7
    cell = gates.gates.item(4, 1)                           # gate B voltage
    cell.setText("VB - 0.01")
    term = double_dot.project.potential[0]
    assert isinstance(term, GatesTerm) and term.gates[4].voltage == "VB - 0.01"
    gates.gates.item(4, 1).setText("VB +* 2")
    assert double_dot.project.potential[0].gates[4].voltage == "VB - 0.01"
    assert gates.message.is_error and "column" in gates.message.text()
    # P1 is a polygon: move a vertex, add one, remove one
    gates.gates.selectRow(5)
    assert gates.vertices.rowCount() == 4
    gates.vertices.item(0, 0).setText("-170")
    assert double_dot.project.potential[0].gates[5].polygon[0] == (-170.0, -35.0)
    gates.vertices.setCurrentCell(0, 0)
    gates._on_add_vertex()
    assert len(double_dot.project.potential[0].gates[5].polygon) == 5
    # a rectangle becomes a polygon
    gates.gates.selectRow(0)
    gates._on_make_polygon()
    assert double_dot.project.potential[0].gates[0].polygon is not None
    assert double_dot.project.potential[0].gates[0].rectangle is None


def test_crossing_polygon_is_refused(double_dot, qtbot):
    panel = make(TermsPanel, double_dot, qtbot)
    gates = panel.gates
    gates.gates.selectRow(5)                                 # P1: (-160,-35) (-60,-35) (-60,35) (-160,35)
    before = double_dot.project
    gates.vertices.item(0, 0).setText("0")                 # the closing edge now crosses edge 1
    assert double_dot.project is before
    assert gates.message.is_error and "intersects itself" in gates.message.text()
    assert gates.vertices.item(0, 0).text() == "-160"       # the table shows the project again


# --- grid, material, fields, solver, notes ------------------------------------------------------------

def test_grid_panel(session, qtbot):
    panel = make(GridPanel, session, qtbot)
    _label, lo, hi, pts, _bnd = panel.rows[0]
    pts.setValue(80)
    assert session.project.grid.points == (80, 64)
    assert "unknowns" in panel.estimate.text() and "5,120" in panel.estimate.text()
    hi.setText("-500")
    hi.editingFinished.emit()
    assert session.project.grid.upper[0] == 120.0 and panel.message.is_error
    assert panel.refine(2.0)
    assert session.project.grid.points == (161, 129)
    panel.dims.setCurrentIndex(2)
    assert session.project.grid.ndim == 3 and len(session.project.electric_field) == 3


def test_material_panel(session, qtbot):
    panel = make(MaterialPanel, session, qtbot)
    assert "0.067" in panel.table_values.text()
    panel.material.setCurrentText("InAs")
    assert session.project.material.name == "InAs"
    panel.override_mass.setChecked(True)
    panel.mass.setText("0.03")
    panel.mass.editingFinished.emit()
    assert session.project.material.mass == 0.03
    panel.mass.setText("0.03, 0.04")
    panel.mass.editingFinished.emit()
    assert session.project.material.mass == 0.03 and panel.message.is_error
    panel.override_mass.setChecked(False)
    assert session.project.material.mass is None
    panel.material.setCurrentText("AlGaAs")
    assert session.project.material.name.startswith("Al0.3")


def test_fields_panel(session, qtbot):
    panel = make(FieldsPanel, session, qtbot)
    panel.magnetic[2].setText("hw/3")
    panel.magnetic[2].editingFinished.emit()
    assert session.project.magnetic_field == (0.0, 0.0, "hw/3")
    panel.electric[0].setText("0.01")
    panel.electric[0].editingFinished.emit()
    assert session.project.electric_field[0] == 0.01
    assert "no" in panel.term_hint.text() and panel.add_term_button.isVisibleTo(panel)
    assert panel.add_field_term()
    assert session.project.potential[-1].kind == "uniform_field" and panel.term_hint.text() == ""
    panel.magnetic[0].setText("nope")
    panel.magnetic[0].textEdited.emit("nope")
    assert panel.message.is_error and "'nope'" in panel.message.text()


def test_solver_panel(session, qtbot):
    panel = make(SolverPanel, session, qtbot)
    panel.states.setValue(4)
    assert session.project.solver.states == 4
    panel.scheme.setCurrentIndex(panel.scheme.findData("fd4"))
    assert session.project.solver.scheme == "fd4"
    panel.tolerance.setText("0.5")
    panel.tolerance.editingFinished.emit()
    assert session.project.solver.tolerance == 1e-7 and panel.message.is_error


def test_notes_panel(session, qtbot):
    panel = make(NotesPanel, session, qtbot)
    panel.title.setText("A dot of my own")
    panel.notes.setPlainText("Look at the second shell.")
    panel.commit()
    assert session.project.title == "A dot of my own" and session.project.notes == "Look at the second shell."
    session.undo_stack.undo()
    assert panel.title.text() == "New confinement"
