"""Evaluate a project's potential on its grid (energy unit of the project).

Each enabled term of ``project.potential`` contributes an array of the grid's
shape; the potential is their sum.  Parameters come from the project, with
optional overrides (this is how sweeps and sliders drive any value).
"""
from __future__ import annotations

import os
from collections import OrderedDict
from collections.abc import Mapping

import numpy as np

from .errors import FormulaError, InputError, ProjectError
from .formula import MATERIAL_NAMES, nonfinite_report, parse_formula
from .gates import Gate, gates_potential
from .grid import Grid
from .limits import MASS_RANGE, MAX_ENERGY, MAX_MAGNETIC_FIELD, POTENTIAL_WORK_ARRAYS
from .maps import confined_map_path, interpolate_map, load_map_file
from .materials import get_material
from .project import FieldTerm, FormulaTerm, GatesTerm, MapTerm, OscillatorTerm, PointsTerm, Project
from .resources import check_memory
from .units import get_units

__all__ = ["resolve_parameters", "material_names", "resolve_value", "evaluate_potential", "evaluate_terms", "gate_list",
           "project_masses", "project_g_factor", "electric_field", "magnetic_field", "default_lever",
           "potential_memory_bytes", "check_potential_memory"]


def resolve_parameters(project: Project, overrides: Mapping[str, float] | None = None) -> dict:
    """Project parameters with ``overrides`` applied; unknown override names are refused."""
    params = dict(project.parameters)
    for name, value in (overrides or {}).items():
        if name not in params:
            known = ", ".join(params) or "none"
            raise InputError(f"unknown parameter {name!r}; this project's parameters are: {known}")
        v = float(value)
        if not np.isfinite(v):
            raise InputError(f"parameter {name} must be finite, got {value!r}")
        params[name] = v
    return params


def resolve_value(value, params: Mapping[str, float], what: str = "value") -> float:
    """A number, or a formula of parameters evaluated with ``params``."""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return float(value)
    try:
        f = parse_formula(str(value), parameters=tuple(params), coordinates=())
        out = float(f.evaluate(params))
    except FormulaError as exc:
        raise ProjectError(str(exc), path=what) from None
    if not np.isfinite(out):
        raise ProjectError(f"{value!r} gives {out} with the current parameters", path=what)
    return out


def _in_span(value: float, span: tuple, path: str, unit: str) -> float:
    if not span[0] <= abs(value) <= span[1]:
        raise ProjectError(f"{value:g} {unit} is outside the accepted range {span[0]:g} .. {span[1]:g} {unit}",
                           path=path)
    return value


def project_masses(project: Project, params: Mapping[str, float]) -> tuple:
    """Effective mass per axis (x, y, z) in the unit system's mass unit (within ``limits.MASS_RANGE``)."""
    m = project.material
    if m.mass is not None:
        unit = get_units(project.units).mass_unit
        values = m.mass if isinstance(m.mass, tuple) else (m.mass,) * 3
        out = []
        for i, v in enumerate(values):
            where = f"material.mass[{i}]" if isinstance(m.mass, tuple) else "material.mass"
            mv = resolve_value(v, params, where)
            if mv <= 0:
                raise ProjectError(f"must be positive, got {mv:g} {unit}", path=where)
            out.append(_in_span(mv, MASS_RANGE, where, unit))
        return tuple(out)
    return tuple(get_material(m.name).masses)


def material_names(project: Project, params: Mapping[str, float]) -> dict:
    """The values of :data:`core.formula.MATERIAL_NAMES` for ``project``: hbar^2/(2 m*) of its
    material (the mass outside every region) in energy unit * length unit^2, along x and per axis."""
    u = get_units(project.units)
    per_axis = [u.kinetic_prefactor(m) for m in project_masses(project, params)]
    return {"hbar2_over_2m": per_axis[0], "hbar2_over_2m_x": per_axis[0],
            "hbar2_over_2m_y": per_axis[1], "hbar2_over_2m_z": per_axis[2]}


