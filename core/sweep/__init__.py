"""Parameter sweeps: many solves, level tracking, and a settled verdict for every close approach.

A sweep varies one quantity over a list of values and solves the lowest states at each value,
warm-starting every solve from the previous one.  The swept quantity is a project parameter, a
field component (``"magnetic_field[2]"``, ``"electric_field[0]"``) or a gate voltage
(``"gate:P1"``); the last two are turned into a parameter internally (:mod:`.targets`).

* **No lost level** (:mod:`.completeness`): every point is checked that nothing lies below its
  highest returned level — by a level count where that is cheap, by a filtered random probe
  otherwise — and solved again when the check finds a missed level.  The probe's filtered
  directions are kept in the next warm start.
* **Tracking** (:mod:`.tracking`): levels are followed by wavefunction overlap, solved as an
  assignment problem, so a level keeps its identity through a crossing.
* **Verdicts** (:mod:`.approaches`, :mod:`.settle`): every close approach of two tracks is decided
  from the states (at a crossing they keep their character; at an anticrossing they exchange it
  continuously), refined by warm-started solves at inserted values within a budget, and reported
  with its uncertainty or as a bound, or as "not settled".

Chunks of the sweep run in a local process pool (or on a dask.distributed cluster), each with
warm starts inside; results are the same as a serial run.
"""
from __future__ import annotations

import math
import os
import time
from collections.abc import Callable
from concurrent.futures import ProcessPoolExecutor
from concurrent.futures import TimeoutError as FutureTimeout
from dataclasses import replace

import numpy as np

from ..eigensolve import DEFAULT_DEGENERACY_TOLERANCE, energy_scale
from ..errors import Cancelled, InputError
from ..formatting import pretty_unit
from ..project import Project, project_from_dict, project_to_dict
from .approaches import Anticrossing, CloseApproach, find_close_approaches
from .completeness import CompletenessCheck
from .files import load_sweep, save_sweep
from .points import PointData, PointSolver
from .result import SweepResult
from .settle import LEAVES_SET, Settler
from .targets import SWEEP_PARAMETER, prepare_target, sweep_targets, target_unit
from .tracking import align_degenerate, labels_from_observables, overlap_matrices, track_levels

__all__ = ["completeness_summary", "Anticrossing", "CloseApproach", "CompletenessCheck", "SweepResult", "run_sweep",
           "save_sweep", "load_sweep", "sweep_targets", "track_levels", "find_close_approaches", "SWEEP_PARAMETER",
           "DEFAULT_REFINE_FRACTION"]

def completeness_summary(checks, points: int, energy_unit: str) -> str:
    """One sentence on how a sweep's points were checked for missed levels (the command line and the
    sweep view say the same)."""
    checks = [c for c in checks if c is not None]
    counted = sum(bool(c.certified) for c in checks)
    probed = [c for c in checks if c.method == "filtered probe"]
    parts = []
    if counted:
        parts.append(f"{counted} by a level count (Sylvester's law of inertia: a proof)")
    if probed:
        worst = max(c.resolution for c in probed)
        parts.append(f"{len(probed)} by a filtered random probe (no level missed by more than {worst:.2g} "
                     f"{energy_unit} below the highest one)")
    return f"checked for missed levels at {len(checks)} of {points} values: " + "; ".join(parts)


#: by default the refinement of close approaches may use this fraction of the sweep's own solves
DEFAULT_REFINE_FRACTION = 0.5


def _solve_chunk(project_dict: dict, base_dir, pname: str, values: list, k: int, count: str,
                 threads: int | None = None, check: bool = True) -> list:
    """Solve a run of consecutive values with warm starts (in a worker process, or locally)."""
    if threads:
        try:
            import numba
            numba.set_num_threads(max(1, min(threads, numba.config.NUMBA_NUM_THREADS)))
        except Exception:  # pragma: no cover - best effort only
            pass
    solver = PointSolver(project_from_dict(project_dict, base_dir=base_dir), pname, k, count=count, check=check)
    out: list = []
    _solve_run(solver, values, out)
    return out


