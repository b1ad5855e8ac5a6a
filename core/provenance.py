"""Which project state a result came from: one fingerprint of the physics of a project.

Every result (a solve, a convergence check, a level count, a sweep) is tied to the state of the
project it was computed for by :func:`fingerprint`: a short SHA-256 of the physics-relevant part of
the project document - units, material, grid, parameters (as solved), enabled potential terms,
fields, spin and solver settings - with the content of every imported map file in place of its
path.  The title, the notes, the sliders' ranges, the labels of terms and gates and disabled terms
do not enter: editing them leaves every result current.

A sweep keeps the project it ran on (``SweepResult.project``); its state is that project without
the swept quantity (:func:`sweep_fingerprint`), so that moving the swept parameter along the fan
keeps the fan current while any other edit does not (:func:`sweep_matches`).

Used by the window (``app.session``: stale results are marked), by the figure sheets (panels from
different states are refused or named) and by the command line.
"""
from __future__ import annotations

import dataclasses
import hashlib
import json
import os
from collections.abc import Mapping
from pathlib import Path

__all__ = ["fingerprint", "physics_document", "result_fingerprint", "sweep_fingerprint",
           "project_fingerprint_for_sweep", "sweep_matches", "sweep_changes", "changes", "map_file_hashes",
           "FINGERPRINT_DIGITS"]

#: hex digits of a fingerprint (48 bits: collisions between the states of one session are negligible)
FINGERPRINT_DIGITS = 12

_COSMETIC = ("title", "notes", "parameter_ranges", "schema_version")
_MAP_CACHE: dict = {}


def map_file_hashes(project) -> dict:
    """SHA-256 (16 hex digits) of every map or scattered-points file the project reads, keyed by the file as written
    in the project ("unreadable" when it cannot be read).  Cached by path, size and modification time."""
    from .project import MapTerm, PointsTerm
    out = {}
    for term in project.potential:
        if isinstance(term, (MapTerm, PointsTerm)):
            p = Path(term.file)
            if not p.is_absolute():
                p = Path(project.base_dir or ".") / p
            out[term.file] = _file_hash(p)
    return out


def _file_hash(path: Path) -> str:
    try:
        st = os.stat(path)
    except OSError:
        return "unreadable"
    key = (str(path.resolve()), st.st_size, st.st_mtime_ns)
    h = _MAP_CACHE.get(key)
    if h is None:
        try:
            h = hashlib.sha256(path.read_bytes()).hexdigest()[:16]
        except OSError:
            return "unreadable"
        if len(_MAP_CACHE) > 64:
            _MAP_CACHE.clear()
        _MAP_CACHE[key] = h
    return h


def physics_document(project, *, parameters: Mapping[str, float] | None = None, grid=None,
                     exclude_parameter: str | None = None) -> dict:
    """The part of the project document that decides the physics (see the module docstring).

    ``parameters`` replaces the project's values (the values as solved); ``grid`` its grid;
    ``exclude_parameter`` leaves one parameter out (the swept one of a sweep)."""
    from .project import project_to_dict
    changes_ = {}
    if parameters is not None:
        changes_["parameters"] = {str(k): float(v) for k, v in parameters.items()}
    if grid is not None:
        changes_["grid"] = grid
    doc = project_to_dict(dataclasses.replace(project, **changes_) if changes_ else project)
    for key in _COSMETIC:
        doc.pop(key, None)
    if exclude_parameter is not None:
        doc["parameters"] = {k: v for k, v in doc["parameters"].items() if k != exclude_parameter}
    maps = map_file_hashes(project)
    terms = []
    for term in doc.get("potential", []):
        if not term.get("enabled", True):
            continue
        term = {k: v for k, v in term.items() if k != "label"}
        if "gates" in term:
            term["gates"] = [{k: v for k, v in g.items() if k != "label"} for g in term["gates"]]
        if term.get("kind") in ("map", "points"):
            term["file"] = maps.get(term["file"], "unreadable")     # the content, wherever the file is
        terms.append(term)
    doc["potential"] = terms
    return doc


def fingerprint(project, *, parameters: Mapping[str, float] | None = None, grid=None,
                exclude_parameter: str | None = None) -> str:
    """Short SHA-256 (12 hex digits) of :func:`physics_document` (canonical JSON)."""
    doc = physics_document(project, parameters=parameters, grid=grid, exclude_parameter=exclude_parameter)
    text = json.dumps(doc, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:FINGERPRINT_DIGITS]


