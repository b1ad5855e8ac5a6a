"""Level tables: degenerate multiplets with their energies and observables, as rows and text."""
from __future__ import annotations

import csv
import io

import numpy as np

from .analysis import BOX_STATE, BOX_STATE_HINT, mirror_parity, position_expectation
from .study import StudyResult

__all__ = ["level_rows", "format_level_table", "levels_csv", "multiplet_parity_label", "format_two_electron_table"]


def multiplet_parity_label(parities: list, members) -> str:
    """Parity of a multiplet per mirror axis: '+' or '-' when all members agree, '±' when the multiplet
    holds both (its basis is then arbitrary and individual parities are not meaningful)."""
    if not parities:
        return ""
    axes = [a for a in ("x", "y", "z") if a in parities[members[0]]]
    parts = []
    for a in axes:
        vals = {parities[i].get(a, 0) for i in members}
        if vals == {1}:
            parts.append(f"{a}+")
        elif vals == {-1}:
            parts.append(f"{a}-")
        else:
            parts.append(f"{a}±")
    return " ".join(parts)


def level_rows(result: StudyResult, *, tolerance: float | None = None) -> list:
    """One dict per multiplet: first/last index, multiplicity, energy, spacing to the ground level,
    mean position, parity label; ``bound`` False and ``box_state`` (why, in words) for a box state
    (:func:`core.bound.box_states`)."""
    spec = result.spectrum
    grid = result.grid
    groups = spec.groups if tolerance is None else _groups(spec.energies, tolerance)
    pos = position_expectation(grid, spec.states)
    try:
        par = mirror_parity(grid, spec.states, result.potential)
    except Exception:  # parity is a label, never a reason to fail a report
        par = []
    e0 = float(spec.energies[0])
    try:
        from .bound import box_states
        flags = box_states(result)
    except Exception:  # noqa: BLE001 - the flag is a label, never a reason to fail a report
        flags = None
    rows = []
    for g in groups:
        idx = list(g)
        e = spec.energies[idx]
        row = {"levels": idx, "first": idx[0], "multiplicity": len(idx), "energy": float(e.mean()),
               "spread": float(e.max() - e.min()), "above_ground": float(e.mean() - e0),
               "position": [_clean(float(v), result.grid) for v in pos[idx].mean(axis=0)],
               "parity": multiplet_parity_label(par, idx) if par else "",
               "residual": float(spec.residuals[idx].max())}
        if flags is not None:
            box = [flags[i] for i in idx if flags[i]["box"]]
            row["bound"] = not box
            row["box_state"] = box[0]["reason"] if box else ""
        rows.append(row)
    return rows


def _clean(value: float, grid) -> float:
    """Show round-off positions (far below the grid spacing) as exactly 0."""
    return 0.0 if abs(value) < 1e-9 * max(grid.spacing) else value


def _groups(energies, tol):
    from .eigensolve import group_levels
    return group_levels(energies, tol)


def format_spin_table(result: StudyResult) -> str:
    """Spin-resolved levels (Zeeman-split orbital levels) as plain text."""
    from .study import spin_levels
    sl = spin_levels(result)
    u = result.units
    e0 = sl.energies[0]
    lines = [f"spin-resolved levels: Zeeman splitting g*mu_B*|B| = {sl.zeeman:.6g} {u.energy_unit}",
             f"{'level':>6}  {'orbital':>7}  {'spin':>5}  {'E [' + u.energy_unit + ']':>14}  "
             f"{'E-E0 [' + u.energy_unit + ']':>14}"]
    for i, (e, o, s) in enumerate(zip(sl.energies, sl.orbital, sl.spin)):
        lines.append(f"{i:>6}  {o:>7}  {'+1/2' if s > 0 else '-1/2':>5}  {e:>14.6f}  {e - e0:>14.6f}")
    return "\n".join(lines)


