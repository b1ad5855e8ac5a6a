"""``wellscape converge PROJECT``: is each level, and each splitting, converged on the project's grid?

Solves the project on its own grid and on coarser ones (or finer, with ``--finer``), extrapolates
every level to zero spacing, and prints the table with error estimates, the observed convergence
order, and a verdict for each splitting between neighbouring levels, marked by a symbol and a word
(never by colour alone).  No physics here: everything comes from :mod:`core.convergence`.
"""
from __future__ import annotations

import json
import math
import os
import sys
import time

from app.cli_common import Progress, UsageError, apply_sets, jsonable, load_with_notes

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


_T_IMPORT = time.perf_counter()
_ASCII = {"\u00b1": "+/-", "\u2248": "~", "\u2014": "-", "\u2013": "-", "\u00b5": "u", "\u2713": "+"}


def _printable(text: str, stream) -> str:
    """``text`` as it is when ``stream`` can show it, else with plain ASCII for its few symbols."""
    enc = getattr(stream, "encoding", None) or "ascii"
    try:
        text.encode(enc)
        return text
    except (UnicodeEncodeError, LookupError):
        for k, v in _ASCII.items():
            text = text.replace(k, v)
        return text.encode("ascii", "replace").decode("ascii")


def _elapsed_since_start() -> float:
    """Seconds since this process started (Linux: from /proc; elsewhere since this module was imported,
    which the command line does at its start)."""
    try:
        with open("/proc/self/stat", encoding="ascii") as f:
            fields = f.read().rsplit(")", 1)[1].split()
        with open("/proc/uptime", encoding="ascii") as f:
            uptime = float(f.read().split()[0])
        return max(0.0, uptime - float(fields[19]) / os.sysconf("SC_CLK_TCK"))
    except (OSError, ValueError, IndexError, AttributeError):
        return time.perf_counter() - _T_IMPORT


def format_report(report, *, marks=None, title: str = "", certificate=None, timing=None) -> str:
    """Plain-text report (see :func:`core.convergence_report.format_report`, the wording every front end shares)."""
    from core.convergence_report import format_report as fmt
    return fmt(report, marks=marks, title=title, certificate=certificate, timing=timing)


def cmd_converge(args) -> int:
    from core.convergence import convergence_study
    from core.estimate import estimate_convergence

    t_start = time.perf_counter()
    startup = _elapsed_since_start()
    if args.factor is not None and not (math.isfinite(args.factor) and args.factor > 1.0):
        raise UsageError(f"--factor must be a number above 1, got {args.factor}")
    if args.levels is not None and args.levels < 1:
        raise UsageError(f"--levels must be a positive integer, got {args.levels}")
    project, params = apply_sets(load_with_notes(args.project), args.set)
    refine = "finer" if args.finer else "coarser"
    t_est = time.perf_counter()
    est = estimate_convergence(project, factor=args.factor, grids=args.grids, levels=args.levels,
                               parameters=params, refine=refine).check()
    t_est = time.perf_counter() - t_est
    if not args.json:
        print(f"wellscape: {est.describe()}", file=sys.stderr)
    bar = Progress("converging", enabled=None if not args.json else False)
    report = convergence_study(project, factor=args.factor, grids=args.grids, levels=args.levels,
                               parameters=params, refine=refine, progress=bar)
    bar.done()
    cert = None
    t_count = None
    if args.count:
        t_count = time.perf_counter()
        from core.inertia import certify_count
        from core.study import project_hamiltonian
        h = project_hamiltonian(project, parameters=params, scheme=report.scheme)[0]
        cert = certify_count(h, report.reference.spectrum)
        t_count = time.perf_counter() - t_count
    timing = {"total": startup + time.perf_counter() - t_start, "startup": startup, "estimate": t_est,
              "count": t_count}
    if args.json:
        doc = {"title": project.title, "convergence": report.to_dict(), "estimate": est.describe(),
               "time_s": timing}
        if cert is not None:
            doc["count"] = {"certified": cert.certified, "count_below": cert.count_below, "expected": cert.expected,
                            "shift": cert.shift, "reason": cert.reason, "method": cert.method}
        print(json.dumps(jsonable(doc), indent=1))
        return 0
    text = format_report(report, marks=_marks(sys.stdout), title=project.title, certificate=cert, timing=timing)
    print(_printable(text, sys.stdout))
    return 0


def add_converge_parser(subparsers) -> None:
    """Register ``converge`` on the ``wellscape`` command line's subparsers."""
    s = subparsers.add_parser("converge", help="check that levels and splittings are converged on the grid",
                              description="Solve the project on its grid and on coarser ones, extrapolate each "
                                          "level to zero spacing, and say which splittings the grid resolves.")
    s.add_argument("project", help="the project file (JSON)")
    s.add_argument("--factor", type=float, default=1.5, help="spacing ratio between grids (default 1.5)")
    s.add_argument("--levels", type=int, help="levels to report (default: the project's number of states)")
    s.add_argument("--grids", type=int, default=3, help="number of grids, 2 to 5 (default 3)")
    s.add_argument("--finer", action="store_true", help="use finer grids than the project's instead of coarser")
    s.add_argument("--set", action="append", metavar="NAME=VALUE",
                   help="fix a parameter, field component or gate voltage (repeatable)")
    s.add_argument("--count", action="store_true",
                   help="also verify the number of levels on the project grid by an independent count")
    s.add_argument("--json", action="store_true", help="print machine-readable JSON")
    s.set_defaults(func=cmd_converge)
