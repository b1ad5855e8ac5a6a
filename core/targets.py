"""What a sweep or a --set can vary: parameters, field components and gate voltages, each driven by one
parameter (a leaf module: it imports the project and the potential only, so provenance can use it)."""
from __future__ import annotations

from dataclasses import replace

from .errors import InputError
from .project import GatesTerm, Project

__all__ = ["SWEEP_PARAMETER", "sweep_targets", "prepare_target", "set_target", "target_unit"]

SWEEP_PARAMETER = "sweep_value"


def sweep_targets(project: Project) -> list:
    """Names that :func:`run_sweep` accepts for this project."""
    names = list(project.parameters)
    names += [f"electric_field[{i}]" for i in range(len(project.electric_field))]
    names += [f"magnetic_field[{i}]" for i in range(3)]
    for t in project.potential:
        if isinstance(t, GatesTerm):
            names += [f"gate:{g.label}" for g in t.gates]
    return names


def target_unit(project: Project, target: str) -> str:
    """The unit of a swept or set quantity, as the project writes it: a parameter's own unit (""
    when the project gives none), the unit system's field units for field components, V for a gate."""
    from .units import get_units
    if target in project.parameters:
        return project.parameter_unit(target)
    u = get_units(project.units)
    if target.startswith("electric_field["):
        return u.field_unit
    if target.startswith("magnetic_field["):
        return u.magnetic_unit
    if target.startswith("gate:"):
        return "V"
    return ""


def prepare_target(project: Project, target: str) -> tuple:
    """(project with the target driven by a parameter, parameter name, current value)."""
    from .potentials import resolve_parameters, resolve_value
    if target in project.parameters:
        return project, target, project.parameters[target]
    params = resolve_parameters(project)
    new_params = dict(project.parameters)
    new_params[SWEEP_PARAMETER] = 0.0
    for field_name in ("electric_field", "magnetic_field"):
        if target.startswith(field_name + "[") and target.endswith("]"):
            try:
                i = int(target[len(field_name) + 1:-1])
                vals = list(getattr(project, field_name))
                current = resolve_value(vals[i], params, target)
            except (ValueError, IndexError):
                break
            vals[i] = SWEEP_PARAMETER
            new_params[SWEEP_PARAMETER] = current
            return replace(project, parameters=new_params, **{field_name: tuple(vals)}), SWEEP_PARAMETER, current
    if target.startswith("gate:"):
        label = target[5:]
        terms = list(project.potential)
        for ti, t in enumerate(terms):
            if isinstance(t, GatesTerm):
                gates = list(t.gates)
                for gi, g in enumerate(gates):
                    if g.label == label:
                        current = resolve_value(g.voltage, params, target)
                        gates[gi] = replace(g, voltage=SWEEP_PARAMETER)
                        terms[ti] = replace(t, gates=tuple(gates))
                        new_params[SWEEP_PARAMETER] = current
                        return (replace(project, parameters=new_params, potential=tuple(terms)),
                                SWEEP_PARAMETER, current)
    known = ", ".join(sweep_targets(project))
    raise InputError(f"cannot sweep {target!r}: not a parameter, field component or gate of this project. "
                     f"Sweepable: {known}")


def set_target(project: Project, target: str, value: float) -> Project:
    """The project with ``target`` (any name :func:`sweep_targets` lists) fixed at ``value``.

    A parameter gets the value; a field component or gate voltage is replaced by the number
    (so several targets can be set one after the other).
    """
    if target in project.parameters:
        return project.with_parameters(**{target: value})
    if SWEEP_PARAMETER in project.parameters:
        raise InputError(f"cannot set {target!r}: the project has a parameter called {SWEEP_PARAMETER!r}")
    driven, _name, _current = prepare_target(project, target)
    v = float(value)

    def bake(x):
        return v if x == SWEEP_PARAMETER else x

    terms = tuple(replace(t, gates=tuple(replace(g, voltage=bake(g.voltage)) for g in t.gates))
                  if isinstance(t, GatesTerm) else t for t in driven.potential)
    return replace(driven, parameters=dict(project.parameters), potential=terms,
                   electric_field=tuple(bake(x) for x in driven.electric_field),
                   magnetic_field=tuple(bake(x) for x in driven.magnetic_field))
