"""Settle every close approach from the states: crossing, anticrossing, or "not settled".

Two-level model (common practice; e.g. C. Zener, Proc. R. Soc. A 137, 696 (1932)): near a close
approach of levels A and B, H = [[eA(x), gap/2], [gap/2, eB(x)]] with eA - eB = s (x - x0).  The
lower state is cos(th) |A> + sin(th) |B> with 2 th = atan2(gap, -s (x - x0)).  Between samples
x1 < x0 < x2 with separations d1, d2 the lower state's overlap with itself is

    R = |<lower(x1)|lower(x2)>|^2 = sin^2((asin(gap/d1) + asin(gap/d2)) / 2),

zero for an exact crossing (the states keep their character and exchange places) and growing with
the gap.  Solved for the gap, R gives it without resolving the minimum.  The states carry errors
of angle at most ||r|| / delta (residual over the distance to the nearest other level; Davis &
Kahan, SIAM J. Numer. Anal. 7, 1 (1970)), so R gives an interval for the gap:

* its lower end above ``resolution``: an **anticrossing**; the minimum is then refined with
  warm-started solves at the fitted centre and half-width, and the gap and centre come from a fit
  of sqrt(s^2 (x - x0)^2 + gap^2), with uncertainties from the fit and its change between rounds;
* its upper end below ``resolution``: a **crossing**, reported with that upper bound;
* otherwise a value is inserted at the interpolated crossing point (bisection) until one of the
  two holds, or the refinement budget runs out ("not settled", with the interval).
"""
from __future__ import annotations

import math
import warnings
from collections.abc import Callable
from dataclasses import dataclass, replace

import numpy as np
from scipy.optimize import brentq, curve_fit

from .approaches import Anticrossing, two_level_gap
from .points import PointData

__all__ = ["Settler", "gap_from_mixing"]

#: an anticrossing is settled when two successive fits agree to this fraction of the gap
GAP_RTOL = 0.01
#: refinement rounds of one anticrossing
MAX_ROUNDS = 4
#: the pair's states at the two ends of a close approach must span nearly the same plane: the sum of
#: their four squared overlaps (2 for the same plane) must exceed this
PAIR_KEPT = 1.5
LEAVES_SET = "not a pair: a third level takes part, or a level enters or leaves the computed set"


def _mixing_of_gap(gap: float, d1: float, d2: float) -> float:
    return math.sin(0.5 * (math.asin(min(gap / d1, 1.0)) + math.asin(min(gap / d2, 1.0)))) ** 2


def gap_from_mixing(r: float, d1: float, d2: float) -> float:
    """The two-level gap for which the lower state's self-overlap across a close approach is ``r``
    (separations ``d1``, ``d2`` at the two samples); ``min(d1, d2)`` when ``r`` is larger than the
    model allows."""
    top = min(d1, d2)
    if r <= 0 or top <= 0:
        return 0.0
    if r >= _mixing_of_gap(top, d1, d2):
        return top
    return brentq(lambda g: _mixing_of_gap(g, d1, d2) - r, 0.0, top, xtol=1e-15 * top, rtol=1e-12)


@dataclass
class _Pair:
    """Two levels at one value, lower first: energies, unit-norm states (flat), residuals, spins."""

    x: float
    e: np.ndarray
    psi: np.ndarray
    err: np.ndarray        # Davis-Kahan bound on each state's error angle
    point: PointData | None = None   # the solve it came from (a warm start for values near it)

    @property
    def d(self) -> float:
        return float(self.e[1] - self.e[0])


