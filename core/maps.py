"""Potential maps imported from an external electrostatics solver.

A map is a 1D, 2D or 3D array of real numbers read from a file:

* ``.npy`` -- a single NumPy array;
* ``.npz`` -- a NumPy archive; pick the array with ``array_name`` when it holds several;
* ``.csv`` / ``.txt`` -- a numeric table, comma- or whitespace-delimited (``#`` starts a
  comment).  A table gives a 2D array ``[row, column]``; a single row or column gives a 1D array.

Files are treated as data only: pickled content is refused and never unpickled.  Sizes are
checked before data is read: the header of an ``.npy`` file (or of an archive member) declares
the array, which must hold at most :data:`core.limits.MAX_MAP_BYTES`; a text table at most
:data:`MAX_TEXT_MAP_BYTES`.  Links are resolved before the file type is judged, and no error
quotes the file's content.

Sample positions (convention used by :func:`interpolate_map`): along each axis the
``m`` samples of the map sit at evenly spaced nodes from ``lower`` to ``upper``
**inclusive**, ``lower + i * (upper - lower) / (m - 1)`` for ``i = 0 .. m-1``.  Axis order
follows the grid convention: the array is indexed ``[x]``, ``[x, y]`` or ``[x, y, z]``.
"""
from __future__ import annotations

import math
import os
import zipfile
from pathlib import Path

import numpy as np

from .errors import InputError
from .grid import AXIS_NAMES, Grid
from .limits import MAX_MAP_BYTES, MAX_PATH_CHARS
from .resources import format_bytes

__all__ = ["load_map_file", "interpolate_map", "MAP_SUFFIXES", "INTERPOLATION_METHODS", "allow_map_folder",
           "npz_headers",
           "confined_map_path", "MAP_FOLDERS_VARIABLE"]

MAP_SUFFIXES = (".npy", ".npz", ".csv", ".txt")

# Interpolation method -> fewest samples per axis it needs.
INTERPOLATION_METHODS = {"nearest": 2, "linear": 2, "slinear": 2, "cubic": 4, "pchip": 4, "quintic": 6}

# Grid points may stick out of the map by this fraction of the map's extent (rounding).
COVER_TOLERANCE = 1e-9

#: a text table is parsed in Python lists, several times its size in memory
MAX_TEXT_MAP_BYTES = 64 * 2**20

_PICKLE_MESSAGE = "it contains pickled Python objects, which are refused (only plain numeric arrays are read)"


# -- loading ----------------------------------------------------------------------------------
def npz_headers(path, *, source: str, max_bytes: int) -> dict:
    """``{name: (shape, dtype)}`` of every array in an ``.npz`` archive, read from the members' headers
    only (nothing is inflated beyond them); raises InputError for a damaged archive, pickled members
    or an array declared larger than ``max_bytes``."""
    try:
        archive = zipfile.ZipFile(path)
    except (zipfile.BadZipFile, OSError, EOFError, ValueError):
        raise InputError(f"{source}: not a readable .npz archive") from None
    out = {}
    with archive:
        infos = [i for i in archive.infolist() if not i.is_dir()]
        if len(infos) > _MAX_MEMBERS:
            raise InputError(f"{source}: the archive holds {len(infos):,} members; at most {_MAX_MEMBERS}")
        for info in infos:
            name = info.filename[:-4] if info.filename.endswith(".npy") else info.filename
            member = f"{source}: array {name[:40]!r}"
            try:
                with archive.open(info) as fh:
                    shape, _fortran, dtype = _npy_header(fh, member, real=False)
            except InputError:
                raise
            except (OSError, EOFError, zipfile.BadZipFile, ValueError, RuntimeError, NotImplementedError):
                raise InputError(f"{member} cannot be read (damaged or truncated)") from None
            nbytes = math.prod(int(n) for n in shape) * max(dtype.itemsize, 1)
            if nbytes > max_bytes:
                raise InputError(f"{member} declares {format_bytes(nbytes)}, more than the {format_bytes(max_bytes)} "
                                 f"such a file may hold")
            out[name] = (tuple(int(n) for n in shape), dtype)
    return out


def _npy_header(fp, source: str, real: bool = True) -> tuple:
    """(shape, fortran_order, dtype) from an .npy stream's header, read without reading the data;
    ``real``: also require a real map array of an accepted size."""
    fmt = np.lib.format
    try:
        version = fmt.read_magic(fp)
        if version == (1, 0):
            shape, fortran, dtype = fmt.read_array_header_1_0(fp)
        elif version == (2, 0):
            shape, fortran, dtype = fmt.read_array_header_2_0(fp)
        else:
            raise InputError(f"{source}: .npy format version {version[0]}.{version[1]} is not read "
                             f"(plain numeric arrays are written as 1.0 or 2.0)")
    except InputError:
        raise
    except Exception:        # a damaged header; its text is file content, never quoted
        raise InputError(f"{source}: not a readable .npy array (the header is damaged)") from None
    if dtype.hasobject:
        raise InputError(f"{source}: {_PICKLE_MESSAGE}")
    if real:
        _check_declared(shape, dtype, source)
    return shape, fortran, dtype


