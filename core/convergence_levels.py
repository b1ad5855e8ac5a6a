"""Judging each level, and each splitting, of a convergence study from its energies on several grids.

A level's energies on grids of spacing h1 > h2 > h3 change by d1 = E1 - E2 and d2 = E2 - E3.  Each
energy is known only to the solver's accuracy ``noise`` (the residual tolerance times the energy
scale: the eigenvalue of a unit vector with residual r lies within r of an eigenvalue of the grid
operator, and the solver stops at r <= tolerance x energy scale; B. N. Parlett, The Symmetric
Eigenvalue Problem, SIAM 1998, theorem 4.5.1, recalled from memory).  So a difference is judged only
when it is well above that noise (``SIGNIFICANT`` times it):

* the two finest grids agree within it:     "converged to the solver's accuracy";
* both changes significant, same sign, shrinking:  "converges (order p ~ ...)", the order from
  (E1 - E2)/(E2 - E3) = (h1^p - h2^p)/(h2^p - h3^p);
* both significant, opposite signs:           "not monotonic";
* the change grows on the finer grids:        "not converging yet".

Extrapolation: Richardson's method (L. F. Richardson, Phil. Trans. R. Soc. A 210, 307 (1911)) with
the scheme's formal order, E ~ E(h2) + (E(h2) - E(h1)) / ((h1/h2)^p - 1); for the spectral scheme
(faster than any power) the finest grid's energy, with the last change as its error.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from .formatting import format_uncertain

__all__ = ["format_order", "level_status", "study_states",
           "richardson", "observed_order", "LevelJudgement", "judge_level",
           "SIGNIFICANT",
           "CONVERGED", "CONVERGES", "NOT_MONOTONIC", "GROWING", "TWO_GRIDS", "NOT_FOUND", "FEW_GRIDS"]

#: a change between grids is judged (an order, monotonic or not) only above this many times the solver's accuracy
SIGNIFICANT = 10.0

CONVERGED = "converged to the solver's accuracy"
CONVERGES = "converges"                       # printed with its order: "converges (order p ≈ 2.0)"
NOT_MONOTONIC = "not monotonic"
GROWING = "not converging yet"                # the change grows on the finer grids
TWO_GRIDS = "two grids: order not measured"
NOT_FOUND = "not found on the other grids"
FEW_GRIDS = "found on fewer grids"


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
        return float("inf") if abs(d2) < 1e-3 * abs(d1) else float("nan")
    ratio = d1 / d2

    def f(p):
        return (h1**p - h2**p) / (h2**p - h3**p)

    lo, hi = 0.01, 40.0
    if ratio <= f(lo):
        return lo
    if ratio >= f(hi):
        return float("inf")
    return float(brentq(lambda p: f(p) - ratio, lo, hi, xtol=1e-10))


@dataclass(frozen=True)
class LevelJudgement:
    """One level's verdict: extrapolated energy and its error (energy unit), observed order and its
    uncertainty from the solver's accuracy, the status word, and whether the error was widened."""

    extrapolated: float
    error: float
    order: float = float("nan")
    order_error: float = float("nan")
    status: str = ""
    widened: bool = False


def _order_spread(d1: float, d2: float, hs, noise: float, p: float) -> float:
    """How far the observed order moves when each energy moves by the solver's accuracy."""
    a, b = abs(d1), abs(d2)
    lo = observed_order([a - 2 * noise + b + 2 * noise, b + 2 * noise, 0.0], hs) if a > 2 * noise else float("nan")
    hi = observed_order([a + 2 * noise + b - 2 * noise, b - 2 * noise, 0.0], hs) if b > 2 * noise else float("inf")
    spread = [abs(x - p) for x in (lo, hi) if not math.isnan(x)]
    return max(spread) if spread else float("inf")


