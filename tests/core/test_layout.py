"""Gates from GDSII layouts written by the test itself with gdstk.

Sources:
* The GDSII stream format stores polygon vertices as integers in database units; gdstk (a
  general-purpose layout library) writes and reads them.  Expected vertices follow from the
  documented map x = scale * (u - u0), y = scale * (v - v0) applied by hand.
* [DLS] J. H. Davies, I. A. Larkin, E. V. Sukhorukov, J. Appl. Phys. 77, 4504 (1995): a square
  gate of side 2a at V, seen from depth d = a on its axis, gives phi = V/3 (solid angle 2 pi / 3).
"""
from __future__ import annotations

import numpy as np
import pytest

import core.layout as layout
from core.errors import InputError
from core.grid import Grid
from core.layout import LayerChoice, parse_layer, project_with_gates, read_layout_gates
from core.potentials import default_lever, evaluate_potential
from core.project import GateSpec, GatesTerm, MaterialSpec, Project

gdstk = pytest.importorskip("gdstk")

# layout in micrometres (user unit 1e-6 m, database unit 1 nm): vertices are whole nanometres
RECT_A = ((-0.6, -0.2), (-0.2, 0.2))                     # a square of side 0.4 um
RECT_B = ((0.3, -0.5), (0.5, 0.1))
L_SHAPE = [(-0.5, 0.4), (0.5, 0.4), (0.5, 0.6), (-0.3, 0.6), (-0.3, 0.9), (-0.5, 0.9)]
ORIGIN = (-0.4, 0.0)         # the square's centre goes to x = y = 0
SCALE = 1000.0               # nm per um


def write_layout(path):
    lib = gdstk.Library(unit=1e-6, precision=1e-9)
    cell = lib.new_cell("WREN_DOT")
    cell.add(gdstk.rectangle(*RECT_A, layer=1, datatype=0))
    cell.add(gdstk.rectangle(*RECT_B, layer=1, datatype=0))
    cell.add(gdstk.Polygon(L_SHAPE, layer=2, datatype=5))
    cell.add(gdstk.rectangle((2.0, 2.0), (3.0, 3.0), layer=7, datatype=0))   # a layer not asked for
    lib.write_gds(str(path))
    return path


def by_hand(u, v):
    return SCALE * (u - ORIGIN[0]), SCALE * (v - ORIGIN[1])


def hand_typed_gates(voltage):
    """The same gates, typed from the layout's numbers and the map above (rounded to the nm grid)."""
    return (GateSpec("A", voltage, rectangle=(-200.0, -200.0, 200.0, 200.0)),
            GateSpec("B", voltage, rectangle=(700.0, -500.0, 900.0, 100.0)),
            GateSpec("L", voltage, polygon=((-100.0, 400.0), (900.0, 400.0), (900.0, 600.0), (100.0, 600.0),
                                            (100.0, 900.0), (-100.0, 900.0))))


def test_vertices_after_scale_and_origin(tmp_path):
    path = write_layout(tmp_path / "dot.gds")
    gates = read_layout_gates(path, [parse_layer("1"), parse_layer("2/5")], scale=SCALE, origin=ORIGIN,
                              voltage=-0.4)
    assert [g.label for g in gates] == ["L1/0 #1", "L1/0 #2", "L2/5 #1"]
    assert all(g.voltage == -0.4 for g in gates)
    for g, rect in zip(gates[:2], (RECT_A, RECT_B)):
        (x0, y0), (x1, y1) = by_hand(*rect[0]), by_hand(*rect[1])
        # database unit 1 nm: the stored coordinate is exact to rounding of u = n * 1e-3
        np.testing.assert_allclose(g.rectangle, (x0, y0, x1, y1), rtol=0, atol=1e-9)
        assert g.polygon is None
    assert gates[2].rectangle is None
    np.testing.assert_allclose(np.array(gates[2].polygon), np.array([by_hand(u, v) for u, v in L_SHAPE]),
                               rtol=0, atol=1e-9)


def test_imported_potential_equals_hand_typed_gates(tmp_path):
    path = write_layout(tmp_path / "dot.gds")
    gates = read_layout_gates(path, [LayerChoice(1), LayerChoice(2, 5)], scale=SCALE, origin=ORIGIN,
                              voltage=-0.4)
    project = project_with_gates(gates, depth=200.0)
    grid = Grid([-400.0, -400.0], [1200.0, 1200.0], [41, 41])
    project = Project(title=project.title, units="semiconductor", material=MaterialSpec(name="GaAs"),
                      grid=grid, potential=project.potential, electric_field=(0.0, 0.0))
    hand = Project(title="typed", units="semiconductor", material=MaterialSpec(name="GaAs"), grid=grid,
                   potential=(GatesTerm("typed", 200.0, hand_typed_gates(-0.4)),), electric_field=(0.0, 0.0))
    got, want = evaluate_potential(project), evaluate_potential(hand)
    # vertices differ only by the rounding of n * 1e-3 um (~1e-13 nm); the closed forms are smooth
    np.testing.assert_allclose(got, want, rtol=1e-10, atol=1e-12)
    # [DLS]: the square A alone, side 2a = 400 nm, at depth d = a = 200 nm, at its centre
    only_a = Project(title="A", units="semiconductor", material=MaterialSpec(name="GaAs"),
                     grid=Grid([-20.0, -20.0], [20.0, 20.0], [3, 3]),
                     potential=(GatesTerm("A", 200.0, gates[:1]),), electric_field=(0.0, 0.0))
    centre = evaluate_potential(only_a)[1, 1]
    np.testing.assert_allclose(centre, default_lever(only_a) * -0.4 / 3.0, rtol=1e-12)


