"""What settled verdicts cost: a sweep's completeness checks and the refinement of close approaches.

For each case the same sweep runs three ways in one process, best and median of several runs:

* plain:     warm starts only (``check_levels=False, refine=False``) — the baseline;
* checked:   every point checked for missed levels (level count where cheap, else a filtered probe);
* settled:   checked, and every close approach settled by inserted solves (the default).

Targets (issue "sweep verdicts"): checked <= 1.2x plain in 2D; settled <= 1.5x plain on the bundled samples.

    .venv/bin/python tests/benchmarks/bench_sweep_verdicts.py [repeats]
"""
from __future__ import annotations

import os
import statistics
import sys
import time
from pathlib import Path

os.environ.setdefault("OPENBLAS_THREAD_TIMEOUT", "4")
ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

import numpy as np  # noqa: E402

from core.project import load_project  # noqa: E402
from core.sweep import run_sweep  # noqa: E402

CASES = [
    ("double dot, eps -2..2 mV, 21 values", "gaas_double_dot.json", "eps", (-0.002, 0.002), 21, None),
    ("elliptical dot, B 0..2 T, 21 values", "elliptical_dot.json", "magnetic_field[2]", (0.0, 2.0), 21, None),
    ("tilted atom double well, tilt, 21 values", "atom_tilted_double_well.json", "tilt", None, 21, None),
]


def _range(project, name, given):
    if given is not None:
        return given
    lo, hi = project.parameter_ranges.get(name, (None, None))
    return (lo, hi) if lo is not None else (-1.0, 1.0)


def main(repeats=3):
    print(f"sweep verdict costs, best / median of {repeats} runs (s); shared 2-core machine")
    for title, sample, name, rng, steps, states in CASES:
        project = load_project(ROOT / "sample_projects" / sample)
        lo, hi = _range(project, name, rng)
        values = np.linspace(lo, hi, steps)
        times = {"plain": [], "checked": [], "settled": []}
        last = None
        for _ in range(repeats):
            for mode, kw in (("plain", dict(check_levels=False, refine=False)),
                             ("checked", dict(refine=False)), ("settled", {})):
                t = time.perf_counter()
                r = run_sweep(project, name, values, states=states, **kw)
                times[mode].append(time.perf_counter() - t)
                if mode == "settled":
                    last = r
        best = {m: min(v) for m, v in times.items()}
        med = {m: statistics.median(v) for m, v in times.items()}
        print(f"{title}:")
        for m in times:
            print(f"  {m:8s} {best[m]:6.2f} / {med[m]:6.2f}   ratio to plain {best[m] / best['plain']:.2f}x (best), "
                  f"{med[m] / med['plain']:.2f}x (median)")
        kinds = [a.kind for a in last.anticrossings]
        print(f"  verdicts: {kinds.count('anticrossing')} anticrossing(s), {kinds.count('crossing')} crossing(s), "
              f"{kinds.count('not settled')} not settled; {last.refinement_solves} refinement solves; "
              f"points counted {int(last.certified_points.sum())} of {last.values.size}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 3)