def _pair_at(point: PointData, levels, dv: float) -> _Pair:
    lv = sorted((int(levels[0]), int(levels[1])), key=lambda i: point.energies[i])
    e = point.energies[lv]
    spin = point.observables.get("spin")
    err = []
    for i in lv:
        # Davis-Kahan: distance to the nearest other level the state can mix with (same spin)
        same = [j for j in range(point.energies.size) if j != i and (spin is None or spin[j] == spin[i])]
        gaps = [abs(point.energies[i] - point.energies[j]) for j in same] or [math.inf]
        err.append(min(1.0, float(point.residuals[i]) / max(min(gaps), 1e-300)))
    psi = point.states[lv].reshape(2, -1) * math.sqrt(dv)
    if spin is not None:                    # spinor: orbital part times a spin label
        psi = [(psi[0], spin[lv[0]]), (psi[1], spin[lv[1]])]
    return _Pair(point.value, np.asarray(e, dtype=float), psi, np.asarray(err), point)


def _overlaps(p: _Pair, q: _Pair) -> np.ndarray:
    if isinstance(p.psi, list):
        return np.array([[abs(np.vdot(a, b)) ** 2 * (sa == sb) for b, sb in q.psi] for a, sa in p.psi])
    return np.abs(np.conj(p.psi) @ q.psi.T) ** 2


def _mixing(p: _Pair, q: _Pair) -> tuple:
    """(R, amplitude error) for lower(p) onto lower(q) within the pair."""
    o = _overlaps(p, q)
    r = float(o[0, 0] / max(o[0, 0] + o[0, 1], 1e-300))
    return r, float(p.err[0] + q.err[0])


def _gap_interval(p: _Pair, q: _Pair) -> tuple:
    r, eps = _mixing(p, q)
    lo = max(0.0, math.sqrt(r) - eps) ** 2
    hi = min(1.0, (math.sqrt(r) + eps) ** 2)
    return (gap_from_mixing(lo, p.d, q.d), gap_from_mixing(r, p.d, q.d), gap_from_mixing(hi, p.d, q.d))


