"""Uniform grids in 1, 2 and 3 dimensions.

Conventions (stable; other tools rely on them):

* Arrays on a grid are indexed ``[x]``, ``[x, y]`` or ``[x, y, z]``
  (``numpy.meshgrid(..., indexing="ij")``).
* A **hard-wall** axis from ``lower`` to ``upper`` with ``n`` points holds the
  *interior* nodes ``lower + i*h`` for ``i = 1..n`` with ``h = (upper-lower)/(n+1)``.
  The wavefunction vanishes exactly at ``lower`` and ``upper`` (they are not
  grid points), so a box from 0 to L is written as lower 0, upper L.
* A **periodic** axis holds the nodes ``lower + i*h`` for ``i = 0..n-1`` with
  ``h = (upper-lower)/n``; the period is ``upper - lower``.
"""
from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from .errors import InputError
from .limits import MAX_COORDINATE, MAX_POINTS_PER_AXIS, MIN_VOLUME_ELEMENT

__all__ = ["Grid", "HARD_WALL", "PERIODIC", "BOUNDARIES"]

HARD_WALL = "hard-wall"
PERIODIC = "periodic"
BOUNDARIES = (HARD_WALL, PERIODIC)
AXIS_NAMES = ("x", "y", "z")


def _as_tuple(values, ndim: int | None, what: str, kind=float) -> tuple:
    if isinstance(values, (str, bytes)):
        raise InputError(f"grid {what}: expected a list of numbers, got {values!r}")
    if np.ndim(values) == 0:
        values = [values] * (ndim or 1)
    out = []
    for i, v in enumerate(values):
        try:
            if kind is int:
                if isinstance(v, bool):
                    raise ValueError
                if not isinstance(v, (int, np.integer)):
                    fv = float(v)                       # 64.0 is accepted, 64.5 and inf are not
                    if not math.isfinite(fv) or fv != int(fv):
                        raise ValueError
                iv = int(v)
                if iv > MAX_POINTS_PER_AXIS:
                    raise InputError(f"grid {what}[{i}]: at most {MAX_POINTS_PER_AXIS:,} points per axis, "
                                     f"got {'a ' + str(len(str(iv))) + '-digit number' if iv > 10**15 else iv}")
                out.append(iv)
            else:
                fv = float(v)
                if not np.isfinite(fv):
                    raise ValueError
                if abs(fv) > MAX_COORDINATE:
                    raise InputError(f"grid {what}[{i}]: at most {MAX_COORDINATE:g} in size (length unit), got {fv:g}")
                out.append(fv)
        except InputError:
            raise
        except (TypeError, ValueError, OverflowError):
            shown = repr(v) if len(repr(v)) <= 60 else repr(v)[:57] + "..."
            raise InputError(f"grid {what}[{i}]: expected {'an integer' if kind is int else 'a finite number'}, "
                             f"got {shown}") from None
    return tuple(out)


