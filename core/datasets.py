"""Results as labelled xarray Datasets, for notebooks (optional dependency: ``pip install xarray``).

:func:`study_dataset` turns one solve into a Dataset with the level number and the grid axes as
coordinates; :func:`sweep_dataset` turns a sweep into one with the swept value, the level and the
track as coordinates.  Every variable and coordinate carries its unit in ``attrs["units"]``, and the
Dataset's ``attrs`` record the project title, unit system, scheme and the fingerprint of the project
state that was solved (:mod:`core.provenance`), so a saved Dataset can be traced back to its project.
"""
from __future__ import annotations

import numpy as np

from .analysis import position_expectation
from .errors import InputError
from .formatting import pretty_unit

__all__ = ["study_dataset", "sweep_dataset"]

AXES = ("x", "y", "z")


def _xarray():
    try:
        import xarray
    except ImportError:
        raise InputError("converting results to xarray needs the optional xarray package "
                         "(pip install xarray)") from None
    return xarray


def _common_attrs(project, units) -> dict:
    return {"title": project.title, "unit_system": units.name, "energy_unit": units.energy_unit,
            "length_unit": units.length_unit, "source": "Wellscape (an idealised effective-mass model)"}


def study_dataset(result, *, states: bool = True):
    """One solve as an ``xarray.Dataset``: ``energy(level)``, ``multiplet(level)`` (the index of the
    degenerate group), ``residual(level)``, ``<x>`` etc. as ``position(level, axis)``, the potential on
    the grid and, with ``states=True``, the wavefunctions ``psi(level, x, y[, z])`` (normalised:
    sum |psi|^2 dV = 1) and the density ``probability_density``."""
    xr = _xarray()
    u = result.units
    grid = result.grid
    dims = AXES[:grid.ndim]
    k = len(result.energies)
    length = {"units": u.length_unit}
    coords = {"level": ("level", np.arange(k))}
    coords.update({a: (a, np.asarray(grid.axes[i]), length) for i, a in enumerate(dims)})
    coords["axis"] = ("axis", list(dims))
    multiplet = np.empty(k, dtype=int)
    for g, members in enumerate(result.groups):
        multiplet[list(members)] = g
    energy = {"units": u.energy_unit, "long_name": "level energy"}
    data = {
        "energy": ("level", np.asarray(result.energies, dtype=float), energy),
        "multiplet": ("level", multiplet, {"long_name": "index of the degenerate group"}),
        "residual": ("level", np.asarray(result.spectrum.residuals, dtype=float),
                     {"units": u.energy_unit, "long_name": "residual norm of the eigenpair"}),
        "position": (("level", "axis"), position_expectation(grid, result.states), {**length,
                     "long_name": "expectation of the position"}),
        "potential": (dims, np.asarray(result.potential, dtype=float), {"units": u.energy_unit}),
    }
    if states:
        psi = np.asarray(result.states)
        data["psi"] = (("level", *dims), psi, {"units": f"{u.length_unit}^(-{grid.ndim}/2)",
                                               "long_name": "wavefunction, normalised to 1"})
        data["probability_density"] = (("level", *dims), np.abs(psi) ** 2,
                                       {"units": f"{u.length_unit}^-{grid.ndim}"})
    attrs = _common_attrs(result.project, u)
    attrs.update({"scheme": result.scheme, "fingerprint": result.fingerprint,
                  "parameters": repr(dict(result.parameters)),
                  "magnetic_field": list(map(float, result.magnetic_field)),
                  "magnetic_field_unit": u.magnetic_unit})
    return xr.Dataset(data, coords=coords, attrs=attrs)


def sweep_dataset(sweep):
    """A sweep as an ``xarray.Dataset``: ``energy(value, level)`` (ascending at each value),
    ``track_energy(track, value)`` (each level followed by its character), the recorded observables
    per level, and the verdicts in ``attrs["close_approaches"]`` (their own words, with uncertainties)."""
    xr = _xarray()
    from .provenance import sweep_fingerprint
    from .sweep.targets import target_unit
    u = sweep.units
    xunit = target_unit(sweep.project, str(sweep.parameter))
    values = np.asarray(sweep.values, dtype=float)
    k = sweep.energies.shape[1]
    coords = {"value": ("value", values, {"units": xunit, "long_name": str(sweep.parameter)}),
              "level": ("level", np.arange(k)), "track": ("track", np.arange(len(sweep.tracks)))}
    data = {"energy": (("value", "level"), np.asarray(sweep.energies, dtype=float), {"units": u.energy_unit}),
            "track_energy": (("track", "value"), sweep.track_energies(), {"units": u.energy_unit}),
            "track_level": (("track", "value"), np.asarray(sweep.tracks, dtype=int),
                            {"long_name": "level number of the track at each value"})}
    for name, arr in (sweep.observables or {}).items():
        arr = np.asarray(arr)
        if arr.shape == sweep.energies.shape and arr.dtype.kind in "fiu":
            unit = u.length_unit if name in AXES else "hbar" if name.startswith("lz") else ""
            data[f"observable_{name}"] = (("value", "level"), arr.astype(float), {"units": unit} if unit else {})
    attrs = _common_attrs(sweep.project, u)
    attrs.update({"swept": str(sweep.parameter), "swept_unit": pretty_unit(xunit),
                  "complete": int(bool(sweep.complete)), "fingerprint": sweep_fingerprint(sweep),
                  "close_approaches": [a.describe(str(sweep.parameter), u.energy_unit, pretty_unit(xunit))
                                       for a in sweep.anticrossings]})
    return xr.Dataset(data, coords=coords, attrs=attrs)
