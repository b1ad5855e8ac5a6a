"""Cost of a certified level count (Sylvester inertia) against plain scipy baselines, in one run.

For each case the script solves the lowest states with Wellscape's eigensolver, then certifies the
count, and prints the time, the factor's size and peak memory, with ratios against:

* a plain scipy sparse LU of the same shifted matrix (``splu`` with its default pivoting and
  ordering: the cost of a general factorisation, which gives no inertia), and
* the solve itself (what the certificate adds on top of a solve).

    .venv/bin/python tests/benchmarks/bench_inertia.py              # 2d and 3d48
    .venv/bin/python tests/benchmarks/bench_inertia.py 2d 3d48 3d64 # pick cases (3d64 takes minutes, GBs)

Cases: ``2d`` (256^2, fd2, real), ``2dB`` (256^2, fd2, magnetic field: complex Hermitian),
``3d48`` (48^3, fd2), ``3d64`` (64^3, fd2).  Each case runs in a child process so that peak memory
(ru_maxrss) belongs to it alone.
"""
from __future__ import annotations

import os
import resource
import subprocess
import sys
import time
from pathlib import Path

os.environ.setdefault("OPENBLAS_THREAD_TIMEOUT", "4")
sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

CASES = {
    "2d": dict(points=(256, 256), field=None, states=20),
    "2dB": dict(points=(256, 256), field=(0.0, 0.0, 0.4), states=20),
    "3d48": dict(points=(48, 48, 48), field=None, states=20),
    "3d64": dict(points=(64, 64, 64), field=None, states=20),
}


def run_case(name: str) -> None:
    import numpy as np
    import scipy.sparse as sp
    import scipy.sparse.linalg as spla

    from core import Grid
    from core.eigensolve import lowest_states
    from core.hamiltonian import build_hamiltonian
    from core.inertia import certify_count, estimate_factorisation
    from core.resources import format_bytes

    c = CASES[name]
    nd = len(c["points"])
    g = Grid([-7.0] * nd, [7.0] * nd, list(c["points"]))
    v = 0.5 * sum(np.asarray(m) ** 2 for m in g.mesh_sparse())
    h = build_hamiltonian(g, v, scheme="fd2", magnetic_field=c["field"])
    lowest_states(build_hamiltonian(Grid([-7.0] * nd, [7.0] * nd, [12] * nd), 0.0, scheme="fd2",
                                    magnetic_field=c["field"]), 2, dense_limit=0)          # compile kernels
    t = time.perf_counter()
    spec = lowest_states(h, c["states"])
    t_solve = time.perf_counter() - t
    est = estimate_factorisation(h)
    rss0 = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    t = time.perf_counter()
    cert = certify_count(h, spec)
    t_cert = time.perf_counter() - t
    rss1 = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    print(f"[{name}] {g.describe()}{', complex (magnetic field)' if h.is_complex else ''}, {spec.count} states")
    print(f"     solve (Wellscape)           : {t_solve:8.2f} s")
    print(f"     certified count             : {t_cert:8.2f} s   {cert.label}: {cert.reason}")
    print(f"         method {cert.method}")
    print(f"         estimate beforehand: {format_bytes(est.bytes)}, about {est.seconds:.0f} s; "
          f"peak memory grew by {format_bytes(max(rss1 - rss0, 0))}")
    if not cert.certified and cert.count_below is None:
        return
    # plain scipy baseline: a general sparse LU of the same shifted matrix (no inertia from it)
    a = h.to_sparse()
    m = (a - cert.shift * sp.identity(a.shape[0], format="csr")).tocsc()
    t = time.perf_counter()
    lu = spla.splu(m)
    t_lu = time.perf_counter() - t
    nnz = lu.L.nnz + lu.U.nnz
    del lu
    print(f"     baseline scipy splu (default): {t_lu:8.2f} s   ({nnz:,} entries in L+U)")
    print(f"     ratio certified count / plain splu : {t_cert / t_lu:6.2f}")
    print(f"     ratio certified count / solve      : {t_cert / t_solve:6.2f}")


def main(argv) -> None:
    names = argv or ["2d", "3d48"]
    for name in names:
        if name not in CASES:
            raise SystemExit(f"unknown case {name!r}; choose from {', '.join(CASES)}")
    for name in names:
        subprocess.run([sys.executable, __file__, "--child", name], check=False)


if __name__ == "__main__":
    if len(sys.argv) > 2 and sys.argv[1] == "--child":
        run_case(sys.argv[2])
    else:
        main(sys.argv[1:])
