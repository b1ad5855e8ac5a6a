"""Certified level counts: how many eigenvalues of H lie below a shift, by Sylvester's law of inertia.

If ``H - sigma I = P^T L D L^T P`` with ``L`` unit lower triangular and ``D`` (block) diagonal,
then ``H - sigma I`` and ``D`` have the same inertia (J. J. Sylvester, Phil. Mag. 4, 138 (1852)),
so the number of negative entries of ``D`` is the number of eigenvalues of ``H`` below ``sigma``.
The count does not depend on any eigensolver: comparing it with the number of states a solve
returned confirms that no level below the highest returned one was missed.

How the factorisation is obtained here (scipy has no sparse LDL^T):

* **Sparse, real symmetric H**: SuperLU (``scipy.sparse.linalg.splu``) in symmetric mode, with a
  minimum-degree ordering of ``A + A^T`` and diagonal pivoting only
  (``diag_pivot_thresh=0``, ``SymmetricMode=True``).  When the row permutation equals the column
  permutation, ``P A P^T = L U`` with ``U = D L^T``, so ``diag(U)`` is ``D``.  Without off-diagonal
  pivoting the factorisation can lose accuracy; every count is therefore checked by solving one
  random system with the factors and requiring the backward error to be far smaller than the
  distance from the shift to the nearest returned level (Weyl's inequality: a perturbation of
  norm e moves no eigenvalue by more than e, so it cannot change a count when no eigenvalue lies
  within e of the shift).
* **Complex Hermitian H** (a magnetic field): H = A + iB has the same eigenvalues as the real
  symmetric ``[[A, -B], [B, A]]``, each twice.  The real embedding is factorised and its count
  halved (an odd count is reported as a failure).  SuperLU's complex path was measured about
  100x slower here on the same pattern (2D 256^2: 105 s against about 2 s for the embedding).
* **Small problems** (a few hundred unknowns): a dense LDL^T with Bunch-Kaufman pivoting
  (``scipy.linalg.ldl``), counting the inertia of its 1x1 and 2x2 blocks.

Where the factor would not fit in memory (a conservative estimate of the fill, measured on this
kind of machine, see :func:`estimate_factorisation`), or the checks above fail, the count is
reported as not certified with the reason; nothing is guessed.
"""
from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np
import scipy.linalg as sla
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from .eigensolve import Spectrum
from .errors import InputError, WellscapeError
from .hamiltonian import Hamiltonian
from .kinetic import FD_COEFFICIENTS
from .pardiso_count import PardisoUnusable, pardiso_available, pardiso_inertia
from .resources import available_memory_bytes, format_bytes

__all__ = ["CountCertificate", "FactorEstimate", "InertiaCount", "CountUnavailable", "certify_count",
           "count_below", "estimate_factorisation", "choose_shift", "DENSE_LIMIT", "dense_factor_rate",
           "record_count"]

#: Problems with at most this many (real) unknowns are factorised densely (Bunch-Kaufman LDL^T).
DENSE_LIMIT = 300
#: With the spectral scheme (whole lines coupled, so the sparse factor is dense anyway), problems up
#: to this many real unknowns are factorised densely too: LAPACK's blocked LDL^T is then far faster
#: than SuperLU on a dense pattern (2D 40^2: 0.4 s on one thread against an estimated 4 s; 2D 64^2,
#: the bundled elliptical dot: 3.6 s on one thread, where SuperLU was estimated at 69 s).  Memory:
#: three dense copies, 600 MB at the limit, checked before factorising.
DENSE_SPECTRAL_LIMIT = 5000
#: floating-point rate assumed for the factorisation time estimates when it cannot be measured
#: (one thread; a 800 x 800 dense LDL^T measured 3.4-11e9 here, depending on the load)
_DENSE_FLOPS = 4e9
#: time of a banded sparse factorisation ~ _SPARSE_FLOP_FACTOR * nnz(L+U)^2 / N / rate, with the fill
#: model's nnz before its safety factor and the measured dense rate: fitted to the bundled lens dot
#: (3D 40x40x22, fd2: 3.96 s measured) and to 48^3 (about 1e-9 s per unit at ~5e9 flop/s); the factor
#: of SuperLU on a spectral (dense) pattern runs at the dense rate (2D 5376 and 6400 unknowns, 3D 24^3:
#: 5.8-7.1e9 flop/s against 5.5-5.7e9 for LAPACK's dense LDL^T in the same hour)
_SPARSE_FLOP_FACTOR = 3.6
_RATE: dict = {}
_CORRECTION: dict = {}     # "dense" / "sparse" -> measured / modelled time of the latest count here


