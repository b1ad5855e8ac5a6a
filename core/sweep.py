"""Parameter sweeps: many solves, level tracking, crossings and anticrossings.

A sweep varies one quantity over a list of values and solves the lowest
states at each value, warm-starting every solve from the previous one.  The
swept quantity is a project parameter, a field component
(``"magnetic_field[2]"``, ``"electric_field[0]"``) or a gate voltage
(``"gate:P1"``); the last two are turned into a parameter internally, so one
mechanism drives everything.

Levels are tracked from point to point by wavefunction overlap, solved as an
assignment problem (``scipy.optimize.linear_sum_assignment``), so that a level
keeps its identity through a crossing.  Every close approach of two tracked
levels is classified:

* a **crossing** when the tracked levels pass through each other and their
  symmetry labels (mirror parities) differ, which allows it;
* an **anticrossing** when they approach and turn back, or pass with equal
  labels (then the true gap is below the sampling).  Its minimum gap (2t,
  t the tunnel coupling for a double dot) comes from a fit of the two-level
  form ``sqrt(s^2 (x - x0)^2 + gap^2)`` to the separation near the minimum.

Chunks of the sweep run in a local process pool (or on a dask.distributed
cluster), each with warm starts inside; results are the same as a serial run.
"""
from __future__ import annotations

import json
import math
import os
import time
import warnings
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Callable, Optional, Sequence

import numpy as np
from scipy.optimize import curve_fit, linear_sum_assignment

from .analysis import angular_momentum_z, mirror_parity, position_expectation
from .eigensolve import DEFAULT_DEGENERACY_TOLERANCE, energy_scale
from .errors import Cancelled, InputError, ProjectError, WellscapeError
from .project import GatesTerm, Project, project_from_dict, project_to_dict
from .study import solve_project
from .units import get_units

__all__ = ["Anticrossing", "SweepResult", "run_sweep", "save_sweep", "load_sweep", "sweep_targets",
           "track_levels", "find_close_approaches"]

SWEEP_PARAMETER = "sweep_value"


@dataclass(frozen=True)
class Anticrossing:
    """A close approach of tracks ``a`` and ``b`` (track ids = level indices at the first point)."""

    at: float                 # swept value at the smallest separation
    gap: float                # minimum gap (fit where available), energy unit
    tracks: tuple
    kind: str                 # "anticrossing" or "crossing"
    index: int                # point index of the smallest sampled separation
    sampled_gap: float        # smallest sampled separation
    fit: dict = field(default_factory=dict)
    reason: str = ""

    @property
    def tunnel_coupling(self) -> float:
        """t = gap / 2 (two-level model)."""
        return 0.5 * self.gap

    def to_dict(self) -> dict:
        return {"at": self.at, "gap": self.gap, "levels": list(self.tracks), "kind": self.kind,
                "sampled_gap": self.sampled_gap, "fit": self.fit, "reason": self.reason}


@dataclass(frozen=True, eq=False)
class SweepResult:
    parameter: str
    values: np.ndarray            # (P,)
    energies: np.ndarray          # (P, K), ascending at each point
    tracks: np.ndarray            # (T, P): level index of track t at point p
    anticrossings: tuple
    observables: dict             # name -> (P, K)
    project: Project
    states: Optional[np.ndarray] = None   # (P, K, *grid) when kept
    wall_time: float = 0.0
    tracking_time: float = 0.0
    complete: bool = True
    notes: tuple = ()

    @property
    def units(self):
        return get_units(self.project.units)

    def track_energies(self) -> np.ndarray:
        """(T, P) energy of each tracked level along the sweep."""
        p = np.arange(self.values.size)
        return np.stack([self.energies[p, t] for t in self.tracks]) if self.tracks.size else np.zeros((0, p.size))

    def track_observable(self, name: str) -> np.ndarray:
        obs = self.observables[name]
        p = np.arange(self.values.size)
        return np.stack([obs[p, t] for t in self.tracks])

    @property
    def crossings(self) -> tuple:
        return tuple(a for a in self.anticrossings if a.kind == "crossing")

    def to_json_dict(self) -> dict:
        return {"parameter": self.parameter, "values": self.values.tolist(),
                "energies": self.energies.tolist(), "tracks": self.tracks.tolist(),
                "anticrossings": [a.to_dict() for a in self.anticrossings if a.kind == "anticrossing"],
                "crossings": [a.to_dict() for a in self.anticrossings if a.kind == "crossing"],
                "units": self.units.describe(), "complete": self.complete}


