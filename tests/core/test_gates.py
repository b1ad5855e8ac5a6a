"""Surface-gate potentials of the pinned-surface model.

Model and closed forms: J. H. Davies, I. A. Larkin, E. V. Sukhorukov, J. Appl. Phys. 77,
4504 (1995).  Polygon solid angle: A. Van Oosterom, J. Strackee, IEEE Trans. Biomed. Eng.
BME-30, 125 (1983).  Numerical reference: scipy.integrate.dblquad of the half-space
Poisson kernel.  Geometry is an invented device with lengths in nm.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import dblquad

from core.errors import InputError
from core.gates import Gate, gates_potential, polygon_potential, rectangle_potential, validate_polygon

DEPTH = 60.0  # nm, electron gas below the surface

# dblquad is asked for 1e-12 absolute/relative accuracy; its error estimates here are
# below 1e-10 (checked in each test), so agreement to 1e-8 is a safe, failing-capable bound.
EPS_QUAD = 1e-12
TOL_QUAD = 1e-8


def _kernel(d):
    """Half-space Poisson kernel d / (2 pi (rho^2 + d^2)^(3/2)) for a surface at fixed potential."""
    def f(yp, xp, x, y):
        rho2 = (x - xp) ** 2 + (y - yp) ** 2
        return d / (2.0 * math.pi * (rho2 + d * d) ** 1.5)
    return f


def _quad_rectangle(x, y, left, right, bottom, top, d=DEPTH):
    f = _kernel(d)
    value, err = dblquad(f, left, right, bottom, top, args=(x, y), epsabs=EPS_QUAD, epsrel=EPS_QUAD)
    return value, err


def _quad_region(x, y, x0, x1, ylow, yhigh, d=DEPTH):
    f = _kernel(d)
    return dblquad(f, x0, x1, ylow, yhigh, args=(x, y), epsabs=EPS_QUAD, epsrel=EPS_QUAD)


# -- comparison with numerical integration ----------------------------------------------------
RECTANGLES = [
    (-100.0, 100.0, -40.0, 40.0),
    (30.0, 250.0, -75.0, 160.0),
    (-20.0, 20.0, -300.0, 300.0),
]
POINTS = [
    (0.0, 0.0),       # inside / centre region
    (99.0, 0.0),      # just inside an edge
    (101.0, 39.0),    # just outside an edge
    (100.0, 40.0),    # on a corner of the first rectangle
    (-180.0, 220.0),  # far outside
    (30.0, -75.0),    # corner of the second rectangle
]


@pytest.mark.parametrize("rect", RECTANGLES)
def test_rectangle_matches_dblquad(rect):
    """Rectangle closed form (Davies, Larkin, Sukhorukov, J. Appl. Phys. 77, 4504 (1995))
    against scipy.integrate.dblquad of the half-space Poisson kernel."""
    left, right, bottom, top = rect
    for x, y in POINTS:
        ref, err = _quad_rectangle(x, y, left, right, bottom, top)
        assert err < 1e-10
        got = rectangle_potential(x, y, left=left, right=right, bottom=bottom, top=top, depth=DEPTH)
        assert abs(float(got) - ref) < TOL_QUAD, (rect, x, y, float(got), ref)
        got_poly = polygon_potential(x, y, [(left, bottom), (right, bottom), (right, top), (left, top)],
                                     depth=DEPTH)
        assert abs(float(got_poly) - ref) < TOL_QUAD


L_SHAPE = [(0.0, 0.0), (240.0, 0.0), (240.0, 80.0), (90.0, 80.0), (90.0, 200.0), (0.0, 200.0)]
TRIANGLE = [(-50.0, 0.0), (150.0, 0.0), (10.0, 120.0)]


@pytest.mark.parametrize("x,y", [(45.0, 40.0), (200.0, 40.0), (45.0, 150.0), (150.0, 150.0),
                                 (89.0, 81.0), (91.0, 79.0), (-30.0, -30.0), (400.0, 300.0)])
def test_l_shaped_polygon_matches_dblquad(x, y):
    """L-shaped gate: Van Oosterom & Strackee solid angle (IEEE Trans. Biomed. Eng. BME-30, 125
    (1983)) against scipy.integrate.dblquad over the two rectangles that make up the L."""
    a, ea = _quad_rectangle(x, y, 0.0, 240.0, 0.0, 80.0)
    b, eb = _quad_rectangle(x, y, 0.0, 90.0, 80.0, 200.0)
    assert ea + eb < 1e-10
    got = float(polygon_potential(x, y, L_SHAPE, depth=DEPTH))
    assert abs(got - (a + b)) < TOL_QUAD


@pytest.mark.parametrize("x,y", [(20.0, 30.0), (10.0, 119.0), (-60.0, 10.0), (80.0, 60.0),
                                 (150.0, -1.0), (0.0, 500.0)])
def test_triangle_matches_dblquad(x, y):
    """Triangular gate: Van Oosterom & Strackee, IEEE Trans. Biomed. Eng. BME-30, 125 (1983),
    against scipy.integrate.dblquad with the triangle's sloped edges as y limits."""
    (xa, _), (xb, _), (xc, yc) = TRIANGLE
    left_edge = lambda xp: yc * (xp - xa) / (xc - xa)     # noqa: E731
    right_edge = lambda xp: yc * (xb - xp) / (xb - xc)    # noqa: E731
    p, ep = _quad_region(x, y, xa, xc, 0.0, left_edge)
    q, eq = _quad_region(x, y, xc, xb, 0.0, right_edge)
    assert ep + eq < 1e-10
    got = float(polygon_potential(x, y, TRIANGLE, depth=DEPTH))
    assert abs(got - (p + q)) < TOL_QUAD