def _spec_masses(m, params: Mapping[str, float], path: str) -> tuple:
    """Effective mass per axis of a region's material (checked positive with the current values)."""
    if m.mass is not None:
        if isinstance(m.mass, tuple):
            out = tuple(resolve_value(v, params, f"{path}.mass[{i}]") for i, v in enumerate(m.mass))
        else:
            v = resolve_value(m.mass, params, f"{path}.mass")
            out = (v, v, v)
        if min(out) <= 0:
            raise ProjectError(f"the mass must be positive, got {list(out)} with the current parameters",
                               path=f"{path}.mass")
        return out
    return tuple(get_material(m.name).masses)


#: how a project's link masses and band offsets are averaged (see core.regions; measured best)
LINK_RULE = "cell"
__all__ += ["project_material_map", "LINK_RULE"]


def project_material_map(project: Project, params: Mapping[str, float], *, link_rule: str | None = None):
    """The project's materials as a :class:`core.regions.MaterialMap`, or None without regions."""
    if not project.regions:
        return None
    from .materials import band_offset
    from .regions import MaterialMap, electron_volt_in
    masses = [project_masses(project, params)]
    offsets = [0.0]
    for k, reg in enumerate(project.regions):
        path = f"regions[{k}]"
        masses.append(_spec_masses(reg.material, params, f"{path}.material"))
        if reg.offset is None:
            offsets.append(0.0)
        elif reg.offset == "table":
            try:
                ev = band_offset(reg.material.name, project.material.name)
            except InputError as exc:
                raise ProjectError(str(exc), path=f"{path}.offset") from None
            offsets.append(ev * electron_volt_in(get_units(project.units)))
        else:
            offsets.append(resolve_value(reg.offset, params, f"{path}.offset"))
    return MaterialMap.from_formulas([r.label for r in project.regions], [r.inside for r in project.regions],
                                     masses, offsets, params, link_rule=link_rule or LINK_RULE)


def project_g_factor(project: Project, params: Mapping[str, float]) -> float | None:
    m = project.material
    if m.g_factor is not None:
        return resolve_value(m.g_factor, params, "material.g_factor")
    if m.name is not None:
        return get_material(m.name).g_factor
    return None


def electric_field(project: Project, params: Mapping[str, float]) -> np.ndarray:
    f = np.zeros(3)
    for i, v in enumerate(project.electric_field):
        f[i] = resolve_value(v, params, f"electric_field[{i}]")
    return f


def magnetic_field(project: Project, params: Mapping[str, float]) -> np.ndarray:
    unit = get_units(project.units).magnetic_unit
    return np.array([_in_span(resolve_value(v, params, f"magnetic_field[{i}]"), (0.0, MAX_MAGNETIC_FIELD),
                              f"magnetic_field[{i}]", unit)
                     for i, v in enumerate(project.magnetic_field)])


def potential_memory_bytes(grid: Grid, terms: int = 1) -> int:
    """Peak memory of evaluating ``terms`` potential terms on ``grid``, an exact integer: one float64
    array per term plus ``limits.POTENTIAL_WORK_ARRAYS - 1`` (the sum and a formula's temporaries)."""
    return (max(int(terms), 1) + POTENTIAL_WORK_ARRAYS - 1) * 8 * grid.size


def check_potential_memory(grid: Grid, terms: int = 1) -> None:
    """Refuse (MemoryLimitError) before allocating a potential that will not fit in memory."""
    check_memory(potential_memory_bytes(grid, terms), what=f"evaluating the potential on a {grid.describe()}",
                 hint="Use a coarser grid.")


def default_lever(project: Project) -> float:
    """Energy per volt of electrostatic potential for the project's particle: q * 1 V in the energy unit."""
    u = get_units(project.units)
    if not u.charged:
        raise ProjectError("surface gates act on charged particles; this project's unit system is for "
                           "neutral atoms. Give the gates term an explicit \"lever\" (energy per volt).",
                           path="potential")
    return u.charge_si * 1.0 / u.energy_si


