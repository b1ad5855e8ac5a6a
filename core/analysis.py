"""Observables of computed states: norms, positions, angular momentum, parity, dipoles, regions.

Every function takes a :class:`core.grid.Grid` and a block of states shaped
``(k, *grid.shape)`` (real or complex, as returned in ``Spectrum.states``) and
returns numpy arrays.  Integrals are grid sums times ``dV = grid.volume_element``
(the quadrature of the sinc-DVR / trapezoidal rule for functions that vanish at
hard walls).  Lengths are in the project's length unit, energies in its energy
unit; angular momentum is in units of hbar.

Derivatives (used by :func:`angular_momentum_z`)
-----------------------------------------------
``derivative="spectral"`` (default):

* hard-wall axis: the Galerkin derivative of the sine basis that underlies the
  finite-interval sinc-DVR (D. T. Colbert, W. H. Miller, J. Chem. Phys. 96,
  1982 (1992)).  Grid values are mapped to sine coefficients by the type-I
  discrete sine transform, each coefficient pair couples through
  ``<sin_m| d/dx |sin_n> = 4 m n / (L (m^2 - n^2))`` (m + n odd), and the
  result is mapped back.  The matrix is real and exactly antisymmetric, so
  ``L_z`` is exactly Hermitian on the grid; matrix elements between functions
  of the sine space are exact, and for smooth states that decay before the
  walls the error falls exponentially with the number of points.
* periodic axis: the Fourier (spectral) derivative with the Nyquist mode set
  to zero (keeps it real and antisymmetric).

``derivative="fd8"``: the 8th-order centred finite difference (B. Fornberg,
Math. Comp. 51, 699 (1988)), taken as zero beyond a hard wall (which keeps it
antisymmetric) or wrapped on a periodic axis; error O(h^8).

Dense n x n derivative matrices per axis are cached; applying one costs
O(k * N * n) for k states of N points.
"""
from __future__ import annotations

from collections.abc import Sequence
from functools import lru_cache

import numpy as np

from .errors import InputError
from .grid import AXIS_NAMES, Grid

__all__ = [
    "norms", "position_expectation", "position_spread",
    "derivative_matrix_1d", "angular_momentum_z", "angular_momentum_z_matrix",
    "angular_momentum_z_multiplet", "angular_momentum_z_uncertainty", "mirror_parity", "parity_label",
    "transition_dipoles", "oscillator_strengths",
    "probability_in_region", "polygon_mask", "box_mask", "overlap_matrix",
    "wall_probability", "WALL_SHARE", "WALL_BAND", "BOX_STATE", "BOX_STATE_HINT",
    "DERIVATIVES",
]

DERIVATIVES = ("spectral", "fd8")

#: Centred first-derivative weights c_1..c_4 of f' ~ sum_s c_s (f_{i+s} - f_{i-s}) / h
#: (8th order; Fornberg, Math. Comp. 51, 699 (1988)).
_FD8_FIRST = (4.0 / 5.0, -1.0 / 5.0, 4.0 / 105.0, -1.0 / 280.0)


# --- validation -----------------------------------------------------------------------------

def _check_grid(grid) -> Grid:
    if not isinstance(grid, Grid):
        raise InputError(f"expected a Grid, got {type(grid).__name__}")
    return grid


def _check_states(grid: Grid, states, what: str = "states") -> np.ndarray:
    """Return ``states`` as an array (k, *grid.shape) of float64 or complex128, or raise InputError."""
    _check_grid(grid)
    try:
        arr = np.asarray(states)
    except (TypeError, ValueError) as exc:
        raise InputError(f"{what} are not numeric: {exc}") from None
    expected = "(k, " + ", ".join(str(n) for n in grid.shape) + ")"
    if arr.ndim != grid.ndim + 1 or arr.shape[1:] != grid.shape:
        raise InputError(f"{what} have shape {arr.shape}, expected {expected} "
                         f"(a block of k states on the {grid.shape} grid)")
    if arr.shape[0] == 0:
        raise InputError(f"{what}: the block holds no states, expected {expected} with k >= 1")
    if np.iscomplexobj(arr):
        arr = arr.astype(np.complex128, copy=False)
    elif arr.dtype.kind in "biuf":
        arr = arr.astype(np.float64, copy=False)
    else:
        raise InputError(f"{what} are not numeric (dtype {arr.dtype})")
    if not np.all(np.isfinite(arr)):
        raise InputError(f"{what} contain NaN or Inf values")
    return arr