class Settler:
    """Decides the candidates of one sweep, solving extra values through ``solve(value, start)``."""

    def __init__(self, values, points: list, tracks: np.ndarray, dv: float, *, resolution: float,
                 degenerate: float, budget: int, solve: Callable | None = None, should_stop=None):
        self.values = np.asarray(values, dtype=float)
        self.points = points
        self.tracks = tracks
        self.dv = dv
        self.resolution = float(resolution)
        self.degenerate = float(degenerate)
        self.budget = int(budget)
        self.solve = solve
        self.should_stop = should_stop
        self.used = 0

    # --- helpers -------------------------------------------------------------------------------
    def _pair(self, c: Anticrossing, p: int) -> _Pair:
        a, b = c.tracks
        return _pair_at(self.points[p], (self.tracks[a, p], self.tracks[b, p]), self.dv)

    def _can_solve(self) -> bool:
        return self.solve is not None and self.used < self.budget and not (self.should_stop and self.should_stop())

    def _solve_pair(self, x: float, near: _Pair) -> _Pair | None:
        """Solve at ``x`` (warm from ``near``'s solve) and return the two levels that span ``near``'s
        subspace best."""
        self.used += 1
        spin = near.point.observables.get("spin")
        start = near.point.states if spin is None else near.point.states[np.asarray(spin) > 0]
        pt = self.solve(float(x), start)
        ref = near.psi if not isinstance(near.psi, list) else np.array([v for v, _ in near.psi])
        q, _ = np.linalg.qr(ref.T)
        flat = pt.states.reshape(pt.energies.size, -1) * math.sqrt(self.dv)
        w = np.sum(np.abs(np.conj(flat) @ q) ** 2, axis=1)
        if spin is not None:
            want = {s for _, s in near.psi}
            w = w * np.isin(pt.observables["spin"], list(want))
        best = np.argsort(-w)[:2]
        if w[best].sum() < 1.5:
            return None                      # a third level takes part: not a two-level approach
        return _pair_at(pt, best, self.dv)

    # --- verdicts ------------------------------------------------------------------------------
    def settle(self, c: Anticrossing) -> Anticrossing:
        if not c.bracket:
            return c
        if c.evidence == "degenerate at a sampled value":
            return self._met(c)
        lo, hi = c.bracket
        left, right = self._pair(c, lo), self._pair(c, hi)
        # the pair must be the same two states on either side of the approach (next to it: far out in a
        # wide window other levels may take part without changing what happens here)
        j = int(c.index)
        near_lo, near_hi = (max(lo, j - 1), min(hi, j + 1)) if lo < j < hi else (lo, hi)
        if float(_overlaps(self._pair(c, near_lo), self._pair(c, near_hi)).sum()) < PAIR_KEPT:
            # the two tracks do not span the same two states at both ends: a level entered or left the
            # computed set in between, so this is no close approach of two levels
            return replace(c, kind="not settled", evidence=LEAVES_SET, reason=LEAVES_SET)
        if c.kind == "anticrossing" and c.fit:          # an interior minimum: the sampling resolved it
            return self._refine_anticrossing(c, left, right, [left, right, self._pair(c, c.index)])
        return self._bisect(c, left, right)

    def _met(self, c: Anticrossing) -> Anticrossing:
        lo, hi = c.bracket
        step = abs(self.values[hi] - self.values[lo])
        slope = (self._pair(c, lo).d + self._pair(c, hi).d) / max(step, 1e-300)
        bound = max(c.sampled_gap, self.degenerate)
        return replace(c, gap=0.0, gap_bound=bound, at_uncertainty=bound / max(slope, 1e-300),
                       smallest_step=step / 2, reason=c.reason or "the levels meet at a sampled value")

    def _bisect(self, c: Anticrossing, left: _Pair, right: _Pair) -> Anticrossing:
        samples = []
        while True:
            g_lo, g_mid, g_hi = _gap_interval(left, right)
            # crossing point: where the linearly interpolated separation changes sign
            x0 = left.x + left.d * (right.x - left.x) / (left.d + right.d)
            step = abs(right.x - left.x)
            if g_lo > self.resolution:
                s = (math.sqrt(max(left.d**2 - g_mid**2, 0)) + math.sqrt(max(right.d**2 - g_mid**2, 0))) / step
                xc = left.x + math.sqrt(max(left.d**2 - g_mid**2, 0)) / max(s, 1e-300)
                c2 = replace(c, fit={"centre": xc, "gap": g_mid, "slope": s, "from": "mixing"}, at=xc, gap=g_mid)
                return self._refine_anticrossing(c2, left, right, [left, right], extra=samples)
            if g_hi <= self.resolution:
                return replace(c, kind="crossing", at=x0, at_uncertainty=self._crossing_uncertainty(c, x0, step),
                               gap=0.0, gap_bound=g_hi,
                               sampled_gap=min(c.sampled_gap, left.d, right.d), smallest_step=step,
                               refinements=len(samples), evidence="the states keep their character",
                               reason="the levels pass through each other and their states do not mix"
                                      + self._lz_words(c),
                               samples=tuple(samples))
            if not self._can_solve():
                return replace(c, kind="not settled", at=x0, at_uncertainty=step / 2, gap=g_lo,
                               gap_uncertainty=math.nan, gap_bound=g_hi, smallest_step=step,
                               refinements=len(samples), evidence="refinement budget used up",
                               reason="the mixing of the states does not yet decide between a crossing and an "
                                      "anticrossing", samples=tuple(samples))
            nearer = left if abs(x0 - left.x) <= abs(right.x - x0) else right
            new = self._solve_pair(x0, nearer)
            if new is None:
                return replace(c, kind="not settled", at=x0, at_uncertainty=step / 2, gap=g_lo, gap_bound=g_hi,
                               evidence="a third level takes part", refinements=len(samples) + 1,
                               reason="another level comes close here; the two-level picture does not apply",
                               samples=tuple(samples))
            samples.append((new.x, float(new.e[0]), float(new.e[1])))
            if new.d <= self.degenerate:
                return replace(c, kind="crossing", at=new.x, at_uncertainty=step / 2, gap=0.0,
                               gap_bound=max(new.d, self.degenerate), smallest_step=step / 2,
                               refinements=len(samples), evidence="degenerate at an inserted value",
                               reason="the levels meet at an inserted value", samples=tuple(samples))
            # which side is the new value on? the lower state keeps the left's character on its side
            o = _overlaps(left, new)
            on_left = o[0, 0] + o[1, 1] >= o[0, 1] + o[1, 0]
            if on_left:
                left = new
            else:
                right = new

    def _refine_anticrossing(self, c: Anticrossing, left: _Pair, right: _Pair, pairs: list, *,
                             extra=()) -> Anticrossing:
        samples = list(extra)
        fit = dict(c.fit)
        x0, s, gap = float(fit.get("centre", c.at)), float(abs(fit.get("slope", 0.0))), float(fit.get("gap", c.gap))
        pts = {(p.x): p for p in pairs}
        for i in range(c.bracket[0], c.bracket[1] + 1):
            pr = self._pair(c, i)
            pts.setdefault(pr.x, pr)
        history = []
        gap_unc = x_unc = math.nan
        for _round in range(MAX_ROUNDS):
            w = gap / s if s > 0 else abs(right.x - left.x) / 4
            for x in (x0, x0 - w, x0 + w):
                if not (min(pts) <= x <= max(pts)) and x != x0:
                    continue
                if min(abs(x - xx) for xx in pts) < 0.25 * w or not self._can_solve():
                    continue
                ref = min(pts.values(), key=lambda p: abs(p.x - x))
                new = self._solve_pair(x, ref)
                if new is None:
                    continue
                pts[new.x] = new
                samples.append((new.x, float(new.e[0]), float(new.e[1])))
            xs = np.array(sorted(pts))
            ds = np.array([pts[x].d for x in xs])
            near_x = xs[np.abs(xs - x0) <= 3 * w] if w > 0 else xs
            if near_x.size < 4:
                near_x = xs[np.argsort(np.abs(xs - x0))[:4]]
            ys = np.array([pts[x].d for x in near_x])
            if near_x.size < 3:
                break                            # too few samples for the three-parameter form
            try:
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    popt, pcov = curve_fit(two_level_gap, near_x, ys, p0=[x0, max(s, 1e-300), gap], maxfev=4000)
                perr = np.sqrt(np.abs(np.diag(pcov))) if np.all(np.isfinite(pcov)) else np.full(3, np.nan)
            except (RuntimeError, ValueError, TypeError):
                break
            new_x0, new_s, new_gap = float(popt[0]), float(abs(popt[1])), float(abs(popt[2]))
            new_gap = min(new_gap, float(ds.min()))
            history.append((new_x0, new_gap))
            change_g = abs(new_gap - gap)
            change_x = abs(new_x0 - x0)
            x0, s, gap = new_x0, new_s, new_gap
            gap_unc = max(change_g, float(perr[2]) if np.isfinite(perr[2]) else 0.0, 1e-3 * self.resolution)
            x_unc = max(change_x, float(perr[0]) if np.isfinite(perr[0]) else 0.0)
            if len(history) >= 2 and change_g <= GAP_RTOL * gap and change_x <= 0.25 * max(w, 1e-300):
                break
            if not self._can_solve():
                break
        xs = np.array(sorted(pts))
        ds = np.array([pts[x].d for x in xs])
        if history:
            # a sample near the centre brackets the gap under the two-level form:
            # sqrt(d^2 - (s delta)^2) <= gap <= d, delta its distance from the centre (plus the centre's error)
            near = int(np.argmin(np.abs(xs - x0)))
            delta = abs(xs[near] - x0) + (x_unc if math.isfinite(x_unc) else 0.0)
            lo_gap = math.sqrt(max(ds[near] ** 2 - (s * delta) ** 2, 0.0))
            half = 0.5 * (ds[near] - lo_gap)
            if not math.isfinite(gap_unc) or half < gap_unc:
                gap, gap_unc = 0.5 * (ds[near] + lo_gap), max(half, 1e-3 * self.resolution)
        settled = bool(history) and math.isfinite(gap_unc) and gap_unc <= max(2 * GAP_RTOL * gap, self.resolution)
        # the states must exchange character across the approach as the two-level form predicts
        r_meas, eps = _mixing(pts[xs[0]], pts[xs[-1]])
        r_pred = _mixing_of_gap(gap, pts[xs[0]].d, pts[xs[-1]].d) if xs[0] < x0 < xs[-1] else math.nan
        exchanged = math.isfinite(r_pred) and abs(r_meas - r_pred) <= 0.15 + 2 * eps
        steps = np.diff(xs)
        fit_out = {"centre": x0, "gap": gap, "slope": s, "points": int(xs.size)}
        common = dict(at=x0, at_uncertainty=x_unc, gap=gap, gap_uncertainty=gap_unc, fit=fit_out,
                      sampled_gap=float(min(ds.min(), c.sampled_gap)), refinements=len(samples),
                      smallest_step=float(steps.min()) if steps.size else math.nan, samples=tuple(samples))
        if history and math.isfinite(gap_unc) and gap + 2 * gap_unc <= self.resolution:
            return replace(c, kind="crossing", gap_bound=gap + 2 * gap_unc, evidence="no gap above the resolution",
                           **{**common, "gap": 0.0},
                           reason=f"the refined gap is below the resolution ({self.resolution:.2g} in energy)")
        if settled and exchanged:
            return replace(c, kind="anticrossing", gap_bound=math.nan,
                           evidence="the states exchange character", **common,
                           reason="the levels approach and turn back; their states mix as a two-level "
                                  "anticrossing predicts")
        why = ("the states do not exchange character as a two-level anticrossing would" if settled else
               "refinement budget used up" if not self._can_solve() else
               "the two-level form does not fit the sampled separations well enough")
        return replace(c, kind="not settled", gap_bound=float(ds.min()), evidence=why, **common,
                       reason="the levels come close, but the evidence does not settle the kind of approach")

    def _lz_words(self, c: Anticrossing) -> str:
        """'; L_z = -1 and +2 (conserved)' when both levels have a good L_z at both ends of the bracket."""
        lo, hi = c.bracket
        a, b = c.tracks
        vals = []
        for t in (a, b):
            here = [self.points[p].observables.get("lz_label") for p in (lo, hi)]
            if any(h is None for h in here):
                return ""
            got = {float(here[k][self.tracks[t, p]]) for k, p in enumerate((lo, hi))}
            if len(got) != 1 or not np.isfinite(next(iter(got))):
                return ""
            vals.append(int(next(iter(got))))
        if vals[0] == vals[1]:
            return ""
        return f"; L_z = {vals[0]:+d} and {vals[1]:+d} (a conserved angular momentum, found in the states)"

    def _crossing_uncertainty(self, c: Anticrossing, x0: float, step: float) -> float:
        """Interpolation error of the crossing point: linear against a quadratic through the neighbours
        of the bracket (half the bracket when there are none)."""
        lo, hi = c.bracket
        idx = [i for i in (lo - 1, lo, hi, hi + 1) if 0 <= i < len(self.points)]
        if len(idx) < 3 or hi - lo != 1:
            return step / 2
        a, b = c.tracks
        d = np.array([self.points[i].energies[self.tracks[b, i]] - self.points[i].energies[self.tracks[a, i]]
                      for i in idx])
        x = self.values[idx]
        coef = np.polyfit(x - x0, d, 2)
        roots = np.roots(coef) if abs(coef[0]) > 0 else np.array([-coef[2] / coef[1]])
        roots = roots[np.isreal(roots)].real
        if roots.size == 0:
            return step / 2
        r = roots[np.argmin(np.abs(roots))]
        return float(min(max(abs(r), 1e-9 * step), step / 2))

