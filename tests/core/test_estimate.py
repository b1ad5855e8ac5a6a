"""Memory and time estimates before a solve, a sweep or a convergence study.

These are resource checks, not physics: memory must agree with what the eigensolver itself allocates
(core.eigensolve.solver_memory_bytes), a request that does not fit is refused with concrete advice,
and the time model's count of Hamiltonian applications is compared with the count a real solve
reports.  No wall-clock time is asserted (speed lives in tests/benchmarks).
"""
from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from core import Grid
from core.eigensolve import solver_memory_bytes
from core.errors import InputError, MemoryLimitError
from core.estimate import (
    block_size,
    clear_rate_cache,
    convergence_grids,
    estimate_convergence,
    estimate_solve,
    estimate_sweep,
    measure_apply_rate,
)
from core.hamiltonian import build_hamiltonian
from core.project import FormulaTerm, MaterialSpec, Project, SolverSettings
from core.study import solve_project


def project(points=(48, 48), states=6, scheme="fd2", field=(0.0, 0.0, 0.0)):
    nd = len(points)
    return Project(title="Estimate test trap of our own", units="dimensionless", material=MaterialSpec(mass=1.0),
                   grid=Grid([-6.0] * nd, [6.0] * nd, list(points)),
                   potential=(FormulaTerm("trap", "0.5*(x**2 + y**2)" if nd == 2 else "0.5*(x**2+y**2+z**2)"),),
                   electric_field=(0.0,) * nd, magnetic_field=field,
                   solver=SolverSettings(states=states, scheme=scheme, tolerance=1e-8))


def test_memory_matches_the_solvers_own_allocation():
    p = project()
    est = estimate_solve(p, measure=False)
    m = block_size(6) + 8
    assert est.memory_bytes >= solver_memory_bytes(p.grid.size, m, False)
    assert est.memory_bytes <= solver_memory_bytes(p.grid.size, m, False) + 64 * p.grid.size
    assert est.fits and est.seconds is None and est.unknowns == 48 * 48 and est.states == 6
    assert est.check() is est


def test_complex_hamiltonian_doubles_the_block_memory():
    real = estimate_solve(project(), measure=True)
    cplx = estimate_solve(project(field=(0.0, 0.0, 0.5)), measure=True)
    assert cplx.extra["complex"] and not real.extra["complex"]
    m = block_size(6) + 8
    # complex vectors take twice the bytes: the complex estimate covers the solver's complex allocation,
    # which exceeds the real one by the block-sized arrays once more
    assert cplx.memory_bytes >= solver_memory_bytes(48 * 48, m, True)
    assert solver_memory_bytes(48 * 48, m, True) - solver_memory_bytes(48 * 48, m, False) >= 2 * m * 48 * 48 * 8
    assert cplx.memory_bytes > real.memory_bytes


def test_apply_rate_is_measured_once_and_cached():
    clear_rate_cache()
    g = Grid([-1.0, -1.0], [1.0, 1.0], [40, 40])
    h = build_hamiltonian(g, np.zeros(g.shape))
    r1 = measure_apply_rate(h)
    r2 = measure_apply_rate(h)
    assert r1 > 0 and math.isfinite(r1) and r1 == r2


def test_time_model_counts_applications_within_a_factor_of_four():
    """The model's number of Hamiltonian applications against the count a cold solve reports."""
    p = project(points=(96, 96), states=10)
    est = estimate_solve(p)
    res = solve_project(p)
    ratio = est.extra["applications"] / res.spectrum.applications
    assert 0.25 <= ratio <= 4.0, ratio
    assert est.seconds is not None and est.seconds > 0
    assert "roughly" in est.describe()


def test_refusal_names_what_would_fit(monkeypatch):
    import core.estimate as est_mod
    p = project(points=(64, 64, 64), states=20)      # large enough that the blocks, not fixed buffers, dominate
    need = estimate_solve(p, measure=False).memory_bytes
    monkeypatch.setattr(est_mod, "available_memory_bytes", lambda: int(0.7 * need))   # budget 56% of need
    est = estimate_solve(p)
    assert not est.fits
    assert "coarser grid" in est.suggestion and "spectral scheme" in est.suggestion
    assert "fewer states" in est.suggestion
    with pytest.raises(MemoryLimitError) as info:
        est.check()
    msg = str(info.value)
    assert "needs about" in msg and "available" in msg and "coarser grid" in msg
    # the suggested grid really fits
    import re
    pts = [int(x) for x in re.search(r"about (\d+) x (\d+) x (\d+) points", msg).groups()]
    smaller = estimate_solve(dataclasses.replace(p, grid=p.grid.with_points(pts)), measure=False)
    assert smaller.fits
    k = int(re.search(r"fewer states \(about (\d+) fit\)", msg).group(1))
    assert 1 <= k < 20 and estimate_solve(p, states=k, measure=False).fits
    assert not estimate_solve(p, states=k + 1, measure=False).fits


def test_spectral_project_is_not_told_to_use_spectral(monkeypatch):
    import core.estimate as est_mod
    monkeypatch.setattr(est_mod, "available_memory_bytes", lambda: 1000)
    est = estimate_solve(project(scheme="spectral"), measure=False)
    assert not est.fits and "spectral" not in est.suggestion


def test_sweep_and_convergence_estimates():
    p = project(points=(40, 40), states=4)
    one = estimate_solve(p)
    sweep = estimate_sweep(p, 11)
    assert sweep.memory_bytes == one.memory_bytes
    assert sweep.seconds == pytest.approx(one.seconds * (1 + 0.4 * 10), rel=1e-9)
    conv = estimate_convergence(p, factor=1.5, grids=3)
    gs = conv.extra["grids"]
    assert [g.points[0] for g in gs] == [17, 26, 40]
    assert conv.unknowns == 40 * 40 and conv.seconds > 0 and len(conv.details) == 3
    finer = estimate_convergence(p, factor=1.5, grids=3, refine="finer", measure=False)
    assert finer.unknowns == finer.extra["grids"][-1].size > 40 * 40
    assert finer.memory_bytes > conv.memory_bytes
    with pytest.raises(InputError):
        estimate_sweep(p, 0)


def test_convergence_grids_coarsest_first():
    g = Grid([0.0, 0.0], [1.0, 2.0], [59, 79], "periodic")
    gs = convergence_grids(g, 2.0, 3)
    assert gs[-1] == g
    assert [x.points for x in gs] == [(15, 20), (30, 40), (59, 79)]
    with pytest.raises(InputError):
        convergence_grids(g, 0.5, 3)
    with pytest.raises(InputError):
        convergence_grids(g, 1.5, 6)
    with pytest.raises(InputError):
        convergence_grids(g, 1.5, 2, refine="sideways")
