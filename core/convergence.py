"""Is a level (or a splitting) physics, or an artefact of the grid? A convergence study answers it.

The project is solved on two to five grids — its own and coarser (or finer) ones, each ``factor``
times coarser than the next — and the levels are matched between grids by wavefunction overlap,
so that levels which swap order between grids are still compared with themselves.  Each level is
then extrapolated to zero spacing with Richardson's method (L. F. Richardson, Phil. Trans. R. Soc.
A 210, 307 (1911)): with the scheme's formal order p (2, 4, 6 or 8 for finite differences),

    E(h) = E + a h^p + ...   =>   E ~ E(h2) + (E(h2) - E(h1)) / ((h1/h2)^p - 1)   (h1 > h2).

Error estimates, per level (energy unit):

* ``errors`` — of the extrapolated energy: with three or more grids, how much the extrapolation
  moved when the finest grid was added (the extrapolation from the two finest grids against the one
  from the next pair); with two grids, the whole correction |E_ext - E_finest| (no better claim
  can be made).  For the spectral scheme, which converges faster than any power, the finest grid's
  energy is the estimate and the change from the next grid is its error.
* ``grid_errors`` — of the energy on the project's own grid: |E_project - E_ext|.
* Both are at least the largest residual norm of the level's eigenvector on any grid (a rigorous
  bound on the distance to an eigenvalue of the discrete operator).

The observed order follows from three grids (E1 - E2) / (E2 - E3) = (h1^p - h2^p) / (h2^p - h3^p).
When it disagrees with the expected order (grids not yet in the asymptotic range, or a step or kink
in the potential, which also spoils the spectral scheme), the report warns and widens the errors.

A splitting between adjacent levels is "resolved" when it exceeds the combined (summed) error
estimate of its two levels, and "not resolved" otherwise: such a splitting, or an apparent
degeneracy, is within what the grid can tell.
"""
from __future__ import annotations

import math
import time
from dataclasses import dataclass, field
from typing import Callable, Mapping, Optional

import numpy as np
from scipy.optimize import linear_sum_assignment

from .errors import Cancelled, InputError
from .estimate import convergence_grids, estimate_convergence
from .grid import PERIODIC, Grid
from .kinetic import scheme_order
from .project import Project
from .study import StudyResult, project_hamiltonian, solve_project
from .units import get_units

__all__ = ["ConvergenceReport", "Splitting", "convergence_study", "default_degeneracy_tolerance",
           "study_states", "interpolate_states", "match_levels", "richardson", "observed_order",
           "RESOLVED", "NOT_RESOLVED"]

RESOLVED = "resolved"
NOT_RESOLVED = "not resolved"
#: marks for a level diagram or table, so that the verdict never rests on colour alone
MARKS = {RESOLVED: "\u2713", NOT_RESOLVED: "\u2248"}          # check mark, "almost equal to"
ASCII_MARKS = {RESOLVED: "+", NOT_RESOLVED: "~"}

ProgressFn = Optional[Callable[[str, float], None]]
StopFn = Optional[Callable[[], bool]]


def study_states(levels: int) -> int:
    """States solved on each grid for ``levels`` reported levels: a few extra, so that levels which
    move across the top between grids can still be matched."""
    return int(levels) + max(3, int(math.ceil(levels / 4)))


# --- interpolation between grids ------------------------------------------------------------------

def _axis_interpolation(src_axis: np.ndarray, lo: float, hi: float, boundary: str, dst: np.ndarray) -> np.ndarray:
    """Dense matrix of linear interpolation from one grid axis onto coordinates ``dst``.

    Hard wall: the function is 0 at ``lo`` and ``hi`` (the walls, which are not grid points).
    Periodic: the nodes wrap around with period ``hi - lo``.
    """
    n = src_axis.size
    m = np.zeros((dst.size, n))
    rows = np.arange(dst.size)
    if boundary == PERIODIC:
        h = (hi - lo) / n
        t = (dst - lo) / h
        i0 = np.floor(t).astype(int)
        w = t - i0
        np.add.at(m, (rows, i0 % n), 1.0 - w)
        np.add.at(m, (rows, (i0 + 1) % n), w)
        return m
    h = (hi - lo) / (n + 1)
    t = np.clip((dst - lo) / h, 0.0, n + 1.0)          # node index, walls at 0 and n+1
    i0 = np.minimum(np.floor(t).astype(int), n)
    w = t - i0
    left, right = i0 - 1, i0                          # grid array indices of nodes i0 and i0+1
    ok = (left >= 0) & (left < n)
    np.add.at(m, (rows[ok], left[ok]), (1.0 - w)[ok])
    ok = (right >= 0) & (right < n)
    np.add.at(m, (rows[ok], right[ok]), w[ok])
    return m


