"""``wellscape sweep``: vary one quantity, track the levels, report crossings and anticrossings."""
from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np

from app.cli_common import Progress, UsageError, apply_sets, load_with_notes, parse_sets
from core.limits import MAX_WORKERS

#: values of one sweep (each is a solve)
MAX_STEPS = 100_000


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
    s.add_argument("--workers", type=int, default=1,
                   help=f"local processes (chunks with warm starts); at most the machine's processors "
                        f"(and {MAX_WORKERS})")
    s.add_argument("--cluster", metavar="ADDRESS",
                   help="a running dask.distributed scheduler, tcp://host:port. The scheduler and its workers "
                        "exchange pickled Python objects with this process, which can run code: connect only "
                        "to a scheduler you trust")
    s.add_argument("--cluster-timeout", type=float, default=10.0, metavar="SECONDS",
                   help="give up when the scheduler has not connected and answered within this time (default 10)")
    s.add_argument("--out", metavar="DIR", help="write sweep.npz and sweep.csv into DIR")
    s.add_argument("--json", action="store_true", help="print machine-readable JSON")
    s.add_argument("--refine-budget", type=int, metavar="N",
                   help="at most N extra solves to settle close approaches (default: half the number of values)")
    s.add_argument("--no-refine", action="store_true", help="do not insert values to settle close approaches")
    s.set_defaults(func=cmd_sweep)


def _check_arguments(args, error) -> None:
    """Refuse or cap the sweep's arguments before the project is read (one-line messages)."""
    import math
    import os

    from core.project import MAX_STATES
    for name, value in (("--from", args.start), ("--to", args.stop)):
        if not math.isfinite(value):
            raise error(f"{name} must be a finite number, got {value}")
    if not 1 <= args.steps <= MAX_STEPS:
        raise error(f"--steps must be between 1 and {MAX_STEPS:,}, got {args.steps}")
    if args.states is not None and not 1 <= args.states <= MAX_STATES:
        raise error(f"--states must be between 1 and {MAX_STATES:,}, got {args.states}")
    if args.workers < 1:
        raise error(f"--workers must be at least 1, got {args.workers}")
    cap = max(1, min(MAX_WORKERS, os.cpu_count() or 1))
    if args.workers > cap and not args.cluster:
        print(f"wellscape: note: --workers {args.workers} is more than this machine's {cap} processors; "
              f"using {cap}", file=sys.stderr)
        args.workers = cap
    elif args.workers > MAX_WORKERS:
        print(f"wellscape: note: --workers {args.workers} capped at {MAX_WORKERS} chunks", file=sys.stderr)
        args.workers = MAX_WORKERS
    if not (math.isfinite(args.cluster_timeout) and 0 < args.cluster_timeout <= 3600):
        raise error(f"--cluster-timeout must be between 0 and 3600 s, got {args.cluster_timeout}")
    if args.cluster is not None:
        _check_address(args.cluster, error)


def _check_address(address: str, error) -> None:
    from urllib.parse import urlsplit
    if len(address) > 300 or "\0" in address:
        raise error("--cluster: expected an address like tcp://host:8786")
    parts = urlsplit(address if "://" in address else "tcp://" + address)
    try:
        port = parts.port
    except ValueError:
        port = None
    if parts.scheme not in ("tcp", "tls") or not parts.hostname or port is None or not 0 < port < 65536:
        raise error(f"--cluster: expected an address like tcp://host:8786, got {address[:60]!r}")