def format_level_table(result: StudyResult, *, tolerance: float | None = None) -> str:
    """Plain-text table of the multiplets (energy unit and length unit in the header)."""
    u = result.units
    rows = level_rows(result, tolerance=tolerance)
    axes = "xyz"[: result.grid.ndim]
    head = (f"{'levels':>9}  {'mult':>4}  {'E [' + u.energy_unit + ']':>14}  {'E-E0 [' + u.energy_unit + ']':>14}  "
            + "  ".join(f"{'<' + a + '> [' + u.length_unit + ']':>11}" for a in axes) + "  parity")
    lines = [head, "-" * len(head)]
    for r in rows:
        lv = r["levels"]
        span = f"{lv[0]}" if len(lv) == 1 else f"{lv[0]}-{lv[-1]}"
        lines.append(f"{span:>9}  {r['multiplicity']:>4}  {r['energy']:>14.6f}  {r['above_ground']:>14.6f}  "
                     + "  ".join(f"{p:>11.3f}" for p in r["position"]) + f"  {r['parity']}"
                     + (f"  {BOX_STATE}" if r.get("bound") is False else ""))
    boxed = [r for r in rows if r.get("bound") is False]
    if boxed:
        lines.append(f"{BOX_STATE}: {len(boxed)} level group{'s' if len(boxed) > 1 else ''} held by the grid's walls, "
                     f"not by the potential ({boxed[0]['box_state']}); {BOX_STATE_HINT}")
    return "\n".join(lines)


def levels_csv(result: StudyResult) -> str:
    """One row per level; units in the header."""
    u = result.units
    spec = result.spectrum
    pos = position_expectation(result.grid, spec.states)
    group_of = {}
    for gi, g in enumerate(spec.groups):
        for i in g:
            group_of[i] = gi
    buf = io.StringIO()
    w = csv.writer(buf)
    axes = "xyz"[: result.grid.ndim]
    w.writerow(["level", f"energy [{u.energy_unit}]", f"above ground [{u.energy_unit}]", "multiplet",
                "multiplicity"] + [f"<{a}> [{u.length_unit}]" for a in axes] + [f"residual [{u.energy_unit}]"])
    for i, e in enumerate(spec.energies):
        g = spec.groups[group_of[i]]
        w.writerow([i, f"{e:.12g}", f"{e - spec.energies[0]:.12g}", group_of[i], len(g)]
                   + [f"{p:.6g}" for p in pos[i]] + [f"{spec.residuals[i]:.3g}"])
    return buf.getvalue()


def format_two_electron_table(pair, energy_unit: str) -> str:
    """Two-electron levels (a :class:`core.two_electron.TwoElectronResult`) with spin and J, as plain text."""
    u = energy_unit
    e0 = float(pair.energies[0])
    lines = [f"two electrons: configuration interaction in {pair.orbitals} orbitals, eps_r = {pair.permittivity:g} "
             f"({pair.permittivity_source})",
             f"{'level':>6}  {'spin':<8}  {'states':>6}  {'E [' + u + ']':>14}  {'E-E0 [' + u + ']':>14}  "
             f"{'+- [' + u + ']':>11}"]
    for i, (e, s, d) in enumerate(zip(pair.energies, pair.spin, pair.energy_uncertainty)):
        unc = f"{d:>11.2g}" if np.isfinite(d) else f"{'n/a':>11}"
        lines.append(f"{i:>6}  {s:<8}  {3 if s == 'triplet' else 1:>6}  {e:>14.6f}  {e - e0:>14.6f}  {unc}")
    unc = (f" +- {pair.exchange_uncertainty:.2g} {u}" if np.isfinite(pair.exchange_uncertainty)
           else " (no uncertainty estimate)")
    lines.append(f"exchange J = E(lowest triplet) - E(lowest singlet) = {pair.exchange:.6g} {u}{unc}")
    lines.append(f"basis: {pair.stop_reason}")
    if pair.zeeman_splitting is not None:
        lines.append(f"Zeeman splitting of the triplet (S_z = -1, 0, +1): {pair.zeeman_splitting:.6g} {u} per step")
    lines.extend(f"note: {n}" for n in pair.notes)
    return "\n".join(lines)
