"""Potentials at scattered points (text tables, meshes) interpolated onto the grid: the "points" term.

Sources:
* [LIFT] Linear interpolation of a quadratic on a simplex (common practice; it is the "lifting"
  picture of Delaunay triangulations, e.g. H. Edelsbrunner, Geometry and Topology for Mesh
  Generation, Cambridge University Press, 2001, ch. 1; recalled from memory).  For
  q(r) = (k/2)|r|^2 and a simplex with circumcentre c and circumradius R, the function
  (k/2)(|r|^2 - |r - c|^2 + R^2) is linear in r and equals q at every vertex, so it is the linear
  interpolant; the interpolation error is exactly  L(r) - q(r) = (k/2)(R^2 - |r - c|^2),
  which lies between 0 and (k/2) R^2 inside the simplex.  The simplices come from
  scipy.spatial.Delaunay (the triangulation scipy.interpolate.LinearNDInterpolator uses).
* [WEYL] H. Weyl's monotonicity: for Hermitian A and B >= 0, lambda_k(A) <= lambda_k(A + B) <=
  lambda_k(A) + lambda_max(B) (R. A. Horn and C. R. Johnson, Matrix Analysis, 2nd ed., Cambridge
  University Press, 2013, section 4.3; recalled from memory).  A potential error 0 <= dV <= e on
  the grid (a diagonal B) moves every discrete level up by between 0 and e.
* [OSC] 2D isotropic harmonic oscillator: E = (n_x + n_y + 1) hbar omega (common practice).
* Linear interpolation reproduces a linear function exactly (common practice), up to rounding.
"""
from __future__ import annotations

import json

import numpy as np
import pytest
from scipy.spatial import Delaunay

import core.points_map as pm
from core.errors import InputError, ProjectError
from core.grid import Grid
from core.potentials import evaluate_potential
from core.project import (
    FormulaTerm,
    MaterialSpec,
    PointsTerm,
    Project,
    load_project,
    project_from_dict,
    project_to_dict,
)
from core.study import solve_project
from core.units import get_units

meshio = pytest.importorskip("meshio")

HW = 3.0                                                   # meV
L0 = get_units("semiconductor").oscillator_length(0.067, HW)   # nm, GaAs m* = 0.067 (core.materials)
K = HW / L0**2                                             # V = (K/2) r^2, meV / nm^2
GRID = Grid([-120.0, -120.0], [120.0, 120.0], [64, 64])


def parabola(x, y):
    return 0.5 * K * (x * x + y * y)


def make_project(term, grid=GRID, tmp_path=None, **extra) -> Project:
    return Project(title="Heron scattered test", units="semiconductor", material=MaterialSpec(name="GaAs"),
                   grid=grid, potential=(term,), electric_field=(0.0,) * grid.ndim,
                   base_dir=None if tmp_path is None else str(tmp_path), **extra)


def random_cloud(n, half, seed):
    """n uniform random points in the square |x|, |y| <= half, plus its four corners (so the hull is it)."""
    rng = np.random.default_rng(seed)
    pts = rng.uniform(-half, half, size=(n, 2))
    corners = np.array([[-half, -half], [half, -half], [half, half], [-half, half]])
    return np.vstack([pts, corners])


def write_table(path, pts, values, *, delimiter=" ", header="x y V"):
    np.savetxt(path, np.column_stack([pts, values]), delimiter=delimiter, header=header, comments="",
               fmt="%.17g")


# --- interpolation against the analytic error [LIFT] --------------------------------------------------

