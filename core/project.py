"""Projects: a study written down as plain data, saved as JSON.

A project holds a title, notes, a unit system, a material, a grid, named
parameters, an ordered list of potential terms, fields and solver settings.
Top-level keys of the JSON file (schema version 2):

``schema_version, title, notes, units, material, grid, parameters,
parameter_ranges, parameter_units, potential, electric_field, magnetic_field, spin, solver,
electrons`` (``electrons``: 1, the default, or 2 for two interacting electrons; ``parameter_units``:
a short unit text per parameter, such as ``{"eps": "meV", "VP": "V"}``, shown beside the parameter
in sliders, tables and axes; both optional, so files without them are unchanged and no schema step
is needed)

Any number inside a term, a gate voltage, a field component or the material
may be written as a parameter name or a formula of parameters
(``"voltage": "VP"``, ``"magnetic_field": [0, 0, "B"]``); that single
mechanism is how sweeps and sliders drive everything.

An optional ``regions`` list holds material regions with their own mass and band
offset (see :class:`RegionSpec`); files without it are unchanged.

Files are data: formulas are read by :mod:`core.formula`'s whitelist parser;
nothing from a file is executed.  Loading validates every field and names
the bad one (``grid.points[1]: expected an integer >= 3, got "abc"``).
Files from a newer schema are refused; older ones are migrated in memory by
registered steps and never rewritten on load.  Saving is atomic, and
overwriting a file written in an older schema keeps a ``.bak`` copy.

Schema history:

* version 1: the development draft. ``magnetic_field`` was a single number
  (B along z, tesla) and the number of states was ``solver.levels``.
* version 2: ``magnetic_field`` is a vector ``[Bx, By, Bz]``; ``solver.states``.
"""
from __future__ import annotations

import copy
import json
import math
import os
import re
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from .atomic import atomic_write
from .errors import FormulaError, InputError, ProjectError
from .formula import MATERIAL_NAMES, RESERVED_NAMES, parse_formula
from .grid import BOUNDARIES, Grid
from .jsonfile import parse_json, read_text_file, repair_text
from .kinetic import SCHEMES
from .limits import MASS_RANGE, MAX_COORDINATE, MAX_MAGNETIC_FIELD, MAX_PATH_CHARS, MAX_POINTS_PER_AXIS
from .materials import get_material, material_names
from .units import UNIT_SYSTEMS

__all__ = ["CURRENT_SCHEMA_VERSION", "Project", "MaterialSpec", "RegionSpec", "GateSpec", "FormulaTerm", "GatesTerm",
           "MapTerm", "PointsTerm", "FieldTerm", "SolverSettings", "load_project", "save_project", "project_from_dict",
           "project_to_dict", "project_from_json", "project_to_json", "MIGRATIONS", "TERM_KINDS", "OscillatorTerm",
           "new_project"]

CURRENT_SCHEMA_VERSION = 2
ELECTRON_COUNTS = (1, 2)
MAX_FILE_BYTES = 20 * 2**20
#: states one solve may ask for (each is a grid-sized vector, and the dense steps grow as its cube)
MAX_STATES = 10_000
#: the longest unit text a parameter may carry ("mV/nm", "h*kHz/um", ...)
MAX_UNIT_TEXT = 24
Value = float | str

# --- migrations ---------------------------------------------------------------------------------

MIGRATIONS: dict[int, Callable[[dict], dict]] = {}


def migration(from_version: int):
    """Register a step that turns a dict at ``from_version`` into one at ``from_version + 1``."""
    def register(fn):
        MIGRATIONS[from_version] = fn
        return fn
    return register


@migration(1)
def _v1_to_v2(data: dict) -> dict:
    out = copy.deepcopy(data)
    b = out.get("magnetic_field")
    if isinstance(b, (int, float, str)) and not isinstance(b, bool):
        out["magnetic_field"] = [0.0, 0.0, b]
    solver = out.get("solver")
    if isinstance(solver, dict) and "levels" in solver and "states" not in solver:
        solver["states"] = solver.pop("levels")
    out["schema_version"] = 2
    return out


# --- data classes ---------------------------------------------------------------------------------

@dataclass(frozen=True)
class MaterialSpec:
    """A material from the table (``name``), or a custom mass; ``mass``/``g_factor`` override the table."""

    name: str | None = None
    mass: Value | tuple | None = None
    g_factor: Value | None = None
    permittivity: Value | None = None     # static relative permittivity (two-electron repulsion)


@dataclass(frozen=True)
class RegionSpec:
    """A material region: where ``inside`` (a formula of coordinates and parameters) is nonzero,
    ``material`` holds, with an optional band ``offset`` (energy unit; a number, a formula of
    parameters, or ``"table"`` for the materials table's conduction-band offset)."""

    label: str
    inside: str
    material: MaterialSpec
    offset: Value | None = None
    permittivity: Value | None = None


@dataclass(frozen=True)
class GateSpec:
    label: str
    voltage: Value
    polygon: tuple | None = None      # ((x, y), ...) in the length unit
    rectangle: tuple | None = None    # (x0, y0, x1, y1)


