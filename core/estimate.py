"""Memory and time before a solve, a sweep or a convergence study — and a refusal when it will not fit.

* **Memory** is what the eigensolver allocates (:func:`core.eigensolve.solver_memory_bytes`: four
  blocks of ``states + guard`` vectors) plus the potential and a few grid-sized work arrays.
* **Time**: the number of single-vector Hamiltonian applications a solve needs, from a model of
  the Chebyshev filter (about ``0.56 (100 + 25 sqrt((E_max - E_min) / (E_m - E_min)))`` per vector
  of the block: first fitted to oscillators in 2D and 3D, then scaled to what the solver needs now
  on the bundled samples), divided by this machine's **measured** rate: the effective rate of the
  latest cold solve of the same scheme and grid shape when there was one (:func:`record_solve`,
  called by every cold solve), else the fastest of a few block applications of the project's own
  Hamiltonian (timed once per scheme and grid shape, cached) with a factor 1.75 for the dense
  linear algebra between filter passes.  Measured against solves on the bundled samples: within a factor
  of 2 (``tests/benchmarks/bench_estimate.py``).
* A request that will not fit in the memory available now is refused with
  :class:`core.errors.MemoryLimitError`, naming what would fit: a coarser grid, the spectral
  scheme, or fewer states.
"""
from __future__ import annotations

import math
import time
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from .eigensolve import solver_memory_bytes, weyl_level_estimate
from .errors import InputError, MemoryLimitError
from .grid import Grid
from .hamiltonian import Hamiltonian
from .project import Project
from .resources import available_memory_bytes, format_bytes
from .solve_rates import forget_solves, record_solve, solved_time

__all__ = ["Estimate", "measure_apply_rate", "estimate_solve", "estimate_sweep", "estimate_convergence",
           "convergence_grids", "block_size", "clear_rate_cache", "record_solve"]

#: fraction of the available memory a request may use (as core.resources.check_memory)
MEMORY_FRACTION = 0.8
#: extra vectors the solve pipeline reserves on top of the block (core.study.solve_project)
_EXTRA_ROWS = 8
#: a solve's time over its vector applications at the fastest measured rate: the dense linear algebra
#: between filter passes and the slower applications of a loaded machine (1.0-2.4 measured on the
#: bundled samples, the most on the smallest grids)
_OVERHEAD = 1.75
#: the application model's count times this is what the solver needs now (its Davidson-widened
#: started solves): 0.43-0.64 of the model, mean 0.56, measured on the seven bundled samples
_APPS_SCALE = 0.56

_RATE_CACHE: dict = {}
#: a cold solve of at least 30000 points starts on a grid half as fine (core.eigensolve): it then
#: takes about this share of the model's time (0.20-0.24 measured on the bundled 2D samples at 3x
#: their grid, 37636 and 49300 points, spectral scheme)
_COARSE_START_SHARE = 0.25


def _coarse_started(grid: Grid) -> bool:
    """True when a cold solve on ``grid`` starts on a grid half as fine (as core.eigensolve decides)."""
    from .eigensolve import _coarse_points  # the eigensolver's own rule, not a copy of it
    return grid.size >= 30000 and all(_coarse_points(n, per) >= 16 for n, per in zip(grid.shape, grid.periodic))


def clear_rate_cache() -> None:
    """Forget the measured application rates (for tests and after a machine change)."""
    _RATE_CACHE.clear()
    forget_solves()


def block_size(states: int) -> int:
    """Vectors in the eigensolver's block for ``states`` wanted states (as core.eigensolve chooses)."""
    return int(states) + max(4, int(math.ceil(0.5 * states)))


def _state_bytes(complex_: bool) -> int:
    return 16 if complex_ else 8


def _memory(n_points: int, states: int, complex_: bool) -> int:
    m = block_size(states) + _EXTRA_ROWS
    return int(solver_memory_bytes(n_points, m, complex_) + 6 * 8 * n_points)


