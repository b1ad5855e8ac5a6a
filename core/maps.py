"""Potential maps imported from an external electrostatics solver.

A map is a 1D, 2D or 3D array of real numbers read from a file:

* ``.npy`` -- a single NumPy array;
* ``.npz`` -- a NumPy archive; pick the array with ``array_name`` when it holds several;
* ``.csv`` / ``.txt`` -- a numeric table, comma- or whitespace-delimited (``#`` starts a
  comment).  A table gives a 2D array ``[row, column]``; a single row or column gives a 1D array.

Files are treated as data only: pickled content is refused and never unpickled.

Sample positions (convention used by :func:`interpolate_map`): along each axis the
``m`` samples of the map sit at evenly spaced nodes from ``lower`` to ``upper``
**inclusive**, ``lower + i * (upper - lower) / (m - 1)`` for ``i = 0 .. m-1``.  Axis order
follows the grid convention: the array is indexed ``[x]``, ``[x, y]`` or ``[x, y, z]``.
"""
from __future__ import annotations

import math
import os
import warnings
import zipfile
from pathlib import Path

import numpy as np

from .errors import InputError
from .grid import AXIS_NAMES, Grid

__all__ = ["load_map_file", "interpolate_map", "MAP_SUFFIXES", "INTERPOLATION_METHODS"]

MAP_SUFFIXES = (".npy", ".npz", ".csv", ".txt")

# Interpolation method -> fewest samples per axis it needs.
INTERPOLATION_METHODS = {"nearest": 2, "linear": 2, "slinear": 2, "cubic": 4, "pchip": 4, "quintic": 6}

# Grid points may stick out of the map by this fraction of the map's extent (rounding).
COVER_TOLERANCE = 1e-9

_PICKLE_MESSAGE = "it contains pickled Python objects, which are refused (only plain numeric arrays are read)"


# -- loading ---------------------------------------------------------------------------------
def _is_pickle_refusal(error: ValueError) -> bool:
    text = str(error).lower()
    return "pickle" in text or "object arrays" in text


def _load_npy(path: Path) -> np.ndarray:
    try:
        data = np.load(path, allow_pickle=False)
    except ValueError as error:
        if _is_pickle_refusal(error):
            raise InputError(f"map file {path}: {_PICKLE_MESSAGE}") from None
        raise InputError(f"map file {path}: not a readable .npy array ({error})") from None
    except (OSError, EOFError) as error:
        raise InputError(f"map file {path}: cannot be read ({error})") from None
    if isinstance(data, np.lib.npyio.NpzFile):
        data.close()
        raise InputError(f"map file {path}: is a NumPy archive (.npz), not a single .npy array; "
                         f"rename it to .npz")
    return data


def _load_npz(path: Path, array_name) -> np.ndarray:
    try:
        archive = np.load(path, allow_pickle=False)
    except ValueError as error:
        if _is_pickle_refusal(error):
            raise InputError(f"map file {path}: {_PICKLE_MESSAGE}") from None
        raise InputError(f"map file {path}: not a readable .npz archive ({error})") from None
    except (OSError, EOFError, zipfile.BadZipFile) as error:
        raise InputError(f"map file {path}: cannot be read ({error})") from None
    if not isinstance(archive, np.lib.npyio.NpzFile):
        raise InputError(f"map file {path}: is a single .npy array, not a .npz archive; rename it to .npy")
    with archive:
        names = list(archive.files)
        if not names:
            raise InputError(f"map file {path}: the archive holds no arrays")
        listing = ", ".join(repr(n) for n in names)
        if array_name is None:
            if len(names) > 1:
                raise InputError(f"map file {path}: the archive holds {len(names)} arrays; "
                                 f"choose one by name: {listing}")
            name = names[0]
        else:
            name = str(array_name)
            if name not in names:
                raise InputError(f"map file {path}: no array named {name!r}; available: {listing}")
        try:
            return archive[name]
        except ValueError as error:
            if _is_pickle_refusal(error):
                raise InputError(f"map file {path}: array {name!r}: {_PICKLE_MESSAGE}") from None
            raise InputError(f"map file {path}: array {name!r} cannot be read ({error})") from None
        except (OSError, EOFError, zipfile.BadZipFile) as error:
            raise InputError(f"map file {path}: array {name!r} cannot be read ({error})") from None