@dataclass(frozen=True)
class FormulaTerm:
    label: str
    formula: str
    enabled: bool = True
    kind: str = field(default="formula", init=False)


@dataclass(frozen=True)
class GatesTerm:
    label: str
    depth: Value
    gates: tuple
    lever: Value | None = None        # energy unit per volt; None: the particle's charge (-1000 meV/V)
    enabled: bool = True
    kind: str = field(default="gates", init=False)


@dataclass(frozen=True)
class MapTerm:
    label: str
    file: str
    lower: tuple
    upper: tuple
    scale: Value = 1.0
    array: str | None = None
    method: str = "linear"
    enabled: bool = True
    kind: str = field(default="map", init=False)


@dataclass(frozen=True)
class PointsTerm:
    """V given at scattered points (text table or mesh file, see :mod:`core.points_map`).

    Energy on the grid = ``scale`` * V, linear inside the points' convex hull; outside it
    ``fill`` (a value of V, scaled like the data) or, when None, an error.
    """

    label: str
    file: str
    scale: Value = 1.0
    fill: Value | None = None
    array: str | None = None
    enabled: bool = True
    kind: str = field(default="points", init=False)


@dataclass(frozen=True)
class FieldTerm:
    label: str = "electric field"
    enabled: bool = True
    kind: str = field(default="uniform_field", init=False)


@dataclass(frozen=True)
class OscillatorTerm:
    """A harmonic confinement written by its quanta: V = sum_i (hbar omega_i)^2 (x_i - c_i)^2 / (4 K_i),
    K_i = hbar^2/(2 m_i) of the project's material along axis i, i.e. 1/2 m_i omega_i^2 (x_i - c_i)^2.

    ``hbar_omega``: one value per axis in the energy unit (0: no confinement along that axis);
    ``centre``: one coordinate per axis in the length unit.  Each may be a formula of parameters.
    """

    label: str
    hbar_omega: tuple
    centre: tuple
    enabled: bool = True
    kind: str = field(default="oscillator", init=False)


TERM_KINDS = {"formula": FormulaTerm, "gates": GatesTerm, "map": MapTerm, "points": PointsTerm,
              "uniform_field": FieldTerm, "oscillator": OscillatorTerm}


@dataclass(frozen=True)
class SolverSettings:
    states: int = 10
    scheme: str = "auto"
    tolerance: float = 1e-7


@dataclass(frozen=True)
class Project:
    title: str
    units: str
    material: MaterialSpec
    grid: Grid
    parameters: dict = field(default_factory=dict)
    potential: tuple = ()
    electric_field: tuple = ()
    magnetic_field: tuple = (0.0, 0.0, 0.0)
    spin: bool = False
    solver: SolverSettings = SolverSettings()
    notes: str = ""
    parameter_ranges: dict = field(default_factory=dict)
    parameter_units: dict = field(default_factory=dict)   # name -> unit text (optional, display only)
    regions: tuple = ()
    schema_version: int = CURRENT_SCHEMA_VERSION
    base_dir: str | None = field(default=None, compare=False)
    warnings: tuple = field(default=(), compare=False)
    migrated_from: int | None = field(default=None, compare=False)
    electrons: int = 1                       # 1, or 2 for two interacting electrons (core.two_electron)

    @property
    def ndim(self) -> int:
        return self.grid.ndim

    def parameter_unit(self, name: str) -> str:
        """The unit text the project gives parameter ``name`` ("" when it gives none)."""
        return str(self.parameter_units.get(name, ""))

    def with_parameters(self, **values) -> Project:
        params = dict(self.parameters)
        for k, v in values.items():
            if k not in params:
                raise InputError(f"unknown parameter {k!r}; the project has {', '.join(params) or 'none'}")
            params[k] = float(v)
        return replace(self, parameters=params)


def new_project(title: str = "New confinement", *, units: str = "semiconductor") -> Project:
    """A small ready-to-solve template: a parabolic GaAs dot with a 3 meV level spacing."""
    return Project(
        title=title, units=units, material=MaterialSpec(name="GaAs"),
        grid=Grid([-120.0, -120.0], [120.0, 120.0], [64, 64]),
        parameters={"hw": 3.0, "l0": 19.47}, parameter_ranges={"hw": [0.5, 10.0]},
        potential=(FormulaTerm("parabolic confinement", "0.5*hw*(x**2 + y**2)/l0**2"),),
        electric_field=(0.0, 0.0), notes="A parabolic dot: hw is the level spacing in meV, "
        "l0 = sqrt(hbar/(m* omega)) in nm (19.47 nm for 3 meV in GaAs).")


# --- validation -------------------------------------------------------------------------------------