def judge_level(e, hs, noise: float, expected: float, reference_energy: float) -> LevelJudgement:
    """Judge one level from its energies ``e`` on grids of representative spacings ``hs`` (coarsest
    first, nan where the level was not found), with the solver's accuracy ``noise`` and the scheme's
    expected order (inf for the spectral scheme)."""
    e = np.asarray(e, dtype=float)
    hs = np.asarray(hs, dtype=float)
    valid = np.nonzero(np.isfinite(e))[0]
    if valid.size < 2:
        return LevelJudgement(float(reference_energy), float("nan"), status=NOT_FOUND)
    f, c = valid[-1], valid[-2]
    d2 = float(e[c] - e[f])
    sig = SIGNIFICANT * noise
    spectral = math.isinf(expected)
    if abs(d2) <= sig:
        p = float("nan")
        if valid.size >= 3 and abs(e[valid[-3]] - e[c]) > sig:
            p = float("inf")                      # converged between the finer grids: faster than measurable
        return LevelJudgement(float(e[f]), max(abs(d2), noise), p, float("nan"), CONVERGED)
    if valid.size < 3:
        ext = float(e[f]) if spectral else richardson(e[c], e[f], hs[c], hs[f], expected)
        err = abs(d2) if spectral else abs(ext - e[f])
        return LevelJudgement(ext, max(err, noise), status=TWO_GRIDS)
    cc = valid[-3]
    d1 = float(e[cc] - e[c])
    if abs(d1) <= sig or (d1 * d2 > 0 and abs(d2) >= abs(d1)):
        # the change grows on the finer grid: no asymptotic range yet; the error is at least the last change
        return LevelJudgement(float(e[f]), max(abs(d1), abs(d2), noise), status=GROWING)
    if d1 * d2 < 0:
        # a true oscillation: assume no faster than second-order decay after the earlier change
        err = max(abs(d2), abs(d1) * (hs[f] / hs[c]) ** 2, noise)
        return LevelJudgement(float(e[f]), err, status=NOT_MONOTONIC)
    p = observed_order(e[[cc, c, f]], hs[[cc, c, f]])
    dp = _order_spread(d1, d2, hs[[cc, c, f]], noise, p)
    widened = False
    if spectral:
        ext, err = float(e[f]), abs(d2)
        if p < 4.0:
            err = max(err, abs(d2) / ((hs[c] / hs[f]) ** max(p, 0.25) - 1.0))
    else:
        ext = richardson(e[c], e[f], hs[c], hs[f], expected)
        err = abs(ext - richardson(e[cc], e[c], hs[cc], hs[c], expected))
        if np.isfinite(p) and abs(p - expected) > max(0.5, 0.25 * expected):
            # the expected order does not hold here: do not trust the extrapolation beyond the data
            wide = abs(d2) / ((hs[c] / hs[f]) ** float(np.clip(p, 0.25, expected)) - 1.0)
            if wide > err:
                err, widened = wide, True
    return LevelJudgement(ext, max(err, noise), p, dp, CONVERGES, widened)


# --- words for one level (used by the report tables and the JSON rows) -----------------------------

def format_order(p: float, dp: float = float("nan")) -> str:
    """An observed order: one decimal when it is known to better than 0.1 (three grids judge no finer:
    the next terms of the error expansion move it), else with its uncertainty."""
    if math.isinf(p):
        return "faster than any power these grids resolve"
    if not math.isfinite(p):
        return "not measured"
    if not math.isfinite(dp) or dp < 0.1:
        return f"{p:.1f}"
    return format_uncertain(p, dp)


def level_status(report, i: int) -> str:
    """Level ``i``'s convergence in words: "converged to the solver's accuracy", "converges (order
    p ≈ 2.1)", "not monotonic", "not converging yet", ..."""
    status = report.statuses[i] if i < len(report.statuses) else ""
    if status.endswith(CONVERGES):
        p = float(report.observed_orders[i])
        dp = float(report.order_errors[i]) if report.order_errors is not None else float("nan")
        words = format_order(p, dp)
        status = status + (f" ({words})" if math.isinf(p) else f" (order p ≈ {words})")
    return status


def study_states(levels: int) -> int:
    """States solved on each grid for ``levels`` reported levels: a few extra, so that levels which
    move across the top between grids can still be matched."""
    return int(levels) + max(3, int(math.ceil(levels / 4)))
