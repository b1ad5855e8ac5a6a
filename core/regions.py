"""Material regions on a grid: which material holds where, band offsets and link masses.

A project's ``regions`` list names places (a formula of the coordinates and
parameters, nonzero inside) where another material holds; later regions win,
and outside all of them the project's own material holds.  Row 0 of every
per-material table below is the project's material, row k the k-th region.

The BenDaniel-Duke kinetic operator -div(hbar^2 / 2m(r) grad) (D. J. BenDaniel,
C. B. Duke, Phys. Rev. 152, 683 (1966)) needs the inverse mass on the links
between neighbouring points.  Three link rules are offered:

* ``"cell"`` (the default): along each link the mass is averaged over the
  segment, with the crossing of a material boundary found by bisection, and
  the link's inverse mass is 1 / <m>_segment (for a 1D problem this is exact:
  the current (1/m) dpsi/dx is continuous across the interface, so the
  segment acts as resistances m dx in series); across the link, the
  transverse section of the link's cell is sampled at ``transverse`` points
  per axis and the inverse masses averaged.  Band offsets are averaged over
  each point's cell the same way (exact along x, sampled across).
* ``"inverse-mean"``: the mean of 1/m at the two end points (the harmonic
  mean of their masses), offsets sampled at the points.
* ``"mass-mean"``: 1 / (mean of m at the two end points), offsets at the points.

Which converges best is measured in ``tests/core/test_regions_physics.py``:
the cell rule converges at second order wherever the boundary falls; the
point rules converge at first order (and erratically) when a boundary falls
between points.  A boundary is assumed to cross a link at most once; a region
thinner than a grid spacing lying between two points is not seen.
"""
from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from .errors import FormulaError, ProjectError
from .formula import parse_formula
from .grid import Grid

__all__ = ["MaterialMap", "LINK_RULES", "electron_volt_in"]

LINK_RULES = ("cell", "inverse-mean", "mass-mean")
_BISECTIONS = 44                     # 2^-44 of a spacing: below round-off of the coordinates


def electron_volt_in(units) -> float:
    """One electronvolt in the unit system's energy unit."""
    from scipy.constants import electron_volt
    return electron_volt / units.energy_si