class _Reader:
    """Validates raw JSON values, naming each field by its path."""

    def __init__(self, parameters: tuple = ()):
        self.parameters = tuple(parameters)

    @staticmethod
    def fail(path: str, message: str):
        raise ProjectError(message, path=path)

    @staticmethod
    def show(value) -> str:
        if isinstance(value, int) and not isinstance(value, bool) and abs(value) > 10**15:
            return f"a {len(str(abs(value)))}-digit integer"
        try:
            text = json.dumps(value) if not isinstance(value, float) else repr(value)
        except (TypeError, ValueError):
            text = repr(value)
        return text if len(text) < 60 else text[:57] + "..."

    def number(self, value, path: str, *, positive=False, allow_formula=True, span=None) -> Value:
        """A finite number (or a formula of parameters); ``span=(lo, hi)`` bounds its magnitude."""
        if isinstance(value, bool) or value is None:
            self.fail(path, f"expected a number{' or a formula of parameters' if allow_formula else ''}, "
                            f"got {self.show(value)}")
        if isinstance(value, str) and allow_formula:
            try:
                f = parse_formula(value, parameters=self.parameters, coordinates=())
            except FormulaError as exc:
                self.fail(path, str(exc))
            if not f.is_constant:
                return value                     # checked when the parameters are known
            value = f.evaluate({})
        if isinstance(value, (int, float)):
            try:
                v = float(value)
            except OverflowError:
                v = math.inf
            if not math.isfinite(v):
                self.fail(path, f"expected a finite number, got {self.show(value)}")
            if positive and v <= 0:
                self.fail(path, f"expected a positive number, got {value!r}")
            if span is not None and v != 0 and not span[0] <= abs(v) <= span[1]:
                self.fail(path, f"{v:g} is outside the accepted range {span[0]:g} .. {span[1]:g}")
            return v
        self.fail(path, f"expected a number{' or a formula of parameters' if allow_formula else ''}, "
                        f"got {self.show(value)}")

    def integer(self, value, path: str, *, minimum: int, maximum: int | None = None) -> int:
        if (isinstance(value, bool) or not isinstance(value, (int, float))
                or (isinstance(value, float) and (not math.isfinite(value) or value != int(value)))):
            self.fail(path, f"expected an integer >= {minimum}, got {self.show(value)}")
        n = int(value)                        # exact, however many digits
        if n < minimum:
            self.fail(path, f"expected an integer >= {minimum}, got {self.show(n)}")
        if maximum is not None and n > maximum:
            self.fail(path, f"expected an integer of at most {maximum:,}, got {self.show(n)}")
        return n

    def text(self, value, path: str, *, allow_empty=True, lines=False) -> str:
        if not isinstance(value, str):
            self.fail(path, f"expected text, got {self.show(value)}")
        if not allow_empty and not value.strip():
            self.fail(path, "must not be empty")
        bad = _CONTROL_IN_TEXT if lines else _CONTROL_IN_LINE
        m = bad.search(value)
        if m:           # a terminal escape in a title would be obeyed by the terminal that prints it
            self.fail(path, f"holds the control character U+{ord(m.group()):04X}; text holds printable "
                            f"characters{' and line breaks' if lines else ''} only")
        return value

    def boolean(self, value, path: str) -> bool:
        if not isinstance(value, bool):
            self.fail(path, f"expected true or false, got {self.show(value)}")
        return value

    def obj(self, value, path: str) -> dict:
        if not isinstance(value, dict):
            self.fail(path, f"expected an object {{...}}, got {self.show(value)}")
        return value

    def array(self, value, path: str, *, length=None, min_length=None) -> list:
        if not isinstance(value, list):
            self.fail(path, f"expected a list [...], got {self.show(value)}")
        if length is not None and len(value) not in (length if isinstance(length, tuple) else (length,)):
            want = " or ".join(str(x) for x in (length if isinstance(length, tuple) else (length,)))
            self.fail(path, f"expected {want} values, got {len(value)}")
        if min_length is not None and len(value) < min_length:
            self.fail(path, f"expected at least {min_length} values, got {len(value)}")
        return value


def _extra_keys(data: dict, allowed, path: str, warnings: list):
    for key in data:
        if key not in allowed:
            where = f"{path}.{key}" if path else key
            warnings.append(f"{where}: unknown key, ignored (known keys: {', '.join(allowed)})")


_TOP_KEYS = ("schema_version", "title", "notes", "units", "material", "grid", "parameters",
             "parameter_ranges", "parameter_units", "potential", "electric_field", "magnetic_field", "spin", "solver",
             "electrons")
_IDENT = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*$")
_CONTROL_IN_LINE = re.compile("[\x00-\x1f\x7f-\x9f\u2028\u2029]")
_CONTROL_IN_TEXT = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f]")


def project_from_dict(data: Any, *, base_dir: str | None = None) -> Project:
    """Validate a decoded JSON document and build a :class:`Project` (migrating older schemas)."""
    project = _project_from_dict(data, base_dir=base_dir)
    warnings = list(project.warnings)
    regions = _read_regions(_Reader(tuple(project.parameters)), data.get("regions", []), project.material,
                            project.units, warnings)
    return replace(project, regions=regions, warnings=tuple(warnings))


_TOP_KEYS = _TOP_KEYS + ("regions",)        # material regions (optional), read by project_from_dict