def result_fingerprint(result) -> str:
    """The fingerprint of the project state a :class:`core.study.StudyResult` was solved for
    (its own record when it has one)."""
    own = getattr(result, "fingerprint", "")
    if own:
        return own
    return fingerprint(result.project, parameters=result.parameters, grid=result.grid)


def _swept_name(sweep_project, target: str) -> str:
    from .targets import SWEEP_PARAMETER
    return target if target in sweep_project.parameters and target != SWEEP_PARAMETER else SWEEP_PARAMETER


def sweep_fingerprint(sweep) -> str:
    """The state a sweep ran on: its project without the swept quantity (the same whether the sweep
    keeps its project with the field or gate already turned into the swept parameter, or not)."""
    return (project_fingerprint_for_sweep(sweep.project, str(sweep.parameter))
            or fingerprint(sweep.project, exclude_parameter=_swept_name(sweep.project, str(sweep.parameter))))


def project_fingerprint_for_sweep(project, target: str, *, parameters: Mapping[str, float] | None = None) -> str:
    """The fingerprint :func:`sweep_fingerprint` gives a sweep of ``target`` run on ``project``
    (with ``parameters`` as solved); ``""`` when ``project`` cannot sweep ``target`` at all."""
    from .errors import InputError
    from .targets import prepare_target  # the one place that turns a field or gate into a swept parameter
    if parameters is not None:
        project = dataclasses.replace(project, parameters={str(k): float(v) for k, v in parameters.items()})
    try:
        prepared, name, _current = prepare_target(project, target)
    except InputError:
        return ""
    return fingerprint(prepared, exclude_parameter=name)


def sweep_changes(sweep, project, *, parameters: Mapping[str, float] | None = None) -> list:
    """What differs in the physics between the project ``sweep`` ran on and ``project`` (with
    ``parameters``), the swept quantity aside; [] when the sweep matches it."""
    from .errors import InputError
    from .targets import prepare_target
    if parameters is not None:
        project = dataclasses.replace(project, parameters={str(k): float(v) for k, v in parameters.items()})
    try:
        prepared, name, _current = prepare_target(project, str(sweep.parameter))
    except InputError:
        return [f"{sweep.parameter} cannot be swept in this project"]
    try:
        swept = prepare_target(sweep.project, str(sweep.parameter))[0]
    except InputError:
        swept = sweep.project
    a = dataclasses.replace(swept, parameters={k: v for k, v in swept.parameters.items() if k != name})
    b = dataclasses.replace(prepared, parameters={k: v for k, v in prepared.parameters.items() if k != name})
    return changes(a, b)


def sweep_matches(sweep, project, *, parameters: Mapping[str, float] | None = None) -> bool:
    """True when ``sweep`` ran on ``project`` (with ``parameters``) apart from the swept quantity."""
    return project_fingerprint_for_sweep(project, str(sweep.parameter), parameters=parameters) == \
        sweep_fingerprint(sweep)


_SECTION_NAMES = {"units": "unit system", "material": "material", "grid": "grid", "potential": "potential terms",
                  "electric_field": "electric field", "magnetic_field": "magnetic field", "spin": "spin",
                  "solver": "solver settings"}


def changes(old, new, *, old_parameters: Mapping[str, float] | None = None, old_grid=None,
            limit: int = 4) -> list:
    """What differs in the physics between two projects, in a few words per item
    (``["VB = -0.18 (was -0.03)", "magnetic field"]``); [] when they are the same state."""
    a = physics_document(old, parameters=old_parameters, grid=old_grid)
    b = physics_document(new)
    out = []
    pa, pb = a.pop("parameters", {}), b.pop("parameters", {})
    for name in sorted(set(pa) | set(pb)):
        if pa.get(name) != pb.get(name):
            if name in pa and name in pb:
                out.append(f"{name} = {pb[name]:.6g} (was {pa[name]:.6g})")
            else:
                out.append(f"parameter {name} {'added' if name in pb else 'removed'}")
    for key in sorted(set(a) | set(b)):
        if a.get(key) != b.get(key):
            out.append(_SECTION_NAMES.get(key, key))
    if len(out) > limit:
        out = out[:limit] + [f"{len(out) - limit} more"]
    return out