def _load_text(path: Path) -> np.ndarray:
    try:
        text = path.read_text(encoding="utf-8")
    except UnicodeDecodeError:
        raise InputError(f"map file {path}: not a text table (it is not UTF-8 text)") from None
    except OSError as error:
        raise InputError(f"map file {path}: cannot be read ({error})") from None
    body = [line.split("#", 1)[0] for line in text.splitlines()]
    delimiter = "," if any("," in line for line in body) else None
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UserWarning)     # empty file: reported below
            data = np.loadtxt(path, delimiter=delimiter, dtype=float, comments="#", encoding="utf-8")
    except ValueError as error:
        raise InputError(f"map file {path}: not a numeric table ({error})") from None
    except OSError as error:
        raise InputError(f"map file {path}: cannot be read ({error})") from None
    return data


def _check_values(values: np.ndarray, source: str) -> np.ndarray:
    """Common checks of a map array: real numbers, rank 1..3, non-empty, all finite."""
    dtype = values.dtype
    if dtype.names is not None or dtype.kind in "OSUVMmb":
        raise InputError(f"{source}: expected an array of real numbers, got data of type {dtype}")
    if dtype.kind == "c":
        raise InputError(f"{source}: complex values are not accepted; a potential map must be real")
    if dtype.kind not in "iuf":
        raise InputError(f"{source}: expected an array of real numbers, got data of type {dtype}")
    if values.ndim == 0:
        raise InputError(f"{source}: holds a single number; a map needs 1, 2 or 3 axes")
    if values.ndim > 3:
        raise InputError(f"{source}: has {values.ndim} axes {values.shape}; a map needs 1, 2 or 3")
    if values.size == 0:
        raise InputError(f"{source}: holds no values (shape {values.shape})")
    out = np.array(values, dtype=float)
    bad = ~np.isfinite(out)
    count = int(np.count_nonzero(bad))
    if count:
        first = tuple(int(i) for i in np.argwhere(bad)[0])
        index = first[0] if len(first) == 1 else first
        raise InputError(f"{source}: {count} value{'s' if count != 1 else ''} not finite (NaN or Inf); "
                         f"first at index {index}")
    return out


def load_map_file(path, *, array_name: str | None = None) -> np.ndarray:
    """Read a potential map from ``.npy``, ``.npz``, ``.csv`` or ``.txt`` into a float array.

    ``array_name`` selects the array of a ``.npz`` archive (needed when it holds more than
    one).  Raises :class:`InputError`, naming the path, when the file is missing or
    unreadable, holds pickled objects, non-numeric, complex or non-finite values, or an
    array with 0 or more than 3 axes.
    """
    try:
        p = Path(os.fspath(path))
    except TypeError:
        raise InputError(f"map file: expected a file path, got {path!r}") from None
    if not p.exists():
        raise InputError(f"map file {p}: no such file")
    if not p.is_file():
        raise InputError(f"map file {p}: is not a regular file")
    suffix = p.suffix.lower()
    if suffix not in MAP_SUFFIXES:
        raise InputError(f"map file {p}: unsupported file type {suffix or '(none)'!r}; "
                         f"expected one of {', '.join(MAP_SUFFIXES)}")
    if array_name is not None and suffix != ".npz":
        raise InputError(f"map file {p}: an array name ({array_name!r}) applies only to .npz archives")
    if suffix == ".npy":
        data = _load_npy(p)
    elif suffix == ".npz":
        data = _load_npz(p, array_name)
    else:
        data = _load_text(p)
    return _check_values(np.asarray(data), f"map file {p}")


# -- interpolation ---------------------------------------------------------------------------
def _per_axis(values, ndim: int, what: str) -> tuple:
    arr = np.atleast_1d(np.asarray(values, dtype=object))
    if arr.ndim != 1:
        raise InputError(f"map {what}: expected one number per axis, got {values!r}")
    if arr.size == 1 and ndim > 1:
        arr = np.repeat(arr, ndim)
    if arr.size != ndim:
        raise InputError(f"map {what}: expected {ndim} number{'s' if ndim > 1 else ''} (one per axis), "
                         f"got {arr.size}")
    out = []
    for a, v in enumerate(arr):
        try:
            if isinstance(v, (bool, np.bool_)):
                raise ValueError
            fv = float(v)
        except (TypeError, ValueError):
            raise InputError(f"map {what}[{a}]: expected a finite number, got {v!r}") from None
        if not math.isfinite(fv):
            raise InputError(f"map {what}[{a}]: expected a finite number, got {v!r}")
        out.append(fv)
    return tuple(out)


