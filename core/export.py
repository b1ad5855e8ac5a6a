"""Data export: levels as CSV, states as .npz, sweeps as CSV and .npz, and optionally HDF5.

Every file names its units: CSV headers carry ``[meV]``, ``[nm]`` and so on; ``.npz`` and
HDF5 files hold the unit names beside the arrays, the grid's axes, the project (as JSON) and
the Wellscape version.  Arrays on a grid are indexed ``[level, x, y(, z)]`` and normalised
so that ``sum |psi|^2 * dV = 1`` with ``dV`` the product of the grid spacings.

HDF5 needs the optional ``h5py`` package; everything else needs only numpy.  Files are
written to a temporary name and moved into place, so a failure leaves an existing file
as it was.  Reading uses ``np.load(allow_pickle=False)`` only.
"""
from __future__ import annotations

import csv
import io
import json
import os
from collections.abc import Sequence
from pathlib import Path

import numpy as np

from .atomic import atomic_write
from .errors import InputError

__all__ = ["levels_csv_text", "write_levels_csv", "write_states_npz", "read_states_npz", "sweep_csv_text",
           "write_sweep_csv", "write_sweep_npz", "write_hdf5", "hdf5_available", "panel_csv_text",
           "parameter_unit", "STATES_FORMAT"]

STATES_FORMAT = "wellscape-states"
PathLike = str | os.PathLike


# --- helpers ---------------------------------------------------------------------------------

def _atomic(path: PathLike, write) -> Path:
    """Call ``write(tmp_path)`` and move the result to ``path`` (see :func:`core.atomic.atomic_write`)."""
    return atomic_write(path, write)


def _write_text(path: PathLike, text: str) -> Path:
    def write(tmp):
        with open(tmp, "w", encoding="utf-8", newline="") as fh:
            fh.write(text)
    return _atomic(path, write)


def _project_json(project, parameters: dict | None = None) -> str:
    import dataclasses

    from .project import project_to_dict
    if parameters:
        project = dataclasses.replace(project, parameters={k: float(v) for k, v in parameters.items()})
    return json.dumps(project_to_dict(project), ensure_ascii=False)


def _version() -> str:
    from . import __version__
    return __version__


def _suffix(path: PathLike, allowed: Sequence[str], what: str) -> Path:
    p = Path(path)
    if p.suffix.lower() not in allowed:
        raise InputError(f"{p.name}: {what} are written as {' or '.join(allowed)}, not {p.suffix or '(no extension)'}")
    return p


# --- levels ----------------------------------------------------------------------------------

def levels_csv_text(result) -> str:
    """One row per level of a solve: energy, energy above the ground level, multiplet,
    multiplicity, mean position per axis, mirror parity and residual; units in the header."""
    from .analysis import mirror_parity, parity_label, position_expectation
    u = result.units
    spec = result.spectrum
    grid = result.grid
    energies = np.asarray(spec.energies, dtype=float)
    pos = position_expectation(grid, spec.states)
    try:
        par = mirror_parity(grid, spec.states, result.potential)
    except Exception:  # noqa: BLE001 - a parity is a label, never a reason to lose the table
        par = [dict() for _ in energies]
    group_of = {i: (gi, len(g)) for gi, g in enumerate(spec.groups) for i in g}
    axes = "xyz"[: grid.ndim]
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["level", f"energy [{u.energy_unit}]", f"above ground [{u.energy_unit}]", "multiplet",
                "multiplicity"] + [f"<{a}> [{u.length_unit}]" for a in axes]
               + ["mirror parity", f"residual [{u.energy_unit}]"])
    for i, e in enumerate(energies):
        gi, mult = group_of[i]
        w.writerow([i, repr(float(e)), repr(float(e - energies[0])), gi, mult]
                   + [f"{_clean(p, h):.9g}" for p, h in zip(pos[i], grid.spacing)]
                   + [parity_label(par[i]) if par[i] else "",
                                                     f"{float(spec.residuals[i]):.3g}"])
    return buf.getvalue()


def _clean(value: float, spacing: float) -> float:
    """Positions far below the grid spacing are round-off: write them as 0."""
    return 0.0 if abs(value) < 1e-6 * spacing else float(value)


