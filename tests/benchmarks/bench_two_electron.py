"""Cost and convergence of the two-electron solve (configuration interaction), with baselines in one run.

    .venv/bin/python tests/benchmarks/bench_two_electron.py            # all parts
    .venv/bin/python tests/benchmarks/bench_two_electron.py sample     # one part: sample | coulomb | exact

Parts (each in a child process, so that peak memory, ru_maxrss, is its own):

* ``sample``: the bundled sample gaas_double_dot_two_electrons.json at its defaults: wall time of
  the orbital solve and of the two-electron stage (best and median of several runs), peak memory,
  and J against the number of orbitals (the convergence record) with the reported uncertainty.
* ``coulomb``: the FFT convolution of pair densities (core.coulomb.coulomb_tensor) against a plain
  numpy baseline that applies the same kernel as a dense (points x points) matrix; the integrals
  must agree to rounding, and the ratio of times is printed.
* ``exact``: on a coarse grid (the sample's box, 28 x 16 points), the exact two-particle problem on
  the grid: H Psi = h Psi + Psi h^T + W(r1 - r2) Psi for Psi[r1, r2], the lowest eigenpairs with
  scipy's eigsh (a plain scipy baseline, exact in the grid basis), each level labelled singlet or
  triplet by <Psi|P12|Psi>.  Configuration interaction in N orbitals of the same grid must approach
  it from above as N grows; the table shows by how much, and the times of both.
"""
from __future__ import annotations

import os
import resource
import subprocess
import sys
import time
from pathlib import Path

os.environ.setdefault("OPENBLAS_THREAD_TIMEOUT", "4")
ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))
SAMPLE = ROOT / "sample_projects" / "gaas_double_dot_two_electrons.json"
REPEATS = 3


def _peak_mib() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def part_sample() -> None:
    import numpy as np

    from core.project import load_project
    from core.study import solve_project
    from core.two_electron import solve_two_electron, two_electron_for_spectrum

    project = load_project(SAMPLE)
    solve_two_electron(project)                      # warm-up (compiles the kernels)
    t_orb, t_pair = [], []
    for _ in range(REPEATS):
        t0 = time.perf_counter()
        study = solve_project(project)
        t1 = time.perf_counter()
        pair = two_electron_for_spectrum(study.spectrum, project, parameters=study.parameters)
        t2 = time.perf_counter()
        t_orb.append(t1 - t0)
        t_pair.append(t2 - t1)
    print(f"sample {SAMPLE.name}: {project.grid.describe()}, {project.solver.states} orbitals")
    print(f"  orbital solve      best {min(t_orb):.2f} s, median {np.median(t_orb):.2f} s")
    print(f"  two-electron stage best {min(t_pair):.2f} s, median {np.median(t_pair):.2f} s "
          f"(ratio to the orbital solve {np.median(t_pair) / np.median(t_orb):.2f})")
    print(f"  peak memory of this process {_peak_mib():.0f} MiB")
    print(f"  {'orbitals':>8}  {'E_S [meV]':>12}  {'E_T [meV]':>12}  {'J [ueV]':>10}")
    for n, es, et, j in pair.convergence:
        print(f"  {n:>8}  {es:>12.6f}  {et:>12.6f}  {1e3 * j:>10.4f}")
    print(f"  J = {1e3 * pair.exchange:.4f} ueV +- {1e3 * pair.exchange_uncertainty:.4f} ueV; {pair.stop_reason}")