def gate_list(term: GatesTerm, params: Mapping[str, float], path: str = "potential") -> list:
    """The gates of a term as :class:`core.gates.Gate` objects (voltages resolved)."""
    out = []
    for j, g in enumerate(term.gates):
        gp = f"{path}.gates[{j}]"
        volt = resolve_value(g.voltage, params, f"{gp}.voltage")
        try:
            if g.rectangle is not None:
                rect = [resolve_value(c, params, f"{gp}.rectangle[{k}]") for k, c in enumerate(g.rectangle)]
                out.append(Gate.from_rectangle(g.label, volt, rect))
            else:
                verts = [[resolve_value(c, params, f"{gp}.polygon[{k}][{a}]") for a, c in enumerate(v)]
                         for k, v in enumerate(g.polygon)]
                out.append(Gate(g.label, volt, np.array(verts, dtype=float)))
        except ProjectError:
            raise
        except InputError as exc:
            raise ProjectError(str(exc), path=gp) from None
    return out


_MAP_CACHE: OrderedDict[tuple, np.ndarray] = OrderedDict()


def _map_values(term: MapTerm, base_dir: str | None, path: str) -> np.ndarray:
    try:
        p = confined_map_path(term.file, base_dir)
    except InputError as exc:
        raise ProjectError(str(exc), path=f"{path}.file") from None
    try:
        st = os.stat(p)
        key = (str(p.resolve()), st.st_mtime_ns, st.st_size, term.array)
    except OSError:
        key = None
    if key is not None and key in _MAP_CACHE:
        _MAP_CACHE.move_to_end(key)
        return _MAP_CACHE[key]
    try:
        values = load_map_file(p, array_name=term.array)
    except InputError as exc:
        raise ProjectError(str(exc), path=f"{path}.file") from None
    if key is not None:
        _MAP_CACHE[key] = values
        while len(_MAP_CACHE) > 8:
            _MAP_CACHE.popitem(last=False)
    return values


def _points_values(term: PointsTerm, base_dir: str | None, grid: Grid, params, path: str) -> np.ndarray:
    """Energy of a points term on the grid: scale * V, with V interpolated (core.points_map)."""
    from .points_map import points_on_grid
    scale = resolve_value(term.scale, params, f"{path}.scale")
    fill = None if term.fill is None else resolve_value(term.fill, params, f"{path}.fill")
    try:
        values = points_on_grid(term.file, base_dir, grid, array_name=term.array, fill=fill)
    except InputError as exc:
        raise ProjectError(str(exc), path=f"{path}.file ({term.label})") from None
    values *= scale
    return values


def evaluate_terms(project: Project, *, grid: Grid | None = None,
                   parameters: Mapping[str, float] | None = None, include_disabled: bool = False) -> list:
    """``[(index, term, array or None)]`` for every term (None for disabled ones unless asked)."""
    grid = grid or project.grid
    check_potential_memory(grid, sum(1 for t in project.potential if t.enabled or include_disabled))
    params = resolve_parameters(project, parameters)
    u = get_units(project.units)
    out = []
    coords: dict = {}
    for i, term in enumerate(project.potential):
        path = f"potential[{i}]"
        if not term.enabled and not include_disabled:
            out.append((i, term, None))
            continue
        if isinstance(term, FormulaTerm):
            try:
                f = parse_formula(term.formula, parameters=(*params, *MATERIAL_NAMES))
                wanted = {"x", "y", "z"} | (set(f.names) & {"r"})
                coords.update(grid.coordinates(wanted - set(coords)))   # r only if a formula uses it
                derived = material_names(project, params) if set(f.names) & set(MATERIAL_NAMES) else {}
                val = f.evaluate({**coords, **params, **derived})
            except FormulaError as exc:
                raise ProjectError(str(exc), path=f"{path}.formula ({term.label})") from None
            arr = np.broadcast_to(np.asarray(val, dtype=float), grid.shape).astype(float, copy=True)
            report = nonfinite_report(arr, {k: coords[k] for k in ("x", "y", "z")[: grid.ndim]})
            if report:
                raise ProjectError(f"the formula {report}", path=f"{path}.formula ({term.label})")
        elif isinstance(term, GatesTerm):
            if grid.ndim != 2:
                raise ProjectError("surface gates need a 2D grid", path=path)
            depth = resolve_value(term.depth, params, f"{path}.depth")
            if depth <= 0:
                raise ProjectError(f"depth must be positive, got {depth}", path=f"{path}.depth")
            lever = (resolve_value(term.lever, params, f"{path}.lever") if term.lever is not None
                     else default_lever(project))
            x, y = grid.mesh_sparse()
            phi = gates_potential(gate_list(term, params, path), x, y, depth=depth)
            arr = np.broadcast_to(lever * phi, grid.shape).astype(float, copy=True)
        elif isinstance(term, MapTerm):
            values = _map_values(term, project.base_dir, path)
            scale = resolve_value(term.scale, params, f"{path}.scale")
            try:
                arr = interpolate_map(values, lower=term.lower, upper=term.upper, grid=grid, scale=scale,
                                      method=term.method)
            except InputError as exc:
                raise ProjectError(str(exc), path=f"{path} ({term.label})") from None
        elif isinstance(term, PointsTerm):
            arr = _points_values(term, project.base_dir, grid, params, path)
        elif isinstance(term, OscillatorTerm):
            arr = _oscillator_values(project, term, grid, params, path)
        elif isinstance(term, FieldTerm):
            f = electric_field(project, params)
            q = u.charge if u.charged else 1.0
            mesh = grid.mesh_sparse()
            arr = np.zeros(grid.shape)
            for a in range(grid.ndim):
                arr = arr - q * f[a] * mesh[a]
        else:  # pragma: no cover - the loader only makes the kinds above
            raise ProjectError(f"unknown term kind {term.kind!r}", path=path)
        _check_magnitude(arr, f"{path} ({term.label})", u.energy_unit)
        out.append((i, term, arr))
    return out


