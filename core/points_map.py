"""Potentials given at scattered points (field-solver exports), interpolated onto the grid.

Two kinds of file are read, as data only (nothing is unpickled or executed):

* a text table (``.csv``, ``.txt``, ``.dat``) of rows ``x, V`` / ``x, y, V`` / ``x, y, z, V``,
  comma- or whitespace-separated; ``#`` starts a comment and one header line (the first
  non-comment line, if it is not numbers) is skipped;
* an unstructured VTK mesh (``.vtu``, ``.vtk``) read with `meshio <https://github.com/nschloe/meshio>`_
  (optional dependency, ``pip install wellscape[mesh]``): its nodes are the points and one of its
  point-data arrays gives V (``array`` chooses it when there are several).  A 2D grid takes
  the x, y of the nodes; their z must then be one constant (a mesh of a plane).

The number of coordinate columns must equal the grid's dimension.  V is interpolated
piecewise-linearly on the Delaunay triangulation of the points
(:class:`scipy.interpolate.LinearNDInterpolator`; :func:`numpy.interp` in 1D), which is
exact for a potential linear in x, y, z and has an error of order ``h**2 * |V''| / 8`` for
points ``h`` apart.  The cells of a mesh are not used: its nodes are triangulated anew, so the
hull of a non-convex mesh is filled too.  Grid points outside the convex hull of the data get ``fill`` when one
is given; otherwise evaluation fails with one line saying how many grid points lie outside.

Paths are relative to the project's folder and must stay inside it.  Files are size-checked
before they are read (:data:`MAX_FILE_BYTES`) and hold at most :data:`MAX_POINTS` points.
Error messages name the file and a line or point number, never the file's content.
"""
from __future__ import annotations

import math
import os
import re
from collections import OrderedDict
from pathlib import Path

import numpy as np

from .errors import InputError
from .grid import AXIS_NAMES, Grid

__all__ = ["TEXT_SUFFIXES", "MESH_SUFFIXES", "POINTS_SUFFIXES", "MAX_FILE_BYTES", "MAX_POINTS",
           "resolve_data_path", "load_points_file", "interpolate_points", "points_on_grid"]

TEXT_SUFFIXES = (".csv", ".txt", ".dat")
# VTK meshes (XML .vtu and legacy .vtk) keep everything in one file and state their number of points
# in a text header, which is checked before the mesh is read.
MESH_SUFFIXES = (".vtu", ".vtk")
_POINT_COUNTS = {".vtu": re.compile(rb'NumberOfPoints\s*=\s*"(\d+)"'), ".vtk": re.compile(rb"POINTS\s+(\d+)")}
POINTS_SUFFIXES = TEXT_SUFFIXES + MESH_SUFFIXES
MAX_FILE_BYTES = 128 * 2**20
MAX_POINTS = 1_000_000


def resolve_data_path(file: str, base_dir: str | None, *, what: str = "points file") -> Path:
    """``file`` resolved against ``base_dir`` (the current folder when None), refused if it leaves it."""
    if not isinstance(file, str) or not file.strip():
        raise InputError(f"{what}: expected a file name")
    rel = Path(file)
    if rel.is_absolute():
        raise InputError(f"{what} {file}: give a path relative to the project's folder, not an absolute one")
    folder = Path(base_dir or ".").resolve()
    target = (folder / rel).resolve()
    if target != folder and folder not in target.parents:
        raise InputError(f"{what} {file}: points outside the project's folder {folder}; "
                         f"copy the file into that folder")
    return target


def _check_file(p: Path, what: str) -> str:
    from .inputfiles import check_input_file
    check_input_file(p, what, MAX_FILE_BYTES)
    suffix = p.suffix.lower()
    if suffix not in POINTS_SUFFIXES:
        raise InputError(f"{what} {p}: unsupported file type {suffix or '(none)'!r}; expected one of "
                         f"{', '.join(POINTS_SUFFIXES)}")
    return suffix


def _is_number_row(fields: list) -> bool:
    try:
        [float(f) for f in fields]
    except ValueError:
        return False
    return bool(fields)


