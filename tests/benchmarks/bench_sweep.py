"""Sweep benchmark: a 2D 200 x 200 double dot, 10 states, 101 detuning values.

Baseline (what people write by hand): for each value, build the FD2 matrix with scipy.sparse and call
``eigsh(which="SA")`` cold.  Wellscape: ``run_sweep`` with warm starts and 2 workers.  Both in this
process, same discretisation (FD2).  Prints times, the ratio (target >= 5x) and the share of level
tracking (target < 10%).

    .venv/bin/python tests/benchmarks/bench_sweep.py [points]
"""
from __future__ import annotations

import os
import sys
import time
from pathlib import Path

os.environ.setdefault("OPENBLAS_THREAD_TIMEOUT", "4")
sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

import numpy as np  # noqa: E402
import scipy.sparse.linalg as spla  # noqa: E402

from core.grid import Grid  # noqa: E402
from core.project import FormulaTerm, MaterialSpec, Project, SolverSettings  # noqa: E402
from core.study import project_hamiltonian  # noqa: E402
from core.sweep import run_sweep  # noqa: E402


def project():
    return Project(
        title="benchmark double dot", units="semiconductor", material=MaterialSpec(name="GaAs"),
        grid=Grid([-150.0, -100.0], [150.0, 100.0], [200, 200]),
        parameters={"hw": 3.0, "d": 45.0, "eps": 0.0, "kin": 568.65},
        potential=(FormulaTerm("double dot", "hw**2*(min((x - d)**2, (x + d)**2) + y**2)/(4*kin) + eps*x/d"),),
        electric_field=(0.0, 0.0), solver=SolverSettings(states=10, scheme="fd2", tolerance=1e-7))


def main(points=101):
    p = project()
    values = np.linspace(-1.0, 1.0, points)
    t = time.perf_counter()
    base = []
    for v in values:
        h, *_ = project_hamiltonian(p, parameters={"eps": v})
        base.append(np.sort(spla.eigsh(h.to_sparse(), k=10, which="SA", tol=1e-10)[0]))
    t_base = time.perf_counter() - t
    t = time.perf_counter()
    r = run_sweep(p, "eps", values, states=10, workers=2)
    t_ours = time.perf_counter() - t
    err = np.abs(r.energies - np.array(base)).max()
    print(f"2D 200^2 double dot, 10 states, {points} values (FD2)")
    print(f"  baseline: {points} cold eigsh(SA) solves: {t_base:7.1f} s")
    print(f"  wellscape run_sweep (warm starts, 2 workers): {t_ours:7.1f} s  (max |dE| vs baseline {err:.1e} meV)")
    print(f"  speed-up {t_base / t_ours:.1f}x (target >= 5x); level tracking {r.tracking_time:.2f} s = "
          f"{100 * r.tracking_time / t_ours:.1f}% of the sweep (target < 10%)")
    anti = [a for a in r.anticrossings if a.kind == "anticrossing"]
    print(f"  anticrossings found: {len(anti)}; lowest: " +
          (f"at eps = {anti[0].at:.4g} meV, gap {anti[0].gap:.4g} meV" if anti else "none"))


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 101)