def write_levels_csv(result, path: PathLike) -> Path:
    """Write :func:`levels_csv_text` to ``path`` (.csv)."""
    _suffix(path, (".csv", ".txt"), "level tables")
    return _write_text(path, levels_csv_text(result))


# --- states ----------------------------------------------------------------------------------

def write_states_npz(result, path: PathLike, *, levels: Sequence[int] | None = None,
                     compressed: bool = True) -> Path:
    """Write the states of a solve (all, or ``levels``) with their energies, the grid's axes
    and units, the project (JSON, parameters as solved) and the Wellscape version.

    Keys: ``states`` (k, *grid shape), ``energies`` (k,), ``levels`` (k,), ``axis_x``,
    ``axis_y`` (, ``axis_z``), ``potential``, ``energy_unit``, ``length_unit``,
    ``unit_system``, ``groups`` (JSON), ``scheme``, ``boundary``, ``normalisation``,
    ``project`` (JSON), ``parameters`` (JSON), ``format``, ``wellscape_version``.
    """
    _suffix(path, (".npz",), "states")
    spec = result.spectrum
    k = int(spec.energies.size)
    idx = list(range(k)) if levels is None else [int(i) for i in levels]
    for i in idx:
        if not 0 <= i < k:
            raise InputError(f"level {i} was not solved (the result holds levels 0–{k - 1})")
    if not idx:
        raise InputError("no levels chosen to write")
    u = result.units
    grid = result.grid
    arrays = {
        "format": np.array(STATES_FORMAT), "wellscape_version": np.array(_version()),
        "states": np.asarray(spec.states)[idx], "energies": np.asarray(spec.energies, dtype=float)[idx],
        "levels": np.asarray(idx, dtype=np.int64), "potential": np.asarray(result.potential, dtype=float),
        "energy_unit": np.array(u.energy_unit), "length_unit": np.array(u.length_unit),
        "unit_system": np.array(u.name), "scheme": np.array(result.scheme),
        "boundary": np.array(json.dumps(list(grid.boundary))),
        "groups": np.array(json.dumps([list(g) for g in spec.groups])),
        "normalisation": np.array(f"sum |psi|^2 * dV = 1, dV = {grid.volume_element!r} {u.length_unit}^{grid.ndim}"),
        "project": np.array(_project_json(result.project, result.parameters)),
        "parameters": np.array(json.dumps({k2: float(v) for k2, v in result.parameters.items()})),
    }
    for a, ax in zip("xyz", grid.axes):
        arrays[f"axis_{a}"] = np.asarray(ax, dtype=float)
    saver = np.savez_compressed if compressed else np.savez

    def write(tmp):
        with open(tmp, "wb") as fh:
            saver(fh, **arrays)
    return _atomic(path, write)


def read_states_npz(path: PathLike) -> dict:
    """Read a states file (from :func:`write_states_npz` or ``wellscape solve --out``), checked.

    Returns a dict of arrays (``states``, ``energies``, ``axis_x``, ...) with the text
    entries as ``str`` and the JSON entries (``project``, ``parameters``, ``groups``)
    decoded.  Never unpickles anything.
    """
    p = Path(path)
    try:
        with np.load(p, allow_pickle=False) as z:
            data = {k: z[k] for k in z.files}
    except FileNotFoundError:
        raise InputError(f"no such states file: {p}") from None
    except (ValueError, OSError, EOFError) as exc:
        raise InputError(f"{p} is not a readable .npz file of plain arrays ({exc})") from None
    for key in ("states", "energies"):
        if key not in data:
            raise InputError(f"{p}: no {key!r} array; this is not a states file")
    out: dict = {}
    for key, arr in data.items():
        if arr.dtype.kind == "U" and arr.ndim == 0:
            out[key] = str(arr)
        else:
            out[key] = arr
    for key in ("project", "parameters", "groups", "boundary"):
        if isinstance(out.get(key), str):
            try:
                out[key] = json.loads(out[key])
            except ValueError:
                raise InputError(f"{p}: {key!r} is not valid JSON") from None
    states, energies = out["states"], out["energies"]
    if energies.ndim != 1 or states.ndim < 2 or states.shape[0] != energies.size:
        raise InputError(f"{p}: {energies.size} energies for states of shape {states.shape}")
    axes = [out[f"axis_{a}"] for a in "xyz" if f"axis_{a}" in out]
    if axes and tuple(a.size for a in axes) != states.shape[1:]:
        raise InputError(f"{p}: the axes ({', '.join(str(a.size) for a in axes)} points) do not match the "
                         f"states' grid {states.shape[1:]}")
    if states.dtype.kind not in "fc" or energies.dtype.kind != "f":
        raise InputError(f"{p}: states and energies must be floating-point arrays")
    if not (np.all(np.isfinite(energies)) and np.all(np.isfinite(states))):
        raise InputError(f"{p}: the file holds NaN or infinite values")
    return out