# -- polygon form equals rectangle form ------------------------------------------------------
def test_polygon_equals_rectangle_closed_form_on_a_grid():
    """Two exact expressions of the same solid angle (Davies et al., J. Appl. Phys. 77, 4504
    (1995); Van Oosterom & Strackee, IEEE Trans. Biomed. Eng. BME-30, 125 (1983)) agree
    to rounding: both are sums of a few arctangents of O(1) values, so 1e-14 absolute."""
    x, y = np.meshgrid(np.linspace(-400, 400, 81), np.linspace(-300, 350, 66), indexing="ij", sparse=True)
    rect = dict(left=-120.0, right=75.0, bottom=-30.0, top=190.0)
    verts = [(-120.0, -30.0), (75.0, -30.0), (75.0, 190.0), (-120.0, 190.0)]
    a = rectangle_potential(x, y, **rect, depth=DEPTH)
    b = polygon_potential(x, y, verts, depth=DEPTH)
    assert a.shape == b.shape == (81, 66)
    assert np.max(np.abs(a - b)) < 1e-14


# -- analytic limits -------------------------------------------------------------------------
# A gate of half-size BIG = 1e6 d misses only kernel weight outside a disc of radius BIG
# around the point, which is d / sqrt(BIG^2 + d^2) < 1e-6; tolerance 2e-6.
BIG = 1e6 * DEPTH
TOL_BIG = 2e-6


def test_under_straight_edge_is_one_half():
    """Davies, Larkin, Sukhorukov, J. Appl. Phys. 77, 4504 (1995): phi/V_g = 1/2 under a straight edge."""
    v = rectangle_potential(0.0, 0.0, left=-BIG, right=BIG, bottom=0.0, top=BIG, depth=DEPTH)
    assert abs(float(v) - 0.5) < TOL_BIG
    p = polygon_potential(0.0, 0.0, [(-BIG, 0), (BIG, 0), (BIG, BIG), (-BIG, BIG)], depth=DEPTH)
    assert abs(float(p) - 0.5) < TOL_BIG


def test_under_corner_is_one_quarter():
    """Davies, Larkin, Sukhorukov, J. Appl. Phys. 77, 4504 (1995): phi/V_g = 1/4 under a right-angle corner."""
    v = rectangle_potential(0.0, 0.0, left=0.0, right=BIG, bottom=0.0, top=BIG, depth=DEPTH)
    assert abs(float(v) - 0.25) < TOL_BIG