#: after a missed level is found, at most this many earlier points are solved again
BACKFILL_POINTS = 6


def _solve_run(solver: PointSolver, values, points: list, *, should_stop=None, on_point=None) -> None:
    """Solve consecutive values with warm starts into ``points`` (the one loop of serial sweeps and of
    chunks in workers).  When a point finds a level its warm start had missed, the points before it
    are solved again from its states until one shows no change, so the level is not lost there either."""
    start = probe = None
    for v in values:
        if should_stop is not None and should_stop():
            raise Cancelled("sweep cancelled")
        pt = solver.solve(v, start, should_stop=should_stop, previous_probe=probe)
        start, probe = pt.start, pt.probe
        if pt.recovered:
            _backfill(solver, points, pt, should_stop)
        points.append(replace(pt, start=None, probe=None))
        if on_point is not None:
            on_point(len(points))


def _backfill(solver: PointSolver, points: list, found: PointData, should_stop) -> None:
    for j in range(len(points) - 1, max(-1, len(points) - 1 - BACKFILL_POINTS), -1):
        old = points[j]
        spin = found.observables.get("spin")
        seed = found.states if spin is None else found.states[np.asarray(spin) > 0]
        new = solver.solve(old.value, np.concatenate([seed, old.states]), should_stop=should_stop)
        tol = max(DEFAULT_DEGENERACY_TOLERANCE * energy_scale(old.energies), 1e-300)
        if not np.any(new.energies < old.energies - tol):
            break
        points[j] = replace(new, start=None, probe=None,
                            notes=new.notes + ("solved again: a level found missing at a later value lies "
                                               "below this value's highest level too",))


def _stack_observables(points: list) -> dict:
    """name -> (P, K); an observable missing at some points (its symmetry exists only there) is NaN there."""
    names = sorted({n for p in points for n in p.observables})
    k = points[0].energies.size
    return {n: np.array([p.observables.get(n, np.full(k, np.nan)) for p in points], dtype=float) for n in names}


def _assemble(project, target, values, points, t0, complete, notes=(), *, solver=None, refine=True,
              budget=None, gap_resolution=None, should_stop=None, keep_states=False):
    t1 = time.perf_counter()
    p = len(points)
    e = np.array([pt.energies for pt in points])
    obs = _stack_observables(points)
    grid = project.grid
    dv = grid.volume_element
    spin = obs.get("spin")
    states = align_degenerate([pt.states for pt in points], e, dv, spin)
    points = [replace(pt, states=s) for pt, s in zip(points, states)]
    tracks = track_levels(overlap_matrices(states, dv, spin)) if p > 1 else np.arange(e.shape[1])[:, None]
    labels = labels_from_observables(obs, tracks) if p > 1 else None
    te = np.stack([e[np.arange(p), t] for t in tracks]) if p > 1 else e.T
    scale = max((energy_scale(row) for row in e), default=1.0)
    degenerate = DEFAULT_DEGENERACY_TOLERANCE * scale
    resolution = float(gap_resolution) if gap_resolution is not None else max(
        degenerate, 10.0 * project.solver.tolerance * scale)
    candidates = find_close_approaches(values[:p], te, labels, degenerate=degenerate)
    budget = int(math.ceil(DEFAULT_REFINE_FRACTION * p)) if budget is None else int(budget)
    settler = Settler(values[:p], points, tracks, dv, resolution=resolution, degenerate=degenerate,
                      budget=budget if (refine and solver is not None) else 0,
                      solve=(lambda x, start: solver.solve(x, start, check=False)) if solver is not None else None,
                      should_stop=should_stop)
    approaches = []
    notes = list(notes)
    unit = pretty_unit(target_unit(project, target))
    for c in candidates:
        v = settler.settle(c)
        if v.kind == "not settled" and v.evidence.startswith("the states do not exchange"):
            notes.append(f"levels {v.tracks[0]} & {v.tracks[1]} approach near {v.position_text(target, unit)} "
                         f"without exchanging character (not an anticrossing)")
            continue
        if v.kind == "not settled" and v.evidence == LEAVES_SET:
            notes.append(f"tracks {v.tracks[0]} & {v.tracks[1]} near {v.position_text(target, unit)} are not decided "
                         f"as a pair: "
                         f"a third level takes part, or a level enters or leaves the {e.shape[1]} computed levels "
                         f"(more states may follow it)")
            continue
        approaches.append(v)
    span = float(np.ptp(values[:p])) if p else 0.0
    approaches = [replace(a, at=0.0) if abs(a.at) < 1e-9 * span else a for a in approaches]
    approaches.sort(key=lambda a: a.at)
    tracking = time.perf_counter() - t1
    kept = np.array(states) if keep_states else None
    two = None
    if points and all(pt.two_electron is not None for pt in points):
        from ..two_electron import sweep_columns
        two = sweep_columns([pt.two_electron for pt in points])
    return SweepResult(parameter=target, values=np.asarray(values[:p], dtype=float), energies=e, tracks=tracks,
                       anticrossings=tuple(approaches), observables=obs, project=project, states=kept,
                       wall_time=time.perf_counter() - t0, tracking_time=tracking, complete=complete,
                       notes=tuple(notes) + tuple(n for pt in points for n in pt.notes),
                       checks=tuple(pt.check for pt in points),
                       converged=np.array([pt.converged for pt in points], dtype=bool),
                       refinement_solves=settler.used, two_electron=two)


