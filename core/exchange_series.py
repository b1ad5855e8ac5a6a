"""J along a sweep, and where the lowest singlet and triplet cross.

Reads a sweep's ``two_electron`` columns (:func:`core.two_electron.sweep_columns`).  The model's
Hamiltonian does not act on spin (no spin-orbit coupling), so total spin is conserved and a singlet
level and a triplet level cross exactly: no gap opens, whatever the parameter.  The ground state
changes from singlet to triplet where J = E(lowest triplet) - E(lowest singlet) changes sign (the
S_z = 0 component; M. Wagner, U. Merkt, A. V. Chaplik, Phys. Rev. B 45, 1951 (1992) for a dot in a
field), and with the Zeeman energy E_z = g* mu_B |B| the S_z = -1 component reaches the singlet where
J = E_z.  Each crossing is placed by linear interpolation of J - E_z between the two points around
the sign change; its uncertainty is the interpolation error (|f''| h^2 / 8 over the slope, f'' from
the second divided difference of the neighbouring three points; half the step when the sweep has
only two points) plus the uncertainty of J there over the slope of J - E_z.  This is one policy
for the window, the command line and the figure sheets.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["exchange_points", "SpinCrossing", "singlet_triplet_crossings", "spin_tracks"]


def _floats(values, size: int) -> np.ndarray:
    raw = list(values) if values is not None else [None] * size
    return np.array([np.nan if v is None else float(v) for v in raw], dtype=float)


def exchange_points(sweep) -> dict:
    """Per point of ``sweep``: x, J, its uncertainty (NaN when unknown), and which points can be shown
    on a log scale (``positive``: J finite and > 0) or have no triplet (``no_triplet``: J not finite)."""
    two = sweep.two_electron
    x = np.asarray(sweep.values, dtype=float)
    j = _floats(two["exchange"], x.size)
    dj = _floats(two.get("exchange_uncertainty"), j.size)
    finite = np.isfinite(j)
    return {"x": x, "exchange": j, "uncertainty": dj, "positive": finite & (j > 0), "no_triplet": ~finite}


@dataclass(frozen=True)
class SpinCrossing:
    """The lowest singlet meets a triplet component (``component``: "S_z = 0" or "S_z = -1")."""

    at: float              # swept value of the crossing
    uncertainty: float     # of ``at``, in the swept unit
    between: tuple         # indices of the two sweep points around it
    component: str
    ground_before: str     # "singlet" | "triplet": the ground state on the side of lower swept values

    def words(self, name: str, unit: str = "") -> str:
        u = f" {unit}" if unit else ""
        after = "triplet" if self.ground_before == "singlet" else "singlet"
        return (f"singlet–triplet ({self.component}) crossing at {name} = {self.at:.4g} ± {self.uncertainty:.2g}{u}: "
                f"exact (total spin is conserved); the ground state turns from {self.ground_before} to {after}")


def _interpolation_error(x: np.ndarray, d: np.ndarray, i: int) -> float:
    """Bound on the linear interpolation error of d between points i and i + 1: |d''| h^2 / 8, with d''
    from the three points i-1, i, i+1 (or i, i+1, i+2); with two points only, |d_i| + |d_i+1|
    (the crossing is then known only to lie between them)."""
    for k in (i - 1, i):
        if k >= 0 and k + 2 < x.size and np.all(np.isfinite(d[k:k + 3])):
            x0, x1, x2 = x[k:k + 3]
            d0, d1, d2 = d[k:k + 3]
            second = 2.0 * ((d2 - d1) / (x2 - x1) - (d1 - d0) / (x1 - x0)) / (x2 - x0)
            return abs(second) * (x[i + 1] - x[i]) ** 2 / 8.0
    return 0.5 * (abs(d[i]) + abs(d[i + 1]))


def singlet_triplet_crossings(sweep) -> list:
    """Every sign change of J (and, with a Zeeman splitting per point, of J - E_z) along the sweep."""
    pts = exchange_points(sweep)
    x, j, dj = pts["x"], pts["exchange"], pts["uncertainty"]
    zeeman = _floats(sweep.two_electron.get("zeeman_splitting"), j.size)
    out = []
    series = [("S_z = 0", np.zeros_like(j))]
    if np.all(np.isfinite(zeeman)) and np.any(zeeman > 0):
        series.append(("S_z = -1", zeeman))
    for component, ez in series:
        d = j - ez
        for i in range(x.size - 1):
            a, b = d[i], d[i + 1]
            if not (np.isfinite(a) and np.isfinite(b)) or a * b > 0 or a == b or (a == 0 and i > 0):
                continue
            h = x[i + 1] - x[i]
            at = x[i] + h * a / (a - b)
            slope = abs((b - a) / h)
            known = [v for v in (dj[i], dj[i + 1]) if np.isfinite(v)]
            spread = max(known) if known else np.inf
            out.append(SpinCrossing(at=float(at), uncertainty=float(_interpolation_error(x, d, i) / slope
                                                                    + spread / slope),
                                    between=(i, i + 1), component=component,
                                    ground_before="singlet" if a > 0 else "triplet"))
    return sorted(out, key=lambda c: c.at)


def spin_tracks(sweep) -> dict:
    """Two-electron levels per spin along the sweep: ``{"singlet": (k, points), "triplet": (k, points)}``,
    the k-th lowest of each spin at each point (NaN where fewer were found).  Levels of one spin are
    taken in energy order, so two of the same spin that cross are drawn as touching."""
    two = sweep.two_electron
    out = {}
    for kind in ("singlet", "triplet"):
        rows = [[e for e, s in zip(es, ss) if s == kind] for es, ss in zip(two["energies"], two["spin"])]
        k = max((len(r) for r in rows), default=0)
        arr = np.full((k, len(rows)), np.nan)
        for p, r in enumerate(rows):
            arr[: len(r), p] = r
        out[kind] = arr
    return out
