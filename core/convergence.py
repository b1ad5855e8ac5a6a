"""Is a level (or a splitting) physics, or an artefact of the grid? A convergence study answers it.

The project is solved on two to five grids — its own and coarser (or finer) ones, each ``factor``
times coarser than the next — and the levels are matched between grids by wavefunction overlap,
so that levels which swap order between grids are still compared with themselves.  Each level is
then extrapolated to zero spacing with Richardson's method (L. F. Richardson, Phil. Trans. R. Soc.
A 210, 307 (1911)): with the scheme's formal order p (2, 4, 6 or 8 for finite differences),

    E(h) = E + a h^p + ...   =>   E ~ E(h2) + (E(h2) - E(h1)) / ((h1/h2)^p - 1)   (h1 > h2).

Each energy is known only to the solver's accuracy (its residual tolerance times the energy scale,
:func:`core.eigensolve.energy_scale`, or the level's residual norm if larger); a change between
grids is judged only when it is ``SIGNIFICANT`` (10) times that.  Each level is then, in words that
every front end shares (:mod:`core.convergence_report`):

* "converged to the solver's accuracy" — the two finest grids agree within it; the finest grid's
  energy is the estimate and its error the larger of the last change and the solver's accuracy;
* "converges (order p ≈ ...)" — both changes significant, same sign and shrinking; the order p
  from (E1 - E2) / (E2 - E3) = (h1^p - h2^p) / (h2^p - h3^p); Richardson with the scheme's
  order, the error how much the extrapolation moved when the finest grid was added (for the
  spectral scheme the finest grid's energy with the last change as its error), widened when the
  observed order disagrees with the expected one (a step or kink in the potential, or grids not
  yet in the asymptotic range);
* "not monotonic" — both changes significant with opposite signs; "not converging yet" — the change
  grows on the finer grid.  Both take the finest grid's energy with a widened error.

``grid_errors`` is the error of the energy on the project's own grid, |E_project - E_ext| (at least
``errors``).  Levels are matched between grids by overlap and numbered as on the project grid.

Splittings are between adjacent levels of the project grid: "resolved" when the extrapolated
splitting exceeds the combined (summed) error of its two levels; "not resolved" otherwise, which is
either "degenerate on every grid (to the solver's accuracy)" (the pair agrees within it on every
grid: a symmetry, or a splitting below the solver's accuracy), or a splitting within the errors.
Unresolved levels whose combined errors exceed ``JUDGE_FRACTION`` of the gap to the nearest other
level are reported as "the grid is too coarse to judge these levels", with the finer grid on which
the errors would fall below the splittings seen (from the observed order) and its estimated cost;
the degeneracy tolerance never merges them.  A cancelled or failed study raises with a
:class:`PartialConvergence`.
"""
from __future__ import annotations

import math
import time
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field, replace

import numpy as np

from .convergence_levels import (
    CONVERGED,
    CONVERGES,
    GROWING,
    NOT_FOUND,
    NOT_MONOTONIC,
    SIGNIFICANT,
    judge_level,
    level_status,
    observed_order,
    richardson,
    study_states,
)
from .convergence_match import interpolate_states, match_levels
from .eigensolve import energy_scale
from .errors import Cancelled, InputError, NotConverged
from .estimate import convergence_grids, estimate_convergence
from .grid import Grid
from .kinetic import scheme_order
from .project import Project
from .study import StudyResult, project_hamiltonian, solve_project
from .units import get_units

__all__ = ["ConvergenceReport", "Splitting", "CoarseCluster", "PartialConvergence", "convergence_study",
           "default_degeneracy_tolerance", "study_states", "interpolate_states", "match_levels", "richardson",
           "observed_order", "RESOLVED", "NOT_RESOLVED", "DEGENERATE", "TOO_COARSE", "CONVERGED", "CONVERGES",
           "NOT_MONOTONIC", "GROWING", "JUDGE_FRACTION"]

