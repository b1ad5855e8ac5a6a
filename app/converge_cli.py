"""``wellscape converge PROJECT``: is each level, and each splitting, converged on the project's grid?

Solves the project on its own grid and on coarser ones (or finer, with ``--finer``), extrapolates
every level to zero spacing, and prints the table with error estimates, the observed convergence
order, and a verdict for each splitting between neighbouring levels, marked by a symbol and a word
(never by colour alone).  No physics here: everything comes from :mod:`core.convergence`.
"""
from __future__ import annotations

import json
import math
import sys

__all__ = ["add_converge_parser", "cmd_converge", "format_report"]


def _marks(stream) -> dict:
    """Unicode marks when the output can show them, ASCII otherwise."""
    from core.convergence import ASCII_MARKS, MARKS
    enc = getattr(stream, "encoding", None) or "ascii"
    try:
        "".join(MARKS.values()).encode(enc)
        return MARKS
    except (UnicodeEncodeError, LookupError):
        return ASCII_MARKS


def _num(x: float, width: int, digits: int = 8) -> str:
    if x is None or not math.isfinite(x):
        return f"{'-':>{width}}"
    return f"{x:>{width}.{digits}g}"


def format_report(report, *, marks=None, title: str = "", certificate=None) -> str:
    """Plain-text report: grids, level table (units in the headers), orders, splittings with verdicts."""
    from core.convergence import default_degeneracy_tolerance
    marks = marks or {"resolved": "+", "not resolved": "~"}
    eu, lu = report.energy_unit, report.length_unit
    lines = []
    if title:
        lines.append(title)
    order = "faster than any power" if math.isinf(report.expected_order) else f"{report.expected_order:g}"
    lines.append(f"scheme {report.scheme} (expected order {order}); {len(report.grids)} grids, the project's marked *")
    names = []
    for i, (g, h) in enumerate(zip(report.grids, report.spacings)):
        name = "x".join(str(p) for p in g.points) + ("*" if i == report.reference_index else "")
        names.append(name)
        unit = "" if lu == "1" else f" {lu}"
        lines.append(f"  {name:>14}  spacing {h:.4g}{unit}  ({g.size:,} unknowns)")
    lines.append("")
    w = max(16, max(len(n) for n in names) + len(eu) + 6)
    head = (f"{'level':>5}  " + "  ".join(f"{'E ' + n + ' [' + eu + ']':>{w}}" for n in names)
            + f"  {'E extrapolated [' + eu + ']':>{w + 4}}  {'+/- [' + eu + ']':>12}  {'order':>6}")
    lines.append(head)
    lines.append("-" * len(head))
    for i in range(report.levels):
        row = f"{i:>5}  " + "  ".join(_num(report.energies[g, i], w, 10) for g in range(len(report.grids)))
        po = report.observed_orders[i]
        po_s = "-" if math.isnan(po) else ("fast" if math.isinf(po) else f"{po:.2f}")
        row += f"  {_num(report.extrapolated[i], w + 4, 10)}  {_num(report.errors[i], 12, 2)}  {po_s:>6}"
        status = report.statuses[i] if i < len(report.statuses) else ""
        if status:
            row += f"  ({status})"
        lines.append(row)
    p = report.observed_order
    p_s = "not available" if math.isnan(p) else ("faster than any power" if math.isinf(p) else f"{p:.2f}")
    lines.append("")
    lines.append(f"observed convergence order: {p_s} (expected {order})")
    lines.append("")
    lines.append("splittings between neighbouring levels (extrapolated):")
    head = (f"{'levels':>9}  {'splitting [' + eu + ']':>18}  {'+/- [' + eu + ']':>12}  "
            f"{'on project grid [' + eu + ']':>24}  verdict")
    lines.append(head)
    lines.append("-" * (len(head) + 12))
    for s in report.splittings():
        lines.append(f"{str(s.lower) + '-' + str(s.upper):>9}  {_num(s.splitting, 18, 6)}  {_num(s.error, 12, 2)}  "
                     f"{_num(s.project_splitting, 24, 6)}  {marks[s.verdict]} {s.verdict}")
    lines.append(f"  {marks['resolved']} resolved: larger than the combined error of its two levels; "
                 f"{marks['not resolved']} not resolved: within it (a degeneracy or a grid artefact cannot be told apart)")
    lines.append("")
    lines.append(f"degeneracy tolerance from the errors: {default_degeneracy_tolerance(report):.3g} {eu}")
    if certificate is not None:
        lines.append(f"level count on the project grid: {certificate.label} "
                     f"({certificate.describe(report.energy_unit)})")
    for wmsg in report.warnings:
        lines.append(f"warning: {wmsg}")
    lines.append(f"took {report.wall_time:.1f} s")
    return "\n".join(lines)


def cmd_converge(args) -> int:
    from app.cli import _UsageError, _jsonable, _load, _parse_sets, _Progress
    from core.convergence import convergence_study
    from core.estimate import estimate_convergence

    if args.factor is not None and not (math.isfinite(args.factor) and args.factor > 1.0):
        raise _UsageError(f"--factor must be a number above 1, got {args.factor}")
    if args.levels is not None and args.levels < 1:
        raise _UsageError(f"--levels must be a positive integer, got {args.levels}")
    project = _load(args.project)
    params = _parse_sets(args.set)
    refine = "finer" if args.finer else "coarser"
    est = estimate_convergence(project, factor=args.factor, grids=args.grids, levels=args.levels,
                               parameters=params, refine=refine).check()
    if not args.json:
        print(f"wellscape: {est.describe()}", file=sys.stderr)
    bar = _Progress("converging", enabled=None if not args.json else False)
    report = convergence_study(project, factor=args.factor, grids=args.grids, levels=args.levels,
                               parameters=params, refine=refine, progress=bar)
    bar.done()
    cert = None
    if args.count:
        from core.inertia import certify_count
        from core.study import project_hamiltonian
        h = project_hamiltonian(project, parameters=params, scheme=report.scheme)[0]
        cert = certify_count(h, report.reference.spectrum)
    if args.json:
        doc = {"title": project.title, "convergence": report.to_dict(), "estimate": est.describe()}
        if cert is not None:
            doc["count"] = {"certified": cert.certified, "count_below": cert.count_below, "expected": cert.expected,
                            "shift": cert.shift, "reason": cert.reason, "method": cert.method}
        print(json.dumps(_jsonable(doc), indent=1))
        return 0
    print(format_report(report, marks=_marks(sys.stdout), title=project.title, certificate=cert))
    return 0


def add_converge_parser(subparsers) -> None:
    """Register ``converge`` on the ``wellscape`` command line's subparsers."""
    s = subparsers.add_parser("converge", help="check that levels and splittings are converged on the grid",
                              description="Solve the project on its grid and on coarser ones, extrapolate each "
                                          "level to zero spacing, and say which splittings the grid resolves.")
    s.add_argument("project")
    s.add_argument("--factor", type=float, default=1.5, help="spacing ratio between grids (default 1.5)")
    s.add_argument("--levels", type=int, help="levels to report (default: the project's number of states)")
    s.add_argument("--grids", type=int, default=3, help="number of grids, 2 to 5 (default 3)")
    s.add_argument("--finer", action="store_true", help="use finer grids than the project's instead of coarser")
    s.add_argument("--set", action="append", metavar="NAME=VALUE", help="override a parameter (repeatable)")
    s.add_argument("--count", action="store_true",
                   help="also verify the number of levels on the project grid by an independent count")
    s.add_argument("--json", action="store_true", help="print machine-readable JSON")
    s.set_defaults(func=cmd_converge)