def _check_centre(centre, n: int = 2) -> np.ndarray:
    try:
        c = np.asarray(centre, dtype=float).ravel()
    except (TypeError, ValueError):
        raise InputError(f"centre: expected {n} numbers, got {centre!r}") from None
    if c.size != n or not np.all(np.isfinite(c)):
        raise InputError(f"centre: expected {n} finite numbers (x, y), got {centre!r}")
    return c


def _check_mask(grid: Grid, mask) -> np.ndarray:
    m = np.asarray(mask)
    if m.shape != grid.shape:
        raise InputError(f"region mask has shape {m.shape}, expected the grid shape {grid.shape}")
    if m.dtype != bool:
        raise InputError(f"region mask must be boolean (True inside the region), got dtype {m.dtype}")
    return m


def _flat(states: np.ndarray) -> np.ndarray:
    return states.reshape(states.shape[0], -1)


# --- basic integrals ------------------------------------------------------------------------

def norms(grid: Grid, states) -> np.ndarray:
    """``sum |psi|^2 dV`` per state, shape (k,); dimensionless (1 for normalised states)."""
    psi = _check_states(grid, states)
    return np.einsum("ij,ij->i", _flat(psi).conj(), _flat(psi)).real * grid.volume_element


def overlap_matrix(grid: Grid, a, b) -> np.ndarray:
    """Overlaps ``<a_i|b_j> = sum conj(a_i) b_j dV``, shape (ka, kb); complex if either is complex."""
    fa = _flat(_check_states(grid, a, "bra states"))
    fb = _flat(_check_states(grid, b, "ket states"))
    return (fa.conj() @ fb.T) * grid.volume_element


def _densities(grid: Grid, states) -> tuple:
    psi = _check_states(grid, states)
    rho = (psi.real ** 2 + psi.imag ** 2) if np.iscomplexobj(psi) else psi ** 2
    norm = rho.reshape(rho.shape[0], -1).sum(axis=1)
    if np.any(norm <= 0):
        raise InputError("a state is identically zero; its expectation values are undefined")
    return rho, norm


def _axis_moments(rho: np.ndarray, grid: Grid, power: int) -> np.ndarray:
    """sum rho x_a^power over the grid for each axis a, shape (k, ndim)."""
    out = np.empty((rho.shape[0], grid.ndim))
    for a, x in enumerate(grid.axes):
        other = tuple(ax for ax in range(1, rho.ndim) if ax != a + 1)
        marginal = rho.sum(axis=other) if other else rho       # (k, n_a)
        out[:, a] = marginal @ (x ** power)
    return out


def position_expectation(grid: Grid, states) -> np.ndarray:
    """``<x>, <y>(, <z>)`` per state in the length unit, shape (k, ndim).

    Each state is normalised first, so unnormalised input is fine.  On a periodic
    axis the coordinate is the grid's own (from ``lower`` to ``upper``), not a
    circular mean.
    """
    rho, norm = _densities(grid, states)
    return _axis_moments(rho, grid, 1) / norm[:, None]


def position_spread(grid: Grid, states) -> np.ndarray:
    """``sqrt(<x_a^2> - <x_a>^2)`` per state and axis in the length unit, shape (k, ndim)."""
    rho, norm = _densities(grid, states)
    m1 = _axis_moments(rho, grid, 1) / norm[:, None]
    m2 = _axis_moments(rho, grid, 2) / norm[:, None]
    return np.sqrt(np.maximum(m2 - m1 ** 2, 0.0))


# --- derivatives and angular momentum ------------------------------------------------------