def test_half_plane_profile():
    """Davies, Larkin, Sukhorukov, J. Appl. Phys. 77, 4504 (1995): phi/V_g = 1/2 + arctan(x/d)/pi
    at lateral distance x inside the edge of a half-plane gate (negative x: outside)."""
    x = np.array([-300.0, -60.0, -5.0, 0.0, 12.0, 60.0, 250.0])
    v = rectangle_potential(x, 0.0, left=0.0, right=BIG, bottom=-BIG, top=BIG, depth=DEPTH)
    expected = 0.5 + np.arctan(x / DEPTH) / np.pi
    assert np.max(np.abs(v - expected)) < TOL_BIG
    p = polygon_potential(x, 0.0, [(0, -BIG), (BIG, -BIG), (BIG, BIG), (0, BIG)], depth=DEPTH)
    assert np.max(np.abs(p - expected)) < TOL_BIG


@pytest.mark.parametrize("width", [20.0, 120.0, 500.0])
def test_long_strip_centre(width):
    """Davies, Larkin, Sukhorukov, J. Appl. Phys. 77, 4504 (1995): (2/pi) arctan(w/2d) at the centre of a long strip."""
    v = rectangle_potential(0.0, 0.0, left=-width / 2, right=width / 2, bottom=-BIG, top=BIG, depth=DEPTH)
    assert abs(float(v) - 2.0 / math.pi * math.atan(width / (2 * DEPTH))) < TOL_BIG


def test_square_of_side_2d_gives_one_third():
    """Davies, Larkin, Sukhorukov, J. Appl. Phys. 77, 4504 (1995): exactly 1/3 at the centre of a
    square of side 2d (the cube-face solid angle 4 pi / 6).  Rounding only: 1e-15."""
    for d in (1.0, 37.5, DEPTH):
        v = rectangle_potential(0.0, 0.0, left=-d, right=d, bottom=-d, top=d, depth=d)
        p = polygon_potential(0.0, 0.0, [(-d, -d), (d, -d), (d, d), (-d, d)], depth=d)
        assert abs(float(v) - 1.0 / 3.0) < 1e-15
        assert abs(float(p) - 1.0 / 3.0) < 1e-15


def test_huge_gate_tends_to_one():
    """Davies, Larkin, Sukhorukov, J. Appl. Phys. 77, 4504 (1995): an infinite gate gives phi = V_g."""
    v = rectangle_potential(0.0, 0.0, left=-BIG, right=BIG, bottom=-BIG, top=BIG, depth=DEPTH)
    assert abs(float(v) - 1.0) < TOL_BIG
    assert float(v) < 1.0


# -- symmetry and superposition --------------------------------------------------------------
def test_orientation_and_start_vertex_do_not_matter():
    """Solid angle is independent of traversal direction (Van Oosterom & Strackee, IEEE Trans.
    Biomed. Eng. BME-30, 125 (1983)); rounding-level agreement 1e-14."""
    x, y = np.meshgrid(np.linspace(-100, 350, 46), np.linspace(-80, 300, 39), indexing="ij", sparse=True)
    ccw = polygon_potential(x, y, L_SHAPE, depth=DEPTH)
    cw = polygon_potential(x, y, L_SHAPE[::-1], depth=DEPTH)
    rolled = polygon_potential(x, y, L_SHAPE[2:] + L_SHAPE[:2], depth=DEPTH)
    assert np.max(np.abs(ccw - cw)) < 1e-14
    assert np.max(np.abs(ccw - rolled)) < 1e-14
    assert np.max(ccw) > 0.3  # the gate is really seen


def test_superposition_of_tiles():
    """Linearity of Laplace's equation (Davies et al., J. Appl. Phys. 77, 4504 (1995)): gates that
    tile a rectangle sum to the rectangle.  Rounding-level: 1e-14."""
    x, y = np.meshgrid(np.linspace(-200, 400, 61), np.linspace(-200, 400, 61), indexing="ij", sparse=True)
    whole = rectangle_potential(x, y, left=0, right=240, bottom=0, top=200, depth=DEPTH)
    left_half = rectangle_potential(x, y, left=0, right=90, bottom=0, top=200, depth=DEPTH)
    right_half = rectangle_potential(x, y, left=90, right=240, bottom=0, top=200, depth=DEPTH)
    assert np.max(np.abs(left_half + right_half - whole)) < 1e-14
    # an L plus the missing corner block is the bounding rectangle
    block = rectangle_potential(x, y, left=90, right=240, bottom=80, top=200, depth=DEPTH)
    ell = polygon_potential(x, y, L_SHAPE, depth=DEPTH)
    assert np.max(np.abs(ell + block - whole)) < 1e-14