def _project_from_dict(data: Any, *, base_dir: str | None = None) -> Project:
    """Every part of a project but its regions."""
    r = _Reader()
    data = r.obj(data, "project")
    if "schema_version" not in data:
        r.fail("schema_version", "missing; every project file states its schema_version")
    version = r.integer(data["schema_version"], "schema_version", minimum=1)
    if version > CURRENT_SCHEMA_VERSION:
        r.fail("schema_version", f"this file was written by a newer Wellscape (schema {version}); this version "
                                 f"reads schema {CURRENT_SCHEMA_VERSION} and older. Update Wellscape to open it.")
    migrated_from = None
    while version < CURRENT_SCHEMA_VERSION:
        migrated_from = migrated_from or version
        data = MIGRATIONS[version](data)
        version = data["schema_version"]
    warnings: list = []
    _extra_keys(data, _TOP_KEYS, "", warnings)
    for key in ("units", "material", "grid", "potential"):
        if key not in data:
            r.fail(key, "missing (required)")

    title = r.text(data.get("title", "Untitled"), "title")
    notes = r.text(data.get("notes", ""), "notes", lines=True)
    units = r.text(data["units"], "units")
    if units not in UNIT_SYSTEMS:
        r.fail("units", f"unknown unit system {units!r}; choose one of {', '.join(UNIT_SYSTEMS)}")

    # parameters first: every later formula may use them
    raw_params = r.obj(data.get("parameters", {}), "parameters")
    params = {}
    for name, value in raw_params.items():
        path = f"parameters.{name}"
        if not _IDENT.match(name):
            r.fail(path, "a parameter name must start with a letter and contain only letters, digits and _")
        if name in RESERVED_NAMES:
            r.fail(path, f"{name!r} is reserved (a function, constant or coordinate); choose another name")
        if name in MATERIAL_NAMES:
            r.fail(path, f"{name!r} is reserved: formulas get it from the material (hbar^2/(2 m*)); "
                         f"choose another name")
        params[name] = r.number(value, path, allow_formula=False)
    r = _Reader(tuple(params))
    ranges = {}
    for name, value in r.obj(data.get("parameter_ranges", {}), "parameter_ranges").items():
        path = f"parameter_ranges.{name}"
        if name not in params:
            r.fail(path, f"no parameter called {name!r}")
        lo, hi = (r.number(v, f"{path}[{i}]", allow_formula=False)
                  for i, v in enumerate(r.array(value, path, length=2)))
        if not hi > lo:
            r.fail(path, f"the upper end ({hi}) must be above the lower end ({lo})")
        ranges[name] = [lo, hi]
    units_of = {}
    for name, value in r.obj(data.get("parameter_units", {}), "parameter_units").items():
        path = f"parameter_units.{name}"
        if name not in params:
            r.fail(path, f"no parameter called {name!r}")
        text = r.text(value, path)
        if len(text) > MAX_UNIT_TEXT:
            r.fail(path, f"a unit is a short text (at most {MAX_UNIT_TEXT} characters), got {len(text)}")
        if text.strip():
            units_of[name] = text.strip()

    material = _read_material(r, data["material"], warnings)
    grid = _read_grid(r, data["grid"], warnings)
    ndim = grid.ndim

    terms = []
    for i, raw in enumerate(r.array(data["potential"], "potential")):
        terms.append(_read_term(r, raw, f"potential[{i}]", ndim, warnings))

    ef = data.get("electric_field", [0.0] * ndim)
    ef = r.array(ef, "electric_field", length=(ndim, 3))
    electric = tuple(r.number(v, f"electric_field[{i}]") for i, v in enumerate(ef))
    mf = r.array(data.get("magnetic_field", [0.0, 0.0, 0.0]), "magnetic_field", length=3)
    magnetic = tuple(r.number(v, f"magnetic_field[{i}]", span=(0, MAX_MAGNETIC_FIELD)) for i, v in enumerate(mf))
    spin = r.boolean(data.get("spin", False), "spin")
    electrons = r.integer(data.get("electrons", 1), "electrons", minimum=1)
    if electrons not in ELECTRON_COUNTS:
        r.fail("electrons", f"expected 1 or 2 (levels are computed for one electron or for two interacting "
                            f"electrons), got {electrons}")
    if electrons == 2 and ndim == 1:
        r.fail("electrons", "two electrons need a 2D or 3D grid (the 1/|x| repulsion is not integrable in 1D)")

    s = r.obj(data.get("solver", {}), "solver")
    _extra_keys(s, ("states", "scheme", "tolerance"), "solver", warnings)
    states = r.integer(s.get("states", 10), "solver.states", minimum=1, maximum=MAX_STATES)
    scheme = r.text(s.get("scheme", "auto"), "solver.scheme")
    if scheme != "auto" and scheme not in SCHEMES:
        r.fail("solver.scheme", f"unknown scheme {scheme!r}; choose auto, {', '.join(SCHEMES)}")
    tol = r.number(s.get("tolerance", 1e-7), "solver.tolerance", positive=True, allow_formula=False)
    if tol >= 1e-2:
        r.fail("solver.tolerance", f"expected a small relative tolerance (e.g. 1e-7), got {tol}")
    if states > grid.size:
        r.fail("solver.states", f"asked for {states} states, but the grid has only {grid.size} points")

    return Project(title=title, units=units, material=material, grid=grid, parameters=params,
                   potential=tuple(terms), electric_field=electric, magnetic_field=magnetic, spin=spin,
                   solver=SolverSettings(states=states, scheme=scheme, tolerance=float(tol)), notes=notes,
                   parameter_ranges=ranges, parameter_units=units_of, base_dir=base_dir, warnings=tuple(warnings),
                   migrated_from=migrated_from, electrons=electrons)