@dataclass(frozen=True)
class Estimate:
    """What a request will cost. Memory in bytes, time in seconds (rough), sizes in grid points."""

    what: str
    unknowns: int                 # points of the largest grid
    states: int
    memory_bytes: int             # peak
    available_bytes: int
    seconds: float | None      # None when no rate was measured
    apply_rate: float | None   # measured single-vector applications x points per second
    fits: bool
    suggestion: str = ""
    details: tuple = ()           # one line per solve, for the curious
    extra: dict = field(default_factory=dict)

    def describe(self) -> str:
        t = "time not measured" if self.seconds is None else f"roughly {_format_seconds(self.seconds)}"
        return (f"{self.what}: {self.unknowns:,} unknowns, {self.states} states, about "
                f"{format_bytes(self.memory_bytes)} of {format_bytes(self.available_bytes)} available, {t}")

    def brief(self) -> str:
        """Memory and time in a few words (for a status line), e.g. "about 5.8 MiB, roughly 2 s"."""
        t = "" if self.seconds is None else f", roughly {_format_seconds(self.seconds)}"
        return f"about {format_bytes(self.memory_bytes)}{t}"

    def check(self) -> Estimate:
        """Raise :class:`MemoryLimitError` with the suggestion when the request will not fit; else return self."""
        if not self.fits:
            raise MemoryLimitError(f"{self.what} needs about {format_bytes(self.memory_bytes)}, but only "
                                   f"{format_bytes(self.available_bytes)} is available. {self.suggestion}")
        return self


def _format_seconds(s: float) -> str:
    if s < 1:
        return f"{s:.2g} s"
    if s < 120:
        return f"{s:.0f} s"
    if s < 7200:
        return f"{s / 60:.0f} min"
    return f"{s / 3600:.1f} h"


# --- measured application rate ----------------------------------------------------------------------