def run_sweep(project: Project, parameter: str, values, *, states: int | None = None,
              keep_states: bool = False, workers: int = 1, cluster: str | None = None,
              cluster_timeout: float = 5.0, progress: Callable[[str, float], None] | None = None,
              should_stop: Callable[[], bool] | None = None, refine: bool = True,
              refine_budget: int | None = None, gap_resolution: float | None = None,
              count: str = "auto", check_levels: bool = True) -> SweepResult:
    """Solve ``project`` at each of ``values`` of ``parameter`` (see :func:`sweep_targets`).

    Parameters
    ----------
    workers : ``> 1`` splits the values into consecutive chunks solved in a local process pool.
    cluster : ``"tcp://host:port"`` sends the chunks to a running dask.distributed scheduler, which
        exchanges pickled objects: use only a scheduler you trust.
    refine : settle close approaches with solves at inserted values (at most ``refine_budget``
        solves, by default half the number of values).
    gap_resolution : energy below which a gap counts as zero (a crossing); default the larger of
        the degeneracy tolerance and 10 solver tolerances, relative to the energy scale.
    count : completeness check per point: "auto" (a level count where cheap, else a filtered
        probe), "always" (a level count at every point) or "never" (the probe only).
    check_levels : False skips the completeness check (faster, but a level that a warm start
        cannot see may then be lost; the result's ``checks`` are None).

    Returns
    -------
    SweepResult

    Raises
    ------
    Cancelled
        on ``should_stop()`` or Ctrl-C; ``partial`` holds the points solved so far (``complete`` False).
    InputError
        for a target that cannot be swept or bad values.
    """
    t0 = time.perf_counter()
    vals = np.atleast_1d(np.asarray(values, dtype=float))
    if vals.ndim != 1 or vals.size < 1:
        raise InputError("a sweep needs at least one value (steps must be >= 1)")
    if not np.all(np.isfinite(vals)):
        raise InputError("sweep values must be finite numbers")
    if count not in ("auto", "always", "never"):
        raise InputError(f"count must be 'auto', 'always' or 'never', got {count!r}")
    k = int(states or project.solver.states)
    prepared, pname, _current = prepare_target(project, parameter)
    solver = PointSolver(prepared, pname, k, count=count, check=check_levels)
    opts = dict(solver=solver, refine=refine, budget=refine_budget, gap_resolution=gap_resolution,
                should_stop=should_stop, keep_states=keep_states)
    points: list = []
    try:
        if cluster is None and (workers is None or workers <= 1 or vals.size < 4):
            _solve_run(solver, vals, points, should_stop=should_stop,
                       on_point=(lambda n: progress("sweep", n / vals.size)) if progress is not None else None)
        else:
            _run_chunks(prepared, pname, vals, k, count, workers, cluster, cluster_timeout, progress,
                        should_stop, points, check_levels)
    except (Cancelled, KeyboardInterrupt) as exc:
        why = "interrupted" if isinstance(exc, KeyboardInterrupt) else "cancelled"
        partial = (_assemble(prepared, parameter, vals, points, t0, False,
                             (f"{why} after {len(points)} of {vals.size} values",), **{**opts, "refine": False})
                   if points else None)
        raise Cancelled(f"sweep {why}", partial=partial) from None
    if progress is not None and refine:
        progress("settling close approaches", 0.0)
    return _assemble(prepared, parameter, vals, points, t0, True, **opts)


