"""The BenDaniel-Duke Hamiltonian -div(hbar^2 / 2m(r) grad) + V on a grid (second-order differences).

D. J. BenDaniel, C. B. Duke, Phys. Rev. 152, 683 (1966): with a position-dependent
effective mass the kinetic operator that conserves the current is
-div((hbar^2 / 2) m(r)^-1 grad).  Its second-order finite-volume form on a
uniform grid puts the inverse mass on the links between points:

    (T psi)_k = sum_a [ t_a(k + 1/2) (psi_k - psi_{k+e_a}) + t_a(k - 1/2) (psi_k - psi_{k-e_a}) ],
    t_a = (hbar^2 / 2) (1/m_a)_link / h_a^2,

which is real symmetric (Hermitian) for any link values; the link values come
from :class:`core.regions.MaterialMap`.  An anisotropic material keeps its mass
per axis: links along axis a use m_a.  A magnetic field multiplies each hop by
its Peierls phase (R. Peierls, Z. Phys. 80, 763 (1933)) exactly as in
:mod:`core.hamiltonian`: H = sum_a U_a T_a U_a^dagger, here folded into
complex hop amplitudes.

Only second-order differences carry a position-dependent mass here: the wider
stencils and the spectral scheme of :mod:`core.kinetic` are products of
constant-coefficient 1D matrices.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from .errors import InputError
from .grid import Grid
from .hamiltonian import Hamiltonian, build_hamiltonian, check_potential
from .units import get_units

__all__ = ["RegionHamiltonian", "build_region_hamiltonian", "REGION_SCHEMES"]

#: kinetic schemes that carry a position-dependent mass
REGION_SCHEMES = ("fd2",)


def _kernels():
    from . import kernels, kernels_regions
    return kernels, kernels_regions


@dataclass(eq=False)
class RegionHamiltonian(Hamiltonian):
    """A grid Hamiltonian with the inverse effective mass on every link (build it with
    :func:`build_region_hamiltonian`).  ``inverse_masses[a]`` holds 1/m_a on the links along axis a
    (shape of the grid with n_a + 1 along a), in 1 / mass unit."""

    inverse_masses: tuple = ()
    material_map: object = None
    kinetic_unit: float = 1.0           # hbar^2 / 2 in energy * length^2 * mass unit
    units: object = "dimensionless"     # the unit system (for rebuilding on another grid)

    def __post_init__(self):
        g = self.grid
        pad = 3 - g.ndim
        self._shape3 = (1,) * pad + tuple(g.shape)
        self._banded = True
        amp = []                         # t_a on the links, energy unit
        for a in range(g.ndim):
            amp.append(self.kinetic_unit * self.inverse_masses[a] / g.spacing[a] ** 2)
        diag = np.array(self.potential, dtype=float, copy=True)
        hops = []
        for a in range(g.ndim):
            n = g.shape[a]
            lower = np.take(amp[a], np.arange(n), axis=a)
            upper = np.take(amp[a], np.arange(1, n + 1), axis=a)
            diag += lower + upper
            w = upper.astype(self.dtype)
            if self.phases is not None:
                p = np.broadcast_to(self.phases[a], g.shape)
                w = w * p * np.conj(np.roll(p, -1, axis=a))
            hops.append(w)
        self._diag = diag
        self._hops = hops
        k, _ = _kernels()
        tables, w3 = [], []
        zero = np.zeros(self._shape3, dtype=self.dtype)
        for a3 in range(3):
            a = a3 - pad
            if a >= 0:
                tables += list(k.neighbour_table(g.shape[a], 1, g.periodic[a]))
                w3.append(np.ascontiguousarray(hops[a].reshape(self._shape3)))
            else:
                tables += list(k.neighbour_table(1, 1, False))
                w3.append(zero)
        self._tables3 = tables
        self._w3 = w3
        self._d3 = np.ascontiguousarray(diag.reshape(self._shape3))

    def diagonal(self) -> np.ndarray:
        return self._diag.copy()

    def bounds(self) -> tuple:
        """Rigorous (lower, upper) spectrum bounds (Gershgorin discs of the assembled matrix)."""
        radius = np.zeros(self.grid.shape)
        for a in range(self.grid.ndim):
            w = np.abs(self._hops[a])
            if not self.grid.periodic[a]:
                idx = [slice(None)] * self.grid.ndim
                idx[a] = slice(-1, None)
                w = w.copy()
                w[tuple(idx)] = 0.0          # the link to the wall has no neighbour
            radius += w + np.roll(w, 1, axis=a)
        upper = float((self._diag + radius).max())
        # lower: T - T_min is a sum of positive semidefinite link terms when every link of axis a is
        # replaced by its smallest value, so lambda_min(H) >= min V + sum_a lambda_min(T_a, uniform)
        lower = float(self.potential.min())
        for a in range(self.grid.ndim):
            if not self.grid.periodic[a]:
                t = self.kinetic_unit * float(self.inverse_masses[a].min()) / self.grid.spacing[a] ** 2
                lower += 4.0 * t * np.sin(np.pi / (2 * (self.grid.shape[a] + 1))) ** 2
        return max(lower, float((self._diag - radius).min())), upper

    @property
    def row_filter(self) -> bool:
        """True on real 1D and 2D grids: :meth:`chebyshev_rows` has a fused kernel there."""
        return self.phases is None and self._shape3[0] == 1

    def chebyshev_rows(self, x: np.ndarray, w0: np.ndarray, w1: np.ndarray, rows: np.ndarray,
                       degree: np.ndarray, alphas: np.ndarray, betas: np.ndarray, shift: float) -> None:
        """Whole Chebyshev recurrences on rows of a block, one row per thread (as
        :meth:`core.hamiltonian.Hamiltonian.chebyshev_rows`)."""
        n1, n2 = self._shape3[1], self._shape3[2]
        _, _, iy, sy, iz, sz = self._tables3
        m = x.shape[0]
        _kernels()[1].link_chebyshev_rows_2d(
            x.reshape(m, n1, n2), w0.reshape(len(w0), n1, n2), w1.reshape(len(w1), n1, n2),
            np.asarray(rows, dtype=np.int64), self._d3.reshape(n1, n2), self._w3[1].reshape(n1, n2),
            self._w3[2].reshape(n1, n2), iy, sy, iz, sz, alphas, betas, np.asarray(degree, dtype=np.int64),
            shift)

    def step(self, x: np.ndarray, out: np.ndarray, *, alpha: float, shift: float, beta: float,
             z: np.ndarray) -> None:
        m = x.shape[0]
        s3 = (m,) + self._shape3
        ix, sx, iy, sy, iz, sz = self._tables3
        wx, wy, wz = self._w3
        _kernels()[1].link_step(x.reshape(s3), self._d3, wx, wy, wz, ix, sx, iy, sy, iz, sz,
                                alpha, shift, beta, z.reshape(s3), out.reshape(s3))

    def to_sparse(self) -> sp.csr_matrix:
        """H as a scipy CSR matrix (grid points in C order), assembled from the same link values."""
        g = self.grid
        n = g.size
        flat = np.arange(n).reshape(g.shape)
        rows, cols, vals = [np.arange(n)], [np.arange(n)], [self._diag.ravel().astype(self.dtype)]
        for a in range(g.ndim):
            nxt = np.roll(flat, -1, axis=a)
            keep = np.ones(g.shape, dtype=bool)
            if not g.periodic[a]:
                idx = [slice(None)] * g.ndim
                idx[a] = slice(-1, None)
                keep[tuple(idx)] = False
            w = self._hops[a][keep]
            r, c = flat[keep], nxt[keep]
            rows += [r, c]
            cols += [c, r]
            vals += [-w, -np.conj(w)]
        return sp.csr_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                             shape=(n, n))

    def rebuild(self, grid: Grid, potential: np.ndarray) -> RegionHamiltonian:
        """The same materials, field and gauge on another grid, with the potential given there."""
        return build_region_hamiltonian(grid, potential, self.material_map, units=self.units,
                                        magnetic_field=self.magnetic_field if self.phases is not None else None,
                                        gauge=self.gauge, gauge_centre=self.gauge_centre)

    def describe(self) -> dict:
        d = super().describe()
        d["regions"] = list(getattr(self.material_map, "labels", ()))
        d["link_rule"] = getattr(self.material_map, "link_rule", None)
        return d


def build_region_hamiltonian(grid: Grid, potential, material_map, *, units="dimensionless",
                             scheme: str = "fd2", magnetic_field=None, gauge: str = "symmetric",
                             gauge_centre=None) -> RegionHamiltonian:
    """The BenDaniel-Duke Hamiltonian for ``material_map`` (:class:`core.regions.MaterialMap`).

    ``potential`` is the full V on the grid (band offsets included, energy unit); ``units`` a
    unit-system name or a UnitSystem.
    Only ``scheme="fd2"`` carries a position-dependent mass; any other scheme is refused.
    """
    if scheme not in REGION_SCHEMES:
        raise InputError(f"the {scheme} scheme cannot carry a position-dependent effective mass "
                         f"(material regions with different masses); use fd2 or auto")
    v = check_potential(grid, potential)
    u = get_units(units)
    kin = u.kinetic_prefactor(1.0)
    base = build_hamiltonian(grid, v, mass=1.0, units=u, scheme="fd2", magnetic_field=magnetic_field,
                             gauge=gauge, gauge_centre=gauge_centre)
    inv = material_map.link_inverse_masses(grid)
    low = np.unravel_index(int(np.argmin(v)), grid.shape)
    prefactors = tuple(kin * float(np.take(inv[a], [low[a]], axis=a)[tuple(
        0 if b == a else low[b] for b in range(grid.ndim))]) for a in range(grid.ndim))
    return RegionHamiltonian(grid=grid, potential=v, prefactors=prefactors, scheme="fd2",
                             kinetic_1d=base.kinetic_1d, phases=base.phases, magnetic_field=base.magnetic_field,
                             gauge=base.gauge, kappa=base.kappa, gauge_centre=base.gauge_centre,
                             inverse_masses=inv, material_map=material_map, kinetic_unit=kin, units=u)