RESOLVED = "resolved"
NOT_RESOLVED = "not resolved"
#: marks for a level diagram or table, so that the verdict never rests on colour alone
MARKS = {RESOLVED: "\u2713", NOT_RESOLVED: "\u2248"}          # check mark, "almost equal to"
ASCII_MARKS = {RESOLVED: "+", NOT_RESOLVED: "~"}
DEGENERATE = "degenerate on every grid (to the solver's accuracy)"
TOO_COARSE = "the grid is too coarse to judge these levels"
#: the tolerance that would merge a cluster of unresolved levels must stay below this fraction of the gap
#: to the nearest other level, or the grid is too coarse to judge them (our rule: an error of a quarter
#: of the gap on each side of a pair could already move a level halfway to its neighbour)
JUDGE_FRACTION = 0.25

ProgressFn = Callable[[str, float], None] | None
StopFn = Callable[[], bool] | None


# --- report ------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class Splitting:
    """The gap between two adjacent levels of the project grid and whether the grid resolves it
    (energies in the energy unit).  ``lower`` and ``upper`` are project-grid level numbers (adjacent
    there); ``splitting`` is E_ext(upper) - E_ext(lower), negative when the extrapolation reverses
    their order.  ``degenerate``: the two levels agree to the solver's accuracy on every grid (then
    ``splitting`` is the project grid's and ``error`` a bound on it).  ``too_coarse``: the pair is in a
    cluster of levels the grid is too coarse to judge (see :class:`CoarseCluster`)."""

    lower: int
    upper: int
    splitting: float
    error: float             # combined error estimate of the two extrapolated levels (sum), or the bound
    resolved: bool
    project_splitting: float = float("nan")   # E(upper) - E(lower) on the project's own grid
    degenerate: bool = False
    too_coarse: bool = False

    @property
    def verdict(self) -> str:
        return RESOLVED if self.resolved else NOT_RESOLVED

    @property
    def words(self) -> str:
        """The verdict in words, as every front end prints it."""
        if self.resolved:
            return RESOLVED
        if self.degenerate:
            return DEGENERATE
        return TOO_COARSE if self.too_coarse else NOT_RESOLVED

    @property
    def mark(self) -> str:
        return MARKS[self.verdict]

    @property
    def ascii_mark(self) -> str:
        return ASCII_MARKS[self.verdict]


@dataclass(frozen=True)
class CoarseCluster:
    """Adjacent project-grid levels whose splittings the grid does not resolve, with a tolerance that
    would merge them (``tolerance``, the largest combined error of their pairs) above ``JUDGE_FRACTION``
    of the gap to the nearest other level (``gap``): the grid is too coarse to judge them.

    ``needed`` is a grid on which the errors would fall to ``target`` (half the largest splitting seen
    on the project grid, and below the judging fraction of ``gap``), from the observed convergence
    order ``order``; ``estimate`` its cost (:func:`core.estimate.estimate_solve`), or None."""

    levels: tuple
    tolerance: float
    gap: float
    target: float
    order: float
    needed: Grid | None = None
    estimate: object = None