def _read_material(r: _Reader, raw, warnings) -> MaterialSpec:
    if isinstance(raw, str):
        try:
            get_material(raw)
        except InputError as exc:
            r.fail("material", str(exc))
        return MaterialSpec(name=raw)
    raw = r.obj(raw, "material")
    _extra_keys(raw, ("name", "mass", "g_factor", "permittivity"), "material", warnings)
    name = raw.get("name")
    if name is not None:
        r.text(name, "material.name")
        try:
            get_material(name)
        except InputError as exc:
            r.fail("material.name", str(exc))
    mass = raw.get("mass")
    if mass is None and name is None:
        r.fail("material", f"give a material name ({', '.join(material_names())}) or a mass")
    if mass is not None:
        if isinstance(mass, list):
            r.array(mass, "material.mass", length=3)
            mass = tuple(r.number(v, f"material.mass[{i}]", positive=True, span=MASS_RANGE)
                         for i, v in enumerate(mass))
        else:
            mass = r.number(mass, "material.mass", positive=True, span=MASS_RANGE)
    g = raw.get("g_factor")
    if g is not None:
        g = r.number(g, "material.g_factor")
    eps = raw.get("permittivity")
    if eps is not None:
        eps = r.number(eps, "material.permittivity", positive=True)
    return MaterialSpec(name=name, mass=mass, g_factor=g, permittivity=eps)


def _read_regions(r: _Reader, raw, project_material: MaterialSpec, units: str, warnings) -> tuple:
    """The ``regions`` list: label, inside (formula), material (name or object), offset."""
    out = []
    for i, reg in enumerate(r.array(raw, "regions")):
        path = f"regions[{i}]"
        reg = r.obj(reg, path)
        _extra_keys(reg, ("label", "inside", "material", "offset"), path, warnings)
        label = r.text(reg.get("label", f"region {i + 1}"), f"{path}.label")
        if "inside" not in reg:
            r.fail(f"{path}.inside", "missing: a formula of the coordinates, nonzero inside the region")
        inside = r.text(reg["inside"], f"{path}.inside", allow_empty=False)
        try:
            parse_formula(inside, parameters=r.parameters)
        except FormulaError as exc:
            r.fail(f"{path}.inside", str(exc))
        if "material" not in reg:
            r.fail(f"{path}.material", "missing: a material name or {\"mass\": ...}")
        mat, eps = _read_region_material(r, reg["material"], f"{path}.material", warnings)
        offset = reg.get("offset")
        if isinstance(offset, str) and offset == "table":
            from .materials import band_offset
            try:
                if mat.name is None or project_material.name is None:
                    raise InputError("\"table\" needs a material name both here and for the project")
                band_offset(mat.name, project_material.name)
            except InputError as exc:
                r.fail(f"{path}.offset", str(exc))
            if units not in ("semiconductor", "atomic"):
                r.fail(f"{path}.offset", f"table offsets are for semiconductor units, not {units!r}")
        elif offset is not None:
            offset = r.number(offset, f"{path}.offset")
        out.append(RegionSpec(label=label, inside=inside, material=mat, offset=offset, permittivity=eps))
    return tuple(out)


def _read_region_material(r: _Reader, raw, path: str, warnings) -> tuple:
    if isinstance(raw, str):
        try:
            get_material(raw)
        except InputError as exc:
            r.fail(path, str(exc))
        return MaterialSpec(name=raw), None
    raw = r.obj(raw, path)
    _extra_keys(raw, ("name", "mass", "g_factor", "permittivity"), path, warnings)
    name = raw.get("name")
    if name is not None:
        r.text(name, f"{path}.name")
        try:
            get_material(name)
        except InputError as exc:
            r.fail(f"{path}.name", str(exc))
    mass = raw.get("mass")
    if mass is None and name is None:
        r.fail(path, f"give a material name ({', '.join(material_names())}) or a mass")
    if isinstance(mass, list):
        r.array(mass, f"{path}.mass", length=3)
        mass = tuple(r.number(v, f"{path}.mass[{i}]", positive=True) for i, v in enumerate(mass))
    elif mass is not None:
        mass = r.number(mass, f"{path}.mass", positive=True)
    g = raw.get("g_factor")
    g = None if g is None else r.number(g, f"{path}.g_factor")
    eps = raw.get("permittivity")
    eps = None if eps is None else r.number(eps, f"{path}.permittivity", positive=True)
    return MaterialSpec(name=name, mass=mass, g_factor=g), eps


