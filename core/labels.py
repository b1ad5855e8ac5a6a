"""Level labels and the rules for showing them: a label is shown only when the symmetry it names
exists, and close levels are told apart by their splitting.

* **Mirror parity** ``x+``/``y-``: for a mirror axis of the grid that leaves the potential unchanged
  (:func:`core.analysis.mirror_parity`) *and* the magnetic field: the field is a pseudovector, so the
  mirror x -> -x keeps B only when B has no component across x (in 2D only B_z couples, so any
  B_z removes both mirrors).  In a field the parities are not quantum numbers and are not shown.
* **L_z** ``L_z = -1, +1 ħ``: for a multiplet on which L_z is a good quantum number (its
  :func:`core.analysis.angular_momentum_z_uncertainty` below :data:`LZ_SHARP` ħ) with eigenvalues
  within :data:`LZ_INTEGER` of integers.  A double dot, an elongated dot or a field in a gauge
  centred elsewhere mixes L_z: no label.
* **Box state** (:mod:`core.bound`): "box state (not bound)" with a hint.
* **Clusters**: levels closer than a drawing can separate (:func:`clusters`) are named together
  with their splitting, in the unit that reads best (:func:`splitting_text`: 38.7 µeV, not 0.0387 meV).
"""
from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from .errors import WellscapeError

__all__ = ["LZ_SHARP", "LZ_INTEGER", "mirror_axes_kept", "level_labels", "clusters", "splitting_text",
           "signed_integer"]

#: largest L_z uncertainty (units of hbar) at which L_z still labels a multiplet (common practice, our
#: choice: a tenth of the spacing of the quantum numbers)
LZ_SHARP = 0.1
#: L_z eigenvalues closer than this to integers are shown as quantum numbers
LZ_INTEGER = 0.05

def signed_integer(v: float) -> str:
    n = int(round(v))
    return f"+{n}" if n > 0 else ("0" if n == 0 else f"−{abs(n)}")


def splitting_text(delta: float, energy_unit: str, digits: int = 3) -> str:
    """An energy difference with its unit, in a smaller unit when it reads better
    (:func:`core.formatting.readable_energy`): ``splitting_text(0.0387, "meV")`` -> ``"38.7 µeV"``."""
    from .formatting import readable_energy
    d = float(delta)
    factor, unit = readable_energy(d, energy_unit) if np.isfinite(d) else (1.0, energy_unit)
    return f"{d * factor:.{digits}g} {unit}".rstrip()


def mirror_axes_kept(axes: Sequence[str], magnetic_field, ndim: int) -> list:
    """The mirror axes (names) that a magnetic field ``(Bx, By, Bz)`` leaves as symmetries."""
    b = np.zeros(3)
    if magnetic_field is not None:
        bf = np.asarray(magnetic_field, dtype=float).ravel()[:3]
        b[: bf.size] = bf
    if ndim == 2:
        b[:2] = 0.0                           # only B_z couples to motion in the plane
    elif ndim == 1:
        b[:] = 0.0
    out = []
    for name in axes:
        a = "xyz".index(name)
        if all(b[c] == 0.0 for c in range(3) if c != a):
            out.append(name)
    return out


def _parity_text(parities: list, members, axes) -> str:
    parts = []
    for a in axes:
        vals = {parities[i].get(a, 0) for i in members}
        parts.append(f"{a}+" if vals == {1} else f"{a}-" if vals == {-1} else f"{a}±")
    return " ".join(parts)


def level_labels(result, groups) -> list:
    """One dict per multiplet of ``result`` (a :class:`core.study.StudyResult`) grouped as ``groups``:
    ``members``, ``energy`` (mean, energy unit), ``parity`` (text, "" when no mirror is a symmetry),
    ``lz`` (L_z eigenvalues or None), ``lz_spread`` (:func:`core.analysis.angular_momentum_z_uncertainty`),
    ``lz_text`` ("" unless L_z labels the multiplet, see the module docstring), ``lz_centre``,
    ``position`` (mean <r> per axis), ``box`` and ``box_reason`` (:func:`core.bound.box_states`).
    Observables that cannot be computed are left empty: a label is never a reason to fail."""
    from .analysis import (
        angular_momentum_z_multiplet,
        angular_momentum_z_uncertainty,
        mirror_parity,
        position_expectation,
    )
    grid, states = result.grid, result.states
    energies = np.asarray(result.energies)
    try:
        parities = mirror_parity(grid, states, result.potential)
    except WellscapeError:
        parities = []
    axes = mirror_axes_kept([a for a in "xyz" if parities and a in parities[0]],
                            getattr(result, "magnetic_field", None), grid.ndim)
    try:
        pos = position_expectation(grid, states)
    except WellscapeError:
        pos = np.full((len(energies), grid.ndim), np.nan)
    try:
        from .bound import box_states
        boxes = box_states(result)
    except (WellscapeError, ValueError, np.linalg.LinAlgError):
        boxes = None
    scale = max(abs(v) for v in grid.lower + grid.upper)
    centre = (0.0, 0.0)
    if grid.ndim >= 2:
        centre = tuple(0.0 if abs(c) < 1e-9 * scale else float(c) for c in pos[0, :2])
    out = []
    for g in groups:
        idx = list(g)
        lz, spread, lz_text = None, float("nan"), ""
        if grid.ndim >= 2:
            try:
                lz = angular_momentum_z_multiplet(grid, states, idx, centre=centre)
                spread = angular_momentum_z_uncertainty(grid, states, idx, centre=centre)
            except WellscapeError:
                lz = None
            if (lz is not None and spread < LZ_SHARP
                    and np.all(np.abs(lz - np.round(lz)) < LZ_INTEGER)):
                lz_text = "L_z = " + ", ".join(signed_integer(v) for v in lz) + " ħ"
        box = [boxes[i] for i in idx if boxes[i]["box"]] if boxes else []
        out.append({"members": idx, "energy": float(energies[idx].mean()),
                    "parity": _parity_text(parities, idx, axes) if parities and axes else "",
                    "lz": lz, "lz_spread": spread, "lz_text": lz_text, "lz_centre": centre,
                    "position": pos[idx].mean(axis=0), "box": bool(box),
                    "box_reason": box[0]["reason"] if box else ""})
    return out


def clusters(energies: Sequence[float], resolution: float) -> list:
    """Runs of consecutive values (ascending ``energies``, one per multiplet) closer than ``resolution``
    to their neighbour: a list of index lists, one per run, singletons included."""
    e = np.asarray(energies, dtype=float)
    if e.size == 0:
        return []
    out = [[0]]
    for i in range(1, e.size):
        if e[i] - e[i - 1] < resolution:
            out[-1].append(i)
        else:
            out.append([i])
    return out


def cluster_text(energies: Sequence[float], members: Sequence[int], energy_unit: str) -> str | None:
    """``ΔE = 38.7 µeV`` for a cluster of two multiplets; the adjacent splittings for more; None for one."""
    if len(members) < 2:
        return None
    e = [float(energies[i]) for i in members]
    steps = [splitting_text(b - a, energy_unit) for a, b in zip(e, e[1:])]
    return "ΔE = " + ", ".join(steps)
