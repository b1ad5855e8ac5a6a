"""``wellscape sweep``: vary one quantity, track the levels, report crossings and anticrossings."""
from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np


def add_sweep_parser(sub) -> None:
    s = sub.add_parser("sweep", help="vary a parameter, track levels, find anticrossings")
    s.add_argument("project")
    s.add_argument("--vary", required=True, metavar="NAME",
                   help="a parameter, a field component (magnetic_field[2]) or a gate (gate:P1)")
    s.add_argument("--from", dest="start", type=float, required=True)
    s.add_argument("--to", dest="stop", type=float, required=True)
    s.add_argument("--steps", type=int, required=True, help="number of values, including both ends")
    s.add_argument("--states", type=int)
    s.add_argument("--workers", type=int, default=1, help="local processes (chunks with warm starts)")
    s.add_argument("--cluster", metavar="ADDRESS", help="a running dask.distributed scheduler, tcp://host:port")
    s.add_argument("--out", metavar="DIR", help="write sweep.npz and sweep.csv into DIR")
    s.add_argument("--json", action="store_true", help="print machine-readable JSON")
    s.set_defaults(func=cmd_sweep)


def cmd_sweep(args) -> int:
    from app.cli import _Progress, _UsageError, _load
    from core.sweep import run_sweep, save_sweep

    if args.steps < 1:
        raise _UsageError(f"--steps must be at least 1, got {args.steps}")
    project = _load(args.project)
    values = np.linspace(args.start, args.stop, args.steps)
    from core.estimate import estimate_sweep
    est = estimate_sweep(project, values.size, states=args.states).check()   # refused with a suggestion
    if not args.json:
        print(f"wellscape: {est.describe()}", file=sys.stderr)
    bar = _Progress("sweep", enabled=None if not args.json else False)
    result = run_sweep(project, args.vary, values, states=args.states, workers=args.workers,
                       cluster=args.cluster, progress=bar)
    bar.done()
    if args.out:
        out = Path(args.out)
        out.mkdir(parents=True, exist_ok=True)
        save_sweep(result, out / "sweep.npz")
    if args.json:
        doc = result.to_json_dict()
        doc["tracks"] = result.tracks.tolist()
        print(json.dumps(doc, indent=1))
        return 0
    u = result.units
    print(f"{project.title}: swept {args.vary} over {args.steps} values from {args.start:g} to {args.stop:g}; "
          f"{result.energies.shape[1]} levels tracked in {result.wall_time:.1f} s")
    te = result.track_energies()
    print(f"energy range {te.min():.6g} .. {te.max():.6g} {u.energy_unit}")
    anti = [a for a in result.anticrossings if a.kind == "anticrossing"]
    cross = [a for a in result.anticrossings if a.kind == "crossing"]
    print()
    if anti:
        print(f"anticrossings ({len(anti)}):")
        print(f"  {'at ' + args.vary:>22}  {'gap [' + u.energy_unit + ']':>14}  {'t [' + u.energy_unit + ']':>14}  levels")
        for a in anti:
            fit = " (two-level fit)" if a.fit else " (smallest sampled)"
            print(f"  {a.at:>22.6g}  {a.gap:>14.6g}  {a.gap / 2:>14.6g}  {a.tracks[0]} & {a.tracks[1]}{fit}")
    else:
        print("no anticrossings found in this range")
    if cross:
        print(f"crossings allowed by symmetry ({len(cross)}):")
        for a in cross:
            print(f"  at {args.vary} = {a.at:.6g}: levels {a.tracks[0]} & {a.tracks[1]}")
    if args.out:
        print(f"\nwrote {Path(args.out) / 'sweep.npz'} and {Path(args.out) / 'sweep.csv'}")
    return 0