def measure_apply_rate(h: Hamiltonian, *, block: int = 8, min_time: float = 0.05, max_reps: int = 20,
                       use_cache: bool = True) -> float:
    """Single-vector applications x grid points per second for ``h`` on this machine.

    Times a few applications of ``h`` to a block of ``block`` random vectors (after one untimed
    warm-up, which also compiles the kernels) and keeps the fastest: on a shared machine the mean of
    a few 10 ms applications varied 8x between runs, the fastest 2x. Cached per (scheme, grid shape,
    real/complex).
    """
    key = (h.scheme, tuple(h.grid.shape), bool(h.is_complex))
    if use_cache and key in _RATE_CACHE:
        return _RATE_CACHE[key]
    n = h.size
    block = max(1, min(int(block), max(1, (64 << 20) // max(n * _state_bytes(h.is_complex), 1))))
    rng = np.random.default_rng(0)
    x = rng.standard_normal((block,) + tuple(h.grid.shape)).astype(h.dtype)
    out = np.empty_like(x)
    h.step(x, out, alpha=1.0, shift=0.0, beta=0.0, z=x)          # warm-up / compile
    reps = 0
    t_start = time.perf_counter()
    best = math.inf
    while reps < max_reps and (time.perf_counter() - t_start < min_time or reps < 3):
        t0 = time.perf_counter()
        h.step(x, out, alpha=1.0, shift=0.0, beta=0.0, z=x)
        best = min(best, time.perf_counter() - t0)          # the least disturbed application
        reps += 1
    rate = block * n / max(best, 1e-9)
    if use_cache:
        _RATE_CACHE[key] = rate
    return rate


def _scaled_rate(rate: float, scheme: str, measured_shape, shape) -> float:
    """Per-point rate on another grid: constant for banded schemes; the spectral scheme's dense 1D
    matrices cost in proportion to the points per axis."""
    if scheme == "spectral":
        return rate * sum(measured_shape) / max(sum(shape), 1)
    return rate


def _applications(h: Hamiltonian, states: int) -> float:
    """Model of the single-vector applications a cold solve needs (see the module notes)."""
    m = block_size(states)
    lo, hi = h.bounds()
    try:
        em = weyl_level_estimate(h, 1.3 * m)
    except Exception:                       # an estimate never fails a request
        em = lo + 0.01 * (hi - lo)
    ratio = math.sqrt(max(hi - lo, 1e-300) / max(em - lo, 1e-12 * max(hi - lo, 1e-300)))
    return _APPS_SCALE * m * (100.0 + 25.0 * min(ratio, 1e4))


def _maybe_complex(project: Project) -> bool:
    """True unless every magnetic-field component is literally zero (a formula counts as a field)."""
    for v in project.magnetic_field:
        if not isinstance(v, (int, float)) or v != 0:
            return True
    return False


def _model_grid_hamiltonian(project: Project, grid: Grid, parameters, scheme):
    from .study import project_hamiltonian
    return project_hamiltonian(project, parameters=parameters, grid=grid, scheme=scheme)


# --- suggestions -------------------------------------------------------------------------------------

def _suggestion(grid: Grid, states: int, complex_: bool, scheme: str, budget: float, *, grids: int = 1,
                largest_factor: float = 1.0) -> str:
    """Concrete ways to fit in ``budget`` bytes: coarser grid, spectral scheme, fewer states."""
    parts = []
    scale = max(largest_factor, 1e-300)

    def fits(points, k) -> bool:
        return _memory(math.prod(points), k, complex_) * scale <= budget     # exact: no int64 wrap

    def shrunk(f):
        return [max(8, int(p * f)) for p in grid.points]

    if fits(shrunk(0.0), states):
        lo, hi = 0.0, 1.0                         # bisect for the finest uniformly coarsened grid that fits
        for _ in range(40):
            mid = 0.5 * (lo + hi)
            lo, hi = (mid, hi) if fits(shrunk(mid), states) else (lo, mid)
        parts.append("a coarser grid (about " + " x ".join(str(p) for p in shrunk(lo)) + " points fits)")
    else:
        parts.append("a much coarser grid")
    if scheme != "spectral":
        parts.append("the spectral scheme (for a smooth potential it is accurate on far fewer points)")
    k_fit = 0
    for k in range(int(states) - 1, 0, -1):      # the largest k whose solve fits
        if fits(grid.points, k):
            k_fit = k
            break
    if 1 <= k_fit < states:
        parts.append(f"fewer states (about {k_fit} fit)")
    if grids > 1:
        parts.append("a smaller refinement factor or coarser grids for the study")
    return "Use " + ", or ".join(parts) + "."


# --- public estimates ----------------------------------------------------------------------------------

def estimate_solve(project: Project, *, states: int | None = None, grid: Grid | None = None,
                   scheme: str | None = None, parameters: Mapping[str, float] | None = None,
                   measure: bool = True, solves: int = 1, what: str | None = None) -> Estimate:
    """Estimate one solve of ``project`` (or ``solves`` cold solves of the same size).

    ``measure=False`` skips building the Hamiltonian: memory only, no time.
    """
    grid = grid or project.grid
    k = int(states or project.solver.states)
    if k < 1:
        raise InputError(f"number of states must be a positive integer, got {states!r}")
    avail = available_memory_bytes()
    budget = MEMORY_FRACTION * avail
    label = what or f"solving {k} states on a {grid.describe()}"
    if not measure:
        cplx = _maybe_complex(project)
        mem = _memory(grid.size, k, cplx)
        fits = mem <= budget
        sch = scheme or project.solver.scheme
        return Estimate(label, grid.size, k, mem, avail, None, None, fits,
                        "" if fits else _suggestion(grid, k, cplx, sch, budget))
    mem_guess = _memory(grid.size, k, True)
    if mem_guess > budget and _memory(grid.size, k, False) > budget:
        # do not even build the Hamiltonian for a request that cannot fit
        sch = scheme or project.solver.scheme
        mem = _memory(grid.size, k, False)
        return Estimate(label, grid.size, k, mem, avail, None, None, False,
                        _suggestion(grid, k, False, sch, budget))
    h = _model_grid_hamiltonian(project, grid, parameters, scheme)[0]
    cplx = bool(h.is_complex)
    mem = _memory(grid.size, k, cplx)
    fits = mem <= budget
    apps = _applications(h, k)
    solved = solved_time(h.scheme, grid.shape, cplx)
    rate = measure_apply_rate(h) if solved is None else None
    if solved is not None:             # a cold solve of this size ran here: its time, per block vector
        seconds = solves * solved[0] * block_size(k) / block_size(solved[1])
        rate = _OVERHEAD * apps * grid.size * solves / seconds      # the rate that time means (for studies)
    else:
        seconds = solves * _OVERHEAD * apps * grid.size / rate
        if _coarse_started(grid):
            seconds *= _COARSE_START_SHARE
    return Estimate(label, grid.size, k, mem, avail, seconds, rate, fits,
                    "" if fits else _suggestion(grid, k, cplx, h.scheme, budget),
                    details=(f"{grid.describe()}: about {apps:,.0f} vector applications at "
                             f"{rate / grid.size:,.0f} per second" if solved is None else
                             f"{grid.describe()}: from the latest solve of this size ({solved[0]:.2g} s)",),
                    extra={"scheme": h.scheme, "applications": apps, "complex": cplx})


def estimate_sweep(project: Project, points: int, *, states: int | None = None,
                   parameters: Mapping[str, float] | None = None, measure: bool = True) -> Estimate:
    """Estimate a sweep of ``points`` solves (warm-started after the first: counted as 40% of a cold solve)."""
    if int(points) < 1:
        raise InputError(f"a sweep needs at least one point, got {points!r}")
    one = estimate_solve(project, states=states, parameters=parameters, measure=measure)
    k = one.states
    secs = None if one.seconds is None else one.seconds * (1.0 + 0.4 * (int(points) - 1))
    return Estimate(f"a sweep of {int(points)} solves of {k} states on a {project.grid.describe()}", one.unknowns, k,
                    one.memory_bytes, one.available_bytes, secs, one.apply_rate, one.fits, one.suggestion,
                    one.details, one.extra)


def convergence_grids(grid: Grid, factor: float = 1.5, grids: int = 3, refine: str = "coarser") -> tuple:
    """The grids of a convergence study, coarsest first: ``grid`` and ``grids - 1`` others, each
    ``factor`` times coarser (``refine="coarser"``) or finer (``"finer"``) than the next."""
    f = float(factor)
    if not (math.isfinite(f) and f > 1.0):
        raise InputError(f"the refinement factor must be a number above 1, got {factor!r}")
    if not isinstance(grids, (int, np.integer)) or isinstance(grids, bool) or not 2 <= grids <= 5:
        raise InputError(f"a convergence study uses 2 to 5 grids, got {grids!r}")
    if refine not in ("coarser", "finer"):
        raise InputError(f"refine must be 'coarser' or 'finer', got {refine!r}")
    out = []
    for i in range(grids):
        power = -(grids - 1 - i) if refine == "coarser" else i
        out.append(grid if power == 0 else grid.refined(f ** power))
    for a, b in zip(out, out[1:]):
        if not all(pb > pa for pa, pb in zip(a.points, b.points)):
            raise InputError(f"the grids {a.describe()} and {b.describe()} do not differ on every axis; "
                             "use a larger refinement factor or a finer project grid")
    if min(out[0].points) < 6:
        raise InputError(f"the coarsest grid of the study ({out[0].describe()}) is too coarse; use a smaller "
                         "refinement factor, fewer grids, or a finer project grid")
    return tuple(out)


def estimate_convergence(project: Project, *, factor: float = 1.5, grids: int = 3, levels: int | None = None,
                         parameters: Mapping[str, float] | None = None, refine: str = "coarser",
                         measure: bool = True) -> Estimate:
    """Estimate a convergence study: one solve per grid (memory of the largest, time of all)."""
    from .convergence_levels import study_states
    gs = convergence_grids(project.grid, factor, grids, refine)
    k = study_states(int(project.solver.states if levels is None else levels))
    largest = gs[-1]
    # one measured rate on the project's grid, scaled to the other grids (building a Hamiltonian on
    # each grid costs as much as evaluating its potential; measuring on each would cost more)
    base = estimate_solve(project, states=k, parameters=parameters, measure=measure)
    rate = base.apply_rate
    secs = 0.0 if measure else None
    mems = []
    details = []
    for g in gs:
        cplx = bool(base.extra.get("complex", _maybe_complex(project)))
        mems.append(_memory(g.size, k, cplx))
        if measure and rate is not None:
            scheme = base.extra["scheme"]
            r = _scaled_rate(rate, scheme, project.grid.shape, g.shape)
            apps = base.extra["applications"] * (math.sqrt(g.size / project.grid.size) ** (2.0 / g.ndim))
            t = _OVERHEAD * apps * g.size / r
            secs += t
            details.append(f"{g.describe()}: roughly {_format_seconds(t)}")
    mem = max(mems)
    avail = base.available_bytes
    budget = MEMORY_FRACTION * avail
    fits = mem <= budget
    sugg = ""
    if not fits:
        sugg = _suggestion(project.grid, k, bool(base.extra.get("complex", False)),
                           base.extra.get("scheme", project.solver.scheme), budget, grids=len(gs),
                           largest_factor=largest.size / project.grid.size)
    return Estimate(f"a convergence study on {len(gs)} grids (largest {largest.describe()})", largest.size, k, mem,
                    avail, secs, rate, fits, sugg, tuple(details), {"grids": gs})
