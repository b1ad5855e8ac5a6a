"""Grid Hamiltonians H = T_x (+) T_y (+) T_z + diag(V), applied matrix-free to blocks.

A block of vectors is an array shaped ``(m, *grid.shape)`` (vector index
first); a single vector may also be passed with the grid's shape.

Magnetic field: orbital coupling through Peierls phases on every hop,
R. Peierls, Z. Phys. 80, 763 (1933).  The vector potential is linear in the
coordinates (uniform B) and each component A_a does not depend on x_a, so the
line integral of a straight hop along axis a is exactly A_a (x_i - x_j) and the
phased kinetic term is U_a T_a U_a^dagger with U_a = diag(exp(i q A_a x_a / hbar)).
This holds for every kinetic scheme, including the dense spectral one.
Gauges (about a centre c):

* ``symmetric``: A = B x (r - c) / 2
* ``landau``:    A = (-B_z (y - c_y), -B_x (z - c_z), -B_y (x - c_x))  (for B along z
  this is the familiar A = (-B y, 0, 0)); curl A = B in both.
"""
from __future__ import annotations

import hashlib
import math
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from .errors import InputError
from .grid import Grid
from .kinetic import check_scheme, kinetic_matrix_1d, stencil
from .limits import MASS_RANGE, MAX_ENERGY, MAX_MAGNETIC_FIELD
from .units import get_units


def _kernels():
    """The compiled kernels (numba), imported on first use: building a Hamiltonian for a matrix or
    opening a project in the window does not pay for loading numba."""
    from . import kernels
    return kernels

__all__ = ["Hamiltonian", "build_hamiltonian", "build", "rebuild_on_grid", "as_masses", "vector_potential", "GAUGES"]

GAUGES = ("symmetric", "landau")


def as_masses(mass, ndim: int) -> tuple:
    """Effective mass per axis (tuple of ndim positive floats) from a scalar or a list of 3 (or ndim)."""
    values = np.atleast_1d(np.asarray(mass, dtype=float)).ravel()
    if values.size == 1:
        values = np.repeat(values, ndim)
    elif values.size == 3 and ndim < 3:
        values = values[:ndim]
    if values.size != ndim:
        raise InputError(f"mass: expected 1 or {ndim} values, got {values.size}")
    if not np.all(np.isfinite(values)) or np.any(values <= 0):
        raise InputError(f"mass must be positive and finite, got {values.tolist()}")
    return tuple(float(v) for v in values)


def check_potential(grid: Grid, potential) -> np.ndarray:
    """Return V as a float64 array of grid.shape, or raise InputError for bad shapes or values."""
    try:
        v = np.asarray(potential, dtype=float)
    except (TypeError, ValueError) as exc:
        raise InputError(f"potential is not numeric: {exc}") from None
    if v.ndim == 0:
        v = np.full(grid.shape, float(v))
    if v.shape != grid.shape:
        raise InputError(f"potential has shape {v.shape}, but the grid has shape {grid.shape}")
    bad = ~np.isfinite(v)
    if bad.any():
        first = tuple(int(i) for i in np.argwhere(bad)[0])
        coords = ", ".join(f"{n}={ax[i]:.4g}" for n, ax, i in zip("xyz", grid.axes, first))
        raise InputError(f"potential has {int(bad.sum())} NaN/Inf values, first at index {first} ({coords})")
    peak = float(np.max(np.abs(v))) if v.size else 0.0
    if peak > MAX_ENERGY:
        raise InputError(f"the potential reaches {peak:.3g} in the energy unit, beyond the {MAX_ENERGY:g} a "
                         f"potential may reach (the low levels would drown in rounding)")
    return np.ascontiguousarray(v)