def probe_scheduler(address: str, timeout: float, error) -> None:
    """Connect to a dask scheduler and ask it who it is, all within ``timeout`` seconds (the TCP connect,
    the comm handshake and the reply); raise ``error`` with a one-line reason otherwise."""
    import asyncio
    try:
        from distributed.comm import connect
    except ImportError:
        raise error("--cluster needs dask.distributed: pip install 'wellscape[cluster]'; or drop --cluster "
                    "and use --workers N") from None

    async def ask():
        comm = await connect(address if "://" in address else "tcp://" + address, timeout=timeout)
        try:
            await comm.write({"op": "identity", "reply": True})
            reply = await comm.read()
        finally:
            comm.abort()
        if not isinstance(reply, dict) or "type" not in reply:
            raise ValueError("an unexpected reply")
        return reply

    try:
        asyncio.run(asyncio.wait_for(ask(), timeout))
    except TimeoutError:
        raise error(f"--cluster: the scheduler at {address} did not connect and answer within {timeout:g} s; "
                    f"check the address, or drop --cluster and use --workers N") from None
    except Exception as exc:        # refused, reset, not a scheduler: the reason, never a traceback
        reason = (getattr(exc, "strerror", None) or str(exc).splitlines()[0] if str(exc) else type(exc).__name__)
        reason = reason if len(reason) <= 160 else reason[:157] + "..."
        raise error(f"--cluster: cannot use the scheduler at {address} ({reason}); check the address, or drop "
                    f"--cluster and use --workers N") from None


def cmd_sweep(args) -> int:
    from core.sweep import run_sweep, save_sweep

    _check_arguments(args, UsageError)
    if args.vary in parse_sets(args.set):
        raise UsageError(f"--set {args.vary}: this is the swept quantity (--vary)")
    project, overrides = apply_sets(load_with_notes(args.project), args.set)
    if overrides:
        project = project.with_parameters(**overrides)
    values = np.linspace(args.start, args.stop, args.steps)
    from core.estimate import estimate_sweep
    est = estimate_sweep(project, values.size, states=args.states).check()   # refused with a suggestion
    if not args.json:
        print(f"wellscape: {est.describe()}", file=sys.stderr)
    from core.errors import Cancelled
    bar = Progress("sweep", enabled=None if not args.json else False)
    if args.cluster:
        probe_scheduler(args.cluster, args.cluster_timeout, UsageError)
    interrupted = None
    try:
        result = run_sweep(project, args.vary, values, states=args.states, workers=args.workers,
                           cluster=args.cluster, cluster_timeout=args.cluster_timeout, progress=bar,
                           refine=not args.no_refine, refine_budget=args.refine_budget)
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
    from core.formatting import pretty_unit
    from core.sweep.targets import target_unit
    xu = pretty_unit(target_unit(project, args.vary))
    span = f"from {args.start:g} to {args.stop:g}{(' ' + xu) if xu else ''}"
    print(f"{project.title}: swept {args.vary} over {args.steps} values {span}; "
          f"{result.energies.shape[1]} levels tracked in {result.wall_time:.1f} s")
    te = result.track_energies()
    print(f"energy range {te.min():.6g} .. {te.max():.6g} {u.energy_unit}")
    _print_verdicts(result, args.vary, u.energy_unit, xu)
    _print_exchange(result, args.vary, u.energy_unit, xu)
    _print_completeness(result)
    if args.out:
        print(f"\nwrote {Path(args.out) / 'sweep.npz'} and {Path(args.out) / 'sweep.csv'}")
    return 130 if interrupted else 0


def _print_verdicts(result, parameter: str, energy_unit: str, parameter_unit: str = "") -> None:
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
            print("  " + a.describe(parameter, energy_unit, parameter_unit))
    if not any_found:
        print("no close approaches of the tracked levels in this range")
    if result.refinement_solves:
        print(f"{result.refinement_solves} extra solve(s) at inserted values settled these")
    for note in result.notes:
        print(f"note: {note}")


def _print_exchange(result, parameter: str, energy_unit: str, parameter_unit: str = "") -> None:
    """Two electrons: the exchange J = E(lowest triplet) - E(lowest singlet) at each value."""
    two = getattr(result, "two_electron", None)
    if not two:
        return
    from core.formatting import format_energy
    print(f"\nexchange J = E(lowest triplet) - E(lowest singlet) against {parameter}:")
    for v, j, dj in zip(result.values, two["exchange"], two["exchange_uncertainty"]):
        jtxt = "no triplet among the levels" if j is None else format_energy(float(j), float(dj or 0.0), energy_unit)
        at = f"{v:.6g}{(' ' + parameter_unit) if parameter_unit else ''}"
        print(f"  {parameter} = {at:<14} J = {jtxt}")
    from core.exchange_series import singlet_triplet_crossings
    for c in singlet_triplet_crossings(result):
        print("  " + c.words(parameter, parameter_unit))


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