# --- what can be swept --------------------------------------------------------------------------

def sweep_targets(project: Project) -> list:
    """Names that :func:`run_sweep` accepts for this project."""
    names = list(project.parameters)
    names += [f"electric_field[{i}]" for i in range(len(project.electric_field))]
    names += [f"magnetic_field[{i}]" for i in range(3)]
    for t in project.potential:
        if isinstance(t, GatesTerm):
            names += [f"gate:{g.label}" for g in t.gates]
    return names


def _prepare(project: Project, target: str) -> tuple:
    """(project with the target driven by a parameter, parameter name, current value)."""
    from .potentials import resolve_parameters, resolve_value
    if target in project.parameters:
        return project, target, project.parameters[target]
    params = resolve_parameters(project)
    new_params = dict(project.parameters)
    new_params[SWEEP_PARAMETER] = 0.0
    for field_name in ("electric_field", "magnetic_field"):
        if target.startswith(field_name + "[") and target.endswith("]"):
            try:
                i = int(target[len(field_name) + 1:-1])
                vals = list(getattr(project, field_name))
                current = resolve_value(vals[i], params, target)
            except (ValueError, IndexError):
                break
            vals[i] = SWEEP_PARAMETER
            new_params[SWEEP_PARAMETER] = current
            return replace(project, parameters=new_params, **{field_name: tuple(vals)}), SWEEP_PARAMETER, current
    if target.startswith("gate:"):
        label = target[5:]
        terms = list(project.potential)
        for ti, t in enumerate(terms):
            if isinstance(t, GatesTerm):
                gates = list(t.gates)
                for gi, g in enumerate(gates):
                    if g.label == label:
                        current = resolve_value(g.voltage, params, target)
                        gates[gi] = replace(g, voltage=SWEEP_PARAMETER)
                        terms[ti] = replace(t, gates=tuple(gates))
                        new_params[SWEEP_PARAMETER] = current
                        return (replace(project, parameters=new_params, potential=tuple(terms)),
                                SWEEP_PARAMETER, current)
    known = ", ".join(sweep_targets(project))
    raise InputError(f"cannot sweep {target!r}: not a parameter, field component or gate of this project. "
                     f"Sweepable: {known}")


# --- solving ---------------------------------------------------------------------------------

def _observables(result) -> dict:
    g = result.grid
    st = result.spectrum.states
    pos = position_expectation(g, st)
    out = {name: pos[:, a] for a, name in enumerate("xyz"[: g.ndim])}
    if g.ndim >= 2:
        out["lz"] = angular_momentum_z(g, st)
    inv = _inversion_parity(g, st, result.potential)
    if inv is not None:
        out["parity_inversion"] = inv
    try:
        par = mirror_parity(g, st, result.potential)
        for a in "xyz"[: g.ndim]:
            if par and a in par[0]:
                out[f"parity_{a}"] = np.array([float(p.get(a, 0)) for p in par])
    except WellscapeError:
        pass
    return out


def _inversion_parity(grid, states, potential, rtol=1e-9):
    """Parity under r -> -r about the grid centre (a rotation by pi in 2D), when the grid and the
    potential have that symmetry; it survives a perpendicular magnetic field, unlike single mirrors.
    Returns +1/-1 per state (0 when mixed), or None when the symmetry is absent."""
    flip = (slice(None, None, -1),) * grid.ndim
    for ax in grid.axes:
        if not np.allclose(ax - ax.mean(), -(ax[::-1] - ax.mean()), atol=1e-9 * np.ptp(ax)):
            return None
    v = np.asarray(potential)
    if not np.allclose(v, v[flip], rtol=rtol, atol=rtol * max(np.abs(v).max(), 1e-300)):
        return None
    flat = states.reshape(len(states), -1)
    mirrored = states[(slice(None),) + flip].reshape(len(states), -1)
    val = np.real(np.sum(np.conj(flat) * mirrored, axis=1)) / np.maximum(np.sum(np.abs(flat) ** 2, axis=1), 1e-300)
    return np.where(val > 0.99, 1.0, np.where(val < -0.99, -1.0, 0.0))


