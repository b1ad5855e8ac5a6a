"""Moving states between the grids of a convergence study, and matching levels by overlap.

States are interpolated linearly, axis by axis (hard walls: zero at the walls; periodic axes wrap);
levels of two grids are matched by the weights |<a_i|b_j>|^2 of their wavefunctions on one common
grid, so that levels which swap order between grids are still compared with themselves.
"""
from __future__ import annotations

import numpy as np
from scipy.optimize import linear_sum_assignment

from .errors import InputError
from .grid import PERIODIC, Grid

__all__ = ["interpolate_states", "match_levels"]


# --- interpolation between grids ------------------------------------------------------------------

def _axis_interpolation(src_axis: np.ndarray, lo: float, hi: float, boundary: str, dst: np.ndarray) -> np.ndarray:
    """Dense matrix of linear interpolation from one grid axis onto coordinates ``dst``.

    Hard wall: the function is 0 at ``lo`` and ``hi`` (the walls, which are not grid points).
    Periodic: the nodes wrap around with period ``hi - lo``.
    """
    n = src_axis.size
    m = np.zeros((dst.size, n))
    rows = np.arange(dst.size)
    if boundary == PERIODIC:
        h = (hi - lo) / n
        t = (dst - lo) / h
        i0 = np.floor(t).astype(int)
        w = t - i0
        np.add.at(m, (rows, i0 % n), 1.0 - w)
        np.add.at(m, (rows, (i0 + 1) % n), w)
        return m
    h = (hi - lo) / (n + 1)
    t = np.clip((dst - lo) / h, 0.0, n + 1.0)          # node index, walls at 0 and n+1
    i0 = np.minimum(np.floor(t).astype(int), n)
    w = t - i0
    left, right = i0 - 1, i0                          # grid array indices of nodes i0 and i0+1
    ok = (left >= 0) & (left < n)
    np.add.at(m, (rows[ok], left[ok]), (1.0 - w)[ok])
    ok = (right >= 0) & (right < n)
    np.add.at(m, (rows[ok], right[ok]), w[ok])
    return m


def interpolate_states(states: np.ndarray, src: Grid, dst: Grid) -> np.ndarray:
    """Linear interpolation of a block of states ``[level, x, y(, z)]`` from grid ``src`` onto ``dst``
    (same box and boundaries), axis by axis.  Not normalised."""
    if src.ndim != dst.ndim or src.boundary != dst.boundary or not np.allclose(src.lower, dst.lower) \
            or not np.allclose(src.upper, dst.upper):
        raise InputError("states can only be interpolated between grids on the same box with the same boundaries")
    out = np.asarray(states)
    for a in range(src.ndim):
        mat = _axis_interpolation(src.axes[a], src.lower[a], src.upper[a], src.boundary[a], dst.axes[a])
        out = np.moveaxis(np.tensordot(mat, out, axes=([1], [a + 1])), 0, a + 1)
    return np.ascontiguousarray(out)


def _normalised_rows(states: np.ndarray) -> np.ndarray:
    flat = states.reshape(len(states), -1)
    norms = np.linalg.norm(flat, axis=1)
    return flat / np.maximum(norms, 1e-300)[:, None]


def match_levels(ref_states: np.ndarray, ref_energies, other_states: np.ndarray, other_energies, *,
                 threshold: float = 0.05) -> np.ndarray:
    """For each reference level, the index of the same level among ``other`` (-1 if none), from
    wavefunctions given on one common grid.

    Weights W_ij = |<ref_i|other_j>|^2 (normalised vectors).  Levels linked by a weight above
    ``threshold`` (or by the best weight of a row or column) form groups that span the same space on
    both grids (a multiplet, or levels that mix near an anticrossing); inside a group of equal size
    the levels are paired in energy order, otherwise by the largest total weight (Hungarian method).
    """
    a = _normalised_rows(ref_states)
    b = _normalised_rows(other_states)
    w = np.abs(np.conj(a) @ b.T) ** 2
    nr, no = w.shape
    parent = list(range(nr + no))

    def find(i):
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    def union(i, j):
        ri, rj = find(i), find(j)
        if ri != rj:
            parent[rj] = ri

    edges = w >= threshold
    if no:
        edges[np.arange(nr), np.argmax(w, axis=1)] = True
    if nr:
        edges[np.argmax(w, axis=0), np.arange(no)] = True
    for i, j in zip(*np.nonzero(edges)):
        union(int(i), nr + int(j))
    comps: dict = {}
    for node in range(nr + no):
        comps.setdefault(find(node), []).append(node)
    ref_e = np.asarray(ref_energies, dtype=float)
    oth_e = np.asarray(other_energies, dtype=float)
    out = np.full(nr, -1, dtype=int)
    for nodes in comps.values():
        f = [i for i in nodes if i < nr]
        c = [j - nr for j in nodes if j >= nr]
        if not f or not c:
            continue
        f = sorted(f, key=lambda i: (ref_e[i], i))
        c = sorted(c, key=lambda j: (oth_e[j], j))
        if len(f) == len(c):
            for i, j in zip(f, c):
                out[i] = j
        else:
            sub = w[np.ix_(f, c)]
            rows, cols = linear_sum_assignment(-sub)
            for r, cc in zip(rows, cols):
                if sub[r, cc] >= 2 * threshold:
                    out[f[r]] = c[cc]
    return out