def interpolate_states(states: np.ndarray, src: Grid, dst: Grid) -> np.ndarray:
    """Linear interpolation of a block of states ``[level, x, y(, z)]`` from grid ``src`` onto ``dst``
    (same box and boundaries), axis by axis.  Not normalised."""
    if src.ndim != dst.ndim or src.boundary != dst.boundary or not np.allclose(src.lower, dst.lower) \
            or not np.allclose(src.upper, dst.upper):
        raise InputError("states can only be interpolated between grids on the same box with the same boundaries")
    out = np.asarray(states)
    for a in range(src.ndim):
        mat = _axis_interpolation(src.axes[a], src.lower[a], src.upper[a], src.boundary[a], dst.axes[a])
        out = np.moveaxis(np.tensordot(mat, out, axes=([1], [a + 1])), 0, a + 1)
    return np.ascontiguousarray(out)


def _normalised_rows(states: np.ndarray) -> np.ndarray:
    flat = states.reshape(len(states), -1)
    norms = np.linalg.norm(flat, axis=1)
    return flat / np.maximum(norms, 1e-300)[:, None]


def match_levels(ref_states: np.ndarray, ref_energies, other_states: np.ndarray, other_energies, *,
                 threshold: float = 0.05) -> np.ndarray:
    """For each reference level, the index of the same level among ``other`` (-1 if none), from
    wavefunctions given on one common grid.

    Weights W_ij = |<ref_i|other_j>|^2 (normalised vectors).  Levels linked by a weight above
    ``threshold`` (or by the best weight of a row or column) form groups that span the same space on
    both grids (a multiplet, or levels that mix near an anticrossing); inside a group of equal size
    the levels are paired in energy order, otherwise by the largest total weight (Hungarian method).
    """
    a = _normalised_rows(ref_states)
    b = _normalised_rows(other_states)
    w = np.abs(np.conj(a) @ b.T) ** 2
    nr, no = w.shape
    parent = list(range(nr + no))

    def find(i):
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    def union(i, j):
        ri, rj = find(i), find(j)
        if ri != rj:
            parent[rj] = ri

    edges = w >= threshold
    if no:
        edges[np.arange(nr), np.argmax(w, axis=1)] = True
    if nr:
        edges[np.argmax(w, axis=0), np.arange(no)] = True
    for i, j in zip(*np.nonzero(edges)):
        union(int(i), nr + int(j))
    comps: dict = {}
    for node in range(nr + no):
        comps.setdefault(find(node), []).append(node)
    ref_e = np.asarray(ref_energies, dtype=float)
    oth_e = np.asarray(other_energies, dtype=float)
    out = np.full(nr, -1, dtype=int)
    for nodes in comps.values():
        f = [i for i in nodes if i < nr]
        c = [j - nr for j in nodes if j >= nr]
        if not f or not c:
            continue
        f = sorted(f, key=lambda i: (ref_e[i], i))
        c = sorted(c, key=lambda j: (oth_e[j], j))
        if len(f) == len(c):
            for i, j in zip(f, c):
                out[i] = j
        else:
            sub = w[np.ix_(f, c)]
            rows, cols = linear_sum_assignment(-sub)
            for r, cc in zip(rows, cols):
                if sub[r, cc] >= 2 * threshold:
                    out[f[r]] = c[cc]
    return out


# --- Richardson extrapolation ------------------------------------------------------------------------

def richardson(e_coarse: float, e_fine: float, h_coarse: float, h_fine: float, order: float) -> float:
    """Richardson's extrapolation to zero spacing from two grids (Phil. Trans. R. Soc. A 210, 307 (1911))."""
    r = (h_coarse / h_fine) ** order
    return e_fine + (e_fine - e_coarse) / (r - 1.0)