def _point_data(result, k: int):
    """(energies, observables, states) of one solve; spin-resolved (2k levels) when the project asks."""
    obs = {n: a[:k] for n, a in _observables(result).items()}
    e = result.energies[:k].copy()
    st = result.spectrum.states[:k]
    if result.project.spin:
        from .study import spin_levels
        sl = spin_levels(result)
        keep = sl.orbital < k
        orb = sl.orbital[keep]
        e = sl.energies[keep]
        obs = {n: a[orb] for n, a in obs.items()}
        obs["spin"] = sl.spin[keep]
        st = st[orb]
    return e, obs, st.copy()


def _solve_chunk(project_dict: dict, base_dir, pname: str, values: list, k: int, keep_states: bool,
                 threads: Optional[int] = None, start=None):
    """Solve a run of consecutive values with warm starts (runs in a worker process or locally)."""
    if threads:
        try:
            import numba
            numba.set_num_threads(max(1, min(threads, numba.config.NUMBA_NUM_THREADS)))
        except Exception:  # pragma: no cover - best effort only
            pass
    project = project_from_dict(project_dict, base_dir=base_dir)
    energies, obs, states, edges = [], [], [], []
    prev = None
    for i, v in enumerate(values):
        try:
            r = solve_project(project, parameters={pname: v}, states=k,
                              start=prev.spectrum.block() if prev is not None else start)
        except WellscapeError as exc:
            raise type(exc)(f"at {pname} = {v:.6g}: {exc}") from None
        if r.energies.size < k:
            raise InputError(f"at {pname} = {v:.6g}: only {r.energies.size} states were found")
        e, o, st = _point_data(r, k)
        energies.append(e)
        obs.append(o)
        states.append(st)
        prev = r
    return energies, obs, states


def _iter_local(project, pname, values, k, keep_states, progress, should_stop):
    """Serial sweep in this process, yielding (index, energies, obs, states) per point."""
    prev = None
    for i, v in enumerate(values):
        if should_stop is not None and should_stop():
            raise Cancelled("sweep cancelled")
        try:
            r = solve_project(project, parameters={pname: v}, states=k,
                              start=prev.spectrum.block() if prev is not None else None)
        except WellscapeError as exc:
            raise type(exc)(f"at {pname} = {v:.6g}: {exc}") from None
        if r.energies.size < k:
            raise InputError(f"at {pname} = {v:.6g}: only {r.energies.size} states were found")
        e, o, st = _point_data(r, k)
        yield i, e, o, st
        prev = r
        if progress is not None:
            progress("sweep", (i + 1) / len(values))


def track_levels(overlaps: Sequence[np.ndarray]) -> np.ndarray:
    """Tracks from consecutive overlap matrices |<psi_i(p)|psi_j(p+1)>|^2 (K x K each).

    Returns (K, P) with the level index of each track at each point.
    """
    if not overlaps:
        return np.zeros((0, 1), dtype=int)
    k = overlaps[0].shape[0]
    p = len(overlaps) + 1
    tracks = np.zeros((k, p), dtype=int)
    tracks[:, 0] = np.arange(k)
    for s, ov in enumerate(overlaps):
        rows, cols = linear_sum_assignment(-ov)
        step = np.empty(k, dtype=int)
        step[rows] = cols
        tracks[:, s + 1] = step[tracks[:, s]]
    return tracks


def _two_level(x, x0, s, gap):
    return np.sqrt((s * (x - x0)) ** 2 + gap**2)


