"""Lowest eigenpairs of a grid Hamiltonian, with no member of a multiplet missed.

Method: Chebyshev-filtered subspace iteration (Y. Zhou, Y. Saad, M. L. Tiago,
J. R. Chelikowsky, J. Comput. Phys. 219, 172 (2006)) on a block of k wanted
vectors plus guard vectors, with

* SVQB orthonormalisation (A. Stathopoulos, K. Wu, SIAM J. Sci. Comput. 23,
  2165 (2002)), applied twice;
* Rayleigh-Ritz after every filter pass and locking of converged vectors;
* a filter degree per vector, chosen from its residual and its distance to
  the filter's cut;
* a first cut from a Weyl-law estimate of the m-th level;
* a degeneracy-aware stop: the wanted set is extended while the next Ritz
  value lies within the degeneracy tolerance of the last wanted one, and the
  block grows when a multiplet reaches its end.

A block method finds every copy of an exactly degenerate level as long as the
block is larger than the multiplet, which a single-vector Krylov method does
not guarantee.

Vectors are stored as rows, ``(m, N)``; states are returned shaped like the
grid, normalised so that ``sum |psi|^2 dV = 1``.
"""
from __future__ import annotations

import functools
import math
import time
from collections.abc import Callable
from dataclasses import dataclass, field, replace

import numpy as np

from .errors import Cancelled, InputError, NotConverged
from .grid import Grid
from .hamiltonian import Hamiltonian
from .resources import check_memory

__all__ = ["Spectrum", "lowest_states", "group_levels", "weyl_level_estimate", "solver_memory_bytes",
           "DEFAULT_DEGENERACY_TOLERANCE", "energy_scale"]

_DEBUG = False
#: levels closer than this, relative to the energy scale, count as one multiplet (default)
DEFAULT_DEGENERACY_TOLERANCE = 1e-6
#: highest filter degree of one pass
_MAX_DEGREE = 120
#: a started solve widens its first Rayleigh-Ritz with the residuals of the wanted vectors whose
#: residual exceeds this many tolerances
_WIDEN_FACTOR = 100.0
ProgressFn = Callable[[str, float], None] | None


class _FilterStopped(Exception):
    """should_stop() returned True inside a filter pass (turned into Cancelled with a partial result)."""

StopFn = Callable[[], bool] | None


def group_levels(energies, tolerance: float) -> tuple:
    """Group ascending energies into multiplets: consecutive levels closer than ``tolerance`` (absolute)."""
    groups, current = [], []
    for i, e in enumerate(np.asarray(energies, dtype=float)):
        if current and e - energies[current[-1]] > tolerance:
            groups.append(tuple(current))
            current = []
        current.append(i)
    if current:
        groups.append(tuple(current))
    return tuple(groups)


def energy_scale(energies) -> float:
    """The energy scale that tolerances are relative to, for ascending levels:
    ``max(|E_0|, |E_last|, E_last - E_0)``."""
    e = np.asarray(energies, dtype=float)
    if e.size == 0:
        return 1.0
    return max(float(np.abs(e).max()), float(e[-1] - e[0]), 1e-300)


@dataclass(frozen=True, eq=False)
class Spectrum:
    """Result of a solve. Energies in the energy unit, states indexed ``[level, x, y(, z)]``."""

    energies: np.ndarray
    states: np.ndarray
    residuals: np.ndarray          # ||H psi - E psi|| for unit-norm vectors, energy unit
    grid: Grid
    iterations: int
    applications: int              # number of single-vector H applications
    wall_time: float               # seconds
    converged: bool
    requested: int
    tolerance: float
    degeneracy_tolerance: float    # absolute, energy unit
    multiplet_cut: bool            # True if the highest returned level may belong to a cut multiplet
    scheme: str = ""
    method: str = "chebyshev"
    notes: tuple = ()
    extra: dict = field(default_factory=dict)
    guard_states: np.ndarray | None = None   # Ritz vectors beyond the returned ones, for warm starts

    @property
    def groups(self) -> tuple:
        """Degenerate multiplets (tuples of level indices) at ``degeneracy_tolerance``."""
        return group_levels(self.energies, self.degeneracy_tolerance)

    @property
    def count(self) -> int:
        return int(self.energies.size)

    def block(self) -> np.ndarray:
        """All vectors of the final block (returned states then guards), for a warm start."""
        if self.guard_states is None or len(self.guard_states) == 0:
            return self.states
        return np.concatenate([self.states, self.guard_states])

    def with_notes(self, *notes: str, **changes) -> Spectrum:
        return replace(self, notes=self.notes + tuple(notes), **changes)


#: bytes of the three-term buffers of one filter chunk (on small grids the chunk then stays in cache)
_CHUNK_BYTES = 8 << 20
#: bytes of the temporary of a column-chunked product (in-place rotations, Gram matrices); a temporary
#: that stays in cache made a 30-row rotation at 64^3 1.5x faster than 8 MiB ones (measured)
_COLUMN_BYTES = 2 << 20