def _kind(method: str) -> str:
    return "dense" if method.startswith("dense") else "pardiso" if "PARDISO" in method else "sparse"


def record_count(estimate: FactorEstimate, seconds: float) -> None:
    """Remember how long a count estimated as ``estimate`` really took on this machine: later estimates
    of the same kind of factorisation are scaled by that ratio (the load of a shared machine changes
    the rate by 2-5x within minutes; the latest count knows it best)."""
    if estimate is None or not (seconds > 0 and estimate.seconds > 0):
        return
    kind = _kind(estimate.method)
    modelled = estimate.seconds / _CORRECTION.get(kind, 1.0)
    _CORRECTION[kind] = float(seconds) / modelled

# Fill of SuperLU's L+U (MMD on A+A^T, symmetric mode) per row, measured on this kind of machine
# for second-order differences (stencil half-width 1) and fitted as c * (N / 4096)**e:
#   2D: 31, 40, 52 per row at 64^2, 128^2, 256^2;
#   3D: 149, 294, 480, 946 per row at 16^3, 24^3, 32^3, 48^3 (the fit gives 1076 at 48^3).
# Wider stencils scale the fill by about r^2 (measured r^1.85 for fd8 in 2D, r^2.07 for fd4 in 3D).
# The spectral scheme couples whole lines, so its factor is taken as dense.  The estimate is then
# multiplied by 1.5: it is used to refuse, so it must not be low.  At 64^3 it gives about 11 GiB
# where about 8 GB were measured.
_FILL_FIT = {1: (4.0, 0.0), 2: (31.0, 0.2), 3: (149.0, 0.6)}
_FILL_SAFETY = 1.5
_BYTES_PER_FACTOR_ENTRY = 16      # value, row index and SuperLU's supernodal bookkeeping (measured 9.5-16)

# MKL PARDISO (optional, core.pardiso_count) with its nested-dissection ordering, fill per row measured
# here for second-order differences and fitted as c * (N / 4096)**e: 2D 28.9, 35.9, 44.6 per row at
# 256^2, 512^2, 1024^2; 3D 102, 167, 291, 412 at 24^3, 32^3, 48^3, 64^3.  Fourth-order stencils
# (half-width 2) multiply the fill by 3.1-3.3 (taken as r**1.7); the real embedding of a complex
# Hamiltonian by 1.5-1.9 per row of the embedding (taken as 2).  Time: a fixed cost, a part linear in
# the rows (ordering and memory traffic, 2.6-3e-6 s per row in 2D) and the factor's flops,
# PARDISO_FLOP_FACTOR * fill_per_row^2 * rows / dense rate (1.43 at 64^3, 1.55 at 48^3, 3D fd2;
# 5.6 s measured at 64^3 against 182 s for SuperLU).  Memory: 8.3 bytes per factor entry at the
# measured peak (64^3: 1.1 GB resident), taken as 12 with the same safety factor as above.
_PARDISO_FILL_FIT = {1: (4.0, 0.0), 2: (18.6, 0.16), 3: (67.5, 0.436)}
_PARDISO_STENCIL_POWER = 1.7
_PARDISO_COMPLEX_FILL = 2.0
_PARDISO_FLOP_FACTOR = 1.6
_PARDISO_SECONDS_PER_ROW = 3e-6
_PARDISO_FIXED_SECONDS = 0.1
_PARDISO_BYTES_PER_ENTRY = 12
PARDISO_METHOD = "sparse LDL^T (MKL PARDISO, nested dissection)"
SUPERLU_METHOD = "sparse LDL^T (SuperLU, symmetric mode)"