def test_gates_potential_sums_voltages():
    """Superposition with voltages (Davies et al., J. Appl. Phys. 77, 4504 (1995)), checked
    against scipy.integrate.dblquad for each gate; tolerance 1e-8 V per volt applied."""
    plunger = Gate.from_rectangle("plunger", -0.35, (150.0, -40.0, 30.0, 60.0))
    barrier = Gate("barrier", 0.2, np.array(TRIANGLE))
    assert plunger.rectangle == (30.0, 150.0, -40.0, 60.0)
    assert barrier.rectangle is None
    x, y = 70.0, 10.0
    rp, e1 = _quad_rectangle(x, y, 30.0, 150.0, -40.0, 60.0)
    (xa, _), (xb, _), (xc, yc) = TRIANGLE
    t1, e2 = _quad_region(x, y, xa, xc, 0.0, lambda xp: yc * (xp - xa) / (xc - xa))
    t2, e3 = _quad_region(x, y, xc, xb, 0.0, lambda xp: yc * (xb - xp) / (xb - xc))
    assert e1 + e2 + e3 < 1e-10
    expected = -0.35 * rp + 0.2 * (t1 + t2)
    got = gates_potential([plunger, barrier], x, y, depth=DEPTH)
    assert abs(float(got) - expected) < 0.35 * TOL_QUAD + 0.2 * TOL_QUAD
    # broadcasting over sparse [x, y] arrays
    gx, gy = np.meshgrid(np.linspace(0, 200, 21), np.linspace(-50, 150, 11), indexing="ij", sparse=True)
    field = gates_potential([plunger, barrier], gx, gy, depth=DEPTH)
    assert field.shape == (21, 11)
    assert abs(field[7, 6] - float(gates_potential([plunger, barrier], 70.0, 70.0, depth=DEPTH))) < 1e-15
    assert np.all(gates_potential([], gx, gy, depth=DEPTH) == 0.0)


# -- validation ------------------------------------------------------------------------------
def test_too_few_vertices():
    with pytest.raises(InputError, match="at least 3 vertices"):
        validate_polygon([(0, 0), (1, 1)], label="stub")


def test_bow_tie_names_label_and_edges():
    with pytest.raises(InputError) as info:
        validate_polygon([(0, 0), (100, 100), (100, 0), (0, 100)], label="bowtie")
    text = str(info.value)
    assert "bowtie" in text
    assert "edge 0" in text and "edge 2" in text


def test_nan_vertex_rejected():
    with pytest.raises(InputError, match="vertex 1"):
        validate_polygon([(0, 0), (np.nan, 1), (1, 0)], label="g")
    with pytest.raises(InputError):
        Gate("g", 0.1, np.array([(0, 0), (1, np.inf), (1, 0)]))


def test_zero_area_and_bad_arguments_rejected():
    with pytest.raises(InputError, match="zero area"):
        validate_polygon([(0, 0), (1, 1), (2, 2)], label="line")
    with pytest.raises(InputError, match="shape"):
        validate_polygon([(0, 0, 0), (1, 0, 0), (0, 1, 0)])
    with pytest.raises(InputError, match="depth"):
        rectangle_potential(0, 0, left=0, right=1, bottom=0, top=1, depth=0.0)
    with pytest.raises(InputError, match="depth"):
        polygon_potential(0, 0, TRIANGLE, depth=float("nan"))
    with pytest.raises(InputError, match="right"):
        rectangle_potential(0, 0, left=1, right=0, bottom=0, top=1, depth=1.0)
    with pytest.raises(InputError, match="zero width"):
        Gate.from_rectangle("flat", 0.1, (0, 0, 10, 0))
    with pytest.raises(InputError, match="voltage"):
        Gate.from_rectangle("g", float("nan"), (0, 0, 10, 10))
    with pytest.raises(InputError, match="Gate"):
        gates_potential(["not a gate"], 0.0, 0.0, depth=1.0)


def test_valid_polygon_is_returned_as_array():
    v = validate_polygon(TRIANGLE, label="t")
    assert v.shape == (3, 2) and v.dtype == float
    np.testing.assert_array_equal(v, np.array(TRIANGLE))