def _read_grid(r: _Reader, raw, warnings) -> Grid:
    raw = r.obj(raw, "grid")
    _extra_keys(raw, ("lower", "upper", "points", "boundary"), "grid", warnings)
    for key in ("lower", "upper", "points"):
        if key not in raw:
            r.fail(f"grid.{key}", "missing (required)")
    pts = r.array(raw["points"], "grid.points", length=(1, 2, 3))
    ndim = len(pts)
    points = [r.integer(v, f"grid.points[{i}]", minimum=3, maximum=MAX_POINTS_PER_AXIS) for i, v in enumerate(pts)]
    lower = [r.number(v, f"grid.lower[{i}]", allow_formula=False, span=(0, MAX_COORDINATE))
             for i, v in enumerate(r.array(raw["lower"], "grid.lower", length=ndim))]
    upper = [r.number(v, f"grid.upper[{i}]", allow_formula=False, span=(0, MAX_COORDINATE))
             for i, v in enumerate(r.array(raw["upper"], "grid.upper", length=ndim))]
    for i in range(ndim):
        if not upper[i] > lower[i]:
            r.fail(f"grid.upper[{i}]", f"must be greater than grid.lower[{i}] ({lower[i]}), got {upper[i]}")
    bnd = raw.get("boundary", "hard-wall")
    if isinstance(bnd, list):
        r.array(bnd, "grid.boundary", length=ndim)
        for i, b in enumerate(bnd):
            if b not in BOUNDARIES:
                r.fail(f"grid.boundary[{i}]", f"expected \"hard-wall\" or \"periodic\", got {r.show(b)}")
    elif bnd not in BOUNDARIES:
        r.fail("grid.boundary", f"expected \"hard-wall\" or \"periodic\" (or one per axis), got {r.show(bnd)}")
    return Grid(lower, upper, points, bnd)


def _read_term(r: _Reader, raw, path: str, ndim: int, warnings):
    raw = r.obj(raw, path)
    kind = raw.get("kind")
    if not isinstance(kind, str) or kind not in TERM_KINDS:
        r.fail(f"{path}.kind", f"expected one of {', '.join(TERM_KINDS)}, got {r.show(kind)}")
    label = r.text(raw.get("label", kind), f"{path}.label")
    enabled = r.boolean(raw.get("enabled", True), f"{path}.enabled")
    common = ("kind", "label", "enabled")
    if kind == "formula":
        _extra_keys(raw, common + ("formula",), path, warnings)
        text = r.text(raw.get("formula", ""), f"{path}.formula", allow_empty=False, lines=True)
        try:
            parse_formula(text, parameters=(*r.parameters, *MATERIAL_NAMES))
        except FormulaError as exc:
            r.fail(f"{path}.formula", str(exc))
        return FormulaTerm(label=label, formula=text, enabled=enabled)
    if kind == "gates":
        _extra_keys(raw, common + ("depth", "lever", "gates"), path, warnings)
        if ndim != 2:
            r.fail(path, f"surface gates need a 2D grid (the plane of the electron gas); this grid is {ndim}D")
        if "depth" not in raw:
            r.fail(f"{path}.depth", "missing: the depth of the electron gas below the surface")
        depth = r.number(raw["depth"], f"{path}.depth", positive=True)
        lever = raw.get("lever")
        if lever is not None:
            lever = r.number(lever, f"{path}.lever")
        gates = []
        for j, g in enumerate(r.array(raw.get("gates", []), f"{path}.gates")):
            gp = f"{path}.gates[{j}]"
            g = r.obj(g, gp)
            _extra_keys(g, ("label", "voltage", "polygon", "rectangle"), gp, warnings)
            glabel = r.text(g.get("label", f"gate {j + 1}"), f"{gp}.label")
            if "voltage" not in g:
                r.fail(f"{gp}.voltage", "missing")
            volt = r.number(g["voltage"], f"{gp}.voltage")
            poly = rect = None
            if ("polygon" in g) == ("rectangle" in g):
                r.fail(gp, "give exactly one of \"polygon\" or \"rectangle\"")
            if "polygon" in g:
                verts = r.array(g["polygon"], f"{gp}.polygon", min_length=3)
                poly = tuple(tuple(r.number(c, f"{gp}.polygon[{k}][{a}]")
                                   for a, c in enumerate(r.array(v, f"{gp}.polygon[{k}]", length=2)))
                             for k, v in enumerate(verts))
                if all(isinstance(c, float) for v in poly for c in v):
                    from .gates import validate_polygon
                    try:
                        validate_polygon(poly, label=glabel)
                    except InputError as exc:
                        r.fail(f"{gp}.polygon", str(exc))
            else:
                rv = r.array(g["rectangle"], f"{gp}.rectangle", length=4)
                rect = tuple(r.number(c, f"{gp}.rectangle[{k}]") for k, c in enumerate(rv))
                if all(isinstance(c, float) for c in rect) and (rect[0] == rect[2] or rect[1] == rect[3]):
                    r.fail(f"{gp}.rectangle", "has zero width or height; expected [x0, y0, x1, y1]")
            gates.append(GateSpec(label=glabel, voltage=volt, polygon=poly, rectangle=rect))
        return GatesTerm(label=label, depth=depth, gates=tuple(gates), lever=lever, enabled=enabled)
    if kind == "map":
        _extra_keys(raw, common + ("file", "array", "lower", "upper", "scale", "method"), path, warnings)
        f = r.text(raw.get("file", ""), f"{path}.file", allow_empty=False)
        if "\0" in f:
            r.fail(f"{path}.file", "holds a NUL character, which no file name can contain")
        if len(f) > MAX_PATH_CHARS:
            r.fail(f"{path}.file", f"is {len(f):,} characters long; a path has at most {MAX_PATH_CHARS:,}")
        arr = raw.get("array")
        if arr is not None:
            r.text(arr, f"{path}.array")
        for key in ("lower", "upper"):
            if key not in raw:
                r.fail(f"{path}.{key}", "missing: the map's own corner, in the length unit")
        lower = tuple(r.number(v, f"{path}.lower[{i}]", allow_formula=False)
                      for i, v in enumerate(r.array(raw["lower"], f"{path}.lower", length=ndim)))
        upper = tuple(r.number(v, f"{path}.upper[{i}]", allow_formula=False)
                      for i, v in enumerate(r.array(raw["upper"], f"{path}.upper", length=ndim)))
        scale = r.number(raw.get("scale", 1.0), f"{path}.scale")
        method = r.text(raw.get("method", "linear"), f"{path}.method")
        from .maps import INTERPOLATION_METHODS
        if method not in INTERPOLATION_METHODS:
            r.fail(f"{path}.method", f"expected one of {', '.join(INTERPOLATION_METHODS)}, got {method!r}")
        return MapTerm(label=label, file=f, lower=lower, upper=upper, scale=scale, array=arr, method=method,
                       enabled=enabled)
    if kind == "points":
        return _read_points_term(r, raw, path, label, enabled, warnings)
    if kind == "oscillator":
        return _read_oscillator_term(r, raw, path, label, enabled, ndim, warnings)
    _extra_keys(raw, common, path, warnings)
    return FieldTerm(label=label, enabled=enabled)