def test_parabola_error_equals_the_circumcircle_formula(tmp_path):
    pts = random_cloud(20000, 130.0, seed=7)
    write_table(tmp_path / "field.txt", pts, parabola(pts[:, 0], pts[:, 1]))
    project = make_project(PointsTerm("solver export", "field.txt"), tmp_path=tmp_path)
    got = evaluate_potential(project)
    x, y = GRID.mesh()
    q = np.column_stack([x.ravel(), y.ravel()])
    tri = Delaunay(pts)
    simplex = tri.find_simplex(q)
    assert (simplex >= 0).all()
    a, b, c = (pts[tri.simplices[simplex, j]] for j in range(3))
    # circumcentre of each containing triangle (standard formula from the vertex coordinates)
    bx, by, cx, cy = b[:, 0] - a[:, 0], b[:, 1] - a[:, 1], c[:, 0] - a[:, 0], c[:, 1] - a[:, 1]
    d = 2.0 * (bx * cy - by * cx)
    ux = (cy * (bx**2 + by**2) - by * (cx**2 + cy**2)) / d
    uy = (bx * (cx**2 + cy**2) - cx * (bx**2 + by**2)) / d
    r2 = ux**2 + uy**2
    centre = a + np.column_stack([ux, uy])
    predicted = 0.5 * K * (r2 - ((q - centre) ** 2).sum(axis=1))
    error = got.ravel() - parabola(q[:, 0], q[:, 1])
    # rounding: values ~ 30 meV at the box edge, circumcentre terms ~ K R^2; 1e-9 meV is generous
    np.testing.assert_allclose(error, predicted, rtol=0, atol=1e-9)
    assert error.min() >= -1e-9
    assert error.max() <= 0.5 * K * r2.max() + 1e-9


def test_oscillator_levels_from_scattered_points(tmp_path):
    """[WEYL] + [OSC]: the levels lie between those of the exact parabola on the same grid and those
    plus the largest interpolation error on the grid; both are the oscillator's to the grid's accuracy."""
    pts = random_cloud(20000, 130.0, seed=11)
    write_table(tmp_path / "field.csv", pts, parabola(pts[:, 0], pts[:, 1]), delimiter=",", header="x,y,V")
    project = make_project(PointsTerm("solver export", "field.csv"), tmp_path=tmp_path)
    exact = make_project(FormulaTerm("parabola", f"0.5*{K!r}*(x**2 + y**2)"))
    dv = evaluate_potential(project) - evaluate_potential(exact)
    e_max = float(dv.max())
    assert dv.min() >= -1e-9 and 0.0 < e_max < 0.2           # bound of [LIFT] for ~1.8 nm spacing
    got = solve_project(project, states=6).energies[:6]
    ref_result = solve_project(exact, states=6)
    ref = ref_result.energies[:6]
    solver = 1e-6          # eigenvalue accuracy of the iterative solver at tolerance 1e-7 (meV, generous)
    assert np.all(got >= ref - solver)
    assert np.all(got <= ref + e_max + solver)
    # first-order perturbation theory for the (non-degenerate) ground state (common practice): the
    # shift is <psi0|dV|psi0>, with a second-order remainder of order e_max^2 / (hbar omega) < 5e-4 meV
    psi0 = ref_result.spectrum.states[0]
    first_order = float(np.sum(np.abs(psi0) ** 2 * dv) * GRID.volume_element)
    assert abs((got[0] - ref[0]) - first_order) <= e_max**2 / HW + solver
    # the exact parabola on this grid (spectral scheme, 64 points over 12 l0) gives [OSC] to ~2e-12
    # relative as measured; 1e-8 leaves room for the solver's tolerance
    osc = HW * np.array([1, 2, 2, 3, 3, 3], dtype=float)
    np.testing.assert_allclose(ref, osc, rtol=1e-8)
    assert np.all(np.abs(got - osc) <= 1e-8 * osc + e_max + solver)


# --- hull, fill, linear exactness, meshes --------------------------------------------------------------

def test_outside_hull_error_counts_grid_points_and_fill_value_is_used(tmp_path):
    pts = random_cloud(400, 50.0, seed=3)
    values = 2.0 + 0.1 * pts[:, 0] - 0.05 * pts[:, 1]
    write_table(tmp_path / "small.dat", pts, values)
    grid = Grid([-100.0, -100.0], [100.0, 100.0], [20, 20])   # nodes never exactly at +-50
    x, y = grid.mesh()
    inside = (np.abs(x) < 50.0) & (np.abs(y) < 50.0)
    with pytest.raises(ProjectError) as info:
        evaluate_potential(make_project(PointsTerm("small", "small.dat"), grid=grid, tmp_path=tmp_path))
    message = str(info.value)
    assert f"{int((~inside).sum())} of 400 grid points lie outside" in message
    assert "\n" not in message and "fill" in message
    term = PointsTerm("small", "small.dat", scale=-2.0, fill=7.5)
    got = evaluate_potential(make_project(term, grid=grid, tmp_path=tmp_path))
    np.testing.assert_array_equal(got[~inside], -2.0 * 7.5)
    np.testing.assert_allclose(got[inside], -2.0 * (2.0 + 0.1 * x[inside] - 0.05 * y[inside]),
                               rtol=0, atol=1e-12)
    direct = pm.interpolate_points(pts, values, grid, fill=7.5)           # the same policy for notebooks
    np.testing.assert_allclose(-2.0 * direct, got, rtol=0, atol=1e-12)
    with pytest.raises(InputError, match="lie outside the convex hull"):
        pm.interpolate_points(pts, values, grid)