def find_close_approaches(values, track_e, labels=None, *, relative=0.3, degenerate: float = 0.0) -> list:
    """Classify close approaches of every pair of tracks.

    ``track_e`` is (T, P); ``labels`` an optional (T, P) array of symmetry labels (equal labels
    forbid a crossing).  A close approach is an interior local minimum of the separation that is
    smaller than ``relative`` times the separation at the ends of its window, or a sign change.
    Two tracks closer than ``degenerate`` (absolute energy: the solver's degeneracy tolerance) at a
    point are degenerate there: such a point is neither a minimum nor one side of a sign change.
    Without it a sweep that starts at a symmetric point (a circular dot, zero field) reported its
    degenerate levels' solver noise (~1e-8 of the energy) as an anticrossing at the start.
    """
    values = np.asarray(values, dtype=float)
    t_count, p = track_e.shape
    found = []
    if p < 3:
        return found
    for a in range(t_count):
        for b in range(a + 1, t_count):
            d = track_e[b] - track_e[a]
            ad = np.abs(d)
            tiny = max(1e-9 * max(float(np.abs(track_e).max()), 1e-300), float(degenerate))
            nz = np.nonzero(ad > tiny)[0]            # skip points where the two are degenerate
            sign_change = [(nz[q], nz[q + 1]) for q in range(nz.size - 1) if d[nz[q]] * d[nz[q + 1]] < 0]
            for i, i2 in sign_change:
                j = int(np.argmin(ad[i:i2 + 1])) + i
                # compare labels away from the degeneracy, where the states have a definite symmetry
                differ = labels is not None and (np.any(labels[a, i] != labels[b, i])
                                                 or np.any(labels[a, i2] != labels[b, i2]))
                # degenerate at a sampled value in between: they meet there (any gap is below what the
                # solver resolves, whatever the labels say: a symmetry they do not capture, such as
                # separability, may allow it); otherwise interpolate the crossing point linearly
                met = i < j < i2 and ad[j] <= tiny
                x0 = values[j] if met else values[i] - d[i] * (values[i2] - values[i]) / (d[i2] - d[i])
                if differ or labels is None or met:
                    why = ("the levels pass through each other" if not met else
                           f"the levels meet at a sampled value, degenerate there within the solver's "
                           f"tolerance ({tiny:.3g} in energy)")
                    found.append(Anticrossing(at=float(x0), gap=0.0, tracks=(a, b), kind="crossing", index=int(j),
                                              sampled_gap=float(ad[j]),
                                              reason=why + (" and their symmetry labels differ" if differ else "")))
                else:
                    found.append(Anticrossing(at=float(x0), gap=float(ad[j]), tracks=(a, b), kind="anticrossing",
                                              index=int(j), sampled_gap=float(ad[j]),
                                              reason="equal symmetry labels forbid a crossing; the gap is "
                                                     "smaller than the sampling resolves (an upper bound)"))
            for j in range(1, p - 1):
                if not (ad[j] <= ad[j - 1] and ad[j] <= ad[j + 1]) or ad[j] <= tiny:
                    continue
                if np.sign(d[j - 1]) != np.sign(d[j + 1]):
                    continue
                lo, hi = j, j
                while lo > 0 and ad[lo - 1] >= ad[lo]:
                    lo -= 1
                while hi < p - 1 and ad[hi + 1] >= ad[hi]:
                    hi += 1
                edge = min(ad[lo], ad[hi])
                if not ad[j] < relative * edge:
                    continue
                fit = {}
                gap = float(ad[j])
                w = slice(max(lo, j - 8), min(hi, j + 8) + 1)
                xs, ys = values[w], ad[w]
                if xs.size >= 4:
                    slope0 = (ys.max() - ys.min()) / max(abs(xs[-1] - xs[0]) / 2, 1e-300)
                    try:
                        with warnings.catch_warnings():
                            warnings.simplefilter("ignore")
                            popt, _ = curve_fit(_two_level, xs, ys, p0=[values[j], slope0, gap], maxfev=4000)
                        resid = ys - _two_level(xs, *popt)
                        if abs(popt[2]) <= 1.5 * gap + 1e-300 and xs.min() <= popt[0] <= xs.max():
                            fit = {"centre": float(popt[0]), "gap": float(abs(popt[2])), "slope": float(abs(popt[1])),
                                   "rms": float(np.sqrt(np.mean(resid**2))), "points": int(xs.size)}
                            gap = float(abs(popt[2]))
                    except (RuntimeError, ValueError):
                        fit = {}
                found.append(Anticrossing(at=float(fit.get("centre", values[j])), gap=gap, tracks=(a, b),
                                          kind="anticrossing", index=int(j), sampled_gap=float(ad[j]), fit=fit,
                                          reason="the levels approach and turn back"))
    span = float(np.ptp(values)) if values.size else 0.0
    found = [replace(c, at=0.0) if abs(c.at) < 1e-9 * span else c for c in found]
    found.sort(key=lambda c: c.at)
    return found