def vector_potential(grid: Grid, magnetic_field, *, gauge: str = "symmetric", centre=None) -> list:
    """Components A_a (broadcastable arrays, one per grid axis) for a uniform field (Bx, By, Bz)."""
    if gauge not in GAUGES:
        raise InputError(f"unknown gauge {gauge!r}; choose 'symmetric' or 'landau'")
    b = np.zeros(3)
    bf = np.atleast_1d(np.asarray(magnetic_field, dtype=float))
    b[: bf.size] = bf[:3]
    c = np.zeros(3)
    if centre is not None:
        cc = np.atleast_1d(np.asarray(centre, dtype=float))
        c[: cc.size] = cc[:3]
    mesh = list(grid.mesh_sparse()) + [0.0] * (3 - grid.ndim)
    r = [mesh[a] - c[a] for a in range(3)]
    if gauge == "symmetric":
        a_full = [0.5 * (b[1] * r[2] - b[2] * r[1]),
                  0.5 * (b[2] * r[0] - b[0] * r[2]),
                  0.5 * (b[0] * r[1] - b[1] * r[0])]
    else:
        a_full = [-b[2] * r[1], -b[0] * r[2], -b[1] * r[0]]
    return [np.asarray(a_full[a], dtype=float) for a in range(grid.ndim)]