@pytest.mark.parametrize("name, binary", [("gate_field.vtu", True), ("gate_field.vtk", True),
                                          ("gate_field.vtk", False)])
def test_mesh_file_with_point_data_read_by_meshio(tmp_path, monkeypatch, name, binary):
    # a structured triangulation of [-60, 60]^2 in the plane z = 0, V linear in x and y
    u = np.linspace(-60.0, 60.0, 13)
    gx, gy = np.meshgrid(u, u, indexing="ij")
    nodes = np.column_stack([gx.ravel(), gy.ravel(), np.zeros(gx.size)])
    n = len(u)
    cells = []
    for i in range(n - 1):
        for j in range(n - 1):
            a, b, c, d = i * n + j, (i + 1) * n + j, (i + 1) * n + j + 1, i * n + j + 1
            cells += [[a, b, c], [a, c, d]]
    v = 1.5 - 0.02 * nodes[:, 0] + 0.03 * nodes[:, 1]
    meshio.write(tmp_path / name, meshio.Mesh(nodes, [("triangle", np.array(cells))],
                                              point_data={"V": v, "other": 2 * v}), binary=binary)
    grid = Grid([-55.0, -55.0], [55.0, 55.0], [16, 16])
    x, y = grid.mesh()
    with pytest.raises(ProjectError, match="2 point-data arrays"):
        evaluate_potential(make_project(PointsTerm("fem", name), grid=grid, tmp_path=tmp_path))
    term = PointsTerm("fem", name, scale=-1000.0, array="V")
    got = evaluate_potential(make_project(term, grid=grid, tmp_path=tmp_path))
    # ASCII VTK keeps about 16 significant digits: ~1e-15 relative of V ~ 3 V, times 1000
    np.testing.assert_allclose(got, -1000.0 * (1.5 - 0.02 * x + 0.03 * y), rtol=0, atol=1e-9)
    # the point count in the header is checked before the mesh is read
    monkeypatch.setattr(pm, "MAX_POINTS", 100)
    monkeypatch.setattr(meshio, "read", lambda *a, **k: pytest.fail("the mesh was read"))
    copy = "copy_" + name                              # a file not read before (results are cached)
    (tmp_path / copy).write_bytes((tmp_path / name).read_bytes())
    with pytest.raises(ProjectError, match="169 nodes, more than the 100 points allowed"):
        evaluate_potential(make_project(PointsTerm("other", copy, array="V"), grid=grid, tmp_path=tmp_path))


def test_three_dimensional_table_and_one_dimensional_table(tmp_path):
    rng = np.random.default_rng(5)
    pts = np.vstack([rng.uniform(-1, 1, (300, 3)),
                     np.array(np.meshgrid([-1, 1], [-1, 1], [-1, 1], indexing="ij")).reshape(3, -1).T])
    write_table(tmp_path / "cube.txt", pts, 1.0 + pts @ np.array([0.5, -1.0, 2.0]), header="")
    grid = Grid([-1.0, -1.0, -1.0], [1.0, 1.0, 1.0], [6, 7, 8])
    x, y, z = grid.mesh()
    got = evaluate_potential(make_project(PointsTerm("cube", "cube.txt"), grid=grid, tmp_path=tmp_path))
    np.testing.assert_allclose(got, 1.0 + 0.5 * x - y + 2 * z, rtol=0, atol=1e-12)
    s = np.sort(rng.uniform(-5, 5, 50))
    write_table(tmp_path / "line.csv", np.r_[-5.0, s, 5.0][:, None], np.r_[-5.0, s, 5.0] * 3.0 + 1.0,
                delimiter=",", header="# x, V\nx,V")
    line = Grid([-5.0], [5.0], [9])
    got = evaluate_potential(make_project(PointsTerm("line", "line.csv"), grid=line, tmp_path=tmp_path))
    np.testing.assert_allclose(got, 3.0 * line.axes[0] + 1.0, rtol=0, atol=1e-12)


