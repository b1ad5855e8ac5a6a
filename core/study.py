"""The whole pipeline for a project: potential -> Hamiltonian -> lowest states."""
from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field

import numpy as np

from .eigensolve import Spectrum, lowest_states, solver_memory_bytes
from .errors import InputError
from .grid import Grid
from .hamiltonian import build_hamiltonian
from .potentials import (
    evaluate_potential,
    magnetic_field,
    project_g_factor,
    project_masses,
    project_material_map,
    resolve_parameters,
)
from .project import Project
from .provenance import fingerprint
from .resources import check_memory
from .solve import choose_scheme
from .units import get_units

__all__ = ["StudyResult", "solve_project", "project_hamiltonian", "project_scheme", "SpinLevels", "spin_levels"]


@dataclass(frozen=True, eq=False)
class StudyResult:
    """One solve of a project: the inputs as resolved and the spectrum."""

    project: Project
    parameters: dict
    grid: Grid
    potential: np.ndarray          # energy unit, grid.shape
    spectrum: Spectrum
    masses: tuple
    scheme: str
    scheme_reason: str
    magnetic_field: tuple
    g_factor: float | None = None
    extra: dict = field(default_factory=dict)
    #: the project state solved (:func:`core.provenance.fingerprint` of the project, parameters and grid)
    fingerprint: str = ""

    @property
    def energies(self) -> np.ndarray:
        return self.spectrum.energies

    @property
    def states(self) -> np.ndarray:
        return self.spectrum.states

    @property
    def groups(self) -> tuple:
        return self.spectrum.groups

    @property
    def units(self):
        return get_units(self.project.units)


def project_hamiltonian(project: Project, *, parameters: Mapping[str, float] | None = None,
                        grid: Grid | None = None, scheme: str | None = None,
                        potential: np.ndarray | None = None) -> tuple:
    """Build (Hamiltonian, potential, params, scheme, reason) for a project."""
    grid = grid or project.grid
    params = resolve_parameters(project, parameters)
    v = evaluate_potential(project, grid=grid, parameters=params) if potential is None else potential
    materials = project_material_map(project, params)
    varying = materials is not None and not materials.uniform_mass(grid.ndim)
    scheme, reason = project_scheme(project, grid, v, params, scheme=scheme, varying_mass=varying)
    masses = project_masses(project, params)
    b = magnetic_field(project, params)
    if varying:
        from .hamiltonian_regions import build_region_hamiltonian
        h = build_region_hamiltonian(grid, v, materials, units=project.units, scheme=scheme,
                                     magnetic_field=b if np.any(b) else None)
    else:
        h = build_hamiltonian(grid, v, mass=masses[: grid.ndim], units=project.units, scheme=scheme,
                              magnetic_field=b if np.any(b) else None)
    return h, v, params, scheme, reason


def project_scheme(project: Project, grid: Grid, potential: np.ndarray, params: Mapping[str, float], *,
                   scheme: str | None = None, varying_mass: bool | None = None) -> tuple:
    """(scheme, reason) for a project: its setting, or for ``auto`` the choice of
    :func:`core.solve.choose_scheme`, except that material regions with different effective masses
    need second-order differences (the only scheme here that carries a position-dependent mass)."""
    scheme = scheme or project.solver.scheme
    if scheme != "auto":
        return scheme, "set in the project's solver settings"
    if varying_mass is None:
        materials = project_material_map(project, params)
        varying_mass = materials is not None and not materials.uniform_mass(grid.ndim)
    if varying_mass:
        return "fd2", ("the material regions have different effective masses; second-order differences "
                       "are the scheme that carries a position-dependent mass")
    return choose_scheme(grid, potential)


def solve_project(project: Project, *, parameters: Mapping[str, float] | None = None,
                  states: int | None = None, grid: Grid | None = None, scheme: str | None = None,
                  start: np.ndarray | None = None, tolerance: float | None = None,
                  progress: Callable[[str, float], None] | None = None,
                  should_stop: Callable[[], bool] | None = None) -> StudyResult:
    """Solve a project (with optional parameter overrides) and return a :class:`StudyResult`."""
    grid = grid or project.grid
    k = int(states or project.solver.states)
    check_memory(solver_memory_bytes(grid.size, k + max(4, k // 2) + 8, bool(np.any(project.magnetic_field))),
                 what=f"solving {k} states on a {grid.describe()}")
    if progress:
        progress("potential", 0.0)
    h, v, params, scheme, reason = project_hamiltonian(project, parameters=parameters, grid=grid, scheme=scheme)
    spec = lowest_states(h, k, tolerance=tolerance or project.solver.tolerance, start=start,
                         progress=progress, should_stop=should_stop)
    if start is None and tolerance is None:
        from .solve_rates import record_solve  # the next estimate of this size uses this rate
        record_solve(scheme, grid, h.is_complex, k, spec.wall_time)
    return StudyResult(project=project, parameters=params, grid=grid, potential=v, spectrum=spec,
                       masses=project_masses(project, params), scheme=scheme, scheme_reason=reason,
                       magnetic_field=tuple(h.magnetic_field), g_factor=project_g_factor(project, params),
                       fingerprint=fingerprint(project, parameters=params, grid=grid))


@dataclass(frozen=True, eq=False)
class SpinLevels:
    """Orbital levels doubled by spin with the Zeeman term g* mu_B B S_B (no spin-orbit coupling).

    ``spin`` is the projection (+1/2 or -1/2, in units of hbar) on the field direction (on z when B = 0).
    """

    energies: np.ndarray       # (2K,) ascending, energy unit
    orbital: np.ndarray        # (2K,) index of the orbital level
    spin: np.ndarray           # (2K,) +0.5 or -0.5
    zeeman: float              # g* mu_B |B|, the splitting of each orbital level, energy unit


def spin_levels(result: StudyResult) -> SpinLevels:
    """Spin-resolved levels E = E_orbital + g* mu_B |B| s, s = +-1/2.

    The Zeeman energy g* mu_B B . sigma / 2 commutes with the orbital Hamiltonian when there is no
    spin-orbit coupling, so each orbital level splits into two with spin along +-B.
    """
    g = result.g_factor
    if g is None:
        raise InputError("the material has no g-factor; give material.g_factor in the project to include spin")
    b = float(np.linalg.norm(result.magnetic_field))
    u = get_units(result.project.units)
    ez = g * u.bohr_magneton() * b
    e = result.spectrum.energies
    k = e.size
    energies = np.concatenate([e + 0.5 * ez, e - 0.5 * ez])
    orbital = np.concatenate([np.arange(k), np.arange(k)])
    spin = np.concatenate([np.full(k, 0.5), np.full(k, -0.5)])
    order = np.lexsort((-spin, energies))
    return SpinLevels(energies=energies[order], orbital=orbital[order], spin=spin[order], zeeman=float(abs(ez)))