def _read_oscillator_term(r: _Reader, raw: dict, path: str, label: str, enabled: bool, ndim: int,
                          warnings) -> OscillatorTerm:
    _extra_keys(raw, ("kind", "label", "enabled", "hbar_omega", "centre"), path, warnings)
    if "hbar_omega" not in raw:
        r.fail(f"{path}.hbar_omega", f"missing: the oscillator quantum hbar*omega, one value or {ndim} "
                                     f"(one per axis), in the energy unit")
    hw = raw["hbar_omega"]
    hw = [hw] * ndim if not isinstance(hw, list) else r.array(hw, f"{path}.hbar_omega", length=ndim)
    where = (lambda i: f"{path}.hbar_omega") if not isinstance(raw["hbar_omega"], list) else (
        lambda i: f"{path}.hbar_omega[{i}]")
    quanta = tuple(r.number(v, where(i)) for i, v in enumerate(hw))
    for i, v in enumerate(quanta):
        if isinstance(v, float) and v < 0:
            r.fail(where(i), f"hbar*omega cannot be negative, got {v:g} (0 leaves that axis free)")
    centre = r.array(raw.get("centre", [0.0] * ndim), f"{path}.centre", length=ndim)
    centre = tuple(r.number(v, f"{path}.centre[{i}]") for i, v in enumerate(centre))
    return OscillatorTerm(label=label, hbar_omega=quanta, centre=centre, enabled=enabled)


def _read_points_term(r: _Reader, raw: dict, path: str, label: str, enabled: bool, warnings) -> PointsTerm:
    from .points_map import MESH_SUFFIXES, POINTS_SUFFIXES
    _extra_keys(raw, ("kind", "label", "enabled", "file", "array", "scale", "fill"), path, warnings)
    f = r.text(raw.get("file", ""), f"{path}.file", allow_empty=False)
    suffix = Path(f).suffix.lower()
    if suffix not in POINTS_SUFFIXES:
        r.fail(f"{path}.file", f"unsupported file type {suffix or '(none)'!r}; expected one of "
                               f"{', '.join(POINTS_SUFFIXES)}")
    if Path(f).is_absolute():
        r.fail(f"{path}.file", "give a path relative to the project's folder, not an absolute one")
    arr = raw.get("array")
    if arr is not None:
        r.text(arr, f"{path}.array", allow_empty=False)
        if suffix not in MESH_SUFFIXES:
            r.fail(f"{path}.array", "an array name applies only to mesh files")
    scale = r.number(raw.get("scale", 1.0), f"{path}.scale")
    fill = raw.get("fill")
    if fill is not None:
        fill = r.number(fill, f"{path}.fill")
    return PointsTerm(label=label, file=f, scale=scale, fill=fill, array=arr, enabled=enabled)


# --- writing ---------------------------------------------------------------------------------------

def _plain(v):
    if isinstance(v, tuple):
        return [_plain(x) for x in v]
    return v


def _material_to_json(m, permittivity) -> Any:
    """A material as written in a project: its table name alone, or the fields given."""
    if m.mass is None and m.g_factor is None and permittivity is None:
        return m.name
    return {k: _plain(v) for k, v in (("name", m.name), ("mass", m.mass), ("g_factor", m.g_factor),
                                      ("permittivity", permittivity)) if v is not None}


