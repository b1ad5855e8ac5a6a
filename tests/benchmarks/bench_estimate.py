"""Time estimates against measured times for every bundled sample (and grids 3x finer per axis).

For each sample: the estimate of a cold solve (:func:`core.estimate.estimate_solve`) against the
measured wall time of the solve (warm process: kernels compiled, best and median of ``--runs``), and
the estimate of the level count's factorisation (:func:`core.inertia.estimate_factorisation`) against
the measured :func:`core.inertia.certify_count` (on one BLAS thread, as the window's count process
runs it).  The baseline of the same run is scipy's ``eigsh``
on the same matrix (``which='SA'``, the sample's number of states), so that a slower or faster
machine hour shows in the ratios.

    .venv/bin/python tests/benchmarks/bench_estimate.py                 # samples on their own grids
    .venv/bin/python tests/benchmarks/bench_estimate.py --fine          # also 3x finer per axis (2D, solves only)
    .venv/bin/python tests/benchmarks/bench_estimate.py --runs 3 gaas_double_dot

A ratio estimated/measured between 0.5 and 2 is the target.
"""
from __future__ import annotations

import argparse
import os
import statistics
import sys
import time
from pathlib import Path

os.environ.setdefault("OPENBLAS_THREAD_TIMEOUT", "4")
ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))


def _timed(fn, runs):
    times, out = [], None
    for _ in range(runs):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return min(times), statistics.median(times), out


def bench(path: Path, runs: int, fine: bool, count: bool, max_count_s: float = 1e9) -> list:
    import dataclasses

    from core.estimate import estimate_solve
    from core.inertia import certify_count, estimate_factorisation
    from core.project import load_project
    from core.study import project_hamiltonian, solve_project
    project = load_project(path)
    rows = []
    variants = [("own grid", project)]
    if fine and project.grid.ndim == 2:
        variants.append(("3x finer", dataclasses.replace(project, grid=project.grid.refined(3.0))))
    for label, p in variants:
        from core.estimate import clear_rate_cache
        solve_project(dataclasses.replace(p, grid=p.grid.refined(0.5)))   # compiled kernels, cached imports
        clear_rate_cache()
        fresh = estimate_solve(p)                          # before any solve of this size: measured rate
        best, med, result = _timed(lambda: solve_project(p), runs)
        after = estimate_solve(p)                          # after one: that solve's own rate
        row = {"sample": path.stem, "grid": label, "unknowns": p.grid.size, "solve_est": fresh.seconds,
               "solve_est_after": after.seconds, "solve_best": best, "solve_median": med}
        from scipy.sparse.linalg import eigsh
        hs = project_hamiltonian(p, parameters=result.parameters, scheme=result.scheme,
                                 potential=result.potential)[0].to_sparse()
        row["eigsh"] = _timed(lambda: eigsh(hs, k=p.solver.states, which="SA", tol=1e-8), 1)[0]
        if count and label == "own grid":
            h = project_hamiltonian(p, parameters=result.parameters, scheme=result.scheme,
                                    potential=result.potential)[0]
            fe = estimate_factorisation(h)
            if fe.seconds > max_count_s:
                row.update({"count_est": fe.seconds, "count_best": float("nan"), "count_median": float("nan"),
                            "method": fe.method})
                rows.append(row)
                print(_format(row), flush=True)
                continue
            from threadpoolctl import threadpool_limits
            with threadpool_limits(limits=1, user_api="blas"):     # as the window's count process runs it
                cbest, cmed, _cert = _timed(lambda: certify_count(h, result.spectrum), max(1, runs - 1))
            row.update({"count_est": fe.seconds, "count_best": cbest, "count_median": cmed, "method": fe.method})
        rows.append(row)
        print(_format(row), flush=True)
    return rows


def _format(r: dict) -> str:
    text = (f"{r['sample']:<24} {r['grid']:<8} {r['unknowns']:>8,}  solve est {r['solve_est']:6.2f} s  "
            f"measured {r['solve_best']:7.2f} s (median {r['solve_median']:7.2f})  "
            f"ratio {r['solve_est'] / r['solve_best']:5.2f} "
            f"(after a solve {r['solve_est_after'] / r['solve_best']:5.2f})"
            f"  (scipy eigsh baseline {r['eigsh']:6.2f} s)")
    if "count_est" in r:
        text += (f"  | count est {r['count_est']:7.2f} s  measured {r['count_best']:7.2f} s  "
                 f"ratio {r['count_est'] / r['count_best']:5.2f}")
    return text


def main(argv=None) -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("samples", nargs="*")
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--fine", action="store_true")
    ap.add_argument("--no-count", action="store_true")
    ap.add_argument("--max-count", type=float, default=1e9, metavar="S",
                    help="skip counts estimated to take longer than S seconds (shown as nan)")
    args = ap.parse_args(argv)
    paths = sorted((ROOT / "sample_projects").glob("*.json"))
    if args.samples:
        paths = [p for p in paths if p.stem in args.samples]
    for p in paths:
        bench(p, args.runs, args.fine, not args.no_count, args.max_count)
    return 0


if __name__ == "__main__":
    sys.exit(main())