class CountUnavailable(WellscapeError):
    """The eigenvalue count could not be obtained; ``reason`` says why in plain words."""

    def __init__(self, reason: str):
        super().__init__(reason)
        self.reason = reason


@dataclass(frozen=True)
class FactorEstimate:
    """A conservative estimate of what factorising ``H - sigma I`` costs."""

    unknowns: int          # rows of the matrix factorised (2N for a complex H: real embedding)
    nonzeros: int          # entries of L + U (estimated)
    bytes: int             # peak memory of the factorisation (estimated, bytes)
    seconds: float         # rough time on this machine (seconds)
    method: str            # "dense LDL^T" or "sparse LDL^T (SuperLU, symmetric mode)"


@dataclass(frozen=True)
class InertiaCount:
    """Number of eigenvalues below ``shift``, with how it was obtained."""

    count: int
    shift: float
    method: str
    seconds: float
    factor_nonzeros: int
    backward_error: float   # ||A x - b|| / (||A||_1 ||x||) for one random b, solved with the factors
    matrix_norm: float      # ||A||_1 of H - shift I (energy unit)


@dataclass(frozen=True)
class CountCertificate:
    """Outcome of an independent count of the levels below a shift.

    ``certified`` is True only when the count was obtained and equals ``expected`` (the number of
    states the solve returned).  ``count_below`` is None when no count could be made.  ``shift``
    is in the energy unit.  ``reason`` is one plain sentence for the user.
    """

    certified: bool
    count_below: int | None
    expected: int
    shift: float | None
    reason: str
    method: str = ""
    seconds: float = 0.0
    estimate: FactorEstimate | None = None

    @property
    def missing(self) -> int | None:
        """Levels below the shift that the solve did not return (negative: returned levels not found)."""
        return None if self.count_below is None else self.count_below - self.expected

    def describe(self, energy_unit: str = "") -> str:
        """The reason, with the energy unit after the shift (the reason itself gives bare numbers)."""
        if self.shift is None or not energy_unit:
            return self.reason
        shown = f"{self.shift:.6g}"
        return self.reason.replace(shown, f"{shown} {energy_unit}")

    @property
    def label(self) -> str:
        """Short mark for a level table: 'count verified', 'count NOT verified' or 'count not checked'."""
        if self.certified:
            return "count verified"
        if self.count_below is not None:
            return "count NOT verified"
        return "count not checked"


# --- cost estimate ----------------------------------------------------------------------------------

def use_pardiso() -> bool:
    """True when sparse counts go through MKL PARDISO (optional ``pypardiso`` installed and loading);
    otherwise SuperLU's symmetric mode is used."""
    return pardiso_available()


def _halfwidth(scheme: str) -> int | None:
    if scheme in FD_COEFFICIENTS:
        return len(FD_COEFFICIENTS[scheme]) - 1
    return None


def dense_factor_rate(n: int = 800) -> float:
    """Floating-point operations per second of a dense LDL^T on one BLAS thread on this machine
    (``n^3 / 3`` operations over the best of two timed factorisations of an ``n x n`` symmetric
    matrix), measured once per process; ``_DENSE_FLOPS`` if it cannot be measured."""
    if "dense" in _RATE:
        return _RATE["dense"]
    rate = _DENSE_FLOPS
    try:
        from threadpoolctl import threadpool_limits
        a = np.random.default_rng(0).standard_normal((n, n))
        a = a + a.T
        best = math.inf
        with threadpool_limits(limits=1, user_api="blas"):      # as the window's count process runs
            for _ in range(2):
                t0 = time.perf_counter()
                sla.ldl(a, lower=True, hermitian=True)
                best = min(best, time.perf_counter() - t0)
        if best > 0:
            rate = n**3 / 3.0 / best
    except (ImportError, np.linalg.LinAlgError, ValueError):
        pass
    _RATE["dense"] = float(rate)
    return _RATE["dense"]


