"""Bound or not: which computed states are held by the grid's hard walls instead of the potential.

A grid with hard walls turns every spectrum discrete, so a level above the top of the confinement
comes out as a "level" too: a standing wave of the box.  :func:`box_states` flags such states as
``"box state (not bound)"`` with a hint (a larger grid, a deeper confinement), for the window's
level diagram, the command line's level table, JSON and figure sheets alike.

A state is a box state when

* its energy lies above the **lowest rim** of the confinement: the lowest energy at which a state
  can reach a hard wall.  For each face of the grid (the outermost layer of points on a hard-wall
  axis) that is the ground level of the face's own cross-section - the potential on the face plus
  the kinetic energy across it (second-order differences, no magnetic field).  For a 1D grid it is
  the potential at the two ends.  The zero-point energy matters when a thin layer reaches the walls
  (a wetting layer, a quantum well): the minimum of V over the face would call every dot level
  "above the rim", the layer's own subband edge does not; or
* more than :data:`core.analysis.WALL_SHARE` of its probability lies within
  :data:`core.analysis.WALL_BAND` of a hard wall (the potential does not hold it inside the box).
"""
from __future__ import annotations

import numpy as np

from .analysis import BOX_STATE, BOX_STATE_HINT, WALL_BAND, WALL_SHARE, wall_probability
from .grid import Grid

__all__ = ["confinement_rim", "box_states", "BOX_STATE", "BOX_STATE_HINT", "box_state_note"]

_DENSE_FACE = 400         # faces up to this many points: dense eigvalsh, else sparse eigsh


def _face_ground(grid: Grid, v: np.ndarray, axis: int, end: int, masses, units) -> float:
    from .hamiltonian import build_hamiltonian
    face = np.take(v, end, axis=axis)
    if grid.ndim == 1:
        return float(face)
    others = [a for a in range(grid.ndim) if a != axis]
    sub = Grid([grid.lower[a] for a in others], [grid.upper[a] for a in others],
               [grid.points[a] for a in others], [grid.boundary[a] for a in others])
    h = build_hamiltonian(sub, face, mass=[masses[a] for a in others], units=units, scheme="fd2").to_sparse()
    if h.shape[0] <= _DENSE_FACE:
        return float(np.linalg.eigvalsh(h.toarray())[0])
    from scipy.sparse.linalg import eigsh
    return float(eigsh(h, k=1, which="SA", tol=1e-9, return_eigenvectors=False)[0])


def confinement_rim(grid: Grid, potential, masses, units) -> float:
    """The lowest energy (energy unit) at which a state reaches a hard wall of ``grid`` (see the module
    docstring); +inf when every axis is periodic.  ``masses`` are the effective masses per axis."""
    v = np.asarray(potential, dtype=float)
    masses = tuple(np.broadcast_to(np.asarray(masses, dtype=float), (3,))[: grid.ndim]) \
        if np.ndim(masses) == 0 else tuple(float(m) for m in masses)[: grid.ndim]
    rim = np.inf
    for a in range(grid.ndim):
        if grid.periodic[a]:
            continue
        for end in (0, -1):
            rim = min(rim, _face_ground(grid, v, a, end, masses, units))
    return rim


def box_states(result, *, wall_share: float = WALL_SHARE, band: float = WALL_BAND) -> list:
    """One dict per level of ``result`` (a :class:`core.study.StudyResult`): ``box`` (bool),
    ``above_rim`` (bool), ``wall_share`` (share of the probability next to the walls), ``rim``
    (energy unit) and ``reason`` (plain words; "" for a bound state)."""
    grid = result.grid
    energies = np.asarray(result.energies, dtype=float)
    share = wall_probability(grid, result.states, band=band)
    rim = confinement_rim(grid, result.potential, result.masses, result.project.units)
    u = result.units
    out = []
    for s, e in zip(share, energies):
        above = bool(np.isfinite(rim) and e > rim)
        walls = bool(s > wall_share)
        why = []
        if above:
            why.append(f"its energy is above the lowest rim of the confinement ({rim:.6g} {u.energy_unit})")
        if walls:
            why.append(f"{100 * s:.2g} % of its probability lies next to the grid's walls")
        out.append({"box": above or walls, "above_rim": above, "wall_share": float(s), "rim": float(rim),
                    "reason": " and ".join(why)})
    return out


def box_state_note(flags: list, members=None) -> str:
    """One line for a level table or a caption: which levels are box states and what to do, or ""."""
    idx = [i for i, f in enumerate(flags) if f["box"] and (members is None or i in members)]
    if not idx:
        return ""
    names = ", ".join(str(i) for i in idx)
    return (f"level{'s' if len(idx) > 1 else ''} {names}: {BOX_STATE} - held by the grid's walls, not by the "
            f"potential; {BOX_STATE_HINT}")
