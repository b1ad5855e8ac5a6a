"""The words and numbers of a convergence report, one policy for every front end.

The command line (``wellscape converge``), the window's convergence marks and figure sheets all use
these helpers, so that a level or a splitting reads the same everywhere:

* :func:`format_uncertain` prints a value with its uncertainty, the uncertainty to one or two
  significant digits and the value to the same decimal place (the digit rule of the Particle Data
  Group: two digits when the uncertainty's three leading digits are 100-354, one digit for 355-949,
  950-999 as two digits of 1000; Review of Particle Physics, Introduction, recalled from memory).
  The uncertainty is rounded up, so that a printed error bar is never smaller than the estimate;
* :func:`level_status` and :func:`order_words` word each level's convergence and the study's order;
* :func:`format_report` builds the plain-text report.
"""
from __future__ import annotations

import math

import numpy as np

from .convergence import (
    DEGENERATE,
    JUDGE_FRACTION,
    MARKS,
    NOT_RESOLVED,
    RESOLVED,
    TOO_COARSE,
    default_degeneracy_tolerance,
)
from .convergence_levels import format_order, level_status  # noqa: F401  (re-exported)
from .formatting import _fixed, _rounded_uncertainty, format_bound, format_uncertain, format_value  # noqa: F401

__all__ = ["coarse_words", "format_uncertain", "format_value", "format_bound", "format_spacing", "format_order",
           "level_status",
           "order_words", "summary_words", "verdict_legend", "format_report"]


def format_spacing(grid, unit: str = "") -> str:
    """Spacings per axis with the unit, to four significant digits of the largest, e.g.
    "1.073 x 1.073 x 0.870 nm" (grid spacings are exact)."""
    h = np.asarray(grid.spacing, dtype=float)
    dec = max(0, 3 - int(math.floor(math.log10(float(h.max())))))
    tail = f" {unit}" if unit and unit != "1" else ""
    return " x ".join(f"{x:.{dec}f}" for x in h) + tail


def order_words(report) -> str:
    """The study's convergence in a few words, for captions and status lines."""
    exp = "faster than any power" if math.isinf(report.expected_order) else f"{report.expected_order:g}"
    p = report.observed_order
    if math.isnan(p):
        conv = report.extra.get("converged_levels", 0)
        seen = ("levels converged to the solver's accuracy" if conv == report.levels and conv
                else "order not measured")
    elif math.isinf(p):
        seen = "converges faster than any power these grids resolve"
    else:
        seen = f"observed order p ≈ {p:.1f}"
    return f"{report.scheme} scheme, {seen}, {exp} expected"


def summary_words(report, splittings=None, marks=MARKS) -> str:
    """Counts of the verdicts, e.g. "✓ 2 resolved, ≈ 3 not resolved (2 degenerate on every grid)"."""
    sps = list(report.splittings() if splittings is None else splittings)
    n_ok = sum(1 for s in sps if s.resolved)
    deg = sum(1 for s in sps if s.degenerate)
    coarse = sum(1 for s in sps if s.too_coarse)
    text = f"{marks[RESOLVED]} {n_ok} resolved, {marks[NOT_RESOLVED]} {len(sps) - n_ok} not resolved"
    parts = ([f"{deg} degenerate on every grid"] if deg else []) + ([f"{coarse} too coarse to judge"] if coarse else [])
    return text + (f" ({', '.join(parts)})" if parts else "")


def _fraction_words(f: float) -> str:
    return {0.25: "a quarter", 0.5: "half"}.get(f, f"{f:g}")


def verdict_legend(marks=MARKS) -> str:
    return (f"{marks[RESOLVED]} resolved: larger than the combined error of its two levels; "
            f"{marks[NOT_RESOLVED]} not resolved: within it — {DEGENERATE}, or a splitting or grid artefact "
            f"smaller than the errors; where those errors exceed {_fraction_words(JUDGE_FRACTION)} of the gap to the "
            f"nearest other level: {TOO_COARSE}")


def coarse_words(report) -> list:
    """One short line per cluster too coarse to judge, e.g. "the grid is too coarse to judge these levels
    (3, 4, 5); about 303 x 303 x 170 points would be needed (about 6.3 GiB)" (window and captions)."""
    out = []
    for c in report.coarse:
        lv = ", ".join(str(i) for i in c.levels)
        line = f"{TOO_COARSE} ({lv})"
        if c.needed is not None:
            line += f"; about {' x '.join(str(p) for p in c.needed.points)} points would be needed"
            if c.estimate is not None:
                line += f" ({c.estimate.brief()})"
        out.append(line)
    return out


def _coarse_lines(report, eu: str) -> list:
    lines = []
    solves = report.extra.get("solve_times", [])
    for c in report.coarse:
        lv = ", ".join(str(i) for i in c.levels)
        inner = [abs(s.project_splitting) for s in report.splittings()
                 if s.lower in c.levels and s.upper in c.levels and not s.degenerate]
        gap = ("no other level known" if not math.isfinite(c.gap)
               else f"a {c.gap:.3g} {eu} gap to the nearest other level")
        lines.append(f"{TOO_COARSE}: {lv} (errors up to ± {c.tolerance:.2g} {eu} against {gap}; "
                     f"splittings {', '.join(f'{x:.2g}' for x in inner)} {eu} on the project grid)")
        if c.needed is None:
            lines.append("  a finer grid: not computable from these grids (no usable convergence order)")
            continue
        cost = c.estimate.describe().replace(", time not measured", "") if c.estimate is not None else ""
        if (c.estimate is None or c.estimate.seconds is None) and solves:
            # eigensolver time grows like the unknowns times the inverse spacing (Chebyshev degree)
            g = report.grids[-1]
            t = solves[-1] * (c.needed.size / g.size) * (max(c.needed.points) + 1) / (max(g.points) + 1)
            cost += f"{', ' if cost else ''}roughly {_seconds(t)} (scaled from the finest grid's eigensolve)"
        lines.append(f"  to judge them: about {' x '.join(str(p) for p in c.needed.points)} points (spacing "
                     f"{format_spacing(c.needed, report.length_unit)}), with errors falling like h^{c.order:.1f}, "
                     f"would bring the errors to about {c.target:.2g} {eu}; {cost}")
    return lines