def estimate_factorisation(h: Hamiltonian) -> FactorEstimate:
    """Conservative memory and rough time for factorising ``H - sigma I`` (see the module notes)."""
    n = int(h.size)
    rows = 2 * n if h.is_complex else n
    rate = dense_factor_rate()
    if rows <= DENSE_LIMIT or (_halfwidth(h.scheme) is None and rows <= DENSE_SPECTRAL_LIMIT):
        nnz = rows * rows
        return FactorEstimate(unknowns=rows, nonzeros=nnz, bytes=int(3 * 8 * nnz),
                              seconds=max(1e-3, rows**3 / 3.0 / rate * _CORRECTION.get("dense", 1.0)),
                              method="dense LDL^T (Bunch-Kaufman)")
    r = _halfwidth(h.scheme)
    d = h.grid.ndim
    if r is not None and use_pardiso():
        return _pardiso_estimate(rows, d, r, h.is_complex, rate)
    if r is None:
        per_row = float(n)
    else:
        c, e = _FILL_FIT[d]
        per_row = _FILL_SAFETY * c * (n / 4096.0) ** e * r**2
        per_row = min(per_row, float(n))
    nnz = per_row * n
    if h.is_complex:
        nnz *= 4.0          # twice the rows, about twice the entries per row (measured 3.9x)
    nnz = min(nnz, float(rows) * rows)
    matrix_bytes = 3 * 12 * (2 * r + 1 if r else sum(h.grid.shape)) * rows
    total = int(_BYTES_PER_FACTOR_ENTRY * nnz + matrix_bytes + 64 * rows)
    if r is None:                      # a dense factor: the dense rate
        seconds = float(rows) ** 3 / 3.0 / rate
    else:
        plain = nnz / _FILL_SAFETY     # the fill model's own value (the safety factor is for memory)
        seconds = _SPARSE_FLOP_FACTOR * plain * plain / rows / rate
    seconds *= _CORRECTION.get("sparse", 1.0)
    return FactorEstimate(unknowns=rows, nonzeros=int(nnz), bytes=total, seconds=float(seconds),
                          method=SUPERLU_METHOD)


def _pardiso_estimate(rows: int, ndim: int, halfwidth: int, complex_: bool, rate: float) -> FactorEstimate:
    """Fill, memory and time of a PARDISO factorisation of a finite-difference ``H - sigma I``."""
    c, e = _PARDISO_FILL_FIT[ndim]
    per_row = c * (rows / 4096.0) ** e * halfwidth ** _PARDISO_STENCIL_POWER
    if complex_:
        per_row *= _PARDISO_COMPLEX_FILL
    per_row = min(per_row, float(rows))
    nnz = per_row * rows       # the fit's own value: the time model uses it, the refusal the safe one
    seconds = (_PARDISO_FIXED_SECONDS + _PARDISO_SECONDS_PER_ROW * rows
               + _PARDISO_FLOP_FACTOR * per_row * per_row * rows / rate) * _CORRECTION.get("pardiso", 1.0)
    total = int(_FILL_SAFETY * _PARDISO_BYTES_PER_ENTRY * nnz + 3 * 12 * (2 * halfwidth + 1) * ndim * rows
                + 64 * rows)
    return FactorEstimate(unknowns=rows, nonzeros=int(_FILL_SAFETY * nnz), bytes=total, seconds=float(seconds),
                          method=PARDISO_METHOD)


# --- counting ---------------------------------------------------------------------------------------

def _real_embedding(a: sp.spmatrix) -> sp.csr_matrix:
    """[[Re A, -Im A], [Im A, Re A]]: real symmetric when A is Hermitian, same eigenvalues twice."""
    re = sp.csr_matrix(a.real)
    im = sp.csr_matrix(a.imag)
    return sp.bmat([[re, -im], [im, re]], format="csr")