def observed_order(energies, spacings, noise: float = 0.0) -> float:
    """Order p with (E1 - E2)/(E2 - E3) = (h1^p - h2^p)/(h2^p - h3^p) for three grids (coarsest first).

    Returns nan when the differences are within ``noise`` or change sign (no monotone convergence),
    inf when the ratio exceeds what order 40 would give, or the last difference is within ``noise`` or
    below 1e-3 of the one before (converging faster than any power these grids resolve).
    """
    e1, e2, e3 = (float(x) for x in energies)
    h1, h2, h3 = (float(x) for x in spacings)
    d1, d2 = e1 - e2, e2 - e3
    if abs(d1) <= noise:
        return float("nan")
    if abs(d2) <= noise:
        return float("inf") if abs(d1) > 100 * max(noise, 1e-300) else float("nan")
    if d1 * d2 <= 0:
        # a sign change in a last difference a thousand times smaller than the one before is
        # convergence beyond what three grids resolve, not an oscillation
        return float("inf") if abs(d2) < 1e-3 * abs(d1) else float("nan")
    ratio = d1 / d2

    def f(p):
        return (h1**p - h2**p) / (h2**p - h3**p)

    lo, hi = 0.01, 40.0
    if ratio <= f(lo):
        return lo
    if ratio >= f(hi):
        return float("inf")
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        if f(mid) < ratio:
            lo = mid
        else:
            hi = mid
        if hi - lo < 1e-10:
            break
    return 0.5 * (lo + hi)


# --- report ------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class Splitting:
    """The gap between two adjacent levels and whether the grid resolves it (energies in the energy unit)."""

    lower: int               # level index (the project grid's numbering), lower extrapolated energy
    upper: int
    splitting: float         # extrapolated E(upper) - E(lower) >= 0
    error: float             # combined error estimate of the two extrapolated levels (sum)
    resolved: bool
    project_splitting: float = float("nan")   # E(upper) - E(lower) on the project's own grid

    @property
    def verdict(self) -> str:
        return RESOLVED if self.resolved else NOT_RESOLVED

    @property
    def mark(self) -> str:
        return MARKS[self.verdict]

    @property
    def ascii_mark(self) -> str:
        return ASCII_MARKS[self.verdict]


@dataclass(frozen=True, eq=False)
class ConvergenceReport:
    """Levels of a project on several grids, extrapolated to zero spacing, with error estimates.

    Arrays over levels follow the numbering of the solve on the project's own grid
    (``reference``); ``energies`` is ``[grid, level]`` with grids coarsest first (nan where a level
    was not found on that grid).  Energies in ``energy_unit``; spacings in ``length_unit``.
    """

    grids: tuple
    spacings: np.ndarray
    scheme: str
    expected_order: float
    energies: np.ndarray
    extrapolated: np.ndarray
    errors: np.ndarray
    grid_errors: np.ndarray
    observed_orders: np.ndarray
    observed_order: float
    warnings: tuple
    energy_unit: str
    length_unit: str
    reference: StudyResult
    reference_index: int
    wall_time: float
    statuses: tuple = ()
    extra: dict = field(default_factory=dict)

    @property
    def levels(self) -> int:
        return int(self.extrapolated.size)

    @property
    def project_energies(self) -> np.ndarray:
        """Energies on the project's own grid (energy unit)."""
        return self.energies[self.reference_index]

    def splittings(self) -> tuple:
        """Each adjacent pair of levels, in ascending extrapolated energy, with its verdict.

        "resolved" when the extrapolated splitting exceeds the sum of the two levels' ``errors``;
        "not resolved" otherwise, and whenever an error is unknown.  ``project_splitting`` is the
        same pair's splitting on the project's grid (what a single solve shows).
        """
        e = self.extrapolated
        err = self.errors
        proj = self.project_energies
        order = sorted(range(e.size), key=lambda i: (not np.isfinite(e[i]), e[i], i))
        out = []
        for a, b in zip(order, order[1:]):
            s = float(e[b] - e[a])
            comb = float(err[a] + err[b])
            ok = bool(np.isfinite(s) and np.isfinite(comb) and s > comb)
            out.append(Splitting(int(a), int(b), s, comb, ok, float(proj[b] - proj[a])))
        return tuple(out)

    def on_levels(self, energies, degeneracy_tolerance: float = 0.0) -> tuple:
        """This report applied to a solve of the same project: ``(grid_errors, splittings)``.

        The solve's levels are matched to the report's project-grid levels by number while their
        energies agree (within ten times ``degeneracy_tolerance`` or 1e-6 of the energy scale);
        ``grid_errors`` has one entry per solved level (nan beyond the matched ones) and
        ``splittings`` keeps those between matched levels."""
        e = np.asarray(energies, dtype=float)
        pe = np.asarray(self.project_energies, dtype=float)
        scale = max(float(np.max(np.abs(e))) if e.size else 1.0, 1e-300)
        tol = max(10.0 * float(degeneracy_tolerance), 1e-6 * scale)
        n = 0
        while n < min(e.size, pe.size) and np.isfinite(pe[n]) and abs(pe[n] - e[n]) <= tol:
            n += 1
        errors = np.full(e.size, np.nan)
        errors[:n] = np.asarray(self.grid_errors, dtype=float)[:n]
        return errors, tuple(sp for sp in self.splittings() if sp.lower < n and sp.upper < n)

    def rows(self) -> list:
        """One dict per level (project-grid numbering) for tables and JSON."""
        out = []
        for i in range(self.levels):
            out.append({"level": i, "energies": [float(x) for x in self.energies[:, i]],
                        "extrapolated": float(self.extrapolated[i]), "error": float(self.errors[i]),
                        "grid_error": float(self.grid_errors[i]), "observed_order": float(self.observed_orders[i]),
                        "status": self.statuses[i] if i < len(self.statuses) else ""})
        return out

    def to_dict(self) -> dict:
        """Plain data (lists, floats, strings) for JSON; non-finite numbers become None."""
        def clean(x):
            if isinstance(x, float):
                return x if math.isfinite(x) else None
            if isinstance(x, dict):
                return {k: clean(v) for k, v in x.items()}
            if isinstance(x, (list, tuple)):
                return [clean(v) for v in x]
            return x
        return clean({
            "scheme": self.scheme,
            "expected_order": float(self.expected_order),
            "observed_order": float(self.observed_order),
            "energy_unit": self.energy_unit, "length_unit": self.length_unit,
            "grids": [{"points": list(g.points), "spacing": [float(s) for s in g.spacing],
                       "representative_spacing": float(h), "project_grid": i == self.reference_index}
                      for i, (g, h) in enumerate(zip(self.grids, self.spacings))],
            "levels": self.rows(),
            "splittings": [{"lower": s.lower, "upper": s.upper, "splitting": s.splitting, "error": s.error,
                            "verdict": s.verdict} for s in self.splittings()],
            "degeneracy_tolerance": float(default_degeneracy_tolerance(self)),
            "warnings": list(self.warnings),
            "wall_time_s": float(self.wall_time),
        })


