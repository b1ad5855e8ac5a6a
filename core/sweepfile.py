"""Checks of a sweep archive read from a file, before anything is drawn from it.

A sweep file (written by ``wellscape sweep --out``) is data from outside: its member headers are
read and their sizes checked before the arrays are loaded, and the loaded sweep must be
self-consistent (shapes, index ranges, finite values) before a figure indexes into it.
"""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from .errors import InputError
from .limits import MAX_ENERGY
from .maps import npz_headers

__all__ = ["check_sweep_archive", "validate_sweep", "validate_two_electron", "MAX_SWEEP_BYTES"]

#: any one array of a sweep file
MAX_SWEEP_BYTES = 1 * 2**30


def check_sweep_archive(path) -> None:
    """Refuse an archive with pickled, damaged or oversized members (headers only, nothing inflated)."""
    p = Path(path)
    if p.suffix != ".npz":
        p = p.with_suffix(".npz")
    if not p.is_file():
        return                      # the loader reports a missing file in its own words
    npz_headers(p, source=f"sweep file {p}", max_bytes=MAX_SWEEP_BYTES)


def _numeric(arr, what: str, source: str, *, integer=False) -> np.ndarray:
    a = np.asarray(arr)
    if a.dtype.kind not in ("iu" if integer else "iuf"):
        raise InputError(f"{source}: {what} must be {'integers' if integer else 'numbers'}, got {a.dtype}")
    return a


def validate_sweep(sweep, source: str):
    """Return ``sweep`` when its arrays fit together; otherwise raise InputError naming the first problem."""
    values = _numeric(sweep.values, "values", source)
    if values.ndim != 1 or values.size < 1:
        raise InputError(f"{source}: values must be a list of swept values, got shape {values.shape}")
    if not np.all(np.isfinite(values)):
        raise InputError(f"{source}: values holds a value that is not finite")
    p = values.size
    energies = _numeric(sweep.energies, "energies", source)
    if energies.ndim != 2 or energies.shape[0] != p or energies.shape[1] < 1:
        raise InputError(f"{source}: energies must have one row per swept value ({p}), got shape {energies.shape}")
    if not np.all(np.isfinite(energies)) or float(np.max(np.abs(energies))) > MAX_ENERGY:
        raise InputError(f"{source}: energies holds values that are not finite or beyond {MAX_ENERGY:g}")
    k = energies.shape[1]
    tracks = _numeric(sweep.tracks, "tracks", source, integer=True)
    if tracks.ndim != 2 or tracks.shape[1] != p or tracks.shape[0] > k:
        raise InputError(f"{source}: tracks must have shape (tracks <= {k}, {p}), got {tracks.shape}")
    if tracks.size and (tracks.min() < 0 or tracks.max() >= k):
        raise InputError(f"{source}: tracks name levels outside 0 .. {k - 1}")
    for name, obs in sweep.observables.items():
        a = np.asarray(obs)
        if a.dtype.kind not in "iuf" or a.shape != (p, k):
            raise InputError(f"{source}: observable {str(name)[:40]!r} must be numbers of shape {(p, k)}, got "
                             f"{a.dtype} {a.shape}")
    t = tracks.shape[0]
    for i, a in enumerate(sweep.anticrossings):
        where = f"{source}: approach {i}"
        for field in ("at", "gap", "sampled_gap"):
            v = getattr(a, field)
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
                raise InputError(f"{where}: {field} must be a finite number")
        pair = a.tracks
        if (not isinstance(pair, tuple) or len(pair) != 2
                or not all(isinstance(x, int) and not isinstance(x, bool) and 0 <= x < t for x in pair)):
            raise InputError(f"{where}: levels must be two track numbers in 0 .. {t - 1}")
        if a.kind not in ("anticrossing", "crossing"):
            raise InputError(f"{where}: kind must be \"anticrossing\" or \"crossing\"")
        if not isinstance(a.fit, dict) or not isinstance(a.reason, str):
            raise InputError(f"{where}: fit must be an object and reason text")
    if not isinstance(sweep.parameter, str) or not sweep.parameter or len(sweep.parameter) > 200:
        raise InputError(f"{source}: the swept parameter's name must be short text")
    if getattr(sweep, "two_electron", None) is not None:
        validate_two_electron(sweep.two_electron, p, f"{source}: two_electron")
    return sweep


def _number_or_none(v, where: str) -> None:
    if v is None:
        return
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) or abs(v) > MAX_ENERGY:
        raise InputError(f"{where} must be a finite number or null")


def validate_two_electron(two, points: int, where: str) -> None:
    """The per-point two-electron columns of a sweep (:func:`core.two_electron.sweep_columns`)."""
    if not isinstance(two, dict):
        raise InputError(f"{where} must be an object")
    for key in ("energies", "spin", "exchange"):
        if not isinstance(two.get(key), list) or len(two[key]) != points:
            raise InputError(f"{where}.{key} must be a list with one entry per swept value ({points})")
    for key in ("exchange", "exchange_uncertainty", "zeeman_splitting"):
        col = two.get(key)
        if col is None and key != "exchange":
            continue
        if not isinstance(col, list) or len(col) != points:
            raise InputError(f"{where}.{key} must be a list with one entry per swept value ({points})")
        for v in col:
            _number_or_none(v, f"{where}.{key}")
    for i, (es, ss) in enumerate(zip(two["energies"], two["spin"])):
        if not isinstance(es, list) or not isinstance(ss, list) or len(es) != len(ss) or len(es) > 10_000:
            raise InputError(f"{where}: point {i} must list as many energies as spins")
        for e in es:
            if e is None:
                raise InputError(f"{where}.energies: point {i} holds a missing energy")
            _number_or_none(e, f"{where}.energies")
        if any(s not in ("singlet", "triplet") for s in ss):
            raise InputError(f"{where}.spin: point {i}: each spin must be \"singlet\" or \"triplet\"")