@dataclass(frozen=True)
class Grid:
    """A uniform tensor-product grid.

    Parameters
    ----------
    lower, upper:
        Corners of the box, one number per axis, in the project's length unit.
    points:
        Number of grid points per axis.
    boundary:
        ``"hard-wall"`` (Dirichlet) or ``"periodic"``, one for all axes or one per axis.
    """

    lower: tuple
    upper: tuple
    points: tuple
    boundary: tuple = field(default=HARD_WALL)

    def __init__(self, lower: Sequence[float], upper: Sequence[float], points: Sequence[int],
                 boundary: str | Sequence[str] = HARD_WALL):
        pts = _as_tuple(points, None, "points", int)
        ndim = len(pts)
        if ndim not in (1, 2, 3):
            raise InputError(f"grid points: expected 1, 2 or 3 axes, got {ndim}")
        lo = _as_tuple(lower, ndim, "lower")
        hi = _as_tuple(upper, ndim, "upper")
        if len(lo) != ndim or len(hi) != ndim:
            raise InputError(f"grid lower/upper/points must have the same number of axes "
                             f"(got {len(lo)}, {len(hi)}, {ndim})")
        if isinstance(boundary, str):
            bnd = (boundary,) * ndim
        else:
            bnd = tuple(boundary)
        if len(bnd) != ndim:
            raise InputError(f"grid boundary: expected one boundary or {ndim}, got {len(bnd)}")
        for a in range(ndim):
            if bnd[a] not in BOUNDARIES:
                raise InputError(f"grid boundary[{a}]: expected 'hard-wall' or 'periodic', got {bnd[a]!r}")
            minimum = 3
            if pts[a] < minimum:
                raise InputError(f"grid points[{a}]: expected an integer >= {minimum}, got {pts[a]}")
            if not hi[a] > lo[a]:
                raise InputError(f"grid axis {AXIS_NAMES[a]}: upper ({hi[a]}) must be greater than lower ({lo[a]})")
        object.__setattr__(self, "lower", lo)
        object.__setattr__(self, "upper", hi)
        object.__setattr__(self, "points", pts)
        object.__setattr__(self, "boundary", bnd)
        dv = self.volume_element
        if not (math.isfinite(dv) and dv >= MIN_VOLUME_ELEMENT):
            raise InputError(f"grid: the spacing ({', '.join(f'{h:.3g}' for h in self.spacing)}) is too small "
                             f"for floating-point arithmetic; use a larger box or fewer points")

    # -- geometry -------------------------------------------------------------------------
    @property
    def ndim(self) -> int:
        return len(self.points)

    @property
    def shape(self) -> tuple:
        return tuple(self.points)

    @property
    def size(self) -> int:
        """Number of grid points, an exact Python integer (never a wrapped 64-bit one)."""
        return math.prod(self.points)

    @property
    def periodic(self) -> tuple:
        return tuple(b == PERIODIC for b in self.boundary)

    @property
    def spacing(self) -> tuple:
        """Grid spacing per axis, in the length unit."""
        out = []
        for lo, hi, n, b in zip(self.lower, self.upper, self.points, self.boundary):
            out.append((hi - lo) / (n if b == PERIODIC else n + 1))
        return tuple(out)

    @property
    def volume_element(self) -> float:
        """dV = product of the spacings (length unit ** ndim)."""
        return float(np.prod(self.spacing))

    @property
    def axes(self) -> tuple:
        """One 1D coordinate array per axis."""
        out = []
        for lo, n, b, h in zip(self.lower, self.points, self.boundary, self.spacing):
            first = 0 if b == PERIODIC else 1
            out.append(lo + h * np.arange(first, first + n, dtype=float))
        return tuple(out)

    def mesh(self) -> tuple:
        """Full coordinate arrays (``indexing="ij"``), one per axis."""
        return tuple(np.meshgrid(*self.axes, indexing="ij"))

    def mesh_sparse(self) -> tuple:
        """Broadcastable coordinate arrays (``sparse=True``), cheap in memory."""
        return tuple(np.meshgrid(*self.axes, indexing="ij", sparse=True))

    def coordinates(self, names=("x", "y", "z", "r")) -> dict:
        """Broadcastable coordinate arrays for evaluating formulas (missing axes are 0).

        Only the ``names`` asked for are built: ``x, y, z`` are sparse (one axis each, cheap);
        ``r`` is a full grid-sized array, so it is made only when a formula uses it.
        """
        wanted = set(names)
        mesh = self.mesh_sparse()
        zero = np.zeros((1,) * self.ndim)
        env = {}
        for a, name in enumerate(AXIS_NAMES):
            if name in wanted:
                env[name] = mesh[a] if a < self.ndim else zero
        if "r" in wanted:
            r2 = sum(m * m for m in mesh)
            env["r"] = np.sqrt(r2)
        return env

    def refined(self, factor: float) -> Grid:
        """The same box with ``factor`` times as many intervals per axis (factor < 1 coarsens)."""
        pts = []
        for n, b in zip(self.points, self.boundary):
            intervals = n if b == PERIODIC else n + 1
            new = max(4, int(round(intervals * factor)))
            pts.append(new if b == PERIODIC else new - 1)
        return Grid(self.lower, self.upper, pts, self.boundary)

    def with_points(self, points: Sequence[int]) -> Grid:
        return Grid(self.lower, self.upper, points, self.boundary)

    def to_dict(self) -> dict:
        bnd = self.boundary[0] if len(set(self.boundary)) == 1 else list(self.boundary)
        return {"lower": list(self.lower), "upper": list(self.upper),
                "points": list(self.points), "boundary": bnd}

    def describe(self) -> str:
        dims = " x ".join(str(n) for n in self.points)
        return f"{dims} points ({self.size:,} unknowns), spacing " + ", ".join(f"{h:.4g}" for h in self.spacing)