def _align_degenerate(states_list, energies, dv, spin=None, rel=1e-7):
    """Within each degenerate multiplet at a point, rotate the basis to best match the previous point's
    states (polar decomposition of the overlap block), so tracking is not confused by an arbitrary basis."""
    out = list(states_list)
    for p in range(1, len(out)):
        e = energies[p]
        scale = energy_scale(e)
        groups, cur = [], [0]
        for i in range(1, e.size):
            same_spin = spin is None or spin[p][i] == spin[p][cur[-1]]
            if e[i] - e[cur[-1]] <= rel * scale and same_spin:
                cur.append(i)
            else:
                groups.append(cur)
                cur = [i]
        groups.append(cur)
        if all(len(g) == 1 for g in groups):
            continue
        cur_states = out[p].copy()
        prev = out[p - 1].reshape(len(out[p - 1]), -1)
        for g in groups:
            if len(g) == 1:
                continue
            block = cur_states[g].reshape(len(g), -1)
            c = (np.conj(prev) @ block.T) * dv                 # <prev_i | cur_g>
            best = np.argsort(-np.sum(np.abs(c) ** 2, axis=1))[: len(g)]
            u, _, vh = np.linalg.svd(c[best].T)                # polar factor of the |G| x |G| block
            rot = u @ vh                                        # columns: combination for each prev state
            cur_states[g] = (rot.T @ block).reshape((len(g),) + out[p].shape[1:])
        out[p] = cur_states
    return out


def _labels_from_observables(obs: dict, tracks: np.ndarray) -> Optional[np.ndarray]:
    keys = [k for k in sorted(obs) if k.startswith("parity_") or k == "spin"]
    if not keys:
        return None
    p = np.arange(tracks.shape[1])
    codes = np.zeros(tracks.shape, dtype=np.int64)
    for n, key in enumerate(keys):
        vals = np.stack([obs[key][p, t] for t in tracks])
        codes += (np.round(2 * vals).astype(np.int64) + 2) * (5 ** n)
    return codes


def _assemble(project, target, values, energies, obs_list, states_list, keep_states, t0, complete, notes=()):
    t1 = time.perf_counter()
    p = len(energies)
    e = np.array(energies)
    obs = {name: np.array([o[name] for o in obs_list]) for name in (obs_list[0] if obs_list else {})}
    grid = project.grid
    states_list = _align_degenerate(states_list, e, grid.volume_element,
                                    obs.get("spin") if "spin" in obs else None)
    overlaps = []
    for i in range(p - 1):
        a, b = states_list[i], states_list[i + 1]
        if a is None or b is None:
            raise InputError("internal: states missing for tracking")
        ov = np.abs(np.conj(a.reshape(len(a), -1)) @ b.reshape(len(b), -1).T) ** 2 * grid.volume_element**2
        if "spin" in obs:                               # spinor overlap: orbital overlap times same spin
            ov = ov * (obs["spin"][i][:, None] == obs["spin"][i + 1][None, :])
        overlaps.append(ov)
    tracks = track_levels(overlaps) if p > 1 else np.arange(e.shape[1])[:, None]
    labels = _labels_from_observables(obs, tracks) if p > 1 else None
    te = np.stack([e[np.arange(p), t] for t in tracks]) if p > 1 else e.T
    scale = max((energy_scale(row) for row in e), default=1.0)
    approaches = tuple(find_close_approaches(values[:p], te, labels,
                                             degenerate=DEFAULT_DEGENERACY_TOLERANCE * scale))
    tracking = time.perf_counter() - t1
    kept = np.array(states_list) if keep_states else None
    return SweepResult(parameter=target, values=np.asarray(values[:p], dtype=float), energies=e, tracks=tracks,
                       anticrossings=approaches, observables=obs, project=project, states=kept,
                       wall_time=time.perf_counter() - t0, tracking_time=tracking, complete=complete,
                       notes=tuple(notes))