# --- sweeps ----------------------------------------------------------------------------------

def parameter_unit(sweep) -> str:
    """Unit of a swept quantity (:func:`core.targets.target_unit`: the field units, V for a gate, a
    parameter's own unit when the project gives one); a unit the sweep carries itself wins."""
    from .targets import target_unit
    own = str(getattr(sweep, "parameter_unit", "") or "")
    return own or target_unit(sweep.project, str(getattr(sweep, "parameter", "")))


def sweep_csv_text(sweep, *, by: str = "tracks") -> str:
    """The sweep as a table: one row per swept value.

    ``by="tracks"``: the energy of each tracked level (a level keeps its column through
    crossings); ``by="levels"``: the k-th lowest energy at each value.  Units in the header.
    """
    if by not in ("tracks", "levels"):
        raise InputError(f"by: expected 'tracks' or 'levels', got {by!r}")
    u = sweep.units
    values = np.asarray(sweep.values, dtype=float)
    unit = parameter_unit(sweep)
    first = f"{sweep.parameter} [{unit}]" if unit else str(sweep.parameter)
    if by == "tracks":
        data = np.asarray(sweep.track_energies(), dtype=float)
        names = [f"track {t} [{u.energy_unit}]" for t in range(data.shape[0])]
    else:
        data = np.asarray(sweep.energies, dtype=float).T
        names = [f"level {k} [{u.energy_unit}]" for k in range(data.shape[0])]
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow([first] + names)
    for i, v in enumerate(values):
        w.writerow([repr(float(v))] + [repr(float(e)) if np.isfinite(e) else "" for e in data[:, i]])
    return buf.getvalue()


def write_sweep_csv(sweep, path: PathLike, *, by: str = "tracks") -> Path:
    """Write :func:`sweep_csv_text` to ``path``; the close approaches go beside it in
    ``NAME_anticrossings.csv`` (position, gap, tunnel coupling, tracks, kind) when there are any."""
    _suffix(path, (".csv", ".txt"), "sweep tables")
    p = _write_text(path, sweep_csv_text(sweep, by=by))
    acs = list(getattr(sweep, "anticrossings", None) or ())
    if acs:
        u = sweep.units
        unit = parameter_unit(sweep)
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        pu = f" [{unit}]" if unit else ""
        w.writerow([f"at {sweep.parameter}{pu}", f"at uncertainty{pu}", f"gap [{u.energy_unit}]",
                    f"gap uncertainty [{u.energy_unit}]", f"gap upper bound [{u.energy_unit}]",
                    f"tunnel coupling t = gap/2 [{u.energy_unit}]", "track a", "track b", "kind", "evidence",
                    "refinement solves"])

        def num(x):
            return "" if x is None or not np.isfinite(float(x)) else repr(float(x))
        for a in acs:
            w.writerow([repr(float(a.at)), num(getattr(a, "at_uncertainty", None)), repr(float(a.gap)),
                        num(getattr(a, "gap_uncertainty", None)), num(getattr(a, "gap_bound", None)),
                        repr(float(a.gap) / 2), int(a.tracks[0]), int(a.tracks[1]), a.kind,
                        getattr(a, "evidence", "") or ("two-level fit" if getattr(a, "fit", None) else ""),
                        int(getattr(a, "refinements", 0))])
        _write_text(p.with_name(p.stem + "_anticrossings.csv"), buf.getvalue())
    return p


