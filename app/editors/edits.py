"""Pure edits of a :class:`core.project.Project` used by the editors (no Qt).

Each function returns a new project; nothing is validated here beyond what
the edit itself needs (``Session.set_project`` validates the result like a
file being opened).  Parameter renames follow every reference in formulas,
so renaming ``VP`` to ``V_plunger`` keeps the project working.
"""
from __future__ import annotations

import dataclasses
import math
import re

from core.errors import InputError
from core.formula import RESERVED_NAMES
from core.project import (
    FieldTerm,
    FormulaTerm,
    GateSpec,
    GatesTerm,
    MapTerm,
    MaterialSpec,
    OscillatorTerm,
    PointsTerm,
    Project,
)

__all__ = ["IDENTIFIER", "check_parameter_name", "parameter_uses", "add_parameter", "remove_parameter",
           "rename_parameter", "set_parameter_range", "default_range", "slider_range", "add_term",
           "remove_term", "move_term", "replace_term", "set_term_enabled", "rename_term", "new_term",
           "set_gate", "add_gate", "remove_gate", "gate_vertices", "set_gate_polygon", "unique_label"]

IDENTIFIER = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*$")


def check_parameter_name(project: Project, name: str, *, renaming: str | None = None) -> str:
    """A valid, unused parameter name (stripped), or InputError saying why not."""
    name = (name or "").strip()
    if not IDENTIFIER.match(name):
        raise InputError(f"{name!r} is not a valid name: start with a letter, then letters, digits or _")
    if name in RESERVED_NAMES:
        raise InputError(f"{name!r} is reserved (a coordinate, function or constant); choose another name")
    if name in project.parameters and name != renaming:
        raise InputError(f"there is already a parameter called {name!r}")
    return name


def _rename_in(value, old: str, new: str):
    """Rename a parameter inside a number-or-formula value (strings only; numbers unchanged)."""
    if isinstance(value, str):
        return re.sub(rf"(?<![A-Za-z0-9_.]){re.escape(old)}(?![A-Za-z0-9_])", new, value)
    if isinstance(value, tuple):
        return tuple(_rename_in(v, old, new) for v in value)
    return value


def _uses(value, name: str) -> bool:
    return _rename_in(value, name, "\0") != value


def _map_values(project: Project, fn):
    """Apply ``fn`` to every number-or-formula value in the project; returns the new project."""
    terms = []
    for t in project.potential:
        if isinstance(t, FormulaTerm):
            t = dataclasses.replace(t, formula=fn(t.formula))
        elif isinstance(t, GatesTerm):
            gates = tuple(dataclasses.replace(g, voltage=fn(g.voltage),
                                              polygon=None if g.polygon is None else fn(g.polygon),
                                              rectangle=None if g.rectangle is None else fn(g.rectangle))
                          for g in t.gates)
            t = dataclasses.replace(t, depth=fn(t.depth), lever=None if t.lever is None else fn(t.lever),
                                    gates=gates)
        elif isinstance(t, MapTerm):
            t = dataclasses.replace(t, scale=fn(t.scale))
        elif isinstance(t, PointsTerm):
            t = dataclasses.replace(t, scale=fn(t.scale), fill=None if t.fill is None else fn(t.fill))
        elif isinstance(t, OscillatorTerm):
            t = dataclasses.replace(t, hbar_omega=fn(tuple(t.hbar_omega)), centre=fn(tuple(t.centre)))
        terms.append(t)
    m = project.material
    material = dataclasses.replace(m, mass=None if m.mass is None else fn(m.mass),
                                   g_factor=None if m.g_factor is None else fn(m.g_factor))
    regions = tuple(dataclasses.replace(
        g, inside=fn(g.inside), offset=None if g.offset is None or g.offset == "table" else fn(g.offset),
        material=dataclasses.replace(g.material, mass=None if g.material.mass is None else fn(g.material.mass)))
        for g in project.regions)
    return dataclasses.replace(project, potential=tuple(terms), material=material, regions=regions,
                               electric_field=fn(tuple(project.electric_field)),
                               magnetic_field=fn(tuple(project.magnetic_field)))