@dataclass(frozen=True, eq=False)
class ConvergenceReport:
    """Levels of a project on several grids, extrapolated to zero spacing, with error estimates.

    Arrays over levels follow the numbering of the solve on the project's own grid
    (``reference``); ``energies`` is ``[grid, level]`` with grids coarsest first (nan where a level
    was not found on that grid).  Energies in ``energy_unit``; spacings in ``length_unit``
    (``spacings`` holds one representative spacing per grid, the geometric mean of its axes;
    ``grids[i].spacing`` has them per axis).  ``noise`` is each level's solver accuracy (energy
    unit); ``observed_orders`` and ``order_errors`` the observed order and its spread from that
    accuracy.  ``complete`` is False for the partial report of a cancelled or failed study.
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
    noise: np.ndarray | None = None
    order_errors: np.ndarray | None = None
    pairs: tuple = ()
    coarse: tuple = ()
    complete: bool = True

    @property
    def levels(self) -> int:
        return int(self.extrapolated.size)

    @property
    def project_energies(self) -> np.ndarray:
        """Energies on the project's own grid (energy unit)."""
        return self.energies[self.reference_index]

    def splittings(self) -> tuple:
        """Each pair of adjacent project-grid levels, with its verdict: "resolved" when the extrapolated
        splitting exceeds the sum of the two levels' ``errors``; "not resolved" otherwise (and whenever
        an error is unknown); see :class:`Splitting` for degenerate pairs and pairs too coarse to judge."""
        return tuple(self.pairs)

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
        oe = self.order_errors if self.order_errors is not None else np.full(self.levels, np.nan)
        for i in range(self.levels):
            out.append({"level": i, "energies": [float(x) for x in self.energies[:, i]],
                        "extrapolated": float(self.extrapolated[i]), "error": float(self.errors[i]),
                        "grid_error": float(self.grid_errors[i]), "observed_order": float(self.observed_orders[i]),
                        "observed_order_error": float(oe[i]),
                        "solver_accuracy": float(self.noise[i]) if self.noise is not None else None,
                        "status": self.statuses[i] if i < len(self.statuses) else "",
                        "convergence": level_status(self, i)})
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
            "complete": bool(self.complete),
            "grids": [{"points": list(g.points), "spacing": [float(s) for s in g.spacing],
                       "representative_spacing": float(h), "project_grid": i == self.reference_index}
                      for i, (g, h) in enumerate(zip(self.grids, self.spacings))],
            "levels": self.rows(),
            "splittings": [{"lower": s.lower, "upper": s.upper, "splitting": s.splitting, "error": s.error,
                            "verdict": s.verdict, "words": s.words, "degenerate": s.degenerate,
                            "too_coarse": s.too_coarse} for s in self.splittings()],
            "too_coarse_to_judge": [{"levels": list(c.levels), "tolerance": c.tolerance, "gap": c.gap,
                                     "target_error": c.target, "order": c.order,
                                     "needed_points": list(c.needed.points) if c.needed is not None else None,
                                     "needed_estimate": c.estimate.describe() if c.estimate is not None else None}
                                    for c in self.coarse],
            "degeneracy_tolerance": float(default_degeneracy_tolerance(self)),
            "warnings": list(self.warnings),
            "wall_time_s": float(self.wall_time),
            "solve_times_s": [float(t) for t in self.extra.get("solve_times", [])],
        })


def _clusters(pairs, k: int) -> list:
    """Runs of adjacent levels joined by not-resolved pairs (project-grid numbering), as lists."""
    out, run = [], [0]
    for s in pairs:
        if not s.resolved and s.upper == run[-1] + 1:
            run.append(s.upper)
        else:
            out.append(run)
            run = [s.upper]
    out.append(run)
    return [r for r in out if r and r[0] < k]


def _judge_pairs(energies, ext, err, noise, proj, next_energy) -> tuple:
    """The adjacent pairs of the project grid, judged; and the clusters too coarse to judge as
    ``(levels, tolerance, gap)``."""
    k = ext.size
    pairs = []
    for a in range(k - 1):
        b = a + 1
        both = np.isfinite(energies[:, a]) & np.isfinite(energies[:, b])
        sg = energies[both, b] - energies[both, a]
        nab = max(noise[a], noise[b])
        if both.sum() >= 2 and np.all(np.abs(sg) <= SIGNIFICANT * nab):
            pairs.append(Splitting(a, b, float(proj[b] - proj[a]), float(np.max(np.abs(sg)) + 2 * nab), False,
                                   float(proj[b] - proj[a]), degenerate=True))
            continue
        s, comb = float(ext[b] - ext[a]), float(err[a] + err[b])
        ok = bool(np.isfinite(s) and np.isfinite(comb) and abs(s) > comb)
        pairs.append(Splitting(a, b, s, comb, ok, float(proj[b] - proj[a])))
    coarse = []
    for run in _clusters(pairs, k):
        inner = [s for s in pairs if s.lower in run and s.upper in run and not s.degenerate]
        if not inner:
            continue
        tol = max(s.error for s in inner)
        gaps = []
        if run[0] > 0:
            gaps.append(proj[run[0]] - proj[run[0] - 1])
        gaps.append((proj[run[-1] + 1] if run[-1] + 1 < k else next_energy) - proj[run[-1]])
        gaps = [g for g in gaps if np.isfinite(g)]
        gap = min(gaps) if gaps else float("inf")
        if not (np.isfinite(tol) and tol <= JUDGE_FRACTION * gap):
            coarse.append((tuple(run), float(tol), float(gap)))
            pairs = [replace(s, too_coarse=True) if s in inner else s for s in pairs]
    return tuple(pairs), coarse


