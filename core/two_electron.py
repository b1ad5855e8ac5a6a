"""Two interacting electrons: singlet and triplet levels and the exchange coupling J.

H = h(1) + h(2) + e^2 / (4 pi eps0 eps_r |r1 - r2|), with h the project's single-particle
Hamiltonian (potential, effective mass, orbital magnetic field).  The Hamiltonian does not act on
spin, so every level has a total spin S: a singlet (S = 0) has a spatially symmetric wavefunction,
a triplet (S = 1) an antisymmetric one.

Method: configuration interaction in the basis of the lowest N single-particle orbitals the grid
solver returns.  The orbitals are eigenstates of h, so h(1) + h(2) is diagonal in pair states;
the Coulomb integrals <ab|V|cd> come from :mod:`core.coulomb`.  Symmetric pairs
(|ab> + |ba>)/sqrt 2 (|aa> for a = b) span the singlet space, antisymmetric ones
(|ab> - |ba>)/sqrt 2 (a < b) the triplet space; each block is diagonalised with ``scipy.linalg.eigh``.
The energies are variational: they fall as N grows.

Convergence: the integrals are computed once for the largest basis, and the interaction problem is
solved for growing N (whole degenerate multiplets only, from a quarter of the orbitals up, each
size at least 1.3 times the last) until the estimated remaining error of J is within
``tolerance * |J|`` and that of the lowest singlet and triplet energies within ``tolerance`` times
the interaction energy E_S - 2 E_0 (with a floor of 1e-6 of the orbital energy span, for a J near
zero), or all orbitals are used (the budget).  The remaining error of each energy is estimated
from the last three sizes by a power law in N fitted through them (:func:`tail_estimate`; the
configuration-interaction energies converge algebraically, so the last change alone would
understate it), by an assumed N^-1/2 tail when the changes do not shrink steadily, and never below
the last change; that of J the same way from J's own sequence, or, when J does not converge
steadily, as the sum of the singlet's and the triplet's.  These are estimates, not bounds
(measured: 0.89-0.91 of the true error on a parabolic dot at B = 0, 2.1-2.4 times it in a field).
The tolerance counts as met only when the power law fits both energies and the last two changes
are within it as well (J need not converge monotonically: in a double dot it was seen to rise,
fall and rise again with N).

J = E(lowest triplet) - E(lowest singlet), without the Zeeman energy.  With ``spin`` on and a
g-factor, the triplet's S_z = -1, 0, +1 components sit at E_T + S_z g* mu_B |B| (no spin-orbit
coupling), reported as ``zeeman_splitting``.
"""
from __future__ import annotations

import time
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg as la
from scipy.optimize import brentq

from .coulomb import coulomb_constant, coulomb_memory_bytes, coulomb_tensor
from .errors import Cancelled, InputError, MemoryLimitError
from .grid import Grid
from .materials import get_material
from .resources import available_memory_bytes, format_bytes

__all__ = ["TwoElectronResult", "two_electron_levels", "two_electron_for_spectrum", "two_electron_for_study",
           "sweep_columns", "solve_two_electron",
           "project_permittivity", "pair_bases", "tail_estimate", "DEFAULT_TOLERANCE", "DEFAULT_LEVELS"]

DEFAULT_TOLERANCE = 0.01
DEFAULT_LEVELS = 8
SINGLET, TRIPLET = "singlet", "triplet"


