"""One sweep point: a warm-started solve, its completeness check, and the data a sweep keeps.

:class:`PointSolver` is the one place where a sweep solves (serial sweeps, worker processes,
cluster chunks and the refinement of close approaches all use it).
"""
from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np

from ..analysis import angular_momentum_z, mirror_parity, position_expectation
from ..eigensolve import lowest_states
from ..errors import InputError, NotConverged, WellscapeError
from ..potentials import project_g_factor, project_masses
from ..project import Project
from ..study import StudyResult, project_hamiltonian
from .completeness import CompletenessCheck, check_completeness

__all__ = ["PointData", "PointSolver", "point_observables"]


@dataclass(frozen=True, eq=False)
class PointData:
    """What a sweep keeps of one solved value.

    ``energies`` (K,) ascending in the energy unit (spin-resolved when the project has spin);
    ``states`` (K, *grid) the orbital state of each level; ``residuals`` (K,) energy unit;
    ``observables`` name -> (K,); ``check`` how completeness was checked; ``converged`` False
    when the solver stopped at its iteration limit (the point then holds its partial result).
    """

    value: float
    energies: np.ndarray
    states: np.ndarray
    residuals: np.ndarray
    observables: dict
    check: CompletenessCheck | None
    converged: bool = True
    seconds: float = 0.0
    notes: tuple = ()
    start: np.ndarray | None = field(default=None, repr=False)   # warm start for the next point
    probe: np.ndarray | None = field(default=None, repr=False)   # the completeness probe's vectors
    recovered: bool = False        # the first solve here missed a level, and solving again found it
    two_electron: object | None = None   # core.two_electron.TwoElectronResult for "electrons": 2


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


def _lz_labels(grid, states, lz) -> np.ndarray:
    """L_z (units of hbar) of each state where it is a good quantum number (core.labels' rule: L_z maps
    the state onto itself within LZ_SHARP, and <L_z> is within LZ_INTEGER of an integer), else NaN.
    Detected from the states, not assumed: a double dot or an elongated dot gives NaN."""
    from ..analysis import angular_momentum_z_uncertainty
    from ..labels import LZ_INTEGER, LZ_SHARP
    out = np.full(len(states), np.nan)
    for i in range(len(states)):
        n = round(float(lz[i]))
        if abs(lz[i] - n) < LZ_INTEGER and angular_momentum_z_uncertainty(grid, states, [i]) < LZ_SHARP:
            out[i] = n
    return out


def point_observables(result: StudyResult) -> dict:
    """<x>, <y>, <z>, <L_z> and the parities that exist for this potential, per orbital level.

    Mirror parities are kept only without a magnetic field (a field component normal to the mirror
    breaks it); inversion parity survives a perpendicular field in 2D.
    """
    g = result.grid
    st = result.spectrum.states
    pos = position_expectation(g, st)
    out = {name: pos[:, a] for a, name in enumerate("xyz"[: g.ndim])}
    if g.ndim >= 2:
        out["lz"] = angular_momentum_z(g, st)
        out["lz_label"] = _lz_labels(g, st, out["lz"])
    inv = _inversion_parity(g, st, result.potential)
    if inv is not None and (g.ndim == 2 or not np.any(result.magnetic_field)):
        out["parity_inversion"] = inv
    if not np.any(result.magnetic_field):
        try:
            par = mirror_parity(g, st, result.potential)
            for a in "xyz"[: g.ndim]:
                if par and a in par[0]:
                    out[f"parity_{a}"] = np.array([float(p.get(a, 0)) for p in par])
        except WellscapeError:
            pass
    return out