def part_coulomb() -> None:
    import numpy as np

    from core.coulomb import _kernel_values, coulomb_tensor
    from core.project import load_project
    from core.study import solve_project

    project = load_project(SAMPLE)
    n = 20
    study = solve_project(project, states=n)
    grid, phi = study.grid, study.states[:n]
    strength = 1439.964 / 12.9
    times = []
    for _ in range(REPEATS):
        t0 = time.perf_counter()
        v_fft = coulomb_tensor(grid, phi, strength)
        times.append(time.perf_counter() - t0)
    # baseline: the same kernel as a dense matrix W[r, r'] applied with numpy
    t0 = time.perf_counter()
    pts = np.stack([c.ravel() for c in grid.mesh()], axis=1)
    d = np.abs(pts[:, None, :] - pts[None, :, :])
    h = np.asarray(grid.spacing)
    idx = np.rint(d / h).astype(int)
    offsets = [np.arange(m) * s for m, s in zip(grid.shape, h)]
    table = _kernel_values(grid, offsets)
    w = strength * table[idx[..., 0], idx[..., 1]]
    flat = phi.reshape(n, -1)
    pairs = (flat[:, None, :] * flat[None, :, :]).reshape(n * n, -1)
    m = (pairs @ w @ pairs.T) * grid.volume_element ** 2
    v_dense = m.reshape(n, n, n, n).transpose(0, 2, 1, 3)
    t_dense = time.perf_counter() - t0
    err = float(np.abs(v_fft - v_dense).max() / np.abs(v_dense).max())
    print(f"coulomb integrals, {n} orbitals on {grid.describe()}:")
    print(f"  FFT convolution best {min(times):.3f} s, median {np.median(times):.3f} s; dense-matrix numpy "
          f"baseline {t_dense:.3f} s (ratio {t_dense / np.median(times):.1f}); largest relative difference "
          f"{err:.1e}")


def part_exact() -> None:
    import numpy as np
    import scipy.sparse.linalg as spla

    from core.coulomb import _kernel_values, coulomb_constant
    from core.project import load_project
    from core.study import project_hamiltonian, solve_project
    from core.two_electron import two_electron_for_spectrum

    project = load_project(SAMPLE)
    grid = project.grid.with_points([28, 16])
    strength = coulomb_constant(project.units) / 12.9
    h_op = project_hamiltonian(project, grid=grid)[0]
    h = h_op.to_sparse().toarray().real
    pts = np.stack([c.ravel() for c in grid.mesh()], axis=1)
    idx = np.rint(np.abs(pts[:, None, :] - pts[None, :, :]) / np.asarray(grid.spacing)).astype(int)
    table = _kernel_values(grid, [np.arange(m) * s for m, s in zip(grid.shape, grid.spacing)])
    w = strength * table[idx[..., 0], idx[..., 1]]
    g = grid.size

    def matvec(x):
        psi = x.reshape(g, g)
        return (h @ psi + psi @ h.T + w * psi).ravel()

    op = spla.LinearOperator((g * g, g * g), matvec=matvec, dtype=float)
    t0 = time.perf_counter()
    vals, vecs = spla.eigsh(op, k=6, which="SA", tol=1e-10)
    t_ed = time.perf_counter() - t0
    order = np.argsort(vals)
    vals, vecs = vals[order], vecs[:, order]
    parity = [float(v @ v.reshape(g, g).T.ravel()) for v in vecs.T]
    labels = ["singlet" if p > 0 else "triplet" for p in parity]
    e_s = vals[labels.index("singlet")]
    e_t = vals[labels.index("triplet")]
    print(f"exact two-particle problem on {grid.describe()} ({g * g:,} unknowns): eigsh {t_ed:.2f} s")
    print(f"  E_S = {e_s:.6f} meV, E_T = {e_t:.6f} meV, J = {1e3 * (e_t - e_s):.4f} ueV "
          f"(symmetry <P12> = {', '.join(f'{p:+.3f}' for p in parity)})")
    print(f"  {'orbitals':>8}  {'time [s]':>8}  {'E_S - exact [meV]':>18}  {'E_T - exact [meV]':>18}  {'J [ueV]':>9}")
    for n in (12, 24, 45, 80):
        t0 = time.perf_counter()
        study = solve_project(project, grid=grid, states=n)
        pair = two_electron_for_spectrum(study.spectrum, project, tolerance=1e-9)
        dt = time.perf_counter() - t0
        print(f"  {pair.orbitals:>8}  {dt:>8.2f}  {pair.singlet_energy - e_s:>18.2e}  "
              f"{pair.triplet_energy - e_t:>18.2e}  {1e3 * pair.exchange:>9.4f}")


PARTS = {"sample": part_sample, "coulomb": part_coulomb, "exact": part_exact}


def main(argv) -> None:
    if len(argv) == 2 and argv[0] == "--child":
        PARTS[argv[1]]()
        return
    names = argv or list(PARTS)
    print("two-electron benchmark (a shared 2-core machine: times vary by tens of percent between runs)")
    for name in names:
        subprocess.run([sys.executable, __file__, "--child", name], check=True, cwd=str(ROOT))


if __name__ == "__main__":
    main(sys.argv[1:])