def write_sweep_npz(sweep, path: PathLike) -> Path:
    """Write a sweep as ``.npz``: the arrays and keys that ``core.sweep.load_sweep`` reads
    (values, energies, tracks, observables, the project, the close approaches), plus the
    tracked energies and the unit names."""
    _suffix(path, (".npz",), "sweeps")
    from .project import project_to_dict
    u = sweep.units
    approaches = []
    for a in getattr(sweep, "anticrossings", None) or ():
        if hasattr(a, "to_dict"):
            approaches.append(a.to_dict())
        else:
            approaches.append({"at": float(a.at), "gap": float(a.gap), "levels": [int(t) for t in a.tracks],
                               "kind": str(a.kind)})
    arrays = {"values": np.asarray(sweep.values, dtype=float), "energies": np.asarray(sweep.energies, dtype=float),
              "tracks": np.asarray(sweep.tracks), "track_energies": np.asarray(sweep.track_energies(), dtype=float),
              "parameter": np.array(str(sweep.parameter)), "parameter_unit": np.array(parameter_unit(sweep)),
              "project": np.array(json.dumps(project_to_dict(sweep.project), ensure_ascii=False)),
              "approaches": np.array(json.dumps(approaches)), "units": np.array(json.dumps(u.describe())),
              "energy_unit": np.array(u.energy_unit), "length_unit": np.array(u.length_unit),
              "wellscape_version": np.array(_version())}
    for name, arr in (getattr(sweep, "observables", None) or {}).items():
        arrays[f"obs_{name}"] = np.asarray(arr)
    if getattr(sweep, "states", None) is not None:
        arrays["states"] = np.asarray(sweep.states)

    def write(tmp):
        with open(tmp, "wb") as fh:
            np.savez_compressed(fh, **arrays)
    return _atomic(path, write)


# --- HDF5 --------------------------------------------------------------------------------------

def hdf5_available() -> bool:
    """True when the optional h5py package can be imported."""
    try:
        import h5py  # noqa: F401
    except ImportError:
        return False
    return True


def write_hdf5(path: PathLike, *, result=None, sweep=None, levels: Sequence[int] | None = None) -> Path:
    """Write a solve and/or a sweep into one HDF5 file (needs the optional h5py package).

    Layout: ``/solve`` with datasets ``energies``, ``states`` [level, x, y(, z)],
    ``potential``, ``axes/x`` ...; ``/sweep`` with ``values``, ``energies``, ``tracks``,
    ``track_energies`` and ``approaches/{at, gap, tracks, kind}``.  Units, the project
    (JSON) and the Wellscape version are attributes.
    """
    if result is None and sweep is None:
        raise InputError("nothing to write: give a solve result, a sweep or both")
    _suffix(path, (".h5", ".hdf5"), "HDF5 files")
    try:
        import h5py
    except ImportError:
        raise InputError("HDF5 export needs the optional h5py package (pip install h5py); "
                         "CSV and .npz export work without it") from None

    def write(tmp):
        with h5py.File(tmp, "w") as f:
            f.attrs["format"] = "wellscape-data"
            f.attrs["wellscape_version"] = _version()
            if result is not None:
                spec = result.spectrum
                k = int(spec.energies.size)
                idx = list(range(k)) if levels is None else [int(i) for i in levels]
                for i in idx:
                    if not 0 <= i < k:
                        raise InputError(f"level {i} was not solved (the result holds levels 0–{k - 1})")
                u = result.units
                g = f.create_group("solve")
                g.attrs.update({"energy_unit": u.energy_unit, "length_unit": u.length_unit, "unit_system": u.name,
                                "scheme": result.scheme, "project": _project_json(result.project, result.parameters),
                                "groups": json.dumps([list(gr) for gr in spec.groups]),
                                "indexing": "states[level, x, y(, z)], sum |psi|^2 dV = 1"})
                d = g.create_dataset("energies", data=np.asarray(spec.energies, dtype=float)[idx])
                d.attrs["unit"] = u.energy_unit
                g.create_dataset("levels", data=np.asarray(idx, dtype=np.int64))
                d = g.create_dataset("states", data=np.asarray(spec.states)[idx], compression="gzip")
                d.attrs["unit"] = f"{u.length_unit}^-{result.grid.ndim / 2:g}"
                d = g.create_dataset("potential", data=np.asarray(result.potential, dtype=float), compression="gzip")
                d.attrs["unit"] = u.energy_unit
                ax = g.create_group("axes")
                for a, arr in zip("xyz", result.grid.axes):
                    d = ax.create_dataset(a, data=np.asarray(arr, dtype=float))
                    d.attrs["unit"] = u.length_unit
            if sweep is not None:
                from .project import project_to_dict
                u = sweep.units
                g = f.create_group("sweep")
                g.attrs.update({"parameter": str(sweep.parameter), "parameter_unit": parameter_unit(sweep),
                                "energy_unit": u.energy_unit,
                                "project": json.dumps(project_to_dict(sweep.project), ensure_ascii=False)})
                g.create_dataset("values", data=np.asarray(sweep.values, dtype=float))
                g.create_dataset("energies", data=np.asarray(sweep.energies, dtype=float)).attrs["unit"] = u.energy_unit
                g.create_dataset("tracks", data=np.asarray(sweep.tracks))
                g.create_dataset("track_energies",
                                 data=np.asarray(sweep.track_energies(), dtype=float)).attrs["unit"] = u.energy_unit
                acs = list(getattr(sweep, "anticrossings", None) or ())
                ag = g.create_group("approaches")
                ag.create_dataset("at", data=np.asarray([float(a.at) for a in acs], dtype=float))
                ag.create_dataset("gap", data=np.asarray([float(a.gap) for a in acs], dtype=float)).attrs["unit"] = \
                    u.energy_unit
                ag.create_dataset("tracks", data=np.asarray([[int(t) for t in a.tracks] for a in acs],
                                                            dtype=np.int64).reshape(len(acs), 2))
                ag.create_dataset("kind", data=np.asarray([str(a.kind) for a in acs], dtype=h5py.string_dtype()))
    return _atomic(path, write)


