"""One-call solves for notebooks: ``solve_states(grid, potential, states=...)``."""
from __future__ import annotations

from collections.abc import Callable
from dataclasses import replace

import numpy as np

from .eigensolve import DEFAULT_DEGENERACY_TOLERANCE, Spectrum, lowest_states
from .errors import InputError
from .grid import Grid
from .hamiltonian import build_hamiltonian, check_potential
from .kinetic import SCHEMES

__all__ = ["solve_states", "choose_scheme", "evaluate_potential_callable", "DEFAULT_TOLERANCE"]

DEFAULT_TOLERANCE = 1e-7


def evaluate_potential_callable(grid: Grid, potential: Callable) -> np.ndarray:
    """Evaluate ``potential(x[, y[, z]])`` on the grid (broadcast coordinate arrays, ``indexing="ij"``)."""
    mesh = grid.mesh_sparse()
    try:
        values = potential(*mesh)
    except Exception as exc:  # a user callable may raise anything; report it plainly
        raise InputError(f"the potential function failed on the grid: {type(exc).__name__}: {exc}") from exc
    return np.broadcast_to(np.asarray(values, dtype=float), grid.shape).copy()


def choose_scheme(grid: Grid, potential: np.ndarray) -> tuple:
    """Pick a kinetic scheme from the potential's smoothness; returns (scheme, reason).

    A potential with a step (a band offset, a hard inner wall) spoils the
    accuracy of high-order and spectral schemes, which then converge at first
    to second order like the plain one, so second-order finite differences
    are chosen.  A smooth potential gets the spectral (sinc-DVR) scheme,
    which converges faster than any power of the spacing.

    Test: the largest second difference of V along any axis, compared with
    the largest first difference.  For a smooth V the ratio is of order
    (spacing / length scale); at a step it is of order 1.
    """
    v = np.asarray(potential, dtype=float)
    span = float(v.max() - v.min()) if v.size else 0.0
    if span == 0.0:
        return "spectral", "the potential is constant, so the spectral scheme is exact up to the grid"
    worst = 0.0
    for a in range(grid.ndim):
        if v.shape[a] < 4:
            continue
        d1 = np.abs(np.diff(v, axis=a))
        d2 = np.abs(np.diff(v, n=2, axis=a))
        m1 = float(d1.max())
        if m1 <= 1e-12 * span:
            continue
        worst = max(worst, float(d2.max()) / m1)
    if worst > 0.45:
        return "fd2", (f"the potential has a step (second/first difference ratio {worst:.2f}); "
                       "second-order differences are the most accurate per unit cost there")
    return "spectral", f"the potential is smooth on this grid (second/first difference ratio {worst:.2f})"


def solve_states(grid: Grid, potential: np.ndarray | Callable | float, *, states: int,
                 mass=1.0, units="dimensionless", scheme: str = "auto",
                 tolerance: float = DEFAULT_TOLERANCE, magnetic_field=None, gauge: str = "symmetric",
                 gauge_centre=None, start: np.ndarray | None = None,
                 progress: Callable[[str, float], None] | None = None,
                 should_stop: Callable[[], bool] | None = None,
                 degeneracy_tolerance: float = DEFAULT_DEGENERACY_TOLERANCE) -> Spectrum:
    """Find the lowest ``states`` bound states of ``potential`` on ``grid``.

    Parameters
    ----------
    grid : a :class:`core.grid.Grid`.
    potential : V on the grid (array of ``grid.shape``), a number, or a callable of the
        coordinate arrays ``f(x[, y[, z]])``; energy unit of ``units``.
    states : how many states to return (the whole multiplet of the last one is returned).
    mass : effective mass (scalar or per axis) in the mass unit of ``units``.
    units : ``"semiconductor"`` (nm, meV, m0), ``"atoms"`` (um, h*kHz, u), ``"atomic"`` or
        ``"dimensionless"`` (hbar = m = 1).
    scheme : ``"auto"``, ``"fd2"``, ``"fd4"``, ``"fd6"``, ``"fd8"`` or ``"spectral"``.
    tolerance : relative residual tolerance of the eigensolver.

    Returns a :class:`core.eigensolve.Spectrum` with ``.energies`` (ascending), ``.states``
    (``[level, x, y(, z)]``, ``sum |psi|^2 dV = 1``), ``.groups`` (degenerate multiplets),
    ``.residuals``, ``.scheme`` and, in ``.extra["scheme_reason"]``, why the scheme was chosen.
    """
    if not isinstance(grid, Grid):
        raise InputError(f"grid must be a core.grid.Grid, got {type(grid).__name__}")
    if callable(potential):
        v = evaluate_potential_callable(grid, potential)
    else:
        v = check_potential(grid, potential)
    if scheme == "auto":
        scheme, reason = choose_scheme(grid, v)
    elif scheme in SCHEMES:
        reason = "chosen by the caller"
    else:
        raise InputError(f"unknown scheme {scheme!r}; choose 'auto' or one of {', '.join(SCHEMES)}")
    h = build_hamiltonian(grid, v, mass=mass, units=units, scheme=scheme, magnetic_field=magnetic_field,
                          gauge=gauge, gauge_centre=gauge_centre)
    result = lowest_states(h, states, tolerance=tolerance, start=start, progress=progress,
                           should_stop=should_stop, degeneracy_tolerance=degeneracy_tolerance)
    extra = dict(result.extra)
    extra["scheme_reason"] = reason
    extra["units"] = units if isinstance(units, str) else units.name
    return replace(result, scheme=scheme, extra=extra)