def parameter_uses(project: Project, name: str) -> list:
    """Where a parameter is used: a list of readable places (``"term 'gates' (gate P1 voltage)"``...)."""
    out = []
    for t in project.potential:
        if isinstance(t, FormulaTerm) and _uses(t.formula, name):
            out.append(f"term '{t.label}'")
        elif isinstance(t, GatesTerm):
            if _uses(t.depth, name) or (t.lever is not None and _uses(t.lever, name)):
                out.append(f"term '{t.label}'")
            for g in t.gates:
                if _uses((g.voltage, g.polygon or (), g.rectangle or ()), name):
                    out.append(f"gate '{g.label}' of term '{t.label}'")
        elif isinstance(t, MapTerm) and _uses(t.scale, name):
            out.append(f"term '{t.label}'")
        elif isinstance(t, PointsTerm) and _uses((t.scale, t.fill), name):
            out.append(f"term '{t.label}'")
        elif isinstance(t, OscillatorTerm) and _uses((tuple(t.hbar_omega), tuple(t.centre)), name):
            out.append(f"term '{t.label}'")
    for g in project.regions:
        if _uses((g.inside, g.offset if isinstance(g.offset, str) else "", g.material.mass or ""), name):
            out.append(f"region '{g.label}'")
    m = project.material
    if (m.mass is not None and _uses(m.mass, name)) or (m.g_factor is not None and _uses(m.g_factor, name)):
        out.append("the material")
    if _uses(tuple(project.electric_field), name):
        out.append("the electric field")
    if _uses(tuple(project.magnetic_field), name):
        out.append("the magnetic field")
    return out


def add_parameter(project: Project, name: str, value: float = 0.0,
                  value_range: tuple | None = None) -> Project:
    name = check_parameter_name(project, name)
    v = float(value)
    if not math.isfinite(v):
        raise InputError(f"{name}: the value must be a finite number")
    params = dict(project.parameters)
    params[name] = v
    ranges = dict(project.parameter_ranges)
    if value_range is not None:
        ranges[name] = [float(value_range[0]), float(value_range[1])]
    return dataclasses.replace(project, parameters=params, parameter_ranges=ranges)


def remove_parameter(project: Project, name: str) -> Project:
    if name not in project.parameters:
        raise InputError(f"no parameter called {name!r}")
    uses = parameter_uses(project, name)
    if uses:
        raise InputError(f"{name} is still used by {', '.join(uses)}; remove it there first")
    params = {k: v for k, v in project.parameters.items() if k != name}
    ranges = {k: v for k, v in project.parameter_ranges.items() if k != name}
    units = {k: v for k, v in project.parameter_units.items() if k != name}
    return dataclasses.replace(project, parameters=params, parameter_ranges=ranges, parameter_units=units)


def rename_parameter(project: Project, old: str, new: str) -> Project:
    """Rename a parameter and every reference to it (order of parameters kept)."""
    if old not in project.parameters:
        raise InputError(f"no parameter called {old!r}")
    new = check_parameter_name(project, new, renaming=old)
    if new == old:
        return project
    out = _map_values(project, lambda v: _rename_in(v, old, new))
    params = {(new if k == old else k): v for k, v in project.parameters.items()}
    ranges = {(new if k == old else k): v for k, v in project.parameter_ranges.items()}
    units = {(new if k == old else k): v for k, v in project.parameter_units.items()}
    return dataclasses.replace(out, parameters=params, parameter_ranges=ranges, parameter_units=units)


def default_range(value: float) -> tuple:
    """A slider range for a parameter without one: from 0 to twice the value (or -1..1 at 0)."""
    v = float(value)
    if v == 0.0:
        return (-1.0, 1.0)
    return (min(0.0, 2 * v), max(0.0, 2 * v))


def slider_range(project: Project, name: str) -> tuple:
    r = project.parameter_ranges.get(name)
    if r is not None:
        return (float(r[0]), float(r[1]))
    return default_range(project.parameters[name])