def _check_declared(shape: tuple, dtype: np.dtype, source: str) -> int:
    """Refuse a declared array that is not a real map or is larger than ``limits.MAX_MAP_BYTES``."""
    if dtype.names is not None or dtype.kind not in "iuf":
        kind = "complex values" if dtype.kind == "c" else f"data of type {dtype}"
        raise InputError(f"{source}: expected an array of real numbers, got {kind}")
    if not shape:
        raise InputError(f"{source}: holds a single number; a map needs 1, 2 or 3 axes")
    if len(shape) > 3:
        raise InputError(f"{source}: has {len(shape)} axes; a map needs 1, 2 or 3")
    nbytes = math.prod(int(n) for n in shape) * dtype.itemsize       # exact integer
    if nbytes > MAX_MAP_BYTES or math.prod(int(n) for n in shape) * 8 > MAX_MAP_BYTES:
        raise InputError(f"{source}: declares an array of {' x '.join(str(int(n)) for n in shape)} values "
                         f"({format_bytes(max(nbytes, 8 * math.prod(shape)))} as float64), more than the "
                         f"{format_bytes(MAX_MAP_BYTES)} a map may hold")
    return nbytes


def _load_npy(path: Path) -> np.ndarray:
    source = f"map file {path}"
    try:
        with open(path, "rb") as fh:
            shape, _fortran, dtype = _npy_header(fh, source)
            offset = fh.tell()
            size = os.fstat(fh.fileno()).st_size
            if offset + math.prod(shape) * dtype.itemsize > size:
                raise InputError(f"{source}: is truncated (the header declares more values than the file holds)")
            fh.seek(0)
            return np.load(fh, allow_pickle=False)
    except InputError:
        raise
    except (OSError, EOFError) as error:
        raise InputError(f"{source}: cannot be read ({getattr(error, 'strerror', None) or 'read error'})") from None
    except ValueError:
        raise InputError(f"{source}: not a readable .npy array") from None


_MAX_MEMBERS = 1000


def _load_npz(path: Path, array_name) -> np.ndarray:
    source = f"map file {path}"
    try:
        archive = zipfile.ZipFile(path)
    except (zipfile.BadZipFile, OSError, EOFError, ValueError):
        raise InputError(f"{source}: not a readable .npz archive") from None
    with archive:
        infos = [i for i in archive.infolist() if not i.is_dir()]
        if len(infos) > _MAX_MEMBERS:
            raise InputError(f"{source}: the archive holds {len(infos):,} members; a map archive holds at most "
                             f"{_MAX_MEMBERS}")
        by_name = {(i.filename[:-4] if i.filename.endswith(".npy") else i.filename): i for i in infos}
        names = list(by_name)
        if not names:
            raise InputError(f"{source}: the archive holds no arrays")
        listing = ", ".join(repr(n if len(n) <= 40 else n[:37] + "...") for n in names[:20])
        if array_name is None:
            if len(names) > 1:
                raise InputError(f"{source}: the archive holds {len(names)} arrays; choose one by name: {listing}")
            name = names[0]
        else:
            name = str(array_name)
            if name not in by_name:
                raise InputError(f"{source}: no array named {name!r}; available: {listing}")
        info = by_name[name]
        member = f"{source}: array {name!r}"
        if info.file_size > MAX_MAP_BYTES + 65536:
            raise InputError(f"{member} inflates to {format_bytes(info.file_size)}, more than the "
                             f"{format_bytes(MAX_MAP_BYTES)} a map may hold")
        try:
            with archive.open(info) as fh:
                _npy_header(fh, member)              # checked before a byte of data is inflated
            with archive.open(info) as fh:           # reads the declared (checked) number of bytes only
                return np.lib.format.read_array(fh, allow_pickle=False)
        except InputError:
            raise
        except (OSError, EOFError, zipfile.BadZipFile, ValueError, RuntimeError, NotImplementedError):
            raise InputError(f"{member} cannot be read (damaged or truncated)") from None