def _oscillator_values(project: Project, term: OscillatorTerm, grid: Grid, params, path: str) -> np.ndarray:
    """sum_i (hbar omega_i)^2 (x_i - c_i)^2 / (4 hbar^2/(2 m_i)) = sum_i 1/2 m_i omega_i^2 (x_i - c_i)^2."""
    kin = material_names(project, params)
    arr = np.zeros(grid.shape)
    for i, (hw, c) in enumerate(zip(term.hbar_omega, term.centre)):
        w = resolve_value(hw, params, f"{path}.hbar_omega[{i}]")
        if w < 0:
            raise ProjectError(f"hbar*omega cannot be negative, got {w:g} with the current parameters",
                               path=f"{path}.hbar_omega[{i}]")
        x0 = resolve_value(c, params, f"{path}.centre[{i}]")
        k = kin["hbar2_over_2m_" + "xyz"[i]]
        axis = grid.axes[i].reshape([-1 if a == i else 1 for a in range(grid.ndim)])
        arr = arr + (w * w / (4.0 * k)) * (axis - x0) ** 2
    return arr


def _check_magnitude(arr: np.ndarray, path: str, unit: str) -> None:
    """Refuse a term whose values reach beyond ``limits.MAX_ENERGY`` (before the solver meets them)."""
    if arr.size == 0:
        return
    with np.errstate(all="ignore"):
        peak = float(np.max(np.abs(arr)))
    if not peak <= MAX_ENERGY:       # also NaN
        raise ProjectError(f"reaches {peak:.3g} {unit}, beyond the {MAX_ENERGY:g} {unit} a potential may "
                           f"reach (the low levels would drown in rounding); check its units and size", path=path)


def evaluate_potential(project: Project, *, grid: Grid | None = None,
                       parameters: Mapping[str, float] | None = None) -> np.ndarray:
    """Sum of the enabled terms on ``grid`` (default: the project's grid) and the regions' band
    offsets, energy unit."""
    grid = grid or project.grid
    check_potential_memory(grid, sum(1 for t in project.potential if t.enabled))
    total = np.zeros(grid.shape)
    for _i, _t, arr in evaluate_terms(project, grid=grid, parameters=parameters):
        if arr is not None:
            total += arr
    if project.regions:                 # band offsets of the material regions
        materials = project_material_map(project, resolve_parameters(project, parameters))
        if materials.has_offsets:
            total += materials.offset_map(grid)
    return total