def default_degeneracy_tolerance(report: ConvergenceReport) -> float:
    """Degeneracy tolerance (energy unit) for the project grid's levels, built from the error estimates.

    Levels joined by "not resolved" splittings that the grid can judge form clusters; the tolerance
    is at least the largest gap between consecutive project-grid energies inside a cluster and at
    least the largest combined error of such a pair (for a pair degenerate on every grid, its bound),
    so that a grid artefact never splits a multiplet.  Levels the grid is too coarse to judge are not
    merged: the tolerance stays below their gaps, as below every gap between clusters, when one value
    can do both (else halfway between the largest in-cluster gap and the smallest other gap).  When
    every splitting is resolved it is the largest combined error, again kept below every gap.
    """
    sp = report.splittings()
    k = report.levels
    if k < 2 or not sp:
        return 0.0
    joined = {(s.lower, s.upper) for s in sp if not s.resolved and not s.too_coarse}
    proj = report.project_energies
    inside, between = [0.0], []
    for a in range(k - 1):
        gap = float(proj[a + 1] - proj[a])
        if np.isfinite(gap):
            (inside if (a, a + 1) in joined else between).append(gap)
    max_inside = max(inside)
    errs = [s.error for s in sp if (s.lower, s.upper) in joined and np.isfinite(s.error)]
    if not errs:   # nothing joined: the largest combined error, if it stays below every gap
        errs = [max((s.error for s in sp if np.isfinite(s.error) and not s.too_coarse), default=0.0)]
    tol = max([max_inside] + errs)
    if between and tol >= min(between):
        tol = 0.5 * (max_inside + min(between)) if max_inside < min(between) else max_inside
    return float(tol)


# --- the study ---------------------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class PartialConvergence:
    """What a cancelled or failed study had done: the planned ``grids`` (coarsest first), the
    ``results`` of the grids solved (in that order), the ``report`` built from them when at least two
    were solved (``complete=False``, else None), and ``interrupted``: the partial result of the solve
    that was stopped (a :class:`core.eigensolve.Spectrum` or None)."""

    grids: tuple
    results: tuple
    report: ConvergenceReport | None
    interrupted: object = None


def _representative_spacing(g: Grid) -> float:
    return float(np.prod(g.spacing) ** (1.0 / g.ndim))


def _levels_to_report(spec, levels: int) -> int:
    """``levels``, extended to the end of the multiplet that holds the last one."""
    k = min(int(levels), spec.count)
    for grp in spec.groups:
        if grp[0] < k <= grp[-1]:
            return grp[-1] + 1
    return k


def _needed_grid(project, finest: Grid, run, tol, gap, pairs, orders, expected, noise, k_solve, parameters,
                 estimate: bool) -> CoarseCluster:
    """The grid on which a cluster's errors would fall below half its largest project-grid splitting
    (and below the judging fraction of its gap), errors scaling like h^p with the observed order."""
    inner = [abs(s.project_splitting) for s in pairs if s.lower in run and s.upper in run and not s.degenerate]
    target = max(0.5 * max(inner, default=0.0), SIGNIFICANT * float(np.max(noise[list(run)])))
    if np.isfinite(gap):
        target = min(target, JUDGE_FRACTION * gap)
    cap = 8.0 if math.isinf(expected) else expected
    ps = [p for p in orders[list(run)] if np.isfinite(p)]
    p = float(np.clip(np.median(ps), 0.5, cap)) if ps else (2.0 if math.isinf(expected) else float(expected))
    if not (np.isfinite(tol) and target > 0):
        return CoarseCluster(tuple(run), tol, gap, target, p)
    factor = max(1.0, (tol / target) ** (1.0 / p))
    needed = finest.refined(factor) if factor * max(finest.points) < 1e6 else None
    est = None
    if needed is not None and estimate:
        from .estimate import estimate_solve
        try:
            est = estimate_solve(project, states=k_solve, grid=needed, parameters=parameters,
                                 measure=needed.size <= 2_000_000, what=f"one solve on {needed.describe()}")
        except Exception:      # an estimate never fails the report
            est = None
    return CoarseCluster(tuple(run), tol, gap, float(target), p, needed, est)


