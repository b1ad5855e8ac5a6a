"""The bounds every input is checked against before anything is allocated or solved.

One place for the limits, so that the command line, the window and the library refuse the
same things with the same words. Each bound is far beyond any confinement the tool is for
(common practice: keep float64 arithmetic away from overflow and total cancellation), and
each error names the bound it broke.
"""
from __future__ import annotations

__all__ = ["MAX_POINTS_PER_AXIS", "MAX_COORDINATE", "MIN_VOLUME_ELEMENT", "MASS_RANGE", "MAX_ENERGY",
           "MAX_MAGNETIC_FIELD",
           "MAX_MAP_BYTES", "MAX_POLYGON_VERTICES", "MAX_IMPORTED_GATE_VERTICES", "MAX_WORKERS", "MAX_PATH_CHARS",
           "POTENTIAL_WORK_ARRAYS"]

#: grid points along one axis (a 1D grid this long already needs gigabytes per state)
MAX_POINTS_PER_AXIS = 100_000_000
#: |lower|, |upper| of a grid or a map, in the length unit
MAX_COORDINATE = 1e12
#: the product of a grid's spacings, in the length unit ** ndim (a state's norm sums |psi|^2 times it)
MIN_VOLUME_ELEMENT = 1e-250
#: effective mass, in the unit system's mass unit (m0, u, m_e or 1)
MASS_RANGE = (1e-6, 1e9)
#: |V| anywhere on the grid, and the kinetic energy scale hbar^2 / (2 m h^2), in the energy unit;
#: beyond it the low levels lose every digit to rounding (relative precision 1e-16 of the scale)
MAX_ENERGY = 1e15
#: |B|, in the unit system's magnetic unit (tesla for the physical systems)
MAX_MAGNETIC_FIELD = 1e6
#: a potential map file, or the array an archive member inflates to
MAX_MAP_BYTES = 2 * 2**30
#: vertices of one polygon gate
MAX_POLYGON_VERTICES = 100_000
#: vertices of one gate imported from a layout: the gate potential costs one atan2 per vertex and
#: grid point, so a larger outline is refused (simplify it in the layout tool)
MAX_IMPORTED_GATE_VERTICES = 1000
#: local worker processes of a sweep
MAX_WORKERS = 64
#: characters of a file path written in a project
MAX_PATH_CHARS = 4096
#: grid-sized float64 arrays alive while a potential is evaluated (the sum, one term, and up to
#: three temporaries of a formula's arithmetic)
POTENTIAL_WORK_ARRAYS = 5
