"""Sweep files: ``.npz`` with everything (the project echoed as JSON, no pickles) and a ``.csv`` of tracks."""
from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np

from ..errors import InputError
from ..project import project_from_dict, project_to_dict
from .approaches import Anticrossing
from .result import SweepResult

__all__ = ["save_sweep", "load_sweep"]


def save_sweep(result: SweepResult, path) -> tuple:
    """Write ``PATH.npz`` (everything, project echoed) and ``PATH.csv`` (tracked energies, units in header)."""
    p = Path(path)
    npz = p.with_suffix(".npz")
    csv_path = p.with_suffix(".csv")
    arrays = {"values": result.values, "energies": result.energies, "tracks": result.tracks,
              "parameter": np.array(result.parameter), "project": np.array(json.dumps(project_to_dict(result.project))),
              "approaches": np.array(json.dumps([a.to_dict() for a in result.anticrossings])),
              "units": np.array(json.dumps(result.units.describe())),
              "complete": np.array(bool(result.complete)), "notes": np.array(json.dumps(list(result.notes)))}
    for name, arr in result.observables.items():
        arrays[f"obs_{name}"] = arr
    if result.states is not None:
        arrays["states"] = result.states
    if result.two_electron is not None:
        arrays["two_electron"] = np.array(json.dumps(result.two_electron))
    tmp = npz.with_name(npz.stem + ".tmp.npz")
    np.savez_compressed(tmp, **arrays)
    os.replace(tmp, npz)
    u = result.units
    te = result.track_energies()
    header = [f"{result.parameter}"] + [f"track {t} [{u.energy_unit}]" for t in range(te.shape[0])]
    lines = ([] if result.complete else ["# incomplete sweep: " + "; ".join(result.notes)]) + [",".join(header)]
    for i, v in enumerate(result.values):
        lines.append(",".join([f"{v:.12g}"] + [f"{te[t, i]:.12g}" for t in range(te.shape[0])]))
    csv_path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return npz, csv_path


def load_sweep(path) -> SweepResult:
    """Read a sweep written by :func:`save_sweep` (no pickles; members checked before they are read,
    arrays checked to fit together after, by :mod:`core.sweepfile`)."""
    from ..sweepfile import check_sweep_archive, validate_sweep
    p = Path(path)
    if p.suffix != ".npz":
        p = p.with_suffix(".npz")
    if p.exists():
        check_sweep_archive(p)                 # member headers and sizes before anything is inflated
    try:
        with np.load(p, allow_pickle=False) as z:
            data = {k: z[k] for k in z.files}
    except FileNotFoundError:
        raise InputError(f"no such sweep file: {p}") from None
    except (ValueError, OSError) as exc:
        raise InputError(f"{p} is not a sweep file: {exc}") from None
    try:
        project = project_from_dict(json.loads(str(data["project"])))
        approaches = tuple(Anticrossing.from_dict(a) for a in json.loads(str(data["approaches"])))
        obs = {k[4:]: v for k, v in data.items() if k.startswith("obs_")}
        notes = tuple(json.loads(str(data["notes"]))) if "notes" in data else ()
        two = json.loads(str(data["two_electron"])) if "two_electron" in data else None
        result = SweepResult(parameter=str(data["parameter"]), values=data["values"], energies=data["energies"],
                             tracks=data["tracks"], anticrossings=approaches, observables=obs, project=project,
                             states=data.get("states"), complete=bool(data.get("complete", True)), notes=notes,
                             two_electron=two)
        return validate_sweep(result, f"sweep file {p}")
    except (KeyError, ValueError, TypeError, AttributeError) as exc:
        raise InputError(f"{p} is not a complete sweep file ({exc})") from None