def _load_text(p: Path, what: str) -> np.ndarray:
    try:
        text = p.read_bytes().decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError(f"{what} {p}: not UTF-8 text (byte {exc.start})") from None
    except OSError as exc:
        raise InputError(f"{what} {p}: cannot be read ({exc.strerror or exc})") from None
    numbered = [(k + 1, line.split("#", 1)[0].strip()) for k, line in enumerate(text.splitlines())]
    numbered = [(k, line) for k, line in numbered if line]
    if not numbered:
        raise InputError(f"{what} {p}: holds no rows")
    delimiter = "," if any("," in line for _, line in numbered) else None

    def fields(line):
        return [f.strip() for f in line.split(delimiter)] if delimiter else line.split()

    if not _is_number_row(fields(numbered[0][1])):
        numbered = numbered[1:]                      # one header line
    if len(numbered) > MAX_POINTS:
        raise InputError(f"{what} {p}: {len(numbered)} rows, more than the {MAX_POINTS} points allowed")
    if not numbered:
        raise InputError(f"{what} {p}: holds a header but no rows")
    width = len(fields(numbered[0][1]))
    try:
        data = np.loadtxt([line for _, line in numbered], delimiter=delimiter, dtype=float, ndmin=2)
    except ValueError:
        data = None
    if data is None or data.shape[1] != width:
        for k, line in numbered:                     # find the first bad line (error path only)
            row = fields(line)
            if len(row) != width:
                raise InputError(f"{what} {p}: line {k} has {len(row)} columns, the first row has {width}")
            if not _is_number_row(row):
                raise InputError(f"{what} {p}: line {k} is not a row of numbers")
        raise InputError(f"{what} {p}: not a numeric table")
    return data


def _declared_points(p: Path) -> int:
    """The number of points a VTK file's header declares (0 when the header does not say)."""
    try:
        with open(p, "rb") as fh:
            head = fh.read(1 << 20)
    except OSError:
        return 0
    return sum(int(m) for m in _POINT_COUNTS[p.suffix.lower()].findall(head))


def _load_mesh(p: Path, what: str, array_name: str | None) -> tuple:
    try:
        import meshio
    except ImportError:
        raise InputError(f"{what} {p}: reading meshes needs the optional package meshio "
                         f"(pip install 'wellscape[mesh]')") from None
    declared = _declared_points(p)
    if declared > MAX_POINTS:
        raise InputError(f"{what} {p}: {declared} nodes, more than the {MAX_POINTS} points allowed")
    try:
        mesh = meshio.read(p)
    except Exception as exc:      # meshio raises many types for a malformed file
        raise InputError(f"{what} {p}: not a readable {p.suffix} mesh ({type(exc).__name__})") from None
    pts = np.asarray(mesh.points)
    if pts.ndim != 2 or pts.shape[0] == 0:
        raise InputError(f"{what} {p}: the mesh has no nodes")
    if pts.shape[0] > MAX_POINTS:
        raise InputError(f"{what} {p}: {pts.shape[0]} nodes, more than the {MAX_POINTS} points allowed")
    names = list(mesh.point_data)
    if not names:
        raise InputError(f"{what} {p}: the mesh carries no point data (values at its nodes)")
    if array_name is None:
        if len(names) > 1:
            raise InputError(f"{what} {p}: the mesh has {len(names)} point-data arrays; choose one with "
                             f"\"array\" ({', '.join(repr(n) for n in names[:8])})")
        array_name = names[0]
    elif array_name not in names:
        raise InputError(f"{what} {p}: no point-data array named {array_name!r} "
                         f"(available: {', '.join(repr(n) for n in names[:8])})")
    values = np.asarray(mesh.point_data[array_name])
    if values.ndim == 2 and values.shape[1] == 1:
        values = values[:, 0]
    if values.ndim != 1 or values.shape[0] != pts.shape[0]:
        raise InputError(f"{what} {p}: point data {array_name!r} is not one number per node "
                         f"(shape {values.shape})")
    if values.dtype.kind not in "iuf" or pts.dtype.kind not in "iuf":
        raise InputError(f"{what} {p}: nodes and point data must be real numbers")
    return np.asarray(pts, dtype=float), np.asarray(values, dtype=float)


def load_points_file(path, *, ndim: int, array_name: str | None = None,
                     what: str = "points file") -> tuple:
    """``(points, values)``: an ``(n, ndim)`` float array of positions and ``n`` finite values of V."""
    p = Path(os.fspath(path))
    suffix = _check_file(p, what)
    if suffix in TEXT_SUFFIXES:
        if array_name is not None:
            raise InputError(f"{what} {p}: an array name applies only to mesh files")
        table = _load_text(p, what)
        if table.shape[1] != ndim + 1:
            raise InputError(f"{what} {p}: rows have {table.shape[1]} columns; a {ndim}D grid needs "
                             f"{ndim + 1} ({', '.join(AXIS_NAMES[:ndim])}, V)")
        points, values = table[:, :ndim], table[:, ndim]
    else:
        points, values = _load_mesh(p, what, array_name)
        if points.shape[1] < ndim:
            raise InputError(f"{what} {p}: the mesh nodes have {points.shape[1]} coordinates; "
                             f"the grid is {ndim}D")
        extra = points[:, ndim:]
        if extra.size and np.ptp(extra, axis=0).max() > 0:
            raise InputError(f"{what} {p}: the mesh is not flat in {', '.join(AXIS_NAMES[ndim:3])}; "
                             f"a {ndim}D grid needs a mesh with one constant {AXIS_NAMES[ndim]}")
        points = points[:, :ndim]
    for name, arr in (("a coordinate", points), ("a value", values)):
        bad = ~np.isfinite(arr.reshape(arr.shape[0], -1)).all(axis=1)
        if bad.any():
            raise InputError(f"{what} {p}: {int(np.count_nonzero(bad))} points have {name} that is not "
                             f"finite (NaN or Inf); the first is point {int(np.argmax(bad))}")
    if points.shape[0] < ndim + 1:
        raise InputError(f"{what} {p}: {points.shape[0]} points; linear interpolation in {ndim}D needs "
                         f"at least {ndim + 1}")
    return np.ascontiguousarray(points), np.ascontiguousarray(values)