# --- safety ------------------------------------------------------------------------------------------

def test_paths_are_confined_to_the_project_folder(tmp_path):
    inner = tmp_path / "proj"
    inner.mkdir()
    write_table(tmp_path / "outside.txt", random_cloud(10, 1.0, 0), np.zeros(14))
    with pytest.raises(ProjectError, match="outside the project's folder"):
        evaluate_potential(make_project(PointsTerm("p", "../outside.txt"), tmp_path=inner))
    doc = project_to_dict(make_project(PointsTerm("p", str(tmp_path / "outside.txt"))))
    with pytest.raises(ProjectError, match=r"potential\[0\]\.file: give a path relative"):
        project_from_dict(doc)


def test_bad_files_give_one_line_errors_without_their_content(tmp_path, monkeypatch):
    secret = "s3cr3t-token"
    (tmp_path / "words.csv").write_text(f"x,y,V\n1,2,3\n4,{secret},6\n", encoding="utf-8")
    (tmp_path / "nan.csv").write_text("0,0,1\n1,0,nan\n0,1,2\n1,1,inf\n", encoding="utf-8")
    (tmp_path / "ragged.txt").write_text("0 0 1\n1 0\n0 1 2\n", encoding="utf-8")
    (tmp_path / "cols.txt").write_text("0 1\n1 2\n2 3\n", encoding="utf-8")
    (tmp_path / "line.txt").write_text("0 0 1\n1 1 2\n2 2 3\n3 3 4\n", encoding="utf-8")
    cases = {"words.csv": "line 3 is not a row of numbers", "nan.csv": "2 points have a value that is not finite",
             "ragged.txt": "line 2 has 2 columns", "cols.txt": "a 2D grid needs 3",
             "line.txt": "do not span", "missing.txt": "no such file"}
    for name, expected in cases.items():
        with pytest.raises(ProjectError) as info:
            evaluate_potential(make_project(PointsTerm("p", name), tmp_path=tmp_path))
        assert expected in str(info.value) and "\n" not in str(info.value)
        assert secret not in str(info.value)
    pts = random_cloud(20, 1.0, 1)
    write_table(tmp_path / "many.txt", pts, np.zeros(len(pts)))
    monkeypatch.setattr(pm, "MAX_POINTS", 10)
    with pytest.raises(ProjectError, match="24 rows, more than the 10 points allowed"):
        evaluate_potential(make_project(PointsTerm("p", "many.txt"), tmp_path=tmp_path))
    monkeypatch.setattr(pm, "MAX_FILE_BYTES", 100)
    with pytest.raises(ProjectError, match="MiB is more than"):
        evaluate_potential(make_project(PointsTerm("p", "many.txt"), tmp_path=tmp_path))


def test_project_file_round_trip_and_validation(tmp_path):
    pts = random_cloud(50, 130.0, 2)
    write_table(tmp_path / "f.txt", pts, np.ones(len(pts)))
    doc = {"schema_version": 2, "units": "semiconductor", "material": "GaAs", "parameters": {"a": 2.0},
           "grid": {"lower": [-100, -100], "upper": [100, 100], "points": [8, 8]},
           "potential": [{"kind": "points", "label": "export", "file": "f.txt", "scale": "3*a", "fill": 0}]}
    (tmp_path / "p.json").write_text(json.dumps(doc), encoding="utf-8")
    project = load_project(tmp_path / "p.json")
    term = project.potential[0]
    assert isinstance(term, PointsTerm) and term.scale == "3*a" and term.fill == 0.0
    np.testing.assert_allclose(evaluate_potential(project), 6.0, rtol=1e-12)
    np.testing.assert_allclose(evaluate_potential(project, parameters={"a": 1.0}), 3.0, rtol=1e-12)
    assert project_from_dict(project_to_dict(project), base_dir=project.base_dir) == project
    for key, value, expected in (("file", "f.xlsx", "unsupported file type"),
                                 ("array", "V", "applies only to mesh files"),
                                 ("fill", "b", "b")):
        bad = json.loads(json.dumps(doc))
        bad["potential"][0][key] = value
        with pytest.raises(ProjectError, match=rf"potential\[0\]\.{key}: .*{expected}"):
            project_from_dict(bad)