@dataclass(frozen=True, eq=False)
class TwoElectronResult:
    """Two-electron levels (energy unit of the project), each orbital level once.

    A triplet level holds three spin states (S_z = -1, 0, +1), a singlet one.
    ``convergence`` has one row per basis size: (orbitals, lowest singlet, lowest triplet, J).
    """

    energies: np.ndarray                 # ascending
    spin: tuple                          # "singlet" | "triplet" per level
    exchange: float                      # J = E_T - E_S
    exchange_uncertainty: float          # |change of J| from the previous basis size
    energy_uncertainty: np.ndarray       # |change| of each level from the previous basis size
    orbitals: int                        # basis size of the reported values
    previous_orbitals: int | None     # basis size the change is measured from
    converged: bool                      # True: the tolerance was met; False: the budget was hit
    stop_reason: str
    tolerance: float
    convergence: tuple
    permittivity: float
    permittivity_source: str
    zeeman_splitting: float | None = None
    wall_time: float = 0.0
    notes: tuple = ()
    extra: dict = field(default_factory=dict)
    #: per reported level, its pair amplitudes C (orbitals x orbitals; psi(r1, r2) = sum C_ab
    #: phi_a(r1) phi_b(r2), symmetric for a singlet, antisymmetric for a triplet, sum |C|^2 = 1);
    #: empty for a partial result.  Read by :mod:`core.pair_density`.
    coefficients: tuple = ()

    @property
    def singlet_energy(self) -> float:
        return float(self.energies[self.spin.index(SINGLET)])

    @property
    def triplet_energy(self) -> float:
        return float(self.energies[self.spin.index(TRIPLET)])

    def to_dict(self) -> dict:
        """JSON-ready; an uncertainty that could not be estimated is None."""
        def finite(v):
            return float(v) if np.isfinite(v) else None
        return {"energies": self.energies.tolist(), "spin": list(self.spin), "exchange": self.exchange,
                "exchange_uncertainty": finite(self.exchange_uncertainty),
                "energy_uncertainty": [finite(v) for v in self.energy_uncertainty], "orbitals": self.orbitals,
                "previous_orbitals": self.previous_orbitals, "converged": self.converged,
                "stop_reason": self.stop_reason, "tolerance": self.tolerance,
                "convergence": [{"orbitals": n, "singlet": s, "triplet": t, "exchange": j}
                                for n, s, t, j in self.convergence],
                "permittivity": self.permittivity, "permittivity_source": self.permittivity_source,
                "zeeman_splitting": self.zeeman_splitting, "wall_time_s": self.wall_time,
                "notes": list(self.notes)}


def pair_bases(n: int) -> dict:
    """Index arrays (i, j) and normalisations of the singlet (i <= j) and triplet (i < j) pair bases."""
    i, j = np.triu_indices(n)
    c = np.where(i == j, 0.5, 1.0 / np.sqrt(2.0))
    it, jt = np.triu_indices(n, 1)
    return {SINGLET: (i, j, c, 1.0), TRIPLET: (it, jt, np.full(it.size, 1.0 / np.sqrt(2.0)), -1.0)}


def _block(kind: tuple, orbital_energies: np.ndarray, v: np.ndarray) -> np.ndarray:
    """H in one symmetry block: (E_i + E_j) delta + 2 c_ij c_kl (V_ijkl + sign V_ijlk)."""
    i, j, c, sign = kind
    direct = v[i[:, None], j[:, None], i[None, :], j[None, :]]
    swapped = v[i[:, None], j[:, None], j[None, :], i[None, :]]
    h = 2.0 * np.outer(c, c) * (direct + sign * swapped)
    h[np.diag_indices_from(h)] += orbital_energies[i] + orbital_energies[j]
    return 0.5 * (h + h.conj().T)


def _interaction(orbital_energies: np.ndarray, v: np.ndarray, n: int, levels: int) -> tuple:
    """Lowest ``levels`` energies of each spin block in a basis of the n lowest orbitals, and their
    pair amplitudes: ``({spin: energies}, {spin: [C, ...]})`` with C the n x n matrix of
    psi = sum C_ab phi_a(r1) phi_b(r2) (symmetric for a singlet, antisymmetric for a triplet)."""
    e = orbital_energies[:n]
    vn = v[:n, :n, :n, :n]
    out, mats = {}, {}
    for name, kind in pair_bases(n).items():
        i, j, c, sign = kind
        if i.size == 0:
            out[name], mats[name] = np.empty(0), []
            continue
        # the subset driver with the few vectors: as fast as all eigenvalues by divide and conquer
        # (evd) at 1540 pairs (0.21 against 0.23 s, best of 3; 0.029 against 0.032 s at 666)
        k = min(levels, i.size)
        out[name], vecs = la.eigh(_block(kind, e, vn), subset_by_index=[0, k - 1], driver="evr")
        mats[name] = []
        for col in vecs.T:
            m = np.zeros((n, n), dtype=vecs.dtype)
            np.add.at(m, (i, j), c * col)
            np.add.at(m, (j, i), sign * c * col)
            mats[name].append(m)
    return out, mats


