"""Material-region benchmark: a BenDaniel-Duke (region) solve vs the uniform-mass solve on the same grid.

The issue's target: a region solve costs at most 1.5x the uniform-mass solve.  Both solve the same
potential (a parabolic dot plus the region's band offset) for the same states; the uniform solve uses
the project's constant-mass kernel (core.hamiltonian), the region solve the link kernel
(core.kernels_regions).  Runs alternate A/B/A/B; best and median of each are printed, and a plain
baseline (scipy.sparse.linalg.eigsh on the region operator's CSR matrix) once for the 2d case.
The uniform solve with the dot's lighter mass everywhere is timed too: a lighter mass widens the
spectrum (the largest hop), and a Chebyshev filter's degree grows with the square root of that
width, so part of the ratio is the physics of the lighter mass, not the kernel.

    .venv/bin/python tests/benchmarks/bench_regions.py            # 2d and 3d
    .venv/bin/python tests/benchmarks/bench_regions.py 2d --runs 5
"""
from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

import numpy as np  # noqa: E402
import scipy.sparse.linalg as spla  # noqa: E402

from core.eigensolve import lowest_states  # noqa: E402
from core.grid import Grid  # noqa: E402
from core.hamiltonian import build_hamiltonian  # noqa: E402
from core.hamiltonian_regions import build_region_hamiltonian  # noqa: E402
from core.regions import MaterialMap  # noqa: E402

CASES = {"2d": (Grid([-60.0, -60.0], [60.0, 60.0], [256, 256]), 20, "r < 25"),
         "3d": (Grid([-30.0] * 3, [30.0] * 3, [64] * 3), 10, "r < 12")}


def problem(name):
    grid, states, inside = CASES[name]
    mm = MaterialMap.from_formulas(["dot"], [inside], [[0.067] * 3, [0.026] * 3], [0.0, -200.0], {})
    t = time.perf_counter()
    v = mm.offset_map(grid) + 0.01 * sum(m ** 2 for m in grid.mesh_sparse())
    hr = build_region_hamiltonian(grid, v, mm, units="semiconductor")
    build = time.perf_counter() - t
    hu = build_hamiltonian(grid, v, mass=0.067, units="semiconductor", scheme="fd2")
    hl = build_hamiltonian(grid, v, mass=0.026, units="semiconductor", scheme="fd2")
    same = MaterialMap.from_formulas(["dot"], [inside], [[0.026] * 3, [0.026] * 3], [0.0, -200.0], {})
    hs = build_region_hamiltonian(grid, v, same, units="semiconductor")   # the link kernel, one mass
    return grid, states, hr, hu, hl, hs, build


def timed(h, k):
    t = time.perf_counter()
    s = lowest_states(h, k, tolerance=1e-7)
    return time.perf_counter() - t, s


def run(name, runs, baseline):
    grid, k, hr, hu, hl, hs, build = problem(name)
    for h in (hr, hu, hl, hs):
        timed(h, 2)                                # compile the kernels first
    tr, tu, tl, ts = [], [], [], []
    for _ in range(runs):
        tu.append(timed(hu, k)[0])
        t, s = timed(hr, k)
        tr.append(t)
        tl.append(timed(hl, k)[0])
        ts.append(timed(hs, k)[0])
    print(f"{name}: {grid.describe()}, {k} states; building the region map and links {build:.2f} s")
    print(f"  uniform, barrier mass 0.067 : best {min(tu):.2f} s, median {statistics.median(tu):.2f} s")
    print(f"  uniform, dot mass 0.026     : best {min(tl):.2f} s, median {statistics.median(tl):.2f} s")
    print(f"  regions (0.026 in 0.067)    : best {min(tr):.2f} s, median {statistics.median(tr):.2f} s")
    print(f"  ratio regions / uniform barrier mass: best {min(tr) / min(tu):.2f}, median "
          f"{statistics.median(tr) / statistics.median(tu):.2f} (target <= 1.5)")
    print(f"  link kernel, dot mass everywhere: best {min(ts):.2f} s, median {statistics.median(ts):.2f} s")
    print(f"  ratio regions / uniform dot mass (the same largest hop): best {min(tr) / min(tl):.2f}, "
          f"median {statistics.median(tr) / statistics.median(tl):.2f}")
    print(f"  ratio link kernel / constant-mass kernel on the same operator: best {min(ts) / min(tl):.2f}, "
          f"median {statistics.median(ts) / statistics.median(tl):.2f}")
    if baseline:
        t = time.perf_counter()
        w = spla.eigsh(hr.to_sparse(), k=k, which="SA", tol=1e-9)[0]
        t_eigsh = time.perf_counter() - t
        agree = float(np.abs(np.sort(w) - s.energies[:k]).max())
        print(f"  plain baseline eigsh on the region CSR: {t_eigsh:.2f} s (ratio regions / eigsh "
              f"{min(tr) / t_eigsh:.3f}); largest level difference {agree:.2e} meV")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("cases", nargs="*", default=list(CASES))
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--no-baseline", action="store_true", help="skip eigsh (about 2 min at 256^2)")
    args = ap.parse_args()
    for name in args.cases:
        run(name, args.runs, not args.no_baseline and name == "2d")


if __name__ == "__main__":
    main()