def interpolate_map(values, *, lower, upper, grid: Grid, scale: float = 1.0,
                    method: str = "linear") -> np.ndarray:
    """Interpolate a map onto the points of ``grid``; returns an array of ``grid.shape``.

    ``values`` has one axis per grid axis; its samples sit at evenly spaced nodes from
    ``lower`` to ``upper`` **inclusive** on each axis (see the module notes).  The result
    is ``scale`` times the interpolant (use ``scale`` for a unit conversion), evaluated at
    the grid's points (``grid.mesh()``) with :class:`scipy.interpolate.RegularGridInterpolator`.

    ``method`` is one of ``nearest``, ``linear``, ``slinear``, ``cubic``, ``pchip``, ``quintic``.
    Raises :class:`InputError` when the map's rank differs from ``grid.ndim``, when the
    grid's points reach outside the map (beyond a relative tolerance of 1e-9 of the map's
    extent), or for invalid values.
    """
    if not isinstance(grid, Grid):
        raise InputError(f"map interpolation: expected a Grid, got {type(grid).__name__}")
    try:
        arr = np.asarray(values)
    except (TypeError, ValueError):
        raise InputError("map values: expected an array of real numbers") from None
    data = _check_values(arr, "map values")
    ndim = grid.ndim
    if data.ndim != ndim:
        raise InputError(f"map has {data.ndim} axes {data.shape} but the grid has {ndim}; "
                         f"they must match")
    if not isinstance(method, str) or method not in INTERPOLATION_METHODS:
        raise InputError(f"map interpolation method {method!r}: expected one of "
                         f"{', '.join(INTERPOLATION_METHODS)}")
    needed = INTERPOLATION_METHODS[method]
    for a, m in enumerate(data.shape):
        if m < needed:
            raise InputError(f"map axis {AXIS_NAMES[a]}: {m} sample{'s' if m != 1 else ''}; "
                             f"method {method!r} needs at least {needed}")
    lo = _per_axis(lower, ndim, "lower")
    hi = _per_axis(upper, ndim, "upper")
    for a in range(ndim):
        if not hi[a] > lo[a]:
            raise InputError(f"map axis {AXIS_NAMES[a]}: upper ({hi[a]}) must be greater than lower ({lo[a]})")
    try:
        factor = float(scale)
    except (TypeError, ValueError):
        raise InputError(f"map scale: expected a finite number, got {scale!r}") from None
    if not math.isfinite(factor):
        raise InputError(f"map scale: expected a finite number, got {scale!r}")

    axes = []
    for a, points in enumerate(grid.axes):
        tol = COVER_TOLERANCE * (hi[a] - lo[a])
        p_min, p_max = float(points.min()), float(points.max())
        if p_min < lo[a] - tol or p_max > hi[a] + tol:
            raise InputError(f"map does not cover the grid along {AXIS_NAMES[a]}: grid points span "
                             f"[{p_min:.10g}, {p_max:.10g}] but the map spans [{lo[a]:.10g}, {hi[a]:.10g}]")
        axes.append(np.clip(points, lo[a], hi[a]))

    nodes = tuple(np.linspace(lo[a], hi[a], data.shape[a]) for a in range(ndim))
    from scipy.interpolate import RegularGridInterpolator   # ~0.3 s to import: only when a map is read
    interpolant = RegularGridInterpolator(nodes, data, method=method, bounds_error=True)

    # Evaluate the grid's points (the same points as grid.mesh()) in slabs along x so the
    # point list stays small on large 3D grids.
    out = np.empty(grid.shape, dtype=float)
    per_slab = int(np.prod(grid.shape[1:], dtype=np.int64)) if ndim > 1 else 1
    step = max(1, 1_000_000 // max(per_slab, 1))
    for start in range(0, grid.shape[0], step):
        stop = min(start + step, grid.shape[0])
        mesh = np.meshgrid(axes[0][start:stop], *axes[1:], indexing="ij")
        points = np.stack([m.ravel() for m in mesh], axis=-1)
        out[start:stop] = interpolant(points).reshape(mesh[0].shape)
    out *= factor
    return out