def _merge(blocks: dict, levels: int) -> tuple:
    energies = np.concatenate([blocks[SINGLET], blocks[TRIPLET]])
    labels = [SINGLET] * blocks[SINGLET].size + [TRIPLET] * blocks[TRIPLET].size
    order = np.argsort(energies, kind="stable")[:levels]
    return energies[order], tuple(labels[k] for k in order), order


def tail_estimate(sizes, values) -> tuple:
    """Remaining basis error of the last value: (estimate, how).

    With three sizes whose changes shrink monotonically, the power law y(n) = y_inf + c n^-p is fitted
    through the last three points (p by ``scipy.optimize.brentq``) and the estimate is |y_last - y_inf|.
    The configuration-interaction energies converge algebraically in the basis size (the cusp of the
    pair wavefunction at r1 = r2), so the last change alone underestimates the remaining error.
    Otherwise the tail of the last change is extrapolated with an assumed exponent p = 1/2, slower
    than every fit seen here (0.6-0.8 for singlets): in a magnetic field the singlet's changes come
    in steps (orbitals of the needed angular momentum join the basis late) and the last change alone
    was a third of the true error."""
    if len(values) < 2:
        return float("nan"), "no estimate (one basis size)"
    d2 = values[-2] - values[-1]
    n2, n3 = (float(x) for x in sizes[-2:])
    assumed = float(abs(d2) * n3**-0.5 / (n2**-0.5 - n3**-0.5))
    if len(values) >= 3:
        n1, n2, n3 = (float(x) for x in sizes[-3:])
        d1 = values[-3] - values[-2]
        if d1 * d2 > 0 and abs(d2) < abs(d1):
            ratio = d1 / d2
            f = lambda p: (n1**-p - n2**-p) / (n2**-p - n3**-p) - ratio   # noqa: E731
            try:
                p = brentq(f, 1e-3, 40.0)
                return float(abs(d2 * n3**-p / (n2**-p - n3**-p))), f"power-law tail (exponent {p:.2g})"
            except ValueError:
                pass
    return assumed, "assumed N^-1/2 tail (the changes do not shrink steadily)"