@dataclass(eq=False)
class Hamiltonian:
    """A grid Hamiltonian; energies in the project's energy unit.

    Build it with :func:`build_hamiltonian`.  ``apply(X)`` computes H X for a block
    ``X`` shaped ``(m, *grid.shape)`` (or one vector of ``grid.shape``).
    """

    grid: Grid
    potential: np.ndarray
    prefactors: tuple          # hbar^2 / (2 m_a) per axis, energy * length^2
    scheme: str
    kinetic_1d: tuple          # dense -d^2/dx^2 matrices per axis (without prefactor)
    phases: tuple | None       # per axis exp(i q A_a x_a / hbar) on the grid, or None
    magnetic_field: tuple
    gauge: str
    kappa: float = 0.0                 # q / hbar in 1 / (magnetic unit * length unit^2)
    gauge_centre: tuple | None = None

    def __post_init__(self):
        g = self.grid
        pad = 3 - g.ndim
        self._shape3 = (1,) * pad + tuple(g.shape)
        self._v3 = np.ascontiguousarray(self.potential.reshape(self._shape3))
        self._banded = self.scheme != "spectral"
        if self._banded:
            coeffs, tables = [], []
            for a3 in range(3):
                a = a3 - pad
                if a >= 0:
                    cs = stencil(self.scheme, g.spacing[a]) * self.prefactors[a]
                    idx, sgn = _kernels().neighbour_table(g.shape[a], len(cs) - 1, g.periodic[a])
                else:
                    cs = np.zeros(1)
                    idx, sgn = _kernels().neighbour_table(1, 0, False)
                coeffs.append(np.ascontiguousarray(cs))
                tables += [idx, sgn]
            self._coeffs = coeffs
            self._tables = tables
            if self.phases is not None:
                ones = np.ones(self._shape3, dtype=complex)
                ph = [np.ascontiguousarray(np.broadcast_to(self.phases[a3 - pad], g.shape).reshape(self._shape3))
                      if a3 >= pad else ones for a3 in range(3)]
                self._phases3 = ph
        else:
            self._dense = [self.prefactors[a] * self.kinetic_1d[a] for a in range(g.ndim)]
            if self.phases is not None:
                self._phase_full = [np.ascontiguousarray(np.broadcast_to(p, g.shape)) for p in self.phases]

    # -- basic facts ----------------------------------------------------------------------
    @property
    def dtype(self):
        return np.complex128 if self.phases is not None else np.float64

    @property
    def is_complex(self) -> bool:
        return self.phases is not None

    @property
    def size(self) -> int:
        return self.grid.size

    @property
    def shape(self) -> tuple:
        return (self.size, self.size)

    def diagonal(self) -> np.ndarray:
        """Diagonal of H on the grid (energy unit)."""
        d = self.potential.copy()
        for a in range(self.grid.ndim):
            diag1 = self.prefactors[a] * np.diag(self.kinetic_1d[a])
            shape = [1] * self.grid.ndim
            shape[a] = -1
            d = d + diag1.reshape(shape)
        return d

    def bounds(self) -> tuple:
        """Rigorous (lower, upper) bounds of the spectrum (Weyl's inequality on the Kronecker sum)."""
        lo = float(self.potential.min())
        hi = float(self.potential.max())
        for a in range(self.grid.ndim):
            t = self.kinetic_1d[a]
            if t.shape[0] <= 3000:
                w0, w1 = _extreme_eigenvalues(t)
                lo += self.prefactors[a] * w0
                hi += self.prefactors[a] * w1
            else:  # Gershgorin
                hi += self.prefactors[a] * float(np.abs(t).sum(axis=1).max())
        return lo, hi

    # -- application ----------------------------------------------------------------------
    def _as_block(self, x):
        single = x.shape == self.grid.shape
        if single:
            x = x[None]
        if x.shape[1:] != self.grid.shape:
            raise InputError(f"vector block has shape {x.shape}, expected (m, {self.grid.shape})")
        return x, single

    def apply(self, x: np.ndarray) -> np.ndarray:
        """Return H x for one vector (grid shape) or a block (m, *grid.shape)."""
        x, single = self._as_block(np.asarray(x))
        dtype = np.result_type(x.dtype, self.dtype)
        x = np.ascontiguousarray(x, dtype=dtype)
        y = np.empty_like(x)
        self.step(x, y, alpha=1.0, shift=0.0, beta=0.0, z=x)
        return y[0] if single else y

    __matmul__ = apply

    def step(self, x: np.ndarray, out: np.ndarray, *, alpha: float, shift: float, beta: float,
             z: np.ndarray) -> None:
        """Fused ``out = alpha * (H - shift) x + beta * z`` on contiguous blocks (m, *grid.shape)."""
        m = x.shape[0]
        if self._banded:
            s3 = (m,) + self._shape3
            xx, zz, yy = x.reshape(s3), z.reshape(s3), out.reshape(s3)
            cx, cy, cz = self._coeffs
            ix, sx, iy, sy, iz, sz = self._tables
            if self.phases is None:
                _kernels().fd_step_real(xx, self._v3, cx, cy, cz, ix, sx, iy, sy, iz, sz,
                                     float(alpha), float(shift), float(beta), zz, yy)
            else:
                px, py, pz = self._phases3
                _kernels().fd_step_phased(xx, self._v3, cx, cy, cz, ix, sx, iy, sy, iz, sz,
                                       px, py, pz, float(alpha), float(shift), float(beta), zz, yy)
            return
        # dense (spectral) path: tensor contractions along each axis (BLAS-3)
        np.multiply(x, self.potential - shift, out=out)
        for a in range(self.grid.ndim):
            xa = x if self.phases is None else x * np.conj(self._phase_full[a])
            t = _contract(self._dense[a], xa, a + 1)
            if self.phases is not None:
                t *= self._phase_full[a]
            out += t
        if alpha != 1.0:
            out *= alpha
        if beta != 0.0:
            out += beta * z

    @property
    def row_filter(self) -> bool:
        """True if :meth:`chebyshev_rows` has a fused kernel here (real, nearest-neighbour, 1D or 2D)."""
        if not self._banded or self.phases is not None or self._shape3[0] != 1:
            return False
        cx, cy, cz = self._coeffs
        return cx.shape[0] == 1 and cy.shape[0] <= 2 and cz.shape[0] <= 2

    def chebyshev_rows(self, x: np.ndarray, w0: np.ndarray, w1: np.ndarray, rows: np.ndarray,
                       degree: np.ndarray, alphas: np.ndarray, betas: np.ndarray, shift: float) -> None:
        """Chebyshev recurrence on rows ``x[rows[t]]`` of a block (m, *grid.shape), in place, one row
        per thread, with work rows ``w0[t]``, ``w1[t]`` (see :func:`core.kernels.chebyshev_rows_real_2d`).
        Only where :attr:`row_filter` is True."""
        n1, n2 = self._shape3[1], self._shape3[2]
        cx, cy, cz = self._coeffs
        ix, sx, iy, sy, iz, sz = self._tables
        m = x.shape[0]
        _kernels().chebyshev_rows_real_2d(
            x.reshape(m, n1, n2), w0.reshape(len(w0), n1, n2), w1.reshape(len(w1), n1, n2),
            np.asarray(rows, dtype=np.int64), self._v3.reshape(n1, n2), cx[0] + cy[0] + cz[0] - shift,
            cy, cz, iy, sy, iz, sz, alphas, betas, np.asarray(degree, dtype=np.int64))

    # -- assembled forms ------------------------------------------------------------------
    def to_sparse(self) -> sp.csr_matrix:
        """H as a scipy sparse CSR matrix (grid points in C order, ``indexing="ij"``)."""
        g = self.grid
        n = g.shape
        total = sp.diags(self.potential.ravel(), 0, format="csr", dtype=self.dtype)
        for a in range(g.ndim):
            t = sp.csr_matrix(self.prefactors[a] * self.kinetic_1d[a])
            left = sp.identity(int(np.prod(n[:a], dtype=np.int64)), format="csr")
            right = sp.identity(int(np.prod(n[a + 1:], dtype=np.int64)), format="csr")
            term = sp.kron(sp.kron(left, t), right, format="csr")
            if self.phases is not None:
                p = np.broadcast_to(self.phases[a], n).ravel()
                term = sp.diags(p) @ term @ sp.diags(np.conj(p))
            total = total + term
        return total.tocsr()

    def describe(self) -> dict:
        return {"scheme": self.scheme, "grid": self.grid.to_dict(), "prefactors": list(self.prefactors),
                "magnetic_field": list(self.magnetic_field), "gauge": self.gauge}