def _run_chunks(prepared, pname, vals, k, count, workers, cluster, cluster_timeout, progress, should_stop,
                points: list, check: bool = True) -> None:
    """Solve consecutive chunks in processes or on a cluster; completed leading chunks go into ``points``
    as they finish (so a cancel keeps them)."""
    nchunks = max(1, min(int(workers or 1), vals.size // 2)) if cluster is None else max(2, int(workers or 2))
    bounds = np.linspace(0, vals.size, nchunks + 1).round().astype(int)
    chunks = [vals[bounds[c]:bounds[c + 1]].tolist() for c in range(nchunks) if bounds[c + 1] > bounds[c]]
    pdict = project_to_dict(prepared)
    threads = max(1, (os.cpu_count() or 1) // len(chunks))
    args = [(pdict, prepared.base_dir, pname, ch, k, count, threads, check) for ch in chunks]
    if cluster is not None:
        for res in _run_on_cluster(cluster, args, cluster_timeout, progress, should_stop):
            points.extend(res)
        return
    import multiprocessing as mp
    with ProcessPoolExecutor(max_workers=len(chunks), mp_context=mp.get_context("spawn")) as pool:
        futures = [pool.submit(_solve_chunk, *a) for a in args]
        try:
            for fut in futures:
                while True:
                    if should_stop is not None and should_stop():
                        raise Cancelled("sweep cancelled")
                    try:
                        points.extend(fut.result(timeout=0.2))
                        break
                    except FutureTimeout:
                        continue
                if progress is not None:
                    progress("sweep", len(points) / vals.size)
        except BaseException:
            for f in futures:
                f.cancel()
            pool.shutdown(wait=False, cancel_futures=True)
            raise


def _run_on_cluster(address: str, args: list, timeout: float, progress, should_stop):
    """Yield each chunk's points in order from a dask.distributed scheduler at ``address``."""
    try:
        from dask.distributed import Client
    except ImportError:
        raise InputError("running on a cluster needs dask.distributed: pip install 'wellscape[cluster]'; "
                         "or run locally with --workers") from None
    try:
        client = Client(address, timeout=f"{timeout}s")
    except Exception as exc:  # OSError / TimeoutError / dask CommClosedError
        raise InputError(f"the cluster at {address} did not answer within {timeout:g} s ({type(exc).__name__}); "
                         "run the sweep locally instead (drop --cluster, use --workers N)") from None
    try:
        futures = [client.submit(_solve_chunk, *a, pure=False) for a in args]
        for i, f in enumerate(futures):
            if should_stop is not None and should_stop():
                client.cancel(futures)
                raise Cancelled("sweep cancelled")
            yield f.result()
            if progress is not None:
                progress("sweep", (i + 1) / len(futures))
    finally:
        client.close()