def test_cached_unit_potentials_follow_voltage_outline_and_depth():
    """Moving a voltage reuses the cached unit potentials; the sum still matches dblquad (same
    reference and tolerance as above).  A moved outline or another depth is computed afresh."""
    from core.gates import cached_unit_potential, clear_unit_cache
    clear_unit_cache()
    gx, gy = np.meshgrid(np.linspace(0, 200, 21), np.linspace(-50, 150, 11), indexing="ij", sparse=True)
    x, y = float(gx[7, 0]), float(gy[0, 6])                       # (70, 70)
    for volts in (-0.35, -0.2, 0.1):
        plunger = Gate.from_rectangle("plunger", volts, (150.0, -40.0, 30.0, 60.0))
        field = gates_potential([plunger], gx, gy, depth=DEPTH)
        rp, err = _quad_rectangle(x, y, 30.0, 150.0, -40.0, 60.0)
        assert err < 1e-10 and abs(field[7, 6] - volts * rp) < TOL_QUAD
    unit = cached_unit_potential(plunger, gx, gy, DEPTH)
    assert not unit.flags.writeable and unit is cached_unit_potential(plunger, gx, gy, DEPTH)
    moved = Gate.from_rectangle("plunger", 0.1, (150.0, -40.0, 40.0, 60.0))
    rm, _ = _quad_rectangle(x, y, 40.0, 150.0, -40.0, 60.0)
    assert abs(gates_potential([moved], gx, gy, depth=DEPTH)[7, 6] - 0.1 * rm) < TOL_QUAD
    deeper = gates_potential([plunger], gx, gy, depth=2 * DEPTH)[7, 6]
    rd, _ = _quad_rectangle(x, y, 30.0, 150.0, -40.0, 60.0, d=2 * DEPTH)
    assert abs(deeper - 0.1 * rd) < TOL_QUAD


# -- self-crossing outlines: the sweep line against every pair -----------------------------------
def _any_pair_crosses(v) -> bool:
    """Reference: every pair of non-adjacent edges, strict orientation signs (common practice)."""
    v = np.asarray(v, dtype=float)
    n = len(v)
    for i in range(n):
        for j in range(i + 2, n):
            if i == 0 and j == n - 1:
                continue
            p1, p2, q1, q2 = v[i], v[(i + 1) % n], v[j], v[(j + 1) % n]

            def o(a, b, c):
                return (b[0] - a[0]) * (c[1] - a[1]) - (b[1] - a[1]) * (c[0] - a[0])
            if o(p1, p2, q1) * o(p1, p2, q2) < 0 and o(q1, q2, p1) * o(q1, q2, p2) < 0:
                return True
    return False


def test_sweep_line_agrees_with_every_pair_on_degenerate_outlines():
    """Random outlines on a 5 x 5 lattice (collinear edges, vertical edges, repeated vertices and
    touching vertices are frequent): the sweep finds a crossing exactly when some pair crosses,
    and the pair it names does cross."""
    from core.gates import _crossing_edges, _edges_cross
    rng = np.random.default_rng(7)
    crossing = 0
    for _trial in range(3000):
        n = int(rng.integers(3, 11))
        v = rng.integers(0, 5, size=(n, 2)).astype(float)
        found = _crossing_edges(v)
        expected = _any_pair_crosses(v)
        assert bool(found) == expected, v.tolist()
        if found:
            crossing += 1
            assert _edges_cross([tuple(p) for p in v], n, *found[0])
    assert 300 < crossing < 2900            # both outcomes were exercised


def test_ten_thousand_vertex_outline_and_vertex_limit():
    from core.limits import MAX_POLYGON_VERTICES
    t = np.linspace(0, 2 * np.pi, 10_000, endpoint=False)
    star = np.column_stack([(100 + 30 * np.sin(7 * t)) * np.cos(t), (100 + 30 * np.sin(7 * t)) * np.sin(t)])
    assert validate_polygon(star).shape == (10_000, 2)
    bent = star.copy()
    bent[5000] = (300.0, 0.0)               # a spike across the outline
    with pytest.raises(InputError, match="intersects itself"):
        validate_polygon(bent)
    t = np.linspace(0, 2 * np.pi, MAX_POLYGON_VERTICES + 1, endpoint=False)
    with pytest.raises(InputError, match=f"at most {MAX_POLYGON_VERTICES:,}"):
        validate_polygon(np.column_stack([np.cos(t), np.sin(t)]))