def _dense_inertia(a: np.ndarray) -> tuple:
    """Negative count from a Bunch-Kaufman LDL^T (scipy.linalg.ldl); returns (count, factor)."""
    lu, d, perm = sla.ldl(a, lower=True, hermitian=True)
    n = d.shape[0]
    neg = 0
    i = 0
    while i < n:
        if i + 1 < n and d[i + 1, i] != 0:
            blk = d[i:i + 2, i:i + 2]
            det = float(np.real(blk[0, 0] * blk[1, 1] - blk[0, 1] * blk[1, 0]))
            tr = float(np.real(blk[0, 0] + blk[1, 1]))
            if det < 0:
                neg += 1
            elif det > 0 and tr < 0:
                neg += 2
            elif det == 0:
                raise CountUnavailable("the shift is an eigenvalue (a zero pivot block); the count is ambiguous")
            i += 2
        else:
            dv = float(np.real(d[i, i]))
            if dv == 0.0:
                raise CountUnavailable("the shift is an eigenvalue (a zero pivot); the count is ambiguous")
            neg += dv < 0
            i += 1
    return int(neg), (lu, d, perm)


def count_below(h, shift: float, *, max_memory_bytes: float | None = None,
                max_seconds: float | None = None, seed: int = 7) -> InertiaCount:
    """Number of eigenvalues of ``h`` below ``shift`` (energy unit), by Sylvester's law of inertia.

    ``h`` is a :class:`Hamiltonian` (or a scipy sparse / numpy Hermitian matrix).  Raises
    :class:`CountUnavailable` with the reason when the factor would not fit (``max_memory_bytes``,
    default 80% of the memory available now), would take longer than ``max_seconds`` (by the rough
    estimate; default no limit), or when the symmetric factorisation cannot be trusted.
    """
    t0 = time.perf_counter()
    shift = float(shift)
    if not math.isfinite(shift):
        raise InputError(f"the shift must be a finite energy, got {shift!r}")
    dense_limit = DENSE_LIMIT
    with_pardiso = use_pardiso()
    if isinstance(h, Hamiltonian):
        est = estimate_factorisation(h)
        with_pardiso = est.method == PARDISO_METHOD
        if est.method.startswith("dense"):
            dense_limit = max(dense_limit, est.unknowns)
        limit = 0.8 * available_memory_bytes() if max_memory_bytes is None else float(max_memory_bytes)
        if est.bytes > limit:
            raise CountUnavailable(f"the factorisation would need about {format_bytes(est.bytes)}, more than the "
                                   f"{format_bytes(limit)} allowed")
        if max_seconds is not None and est.seconds > max_seconds:
            raise CountUnavailable(f"the factorisation would take about {est.seconds:.0f} s, more than the "
                                   f"{max_seconds:.0f} s allowed")
        a = h.to_sparse()
    else:
        a = h
    n = a.shape[0]
    if a.shape != (n, n):
        raise InputError(f"expected a square matrix, got shape {a.shape}")
    complex_ = np.iscomplexobj(a) if not sp.issparse(a) else np.issubdtype(a.dtype, np.complexfloating)
    if sp.issparse(a):
        a = sp.csr_matrix(a)
        if complex_:
            a = _real_embedding(a)
        m = (a - shift * sp.identity(a.shape[0], format="csr")).tocsc()
    else:
        a = np.asarray(a)
        if complex_:
            a = _real_embedding(sp.csr_matrix(a)).toarray()
        m = a - shift * np.eye(a.shape[0])
    rows = m.shape[0]
    norm1 = float(abs(m).sum(axis=0).max()) if sp.issparse(m) else float(np.abs(m).sum(axis=0).max())
    rng = np.random.default_rng(seed)
    b = rng.standard_normal(rows)
    if rows <= dense_limit:
        dense = m.toarray() if sp.issparse(m) else m
        neg, (lu, d, perm) = _dense_inertia(dense)
        x = sla.solve(dense, b, assume_a="sym")
        r = dense @ x - b
        nnz = rows * rows
        method = "dense LDL^T (Bunch-Kaufman)"
    elif with_pardiso:
        try:
            neg, x, nnz = pardiso_inertia(m, b)
        except PardisoUnusable as exc:
            raise CountUnavailable(str(exc)) from None
        except MemoryError:
            raise CountUnavailable("the factorisation ran out of memory") from None
        r = m @ x - b
        method = PARDISO_METHOD
    else:
        m.sort_indices()
        try:
            fac = spla.splu(m, permc_spec="MMD_AT_PLUS_A", diag_pivot_thresh=0.0,
                            options=dict(SymmetricMode=True))
        except RuntimeError as exc:          # "Factor is exactly singular"
            raise CountUnavailable(f"the symmetric factorisation failed ({exc}); the shift may be an eigenvalue") \
                from None
        except MemoryError:
            raise CountUnavailable("the factorisation ran out of memory") from None
        if not np.array_equal(fac.perm_r, fac.perm_c):
            raise CountUnavailable("the factorisation had to pivot off the diagonal, so its pivots do not give "
                                   "the inertia")
        piv = fac.U.diagonal()
        if np.iscomplexobj(piv):
            piv = piv.real
        if np.any(piv == 0.0):
            raise CountUnavailable("a zero pivot: the shift may be an eigenvalue; the count is ambiguous")
        neg = int(np.count_nonzero(piv < 0.0))
        x = fac.solve(b)
        r = m @ x - b
        nnz = int(fac.L.nnz + fac.U.nnz)
        method = SUPERLU_METHOD
        del fac
    berr = float(np.linalg.norm(r) / max(norm1 * np.linalg.norm(x), 1e-300))
    if complex_:
        if neg % 2:
            raise CountUnavailable("the real embedding of the complex Hamiltonian gave an odd count; "
                                   "the factorisation is not accurate enough")
        neg //= 2
        method += ", real embedding of the complex Hamiltonian"
    return InertiaCount(count=int(neg), shift=shift, method=method, seconds=time.perf_counter() - t0,
                        factor_nonzeros=int(nnz), backward_error=berr, matrix_norm=norm1)


