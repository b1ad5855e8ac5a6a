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

from .errors import Cancelled, FormulaError, InputError, MemoryLimitError, NotConverged, ProjectError, WellscapeError  # noqa: E402
from .grid import Grid  # noqa: E402
from .units import UNIT_SYSTEMS, UnitSystem, get_units  # noqa: E402

#: the version of the source tree; an installed copy reports its own metadata's version
_SOURCE_VERSION = "0.1.0"


def _installed_version() -> str:
    from importlib.metadata import PackageNotFoundError, version
    try:
        return version("wellscape")
    except PackageNotFoundError:            # run from a source tree that was never installed
        return _SOURCE_VERSION


__version__ = _installed_version()

#: names served on first use (PEP 562), so that ``import core`` does not load the solver's
#: compiled kernels until a Hamiltonian is applied (the window opens faster)
_LAZY = {"Hamiltonian": "hamiltonian", "build_hamiltonian": "hamiltonian", "Spectrum": "eigensolve",
         "lowest_states": "eigensolve", "solve_states": "solve", "choose_scheme": "solve"}


def __getattr__(name: str):
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'core' has no attribute {name!r}")
    from importlib import import_module
    value = getattr(import_module(f".{module}", __name__), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(set(globals()) | set(_LAZY))

__all__ = ["Grid", "UnitSystem", "UNIT_SYSTEMS", "get_units", "Hamiltonian", "build_hamiltonian",
           "Spectrum", "lowest_states", "solve_states", "choose_scheme", "WellscapeError", "InputError",
           "MemoryLimitError", "Cancelled", "NotConverged", "FormulaError", "ProjectError", "__version__"]