class PointSolver:
    """Solves the project at values of one parameter, each time checking that no level is missing.

    ``k`` orbital levels are solved; with spin the point holds the lowest ``k`` of the 2k
    spin-resolved levels.  ``count`` is passed to :func:`check_completeness` ("auto", "always",
    "never"); ``check=False`` skips the completeness check (used for refinement solves, which only
    need the two levels of a close approach).
    """

    def __init__(self, project: Project, parameter: str, k: int, *, count: str = "auto", seed: int = 2024,
                 check: bool = True):
        self.check = bool(check)
        self.project = project
        self.parameter = parameter
        self.k = int(k)
        self.count = count
        self.rng = np.random.default_rng(seed)
        self.solves = 0

    def _solve_once(self, value: float, start, should_stop):
        h, v, params, scheme, reason = project_hamiltonian(self.project, parameters={self.parameter: value})
        converged = True
        try:
            spec = lowest_states(h, self.k, tolerance=self.project.solver.tolerance, start=start,
                                 should_stop=should_stop)
        except NotConverged as exc:
            if exc.partial is None:
                raise
            spec, converged = exc.partial, False
        self.solves += 1
        result = StudyResult(project=self.project, parameters=params, grid=h.grid, potential=v, spectrum=spec,
                             masses=project_masses(self.project, params), scheme=scheme, scheme_reason=reason,
                             magnetic_field=tuple(h.magnetic_field), g_factor=project_g_factor(self.project, params))
        return h, result, converged

    def solve(self, value: float, start: np.ndarray | None = None, *, check: bool = True,
              should_stop=None, previous_probe=None) -> PointData:
        """Solve at ``value`` (warm from ``start`` when given) and check completeness.

        When the check finds a missed level the point is solved again from the probe's vectors
        together with the old start, and cold as a last resort.
        """
        t0 = time.perf_counter()
        notes = []
        recovered = False
        try:
            h, result, converged = self._solve_once(value, start, should_stop)
            chk, probe = None, None
            if check and self.check:
                chk, probe = check_completeness(h, result.spectrum, rng=self.rng, count=self.count,
                                                previous=previous_probe)
                recovered = chk.missed
                attempts = [("from the probe's vectors", lambda: np.concatenate([probe, result.spectrum.block()])),
                            ("cold", lambda: None)]
                for how, make_start in attempts:
                    if not chk.missed:
                        break
                    notes.append(f"{chk.detail}; solved again {how}")
                    h, result, converged = self._solve_once(value, make_start(), should_stop)
                    chk, probe = check_completeness(h, result.spectrum, rng=self.rng, count=self.count)
        except WellscapeError as exc:
            raise type(exc)(f"at {self.parameter} = {value:.6g}: {exc}") from None
        if result.energies.size < self.k:
            raise InputError(f"at {self.parameter} = {value:.6g}: only {result.energies.size} states were found")
        if not converged:
            notes.append("the solver did not converge here; the point holds its partial result")
        if recovered and not chk.missed:
            notes[-1] += " (found it)"
        e, obs, st, res = _spin_resolved(result, self.k)
        two = None
        if check and getattr(self.project, "electrons", 1) == 2:
            from ..two_electron import two_electron_for_study
            two = two_electron_for_study(result, should_stop=should_stop)
        spec = result.spectrum
        nxt = spec.block()
        if probe is not None and len(probe):
            # fresh directions for the next warm start: returned states, probe vectors, then guards
            nxt = np.concatenate([spec.states, probe.astype(spec.states.dtype, copy=False),
                                  spec.block()[spec.states.shape[0]:]])
        return PointData(value=float(value), energies=e, states=st, residuals=res, observables=obs, check=chk,
                         converged=converged, seconds=time.perf_counter() - t0, notes=tuple(notes), start=nxt,
                         probe=probe, recovered=recovered, two_electron=two)


def _spin_resolved(result: StudyResult, k: int) -> tuple:
    """(energies, observables, states, residuals) of the lowest k orbital levels; with spin, of their 2k
    spin-resolved levels, each holding its orbital state and an observable "spin" (+-1/2)."""
    obs = {n: a[:k] for n, a in point_observables(result).items()}
    e = result.energies[:k].copy()
    st = result.spectrum.states[:k]
    res = np.asarray(result.spectrum.residuals[:k], dtype=float)
    if result.project.spin:
        from ..study import spin_levels
        sl = spin_levels(result)
        keep = sl.orbital < k
        orb = sl.orbital[keep]
        e = sl.energies[keep]
        obs = {n: a[orb] for n, a in obs.items()}
        obs["spin"] = sl.spin[keep]
        st = st[orb]
        res = res[orb]
    return e, obs, st.copy(), res