def _chunk_rows(n_points: int, itemsize: int) -> int:
    """Rows filtered together: as many as fit ``_CHUNK_BYTES`` in three buffers, between 2 and 8."""
    return int(min(8, max(2, _CHUNK_BYTES // max(3 * n_points * itemsize, 1))))


def solver_memory_bytes(n_points: int, block: int, complex_: bool) -> int:
    """Memory the Chebyshev solver allocates: the block, H applied to it (Rayleigh-Ritz), two
    filter-chunk buffers, column-chunk temporaries and small matrices."""
    item = 16 if complex_ else 8
    chunk = _chunk_rows(n_points, item)
    return int((2 * block + 2 * chunk) * n_points * item + 2 * _COLUMN_BYTES + 8 * block * block * item)


def weyl_level_estimate(h: Hamiltonian, count: float) -> float:
    """Energy below which a Weyl (Thomas-Fermi phase-space) estimate holds ``count`` states.

    N(E) = sum_cells dV * omega_d / (2 pi)^d * prod_a sqrt((E - V) / c_a), c_a = hbar^2/2m_a.
    """
    g = h.grid
    d = g.ndim
    omega = {1: 2.0, 2: math.pi, 3: 4.0 * math.pi / 3.0}[d]
    pref = g.volume_element * omega / (2 * math.pi) ** d / math.prod(math.sqrt(c) for c in h.prefactors)
    v = np.sort(h.potential.ravel())
    lo, hi = h.bounds()

    def n_of(e):
        k = v[v < e]
        return pref * float(np.sum((e - k) ** (d / 2.0)))

    a, b = lo, hi
    if n_of(b) < count:
        return b
    for _ in range(100):
        mid = 0.5 * (a + b)
        if n_of(mid) < count:
            a = mid
        else:
            b = mid
        if b - a <= 1e-9 * max(abs(a), abs(b), 1e-300):
            break
    return b


# --- linear algebra on row blocks -----------------------------------------------------------

def _column_chunk(rows: int, itemsize: int) -> int:
    return max(1024, _COLUMN_BYTES // max(rows * itemsize, 1))


def _dot(a, b):
    """Gram-type product G_ij = <a_i, b_j> for row blocks (conjugates in column chunks: no block copy).

    Block products stay on one thread with one-thread BLAS: splitting them by columns over a second
    Python thread made 2D 256^2 solves 5-10 % slower (numba's OpenMP threads spin after each kernel
    and compete for the second core), and a BLAS thread pool 1.3-2x slower."""
    if not np.iscomplexobj(a):
        return a @ b.T
    step = _column_chunk(len(a), a.itemsize)
    g = np.zeros((len(a), len(b)), dtype=np.result_type(a, b))
    for lo in range(0, a.shape[1], step):
        g += np.conj(a[:, lo:lo + step]) @ b[:, lo:lo + step].T
    return g


def _gram_and_cross(a: np.ndarray, b: np.ndarray) -> tuple:
    """(a a^T, a b^T) for real row blocks in one pass over ``a``: column chunks small enough to stay
    in cache between the two products."""
    step = _column_chunk(len(a) + len(b), a.itemsize)
    g = np.zeros((len(a), len(a)))
    c = np.zeros((len(a), len(b)))
    for lo in range(0, a.shape[1], step):
        ac = a[:, lo:lo + step]
        g += ac @ ac.T
        c += ac @ b[:, lo:lo + step].T
    return g, c


def _rotate(y: np.ndarray, t: np.ndarray) -> None:
    """y[:r] = t @ y in place for a small (r, len(y)) matrix t, r <= len(y), in column chunks."""
    r = t.shape[0]
    step = _column_chunk(len(y), y.itemsize)
    t = np.asarray(t, dtype=np.result_type(t, y))
    for lo in range(0, y.shape[1], step):
        y[:r, lo:lo + step] = t @ y[:, lo:lo + step]


def _combine(out: np.ndarray, ta: np.ndarray, a: np.ndarray, tb: np.ndarray, b: np.ndarray) -> None:
    """out = ta @ a + tb @ b in place (``out`` may be ``a``), in column chunks with one buffer."""
    step = _column_chunk(len(a) + len(b), a.itemsize)
    buf = np.empty((len(out), min(step, a.shape[1])), dtype=np.result_type(ta, tb, a, b))
    for lo in range(0, a.shape[1], step):
        hi = min(lo + step, a.shape[1])
        np.matmul(tb, b[:, lo:hi], out=buf[:, : hi - lo])
        buf[:, : hi - lo] += ta @ a[:, lo:hi]
        out[:, lo:hi] = buf[:, : hi - lo]


def _subtract_projection(y: np.ndarray, c: np.ndarray, locked: np.ndarray) -> None:
    """y_j -= sum_k c_kj locked_k in place (c_kj = <locked_k, y_j>), in column chunks (no big temporaries)."""
    step = _column_chunk(max(len(y), len(locked)), y.itemsize)
    ct = np.ascontiguousarray(c.T)
    for lo in range(0, y.shape[1], step):
        y[:, lo:lo + step] -= ct @ locked[:, lo:lo + step]


def _scaled_gram(g: np.ndarray) -> tuple:
    """(scale, D g D, clean) for a Gram matrix g, D = diag(scale) normalising the rows; ``clean``
    when the normalised rows are orthonormal to 1e-13."""
    scale = 1.0 / np.sqrt(np.maximum(np.real(np.diag(g)), 1e-300))
    gs = scale[:, None] * g * scale[None, :]
    return scale, gs, bool(np.abs(gs - np.eye(len(g))).max() < 1e-13)


def _orthonormalize(y: np.ndarray, rng, locked: np.ndarray | None = None,
                    joined: np.ndarray | None = None) -> np.ndarray:
    """Orthonormalise the rows of ``y`` in place against ``locked`` and each other (SVQB, repeated until clean).

    Against ``locked`` this is classical Gram-Schmidt twice: a first pass removes the large
    components a filter leaves along the locked rows, and the second is fused with the Gram
    matrix of ``y`` when ``joined`` (the rows of ``locked`` followed by those of ``y``, one
    contiguous view) is given: one product ``joined @ y^H`` gives both, and the Gram matrix of
    the projected rows is ``G - C^H C`` (the locked rows are orthonormal; C is at rounding level
    by then, so nothing cancels).  After an SVQB rotation one projection pass suffices.
    Numerically dependent directions are replaced by fresh random vectors, so the block keeps
    its number of rows.  Works in column chunks: no block-sized temporaries.
    """
    want = len(y)
    nl = 0 if locked is None else len(locked)
    first = True
    for _ in range(8):
        if nl:
            if first:
                _subtract_projection(y, _dot(locked, y), locked)
            if joined is not None:
                both = _dot(joined, y)
                c, g = both[:nl], both[nl:]
            else:
                c, g = _dot(locked, y), _dot(y, y)
            _subtract_projection(y, c, locked)
            g = g - np.conj(c.T) @ c
        else:
            g = _dot(y, y)
        first = False
        scale, gs, clean = _scaled_gram(g)
        if clean:
            y *= scale[:, None]
            return y
        w, u = np.linalg.eigh(gs)
        keep = w > 1e-13 * max(w.max(), 1e-300)
        r = int(keep.sum())
        m = scale[:, None] * u[:, keep] / np.sqrt(w[keep])[None, :]
        _rotate(y, m.T)
        for i in range(r, want):
            y[i] = _random_block(rng, 1, y.shape[1], y.dtype)[0]
            first = True                                 # a fresh random row has large locked components
    raise NotConverged("could not orthonormalise the search block")


# --- coarse-grid start ------------------------------------------------------------------------

def _coarse_points(n: int, periodic: bool) -> int:
    return n // 2 if periodic else (n + 1) // 2 - 1


def _linear_1d(x_from: np.ndarray, x_to: np.ndarray, period: float | None, walls: tuple | None) -> np.ndarray:
    """Dense matrix of linear interpolation from points ``x_from`` to ``x_to`` (zero at hard walls if given)."""
    mat = np.zeros((x_to.size, x_from.size))
    if period is not None:
        xs = np.concatenate([x_from, [x_from[0] + period]])
        idx = np.concatenate([np.arange(x_from.size), [0]])
    elif walls is not None:
        xs = np.concatenate([[walls[0]], x_from, [walls[1]]])
        idx = np.concatenate([[-1], np.arange(x_from.size), [-1]])
    else:
        xs, idx = x_from, np.arange(x_from.size)
    for i, x in enumerate(x_to):
        if period is not None:
            x = xs[0] + (x - xs[0]) % period
        j = int(np.clip(np.searchsorted(xs, x) - 1, 0, xs.size - 2))
        w = (x - xs[j]) / (xs[j + 1] - xs[j])
        w = min(max(w, 0.0), 1.0)
        for col, weight in ((idx[j], 1.0 - w), (idx[j + 1], w)):
            if col >= 0:
                mat[i, col] += weight
    return mat


def _sine_prolongation(n_fine: int, n_coarse: int) -> np.ndarray:
    """Interpolation by the box's sine modes 1..n_coarse (exact for them), interior nodes on both grids."""
    modes = np.arange(1, n_coarse + 1)
    sf = np.sin(np.pi * np.outer(np.arange(1, n_fine + 1) / (n_fine + 1), modes))
    sc = np.sin(np.pi * np.outer(np.arange(1, n_coarse + 1) / (n_coarse + 1), modes))
    return sf @ (2.0 / (n_coarse + 1) * sc.T)


def _apply_axis(mat: np.ndarray, x: np.ndarray, axis: int) -> np.ndarray:
    """Contract ``mat`` (n_out x n_in) with ``x`` along ``axis``."""
    moved = np.moveaxis(x, axis, -1)
    out = moved @ mat.T
    return np.ascontiguousarray(np.moveaxis(out, -1, axis))


def _coarse_start(h: Hamiltonian, k: int, guard, tol, deg, should_stop, progress) -> np.ndarray | None:
    from .hamiltonian import rebuild_on_grid
    g = h.grid
    pts = [_coarse_points(n, per) for n, per in zip(g.shape, g.periodic)]
    gc = Grid(g.lower, g.upper, pts, g.boundary)
    restrict, prolong = [], []
    for a in range(g.ndim):
        xf, xc = g.axes[a], gc.axes[a]
        period = (g.upper[a] - g.lower[a]) if g.periodic[a] else None
        restrict.append(_linear_1d(xf, xc, period, None))
        if g.periodic[a]:
            prolong.append(_linear_1d(xc, xf, period, None))
        else:
            prolong.append(_sine_prolongation(g.shape[a], pts[a]))
    vc = h.potential
    for a in range(g.ndim):
        vc = _apply_axis(restrict[a], vc, a)
    hc = rebuild_on_grid(h, gc, vc)
    sub = None if progress is None else (lambda stage, f: progress("coarse grid", 0.3 * f))
    coarse = lowest_states(hc, k, tolerance=max(tol, 1e-5), guard=guard, should_stop=should_stop,
                           degeneracy_tolerance=deg, progress=sub, check_memory_first=False)
    return coarse.block(), prolong


def _prolong(row: np.ndarray, prolong: list) -> np.ndarray:
    """One coarse-grid vector interpolated to the fine grid (axis by axis)."""
    for a, mat in enumerate(prolong):
        row = _apply_axis(mat, row, a)
    return row


def _random_block(rng, m, n, dtype):
    x = rng.standard_normal((m, n))
    if np.issubdtype(dtype, np.complexfloating):
        x = x + 1j * rng.standard_normal((m, n))
    return x.astype(dtype, copy=False)


class _Operator:
    """Row-block view of a Hamiltonian that counts applications."""

    def __init__(self, h: Hamiltonian):
        self.h = h
        self.shape = h.grid.shape
        self.applications = 0

    def step(self, x, out, alpha, shift, beta, z):
        m = x.shape[0]
        self.applications += m
        sh = (m,) + self.shape
        self.h.step(x.reshape(sh), out.reshape(sh), alpha=alpha, shift=shift, beta=beta, z=z.reshape(sh))

    def apply(self, x, out):
        self.step(x, out, 1.0, 0.0, 0.0, x)


def _dense_solve(h: Hamiltonian, k: int, t0: float, tol: float, deg_rel: float, scheme: str) -> Spectrum:
    a = h.to_sparse().toarray()
    w, v = np.linalg.eigh(a)
    scale = energy_scale(w[:k])
    deg_abs = deg_rel * scale
    kk = k
    while kk < len(w) and w[kk] - w[kk - 1] <= deg_abs:
        kk += 1
    vec = v[:, :kk].T
    res = np.linalg.norm(a @ vec.T - vec.T * w[:kk], axis=0)
    states = vec.reshape((kk,) + h.grid.shape) / math.sqrt(h.grid.volume_element)
    return Spectrum(energies=w[:kk].copy(), states=states, residuals=res, grid=h.grid, iterations=1,
                    applications=0, wall_time=time.perf_counter() - t0, converged=True, requested=k,
                    tolerance=tol, degeneracy_tolerance=deg_abs, multiplet_cut=False, scheme=scheme,
                    method="dense", notes=("small problem: solved densely (numpy.linalg.eigh)",))


#: BLAS threads during a solve.  The block products here are tall and skinny (memory-bound), so a
#: second BLAS thread gains little; but BLAS worker threads that spin after a call compete with the
#: compiled kernel's threads, and on a busy 2-core machine a product whose thread was descheduled
#: was measured 10-100x slower.  One thread avoids both.  None leaves BLAS as configured.
_BLAS_THREADS: int | None = 1


def _residual_norms(q: np.ndarray, hq: np.ndarray, theta: np.ndarray) -> np.ndarray:
    """hq_i -= theta_i q_i in place for row blocks that hold H q; returns the residual norms."""
    from .kernels import residual_norms
    return residual_norms(q, hq, theta)


def _row_threads() -> int:
    """Threads of the compiled kernels (numba's current setting)."""
    import numba
    return int(numba.get_num_threads())


def _blas_threads_limited(solve):
    """Run ``solve`` with ``_BLAS_THREADS`` BLAS threads (threadpoolctl), keeping its signature."""
    @functools.wraps(solve)
    def limited(*args, **kwargs):
        if _BLAS_THREADS is None:
            return solve(*args, **kwargs)
        from threadpoolctl import threadpool_limits
        with threadpool_limits(_BLAS_THREADS, user_api="blas"):
            return solve(*args, **kwargs)
    return limited


@_blas_threads_limited
def lowest_states(h: Hamiltonian, k: int, *, tolerance: float = 1e-8, guard: int | None = None,
                  start: np.ndarray | None = None, progress: ProgressFn = None,
                  should_stop: StopFn = None, degeneracy_tolerance: float = DEFAULT_DEGENERACY_TOLERANCE,
                  max_iterations: int = 300, dense_limit: int = 1200, seed: int = 12345,
                  check_memory_first: bool = True, coarse_start: bool = True,
                  widen: bool = True) -> Spectrum:
    """The ``k`` lowest eigenpairs of ``h`` (more if the k-th level's multiplet continues).

    Parameters
    ----------
    h : the Hamiltonian.
    k : number of wanted states (>= 1).
    tolerance : residual tolerance relative to the energy scale
        ``max(|E_0|, |E_{k-1}|, E_{k-1} - E_0)``; a converged eigenvalue is
        accurate to about ``tolerance**2 * scale**2 / gap`` (and never worse
        than ``tolerance * scale``).
    guard : extra vectors in the block (default about half of k, at least 4).
    start : optional starting vectors (rows, grid-shaped), e.g. ``Spectrum.block()``
        of a previous solve (warm start).
    progress : ``progress(stage, fraction)`` callback.
    should_stop : returns True to cancel; the solve then raises :class:`Cancelled`
        carrying the partial result.
    degeneracy_tolerance : levels closer than this (relative to the energy scale)
        count as one multiplet; a multiplet is never cut at the k-th level.
    dense_limit : problems with at most this many unknowns are solved densely.
    coarse_start : without ``start``, large problems first solve on a grid half as fine and
        interpolate (sine modes for hard walls), which cuts the work of a cold solve.
    widen : a started solve (``start``, or the coarse-grid start) first widens its Rayleigh-Ritz
        with the residuals of its poorly converged wanted vectors (one Davidson step).
    """
    t0 = time.perf_counter()
    n = h.size
    if not isinstance(k, (int, np.integer)) or isinstance(k, bool) or k < 1:
        raise InputError(f"number of states must be a positive integer, got {k!r}")
    if k > n:
        raise InputError(f"asked for {k} states, but the grid has only {n} points")
    tol = float(tolerance)
    if not (0 < tol < 1):
        raise InputError(f"tolerance must be between 0 and 1, got {tolerance!r}")
    scheme = h.scheme
    if n <= dense_limit or k > n // 3:
        if n > 20000:
            raise InputError(f"asked for {k} states of a {n}-point grid; that many states need a dense "
                             f"solve that does not fit. Ask for fewer states (at most {n // 3}).")
        return _dense_solve(h, k, t0, tol, degeneracy_tolerance, scheme)

    rng = np.random.default_rng(seed)
    dtype = h.dtype
    if guard is None:
        guard = max(4, int(math.ceil(0.5 * k)))
    m = min(k + int(guard), n // 2)
    if check_memory_first:
        check_memory(solver_memory_bytes(n, m + 8, dtype == np.complex128), what="the eigensolver's block")
    op = _Operator(h)
    lower, upper = h.bounds()

    # --- starting block ------------------------------------------------------------------
    coarse_note = None
    prolong = None
    if (start is None and coarse_start and n >= 30000
            and all(_coarse_points(nn, per) >= 16 for nn, per in zip(h.grid.shape, h.grid.periodic))):
        start, prolong = _coarse_start(h, k, guard, tol, degeneracy_tolerance, should_stop, progress)
        coarse_note = "started from a solve on a grid half as fine"
    blk = np.empty((m, n), dtype=dtype)
    if start is not None:
        st = np.asarray(start)
        if prolong is None and st.shape[1:] != h.grid.shape and st.shape != h.grid.shape:
            raise InputError(f"start vectors have shape {st.shape}, expected (m, {h.grid.shape})")
        if st.ndim == h.grid.ndim:
            st = st[None]
        # fill the block row by row (no block-sized temporaries: peak memory matters on large grids)
        if prolong is None and st.dtype == dtype:
            rows = min(len(st), m)        # one copy; a row of zeros is replaced when orthonormalised
            blk[:rows] = st.reshape(len(st), -1)[:rows]
        else:                             # interpolated, or complex parts into a real block: row by row
            rows = 0
            parts = ((lambda r: (r.real, r.imag)) if (np.iscomplexobj(st) and dtype == np.float64)
                     else (lambda r: (r,)))
            for row in st:
                if prolong is not None:
                    row = _prolong(row, prolong)
                for part in parts(row.reshape(-1)):
                    if rows < m and np.any(part):
                        blk[rows] = part
                        rows += 1
        for i in range(rows, m):
            blk[i] = _random_block(rng, 1, n, dtype)[0]
        del st, start
        warm = True
        # a caller's start (a previous solve's block) is usually orthonormal already; a prolonged
        # coarse-grid block never is
        fused_check = prolong is None
    else:
        if np.iscomplexobj(blk):
            for i in range(m):
                blk[i] = _random_block(rng, 1, n, dtype)[0]
        else:
            rng.standard_normal(out=blk)
        warm = False
        fused_check = False

    # work arrays: H applied to the block (Rayleigh-Ritz) and two buffers of the chunked filter
    chunk = _chunk_rows(n, blk.itemsize)
    hq_buf = np.empty((m, n), dtype=dtype)
    fbuf = [np.empty((chunk, n), dtype=dtype) for _ in range(2)]

    def orthonormalize_and_rr(count_locked):
        """Orthonormalise the active rows of blk (against the locked ones) in place, then Rayleigh-Ritz
        on them; the Ritz vectors replace them. Returns Ritz values and residual norms."""
        nonlocal fused_check
        s = None
        if count_locked == 0 and fused_check and not np.iscomplexobj(blk):
            # a caller's start block is usually orthonormal already (a previous solve's): apply H first
            # and take the Gram matrix and Q H Q^T in one pass over Q; only if Q is not orthonormal,
            # start over
            fused_check = False
            q, hq = blk[:m], hq_buf[:m]
            op.apply(q, hq)
            g, s = _gram_and_cross(q, hq)
            scale, _, clean = _scaled_gram(g)
            if clean:
                q *= scale[:, None]
                s = scale[:, None] * s * scale[None, :]
            else:
                s = None
        if s is None:
            q = _orthonormalize(blk[count_locked:m], rng, locked=blk[:count_locked], joined=blk[:m])
            hq = hq_buf[:len(q)]
            op.apply(q, hq)
            s = _dot(q, hq)
        s = 0.5 * (s + np.conj(s.T))
        theta, w = np.linalg.eigh(s)
        wt = np.ascontiguousarray(w.T)
        _rotate(q, wt)                               # Ritz vectors
        op.apply(q, hq)                              # H applied to them: cheaper than a second rotation
        return theta, _residual_norms(q, hq, theta)

    def widen_with_residuals(theta, res):
        """Rayleigh-Ritz on the block plus the residuals of its poorly converged wanted vectors.

        After a start from nearby vectors (a warm start, or a coarse-grid solve) the error of a
        wanted vector sits mostly in a few eigenvectors just above the block, where the filter
        damps slowest; the residual points at them.  One Rayleigh-Ritz step on the block widened
        by those residuals (a Davidson step without preconditioner: E. R. Davidson, J. Comput.
        Phys. 17, 87 (1975)) keeps the ``m`` lowest Ritz vectors; by the Courant-Fischer min-max
        principle none of their Ritz values rises.  Returns Ritz values, residual norms and the
        number of residuals used.

        Expects ``hq_buf[:m]`` to hold the residuals left by :func:`orthonormalize_and_rr` on the
        whole block (nothing locked).  The residuals R (normalised) and H R live in ``hq_buf``,
        so nothing block-sized is allocated; at most m // 2 residuals (the largest) are used.  The
        residuals are not orthonormalised: Rayleigh-Ritz solves the generalised problem
        A c = theta B c on [Q; R], with B the Gram matrix, through B^(-1/2) (as in SVQB).
        """
        want = min(k, m)
        scale = energy_scale(theta[:want])
        bad = np.nonzero(res[:want] > _WIDEN_FACTOR * tol * scale)[0]
        if bad.size == 0:
            return theta, res, 0
        bad = np.sort(bad[np.argsort(res[bad])[::-1][: m // 2]])
        pr = len(bad)
        rr = hq_buf[: 2 * pr]
        for j, i in enumerate(bad):                      # ascending: row i >= j, nothing overwritten early
            rr[j] = hq_buf[i] / res[i]
        op.apply(rr[:pr], rr[pr:])
        q = blk[:m]
        qr = _dot(q, rr)                                 # [<q, r>  <q, H r>]
        rrr = _dot(rr[:pr], rr)                          # [<r, r>  <r, H r>]
        dt = np.result_type(qr, theta)
        gram = np.eye(m + pr, dtype=dt)
        gram[:m, m:] = qr[:, :pr]
        gram[m:, m:] = rrr[:, :pr]
        gram[m:, :m] = np.conj(gram[:m, m:].T)
        amat = np.zeros((m + pr, m + pr), dtype=dt)
        amat[:m, :m] = np.diag(theta)
        amat[:m, m:] = qr[:, pr:]
        amat[m:, m:] = rrr[:, pr:]
        amat[m:, :m] = np.conj(amat[:m, m:].T)
        gram = 0.5 * (gram + np.conj(gram.T))
        amat = 0.5 * (amat + np.conj(amat.T))
        w, u = np.linalg.eigh(gram)
        keep = w > 1e-10 * w.max()
        if int(keep.sum()) <= m:
            return theta, res, 0                         # residuals dependent on the block: nothing to add
        mm = u[:, keep] / np.sqrt(w[keep])[None, :]
        theta2, v = np.linalg.eigh(np.conj(mm.T) @ amat @ mm)
        coef = mm @ v[:, :m]                             # columns: the m lowest Ritz vectors in [Q; R]
        cq = np.ascontiguousarray(coef[:m].T)
        cr = np.ascontiguousarray(coef[m:].T)
        _combine(q, cq, q, cr, rr[:pr])
        if _DEBUG:
            print(f"widen: {pr} residuals, cond(B) {w.max() / w[keep].min():.2e}")
        hq = hq_buf[:m]
        theta2 = theta2[:m].copy()

        def residuals(rows):
            op.apply(q[rows], hq[rows])
            return _residual_norms(q[rows], hq[rows], theta2[rows])

        res2 = residuals(slice(0, m))
        if w.max() / w[keep].min() > 1e3:
            # B^(-1/2) amplified rounding to ~eps * cond(B) (Stathopoulos & Wu 2002).  The next
            # Rayleigh-Ritz orthonormalises every row again except those locked before it: the
            # leading converged ones.  A symmetric (Loewdin) orthonormalisation of just those moves
            # each least and, to first order, leaves its Ritz value as it was.  (Dropping the nearly
            # dependent residual directions instead cost the 2D 256^2 warm start a second pass.)
            scale2 = energy_scale(theta2[:want])
            lead = 0
            while lead < m - 1 and res2[lead] <= tol * scale2:
                lead += 1
            if lead:
                gq = _dot(q[:lead], q[:lead])
                gq = 0.5 * (gq + np.conj(gq.T))
                wq, uq = np.linalg.eigh(gq)
                _rotate(q[:lead], ((uq / np.sqrt(wq)[None, :]) @ np.conj(uq.T)).T)
                res2[:lead] = residuals(slice(0, lead))
        return theta2, res2, pr

    def chebyshev_filter(rows: np.ndarray, degree: np.ndarray, a0: float, c: float, e: float) -> None:
        """Filter each row of ``rows`` (in place) by its own degree.

        Scaled three-term recurrence of Zhou et al. (2006), Algorithm 4.1.  Where the Hamiltonian
        has a fused per-row kernel (1D/2D, real, nearest neighbour) each thread runs whole
        recurrences on its own rows, rows of similar degree side by side, with a cancel check
        between rounds.  Otherwise ``chunk`` rows at a time step together; the row itself serves
        as one of the three rotating buffers, so only two chunk-sized buffers exist.
        """
        sigma = e / (a0 - c)
        tau = 2.0 / sigma
        if h.row_filter:
            top = int(degree.max())
            alphas = np.zeros(top + 1)
            betas = np.zeros(top + 1)
            alphas[1] = sigma / e
            for step in range(2, top + 1):
                sigma_new = 1.0 / (tau - sigma)
                alphas[step] = 2.0 * sigma_new / e
                betas[step] = -sigma * sigma_new
                sigma = sigma_new
            width = max(1, min(_row_threads(), chunk))
            order = np.argsort(degree, kind="stable")
            for r0 in range(0, len(rows), width):
                if should_stop is not None and r0 and should_stop():
                    raise _FilterStopped
                take = np.full(width, -1, dtype=np.int64)
                take[: len(order[r0:r0 + width])] = order[r0:r0 + width]
                h.chebyshev_rows(rows, fbuf[0][:width], fbuf[1][:width], take, degree, alphas, betas, c)
            op.applications += int(np.sum(degree))
            return
        for r0 in range(0, len(rows), chunk):
            x = rows[r0:r0 + chunk]
            deg = degree[r0:r0 + chunk]
            q = len(x)
            bufs = [x, fbuf[0][:q], fbuf[1][:q]]
            sigma = e / (a0 - c)
            op.step(x, bufs[1], sigma / e, c, 0.0, x)
            for step in range(2, int(deg[-1]) + 1):
                s0 = int(np.searchsorted(deg, step))     # rows with degree >= step
                sigma_new = 1.0 / (tau - sigma)
                prev, cur, nxt_b = bufs[(step - 2) % 3], bufs[(step - 1) % 3], bufs[step % 3]
                op.step(cur[s0:], nxt_b[s0:], 2.0 * sigma_new / e, c, -sigma * sigma_new, prev[s0:])
                sigma = sigma_new
                if should_stop is not None and step % 8 == 0 and should_stop():
                    raise _FilterStopped
            for i, d in enumerate(deg):                   # row i finished at step d, in buffer d % 3
                if d % 3:
                    x[i] = bufs[d % 3][i]

    theta, res = orthonormalize_and_rr(0)
    widened = 0
    if warm and widen:
        theta, res, widened = widen_with_residuals(theta, res)
    nlock = 0
    locked_theta = np.empty(0)
    locked_res = np.empty(0)
    need = k
    # first cut: the Ritz values of a random block say nothing about the low spectrum, so use a
    # Weyl-law estimate of the level that holds ~1.3 m states (kept inside the spectrum's bounds)
    cut = theta[-1] if warm else min(max(weyl_level_estimate(h, 1.3 * m), lower + 1e-9 * (upper - lower)),
                                     theta[-1])
    iterations = 0
    notes = [coarse_note] if coarse_note else []

    def partial(converged=False, cut_flag=False):
        """The result from the current block (terminal: scales the block in place, no copy)."""
        all_theta = np.concatenate([locked_theta, theta])
        all_res = np.concatenate([locked_res, res])
        cnt = min(need, len(all_theta))
        blk[:m] *= 1.0 / math.sqrt(h.grid.volume_element)
        states = blk[:cnt].reshape((cnt,) + h.grid.shape)
        guards = blk[cnt:m].reshape((m - cnt,) + h.grid.shape)
        return Spectrum(energies=all_theta[:cnt].copy(), states=states, residuals=all_res[:cnt].copy(),
                        grid=h.grid, iterations=iterations, applications=op.applications,
                        wall_time=time.perf_counter() - t0, converged=converged, requested=k,
                        tolerance=tol, degeneracy_tolerance=deg_abs, multiplet_cut=cut_flag, scheme=scheme,
                        notes=tuple(notes), guard_states=guards,
                        extra={"widened_with_residuals": widened})

    deg_abs = 0.0
    while True:
        all_theta = np.concatenate([locked_theta, theta])
        scale = energy_scale(all_theta[:need])
        tol_abs = tol * scale
        deg_abs = degeneracy_tolerance * scale
        # the energy scale settles as the block converges: unlock vectors locked under a looser scale
        loose = np.nonzero(locked_res > tol_abs)[0]
        if loose.size:
            j = int(loose[0])
            theta = np.concatenate([locked_theta[j:], theta])
            res = np.concatenate([locked_res[j:], res])
            locked_theta, locked_res = locked_theta[:j], locked_res[:j]
            nlock = j
        extended = True
        while extended:
            extended = False
            # lock leading converged active vectors
            nconv_active = 0
            while nconv_active < len(theta) - 1 and res[nconv_active] <= tol_abs and nlock + nconv_active < need:
                nconv_active += 1
            if nconv_active:
                locked_theta = np.concatenate([locked_theta, theta[:nconv_active]])
                locked_res = np.concatenate([locked_res, res[:nconv_active]])
                theta, res = theta[nconv_active:], res[nconv_active:]
                nlock += nconv_active
            # extend the wanted set through a multiplet that reaches the k-th level (and lock its
            # next member at once if it has converged already)
            if nlock >= need:
                nxt = theta[0]
                if nxt - locked_theta[need - 1] <= deg_abs + res[0]:
                    if nxt - locked_theta[need - 1] <= deg_abs or res[0] > tol_abs:
                        need += 1
                        extended = True
        if nlock >= need:
            break
        # grow the block when the wanted set reaches its end, or when the filter's cut sits
        # inside the cluster of the hardest wanted level (a multiplet cut by the block)
        hard = need - 1 - nlock
        crowded = False
        if 0 <= hard < len(theta) - 1:
            spread = theta[-1] - min(all_theta.min(), theta[0])
            crowded = (theta[-1] - theta[hard]) < 0.02 * spread
        if need >= m - 2 or crowded:
            grow = max(4, need // 4)
            if m + grow > n // 2:
                if nlock >= need or need >= m - 2:
                    notes.append("the block cannot grow further; the highest multiplet may be cut")
                    return partial(converged=nlock >= need, cut_flag=True)
            else:
                m_new = m + grow
                hq_buf = None                      # release before the larger block is made
                blk = np.concatenate([blk[:m], _random_block(rng, grow, n, dtype)])
                hq_buf = np.empty((m_new, n), dtype=dtype)
                m = m_new
                notes.append(f"block enlarged to {m} vectors to complete a multiplet")
                theta, res = orthonormalize_and_rr(nlock)
                continue
        if progress is not None:
            progress("solving", min(0.99, nlock / max(need, 1)))
        if should_stop is not None and should_stop():
            raise Cancelled("solve cancelled", partial=partial())
        if iterations >= max_iterations:
            raise NotConverged(f"the eigensolver did not converge in {max_iterations} iterations "
                               f"({nlock} of {need} states converged)", partial=partial())
        iterations += 1

        # --- Chebyshev filter with a degree per vector -------------------------------------
        p = m - nlock
        a0 = min(lower, all_theta.min()) if not warm and iterations == 1 else all_theta.min()
        cut = max(cut, a0 + 1e-12 * max(abs(a0), 1.0))
        e = 0.5 * (upper - cut)
        c = 0.5 * (upper + cut)
        xt = np.abs((theta - c) / e)
        xt = np.maximum(xt, 1.0 + 1e-12)
        target = np.clip(res / np.maximum(tol_abs, 1e-300), 10.0, 1e6)
        degree = np.ceil(np.arccosh(target) / np.arccosh(xt)).astype(int)
        hardest = int(min(max(need - nlock, 1), p)) - 1
        dmax = int(np.clip(degree[: hardest + 1].max(), 4, _MAX_DEGREE))
        # keep the filter's dynamic range resolvable: the lowest component present in the block must not
        # outgrow the hardest wanted one by more than ~1e5, or SVQB drops the wanted directions as noise
        first_random = not warm and iterations == 1
        lowest_present = a0 if first_random else theta[0]
        hard_theta = weyl_level_estimate(h, need) if first_random else theta[hardest]
        span = (np.arccosh(max(abs((lowest_present - c) / e), 1.0 + 1e-12))
                - np.arccosh(max(abs((hard_theta - c) / e), 1.0 + 1e-12)))
        if span > 0:
            dmax = int(max(4, min(dmax, np.floor(np.log(1e5) / span))))
        degree = np.clip(degree, 2, dmax)
        degree[hardest:] = dmax
        degree = np.maximum.accumulate(degree)          # non-decreasing, so active rows form a suffix
        if _DEBUG:
            print(f"it {iterations}: nlock {nlock} need {need} p {p} cut {cut:.4g} upper {upper:.4g} "
                  f"res[:need] {np.array2string(res[:max(need - nlock, 1)], precision=1)} deg {degree.tolist()}")
        try:
            chebyshev_filter(blk[nlock:m], degree, a0, c, e)
        except _FilterStopped:
            # stopped inside the filter: Rayleigh-Ritz on the block as it stands is still a valid result
            theta, res = orthonormalize_and_rr(nlock)
            raise Cancelled("solve cancelled", partial=partial()) from None
        theta, res = orthonormalize_and_rr(nlock)
        cut = theta[-1]

    hq_buf = fbuf = None                           # release the work buffers before the result

    result = partial(converged=True)
    # normalise phases for readability: real states, largest component positive
    states = result.states
    if not np.iscomplexobj(states):
        flat = states.reshape(len(states), -1)
        for row in flat:                                 # row by row: no block-sized |psi| temporary
            if row[np.argmax(np.abs(row))] < 0:
                row *= -1.0
    order = np.argsort(result.energies, kind="stable")
    if np.any(order != np.arange(len(order))):
        result = replace(result, energies=result.energies[order], states=result.states[order],
                         residuals=result.residuals[order])
    if progress is not None:
        progress("solving", 1.0)
    return result
