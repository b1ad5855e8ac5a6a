"""Times of the cold solves this process has run, remembered so that later estimates of the same size
use what this machine measured (a leaf module: :mod:`core.study` records, :mod:`core.estimate` reads)."""
from __future__ import annotations

from .grid import Grid

__all__ = ["record_solve", "solved_time", "forget_solves"]

_SOLVED: dict = {}        # (scheme, grid shape, complex) -> (seconds, states) of the latest cold solve


def record_solve(scheme: str, grid: Grid, complex_: bool, states: int, seconds: float) -> None:
    """Remember how long a cold solve of ``states`` states just took on this machine: later estimates
    for the same scheme and grid shape scale that time by the block size instead of modelling it."""
    if states > 0 and seconds > 0:
        _SOLVED[(str(scheme), tuple(grid.shape), bool(complex_))] = (float(seconds), int(states))


def solved_time(scheme: str, shape: tuple, complex_: bool) -> tuple | None:
    """(seconds, states) of the latest cold solve recorded for this scheme, grid shape and field, or None."""
    return _SOLVED.get((str(scheme), tuple(shape), bool(complex_)))


def forget_solves() -> None:
    """Forget every recorded solve (for tests and after a machine change)."""
    _SOLVED.clear()
