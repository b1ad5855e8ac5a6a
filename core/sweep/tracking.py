"""Level tracking from point to point by wavefunction overlap, and the symmetry labels of tracks."""
from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from scipy.optimize import linear_sum_assignment

from ..eigensolve import energy_scale

__all__ = ["track_levels", "align_degenerate", "overlap_matrices", "labels_from_observables"]


def track_levels(overlaps: Sequence[np.ndarray]) -> np.ndarray:
    """Tracks from consecutive overlap matrices |<psi_i(p)|psi_j(p+1)>|^2 (K x K each).

    Returns (K, P) with the level index of each track at each point.
    """
    if not overlaps:
        return np.zeros((0, 1), dtype=int)
    k = overlaps[0].shape[0]
    p = len(overlaps) + 1
    tracks = np.zeros((k, p), dtype=int)
    tracks[:, 0] = np.arange(k)
    for s, ov in enumerate(overlaps):
        rows, cols = linear_sum_assignment(-ov)
        step = np.empty(k, dtype=int)
        step[rows] = cols
        tracks[:, s + 1] = step[tracks[:, s]]
    return tracks


def align_degenerate(states_list, energies, dv, spin=None, rel=1e-7):
    """Within each degenerate multiplet at a point, rotate the basis to best match the previous point's
    states (polar decomposition of the overlap block), so tracking is not confused by an arbitrary basis."""
    out = list(states_list)
    for p in range(1, len(out)):
        e = energies[p]
        scale = energy_scale(e)
        groups, cur = [], [0]
        for i in range(1, e.size):
            same_spin = spin is None or spin[p][i] == spin[p][cur[-1]]
            if e[i] - e[cur[-1]] <= rel * scale and same_spin:
                cur.append(i)
            else:
                groups.append(cur)
                cur = [i]
        groups.append(cur)
        if all(len(g) == 1 for g in groups):
            continue
        cur_states = out[p].copy()
        prev = out[p - 1].reshape(len(out[p - 1]), -1)
        for g in groups:
            if len(g) == 1:
                continue
            block = cur_states[g].reshape(len(g), -1)
            c = (np.conj(prev) @ block.T) * dv                 # <prev_i | cur_g>
            best = np.argsort(-np.sum(np.abs(c) ** 2, axis=1))[: len(g)]
            u, _, vh = np.linalg.svd(c[best].T)                # polar factor of the |G| x |G| block
            rot = u @ vh                                        # columns: combination for each prev state
            cur_states[g] = (rot.T @ block).reshape((len(g),) + out[p].shape[1:])
        out[p] = cur_states
    return out


def labels_from_observables(obs: dict, tracks: np.ndarray) -> np.ndarray | None:
    """Integer codes of the symmetry labels (parities, spin) of each track at each point, or None.
    A label that is not defined at every point (NaN: the symmetry exists only at some values) is left out."""
    keys = [k for k in sorted(obs) if (k.startswith("parity_") or k == "spin") and np.all(np.isfinite(obs[k]))]
    if not keys:
        return None
    p = np.arange(tracks.shape[1])
    codes = np.zeros(tracks.shape, dtype=np.int64)
    for n, key in enumerate(keys):
        vals = np.stack([obs[key][p, t] for t in tracks])
        codes += (np.round(2 * vals).astype(np.int64) + 2) * (5 ** n)
    return codes


def overlap_matrices(states_list, dv: float, spin=None) -> list:
    """|<psi_i(p)|psi_j(p+1)>|^2 for consecutive points (spinor overlap when ``spin`` is given)."""
    out = []
    for i in range(len(states_list) - 1):
        a, b = states_list[i], states_list[i + 1]
        ov = np.abs(np.conj(a.reshape(len(a), -1)) @ b.reshape(len(b), -1).T) ** 2 * dv**2
        if spin is not None:
            ov = ov * (spin[i][:, None] == spin[i + 1][None, :])
        out.append(ov)
    return out
