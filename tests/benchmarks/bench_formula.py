"""Time formula evaluation against the same expression written directly in numpy.

Run: .venv/bin/python tests/benchmarks/bench_formula.py
"""
from __future__ import annotations

import sys
import timeit
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

import core.formula as formula_module  # noqa: E402
from core.formula import parse_formula  # noqa: E402

TEXT = "0.5*k*(x**2+y**2) + A*exp(-((x-x0)**2+y**2)/(2*s**2))"
N = 512


def main() -> None:
    x = np.linspace(-60.0, 60.0, N)[:, None]
    y = np.linspace(-40.0, 40.0, N)[None, :]
    params = {"k": 0.02, "A": -3.5, "x0": 12.0, "s": 8.0}
    env = {"x": x, "y": y, **params}
    k, A, x0, s = params["k"], params["A"], params["x0"], params["s"]

    def direct():
        return 0.5 * k * (x**2 + y**2) + A * np.exp(-((x - x0) ** 2 + y**2) / (2 * s**2))

    formula = parse_formula(TEXT, parameters=params)
    got, want = formula.evaluate(env), direct()
    assert got.shape == (N, N) and np.allclose(got, want, rtol=1e-14, atol=0.0)

    def best(fn, number=20, repeat=7):
        return min(timeit.repeat(fn, number=number, repeat=repeat)) / number

    def parse_uncached():
        formula_module._parse_cached.cache_clear()  # time the parse itself, not the cache
        return parse_formula(TEXT, parameters=params)

    t_parse = best(parse_uncached, number=50)
    t_formula = best(lambda: formula.evaluate(env))
    t_numpy = best(direct)
    print(f"expression: {TEXT}")
    print(f"grid:       {N}x{N} (x: {x.shape}, y: {y.shape})")
    print(f"parse:      {t_parse * 1e3:8.3f} ms")
    print(f"formula:    {t_formula * 1e3:8.3f} ms")
    print(f"numpy:      {t_numpy * 1e3:8.3f} ms")
    print(f"ratio:      {t_formula / t_numpy:8.2f}")


if __name__ == "__main__":
    main()