def interpolate_points(points, values, grid: Grid, *, fill: float | None = None) -> np.ndarray:
    """V on the points of ``grid``, linear inside the convex hull of ``points``.

    Outside the hull the result is ``fill``; without one, :class:`InputError` says how many
    grid points lie outside.  ``points`` is ``(n, grid.ndim)``; ``values`` has ``n`` entries.
    """
    points = np.asarray(points, dtype=float)
    return _fill_outside(_linear(points, np.asarray(values, dtype=float), grid), fill, points.shape[0], "data")


def _fill_outside(out: np.ndarray, fill: float | None, n: int, source: str) -> np.ndarray:
    """``out`` with its NaNs (grid points outside the hull) set to ``fill``, or the one-line error."""
    outside = np.isnan(out)
    count = int(np.count_nonzero(outside))
    if count:
        if fill is None:
            raise InputError(f"{source}: {count} of {out.size} grid points lie outside the convex hull of its "
                             f"{n} points; give the term a \"fill\" value or shrink the grid")
        if not math.isfinite(fill):
            raise InputError(f"{source}: the fill value must be finite, got {fill!r}")
        out[outside] = float(fill)
    return out


def _linear(points: np.ndarray, values: np.ndarray, grid: Grid) -> np.ndarray:
    """Linear interpolant on the grid, NaN outside the hull."""
    if grid.ndim == 1:
        order = np.argsort(points[:, 0], kind="stable")
        xs, vs = points[order, 0], values[order]
        x = grid.axes[0]
        out = np.interp(x, xs, vs)
        out[(x < xs[0]) | (x > xs[-1])] = np.nan
        return out
    from scipy.interpolate import LinearNDInterpolator
    from scipy.spatial import QhullError
    try:
        interpolant = LinearNDInterpolator(points, values, fill_value=np.nan)
    except QhullError:
        raise InputError(f"the {points.shape[0]} data points do not span the {grid.ndim}D space "
                         f"(they lie on a {'line' if grid.ndim == 2 else 'plane or line'})") from None
    out = np.empty(grid.shape)
    per_slab = int(np.prod(grid.shape[1:], dtype=np.int64))
    step = max(1, 1_000_000 // per_slab)
    for start in range(0, grid.shape[0], step):      # slabs along x keep the point list small
        stop = min(start + step, grid.shape[0])
        mesh = np.meshgrid(grid.axes[0][start:stop], *grid.axes[1:], indexing="ij")
        out[start:stop] = interpolant(np.stack([m.ravel() for m in mesh], axis=-1)).reshape(mesh[0].shape)
    return out


_CACHE: OrderedDict[tuple, tuple] = OrderedDict()


def points_on_grid(file: str, base_dir: str | None, grid: Grid, *, array_name: str | None = None,
                   fill: float | None = None) -> np.ndarray:
    """Read ``file`` (relative to ``base_dir``) and interpolate it onto ``grid`` (a fresh array).

    The interpolated values are kept for the last few (file, grid) pairs so that moving a slider
    does not triangulate again; a changed file (time or size) is read anew.
    """
    p = resolve_data_path(file, base_dir)
    try:
        st = os.stat(p)
        key = (str(p), st.st_mtime_ns, st.st_size, array_name, grid.lower, grid.upper, grid.shape,
               grid.boundary)
    except OSError:
        key = None
    if key is not None and key in _CACHE:
        _CACHE.move_to_end(key)
        raw, n = _CACHE[key]
    else:
        points, values = load_points_file(p, ndim=grid.ndim, array_name=array_name)
        raw, n = _linear(points, values, grid), points.shape[0]
        raw.setflags(write=False)
        if key is not None:
            _CACHE[key] = (raw, n)
            while len(_CACHE) > 4:
                _CACHE.popitem(last=False)
    return _fill_outside(np.array(raw), fill, n, f"points file {file}")
