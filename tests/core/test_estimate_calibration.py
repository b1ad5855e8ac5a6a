"""Estimates use what was measured on this machine: the latest cold solve of the same size, the
eigensolver's own coarse-start rule, and a measured factorisation rate (no timed assertions here;
the comparison with measured times is tests/benchmarks/bench_estimate.py)."""
from __future__ import annotations

import dataclasses

import pytest

from core.estimate import _coarse_started, block_size, clear_rate_cache, estimate_solve, record_solve
from core.grid import Grid
from core.inertia import dense_factor_rate, estimate_factorisation
from core.project import new_project
from core.study import project_hamiltonian, solve_project


def _dot(n=24, states=4):
    p = new_project()
    return dataclasses.replace(p, grid=Grid([-120.0, -120.0], [120.0, 120.0], [n, n]),
                               solver=dataclasses.replace(p.solver, states=states, scheme="fd2"))


def test_a_cold_solve_sets_the_next_estimate_of_its_size():
    clear_rate_cache()
    p = _dot()
    r = solve_project(p)
    est = estimate_solve(p)
    assert est.seconds == pytest.approx(r.spectrum.wall_time, rel=1e-12)
    more = estimate_solve(p, states=8)
    assert more.seconds == pytest.approx(r.spectrum.wall_time * block_size(8) / block_size(4), rel=1e-12)
    record_solve("fd2", p.grid, False, 4, 10.0)
    assert estimate_solve(p).seconds == pytest.approx(10.0)
    clear_rate_cache()
    fresh = estimate_solve(p)
    assert fresh.seconds is not None and fresh.seconds > 0 and fresh.apply_rate > 0


def test_the_coarse_start_rule_is_the_eigensolvers():
    """Cold solves of at least 30000 points with at least 16 coarse points per axis start on a grid half
    as fine (core.eigensolve.lowest_states): the estimate follows the same rule."""
    assert not _coarse_started(Grid([0, 0], [1, 1], [160, 160]))          # 25600 points
    assert _coarse_started(Grid([0, 0], [1, 1], [200, 200]))
    assert not _coarse_started(Grid([0, 0, 0], [1, 1, 1], [40, 40, 22]))   # 11 coarse points along z


def test_factorisation_time_uses_the_measured_rate():
    from core import inertia
    inertia._CORRECTION.clear()                 # no count has run in this process's history
    rate = dense_factor_rate()
    assert rate > 1e7 and dense_factor_rate() == rate                  # measured once, then cached
    h = project_hamiltonian(_dot(16))[0]
    est = estimate_factorisation(h)
    assert est.method.startswith("dense") and est.seconds == pytest.approx(max(1e-3, 256**3 / 3 / rate))


def test_a_count_that_ran_scales_the_next_estimate_of_its_kind():
    from core import inertia
    inertia._CORRECTION.clear()
    h = project_hamiltonian(_dot(40))[0]                        # a sparse factorisation (no time floor)
    first = estimate_factorisation(h)
    assert first.method.startswith("sparse")
    inertia.record_count(first, 3.0 * first.seconds)          # it took three times as long as modelled
    again = estimate_factorisation(h)
    assert again.seconds == pytest.approx(3.0 * first.seconds, rel=1e-12)
    inertia.record_count(again, again.seconds / 6.0)          # then half the model's time
    assert estimate_factorisation(h).seconds == pytest.approx(0.5 * first.seconds, rel=1e-12)
    inertia._CORRECTION.clear()