def default_degeneracy_tolerance(report: ConvergenceReport) -> float:
    """Degeneracy tolerance (energy unit) for the project grid's levels, built from the error estimates.

    Levels joined by "not resolved" splittings form clusters that the grid cannot tell apart; the
    tolerance is at least the largest gap between consecutive project-grid energies inside a cluster
    and at least the largest combined error of an unresolved pair, so that a grid artefact never
    splits a multiplet.  Where one value can also keep resolved levels apart, it is lowered to lie
    halfway between the largest such in-cluster gap and the smallest project-grid gap between
    clusters; otherwise the unresolved side wins (resolved levels may then be grouped).  When every
    splitting is resolved it is the largest combined error, again kept below every gap.
    """
    sp = report.splittings()
    k = report.levels
    if k < 2 or not sp:
        return 0.0
    parent = list(range(k))

    def find(i):
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    for s in sp:
        if not s.resolved:
            parent[find(s.upper)] = find(s.lower)
    proj = report.project_energies
    order = np.argsort(proj, kind="stable")
    inside, between = [0.0], []
    for a, b in zip(order, order[1:]):
        gap = float(proj[b] - proj[a])
        if not np.isfinite(gap):
            continue
        (inside if find(int(a)) == find(int(b)) else between).append(gap)
    max_inside = max(inside)
    errs = [s.error for s in sp if not s.resolved and np.isfinite(s.error)]
    if not errs:   # every splitting resolved: the largest combined error, if it stays below every gap
        errs = [max((s.error for s in sp if np.isfinite(s.error)), default=0.0)]
    tol = max([max_inside] + errs)
    if between and tol >= min(between):
        tol = 0.5 * (max_inside + min(between)) if max_inside < min(between) else max_inside
    return float(tol)


# --- the study ---------------------------------------------------------------------------------------

def _representative_spacing(g: Grid) -> float:
    return float(np.prod(g.spacing) ** (1.0 / g.ndim))


def _levels_to_report(spec, levels: int) -> int:
    """``levels``, extended to the end of the multiplet that holds the last one."""
    k = min(int(levels), spec.count)
    for grp in spec.groups:
        if grp[0] < k <= grp[-1]:
            return grp[-1] + 1
    return k