_EXTREMES: dict = {}


def _extreme_eigenvalues(t: np.ndarray) -> tuple:
    """Lowest and highest eigenvalue of a dense symmetric 1D kinetic matrix, remembered by content
    (every solve of a sweep or a slider drag asks again for the same few matrices; 4 ms at n = 256)."""
    key = (t.shape[0], hashlib.blake2b(np.ascontiguousarray(t).view(np.uint8), digest_size=16).digest())
    found = _EXTREMES.get(key)
    if found is None:
        w = np.linalg.eigvalsh(t)
        found = (float(w[0]), float(w[-1]))
        if len(_EXTREMES) >= 64:
            _EXTREMES.clear()
        _EXTREMES[key] = found
    return found


def _contract(mat: np.ndarray, x: np.ndarray, axis: int) -> np.ndarray:
    """Apply ``mat`` along ``axis`` of ``x`` (sum_j mat[i, j] x[..., j, ...])."""
    shape = x.shape
    pre = int(np.prod(shape[:axis], dtype=np.int64))
    post = int(np.prod(shape[axis + 1:], dtype=np.int64))
    n = shape[axis]
    if post == 1:
        return (x.reshape(pre, n) @ mat.T).reshape(shape)
    return np.matmul(mat, x.reshape(pre, n, post)).reshape(shape)