def project_to_dict(project: Project) -> dict:
    """The JSON document of ``project`` (current schema)."""
    material = _material_to_json(project.material, project.material.permittivity)
    terms = []
    for t in project.potential:
        d: dict = {"kind": t.kind, "label": t.label, "enabled": t.enabled}
        if isinstance(t, FormulaTerm):
            d["formula"] = t.formula
        elif isinstance(t, GatesTerm):
            d["depth"] = t.depth
            if t.lever is not None:
                d["lever"] = t.lever
            d["gates"] = []
            for g in t.gates:
                gd = {"label": g.label, "voltage": g.voltage}
                if g.polygon is not None:
                    gd["polygon"] = _plain(g.polygon)
                else:
                    gd["rectangle"] = _plain(g.rectangle)
                d["gates"].append(gd)
        elif isinstance(t, MapTerm):
            d.update({"file": t.file, "lower": list(t.lower), "upper": list(t.upper), "scale": t.scale,
                      "method": t.method})
            if t.array is not None:
                d["array"] = t.array
        elif isinstance(t, OscillatorTerm):
            d.update({"hbar_omega": list(t.hbar_omega), "centre": list(t.centre)})
        elif isinstance(t, PointsTerm):
            d.update({"file": t.file, "scale": t.scale})
            for key in ("fill", "array"):
                if getattr(t, key) is not None:
                    d[key] = getattr(t, key)
        terms.append(d)
    out = {"schema_version": CURRENT_SCHEMA_VERSION, "title": project.title, "notes": project.notes,
           "units": project.units, "material": material, "grid": project.grid.to_dict(),
           "parameters": dict(project.parameters)}
    if project.parameter_ranges:
        out["parameter_ranges"] = {k: list(v) for k, v in project.parameter_ranges.items()}
    if project.parameter_units:
        out["parameter_units"] = dict(project.parameter_units)
    out["potential"] = terms
    if project.regions:
        out["regions"] = [_region_to_dict(g) for g in project.regions]
    out.update({ "electric_field": list(project.electric_field),
                "magnetic_field": list(project.magnetic_field), "spin": project.spin,
                "solver": {"states": project.solver.states, "scheme": project.solver.scheme,
                           "tolerance": project.solver.tolerance}})
    if project.electrons != 1:
        out["electrons"] = project.electrons
    return out


def _region_to_dict(reg: RegionSpec) -> dict:
    material = _material_to_json(reg.material, reg.permittivity)
    d = {"label": reg.label, "inside": reg.inside, "material": material}
    if reg.offset is not None:
        d["offset"] = reg.offset
    return d


def _dump(value, indent: int = 0) -> str:
    """JSON with objects indented and lists of plain values kept on one line."""
    pad = "  " * indent
    if isinstance(value, dict):
        if not value:
            return "{}"
        items = [f'{pad}  {json.dumps(k, ensure_ascii=False)}: {_dump(v, indent + 1)}' for k, v in value.items()]
        return "{\n" + ",\n".join(items) + "\n" + pad + "}"
    if isinstance(value, (list, tuple)):
        if all(not isinstance(v, (dict, list, tuple)) for v in value):
            return "[" + ", ".join(json.dumps(v, ensure_ascii=False) for v in value) + "]"
        if all(isinstance(v, (list, tuple)) and all(not isinstance(w, (dict, list, tuple)) for w in v)
               for v in value) and len(value) <= 12:
            return "[" + ", ".join(_dump(v) for v in value) + "]"
        items = [f"{pad}  {_dump(v, indent + 1)}" for v in value]
        return "[\n" + ",\n".join(items) + "\n" + pad + "]"
    return json.dumps(value, ensure_ascii=False)


def project_to_json(project: Project) -> str:
    """The project's JSON text; a lone surrogate in any text (which no UTF-8 file can hold, and which a
    window's text field can produce) is written as U+FFFD, so that saving always succeeds."""
    return repair_text(_dump(project_to_dict(project)) + "\n")


def project_from_json(text: str, *, base_dir: str | None = None, source: str = "project") -> Project:
    return project_from_dict(parse_json(text, source=source, error=ProjectError), base_dir=base_dir)


def load_project(path: str | os.PathLike) -> Project:
    """Read and validate a project file. Raises ProjectError (or InputError) naming the problem."""
    p = Path(path)
    text = read_text_file(p, kind="project file", max_bytes=MAX_FILE_BYTES, error=ProjectError,
                          too_big_hint=" (put arrays in map files)")
    return project_from_json(text, base_dir=str(p.resolve().parent), source=str(p))


def save_project(project: Project, path: str | os.PathLike) -> Path:
    """Write ``project`` atomically (temporary file in the same folder, then ``os.replace``).

    If ``path`` holds a project in an older schema, a copy is kept as ``path + ".bak"`` first.
    A failure leaves any existing file untouched.
    """
    p = Path(path)
    text = project_to_json(project)
    if p.exists():
        try:
            old = json.loads(p.read_text(encoding="utf-8-sig"))
            old_version = old.get("schema_version") if isinstance(old, dict) else None
        except (OSError, ValueError):
            old_version = None
        if isinstance(old_version, int) and old_version < CURRENT_SCHEMA_VERSION:
            bak = p.with_name(p.name + ".bak")
            atomic_write(bak, data=p.read_bytes(), verb="save")
    atomic_write(p, data=text.encode("utf-8"), verb="save")
    return p