# --- certificates -----------------------------------------------------------------------------------

def _guard_ritz_values(h: Hamiltonian, spectrum: Spectrum) -> np.ndarray:
    """Rayleigh quotients of the spectrum's guard vectors (energy unit), ascending; empty if none."""
    g = spectrum.guard_states
    if g is None or len(g) == 0 or g.shape[1:] != h.grid.shape:
        return np.empty(0)
    out = []
    for i in range(0, len(g), 8):
        blk = np.ascontiguousarray(g[i:i + 8])
        hb = h.apply(blk)
        num = np.real(np.sum(np.conj(blk) * hb, axis=tuple(range(1, blk.ndim))))
        den = np.real(np.sum(np.conj(blk) * blk, axis=tuple(range(1, blk.ndim))))
        out.append(num / np.maximum(den, 1e-300))
    vals = np.concatenate(out)
    return np.sort(vals[np.isfinite(vals)])


def choose_shift(h: Hamiltonian, spectrum: Spectrum) -> tuple:
    """Shifts for the count: ``(primary, tight, next_level)`` in the energy unit.

    ``tight`` lies just above the highest returned level, by more than the degeneracy tolerance
    and the residuals (so a missing member of the top multiplet is counted).  ``primary`` lies
    halfway to the next level the solver's guard vectors saw (``next_level``, None if unknown),
    which keeps the factorisation away from any eigenvalue; it equals ``tight`` when that gap is
    smaller.
    """
    e = np.asarray(spectrum.energies, dtype=float)
    if e.size == 0:
        raise InputError("the spectrum has no levels to certify")
    e_max = float(e.max())
    scale = max(abs(float(e.min())), abs(e_max), e_max - float(e.min()), 1e-300)
    res = np.asarray(spectrum.residuals, dtype=float)
    res_max = float(res[np.isfinite(res)].max()) if res.size and np.any(np.isfinite(res)) else 0.0
    margin = max(float(spectrum.degeneracy_tolerance), 4.0 * res_max, 1e-7 * scale)
    tight = e_max + 2.0 * margin
    ritz = _guard_ritz_values(h, spectrum)
    ritz = ritz[ritz > e_max]
    nxt = float(ritz[0]) if ritz.size else None
    primary = tight
    if nxt is not None and 0.5 * (nxt - e_max) > 2.0 * margin:
        primary = e_max + 0.5 * (nxt - e_max)
    return primary, tight, nxt


