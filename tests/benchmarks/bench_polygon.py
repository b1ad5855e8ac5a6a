"""Time the self-crossing check of a polygon gate (sweep line) against every edge pair in numpy.

Run: .venv/bin/python tests/benchmarks/bench_polygon.py
The baseline is the all-pairs check the loader used before (vectorised numpy over n(n-3)/2
pairs); it is run only up to 4,000 vertices (its memory grows as n^2: 6.3 GB at 10,000).
"""
from __future__ import annotations

import statistics
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from core.gates import _crossing_edges  # noqa: E402


def all_pairs(v: np.ndarray) -> bool:
    n = len(v)
    b = np.roll(v, -1, axis=0)
    i, j = np.triu_indices(n, k=2)
    keep = ~((i == 0) & (j == n - 1))
    i, j = i[keep], j[keep]

    def orient(p, q, r):
        return (q[:, 0] - p[:, 0]) * (r[:, 1] - p[:, 1]) - (q[:, 1] - p[:, 1]) * (r[:, 0] - p[:, 0])
    p1, p2, q1, q2 = v[i], b[i], v[j], b[j]
    return bool(np.any((orient(p1, p2, q1) * orient(p1, p2, q2) < 0) & (orient(q1, q2, p1) * orient(q1, q2, p2) < 0)))


def outline(n: int) -> np.ndarray:
    t = np.linspace(0, 2 * np.pi, n, endpoint=False)
    r = 100 + 30 * np.sin(7 * t)
    return np.column_stack([r * np.cos(t), r * np.sin(t)])


def times(fn, v, repeat=5):
    out = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn(v)
        out.append(time.perf_counter() - t0)
    return min(out), statistics.median(out)


def main() -> None:
    print(f"{'vertices':>9} {'sweep best/median [s]':>24} {'all pairs best/median [s]':>28} {'ratio':>7}")
    for n in (1000, 4000, 10_000, 100_000):
        v = outline(n)
        assert not _crossing_edges(v)
        sb, sm = times(_crossing_edges, v, repeat=5 if n < 100_000 else 3)
        if n <= 4000:
            assert not all_pairs(v)
            ab, am = times(all_pairs, v, repeat=3)
            print(f"{n:>9} {sb:>11.4f} / {sm:<10.4f} {ab:>13.4f} / {am:<12.4f} {ab / sb:>7.1f}")
        else:
            print(f"{n:>9} {sb:>11.4f} / {sm:<10.4f} {'(not run: memory n^2)':>28}")


if __name__ == "__main__":
    main()