def _sizes(groups: tuple, available: int, growth: float = 1.3) -> list:
    """Basis sizes that hold whole multiplets, from the largest down, each at most 1/``growth`` of the
    next and none below a quarter of the largest (a small basis can miss whole symmetry classes of
    pairs, and then two tiny bases agree without being converged)."""
    cuts = [g[-1] + 1 for g in groups if g[-1] + 1 <= available and g[-1] + 1 >= 2]
    if not cuts:
        return []
    sizes = [cuts[-1]]
    smallest = max(2, cuts[-1] // 4)
    for c in reversed(cuts[:-1]):
        if c < smallest:
            break
        if c * growth <= sizes[-1]:
            sizes.append(c)
    return sizes[::-1]


def _memory_check(grid: Grid, n: int, complex_: bool) -> None:
    need = coulomb_memory_bytes(grid, n, complex_) + 6 * (n * (n + 1) // 2) ** 2 * (16 if complex_ else 8)
    avail = available_memory_bytes()
    if need <= 0.8 * avail:
        return
    fits = n
    while fits > 2 and coulomb_memory_bytes(grid, fits, complex_) > 0.6 * avail:
        fits -= 1
    raise MemoryLimitError(
        f"two-electron levels with {n} orbitals on a {grid.describe()} need about {format_bytes(need)} "
        f"(pair densities and Coulomb integrals), but only {format_bytes(avail)} is available. Use fewer "
        f"orbitals (about {fits} fit) or a coarser grid.")


def two_electron_levels(grid: Grid, orbital_energies, orbitals, *, strength: float, groups: tuple | None = None,
                        tolerance: float = DEFAULT_TOLERANCE, levels: int = DEFAULT_LEVELS,
                        permittivity: float = 1.0, permittivity_source: str = "given",
                        zeeman_splitting: float | None = None,
                        progress: Callable[[str, float], None] | None = None,
                        should_stop: Callable[[], bool] | None = None) -> TwoElectronResult:
    """Configuration interaction in the given orbitals ``[orbital, x, y(, z)]`` (sum |phi|^2 dV = 1,
    eigenstates of h with ``orbital_energies``, ascending).

    ``strength`` = e^2 / (4 pi eps0 eps_r) in energy * length; ``groups`` are the degenerate
    multiplets (basis sizes never cut one); ``tolerance`` is relative (see the module docstring).
    """
    t0 = time.perf_counter()
    e = np.asarray(orbital_energies, dtype=float)
    phi = np.asarray(orbitals)
    n_max = int(e.size)
    if phi.shape[0] != n_max or phi.shape[1:] != grid.shape:
        raise InputError(f"orbitals have shape {phi.shape}; expected ({n_max}, {', '.join(map(str, grid.shape))})")
    if n_max < 2:
        raise InputError("two-electron levels need at least 2 orbitals; ask for more states")
    if not (0.0 < tolerance < 1.0):
        raise InputError(f"tolerance must be between 0 and 1 (relative), got {tolerance!r}")
    _memory_check(grid, n_max, np.iscomplexobj(phi))
    groups = groups if groups is not None else tuple((k,) for k in range(n_max))
    sizes = _sizes(groups, n_max)
    common = dict(e=e, tolerance=float(tolerance), t0=t0, grid=grid, levels=levels,
                  permittivity=float(permittivity), permittivity_source=permittivity_source,
                  zeeman_splitting=zeeman_splitting)
    v = coulomb_tensor(grid, phi, strength, progress=progress, should_stop=should_stop)
    blocks, done, met, mats = [], [], False, None
    for k, n in enumerate(sizes):
        if should_stop is not None and should_stop():
            raise Cancelled("cancelled while solving the two-electron problem",
                            partial=_result(done, blocks, met=False, **common) if blocks else None)
        energies_n, mats = _interaction(e, v, n, levels)
        blocks.append(energies_n)
        done.append(n)
        if progress is not None:
            progress("interaction", (k + 1) / len(sizes))
        if len(done) >= 3 and _uncertainties(done, blocks, e, tolerance)[2]:
            met = True
            break
    return _result(done, blocks, met=met, mats=mats, **common)


def _uncertainties(done: list, blocks: list, e: np.ndarray, tolerance: float) -> tuple:
    """Per-spin-block uncertainty arrays, J's uncertainty, whether the tolerance is met, and how.

    Each uncertainty is the larger of the power-law tail estimate and the last change; J's is the
    larger of its own last change and its own power-law tail or, when J does not converge steadily,
    the sum of the lowest singlet's and triplet's uncertainties.  The tolerance is
    met when the power law fits both lowest energies and the last two changes of J and of both
    energies, and the uncertainties, are all within it."""
    unc, how = {}, {}
    for name in (SINGLET, TRIPLET):
        m = min(b[name].size for b in blocks[-3:])
        rows = [tail_estimate(done[-3:], [b[name][i] for b in blocks[-3:]]) for i in range(m)]
        last = np.array([abs(blocks[-1][name][i] - blocks[-2][name][i]) for i in range(m)])
        unc[name] = np.maximum([r[0] for r in rows], last) if m else np.empty(0)
        how[name] = rows[0][1] if rows else ""
    series = {"J": [float(b[TRIPLET][0] - b[SINGLET][0]) for b in blocks],
              SINGLET: [float(b[SINGLET][0]) for b in blocks], TRIPLET: [float(b[TRIPLET][0]) for b in blocks]}
    j = series["J"][-1]
    j_tail, j_how = tail_estimate(done[-3:], series["J"][-3:])
    if not j_how.startswith("power-law"):
        j_tail = float(unc[SINGLET][0] + unc[TRIPLET][0])      # |err_T - err_S| <= |err_T| + |err_S|
    d_j = max(j_tail, abs(series["J"][-1] - series["J"][-2]))
    floor = 1e-6 * float(e[done[-1] - 1] - e[0])
    interaction = abs(series[SINGLET][-1] - 2.0 * float(e[0]))
    limit = {"J": tolerance * max(abs(j), floor), SINGLET: tolerance * max(interaction, floor)}
    limit[TRIPLET] = limit[SINGLET]
    steady = len(done) >= 3 and all(abs(v[-1] - v[-2]) <= limit[k] and abs(v[-2] - v[-3]) <= limit[k]
                                    for k, v in series.items())
    fitted = all(v.startswith("power-law") for v in how.values())
    met = bool(steady and fitted and d_j <= limit["J"] and max(unc[SINGLET][0], unc[TRIPLET][0]) <= limit[SINGLET])
    return unc, d_j, met, how[SINGLET]


def _result(done, blocks, *, e, tolerance, met, t0, grid, levels, mats=None, **common) -> TwoElectronResult:
    rows = tuple((n, float(b[SINGLET][0]), float(b[TRIPLET][0]), float(b[TRIPLET][0] - b[SINGLET][0]))
                 for n, b in zip(done, blocks))
    last = blocks[-1]
    energies, labels, order = _merge(last, levels)
    n = done[-1]
    if len(done) >= 2:
        unc, d_j, _met, how = _uncertainties(done, blocks, e, tolerance)
        per = {name: np.concatenate([unc[name], np.full(last[name].size - unc[name].size, np.nan)])
               for name in (SINGLET, TRIPLET)}
        du = np.concatenate([per[SINGLET], per[TRIPLET]])[order]
        verdict = (f"tolerance met with {n} orbitals" if met else
                   f"budget: all {n} orbitals used and the tolerance ({tolerance:g} relative) is not met; "
                   f"solve more states for a larger basis")
        sizes = ", ".join(map(str, done[-3:]))
        reason = f"{verdict}; uncertainty: the larger of the last change and the {how} over {sizes} orbitals"
        prev = done[-2]
    else:
        du, d_j, prev = np.full(energies.size, np.nan), float("nan"), None
        reason = "only one basis size fits the orbitals given; no convergence estimate (solve more states)"
    notes = ["periodic axis: the repulsion is computed without periodic images"] if any(grid.periodic) else []
    coefficients = ()
    if mats:      # vectors of the lowest ``levels`` of each block, concatenated as in _merge
        pool = list(mats[SINGLET]) + list(mats[TRIPLET])
        coefficients = tuple(pool[k] for k in order)
    return TwoElectronResult(
        energies=energies, spin=labels, exchange=rows[-1][3], exchange_uncertainty=float(d_j),
        energy_uncertainty=du, orbitals=n, previous_orbitals=prev, converged=bool(met), stop_reason=reason,
        tolerance=float(tolerance), convergence=rows, wall_time=time.perf_counter() - t0, notes=tuple(notes),
        coefficients=coefficients, **common)


def project_permittivity(project, params: Mapping[str, float]) -> tuple:
    """(eps_r, source) from the project's material (``material.permittivity``) or the table;
    1 (stated) in dimensionless units when neither gives one."""
    from .potentials import resolve_value
    m = project.material
    if m.permittivity is not None:
        return resolve_value(m.permittivity, params, "material.permittivity"), "project material.permittivity"
    if m.name is not None:
        mat = get_material(m.name)
        if mat.permittivity is not None:
            return float(mat.permittivity), f"{mat.name}: {mat.sources.get('permittivity', 'material table')}"
    if project.units == "dimensionless":
        return 1.0, "default for dimensionless units (repulsion 1/r)"
    raise InputError("two electrons need the relative permittivity: give material.permittivity in the project "
                     "(or a material from the table that has one)")


def two_electron_for_spectrum(spectrum, project, *, parameters: Mapping[str, float] | None = None,
                              magnetic_field=None, g_factor: float | None = None, **options) -> TwoElectronResult:
    """Two-electron levels from one solved point: a :class:`core.eigensolve.Spectrum` of ``project``
    (its states are the orbitals).  This is the per-point hook for sweeps: pass the point's
    parameter values, field (tesla, for the Zeeman splitting) and g-factor.  ``options`` go to
    :func:`two_electron_levels` (tolerance, levels, progress, should_stop)."""
    from .potentials import resolve_parameters
    from .units import get_units
    params = resolve_parameters(project, parameters)
    eps, source = project_permittivity(project, params)
    strength = coulomb_constant(project.units) / eps
    zeeman = None
    if project.spin and g_factor is not None and magnetic_field is not None:
        zeeman = abs(g_factor * get_units(project.units).bohr_magneton() * float(np.linalg.norm(magnetic_field)))
    states = spectrum.states
    groups = spectrum.groups
    if spectrum.multiplet_cut and len(groups) > 1:
        keep = groups[-2][-1] + 1
        states, groups = states[:keep], groups[:-1]
    return two_electron_levels(spectrum.grid, spectrum.energies[: len(states)], states, strength=strength,
                               groups=groups, permittivity=eps, permittivity_source=source,
                               zeeman_splitting=zeeman, **options)


def two_electron_for_study(result, **options) -> TwoElectronResult:
    """Two-electron levels from a :class:`core.study.StudyResult` (its states are the orbitals; the
    project, parameters, field and g-factor come with it).  The hook for a sweep: call it on each
    point's result and collect the points with :func:`sweep_columns`."""
    return two_electron_for_spectrum(result.spectrum, result.project, parameters=result.parameters,
                                     magnetic_field=result.magnetic_field, g_factor=result.g_factor, **options)


def sweep_columns(points) -> dict:
    """The ``two_electron`` section of a sweep's JSON from one :class:`TwoElectronResult` per point:
    ``{"energies": [[...]], "spin": [[...]], "exchange": [...], "exchange_uncertainty": [...],
    "orbitals": [...], "converged": [...], "zeeman_splitting": [...]}`` (energies in the project's
    energy unit; the Zeeman splitting None without spin or field)."""
    points = list(points)
    return {"energies": [p.energies.tolist() for p in points], "spin": [list(p.spin) for p in points],
            "exchange": [p.exchange if np.isfinite(p.exchange) else None for p in points],
            "exchange_uncertainty": [p.to_dict()["exchange_uncertainty"] for p in points],
            "orbitals": [p.orbitals for p in points], "converged": [p.converged for p in points],
            "zeeman_splitting": [p.zeeman_splitting for p in points]}


def solve_two_electron(project, *, parameters: Mapping[str, float] | None = None, orbitals: int | None = None,
                       tolerance: float = DEFAULT_TOLERANCE, levels: int = DEFAULT_LEVELS,
                       progress: Callable[[str, float], None] | None = None,
                       should_stop: Callable[[], bool] | None = None) -> tuple:
    """Solve the project's orbitals (``orbitals`` states, default the project's ``solver.states``),
    then the two-electron problem.  Returns ``(StudyResult, TwoElectronResult)``."""
    from .study import solve_project
    if project.grid.ndim not in (2, 3):
        raise InputError("two electrons need a 2D or 3D grid (the 1/|x| repulsion is not integrable in 1D)")
    n = int(orbitals or project.solver.states)
    study = solve_project(project, parameters=parameters, states=n, progress=progress, should_stop=should_stop)
    try:
        result = two_electron_for_study(study, tolerance=tolerance, levels=levels, progress=progress,
                                        should_stop=should_stop)
    except Cancelled as exc:
        raise Cancelled(str(exc), partial=exc.partial if exc.partial is not None else study) from None
    return study, result