def _assemble(project, gs, results, on_common, ref_index, k_report, scheme, expected, k_solve, parameters,
              t0, extra, *, complete=True, estimate=True) -> ConvergenceReport:
    """The report from the solves on ``gs`` (coarsest first): match, judge, extrapolate, warn."""
    n = len(gs)
    ref = results[ref_index]
    k = _levels_to_report(ref.spectrum, k_report)
    energies = np.full((n, k), np.nan)
    residuals = np.zeros((n, k))
    for gi, r in enumerate(results):
        idx = (np.arange(k) if gi == ref_index else
               match_levels(on_common[ref_index], ref.energies, on_common[gi], r.energies)[:k])
        ok = idx >= 0
        energies[gi, ok] = r.energies[idx[ok]]
        residuals[gi, ok] = r.spectrum.residuals[idx[ok]]
    hs = np.array([_representative_spacing(g) for g in gs])
    # the solver's accuracy: its residual tolerance times the energy scale of each grid's levels
    tol = float(project.solver.tolerance)
    floor = max(tol * energy_scale(np.sort(r.energies)) for r in results)
    noise = np.maximum(floor, residuals.max(axis=0))
    js = [judge_level(energies[:, i], hs, float(noise[i]), expected, ref.energies[i]) for i in range(k)]
    ext = np.array([j.extrapolated for j in js])
    err = np.array([j.error for j in js])
    p_obs = np.array([j.order for j in js])
    p_err = np.array([j.order_error for j in js])
    statuses = []
    for i, j in enumerate(js):
        found = int(np.isfinite(energies[:, i]).sum())
        statuses.append(j.status if found in (n, 0, 1) else f"found on {found} of {n} grids; {j.status}")
    grid_err = np.abs(energies[ref_index] - ext)
    grid_err = np.where(np.isfinite(grid_err), np.maximum(grid_err, err), np.nan)
    conv = [i for i, j in enumerate(js) if j.status == CONVERGES]
    finite = [p_obs[i] for i in conv if np.isfinite(p_obs[i])]
    p_med = float(np.median(finite)) if finite else (float("inf") if conv else float("nan"))
    next_energy = float(ref.energies[k]) if ref.energies.size > k else float("nan")
    pairs, coarse_runs = _judge_pairs(energies, ext, err, noise, energies[ref_index], next_energy)
    coarse = tuple(_needed_grid(project, gs[-1], run, t, gap, pairs, p_obs, expected, noise, k_solve, parameters,
                                estimate) for run, t, gap in coarse_runs)
    count = {s: sum(1 for j in js if j.status == s) for s in (NOT_MONOTONIC, GROWING, NOT_FOUND)}
    count["unmatched"] = sum(1 for i in range(k) if not np.all(np.isfinite(energies[:, i])))
    count["widened"] = sum(1 for j in js if j.widened)
    warnings = _warnings(n, scheme, expected, p_med, count, ref_index)
    if not complete:
        warnings.insert(0, f"incomplete: {n} of {extra.get('planned_grids', n)} grids solved"
                        + ("" if any(g == project.grid for g in gs) else "; the project's own grid was not solved"))
    u = get_units(project.units)
    extra = dict(extra, solve_times=[r.spectrum.wall_time for r in results], states_per_grid=k_solve,
                 converged_levels=sum(1 for j in js if j.status == CONVERGED))
    return ConvergenceReport(grids=tuple(gs), spacings=hs, scheme=scheme, expected_order=float(expected),
                             energies=energies, extrapolated=ext, errors=err, grid_errors=grid_err,
                             observed_orders=p_obs, observed_order=p_med, warnings=tuple(warnings),
                             energy_unit=u.energy_unit, length_unit=u.length_unit, reference=ref,
                             reference_index=ref_index, wall_time=time.perf_counter() - t0,
                             statuses=tuple(statuses), extra=extra, noise=noise, order_errors=p_err,
                             pairs=pairs, coarse=coarse, complete=complete)


