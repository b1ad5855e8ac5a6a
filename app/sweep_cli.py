"""``wellscape sweep``: vary one quantity, track the levels, report crossings and anticrossings."""
from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np


def add_sweep_parser(sub) -> None:
    s = sub.add_parser("sweep", help="vary a parameter, track levels, find anticrossings",
                       description="Vary one quantity over evenly spaced values, solve at each, track every level "
                                   "by wavefunction overlap and decide each close approach (crossing or "
                                   "anticrossing, with its gap in the project's energy unit).")
    s.add_argument("project", help="the project file (JSON)")
    s.add_argument("--vary", required=True, metavar="NAME",
                   help="a parameter, a field component (magnetic_field[2]) or a gate (gate:P1)")
    s.add_argument("--from", dest="start", type=float, required=True, metavar="A",
                   help="first value of the varied quantity: for a parameter, in the unit its formulas assume; "
                        "for magnetic_field[i], tesla (atomic units in atomic projects); for electric_field[i], "
                        "the project's field unit (mV/nm for semiconductor projects); for gate:NAME, volts")
    s.add_argument("--to", dest="stop", type=float, required=True, metavar="B",
                   help="last value, in the same unit as --from")
    s.add_argument("--steps", type=int, required=True, help="number of values, including both ends")
    s.add_argument("--states", type=int, metavar="K",
                   help="number of levels to solve and track, a count (default: the project's solver.states)")
    s.add_argument("--set", action="append", metavar="NAME=VALUE",
                   help="fix a parameter, field component or gate voltage for the whole sweep (repeatable)")
    s.add_argument("--workers", type=int, default=1, help="local processes (chunks with warm starts)")
    s.add_argument("--cluster", metavar="ADDRESS", help="a running dask.distributed scheduler, tcp://host:port")
    s.add_argument("--out", metavar="DIR", help="write sweep.npz and sweep.csv into DIR")
    s.add_argument("--json", action="store_true", help="print machine-readable JSON")
    s.add_argument("--refine-budget", type=int, metavar="N",
                   help="at most N extra solves to settle close approaches (default: half the number of values)")
    s.add_argument("--no-refine", action="store_true", help="do not insert values to settle close approaches")
    s.set_defaults(func=cmd_sweep)


def cmd_sweep(args) -> int:
    from app.cli import _Progress, _UsageError, _apply_sets, _load, _parse_sets
    from core.sweep import run_sweep, save_sweep

    if args.steps < 1:
        raise _UsageError(f"--steps must be at least 1, got {args.steps}")
    if args.vary in _parse_sets(args.set):
        raise _UsageError(f"--set {args.vary}: this is the swept quantity (--vary)")
    project, overrides = _apply_sets(_load(args.project), args.set)
    if overrides:
        project = project.with_parameters(**overrides)
    values = np.linspace(args.start, args.stop, args.steps)
    from core.estimate import estimate_sweep
    est = estimate_sweep(project, values.size, states=args.states).check()   # refused with a suggestion
    if not args.json:
        print(f"wellscape: {est.describe()}", file=sys.stderr)
    from core.errors import Cancelled
    bar = _Progress("sweep", enabled=None if not args.json else False)
    interrupted = None
    try:
        result = run_sweep(project, args.vary, values, states=args.states, workers=args.workers,
                           cluster=args.cluster, progress=bar, refine=not args.no_refine,
                           refine_budget=args.refine_budget)
    except Cancelled as exc:              # Ctrl-C: keep what was solved
        bar.done()
        if exc.partial is None:
            raise
        result, interrupted = exc.partial, str(exc)
        print(f"wellscape: {interrupted}; {result.values.size} of {values.size} values solved, "
              f"written as an incomplete sweep", file=sys.stderr)
    bar.done()
    if args.out:
        out = Path(args.out)
        out.mkdir(parents=True, exist_ok=True)
        save_sweep(result, out / "sweep.npz")
    if args.json:
        doc = result.to_json_dict()
        doc["tracks"] = result.tracks.tolist()
        print(json.dumps(doc, indent=1))
        return 130 if interrupted else 0
    u = result.units
    print(f"{project.title}: swept {args.vary} over {args.steps} values from {args.start:g} to {args.stop:g}; "
          f"{result.energies.shape[1]} levels tracked in {result.wall_time:.1f} s")
    te = result.track_energies()
    print(f"energy range {te.min():.6g} .. {te.max():.6g} {u.energy_unit}")
    _print_verdicts(result, args.vary, u.energy_unit)
    _print_exchange(result, args.vary, u.energy_unit)
    _print_completeness(result)
    if args.out:
        print(f"\nwrote {Path(args.out) / 'sweep.npz'} and {Path(args.out) / 'sweep.csv'}")
    return 130 if interrupted else 0


def _print_verdicts(result, parameter: str, energy_unit: str) -> None:
    """Every close approach in the words of :meth:`core.sweep.Anticrossing.describe` (the same words as
    the sweep view and figure sheets)."""
    groups = (("anticrossing", "anticrossings (gap 2t = minimum separation, t the tunnel coupling)"),
              ("crossing", "crossings (the states keep their character; an upper bound on any gap)"),
              ("not settled", "not settled (the refinement budget ran out; what is known)"))
    any_found = False
    for kind, title in groups:
        found = [a for a in result.anticrossings if a.kind == kind]
        if not found:
            continue
        any_found = True
        print(f"{title}: {len(found)}")
        for a in found:
            print("  " + a.describe(parameter, energy_unit))
    if not any_found:
        print("no close approaches of the tracked levels in this range")
    if result.refinement_solves:
        print(f"{result.refinement_solves} extra solve(s) at inserted values settled these")
    for note in result.notes:
        print(f"note: {note}")


def _print_exchange(result, parameter: str, energy_unit: str) -> None:
    """Two electrons: the exchange J = E(lowest triplet) - E(lowest singlet) at each value."""
    two = getattr(result, "two_electron", None)
    if not two:
        return
    from core.formatting import format_energy
    print(f"\nexchange J = E(lowest triplet) - E(lowest singlet) against {parameter}:")
    for v, j, dj in zip(result.values, two["exchange"], two["exchange_uncertainty"]):
        jtxt = "no triplet among the levels" if j is None else format_energy(float(j), float(dj or 0.0), energy_unit)
        print(f"  {parameter} = {v:<12.6g} J = {jtxt}")


def _print_completeness(result) -> None:
    """How each point was checked for missed levels."""
    checks = [c for c in result.checks if c is not None]
    if not checks:
        return
    from core.sweep import completeness_summary
    print(completeness_summary(checks, result.values.size, result.units.energy_unit))
    bad = int(np.count_nonzero(~result.converged)) if result.converged is not None else 0
    if bad:
        print(f"warning: the solver did not converge at {bad} value(s); those points hold partial results")
    if not result.complete:
        print("warning: this sweep is incomplete")