def _load_text(path: Path) -> np.ndarray:
    source = f"map file {path}"
    try:
        with open(path, "rb") as fh:
            raw = fh.read(MAX_TEXT_MAP_BYTES + 1)
    except OSError as error:
        raise InputError(f"{source}: cannot be read ({error.strerror or 'read error'})") from None
    if len(raw) > MAX_TEXT_MAP_BYTES:
        raise InputError(f"{source}: is larger than the {format_bytes(MAX_TEXT_MAP_BYTES)} a text map may hold; "
                         f"write large maps as .npy")
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise InputError(f"{source}: not a text table (it is not UTF-8 text)") from None
    lines = [line.split("#", 1)[0] for line in text.splitlines()]
    delimiter = "," if any("," in line for line in lines) else None
    rows = []
    for number, line in enumerate(lines, start=1):
        if not line.strip():
            continue
        cells = line.split(delimiter)
        try:
            rows.append([float(c) for c in cells])
        except ValueError:
            # the offending text is file content: it is never quoted in the message
            raise InputError(f"{source}: not a numeric table (line {number} holds something that is not a "
                             f"number)") from None
        if len(rows[-1]) != len(rows[0]):
            raise InputError(f"{source}: not a numeric table (line {number} has {len(rows[-1])} values, the "
                             f"first row {len(rows[0])})")
    if not rows:
        return np.empty((0,))
    data = np.array(rows, dtype=float)
    if data.shape[0] == 1 or data.shape[1] == 1:
        data = data.ravel()
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
        given = Path(os.fspath(path))
    except TypeError:
        raise InputError(f"map file: expected a file path, got {type(path).__name__}") from None
    text = str(given)
    if "\0" in text or len(text) > MAX_PATH_CHARS:
        raise InputError("map file: the path holds a NUL character or is longer than "
                         f"{MAX_PATH_CHARS:,} characters")
    try:
        p = given.resolve(strict=True)          # links first: the suffix and the checks are the target's
    except FileNotFoundError:
        raise InputError(f"map file {given}: no such file") from None
    except (OSError, RuntimeError) as error:    # a loop of links, a name too long, no permission
        raise InputError(f"map file {given}: cannot be opened ({getattr(error, 'strerror', None) or error})") from None
    if not p.is_file():
        raise InputError(f"map file {given}: is not a regular file")
    shown = given if str(p) == os.path.abspath(given) else f"{given} (it resolves to {p})"
    suffix = p.suffix.lower()
    if suffix not in MAP_SUFFIXES:
        raise InputError(f"map file {shown}: unsupported file type {suffix or '(none)'!r}; "
                         f"expected one of {', '.join(MAP_SUFFIXES)}")
    if array_name is not None and suffix != ".npz":
        raise InputError(f"map file {given}: an array name ({array_name!r}) applies only to .npz archives")
    if suffix == ".npy":
        data = _load_npy(p)
    elif suffix == ".npz":
        data = _load_npz(p, array_name)
    else:
        data = _load_text(p)
    return _check_values(np.asarray(data), f"map file {p}")


# -- where maps may live ----------------------------------------------------------------------
#: folders (os.pathsep-separated) from which maps may be read besides the project's own folder
MAP_FOLDERS_VARIABLE = "WELLSCAPE_MAP_FOLDERS"


def allow_map_folder(folder) -> None:
    """Let maps be read from ``folder`` too (``wellscape --map-folder DIR``; inherited by worker processes)."""
    resolved = str(Path(os.fspath(folder)).resolve())
    current = [f for f in os.environ.get(MAP_FOLDERS_VARIABLE, "").split(os.pathsep) if f]
    if resolved not in current:
        os.environ[MAP_FOLDERS_VARIABLE] = os.pathsep.join(current + [resolved])


def confined_map_path(file: str, base_dir) -> Path:
    """The map ``file`` (relative to the project's folder ``base_dir``) with links resolved; refused unless
    it lies inside that folder or a folder allowed by :func:`allow_map_folder`."""
    if "\0" in file or len(file) > MAX_PATH_CHARS:
        raise InputError("the path holds a NUL character or is longer than "
                         f"{MAX_PATH_CHARS:,} characters")
    root = Path(base_dir or os.getcwd())
    p = Path(file)
    if not p.is_absolute():
        p = root / p
    try:
        target = p.resolve()
        roots = [root.resolve()] + [Path(f) for f in os.environ.get(MAP_FOLDERS_VARIABLE, "").split(os.pathsep) if f]
    except (OSError, RuntimeError):
        raise InputError(f"map file {file}: cannot be resolved (a loop of links?)") from None
    if not any(target == r or r in target.parents for r in roots):
        link = f" (it resolves to {target})" if target != Path(os.path.abspath(p)) else ""
        raise InputError(f"map file {file}{link} is outside the project's folder {roots[0]}; maps are read only from "
                         f"there unless you allow another folder (wellscape --map-folder DIR, or the "
                         f"{MAP_FOLDERS_VARIABLE} environment variable)")
    return p


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
    from scipy.interpolate import RegularGridInterpolator  # ~0.3 s to import: only when a map is read
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