def set_parameter_range(project: Project, name: str, lo: float, hi: float) -> Project:
    if name not in project.parameters:
        raise InputError(f"no parameter called {name!r}")
    lo, hi = float(lo), float(hi)
    if not (math.isfinite(lo) and math.isfinite(hi)) or not hi > lo:
        raise InputError(f"{name}: the slider range needs a lower end below the upper end, got {lo:g} .. {hi:g}")
    ranges = dict(project.parameter_ranges)
    ranges[name] = [lo, hi]
    return dataclasses.replace(project, parameter_ranges=ranges)


def set_parameter_unit(project: Project, name: str, unit: str) -> Project:
    """Give parameter ``name`` the unit text ``unit`` (an empty text removes it)."""
    from core.project import MAX_UNIT_TEXT
    if name not in project.parameters:
        raise InputError(f"no parameter called {name!r}")
    text = str(unit).strip()
    if len(text) > MAX_UNIT_TEXT or any(not c.isprintable() for c in text):
        raise InputError(f"{name}: a unit is a short printable text (at most {MAX_UNIT_TEXT} characters)")
    units = {k: v for k, v in project.parameter_units.items() if k != name}
    if text:
        units[name] = text
    return dataclasses.replace(project, parameter_units=units)


# --- potential terms -------------------------------------------------------------------------

def unique_label(project: Project, base: str) -> str:
    labels = {t.label for t in project.potential}
    if base not in labels:
        return base
    i = 2
    while f"{base} {i}" in labels:
        i += 1
    return f"{base} {i}"


def new_term(project: Project, kind: str):
    """A fresh term of ``kind`` with sensible starting values for the project's grid."""
    g = project.grid
    if kind == "formula":
        coords = ("x", "y", "z")[: g.ndim]
        half = [0.5 * (hi - lo) for lo, hi in zip(g.lower, g.upper)]
        width = f"{0.25 * min(half):.4g}"
        body = " + ".join(f"{c}**2" for c in coords)
        return FormulaTerm(unique_label(project, "formula"), f"0.5*({body})/{width}**2")
    if kind == "gates":
        if g.ndim != 2:
            raise InputError("surface gates need a 2D grid (the plane of the electron gas)")
        x0, y0 = g.lower
        x1, y1 = g.upper
        w, h = x1 - x0, y1 - y0
        gate = GateSpec(label="gate 1", voltage=-0.1,
                        rectangle=(round(x0 + 0.1 * w, 6), round(y0 + 0.6 * h, 6),
                                   round(x1 - 0.1 * w, 6), round(y1 - 0.1 * h, 6)))
        return GatesTerm(label=unique_label(project, "surface gates"), depth=50.0, gates=(gate,))
    if kind == "map":
        return MapTerm(label=unique_label(project, "imported map"), file="map.npy",
                       lower=tuple(g.lower), upper=tuple(g.upper))
    if kind == "uniform_field":
        return FieldTerm(label=unique_label(project, "uniform field"))
    if kind == "oscillator":
        # a quantum that puts the ground state's width at about a tenth of the box along each axis
        from core.potentials import material_names, resolve_parameters
        kin = material_names(project, resolve_parameters(project))
        quanta = []
        for i in range(g.ndim):
            width = 0.1 * (g.upper[i] - g.lower[i])
            quanta.append(float(f"{2.0 * kin['hbar2_over_2m_' + 'xyz'[i]] / width**2:.3g}"))
        centre = tuple(round(0.5 * (lo + hi), 6) for lo, hi in zip(g.lower, g.upper))
        return OscillatorTerm(unique_label(project, "oscillator"), hbar_omega=tuple(quanta), centre=centre)
    raise InputError(f"unknown term kind {kind!r}")


def add_term(project: Project, term, index: int | None = None) -> Project:
    terms = list(project.potential)
    terms.insert(len(terms) if index is None else max(0, min(index, len(terms))), term)
    return dataclasses.replace(project, potential=tuple(terms))


def _check_index(project: Project, index: int) -> None:
    if not 0 <= index < len(project.potential):
        raise InputError(f"there is no potential term number {index + 1}")


def remove_term(project: Project, index: int) -> Project:
    _check_index(project, index)
    terms = list(project.potential)
    del terms[index]
    return dataclasses.replace(project, potential=tuple(terms))