def convergence_study(project: Project, *, factor: float = 1.5, grids: int = 3, levels: Optional[int] = None,
                      parameters: Optional[Mapping[str, float]] = None, progress: ProgressFn = None,
                      should_stop: StopFn = None, refine: str = "coarser",
                      scheme: Optional[str] = None) -> ConvergenceReport:
    """Solve ``project`` on ``grids`` grids and extrapolate each level to zero spacing.

    Parameters
    ----------
    factor : spacing ratio between neighbouring grids (> 1).
    grids : number of grids (2 to 5); the project's own grid is one of them.
    levels : levels to report (default: the project's number of states), extended to whole multiplets.
    parameters : parameter overrides (as for :func:`core.study.solve_project`).
    refine : ``"coarser"`` (default: the other grids are coarser than the project's, cheap) or
        ``"finer"`` (the other grids are finer, costly).
    scheme : kinetic scheme; default the project's, with ``auto`` decided once on the project's grid
        so that every grid uses the same scheme.
    progress, should_stop : as for a solve; the study raises :class:`core.errors.Cancelled`.

    Raises :class:`core.errors.MemoryLimitError` (with a suggestion) before solving when the
    largest grid will not fit.
    """
    t0 = time.perf_counter()
    k_report = int(project.solver.states if levels is None else levels)
    if k_report < 1:
        raise InputError(f"levels must be a positive integer, got {levels!r}")
    gs = convergence_grids(project.grid, factor, grids, refine)
    estimate_convergence(project, factor=factor, grids=grids, levels=k_report, parameters=parameters,
                         refine=refine, measure=False).check()
    ref_index = gs.index(project.grid) if project.grid in gs else (len(gs) - 1 if refine == "coarser" else 0)
    if scheme is None:
        scheme = project.solver.scheme
        if scheme == "auto":       # decided once, on the project's grid
            scheme = project_hamiltonian(project, parameters=parameters)[3]
    expected = scheme_order(scheme)
    k_solve = study_states(k_report)
    common = gs[0]                                       # overlaps are taken on the coarsest grid
    results, on_common = [], []
    start = None
    n = len(gs)
    for gi, g in enumerate(gs):
        if should_stop is not None and should_stop():
            raise Cancelled("convergence study cancelled")

        def sub(stage, frac, gi=gi):
            if progress is not None:
                progress(f"grid {gi + 1}/{n}", min(1.0, (gi + max(0.0, min(1.0, frac))) / n))

        r = solve_project(project, parameters=parameters, states=k_solve, grid=g, scheme=scheme, start=start,
                          progress=sub, should_stop=should_stop)
        results.append(r)
        on_common.append(r.states if g == common else interpolate_states(r.states, g, common))
        if gi + 1 < n:
            # warm start from this grid's states (its guard vectors, interpolated, were measured to help
            # less than the random vectors the solver adds)
            start = interpolate_states(r.states, g, gs[gi + 1])
    ref = results[ref_index]
    k = _levels_to_report(ref.spectrum, k_report)
    ref_energies = ref.energies
    energies = np.full((n, k), np.nan)
    residuals = np.zeros((n, k))
    for gi, r in enumerate(results):
        if gi == ref_index:
            idx = np.arange(k)
        else:
            idx = match_levels(on_common[ref_index], ref_energies, on_common[gi], r.energies)[:k]
        ok = idx >= 0
        energies[gi, ok] = r.energies[idx[ok]]
        residuals[gi, ok] = r.spectrum.residuals[idx[ok]]
    hs = np.array([_representative_spacing(g) for g in gs])
    scale = float(np.nanmax(np.abs(energies))) if np.any(np.isfinite(energies)) else 1.0
    # round-off in eigenvalues of a grid operator whose norm is 10^2..10^4 times the level scale: 1e-10
    # relative keeps it out of the convergence analysis and is far below any discretisation error shown
    noise_floor = 1e-10 * max(scale, 1e-300)

    ext = np.full(k, np.nan)
    err = np.full(k, np.nan)
    p_obs = np.full(k, np.nan)
    statuses = []
    n_unmatched = n_nonmono = n_converged = n_widened = 0
    for i in range(k):
        e = energies[:, i]
        valid = np.nonzero(np.isfinite(e))[0]
        noise = max(float(np.max(residuals[valid, i])) if valid.size else 0.0, noise_floor)
        if valid.size < 2:
            ext[i], err[i] = ref_energies[i], np.nan
            statuses.append("not found on the other grids")
            n_unmatched += 1
            continue
        status = "" if valid.size == n else f"found on {valid.size} of {n} grids"
        if valid.size < n:
            n_unmatched += 1
        f, c = valid[-1], valid[-2]
        if valid.size >= 3:
            cc = valid[-3]
            p_obs[i] = observed_order(e[[cc, c, f]], hs[[cc, c, f]], noise=noise)
        if math.isinf(expected):
            ext[i] = e[f]
            err[i] = abs(e[f] - e[c])
            po = p_obs[i]
            if np.isfinite(po) and po < 4.0:
                err[i] = max(err[i], abs(e[f] - e[c]) / ((hs[c] / hs[f]) ** max(po, 0.25) - 1.0))
        else:
            ext[i] = richardson(e[c], e[f], hs[c], hs[f], expected)
            if valid.size >= 3:
                cc = valid[-3]
                err[i] = abs(ext[i] - richardson(e[cc], e[c], hs[cc], hs[c], expected))
            else:
                err[i] = abs(ext[i] - e[f])
            po = p_obs[i]
            if np.isfinite(po) and abs(po - expected) > max(0.5, 0.25 * expected):
                # the expected order does not hold here: do not trust the extrapolation beyond the data
                wide = abs(e[f] - e[c]) / ((hs[c] / hs[f]) ** float(np.clip(po, 0.25, expected)) - 1.0)
                if wide > err[i]:
                    err[i] = wide
                    n_widened += 1
        if valid.size >= 3 and np.isnan(p_obs[i]):
            d1, d2 = e[valid[-3]] - e[c], e[c] - e[f]
            if abs(d1) <= noise and abs(d2) <= noise:
                status = status or "converged to the solver's accuracy"
                n_converged += 1
            else:
                status = status or "does not converge monotonically"
                n_nonmono += 1
                # assume no faster than second-order decay after the earlier change
                err[i] = max(err[i], abs(d2), abs(d1) * (hs[f] / hs[c]) ** 2)
        err[i] = max(err[i], noise)
        statuses.append(status)
    grid_err = np.abs(energies[ref_index] - ext)
    grid_err = np.where(np.isfinite(grid_err), np.maximum(grid_err, err), np.nan)

    finite_orders = p_obs[np.isfinite(p_obs)]
    p_med = float(np.median(finite_orders)) if finite_orders.size else float("nan")
    if finite_orders.size == 0 and np.any(np.isinf(p_obs)):
        p_med = float("inf")
    warnings = []
    if n < 3:
        warnings.append("two grids give no observed order; the error estimates assume the scheme's order holds")
    if math.isinf(expected):
        if np.isfinite(p_med) and p_med < 4.0:
            warnings.append(f"the spectral scheme converges only like h^{p_med:.1f} here, not faster than any "
                            "power: the potential probably has a step or a kink; second-order differences (fd2) "
                            "may give the same accuracy for less; errors allow for it")
    elif np.isfinite(p_med) and abs(p_med - expected) > max(0.5, 0.25 * expected):
        warnings.append(f"observed convergence order {p_med:.2f} differs from the {scheme} scheme's order "
                        f"{expected:g}: the grids may be too coarse for the asymptotic range, or the potential has "
                        f"a step or a kink; " + (f"{n_widened} error estimate(s) were widened" if n_widened else
                                                  "treat the error estimates with care"))
    elif math.isinf(p_med) and not math.isinf(expected):
        warnings.append(f"the levels converge faster than the {scheme} scheme's order {expected:g} "
                        "(errors may be at the solver's accuracy)")
    if n_nonmono:
        warnings.append(f"{n_nonmono} level(s) do not converge monotonically between the grids; their errors "
                        "allow for no faster than second-order decay after the earlier change between grids")
    if n_unmatched:
        warnings.append(f"{n_unmatched} level(s) could not be matched on every grid (they move too much between "
                        "grids); refine the grids or report fewer levels")
    if ref_index != n - 1:
        warnings.append("the project's grid is not the finest of the study; the finer grids set the estimates")
    u = get_units(project.units)
    return ConvergenceReport(grids=gs, spacings=hs, scheme=scheme, expected_order=float(expected),
                             energies=energies, extrapolated=ext, errors=err, grid_errors=grid_err,
                             observed_orders=p_obs, observed_order=p_med, warnings=tuple(warnings),
                             energy_unit=u.energy_unit, length_unit=u.length_unit, reference=ref,
                             reference_index=ref_index, wall_time=time.perf_counter() - t0,
                             statuses=tuple(statuses),
                             extra={"solve_times": [r.spectrum.wall_time for r in results], "factor": float(factor),
                                    "refine": refine, "states_per_grid": k_solve, "converged_levels": n_converged})
