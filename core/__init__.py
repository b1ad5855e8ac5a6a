"""Wellscape core: grids, Hamiltonians, eigensolvers and analysis for quantum confinement.

A plain numerical library (numpy/scipy, no Qt) that works from a notebook::

    import numpy as np
    from core import Grid, solve_states
    grid = Grid(lower=[-150, -150], upper=[150, 150], points=[96, 96])
    result = solve_states(grid, lambda x, y: 0.5 * 3.0 * (x**2 + y**2) / 19.5**2,
                          states=6, mass=0.067, units="semiconductor")
    result.energies, result.groups
"""
from __future__ import annotations

import os as _os

# A numba kernel that runs right after a BLAS call is about twice as slow while
# OpenBLAS threads spin; a short timeout lets them sleep (has effect only if set
# before numpy is first imported).
_os.environ.setdefault("OPENBLAS_THREAD_TIMEOUT", "4")

from .errors import (Cancelled, FormulaError, InputError, MemoryLimitError, NotConverged,  # noqa: E402
                     ProjectError, WellscapeError)
from .grid import Grid  # noqa: E402
from .units import UNIT_SYSTEMS, UnitSystem, get_units  # noqa: E402
from .hamiltonian import Hamiltonian, build_hamiltonian  # noqa: E402
from .eigensolve import Spectrum, lowest_states  # noqa: E402
from .solve import choose_scheme, solve_states  # noqa: E402

__version__ = "0.1.0"

__all__ = ["Grid", "UnitSystem", "UNIT_SYSTEMS", "get_units", "Hamiltonian", "build_hamiltonian",
           "Spectrum", "lowest_states", "solve_states", "choose_scheme", "WellscapeError", "InputError",
           "MemoryLimitError", "Cancelled", "NotConverged", "FormulaError", "ProjectError", "__version__"]