def run_sweep(project: Project, parameter: str, values, *, states: Optional[int] = None,
              keep_states: bool = False, workers: int = 1, cluster: Optional[str] = None,
              cluster_timeout: float = 5.0, progress: Optional[Callable[[str, float], None]] = None,
              should_stop: Optional[Callable[[], bool]] = None) -> SweepResult:
    """Solve ``project`` at each of ``values`` of ``parameter`` (see :func:`sweep_targets`).

    ``workers > 1`` splits the values into consecutive chunks solved in a local process pool;
    ``cluster="tcp://host:port"`` sends the chunks to a running dask.distributed scheduler.
    On cancel, :class:`Cancelled` carries the partial result (the points solved so far).
    """
    t0 = time.perf_counter()
    vals = np.atleast_1d(np.asarray(values, dtype=float))
    if vals.ndim != 1 or vals.size < 1:
        raise InputError("a sweep needs at least one value (steps must be >= 1)")
    if not np.all(np.isfinite(vals)):
        raise InputError("sweep values must be finite numbers")
    k = int(states or project.solver.states)
    prepared, pname, _current = _prepare(project, parameter)
    if cluster is None and (workers is None or workers <= 1 or vals.size < 4):
        energies, obs, sts = [], [], []
        try:
            for i, e, o, s in _iter_local(prepared, pname, vals, k, keep_states, progress, should_stop):
                energies.append(e)
                obs.append(o)
                sts.append(s)
        except Cancelled:
            partial = (_assemble(prepared, parameter, vals, energies, obs, sts, keep_states, t0, False,
                                 ("cancelled",)) if energies else None)
            raise Cancelled("sweep cancelled", partial=partial) from None
        return _assemble(prepared, parameter, vals, energies, obs, sts, keep_states, t0, True)

    nchunks = max(1, min(int(workers or 1), vals.size // 2)) if cluster is None else max(2, int(workers or 2))
    bounds = np.linspace(0, vals.size, nchunks + 1).round().astype(int)
    chunks = [vals[bounds[c]:bounds[c + 1]].tolist() for c in range(nchunks) if bounds[c + 1] > bounds[c]]
    pdict = project_to_dict(prepared)
    base = prepared.base_dir
    threads = max(1, (os.cpu_count() or 1) // len(chunks))
    args = [(pdict, base, pname, ch, k, keep_states, threads) for ch in chunks]
    results = [None] * len(chunks)
    if cluster is not None:
        results = _run_on_cluster(cluster, args, cluster_timeout, progress, should_stop)
    else:
        import multiprocessing as mp
        ctx = mp.get_context("spawn")
        with ProcessPoolExecutor(max_workers=len(chunks), mp_context=ctx) as pool:
            futures = [pool.submit(_solve_chunk, *a) for a in args]
            done = 0
            for c, fut in enumerate(futures):
                while True:
                    if should_stop is not None and should_stop():
                        for f in futures:
                            f.cancel()
                        pool.shutdown(wait=False, cancel_futures=True)
                        raise Cancelled("sweep cancelled")
                    try:
                        results[c] = fut.result(timeout=0.2)
                        break
                    except TimeoutError:
                        continue
                    except WellscapeError:
                        raise
                done += len(chunks[c])
                if progress is not None:
                    progress("sweep", done / vals.size)
    energies, obs, sts = [], [], []
    for e, o, s in results:
        energies += e
        obs += o
        sts += s
    # tracking across chunks needs the states at chunk edges; interior points of a chunk without
    # kept states are tracked within the chunk by re-solving neighbours is not needed: every point
    # keeps its states when tracking across the whole sweep, so ask for them when not kept
    return _assemble(prepared, parameter, vals, energies, obs, sts, keep_states, t0, True)


def _fill_states_for_tracking(project, pname, vals, k, sts):
    """Chunks return only edge states unless asked; tracking needs every point, so re-solve (warm) the gaps."""
    out = list(sts)
    prev = None
    for i, s in enumerate(out):
        if s is None:
            r = solve_project(project, parameters={pname: vals[i]}, states=k,
                              start=prev if prev is not None else None)
            out[i] = r.spectrum.states[:k].copy()
            prev = r.spectrum.block()
        else:
            prev = None
    return out


def _run_on_cluster(address: str, args: list, timeout: float, progress, should_stop) -> list:
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
        results = []
        for i, f in enumerate(futures):
            if should_stop is not None and should_stop():
                client.cancel(futures)
                raise Cancelled("sweep cancelled")
            results.append(f.result())
            if progress is not None:
                progress("sweep", (i + 1) / len(futures))
        return results
    finally:
        client.close()


# --- files -----------------------------------------------------------------------------------

def save_sweep(result: SweepResult, path) -> tuple:
    """Write ``PATH.npz`` (everything, project echoed) and ``PATH.csv`` (tracked energies, units in header)."""
    p = Path(path)
    npz = p.with_suffix(".npz")
    csv_path = p.with_suffix(".csv")
    arrays = {"values": result.values, "energies": result.energies, "tracks": result.tracks,
              "parameter": np.array(result.parameter), "project": np.array(json.dumps(project_to_dict(result.project))),
              "approaches": np.array(json.dumps([a.to_dict() for a in result.anticrossings])),
              "units": np.array(json.dumps(result.units.describe()))}
    for name, arr in result.observables.items():
        arrays[f"obs_{name}"] = arr
    if result.states is not None:
        arrays["states"] = result.states
    tmp = npz.with_name(npz.stem + ".tmp.npz")
    np.savez_compressed(tmp, **arrays)
    os.replace(tmp, npz)
    u = result.units
    te = result.track_energies()
    header = [f"{result.parameter}"] + [f"track {t} [{u.energy_unit}]" for t in range(te.shape[0])]
    lines = [",".join(header)]
    for i, v in enumerate(result.values):
        lines.append(",".join([f"{v:.12g}"] + [f"{te[t, i]:.12g}" for t in range(te.shape[0])]))
    csv_path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return npz, csv_path


def load_sweep(path) -> SweepResult:
    """Read a sweep written by :func:`save_sweep` (no pickles)."""
    p = Path(path)
    if p.suffix != ".npz":
        p = p.with_suffix(".npz")
    try:
        with np.load(p, allow_pickle=False) as z:
            data = {k: z[k] for k in z.files}
    except FileNotFoundError:
        raise InputError(f"no such sweep file: {p}") from None
    except (ValueError, OSError) as exc:
        raise InputError(f"{p} is not a sweep file: {exc}") from None
    try:
        project = project_from_dict(json.loads(str(data["project"])))
        approaches = tuple(Anticrossing(at=a["at"], gap=a["gap"], tracks=tuple(a["levels"]), kind=a["kind"],
                                        index=0, sampled_gap=a.get("sampled_gap", a["gap"]), fit=a.get("fit", {}),
                                        reason=a.get("reason", ""))
                           for a in json.loads(str(data["approaches"])))
        obs = {k[4:]: v for k, v in data.items() if k.startswith("obs_")}
        return SweepResult(parameter=str(data["parameter"]), values=data["values"], energies=data["energies"],
                           tracks=data["tracks"], anticrossings=approaches, observables=obs, project=project,
                           states=data.get("states"))
    except (KeyError, ValueError, TypeError) as exc:
        raise InputError(f"{p} is not a complete sweep file ({exc})") from None