@lru_cache(maxsize=32)
def _derivative_cached(n: int, spacing: float, periodic: bool, kind: str) -> np.ndarray:
    if kind == "spectral":
        if periodic:
            k = 2.0 * np.pi * np.fft.fftfreq(n, d=spacing)
            if n % 2 == 0:
                k[n // 2] = 0.0
            mat = np.fft.ifft(1j * k[:, None] * np.fft.fft(np.eye(n), axis=0), axis=0).real
            mat = 0.5 * (mat - mat.T)
        else:
            big_n = n + 1
            length = big_n * spacing
            m = np.arange(1, big_n)
            sine = np.sin(np.pi * np.outer(m, m) / big_n)            # DST-I, sine^2 = (N/2) I
            mm, nn = np.meshgrid(m, m, indexing="ij")
            odd = (mm + nn) % 2 == 1
            with np.errstate(divide="ignore", invalid="ignore"):
                dc = np.where(odd, 4.0 * mm * nn / (length * (mm ** 2 - nn ** 2)), 0.0)
            mat = (2.0 / big_n) * (sine @ dc @ sine)
            mat = 0.5 * (mat - mat.T)
    elif kind == "fd8":
        r = len(_FD8_FIRST)
        if periodic and 2 * r >= n:
            raise InputError(f"fd8 derivative on a periodic axis needs more than {2 * r} points, got {n}")
        mat = np.zeros((n, n))
        idx = np.arange(n)
        for s, c in enumerate(_FD8_FIRST, start=1):
            for sign in (1, -1):
                j = idx + sign * s
                if periodic:
                    np.add.at(mat, (idx, j % n), sign * c)
                else:
                    ok = (j >= 0) & (j < n)                           # zero beyond the walls
                    np.add.at(mat, (idx[ok], j[ok]), sign * c)
        mat /= spacing
    else:
        raise InputError(f"unknown derivative {kind!r}; choose one of {', '.join(DERIVATIVES)}")
    mat.setflags(write=False)
    return mat


def derivative_matrix_1d(n: int, spacing: float, periodic: bool = False, *,
                         derivative: str = "spectral") -> np.ndarray:
    """Dense n x n matrix of d/dx (1 / length unit) for one grid axis (see the module notes)."""
    if derivative not in DERIVATIVES:
        raise InputError(f"unknown derivative {derivative!r}; choose one of {', '.join(DERIVATIVES)}")
    return _derivative_cached(int(n), float(spacing), bool(periodic), derivative)


def _apply_axis(mat: np.ndarray, psi: np.ndarray, axis: int) -> np.ndarray:
    """Apply ``mat`` along grid axis ``axis`` of a block (k, *shape)."""
    moved = np.moveaxis(psi, axis + 1, -1)
    return np.moveaxis(moved @ mat.T, -1, axis + 1)


def _lz_apply(grid: Grid, psi: np.ndarray, centre, derivative: str) -> np.ndarray:
    """L_z psi / hbar = -i ((x - cx) d/dy - (y - cy) d/dx) psi for a block."""
    if grid.ndim < 2:
        raise InputError("angular momentum L_z needs a 2D or 3D grid")
    c = _check_centre(centre, 2)
    mesh = grid.mesh_sparse()
    dx = derivative_matrix_1d(grid.shape[0], grid.spacing[0], grid.periodic[0], derivative=derivative)
    dy = derivative_matrix_1d(grid.shape[1], grid.spacing[1], grid.periodic[1], derivative=derivative)
    x = (mesh[0] - c[0])[None]
    y = (mesh[1] - c[1])[None]
    return -1j * (x * _apply_axis(dy, psi, 1) - y * _apply_axis(dx, psi, 0))


def angular_momentum_z_matrix(grid: Grid, states, *, centre=(0.0, 0.0),
                              derivative: str = "spectral") -> np.ndarray:
    """Matrix ``<psi_i| L_z |psi_j> / hbar`` (complex, Hermitian), shape (k, k).

    ``L_z = -i hbar ((x - cx) d/dy - (y - cy) d/dx)`` about an axis parallel to z
    through ``centre = (cx, cy)``.  This is the canonical angular momentum: with a
    magnetic field it is conserved only in the symmetric gauge about the same centre.
    """
    psi = _check_states(grid, states)
    lpsi = _lz_apply(grid, psi, centre, derivative)
    m = (_flat(psi).conj() @ _flat(lpsi).T) * grid.volume_element
    return 0.5 * (m + m.conj().T)


def angular_momentum_z(grid: Grid, states, *, centre=(0.0, 0.0), derivative: str = "spectral") -> np.ndarray:
    """``<psi| L_z |psi> / (hbar <psi|psi>)`` per state, shape (k,), about ``centre``.

    Real states give 0 (exactly, as the derivative matrices are antisymmetric).
    Within a degenerate multiplet the value depends on the basis the solver
    happened to return; use :func:`angular_momentum_z_multiplet` there.
    """
    psi = _check_states(grid, states)
    lpsi = _lz_apply(grid, psi, centre, derivative)
    num = np.einsum("ij,ij->i", _flat(psi).conj(), _flat(lpsi)).real
    den = np.einsum("ij,ij->i", _flat(psi).conj(), _flat(psi)).real
    if np.any(den <= 0):
        raise InputError("a state is identically zero; its angular momentum is undefined")
    return num / den


def _group_indices(group, k: int) -> list:
    try:
        idx = [int(i) for i in np.atleast_1d(np.asarray(group)).ravel()]
    except (TypeError, ValueError):
        raise InputError(f"group: expected state indices, got {group!r}") from None
    if not idx:
        raise InputError("group: expected at least one state index")
    bad = [i for i in idx if not -k <= i < k]
    if bad:
        raise InputError(f"group: indices {bad} are out of range for {k} states")
    if len(set(i % k for i in idx)) != len(idx):
        raise InputError(f"group: repeated indices in {list(group)}")
    return idx


def angular_momentum_z_multiplet(grid: Grid, states, group: Sequence[int], *, centre=(0.0, 0.0),
                                 derivative: str = "spectral") -> np.ndarray:
    """Eigenvalues (ascending, units of hbar) of L_z restricted to the multiplet ``states[group]``.

    Solves ``M c = l S c`` with ``M`` the L_z matrix and ``S`` the overlap matrix of
    the multiplet, so the result does not depend on the basis chosen inside it.
    For a rotationally symmetric problem these are the multiplet's quantum numbers m.
    """
    psi = _check_states(grid, states)
    idx = _group_indices(group, psi.shape[0])
    sub = psi[idx]
    m = angular_momentum_z_matrix(grid, sub, centre=centre, derivative=derivative)
    s = (_flat(sub).conj() @ _flat(sub).T) * grid.volume_element
    s = 0.5 * (s + s.conj().T)
    w = np.linalg.eigvalsh(s)
    if w.min() <= 1e-10 * w.max():
        raise InputError("group: the multiplet's states are linearly dependent")
    import scipy.linalg as sla
    return np.sort(sla.eigh(m, s, eigvals_only=True))


def angular_momentum_z_uncertainty(grid: Grid, states, group: Sequence[int], *, centre=(0.0, 0.0),
                                   derivative: str = "spectral") -> float:
    """How far L_z is from a good quantum number of the multiplet ``states[group]``, in units of hbar.

    The root-mean-square over the multiplet's (orthonormalised) states of ``|(1 - P) L_z psi|``, with
    ``P`` the projector onto the multiplet: 0 when L_z maps the multiplet onto itself (the problem is
    rotationally symmetric about ``centre``, so the multiplet's L_z eigenvalues are its quantum
    numbers), of order 1 when L_z mixes it with other states (a double dot, an elongated dot, a
    gauge centred elsewhere in a magnetic field).  Basis-free like :func:`angular_momentum_z_multiplet`.
    """
    psi = _check_states(grid, states)
    idx = _group_indices(group, psi.shape[0])
    sub = _flat(psi[idx]) * np.sqrt(grid.volume_element)
    q, _r = np.linalg.qr(sub.T)                       # orthonormal columns spanning the multiplet
    basis = q.T.reshape((len(idx),) + grid.shape) / np.sqrt(grid.volume_element)
    lpsi = _flat(_lz_apply(grid, basis, centre, derivative)) * np.sqrt(grid.volume_element)
    inside = q.conj().T @ lpsi.T                      # (m, m) components within the multiplet
    total = np.einsum("ij,ij->", lpsi.conj(), lpsi).real
    outside = max(total - float(np.sum(np.abs(inside) ** 2)), 0.0)
    return float(np.sqrt(outside / len(idx)))


# --- mirror parity ----------------------------------------------------------------------------

def _mirror_index(grid: Grid, axis: int):
    """Index permutation of the mirror x -> lower + upper - x along ``axis``, or None."""
    x = grid.axes[axis]
    lo, hi = grid.lower[axis], grid.upper[axis]
    n = x.size
    if grid.periodic[axis]:
        idx = (n - np.arange(n)) % n
        period = hi - lo
        image = (lo + hi - x - lo) % period + lo
    else:
        idx = np.arange(n)[::-1]
        image = lo + hi - x
    if np.allclose(image, x[idx], rtol=0.0, atol=1e-9 * grid.spacing[axis]):
        return idx
    return None


def mirror_parity(grid: Grid, states, potential=None, *, atol: float = 1e-6,
                  rtol: float = 1e-9) -> list:
    """Parity of each state under the mirror of every symmetric axis, as a list of dicts.

    An axis counts when its mirror about the grid's centre (``(lower + upper)/2``)
    maps the grid's points onto themselves and, if ``potential`` (grid-shaped) is
    given, leaves it unchanged: ``max|V - V_mirrored| <= rtol * max|V|``.
    For each such axis the state's parity is ``<psi|P psi> / <psi|psi>``,
    reported as +1 or -1 when within ``atol`` of it and 0 otherwise (mixed, e.g.
    a state of a degenerate multiplet in an arbitrary basis).  The dict has the
    axis names as keys, e.g. ``{"x": 1, "y": -1}``; asymmetric axes are left out.
    """
    psi = _check_states(grid, states)
    if not (np.isfinite(atol) and 0 < atol < 1):
        raise InputError(f"parity tolerance atol must be between 0 and 1, got {atol!r}")
    if not (np.isfinite(rtol) and rtol >= 0):
        raise InputError(f"potential symmetry tolerance rtol must be >= 0, got {rtol!r}")
    v = None
    if potential is not None:
        from .hamiltonian import check_potential
        v = check_potential(grid, potential)
    flat = _flat(psi)
    den = np.einsum("ij,ij->i", flat.conj(), flat).real
    if np.any(den <= 0):
        raise InputError("a state is identically zero; its parity is undefined")
    result = [dict() for _ in range(psi.shape[0])]
    for a in range(grid.ndim):
        idx = _mirror_index(grid, a)
        if idx is None:
            continue
        if v is not None:
            vm = np.take(v, idx, axis=a)
            scale = float(np.abs(v).max())
            if float(np.abs(v - vm).max()) > rtol * scale:
                continue
        mirrored = np.take(psi, idx, axis=a + 1)
        p = np.einsum("ij,ij->i", flat.conj(), _flat(mirrored)) / den
        name = AXIS_NAMES[a]
        for s, val in enumerate(p):
            if abs(val - 1.0) <= atol:
                result[s][name] = 1
            elif abs(val + 1.0) <= atol:
                result[s][name] = -1
            else:
                result[s][name] = 0
    return result


def parity_label(parity: dict) -> str:
    """Short text for a parity dict: ``{"x": 1, "y": -1}`` -> ``"x+ y-"``; mixed parity shows ``?``."""
    marks = {1: "+", -1: "-", 0: "?"}
    parts = []
    for name in AXIS_NAMES:
        if name in parity:
            val = parity[name]
            if val not in marks:
                raise InputError(f"parity of axis {name}: expected +1, -1 or 0, got {val!r}")
            parts.append(name + marks[val])
    return " ".join(parts)


# --- dipoles ----------------------------------------------------------------------------------

def _selection(sel, k: int, what: str) -> np.ndarray:
    if sel is None:
        return np.arange(k)
    try:
        idx = np.atleast_1d(np.asarray(sel)).astype(int, casting="safe").ravel()
    except (TypeError, ValueError):
        raise InputError(f"{what}: expected state indices, got {sel!r}") from None
    if idx.size == 0 or np.any(idx < -k) or np.any(idx >= k):
        raise InputError(f"{what}: indices {idx.tolist()} are out of range for {k} states")
    return idx


def transition_dipoles(grid: Grid, states, *, i=None, j=None) -> np.ndarray:
    """Position matrix elements ``<psi_i| r_a |psi_j>`` in the length unit, shape (len(i), len(j), ndim).

    ``i`` and ``j`` select bra and ket states (index or list; default all).  The
    result is complex if the states are.  Diagonal entries are ``<r>`` of the
    state (they depend on the origin); off-diagonal entries between orthogonal
    states do not.  Multiply by the particle's charge for the electric dipole.
    """
    psi = _check_states(grid, states)
    k = psi.shape[0]
    bra = _flat(psi[_selection(i, k, "i")]).conj()
    ket = psi[_selection(j, k, "j")]
    out = np.empty((bra.shape[0], ket.shape[0], grid.ndim), dtype=psi.dtype)
    mesh = grid.mesh_sparse()
    for a in range(grid.ndim):
        out[:, :, a] = (bra @ _flat(ket * mesh[a][None]).T) * grid.volume_element
    return out


def oscillator_strengths(energies, dipoles, *, i=None, j=None, mass=1.0, units="dimensionless",
                         prefactor=None) -> np.ndarray:
    """Dimensionless oscillator strengths ``f_ij^a = (2 m_a / hbar^2) (E_j - E_i) |<i|r_a|j>|^2``.

    ``energies`` (k,) in the energy unit and ``dipoles`` from :func:`transition_dipoles`
    on the same states, with the same ``i`` and ``j`` selections (default all, giving
    (k, k, ndim)); returns an array shaped like ``dipoles``.  The
    kinetic prefactor hbar^2/(2 m_a) comes from ``mass`` (scalar or per axis, in
    the unit system's mass unit) and ``units``, or directly from ``prefactor``
    (e.g. ``Hamiltonian.prefactors``).  For a single particle the row sums over a
    complete set obey the Thomas-Reiche-Kuhn rule ``sum_j f_0j^a = 1``.
    """
    e = np.asarray(energies, dtype=float).ravel()
    d = np.asarray(dipoles)
    if e.size == 0:
        raise InputError("energies: expected at least one energy")
    ii = _selection(i, e.size, "i")
    jj = _selection(j, e.size, "j")
    if d.ndim != 3 or d.shape[0] != ii.size or d.shape[1] != jj.size:
        raise InputError(f"dipoles have shape {d.shape}, expected ({ii.size}, {jj.size}, ndim) "
                         f"for {e.size} energies and the selections i, j")
    if not (np.all(np.isfinite(e)) and np.all(np.isfinite(d))):
        raise InputError("energies and dipoles must be finite")
    ndim = d.shape[2]
    if prefactor is not None:
        c = np.atleast_1d(np.asarray(prefactor, dtype=float)).ravel()
        if c.size == 1:
            c = np.repeat(c, ndim)
        if c.size != ndim or not np.all(np.isfinite(c)) or np.any(c <= 0):
            raise InputError(f"prefactor: expected 1 or {ndim} positive numbers, got {prefactor!r}")
    else:
        from .hamiltonian import as_masses
        from .units import get_units
        u = get_units(units)
        c = np.array([u.kinetic_prefactor(m) for m in as_masses(mass, ndim)])
    de = e[jj][None, :] - e[ii][:, None]
    return de[:, :, None] * np.abs(d) ** 2 / c[None, None, :]


# --- regions ----------------------------------------------------------------------------------

def probability_in_region(grid: Grid, states, mask) -> np.ndarray:
    """``sum_{mask} |psi|^2 dV`` per state, shape (k,); ``mask`` is a boolean array of grid.shape.

    Not renormalised: for normalised states this is the probability of finding
    the particle in the region.
    """
    psi = _check_states(grid, states)
    m = _check_mask(grid, mask).ravel()
    sel = _flat(psi)[:, m]
    rho = (sel.real ** 2 + sel.imag ** 2) if np.iscomplexobj(sel) else sel ** 2
    return rho.sum(axis=1) * grid.volume_element


def polygon_mask(grid: Grid, vertices) -> np.ndarray:
    """Boolean mask (grid.shape) of the grid points inside a polygon on a 2D grid.

    ``vertices`` is a sequence of (x, y) corners in the length unit (at least 3;
    the polygon is closed automatically).  Points exactly on an edge may fall on
    either side.
    """
    _check_grid(grid)
    if grid.ndim != 2:
        raise InputError(f"a polygon region needs a 2D grid, this grid is {grid.ndim}D")
    try:
        v = np.asarray(vertices, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"polygon vertices: expected a list of (x, y) pairs, got {vertices!r}") from None
    if v.ndim != 2 or v.shape[1] != 2 or v.shape[0] < 3:
        raise InputError(f"polygon vertices have shape {v.shape}, expected (m, 2) with m >= 3")
    if not np.all(np.isfinite(v)):
        raise InputError("polygon vertices must be finite")
    from matplotlib.path import Path
    xx, yy = grid.mesh()
    pts = np.column_stack([xx.ravel(), yy.ravel()])
    inside = Path(v, closed=False).contains_points(pts)
    return inside.reshape(grid.shape)


def box_mask(grid: Grid, lower, upper) -> np.ndarray:
    """Boolean mask (grid.shape) of the points with ``lower[a] <= x_a <= upper[a]`` on every axis.

    Bounds are in the length unit, one per axis; ``-inf``/``inf`` leave a side open.
    """
    _check_grid(grid)
    out = []
    for what, val in (("lower", lower), ("upper", upper)):
        try:
            b = np.asarray(val, dtype=float).ravel()
        except (TypeError, ValueError):
            raise InputError(f"box {what}: expected {grid.ndim} numbers, got {val!r}") from None
        if b.size != grid.ndim or np.any(np.isnan(b)):
            raise InputError(f"box {what}: expected {grid.ndim} numbers, got {val!r}")
        out.append(b)
    lo, hi = out
    if np.any(hi < lo):
        raise InputError(f"box: upper {hi.tolist()} must not be below lower {lo.tolist()}")
    mask = np.ones(grid.shape, dtype=bool)
    for a, x in enumerate(grid.mesh_sparse()):
        mask &= (x >= lo[a]) & (x <= hi[a])
    return mask


# --- bound or not -----------------------------------------------------------------------------

#: share of a state's probability within :data:`WALL_BAND` of the hard walls above which it is held by
#: the walls rather than bound by the potential (common practice, our choice): the ground state of a
#: 1D hard-wall box has 1.3 % of its probability in the outer tenth at each end together (2.6 % in 2D,
#: from the integral of 2 sin^2(pi x) over [0, 0.1] at both ends), a bound state's tail there is
#: exponentially small (the loosely bound levels of the bundled lens dot, 28 meV below the wetting
#: layer's edge, have at most 1 %)
WALL_SHARE = 0.02
#: width of the band next to each hard wall, as a fraction of the axis length
WALL_BAND = 0.1

BOX_STATE = "box state (not bound)"
BOX_STATE_HINT = "enlarge the grid or deepen the confinement"


def wall_probability(grid: Grid, states, *, band: float = WALL_BAND) -> np.ndarray:
    """Share of each state's probability on the points within ``band`` (a fraction of the axis
    length) of a hard wall, shape (k,); 0 when every axis is periodic."""
    rho, norm = _densities(grid, states)
    near = np.zeros(grid.shape, dtype=bool)
    for a, x in enumerate(grid.mesh_sparse()):
        if grid.periodic[a]:
            continue
        lo, hi = grid.lower[a], grid.upper[a]
        width = band * (hi - lo)
        near |= (x - lo <= width) | (hi - x <= width)
    return (rho.reshape(rho.shape[0], -1)[:, near.ravel()].sum(axis=1)) / norm