def certify_count(hamiltonian: Hamiltonian, spectrum: Spectrum, *, shift: float | None = None,
                  max_memory_bytes: float | None = None, max_seconds: float | None = None,
                  backward_safety: float = 1e-3) -> CountCertificate:
    """Check independently that ``spectrum`` holds every eigenvalue of ``hamiltonian`` up to its top level.

    The eigenvalues below a shift just above the highest returned level are counted by Sylvester's
    law of inertia and compared with the number of returned states.  The count is accepted only if
    the factorisation's backward error (times ||H - shift||) is below ``backward_safety`` times the
    distance from the shift to the nearest known level.

    Returns a :class:`CountCertificate`; never raises for a count that cannot be made (it says why).
    """
    if spectrum.grid is not None and tuple(spectrum.grid.shape) != tuple(hamiltonian.grid.shape):
        raise InputError(f"the spectrum was solved on a {spectrum.grid.describe()}, but the Hamiltonian is on a "
                         f"{hamiltonian.grid.describe()}")
    expected = int(np.asarray(spectrum.energies).size)
    e = np.asarray(spectrum.energies, dtype=float)
    e_max = float(e.max())
    est = estimate_factorisation(hamiltonian)
    if shift is None:
        primary, tight, nxt = choose_shift(hamiltonian, spectrum)
    else:
        primary = tight = float(shift)
        nxt = None
        if not primary > e_max:
            raise InputError(f"the shift ({primary:.6g}) must lie above the highest returned level ({e_max:.6g})")

    def attempt(sig: float) -> InertiaCount:
        got = count_below(hamiltonian, sig, max_memory_bytes=max_memory_bytes, max_seconds=max_seconds)
        distance = sig - e_max
        if nxt is not None and nxt > sig:
            distance = min(distance, nxt - sig)
        if got.backward_error * got.matrix_norm > backward_safety * distance:
            raise CountUnavailable(f"the factorisation is not accurate enough to count reliably (backward error "
                                   f"{got.backward_error:.1e} of a matrix of norm {got.matrix_norm:.3g}, with a level "
                                   f"{distance:.3g} from the shift)")
        return got

    t0 = time.perf_counter()
    try:
        got = attempt(primary)
        note = ""
        if got.count > expected and primary > tight:
            # the next level may lie closer than the guard vectors suggested: count again just above the top
            got2 = attempt(tight)
            if got2.count == expected:
                note = (f"; another level lies between {tight:.6g} and {primary:.6g}, closer than the solver's "
                        f"guard vectors suggested")
            got = got2
    except CountUnavailable as exc:
        return CountCertificate(False, None, expected, primary, f"not certified: {exc.reason}", "",
                                time.perf_counter() - t0, est)
    secs = time.perf_counter() - t0
    if got.count == expected:
        return CountCertificate(True, got.count, expected, got.shift,
                                f"{got.count} eigenvalues lie below {got.shift:.6g}, as many as the solve returned"
                                + note, got.method, secs, est)
    if got.count > expected:
        k = got.count - expected
        return CountCertificate(False, got.count, expected, got.shift,
                                f"{got.count} eigenvalues lie below {got.shift:.6g} but the solve returned {expected}: "
                                f"{k} level{'s' if k > 1 else ''} at or below the highest returned one "
                                f"{'were' if k > 1 else 'was'} missed (possibly a member of a multiplet)",
                                got.method, secs, est)
    k = expected - got.count
    return CountCertificate(False, got.count, expected, got.shift,
                            f"only {got.count} eigenvalues lie below {got.shift:.6g} "
                            f"but the solve returned {expected}: "
                            f"{k} returned level{'s are' if k > 1 else ' is'} not an eigenvalue of this Hamiltonian "
                            f"(not converged, or from another grid)", got.method, secs, est)