@dataclass(frozen=True, eq=False)
class MaterialMap:
    """Materials of a project on any grid: row 0 the project's material, row k region k."""

    labels: tuple                # region labels (length K)
    formulas: tuple              # parsed Formula per region (length K)
    masses: np.ndarray           # (K + 1, 3) effective mass per axis, mass unit
    offsets: np.ndarray          # (K + 1,) band offset, energy unit (row 0 is 0)
    parameters: Mapping[str, float]
    link_rule: str = "cell"
    transverse: int = 3          # samples per transverse axis of a link's (or a point's) cell

    def __post_init__(self):
        if self.link_rule not in LINK_RULES:
            raise ProjectError(f"unknown link rule {self.link_rule!r}; choose {', '.join(LINK_RULES)}",
                               path="regions")
        m = np.asarray(self.masses, dtype=float)
        if m.shape != (len(self.formulas) + 1, 3) or not np.all(np.isfinite(m)) or np.any(m <= 0):
            raise ProjectError(f"region masses must be positive, got {m.tolist()}", path="regions")
        from .limits import MASS_RANGE
        if np.any(m < MASS_RANGE[0]) or np.any(m > MASS_RANGE[1]):
            raise ProjectError(f"region masses must lie within {MASS_RANGE[0]:g} .. {MASS_RANGE[1]:g} of the mass "
                               f"unit, got {m.tolist()}", path="regions")

    @classmethod
    def from_formulas(cls, labels: Sequence[str], formulas: Sequence[str], masses, offsets,
                      parameters: Mapping[str, float], **kw) -> MaterialMap:
        parsed = []
        for k, text in enumerate(formulas):
            try:
                parsed.append(parse_formula(text, parameters=tuple(parameters)))
            except FormulaError as exc:
                raise ProjectError(str(exc), path=f"regions[{k}].inside") from None
        return cls(labels=tuple(labels), formulas=tuple(parsed), masses=np.asarray(masses, dtype=float),
                   offsets=np.asarray(offsets, dtype=float), parameters=dict(parameters), **kw)

    # -- facts ------------------------------------------------------------------------------
    def uniform_mass(self, ndim: int = 3) -> bool:
        """True when every material has the same mass on each of the first ``ndim`` axes."""
        m = self.masses[:, :ndim]
        return bool(np.all(m == m[0]))

    @property
    def has_offsets(self) -> bool:
        return bool(np.any(self.offsets != 0.0))

    # -- where each material holds ------------------------------------------------------------
    def index_at(self, coords: Sequence[np.ndarray]) -> np.ndarray:
        """Material row (0 = the project's material) at broadcastable coordinates (x, y, z)."""
        coords = [np.asarray(c, dtype=float) for c in coords] + [np.zeros(1)] * (3 - len(coords))
        shape = np.broadcast_shapes(*(c.shape for c in coords))
        env = dict(self.parameters)
        env.update(x=coords[0], y=coords[1], z=coords[2],
                   r=np.sqrt(coords[0] ** 2 + coords[1] ** 2 + coords[2] ** 2))
        out = np.zeros(shape, dtype=np.int64)
        for k, f in enumerate(self.formulas):
            inside = np.broadcast_to(np.asarray(f.evaluate(env), dtype=float), shape)
            if not np.all(np.isfinite(inside)):
                raise ProjectError(f"the formula {f.text!r} gives NaN or infinite values on the grid",
                                   path=f"regions[{k}].inside ({self.labels[k]})")
            out[inside != 0.0] = k + 1
        return out

    def point_index(self, grid: Grid) -> np.ndarray:
        """Material row at every grid point (grid.shape)."""
        return self.index_at(grid.mesh_sparse())

    # -- averages along segments ----------------------------------------------------------------
    def _segment_fraction(self, coords: list, axis: int, length: float, i0: np.ndarray,
                          i1: np.ndarray) -> np.ndarray:
        """Fraction of each segment (from ``coords`` along ``axis``, of ``length``) in material i0.

        Full coordinate arrays of the segments' starts; the crossing is found by bisection where
        the end materials differ (one crossing per segment assumed)."""
        frac = np.ones(i0.shape)
        cut = i0 != i1
        if not np.any(cut):
            return frac
        start = [np.broadcast_to(c, i0.shape)[cut] for c in coords]
        want = i0[cut]
        lo = np.zeros(want.size)
        hi = np.ones(want.size)
        for _ in range(_BISECTIONS):
            mid = 0.5 * (lo + hi)
            pts = list(start)
            pts[axis] = start[axis] + mid * length
            same = self.index_at(pts) == want
            lo = np.where(same, mid, lo)
            hi = np.where(same, hi, mid)
        frac[cut] = 0.5 * (lo + hi)
        return frac

    def _transverse_offsets(self, grid: Grid, axis: int) -> list:
        """Shifts of the transverse sample lines of a cell (one list of 3 shifts per line)."""
        t = self.transverse if self.link_rule == "cell" else 1
        per = [((np.arange(t) + 0.5) / t - 0.5) * grid.spacing[b] if (b != axis and b < grid.ndim)
               else np.zeros(1) for b in range(3)]
        return [[a, b, c] for a in per[0] for b in per[1] for c in per[2]]

    def _line_coords(self, grid: Grid, axis: int, positions: np.ndarray, shift) -> list:
        """Sparse coordinates: ``positions`` along ``axis``, grid points (shifted) across."""
        d = grid.ndim
        out = []
        for b in range(d):
            v = positions if b == axis else grid.axes[b] + shift[b]
            shape = [1] * d
            shape[b] = v.size
            out.append(v.reshape(shape))
        return out

    def link_inverse_masses(self, grid: Grid) -> tuple:
        """Per axis a: 1/m_a on the links, an array like grid.shape with n_a + 1 along axis a.

        Link k joins the points k - 1 and k (link 0 and link n reach the walls on a hard-wall axis;
        on a periodic axis both are the link across the period)."""
        out = []
        for a in range(grid.ndim):
            h = grid.spacing[a]
            n = grid.shape[a]
            positions = grid.axes[a][0] - h + h * np.arange(n + 2)     # walls (or images) included
            total = 0.0
            lines = self._transverse_offsets(grid, a)
            for shift in lines:
                coords = self._line_coords(grid, a, positions, shift)
                idx = self.index_at(coords)
                idx = np.broadcast_to(idx, np.broadcast_shapes(*(c.shape for c in coords)))
                i0 = np.take(idx, np.arange(n + 1), axis=a)
                i1 = np.take(idx, np.arange(1, n + 2), axis=a)
                m0 = self.masses[i0, a]
                m1 = self.masses[i1, a]
                if self.link_rule == "inverse-mean":
                    inv = 0.5 * (1.0 / m0 + 1.0 / m1)
                elif self.link_rule == "mass-mean":
                    inv = 2.0 / (m0 + m1)
                else:
                    starts = [np.broadcast_to(c, i0.shape) if b != a else
                              np.broadcast_to(np.take(c, np.arange(n + 1), axis=a), i0.shape)
                              for b, c in enumerate(coords)]
                    f = self._segment_fraction(starts, a, h, i0, i1)
                    inv = 1.0 / (f * m0 + (1.0 - f) * m1)
                total = total + inv
            inv = np.asarray(total / len(lines), dtype=float)
            if grid.periodic[a]:
                first = np.take(inv, [0], axis=a)
                idx = [slice(None)] * grid.ndim
                idx[a] = slice(n, n + 1)
                inv[tuple(idx)] = first
            out.append(np.ascontiguousarray(inv))
        return tuple(out)

    def offset_map(self, grid: Grid) -> np.ndarray:
        """Band offset on the grid (energy unit): cell averages (rule ``cell``) or point values."""
        if not self.has_offsets:
            return np.zeros(grid.shape)
        if self.link_rule != "cell":
            return self.offsets[self.point_index(grid)]
        total = np.zeros(grid.shape)
        count = 0
        for a in range(grid.ndim):           # every axis in turn, so that the map keeps the grid's symmetries
            h = grid.spacing[a]
            for shift in self._transverse_offsets(grid, a):
                count += 1
                # cell of point i along a: [x_i - h/2, x_i + h/2], split at the point into two halves
                for side in (-0.5, 0.0):
                    coords = self._line_coords(grid, a, grid.axes[a] + side * h, shift)
                    ends = self._line_coords(grid, a, grid.axes[a] + (side + 0.5) * h, shift)
                    shape = np.broadcast_shapes(*(c.shape for c in coords))
                    i0 = np.broadcast_to(self.index_at(coords), shape)
                    i1 = np.broadcast_to(self.index_at(ends), shape)
                    starts = [np.broadcast_to(c, shape) for c in coords]
                    f = self._segment_fraction(starts, a, 0.5 * h, i0, i1)
                    total += 0.5 * (f * self.offsets[i0] + (1.0 - f) * self.offsets[i1])
        return total / count