def build_hamiltonian(grid: Grid, potential, *, mass=1.0, units="dimensionless", scheme: str = "fd2",
                      magnetic_field=None, gauge: str = "symmetric", gauge_centre=None) -> Hamiltonian:
    """Assemble the grid Hamiltonian.

    Parameters
    ----------
    grid : the :class:`Grid`.
    potential : V on the grid (``grid.shape``), in the unit system's energy unit.
    mass : effective mass (scalar, or one per axis x, y, z) in the unit system's mass unit.
    units : a unit-system name (see :mod:`core.units`) or a UnitSystem.
    scheme : ``fd2``, ``fd4``, ``fd6``, ``fd8`` or ``spectral`` (``auto`` is resolved by
        :func:`core.solve.choose_scheme`, not here).
    magnetic_field : (Bx, By, Bz) in the unit system's magnetic unit, or None. In 2D only
        Bz (perpendicular to the plane) couples to the orbital motion; in 1D none does.
    gauge, gauge_centre : ``symmetric`` or ``landau`` and the centre of the gauge.
    """
    u = get_units(units)
    check_scheme(scheme)
    v = check_potential(grid, potential)
    masses = as_masses(mass, grid.ndim)
    for mv in masses:
        if not MASS_RANGE[0] <= mv <= MASS_RANGE[1]:
            raise InputError(f"mass {mv:g} {u.mass_unit} is outside the accepted range "
                             f"{MASS_RANGE[0]:g} .. {MASS_RANGE[1]:g} {u.mass_unit}")
    prefactors = tuple(u.kinetic_prefactor(mv) for mv in masses)
    for a, (c, h) in enumerate(zip(prefactors, grid.spacing)):
        scale = c / (h * h) if h * h > 0 else math.inf
        if not scale <= MAX_ENERGY:
            raise InputError(f"the kinetic energy scale along {'xyz'[a]} (hbar^2/2m over the spacing squared) is "
                             f"{scale:.3g} {u.energy_unit}, beyond {MAX_ENERGY:g}: the spacing is too fine for "
                             f"this mass; use fewer points or a larger box")
    kin = tuple(kinetic_matrix_1d(scheme, grid.shape[a], grid.spacing[a], grid.periodic[a])
                for a in range(grid.ndim))
    b = np.zeros(3)
    if magnetic_field is not None:
        bf = np.atleast_1d(np.asarray(magnetic_field, dtype=float))
        if bf.size > 3 or not np.all(np.isfinite(bf)):
            raise InputError(f"magnetic field must be up to 3 finite numbers, got {magnetic_field!r}")
        if np.max(np.abs(bf), initial=0.0) > MAX_MAGNETIC_FIELD:
            raise InputError(f"magnetic field {bf.tolist()} {u.magnetic_unit}: each component may reach at most "
                             f"{MAX_MAGNETIC_FIELD:g} {u.magnetic_unit}")
        b[: bf.size] = bf
    phases = None
    if grid.ndim == 2:
        coupling = b[2]
    elif grid.ndim == 3:
        coupling = np.linalg.norm(b)
    else:
        coupling = 0.0
    if coupling != 0.0 and u.charged:
        if any(grid.periodic):
            raise InputError("a magnetic field with periodic boundaries is not supported "
                             "(the Peierls phases are not periodic); use hard walls")
        if grid.ndim == 2:
            b = np.array([0.0, 0.0, b[2]])
        avec = vector_potential(grid, b, gauge=gauge, centre=gauge_centre)
        kappa = u.phase_per_flux_area()
        centre = np.zeros(3) if gauge_centre is None else np.resize(np.asarray(gauge_centre, float), 3)
        mesh = grid.mesh_sparse()
        phases = tuple(np.exp(1j * kappa * avec[a] * (mesh[a] - centre[a])) for a in range(grid.ndim))
    return Hamiltonian(grid=grid, potential=v, prefactors=prefactors, scheme=scheme, kinetic_1d=kin,
                       phases=phases, magnetic_field=tuple(float(x) for x in b), gauge=gauge,
                       kappa=u.phase_per_flux_area() if phases is not None else 0.0,
                       gauge_centre=(None if gauge_centre is None
                                     else tuple(np.resize(np.asarray(gauge_centre, float), 3))))


def rebuild_on_grid(h: Hamiltonian, grid: Grid, potential: np.ndarray) -> Hamiltonian:
    """The same physics (masses, scheme, field, gauge) on another grid with the potential given there."""
    if hasattr(h, "rebuild"):                 # a Hamiltonian with material regions rebuilds its own links
        return h.rebuild(grid, potential)
    v = check_potential(grid, potential)
    kin = tuple(kinetic_matrix_1d(h.scheme, grid.shape[a], grid.spacing[a], grid.periodic[a])
                for a in range(grid.ndim))
    phases = None
    if h.phases is not None:
        b = np.asarray(h.magnetic_field, dtype=float)
        avec = vector_potential(grid, b, gauge=h.gauge, centre=h.gauge_centre)
        centre = np.zeros(3) if h.gauge_centre is None else np.asarray(h.gauge_centre, float)
        mesh = grid.mesh_sparse()
        phases = tuple(np.exp(1j * h.kappa * avec[a] * (mesh[a] - centre[a])) for a in range(grid.ndim))
    return Hamiltonian(grid=grid, potential=v, prefactors=h.prefactors, scheme=h.scheme, kinetic_1d=kin,
                       phases=phases, magnetic_field=h.magnetic_field, gauge=h.gauge, kappa=h.kappa,
                       gauge_centre=h.gauge_centre)


build = build_hamiltonian