def _warnings(n, scheme, expected, p_med, count, ref_index) -> list:
    out = []
    if n < 3:
        out.append("two grids give no observed order; the error estimates assume the scheme's order holds")
    if math.isinf(expected):
        if np.isfinite(p_med) and p_med < 4.0:
            out.append(f"the spectral scheme converges only like h^{p_med:.1f} here, not faster than any "
                       "power: the potential probably has a step or a kink; second-order differences (fd2) "
                       "may give the same accuracy for less; errors allow for it")
    elif np.isfinite(p_med) and abs(p_med - expected) > max(0.5, 0.25 * expected):
        out.append(f"observed convergence order {p_med:.1f} differs from the {scheme} scheme's order "
                   f"{expected:g}: the grids may be too coarse for the asymptotic range, or the potential has "
                   f"a step or a kink; " + (f"{count['widened']} error estimate(s) were widened" if count["widened"]
                                             else "treat the error estimates with care"))
    elif math.isinf(p_med) and not math.isinf(expected):
        out.append(f"the levels converge faster than the {scheme} scheme's order {expected:g} "
                   "(errors may be at the solver's accuracy)")
    if count[NOT_MONOTONIC]:
        out.append(f"{count[NOT_MONOTONIC]} level(s) are not monotonic: their changes between grids, well above "
                   "the solver's accuracy, change sign; their errors allow for no faster than second-order decay")
    if count[GROWING]:
        out.append(f"{count[GROWING]} level(s) change more between the finer grids than between the coarser: "
                   "not converging yet; their errors are the largest change and may be larger")
    if count["unmatched"]:
        out.append(f"{count['unmatched']} level(s) could not be matched on every grid (they move too much between "
                   "grids); refine the grids or report fewer levels")
    if ref_index != n - 1:
        out.append("the project's grid is not the finest of the study; the finer grids set the estimates")
    return out


def convergence_study(project: Project, *, factor: float = 1.5, grids: int = 3, levels: int | None = None,
                      parameters: Mapping[str, float] | None = None, progress: ProgressFn = None,
                      should_stop: StopFn = None, refine: str = "coarser",
                      scheme: str | None = None) -> ConvergenceReport:
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
    progress, should_stop : as for a solve.

    Raises :class:`core.errors.MemoryLimitError` (with a suggestion) before solving when the
    largest grid will not fit; :class:`core.errors.Cancelled` when ``should_stop()`` turns True and
    :class:`core.errors.NotConverged` when a grid's solve fails, both with a
    :class:`PartialConvergence` as ``partial``.
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
    extra = {"factor": float(factor), "refine": refine, "planned_grids": n}

    def partial(interrupted=None) -> PartialConvergence:
        done = len(results)
        rep = None
        if done >= 2:
            ri = min(ref_index, done - 1) if refine == "coarser" else 0
            rep = _assemble(project, gs[:done], results, on_common, ri, k_report, scheme, expected, k_solve,
                            parameters, t0, extra, complete=False, estimate=False)
        return PartialConvergence(tuple(gs), tuple(results), rep, interrupted)

    for gi, g in enumerate(gs):
        if should_stop is not None and should_stop():
            raise Cancelled(f"convergence study cancelled after {gi} of {n} grids", partial=partial())

        def sub(stage, frac, gi=gi):
            if progress is not None:
                progress(f"grid {gi + 1}/{n}", min(1.0, (gi + max(0.0, min(1.0, frac))) / n))

        try:
            r = solve_project(project, parameters=parameters, states=k_solve, grid=g, scheme=scheme, start=start,
                              progress=sub, should_stop=should_stop)
        except Cancelled as e:
            raise Cancelled(f"convergence study cancelled on grid {gi + 1} of {n}",
                            partial=partial(e.partial)) from None
        except NotConverged as e:
            raise NotConverged(f"convergence study: the solve on {g.describe()} did not converge ({e})",
                               partial=partial(e.partial)) from None
        results.append(r)
        on_common.append(r.states if g == common else interpolate_states(r.states, g, common))
        if gi + 1 < n:
            # warm start from this grid's states (its guard vectors, interpolated, were measured to help
            # less than the random vectors the solver adds)
            start = interpolate_states(r.states, g, gs[gi + 1])
    return _assemble(project, gs, results, on_common, ref_index, k_report, scheme, expected, k_solve, parameters,
                     t0, extra)
