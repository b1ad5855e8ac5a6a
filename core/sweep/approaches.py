"""Close approaches of two tracked levels: what a sweep reports, and where to look for them.

:class:`Anticrossing` is one verdict (kind "anticrossing", "crossing" or "not settled") with its
evidence; :func:`find_close_approaches` finds the candidates in the sampled energies (sign changes
of a separation, interior minima), which :mod:`core.sweep.settle` then decides from the states.
"""
from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field, replace

import numpy as np
from scipy.optimize import curve_fit

from ..formatting import format_energy, format_energy_bound, format_measured

__all__ = ["Anticrossing", "CloseApproach", "find_close_approaches", "two_level_gap"]

KINDS = ("anticrossing", "crossing", "not settled")


@dataclass(frozen=True)
class Anticrossing:
    """A close approach of tracks ``a`` and ``b`` (track ids = level indices at the first point).

    ``kind`` is "anticrossing" (the states exchange character continuously; ``gap`` = 2t is the
    minimum separation, ``gap_uncertainty`` its uncertainty), "crossing" (the states keep their
    character; ``gap_bound`` bounds any gap from above) or "not settled" (the refinement budget ran
    out; ``gap`` and ``gap_bound`` bracket what is known).  ``at`` is the swept value, with
    ``at_uncertainty``; energies in the project's energy unit.
    """

    at: float                 # swept value at the smallest separation
    gap: float                # minimum gap (anticrossing), energy unit; 0 for a crossing
    tracks: tuple
    kind: str                 # "anticrossing", "crossing" or "not settled"
    index: int                # point index of the smallest sampled separation
    sampled_gap: float        # smallest separation among the sweep's and the refinement's samples
    fit: dict = field(default_factory=dict)
    reason: str = ""
    at_uncertainty: float = math.nan
    gap_uncertainty: float = math.nan
    gap_bound: float = math.nan          # upper bound on any gap (crossing / not settled)
    refinements: int = 0                 # solves inserted to settle it
    smallest_step: float = math.nan      # smallest distance between samples that decided it
    evidence: str = ""                   # "mixing of the states", "degenerate at a sampled value", ...
    samples: tuple = ()                  # refined samples: (value, lower energy, upper energy)
    bracket: tuple = field(default=(), compare=False, repr=False)   # sampled point indices around it

    @property
    def tunnel_coupling(self) -> float:
        """t = gap / 2 (two-level model)."""
        return 0.5 * self.gap

    @property
    def settled(self) -> bool:
        return self.kind != "not settled"

    def to_dict(self) -> dict:
        def num(x):
            return None if x is None or (isinstance(x, float) and not math.isfinite(x)) else float(x)
        return {"at": self.at, "at_uncertainty": num(self.at_uncertainty), "gap": self.gap,
                "gap_uncertainty": num(self.gap_uncertainty), "gap_bound": num(self.gap_bound),
                "tunnel_coupling": 0.5 * self.gap, "levels": [int(t) for t in self.tracks], "kind": self.kind,
                "sampled_gap": self.sampled_gap, "fit": self.fit, "reason": self.reason,
                "refinements": int(self.refinements), "smallest_step": num(self.smallest_step),
                "evidence": self.evidence, "samples": [list(map(float, s)) for s in self.samples]}

    @classmethod
    def from_dict(cls, a: dict) -> Anticrossing:
        def num(key):
            v = a.get(key)
            return math.nan if v is None else float(v)
        return cls(at=float(a["at"]), gap=float(a["gap"]), tracks=tuple(int(t) for t in a["levels"]),
                   kind=str(a["kind"]), index=int(a.get("index", 0)),
                   sampled_gap=float(a.get("sampled_gap", a["gap"])), fit=dict(a.get("fit") or {}),
                   reason=str(a.get("reason", "")), at_uncertainty=num("at_uncertainty"),
                   gap_uncertainty=num("gap_uncertainty"), gap_bound=num("gap_bound"),
                   refinements=int(a.get("refinements", 0)), smallest_step=num("smallest_step"),
                   evidence=str(a.get("evidence", "")),
                   samples=tuple(tuple(float(v) for v in s) for s in a.get("samples", ())))

    def position_text(self, parameter: str, unit: str = "") -> str:
        return f"{parameter} = {format_measured(self.at, self.at_uncertainty, unit)}"

    def gap_text(self, energy_unit: str) -> str:
        """'2t = 45.7 ± 0.1 µeV', 'gap < 3e-07 meV' or 'gap between 1e-3 and 2e-3 meV'."""
        if self.kind == "anticrossing":
            return f"gap 2t = {format_energy(self.gap, self.gap_uncertainty, energy_unit)}"
        if self.kind == "crossing":
            return f"gap {format_energy_bound(self.gap_bound, energy_unit)}"
        lo = format_energy(self.gap, self.gap_uncertainty, energy_unit) if self.gap > 0 else "0"
        return f"gap between {lo} and {format_energy_bound(self.gap_bound, energy_unit).lstrip('< ')}"

    def describe(self, parameter: str, energy_unit: str, parameter_unit: str = "") -> str:
        """One line for a report: kind, levels, position ± uncertainty, gap, how it was settled."""
        how = []
        if self.refinements:
            how.append(f"{self.refinements} refinement solve{'s' if self.refinements > 1 else ''}")
        if math.isfinite(self.smallest_step):
            how.append(f"smallest step {self.smallest_step:.2g}{(' ' + parameter_unit) if parameter_unit else ''}")
        if self.evidence:
            how.insert(0, self.evidence)
        tail = f" ({'; '.join(how)})" if how else ""
        return (f"{self.kind} of levels {self.tracks[0]} & {self.tracks[1]} at "
                f"{self.position_text(parameter, parameter_unit)}: {self.gap_text(energy_unit)}{tail}")


#: another name for the same record (it holds crossings too)
CloseApproach = Anticrossing


def two_level_gap(x, x0, s, gap):
    """Separation of a two-level anticrossing: sqrt(s^2 (x - x0)^2 + gap^2) (common practice)."""
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
                                              bracket=(int(i), int(i2)), evidence=("degenerate at a sampled value"
                                                                                  if met else ""),
                                              sampled_gap=float(ad[j]),
                                              reason=why + (" and their symmetry labels differ" if differ else "")))
                else:
                    found.append(Anticrossing(at=float(x0), gap=float(ad[j]), tracks=(a, b), kind="anticrossing",
                                              index=int(j), sampled_gap=float(ad[j]), bracket=(int(i), int(i2)),
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
                            popt, _ = curve_fit(two_level_gap, xs, ys, p0=[values[j], slope0, gap], maxfev=4000)
                        resid = ys - two_level_gap(xs, *popt)
                        if abs(popt[2]) <= 1.5 * gap + 1e-300 and xs.min() <= popt[0] <= xs.max():
                            fit = {"centre": float(popt[0]), "gap": float(abs(popt[2])), "slope": float(abs(popt[1])),
                                   "rms": float(np.sqrt(np.mean(resid**2))), "points": int(xs.size)}
                            gap = float(abs(popt[2]))
                    except (RuntimeError, ValueError):
                        fit = {}
                found.append(Anticrossing(at=float(fit.get("centre", values[j])), gap=gap, tracks=(a, b),
                                          kind="anticrossing", index=int(j), sampled_gap=float(ad[j]), fit=fit,
                                          bracket=(int(lo), int(hi)),
                                          reason="the levels approach and turn back"))
    span = float(np.ptp(values)) if values.size else 0.0
    found = [replace(c, at=0.0) if abs(c.at) < 1e-9 * span else c for c in found]
    found.sort(key=lambda c: c.at)
    return found