# --- one panel of a figure sheet as a table ---------------------------------------------------------

def panel_csv_text(panel: dict) -> str:
    """The values of one figure-sheet panel (``core.figures``) as CSV, with the panel's units.

    Maps (potential, 2D state): first column x, then one column per y (the y values in the
    header); line cuts and 1D states: two columns; level diagrams: level, energy,
    multiplet; sweep fans: the swept value, then one column per tracked level.
    """
    kind = panel.get("kind")
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    if kind in ("potential", "state") and "x" in panel:
        value = panel.get("value_label", "value")
        w.writerow([f"{panel.get('x_label', 'x')} \\ {panel.get('y_label', 'y')}; values: {value}"]
                   + [repr(float(y)) for y in panel["y"]])
        for i, x in enumerate(panel["x"]):
            w.writerow([repr(float(x))] + [repr(float(v)) for v in panel["values"][i]])
    elif kind in ("cut", "state", "potential"):
        ylab = panel.get("value_label") or panel.get("y_label", "value")
        if kind == "cut":
            ylab = panel.get("y_label", "V").replace("E, V", "V")
        w.writerow([panel.get("x_label", "x"), ylab])
        for s, v in zip(panel["s"], panel["values"]):
            w.writerow([repr(float(s)), repr(float(v))])
    elif kind == "levels":
        unit = panel.get("energy_unit", "")
        group_of = {i: gi for gi, g in enumerate(panel["groups"]) for i in g}
        w.writerow(["level", f"energy [{unit}]" if unit else "energy", "multiplet", "shown in a panel"])
        shown = set(panel.get("highlight", []))
        for i, e in enumerate(panel["energies"]):
            w.writerow([i, repr(float(e)), group_of.get(i, ""), "yes" if i in shown else ""])
    elif kind == "fan":
        unit = panel.get("energy_unit", "")
        tracks = np.asarray(panel["tracks"], dtype=float)
        w.writerow([panel.get("x_label", "value")] + [f"track {t} [{unit}]" for t in range(tracks.shape[0])])
        for i, x in enumerate(panel["values"]):
            w.writerow([repr(float(x))] + [repr(float(e)) if np.isfinite(e) else "" for e in tracks[:, i]])
    else:
        raise InputError(f"no table for a panel of kind {kind!r}")
    return buf.getvalue()