def _seconds(s: float) -> str:
    return f"{s:.2g} s" if s < 120 else (f"{s / 60:.0f} min" if s < 7200 else f"{s / 3600:.1f} h")


def _time_lines(report, timing) -> list:
    solves = report.extra.get("solve_times", [])
    names = ["x".join(str(p) for p in g.points) for g in report.grids]
    parts = ", ".join(f"{_seconds(t)} on {n}" for t, n in zip(solves, names))
    study = f"the study {report.wall_time:.1f} s (eigensolves {parts}; the rest potentials, interpolation, matching)"
    if not timing:
        return [f"time: {study}"]
    extra = []
    if timing.get("startup") is not None:
        extra.append(f"start-up and loading {timing['startup']:.1f} s")
    if timing.get("estimate") is not None:
        extra.append(f"estimate {timing['estimate']:.1f} s")
    extra.append(study)
    if timing.get("count") is not None:
        extra.append(f"level count {timing['count']:.1f} s")
    return [f"time: {timing['total']:.1f} s from the command's start to this report: " + "; ".join(extra)]


def format_report(report, *, marks=None, title: str = "", certificate=None, timing=None) -> str:
    """Plain-text report: grids, level table (units in the headers), orders, splittings with verdicts,
    levels too coarse to judge, the degeneracy tolerance, warnings and the time."""
    marks = marks or {RESOLVED: "+", NOT_RESOLVED: "~"}
    eu, lu = report.energy_unit, report.length_unit
    lines = [title] if title else []
    order = "faster than any power" if math.isinf(report.expected_order) else f"{report.expected_order:g}"
    lines.append(f"scheme {report.scheme} (expected order {order}); {len(report.grids)} grids, the project's marked *")
    names = []
    for i, g in enumerate(report.grids):
        name = "x".join(str(p) for p in g.points) + ("*" if i == report.reference_index else "")
        names.append(name)
        lines.append(f"  {name:>14}  spacing {format_spacing(g, lu)}  ({g.size:,} unknowns)")
    noise = report.noise if report.noise is not None else np.full(report.levels, np.nan)
    lines.append(f"energies on each grid to the solver's accuracy (about {float(np.nanmax(noise)):.1g} {eu}); "
                 "levels numbered as on the project grid, matched across grids by their wavefunctions")
    lines.append("")
    cells = []
    for i in range(report.levels):
        cells.append([str(i)] + [format_value(report.energies[g, i], noise[i]) for g in range(len(report.grids))]
                     + [format_uncertain(report.extrapolated[i], report.errors[i]), level_status(report, i)])
    head = ["level"] + [f"E {n} [{eu}]" for n in names] + [f"E extrapolated [{eu}]", "convergence"]
    widths = [max(len(head[c]), *(len(r[c]) for r in cells)) for c in range(len(head) - 1)]
    fmt = lambda row: "  ".join(f"{x:>{w}}" for x, w in zip(row, widths)) + "  " + row[-1]   # noqa: E731
    lines += [fmt(head), "-" * (sum(widths) + 2 * len(widths) + len(head[-1]))] + [fmt(r) for r in cells]
    lines += ["", f"observed convergence: {order_words(report)}", "",
              "splittings between adjacent levels (E extrapolated of the upper minus the lower; levels numbered as on "
              "the project grid):"]
    cells = []
    for s in report.splittings():
        n2 = 2 * max(noise[s.lower], noise[s.upper])
        val = format_bound(s.error, "") if s.degenerate else format_uncertain(s.splitting, s.error)
        cells.append([f"{s.lower}-{s.upper}", val, format_value(s.project_splitting, n2),
                      f"{marks[s.verdict]} {s.words}"])
    head = ["levels", f"splitting [{eu}]", f"on project grid [{eu}]", "verdict"]
    widths = [max(len(head[c]), *(len(r[c]) for r in cells)) for c in range(3)] if cells else [len(h) for h in head[:3]]
    lines += [fmt(head), "-" * (sum(widths) + 6 + 40)] + [fmt(r) for r in cells]
    lines.append("  " + verdict_legend(marks))
    lines.append("")
    coarse = _coarse_lines(report, eu)
    lines += coarse
    tol = default_degeneracy_tolerance(report)
    merged = [s for s in report.splittings() if not s.resolved and not s.too_coarse]
    if merged:
        lines.append(f"degeneracy tolerance from the errors: {tol:.2g} {eu} (groups levels "
                     + ", ".join(f"{s.lower}-{s.upper}" for s in merged) + ")")
    elif not coarse:
        lines.append(f"degeneracy tolerance from the errors: {tol:.2g} {eu} (every splitting resolved)")
    if certificate is not None:
        lines.append(f"level count on the project grid: {certificate.label} ({certificate.describe(eu)})")
    lines += [f"warning: {w}" for w in report.warnings]
    lines += _time_lines(report, timing)
    return "\n".join(lines)