def move_term(project: Project, index: int, to: int) -> Project:
    _check_index(project, index)
    terms = list(project.potential)
    t = terms.pop(index)
    terms.insert(max(0, min(to, len(terms))), t)
    return dataclasses.replace(project, potential=tuple(terms))


def replace_term(project: Project, index: int, term) -> Project:
    _check_index(project, index)
    terms = list(project.potential)
    terms[index] = term
    return dataclasses.replace(project, potential=tuple(terms))


def set_term_enabled(project: Project, index: int, enabled: bool) -> Project:
    _check_index(project, index)
    return replace_term(project, index, dataclasses.replace(project.potential[index], enabled=bool(enabled)))


def rename_term(project: Project, index: int, label: str) -> Project:
    _check_index(project, index)
    label = (label or "").strip()
    if not label:
        raise InputError("a term needs a name")
    return replace_term(project, index, dataclasses.replace(project.potential[index], label=label))


# --- gates -------------------------------------------------------------------------------------

def _gates_term(project: Project, index: int) -> GatesTerm:
    _check_index(project, index)
    t = project.potential[index]
    if not isinstance(t, GatesTerm):
        raise InputError(f"term '{t.label}' is not a surface-gates term")
    return t


def set_gate(project: Project, term_index: int, gate_index: int, gate: GateSpec) -> Project:
    t = _gates_term(project, term_index)
    gates = list(t.gates)
    if not 0 <= gate_index < len(gates):
        raise InputError(f"term '{t.label}' has no gate number {gate_index + 1}")
    gates[gate_index] = gate
    return replace_term(project, term_index, dataclasses.replace(t, gates=tuple(gates)))


def add_gate(project: Project, term_index: int, gate: GateSpec | None = None) -> Project:
    t = _gates_term(project, term_index)
    if gate is None:
        g = project.grid
        cx = 0.5 * (g.lower[0] + g.upper[0])
        cy = 0.5 * (g.lower[1] + g.upper[1])
        w = 0.1 * (g.upper[0] - g.lower[0])
        gate = GateSpec(label=f"gate {len(t.gates) + 1}", voltage=0.0,
                        rectangle=(round(cx - w, 6), round(cy - w, 6), round(cx + w, 6), round(cy + w, 6)))
    return replace_term(project, term_index, dataclasses.replace(t, gates=t.gates + (gate,)))


def remove_gate(project: Project, term_index: int, gate_index: int) -> Project:
    t = _gates_term(project, term_index)
    if not 0 <= gate_index < len(t.gates):
        raise InputError(f"term '{t.label}' has no gate number {gate_index + 1}")
    gates = tuple(g for i, g in enumerate(t.gates) if i != gate_index)
    return replace_term(project, term_index, dataclasses.replace(t, gates=gates))


def gate_vertices(gate: GateSpec) -> tuple:
    """The outline of a gate as vertices ((x, y), ...); a rectangle gives its four corners."""
    if gate.polygon is not None:
        return tuple(tuple(v) for v in gate.polygon)
    x0, y0, x1, y1 = gate.rectangle
    return ((x0, y0), (x1, y0), (x1, y1), (x0, y1))


def set_gate_polygon(project: Project, term_index: int, gate_index: int, vertices) -> Project:
    """Give a gate a polygon outline (a rectangle becomes a polygon); e.g. after dragging its handles."""
    t = _gates_term(project, term_index)
    if not 0 <= gate_index < len(t.gates):
        raise InputError(f"term '{t.label}' has no gate number {gate_index + 1}")
    verts = tuple((v[0] if isinstance(v[0], str) else float(v[0]), v[1] if isinstance(v[1], str) else float(v[1]))
                  for v in vertices)
    if len(verts) < 3:
        raise InputError("a gate outline needs at least 3 vertices")
    gate = dataclasses.replace(t.gates[gate_index], polygon=verts, rectangle=None)
    return set_gate(project, term_index, gate_index, gate)


def set_material(project: Project, name: str | None, mass=None, g_factor=None) -> Project:
    return dataclasses.replace(project, material=MaterialSpec(name=name, mass=mass, g_factor=g_factor,
                                                              permittivity=project.material.permittivity))