def test_a_layer_named_twice_gives_its_gates_once(tmp_path):
    path = write_layout(tmp_path / "dot.gds")
    gates = read_layout_gates(path, [LayerChoice(1), LayerChoice(1, 0), LayerChoice(2)], scale=1.0)
    assert [g.label for g in gates] == ["L1/0 #1", "L1/0 #2", "L2/5 #1"]


def test_new_project_and_into_project(tmp_path):
    path = write_layout(tmp_path / "dot.gds")
    gates = read_layout_gates(path, [LayerChoice(1)], scale=SCALE, origin=ORIGIN)
    new = project_with_gates(gates, depth=50.0)
    lo, hi = new.grid.lower, new.grid.upper
    assert lo[0] < -200.0 and hi[0] > 900.0 and lo[1] < -500.0 and hi[1] > 200.0
    assert [type(t) for t in new.potential] == [GatesTerm] and new.potential[0].depth == 50.0
    into = project_with_gates(gates, into=new, label=new.potential[0].label)
    assert len(into.potential) == 2 and into.potential[1].depth == 50.0
    assert into.potential[1].label != into.potential[0].label
    with pytest.raises(InputError, match="depth of the electron gas"):
        project_with_gates(gates)


def test_one_line_errors(tmp_path, monkeypatch):
    path = write_layout(tmp_path / "dot.gds")
    cases = []
    with pytest.raises(InputError) as info:
        read_layout_gates(path, [LayerChoice(3)], scale=1.0)
    cases.append(info)
    assert "layer 3 has no polygons; the layout's layers are 1/0, 2/5, 7/0" in str(info.value)
    empty = gdstk.Library()
    empty.new_cell("EMPTY")
    empty.write_gds(str(tmp_path / "empty.gds"))
    with pytest.raises(InputError, match="holds no polygons") as info:
        read_layout_gates(tmp_path / "empty.gds", [LayerChoice(1)], scale=1.0)
    cases.append(info)
    gdstk.Library().write_gds(str(tmp_path / "nocell.gds"))
    with pytest.raises(InputError, match="holds no cells") as info:
        read_layout_gates(tmp_path / "nocell.gds", [LayerChoice(1)], scale=1.0)
    cases.append(info)
    (tmp_path / "notes.gds").write_text("WREN dot layout, version 3\n", encoding="utf-8")
    with pytest.raises(InputError, match="not a GDSII stream file") as info:
        read_layout_gates(tmp_path / "notes.gds", [LayerChoice(1)], scale=1.0)
    assert "WREN" not in str(info.value)
    cases.append(info)
    (tmp_path / "cut.gds").write_bytes(path.read_bytes()[:80])
    with pytest.raises(InputError, match="cut short") as info:
        read_layout_gates(tmp_path / "cut.gds", [LayerChoice(1)], scale=1.0)
    cases.append(info)
    with pytest.raises(InputError, match="positive number") as info:
        read_layout_gates(path, [LayerChoice(1)], scale=0.0)
    cases.append(info)
    monkeypatch.setattr(layout, "MAX_GATE_VERTICES", 5)
    with pytest.raises(InputError, match="polygon L2/5 #1 has 6 vertices, more than the 5") as info:
        read_layout_gates(path, [LayerChoice(2)], scale=1.0)
    cases.append(info)
    for bad in ("x", "1/2/3", "70000", "-1"):
        with pytest.raises(InputError, match="layer"):
            parse_layer(bad)
    assert all("\n" not in str(i.value) for i in cases)


def test_self_crossing_outline_refused(tmp_path):
    lib = gdstk.Library(unit=1e-6, precision=1e-9)
    lib.new_cell("BOW").add(gdstk.Polygon([(0, 0), (1, 1), (1, 0), (0, 1)], layer=4))
    lib.write_gds(str(tmp_path / "bow.gds"))
    with pytest.raises(InputError, match="intersects itself"):
        read_layout_gates(tmp_path / "bow.gds", [LayerChoice(4)], scale=1.0)
