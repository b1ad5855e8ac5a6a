"""Figure sheets: multi-panel figures of a solved project, for slides and papers.

A sheet is made in two steps, so that it can be drawn again without solving again:

1. :func:`build_sheet` takes a solved project (:class:`core.study.StudyResult`) and, if
   given, a sweep (``core.sweep.SweepResult``), and extracts the exact values to plot
   into a :class:`Sheet`: float64 arrays and plain numbers, with the unit in every label.
2. :func:`render_sheet` draws a Sheet into a PNG, PDF or SVG file with matplotlib's own
   Agg, PDF and SVG canvases (never a GUI backend); :func:`save_sheet` does the same and
   also writes ``NAME.sheet.json`` beside the figure: the project, the caption and every
   plotted value.  :func:`load_sheet` reads that file back (plain JSON, validated), and
   drawing the loaded sheet plots exactly the same numbers.

Panels (``kind``)
-----------------
``potential``  the potential map (2D; a plane through the potential minimum in 3D) with
               gate outlines, equipotential contours and a scale bar.
``cut``        a line cut of the potential through its minimum, with the levels drawn over
               the classically allowed part of the cut.
``state``      |psi|^2 (default) or the signed wavefunction of one level, titled with its
               energy, its multiplet and its mirror parities.  In 3D: the density
               projected along z (default) or a slice through the state's maximum.
``levels``     the level diagram; levels closer than the eye can separate are drawn side
               by side, exact multiplets marked with their degeneracy.
``fan``        the level fan of a sweep, anticrossings annotated with their gap.

Layouts are panel names joined by ``+`` (``statesN`` means N state panels), filled row by
row into a grid: e.g. ``"potential+states4+levels"`` (the default), ``"fan"``, ``"states6"``.
Templates fix the page: ``slide`` (16:9, 13.33 x 7.5 in), ``column`` (86 mm wide) and
``double`` (178 mm wide).  Images are drawn with ``interpolation="none"``, so PDF and SVG
embed them at the grid's own resolution and everything else stays vector.

Arrays are indexed ``[x, y]`` like every grid array in Wellscape.
"""
from __future__ import annotations

import dataclasses
import hashlib
import json
import math
import os
import re
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from .atomic import atomic_write
from .convergence import MARKS, NOT_RESOLVED, RESOLVED
from .errors import InputError

__all__ = ["Sheet", "Template", "TEMPLATES", "LAYOUTS", "DEFAULT_LAYOUT", "DEFAULT_SWEEP_LAYOUT",
           "SHEET_FORMAT", "parse_layout", "build_sheet", "sheet_figure", "render_sheet", "save_sheet",
           "load_sheet", "sheet_to_dict", "sheet_from_dict", "sheet_json_path", "project_hash",
           "caption_lines", "short_caption", "FIGURE_FORMATS", "convergence_order_text"]

SHEET_FORMAT = "wellscape-figure-sheet"
SHEET_FORMAT_VERSION = 1
FIGURE_FORMATS = ("png", "pdf", "svg")
MAX_SHEET_BYTES = 512 * 2**20
MAX_PANELS = 24
MAX_ARRAY_POINTS = 4096 * 4096

_MM = 1.0 / 25.4


@dataclass(frozen=True)
class Template:
    """Page size and type sizes of a sheet. ``height_in`` None: the height follows the rows."""

    name: str
    width_in: float
    height_in: float | None
    font_pt: float
    title_pt: float
    caption_pt: float
    suptitle_pt: float
    line_width: float
    max_columns: int
    description: str


TEMPLATES = {
    "slide": Template("slide", 40.0 / 3.0, 7.5, 13.0, 13.5, 8.5, 18.0, 1.6, 4,
                      "a 16:9 slide, 13.33 x 7.5 in; type for a projector"),
    "column": Template("column", 86.0 * _MM, None, 7.0, 7.0, 5.5, 8.0, 0.8, 2,
                       "one journal column, 86 mm wide"),
    "double": Template("double", 178.0 * _MM, None, 8.0, 8.0, 6.0, 9.0, 0.9, 4,
                       "two journal columns, 178 mm wide"),
}

DEFAULT_LAYOUT = "potential+states4+levels"
DEFAULT_SWEEP_LAYOUT = "potential+states2+fan"
LAYOUTS = {
    "potential+states4+levels": "the potential, the four lowest states and the level diagram (default)",
    "potential+states2+fan": "the potential, two states and the sweep fan (default with a sweep)",
    "potential+cut+levels": "the potential map, a line cut with the levels, and the level diagram",
    "states6": "the six lowest states",
    "fan": "the sweep fan alone",
    "fan+levels": "the sweep fan and the level diagram",
}
_TOKENS = ("potential", "cut", "levels", "fan", "states")
WAVEFUNCTION_MODES = ("density", "signed")
THREE_D_MODES = ("projection", "slice")


@dataclass(frozen=True, eq=False)
class Sheet:
    """Everything a figure sheet plots, as plain data.

    ``panels`` is a tuple of dicts (``kind``, ``title``, labels with units, float64
    arrays); ``caption`` the caption lines; ``project`` the project document (JSON dict,
    parameters as solved) and ``project_hash`` its short hash.
    """

    panels: tuple
    caption: tuple
    layout: str
    template: str = "slide"
    columns: int | None = None
    title: str = ""
    units: dict = dataclasses.field(default_factory=dict)
    project: dict | None = None
    project_hash: str = ""
    wellscape_version: str = ""

    def single_panel(self, index: int) -> Sheet:
        """A sheet of panel ``index`` alone, with the same caption (to export one view)."""
        if not isinstance(index, (int, np.integer)) or not 0 <= int(index) < len(self.panels):
            raise InputError(f"panel {index!r}: the sheet has panels 0–{len(self.panels) - 1}")
        p = self.panels[int(index)]
        return dataclasses.replace(self, panels=(p,), layout=p["kind"], columns=None)

    def with_options(self, **changes) -> Sheet:
        """A copy with other ``template``, ``columns`` or ``title`` (the plotted values stay)."""
        allowed = {"template", "columns", "title"}
        bad = set(changes) - allowed
        if bad:
            raise InputError(f"a sheet's {', '.join(sorted(bad))} cannot be changed after it is built; "
                             f"change {', '.join(sorted(allowed))} or build a new sheet")
        if "template" in changes:
            _template(changes["template"])
        if "columns" in changes:
            changes["columns"] = _columns(changes["columns"])
        return dataclasses.replace(self, **changes)


# --- layouts, units, small helpers ---------------------------------------------------------------

def parse_layout(layout: str) -> list:
    """``"potential+states4+levels"`` -> ``[("potential", 1), ("states", 4), ("levels", 1)]``.

    ``states`` without a number means 4 states (or the states asked for).
    """
    if not isinstance(layout, str) or not layout.strip():
        raise InputError(f"layout: expected panel names joined by '+', e.g. {DEFAULT_LAYOUT!r}")
    out = []
    for raw in layout.split("+"):
        tok = raw.strip().lower()
        m = re.fullmatch(r"(potential|cut|levels|fan|states)(\d*)", tok)
        if not m:
            raise InputError(f"layout {layout!r}: unknown panel {raw.strip()!r}; panels are "
                             f"{', '.join(_TOKENS)} (statesN for N states), joined by '+'")
        name, num = m.group(1), m.group(2)
        if num and name != "states":
            raise InputError(f"layout {layout!r}: only 'states' takes a count ({raw.strip()!r})")
        count = int(num) if num else (0 if name == "states" else 1)
        if name == "states" and num and not 1 <= count <= 16:
            raise InputError(f"layout {layout!r}: {raw.strip()!r} asks for {count} states; use 1 to 16")
        out.append((name, count))
    return out


def _template(name) -> Template:
    if isinstance(name, Template):
        return name
    try:
        return TEMPLATES[str(name)]
    except KeyError:
        raise InputError(f"unknown template {name!r}; choose one of {', '.join(TEMPLATES)}") from None


def _columns(columns) -> int | None:
    if columns is None:
        return None
    if isinstance(columns, bool) or not isinstance(columns, (int, np.integer)) or not 1 <= int(columns) <= 8:
        raise InputError(f"columns: expected a whole number from 1 to 8, got {columns!r}")
    return int(columns)




def _pretty_unit(unit: str) -> str:
    from .formatting import pretty_unit
    return pretty_unit(unit) if unit != "1" else unit


def _label(name: str, unit: str) -> str:
    """Axis label with its unit: ``x [nm]``; ``x (dimensionless)`` for the dimensionless system."""
    if unit in ("", "1"):
        return f"{name} (dimensionless)"
    return f"{name} [{_pretty_unit(unit)}]"


def _power_label(name: str, unit: str, power: str) -> str:
    """``|psi|^2 [nm^-2]`` with a superscript power (mathtext)."""
    if unit in ("", "1"):
        return f"{name} (dimensionless)"
    return f"{name} [{_pretty_unit(unit)}$^{{{power}}}$]"


def _nice_length(span: float) -> float:
    """The round length (1, 2 or 5 times a power of ten) nearest to a quarter of ``span``."""
    target = span / 4.0
    if not target > 0:
        return 0.0
    exp = math.floor(math.log10(target))
    options = [m * 10.0 ** e for e in (exp, exp + 1) for m in (1.0, 2.0, 5.0)]
    return min(options, key=lambda v: abs(math.log(v / target)))


def _fmt_len(value: float) -> str:
    return f"{value:g}"


def _decimals(energies: np.ndarray, *, ignore_below: float = 0.0) -> int:
    """Decimals that show the smallest spacing of ``energies`` (ignoring spacings below
    ``ignore_below`` times the whole span) with two to three digits; 1 to 6 decimals."""
    e = np.unique(np.round(np.asarray(energies, dtype=float), 12))
    if e.size < 2:
        return 3
    d = np.diff(e)
    scale = max(float(np.abs(e).max()), 1e-300)
    d = d[d > max(1e-9 * scale, ignore_below * float(e[-1] - e[0]))]
    if d.size == 0:
        return 3
    return int(min(6, max(1, math.ceil(-math.log10(float(d.min()))) + 2)))


def _span_text(members: Sequence[int]) -> str:
    members = list(members)
    return f"{members[0]}" if len(members) == 1 else f"{members[0]}–{members[-1]}"


_MULT_NAMES = {2: "doublet", 3: "triplet", 4: "quartet"}


# --- hashing and the caption ---------------------------------------------------------------

def project_hash(project_doc: dict, extra: dict | None = None) -> str:
    """Short SHA-256 (12 hex digits) of a project document (canonical JSON) and ``extra``."""
    payload = {"project": project_doc}
    if extra:
        payload["extra"] = extra
    text = json.dumps(payload, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:12]


def _project_doc(project, parameters: dict | None = None) -> dict:
    from .project import project_to_dict
    if parameters:
        project = dataclasses.replace(project, parameters={k: float(v) for k, v in parameters.items()})
    return project_to_dict(project)


def _map_file_hashes(project) -> dict:
    """SHA-256 of every map file the project reads, so the hash covers imported data too."""
    from .provenance import map_file_hashes
    return map_file_hashes(project)


_SCHEME_NAMES = {"spectral": "spectral (sinc-DVR)", "fd2": "fd2 (2nd-order finite differences)",
                 "fd4": "fd4 (4th-order finite differences)", "fd6": "fd6 (6th-order finite differences)",
                 "fd8": "fd8 (8th-order finite differences)"}


def _num(v) -> str:
    return f"{float(v):.6g}"


def caption_lines(project, *, parameters: dict | None = None, result=None, sweep=None,
                  hash_text: str = "") -> list:
    """The caption of a sheet: material, grid, scheme, fields, units, version and project hash."""
    from . import __version__
    from .potentials import electric_field, magnetic_field, project_g_factor, project_masses, resolve_parameters
    from .units import get_units

    u = get_units(project.units)
    L, E = _pretty_unit(u.length_unit), _pretty_unit(u.energy_unit)
    params = dict(parameters) if parameters is not None else resolve_parameters(project)
    g = project.grid
    nd = g.ndim
    lines = [project.title]
    try:
        masses = project_masses(project, params)[:nd]
        gfac = project_g_factor(project, params)
    except Exception:  # noqa: BLE001 - the caption names what it can
        masses, gfac = (), None
    name = project.material.name or "custom material"
    if masses and len(set(masses)) == 1:
        mtext = f"m* = {_num(masses[0])} {_pretty_unit(u.mass_unit)}"
    elif masses:
        axes = ", ".join("xyz"[:nd])
        mtext = "m* = (" + ", ".join(_num(m) for m in masses) + f") {_pretty_unit(u.mass_unit)} along ({axes})"
    else:
        mtext = "m* unresolved"
    mat = f"Material: {name}, {mtext}" + (f", g* = {_num(gfac)}" if gfac is not None else "")
    box = " × ".join(f"[{_num(lo)}, {_num(hi)}]" for lo, hi in zip(g.lower, g.upper))
    bnd = g.boundary[0] if len(set(g.boundary)) == 1 else "/".join(g.boundary)
    grid_text = (f"Grid: {' × '.join(str(n) for n in g.points)} points on {box} {L}, spacing "
                 f"{', '.join(f'{h:.4g}' for h in g.spacing)} {L}, {bnd} boundaries")
    gate_text = _gate_caption(project, params)
    lines.append(f"{mat}.  {grid_text}." + (f"  Gates: {gate_text}." if gate_text else ""))
    parts = []
    if result is not None:
        spec = result.spectrum
        how = "chosen automatically" if project.solver.scheme == "auto" else "set in the project"
        parts.append(f"Kinetic scheme: {_SCHEME_NAMES.get(result.scheme, result.scheme)}, "
                     f"{how}; {spec.energies.size} levels solved, residuals ≤ {float(spec.residuals.max()):.1g} {E}")
    else:
        parts.append(f"Kinetic scheme: {project.solver.scheme} (solver setting)")
    ef = electric_field(project, params)[:max(nd, len(project.electric_field))] if project.electric_field else None
    bf = magnetic_field(project, params)
    fields = []
    if ef is not None and len(ef):
        fields.append(f"F = ({', '.join(_num(v) for v in ef)}) {_pretty_unit(u.field_unit)}")
    fields.append(f"B = ({', '.join(_num(v) for v in bf)}) {_pretty_unit(u.magnetic_unit)}")
    parts.append("Fields: " + ", ".join(fields))
    if params:
        parts.append("Parameters: " + ", ".join(f"{k} = {_num(v)}" for k, v in params.items()))
    lines.append(".  ".join(parts) + ".")
    extra = []
    if sweep is not None:
        vals = np.asarray(sweep.values, dtype=float)
        extra.append(f"Sweep: {sweep.parameter} from {_num(vals[0])} to {_num(vals[-1])} "
                     f"({vals.size} points)")
    extra.append(f"Units: lengths in {L}, energies in {E} ({u.name} unit system)")
    extra.append(f"Wellscape {__version__}, project hash {hash_text}" if hash_text else f"Wellscape {__version__}")
    extra.append("idealised effective-mass model, not a device specification")
    lines.append(".  ".join(extra) + ".")
    return lines


def _sentences(caption: Sequence[str]) -> list:
    """The sentences of the full caption record (lines after the title, split at ``".  "``)."""
    out = []
    for line in caption[1:]:
        out.extend(part.strip().rstrip(".") for part in line.split(".  ") if part.strip())
    return out


def short_caption(caption: Sequence[str], *, with_title: bool = True) -> str:
    """The caption drawn on a sheet, compact like a journal's: title, material, grid, scheme, fields,
    sweep and project hash, from the full record ``caption`` (which the sheet file keeps whole)."""
    words = {"Material": "", "Grid": "", "Kinetic scheme": "", "Fields": "", "Sweep": "", "hash": "", "Levels": ""}
    keep = []        # sentences the sheet must show whole: panels from two project states, marks' keys
    for s in _sentences(caption):
        if s.startswith(_CAPTION_KEEP):
            keep.append(s)
            continue
        head = s.split(":", 1)[0]
        if s.startswith("Levels checked on ") and not words["Levels"]:
            words["Levels"] = s[len("Levels checked on "):].split(" (")[0].split(":")[0]
        elif head in words and not words[head]:
            words[head] = s.split(":", 1)[1].strip()
        elif "project hash" in s:
            words["hash"] = s.rsplit("project hash", 1)[1].strip()
    grid = re.match(r"(.*?) points on .*?, spacing (.*?), (\S+) boundaries", words["Grid"])
    parts = []
    if words["Material"]:
        parts.append(words["Material"])
    if grid:
        parts.append(f"grid {grid.group(1)}, spacing {grid.group(2)}, {grid.group(3)} boundaries")
    if words["Kinetic scheme"]:
        parts.append(words["Kinetic scheme"].split(",")[0].split(";")[0] + " kinetic scheme")
    if words["Fields"]:
        parts.append(words["Fields"])
    if words["Sweep"]:
        parts.append("sweep " + words["Sweep"])
    if words["hash"]:
        parts.append(f"project {words['hash']} (full record in the .sheet.json)")
    text = "; ".join(parts) + "." if parts else ""
    if words["Levels"]:
        text += (f" Levels checked on {words['Levels']}: {MARKS[RESOLVED]} resolved, {MARKS[NOT_RESOLVED]} "
                 f"not resolved; bars: grid error.")
    for s in keep:
        text += f" {s}."
    if with_title and caption and caption[0]:
        text = f"{caption[0]}. {text}"
    return text


_CAPTION_KEEP = ("Panels from two project states", "▲")


def _gate_caption(project, params) -> str:
    """``west, east -0.25 V; plunger 0.05 V``: gate voltages, gates at one voltage together."""
    from .potentials import gate_list
    from .project import GatesTerm
    by_volt: dict = {}
    for i, term in enumerate(project.potential):
        if isinstance(term, GatesTerm) and term.enabled:
            try:
                gates = gate_list(term, params, f"potential[{i}]")
            except InputError:
                continue
            for g in gates:
                by_volt.setdefault(float(g.voltage), []).append(g.label or "unnamed")
    return "; ".join(f"{', '.join(names)} {_num(v)} V" for v, names in by_volt.items())


# --- panel data ------------------------------------------------------------------------------

def _plane_of(result) -> tuple:
    """(potential on the xy plane, plane text): in 3D the plane through the ground state's
    largest density (where the confinement acts), in 2D the potential as is."""
    v = np.asarray(result.potential, dtype=float)
    grid = result.grid
    if grid.ndim == 2:
        return v, ""
    psi0 = np.abs(np.asarray(result.states[0])) ** 2
    iz = int(np.unravel_index(np.argmax(psi0), psi0.shape)[2])
    z = float(grid.axes[2][iz])
    L = _pretty_unit(result.units.length_unit)
    return v[:, :, iz].copy(), f"z = {z:.3g} {L}"


def _colour_top(vmin: float, vmax: float, energies: np.ndarray) -> float:
    """Top of the potential's colour scale: the full range, unless the walls rise far above
    the computed levels; then the scale stops at twice the levels' height above the bottom
    (the colour bar marks the values beyond with an arrow)."""
    if energies.size == 0:
        return vmax
    top = float(energies.max()) + 2.0 * max(float(energies.max()) - vmin, 0.0)
    return vmax if top >= vmax or top <= vmin else top


def _gates(result) -> list:
    from .potentials import gate_list
    from .project import GatesTerm
    out = []
    for i, term in enumerate(result.project.potential):
        if isinstance(term, GatesTerm) and term.enabled:
            for gate in gate_list(term, result.parameters, f"potential[{i}]"):
                out.append({"label": gate.label, "voltage": float(gate.voltage),
                            "vertices": np.asarray(gate.vertices, dtype=float)})
    return out


def _potential_panel(result) -> dict:
    if result.grid.ndim == 1:
        p = _cut_panel(result)
        p["title"] = "Potential and levels"
        return p
    u = result.units
    vals, plane = _plane_of(result)
    x, y = (np.asarray(a, dtype=float) for a in result.grid.axes[:2])
    from matplotlib.ticker import MaxNLocator
    lo, hi = float(vals.min()), float(vals.max())
    top = _colour_top(lo, hi, np.asarray(result.energies, dtype=float))
    contours = np.array([], dtype=float)
    if top > lo:
        ticks = MaxNLocator(nbins=8).tick_values(lo, top)
        contours = np.asarray([t for t in ticks if lo < t < top], dtype=float)
    span = min(x[-1] - x[0], y[-1] - y[0])
    return {"kind": "potential", "title": "Potential" + (f" at {plane}" if plane else ""),
            "x": x, "y": y, "values": np.ascontiguousarray(vals, dtype=float),
            "x_label": _label("x", u.length_unit), "y_label": _label("y", u.length_unit),
            "value_label": _label("V", u.energy_unit), "contours": contours, "colour_range": np.array([lo, top]),
            "gates": _gates(result) if result.grid.ndim == 2 else [],
            "scale_bar": float(_nice_length(span)), "length_unit": _pretty_unit(u.length_unit)}


def _cut_panel(result) -> dict:
    u = result.units
    grid = result.grid
    v = np.asarray(result.potential, dtype=float)
    L = _pretty_unit(u.length_unit)
    if grid.ndim == 1:
        s, cut, through = grid.axes[0], v, ""
    else:
        idx = np.unravel_index(np.argmin(v), v.shape)
        sl = (slice(None),) + tuple(int(i) for i in idx[1:])
        cut = v[sl]
        s = grid.axes[0]
        through = ", ".join(f"{a} = {float(grid.axes[k][idx[k]]):.3g} {L}"
                            for k, a in enumerate("xyz"[: grid.ndim]) if k > 0)
    e = np.asarray(result.energies, dtype=float)
    vmin = float(cut.min())
    top = float(e.max())
    span = max(top - vmin, 1e-12 * max(1.0, abs(top)))
    ylim = [vmin - 0.08 * span, min(float(cut.max()), top + 0.45 * span)]
    if ylim[1] <= top:
        ylim[1] = top + 0.1 * span
    title = "Line cut along x" + (f" at {through}" if through else "")
    return {"kind": "cut", "title": title, "s": np.asarray(s, dtype=float), "values": np.asarray(cut, dtype=float),
            "energies": e, "groups": [list(g) for g in result.groups], "ylim": np.asarray(ylim, dtype=float),
            "x_label": _label("x", u.length_unit), "y_label": _label("E, V", u.energy_unit)}


def _state_arrays(result, level: int, mode: str, three_d: str) -> tuple:
    """(values on a 1D line or xy plane, mode actually used, plane text, value label)."""
    grid = result.grid
    u = result.units
    L = u.length_unit
    psi = np.asarray(result.states[level])
    note = ""
    if mode == "signed":
        if np.iscomplexobj(psi):
            k = np.argmax(np.abs(psi))
            phase = psi.flat[k] / abs(psi.flat[k])
            psi = psi / phase
            imag = float(np.linalg.norm(psi.imag)) / max(float(np.linalg.norm(psi)), 1e-300)
            if imag > 1e-3:
                mode, note = "density", "complex ψ: |ψ|² shown"
            psi = psi.real
        if mode == "signed":
            k = np.argmax(np.abs(psi))
            if psi.flat[k] < 0:
                psi = -psi
    nd = grid.ndim
    if mode == "density":
        rho = np.abs(psi) ** 2
        if nd == 3 and three_d == "projection":
            vals = rho.sum(axis=2) * grid.spacing[2]
            return vals, mode, "", _power_label("∫|ψ|²dz", L, "-2"), note
        if nd == 3:
            iz = int(np.unravel_index(np.argmax(rho), rho.shape)[2])
            return (rho[:, :, iz], mode, f"z = {float(grid.axes[2][iz]):.3g} {_pretty_unit(L)}",
                    _power_label("|ψ|²", L, "-3"), note)
        return rho, mode, "", _power_label("|ψ|²", L, f"-{nd}"), note
    power = {1: "-1/2", 2: "-1", 3: "-3/2"}[nd]
    if nd == 3:
        iz = int(np.unravel_index(np.argmax(np.abs(psi)), psi.shape)[2])
        return (psi[:, :, iz], mode, f"z = {float(grid.axes[2][iz]):.3g} {_pretty_unit(L)}",
                _power_label("ψ", L, power), note)
    return psi, mode, "", _power_label("ψ", L, power), note


_CROP_ASPECT = 2.0    # the flattest window a state panel is cropped to
_CROP_TAIL = 0.0005   # |psi|^2 left outside a state panel on each side of each axis (99.9 % shown)


def _crop_window(arrays: list, grid, flattest: float = _CROP_ASPECT) -> tuple:
    """Index ranges (i0, i1, j0, j1) holding every shown state, with a margin, no flatter than 2 : 1.

    Each state contributes the box that holds 99.9 % of its |psi|^2 (0.05 % cut from each side
    of each axis's marginal distribution); the window is the union of these boxes, padded."""
    nx, ny = arrays[0].shape
    lo_i, hi_i, lo_j, hi_j = nx, -1, ny, -1
    for a in arrays:
        dens = np.abs(a) ** 2 if np.any(a < 0) else np.abs(a)   # signed psi: crop on |psi|^2
        total = float(dens.sum())
        if not total > 0:
            continue
        for axis, _ in ((1, (0, 0)), (0, (0, 0))):
            cum = np.cumsum(dens.sum(axis=axis)) / total
            first = int(np.searchsorted(cum, _CROP_TAIL))
            last = int(np.searchsorted(cum, 1.0 - _CROP_TAIL))
            if axis == 1:
                lo_i, hi_i = min(lo_i, first), max(hi_i, min(last, nx - 1))
            else:
                lo_j, hi_j = min(lo_j, first), max(hi_j, min(last, ny - 1))
    if hi_i < lo_i or hi_j < lo_j:
        return 0, nx, 0, ny
    ii, jj = np.array([lo_i, hi_i]), np.array([lo_j, hi_j])
    hx, hy = grid.spacing[0], grid.spacing[1]
    cx, cy = 0.5 * (ii[0] + ii[-1]), 0.5 * (jj[0] + jj[-1])
    half_x = (ii[-1] - ii[0]) * hx * 0.5 * 1.15 + 2 * max(hx, hy)
    half_y = (jj[-1] - jj[0]) * hy * 0.5 * 1.15 + 2 * max(hx, hy)
    # follow the density's shape, but no flatter than _CROP_ASPECT : 1 (a strip hides the state's shape)
    half_x, half_y = max(half_x, half_y / flattest), max(half_y, half_x / flattest)
    i0 = max(0, int(math.floor(cx - half_x / hx)))
    i1 = min(nx, int(math.ceil(cx + half_x / hx)) + 1)
    j0 = max(0, int(math.floor(cy - half_y / hy)))
    j1 = min(ny, int(math.ceil(cy + half_y / hy)) + 1)
    return i0, i1, j0, j1


def _state_panels(result, levels: Sequence[int], mode: str, three_d: str, crop: bool,
                  flattest: float = _CROP_ASPECT) -> list:
    from .analysis import mirror_parity, parity_label
    grid = result.grid
    u = result.units
    E = _pretty_unit(u.energy_unit)
    energies = np.asarray(result.energies, dtype=float)
    try:
        par = mirror_parity(grid, result.states[list(levels)], result.potential)
    except Exception:  # noqa: BLE001 - parity is a label, never a reason to fail a figure
        par = [dict() for _ in levels]
    group_of = {i: tuple(g) for g in result.groups for i in g}
    means = {g: float(np.mean(energies[list(g)])) for g in {group_of.get(lv, (lv,)) for lv in levels}}
    dec = _decimals(np.array(sorted(means.values())) if len(means) > 1
                    else np.array([float(np.mean(energies[list(g)])) for g in result.groups]))
    raw = [_state_arrays(result, lv, mode, three_d) for lv in levels]
    window = None
    if grid.ndim >= 2 and crop:
        window = _crop_window([r[0] for r in raw], grid, flattest)
    panels = []
    for lv, (vals, used, plane, vlabel, note), p in zip(levels, raw, par):
        grp = group_of.get(lv, (lv,))
        line2 = []
        if len(grp) > 1:
            line2.append(f"{_MULT_NAMES.get(len(grp), f'{len(grp)}-fold')} {_span_text(grp)}")
        lab = parity_label(p) if p and all(v != 0 for v in p.values()) else ""
        if lab:
            line2.append(lab)
        if plane:
            line2.append(plane)
        if note:
            line2.append(note)
        title = f"E$_{{{lv}}}$ = {energies[lv]:.{dec}f} {E}" + ("\n" + ", ".join(line2) if line2 else "")
        panel = {"kind": "state", "title": title, "level": int(lv), "energy": float(energies[lv]),
                 "mode": used, "value_label": vlabel, "x_label": _label("x", u.length_unit)}
        if grid.ndim == 1:
            panel.update({"s": np.asarray(grid.axes[0], dtype=float), "values": np.asarray(vals, dtype=float)})
        else:
            x, y = (np.asarray(a, dtype=float) for a in grid.axes[:2])
            i0, i1, j0, j1 = window if window else (0, x.size, 0, y.size)
            panel.update({"x": x[i0:i1], "y": y[j0:j1],
                          "values": np.ascontiguousarray(vals[i0:i1, j0:j1], dtype=float),
                          "y_label": _label("y", u.length_unit)})
        panels.append(panel)
    return panels


def _levels_panel(result, highlight: Sequence[int], convergence=None) -> dict:
    """The level diagram's data.  With ``convergence`` (a :class:`core.convergence.ConvergenceReport`
    of the same project), the levels are grouped with the tolerance built from its error estimates,
    and every splitting between levels it describes carries its verdict (resolved or not) and each
    level its estimated grid error."""
    u = result.units
    e = np.asarray(result.energies, dtype=float)
    groups = [list(g) for g in result.groups]
    panel = {"kind": "levels", "title": "Levels", "energies": e, "groups": groups,
             "highlight": [int(i) for i in highlight],
             "y_label": _label("E", u.energy_unit), "energy_unit": _pretty_unit(u.energy_unit)}
    if convergence is not None:
        from .convergence import default_degeneracy_tolerance
        from .eigensolve import group_levels
        from .provenance import result_fingerprint
        if result_fingerprint(convergence.reference) != result_fingerprint(result):
            raise InputError("the convergence check was made for another project (or other parameter values) "
                             "than the solve: check convergence again")
        errors, splittings = convergence.on_levels(e, result.spectrum.degeneracy_tolerance)
        tol = float(default_degeneracy_tolerance(convergence))
        if tol > 0:
            groups = [list(g) for g in group_levels(e, tol)]
            panel["groups"] = groups
        panel["errors"] = errors
        panel["splittings"] = [{"lower": int(sp.lower), "upper": int(sp.upper), "resolved": bool(sp.resolved)}
                               for sp in splittings]
        from .convergence_report import summary_words
        words = summary_words(convergence, splittings)
        panel["check"] = f"convergence checked on {len(convergence.grids)} grids: {words}"
    panel["decimals"] = _decimals(np.array([float(np.mean(e[g])) for g in groups]), ignore_below=0.01)
    try:
        from .bound import box_states
        panel["box_states"] = [i for i, f in enumerate(box_states(result)) if f["box"]]
    except (InputError, ValueError, np.linalg.LinAlgError):
        pass                           # a flag is never a reason to fail a figure
    return panel


def _coarse_words(report) -> list:
    from .convergence_report import coarse_words
    return coarse_words(report)


def convergence_order_text(report) -> str:
    """How a convergence check extrapolated, in a few words (for captions and status lines)."""
    from .convergence_report import order_words
    if not np.isfinite(report.expected_order):
        return f"{order_words(report)}: the finest grid's energies, the change from the next grid as their error"
    return f"Richardson extrapolation, {order_words(report)}"


def _fan_panel(sweep, parameter_unit: str | None) -> dict:
    from .units import get_units
    values = np.asarray(sweep.values, dtype=float).ravel()
    if values.size < 2:
        raise InputError("a sweep fan needs at least two sweep points")
    if hasattr(sweep, "track_energies"):
        tracks = np.asarray(sweep.track_energies(), dtype=float)
    else:
        tracks = np.asarray(sweep.energies, dtype=float).T
    if tracks.ndim != 2 or tracks.shape[1] != values.size:
        raise InputError(f"sweep tracks have shape {tracks.shape}, expected (tracks, {values.size})")
    units = sweep.units if not isinstance(getattr(sweep, "units", None), str) else get_units(sweep.units)
    if units is None:
        units = get_units(sweep.project.units)
    E = _pretty_unit(units.energy_unit)
    if parameter_unit is None:
        from .export import parameter_unit as _unit_of
        parameter_unit = _unit_of(sweep)
    unit = parameter_unit
    acs = []
    for ac in getattr(sweep, "anticrossings", None) or ():
        a, b = (int(t) for t in ac.tracks)
        if not (0 <= a < tracks.shape[0] and 0 <= b < tracks.shape[0]):
            continue
        at = float(ac.at)
        ea = _interp(values, tracks[a], at)
        eb = _interp(values, tracks[b], at)
        if not (np.isfinite(ea) and np.isfinite(eb)):
            continue
        entry = {"at": at, "gap": float(ac.gap), "tracks": [a, b], "kind": str(getattr(ac, "kind", "anticrossing")),
                 "centre": 0.5 * (ea + eb)}
        if hasattr(ac, "gap_text"):            # the sweep's own words (value ± uncertainty, or a bound)
            entry["text"] = ac.gap_text(units.energy_unit)
        acs.append(entry)
    name = str(sweep.parameter)
    label = f"{name} [{_pretty_unit(unit)}]" if unit else name
    title = f"Levels against {name}"
    return {"kind": "fan", "title": title, "values": values, "tracks": tracks, "anticrossings": acs,
            "x_label": label, "y_label": _label("E", units.energy_unit), "energy_unit": E,
            "parameter": name}


def _interp(x: np.ndarray, y: np.ndarray, at: float) -> float:
    ok = np.isfinite(y)
    if ok.sum() < 1:
        return float("nan")
    xs, ys = x[ok], y[ok]
    order = np.argsort(xs)
    return float(np.interp(at, xs[order], ys[order]))


MIXED_STATES = ("refuse", "name")


def _panel_states(panels: list, result, sweep, mixed_states: str) -> str:
    """Record in each panel the project state its data came from (:mod:`core.provenance`); refuse a
    sheet whose fan and solve come from different states (``mixed_states="refuse"``) or name both.
    Returns the caption line that names the state(s)."""
    from .provenance import project_fingerprint_for_sweep, result_fingerprint, sweep_changes, sweep_fingerprint
    solved = result_fingerprint(result) if result is not None else ""
    swept = sweep_fingerprint(sweep) if sweep is not None and any(p["kind"] == "fan" for p in panels) else ""
    for p in panels:
        p["state"] = swept if p["kind"] == "fan" else solved
    if not (solved and swept):
        return f"Project state {solved or swept}: every panel."
    if project_fingerprint_for_sweep(result.project, str(sweep.parameter), parameters=result.parameters) == swept:
        return f"Project state {solved}: every panel (the fan sweeps {sweep.parameter} from it)."
    diff = ", ".join(sweep_changes(sweep, result.project, parameters=result.parameters)) or "the project"
    if mixed_states == "refuse":
        raise InputError(f"the panels come from different project states: the sweep of {sweep.parameter} ran on "
                         f"state {swept}, the solve is of state {solved} (solved with {diff}). Sweep and solve the "
                         f"same project, or allow mixed states (the caption then names both)")
    return (f"Panels from two project states: the fan from state {swept} (a sweep of {sweep.parameter}); every "
            f"other panel from state {solved}, which differs by {diff}.")


def build_sheet(result=None, *, sweep=None, layout: str | None = None, template: str = "slide",
                states: Sequence[int] | None = None, wavefunction: str = "density",
                three_d: str = "projection", columns: int | None = None, crop: bool = True,
                parameter_unit: str | None = None, title: str | None = None,
                convergence=None, mixed_states: str = "refuse") -> Sheet:
    """Extract what a figure sheet plots from a solve (and a sweep) into a :class:`Sheet`.

    ``result`` is a :class:`core.study.StudyResult` (needed by every panel but ``fan``);
    ``sweep`` a sweep result (``.parameter``, ``.values``, ``.track_energies()``,
    ``.anticrossings``, ``.project``, ``.units``), needed by ``fan``.  ``states`` lists
    the levels to show (default: the lowest N of the layout's ``statesN``).
    ``wavefunction`` is ``"density"`` (|psi|^2) or ``"signed"`` (psi with its nodes);
    ``three_d`` is ``"projection"`` (density summed along z) or ``"slice"``.
    ``crop`` zooms every state panel to the same window that holds all shown states.
    ``convergence`` (a :class:`core.convergence.ConvergenceReport` of the same project) marks every
    splitting of the level diagram as resolved or not, with error bars and a caption line.
    ``mixed_states``: a fan swept on another project state than the solve is refused (``"refuse"``)
    or drawn with both states named in the caption (``"name"``).
    """
    from . import __version__
    if mixed_states not in MIXED_STATES:
        raise InputError(f"mixed_states: expected one of {', '.join(MIXED_STATES)}, got {mixed_states!r}")
    if wavefunction not in WAVEFUNCTION_MODES:
        raise InputError(f"wavefunction: expected one of {', '.join(WAVEFUNCTION_MODES)}, got {wavefunction!r}")
    if three_d not in THREE_D_MODES:
        raise InputError(f"three_d: expected one of {', '.join(THREE_D_MODES)}, got {three_d!r}")
    tpl = _template(template)
    columns = _columns(columns)
    if layout is None:
        layout = DEFAULT_SWEEP_LAYOUT if (sweep is not None and result is not None) else (
            "fan" if result is None and sweep is not None else DEFAULT_LAYOUT)
    tokens = parse_layout(layout)
    names = [t for t, _ in tokens]
    if result is None and any(n != "fan" for n in names):
        raise InputError(f"layout {layout!r} shows a solved project; give a solve result (only 'fan' works "
                         f"from a sweep alone)")
    if "fan" in names and sweep is None:
        raise InputError(f"layout {layout!r} has a sweep fan; give a sweep (wellscape figure ... --sweep SWEEP.npz)")
    count = int(result.energies.size) if result is not None else 0
    if states is not None:
        try:
            chosen = [int(s) for s in states]
        except (TypeError, ValueError):
            raise InputError(f"states: expected level numbers, got {states!r}") from None
        if not chosen:
            raise InputError("states: the list is empty")
        for s in chosen:
            if s < 0:
                raise InputError(f"states: level numbers start at 0, got {s}")
            if s >= count:
                raise InputError(f"states: level {s} was not solved (the result holds levels 0–{count - 1}); "
                                 f"solve more states")
        if len(set(chosen)) != len(chosen):
            raise InputError(f"states: a level is listed twice in {chosen}")
    else:
        chosen = None
    panels: list = []
    shown: list = []
    state_requests = [c for t, c in tokens if t == "states"]
    next_level = 0
    for name, n in tokens:
        if name == "potential":
            panels.append(_potential_panel(result))
        elif name == "cut":
            panels.append(_cut_panel(result))
        elif name == "levels":
            panels.append(None)  # filled once the shown states are known
        elif name == "fan":
            panels.append(_fan_panel(sweep, parameter_unit))
        elif name == "states":
            if chosen is not None:
                if len(state_requests) > 1:
                    raise InputError("states: give the layout a single 'states' panel group when you list the states")
                levels = chosen
            else:
                want = n or 4
                levels = list(range(next_level, min(count, next_level + want)))
                if not levels:
                    raise InputError(f"layout {layout!r} asks for more states than were solved ({count})")
                next_level = levels[-1] + 1
            shown.extend(levels)
            # a slide's fixed height suits square state maps; a journal sheet's height follows them
            panels.extend(_state_panels(result, levels, wavefunction, three_d, crop,
                                        1.0 if tpl.height_in is not None else _CROP_ASPECT))
    for i, p in enumerate(panels):
        if p is None:
            panels[i] = _levels_panel(result, shown, convergence)
    if len(panels) > MAX_PANELS:
        raise InputError(f"layout {layout!r} makes {len(panels)} panels; a sheet holds at most {MAX_PANELS}")
    state_line = _panel_states(panels, result, sweep, mixed_states)
    if result is not None:
        project, params = result.project, dict(result.parameters)
    else:
        project, params = sweep.project, None
    doc = _project_doc(project, params)
    maps = _map_file_hashes(project)
    h = project_hash(doc, {"map_files": maps} if maps else None)
    caption = caption_lines(project, parameters=params, result=result, sweep=sweep, hash_text=h)
    caption.append(state_line)
    box_line = next((p for p in panels if p["kind"] == "levels" and p.get("box_states")), None)
    if box_line is not None:
        from .bound import BOX_STATE, BOX_STATE_HINT
        caption.append(f"▲ {BOX_STATE}: level{'s' if len(box_line['box_states']) > 1 else ''} "
                       f"{', '.join(str(i) for i in box_line['box_states'])} are held by the grid's walls, not by the "
                       f"potential; {BOX_STATE_HINT}.")
    if convergence is not None and any(p["kind"] == "levels" for p in panels):
        caption.append(f"Levels checked on {len(convergence.grids)} grids ({convergence_order_text(convergence)}): "
                       f"{MARKS[RESOLVED]} splitting larger than the combined "
                       f"error estimate of its two levels, {MARKS[NOT_RESOLVED]} within it; error bars: estimated grid "
                       f"error of each level."
                       + "".join(f" {line[0].upper()}{line[1:]}." for line in _coarse_words(convergence)))
    from .units import get_units
    u = get_units(project.units)
    if title is None:
        title = project.title if tpl.name == "slide" else ""
    return Sheet(panels=tuple(panels), caption=tuple(caption), layout=layout, template=tpl.name,
                 columns=columns, title=str(title),
                 units={"system": u.name, "length": u.length_unit, "energy": u.energy_unit},
                 project=doc, project_hash=h, wellscape_version=__version__)


# --- drawing ---------------------------------------------------------------------------------

_MAP_CMAP = "cividis"
_DENSITY_CMAP = "viridis"
_SIGNED_CMAP = "RdBu_r"


def _rc(t: Template) -> dict:
    return {"font.size": t.font_pt, "axes.titlesize": t.title_pt, "axes.labelsize": t.font_pt,
            "xtick.labelsize": t.font_pt * 0.9, "ytick.labelsize": t.font_pt * 0.9,
            "legend.fontsize": t.font_pt * 0.85, "lines.linewidth": t.line_width,
            "axes.linewidth": 0.6 * t.line_width + 0.2, "xtick.major.width": 0.5 * t.line_width + 0.2,
            "ytick.major.width": 0.5 * t.line_width + 0.2, "axes.titlepad": 0.35 * t.font_pt,
            "figure.facecolor": "white", "savefig.facecolor": "white", "pdf.fonttype": 42,
            "svg.hashsalt": "wellscape-sheet", "axes.formatter.useoffset": False,
            "axes.formatter.limits": (-4, 5), "image.origin": "lower"}


def _grid_shape(n: int, t: Template, columns: int | None) -> tuple:
    if columns:
        c = min(columns, n)
        return c, math.ceil(n / c)
    if t.height_in is None:
        r = math.ceil(n / min(n, t.max_columns))
        c = math.ceil(n / r)          # as few columns as give the same number of rows
        return c, r
    best = None
    for c in range(1, min(n, 6) + 1):
        r = math.ceil(n / c)
        aspect = (t.width_in / c) / (t.height_in * 0.82 / r)
        score = abs(math.log(aspect / 1.25)) + 0.15 * (r * c - n)
        if best is None or score < best[0]:
            best = (score, c, r)
    return best[1], best[2]


def _text_width_pt(text: str, size: float, weight: str = "normal") -> float:
    """Width of ``text`` set in the sheet's font at ``size`` points, measured from its glyph outlines."""
    from matplotlib.font_manager import FontProperties
    from matplotlib.textpath import TextPath
    if not text:
        return 0.0
    ext = TextPath((0, 0), text, size=size, prop=FontProperties(weight=weight)).get_extents()
    return float(ext.x1)


def _wrap_measured(text: str, size: float, width_pt: float, weight: str = "normal") -> list:
    """``text`` broken at spaces into lines no wider than ``width_pt`` (measured, not counted)."""
    out: list = []
    for words in (line.split(" ") for line in text.split("\n")):
        line = ""
        for w in words:
            trial = f"{line} {w}" if line else w
            if line and _text_width_pt(trial, size, weight) > width_pt:
                out.append(line)
                line = w
            else:
                line = trial
        out.append(line)
    return out


def _wrap_caption(lines: Sequence[str], t: Template) -> list:
    width = t.width_in * 72.0 * 0.90 - 2.0   # starts 0.8 % in; margin for the rendered (hinted) text being wider
    out = []
    for line in lines:
        out.extend(_wrap_measured(line, t.caption_pt, width) or [""])
    return out


def _extent(x: np.ndarray, y: np.ndarray) -> list:
    hx = (x[-1] - x[0]) / (x.size - 1) if x.size > 1 else 1.0
    hy = (y[-1] - y[0]) / (y.size - 1) if y.size > 1 else 1.0
    return [x[0] - hx / 2, x[-1] + hx / 2, y[0] - hy / 2, y[-1] + hy / 2]


def _outline(artist, width=2.0, color="black"):
    from matplotlib import patheffects
    artist.set_path_effects([patheffects.withStroke(linewidth=width, foreground=color)])
    return artist


def _draw_potential(fig, ax, p: dict, t: Template) -> None:
    from matplotlib.patches import Polygon
    x, y, v = p["x"], p["y"], p["values"]
    vmin, vmax = (float(c) for c in p["colour_range"])
    im = ax.imshow(v.T, origin="lower", extent=_extent(x, y), interpolation="none", cmap=_MAP_CMAP,
                   aspect="equal", vmin=vmin, vmax=vmax)
    if p["contours"].size:
        ax.contour(x, y, v.T, levels=p["contours"], colors="white", linewidths=0.45 * t.line_width, alpha=0.7)
    lo, hi = ax.get_xlim(), ax.get_ylim()
    for g in p["gates"]:
        poly = Polygon(g["vertices"], closed=True, fill=False, edgecolor="white", linewidth=1.1 * t.line_width,
                       linestyle="--")
        _outline(poly, 2.2 * t.line_width, "black")
        ax.add_patch(poly)
    ax.set_xlim(lo)
    ax.set_ylim(hi)
    if p["scale_bar"] > 0:
        _scale_bar(ax, p["scale_bar"], p["length_unit"], hi, t)
    ax.set_xlabel(p["x_label"])
    ax.set_ylabel(p["y_label"])
    capped = float(v.max()) > vmax
    cb = fig.colorbar(im, cax=_side_axes(ax), extend="max" if capped else "neither")
    unit = re.search(r"\[(.*)\]", p["value_label"])
    cb.set_label(p["value_label"] + (f"\nclipped above {vmax:.3g}" + (f" {unit.group(1)}" if unit else "")
                                     if capped else ""))
    ax._wellscape_colorbar = cb  # noqa: SLF001


def _keep_inside(fig, trim: list) -> bool:
    """Add to ``trim`` (inches off the layout's left, bottom, right, top) whatever the drawn panels
    reach past the figure's edges (the caption and sheet title excepted: they are placed outside the
    layout).  Returns whether anything had to be trimmed."""
    renderer = fig._get_renderer()  # noqa: SLF001
    w, h = fig.get_size_inches()
    boxes = [b for ax in fig.axes if ax.get_visible()
             for b in [ax.get_tightbbox(renderer)] if b is not None and b.width > 0]
    if not boxes:
        return False
    x0 = min(b.x0 for b in boxes) / fig.dpi
    y1 = max(b.y1 for b in boxes) / fig.dpi
    x1 = max(b.x1 for b in boxes) / fig.dpi
    over = [max(0.0, -x0), 0.0, max(0.0, x1 - w), max(0.0, y1 - h)]
    if max(over) <= 0.5 / fig.dpi:
        return False
    for i, o in enumerate(over):
        if o > 0:
            trim[i] += o + 1.0 / fig.dpi
    return True


def _clear_titles(fig, axes: list) -> bool:
    """Raise a panel title that runs into a tick label at the top of its own axes or of its colour bar
    (a title wider than its map reaches over the bar).  Returns whether a title moved (the layout must
    run again)."""
    fig.draw_without_rendering()     # colour bars place their ticks (and extension arrows) when drawn
    renderer = fig._get_renderer()  # noqa: SLF001
    moved = False
    for ax in axes:
        cb = getattr(ax, "_wellscape_colorbar", None)
        if not ax.get_title():
            continue
        title = ax.title.get_window_extent(renderer)
        need = 0.0
        labels = [(ax, lab) for lab in ax.get_yticklabels()]
        if cb is not None:
            labels += [(cb.ax, lab) for lab in cb.ax.get_yticklabels()]
        for owner, lab in labels:
            ylo, yhi = sorted(owner.get_ylim())
            if not ylo <= lab.get_position()[1] <= yhi:
                continue                    # a tick outside the view is not drawn
            if lab.get_text() and lab.get_visible():
                b = lab.get_window_extent(renderer)
                gap = 1.5 * fig.dpi / 72.0      # 1.5 pt clear
                if b.x1 > title.x0 and b.x0 < title.x1 and b.y1 + gap > title.y0:
                    need = max(need, b.y1 + gap - title.y0)
        if need > 0:
            import matplotlib
            pad = getattr(ax, "_wellscape_title_pad", float(matplotlib.rcParams["axes.titlepad"]))
            ax._wellscape_title_pad = pad + need * 72.0 / fig.dpi  # noqa: SLF001
            ax.set_title(ax.get_title(), pad=ax._wellscape_title_pad)  # noqa: SLF001
            moved = True
    return moved


def _scale_bar_clear_of_state(fig, ax, p: dict, t: Template) -> None:
    """Once the layout is fixed: move a state panel's scale bar to a corner where the state is faint
    (below 5 % of its colour scale), or leave it out (the axes carry the lengths too)."""
    bar = getattr(ax, "_wellscape_scale_bar", None)
    if bar is None or "x" not in p:
        return
    renderer = fig._get_renderer()  # noqa: SLF001
    v = np.abs(p["values"])
    top = float(v.max()) or 1.0
    x, y = p["x"], p["y"]
    args = ax._wellscape_scale_bar_args  # noqa: SLF001
    for loc in ("lower left", "lower right", "upper left", "upper right"):
        bar.remove()
        bar = _scale_bar(ax, *args, t, dark=ax._wellscape_scale_bar_dark, loc=loc)  # noqa: SLF001
        box = bar.get_window_extent(renderer)
        (x0, y0), (x1, y1) = ax.transData.inverted().transform([(box.x0, box.y0), (box.x1, box.y1)])
        ii = (x >= x0) & (x <= x1)
        jj = (y >= y0) & (y <= y1)
        if not ii.any() or not jj.any() or float(v[np.ix_(ii, jj)].max()) < 0.05 * top:
            return
    bar.remove()
    ax._wellscape_scale_bar = None  # noqa: SLF001


def _scale_bar(ax, length: float, unit: str, ylim, t: Template, *, dark: bool = False, loc: str = "lower left"):
    """A scale bar of ``length`` (data units) in a corner (``loc``), on a faint backing."""
    from matplotlib.font_manager import FontProperties
    from mpl_toolkits.axes_grid1.anchored_artists import AnchoredSizeBar
    colour = "white" if dark else "black"
    ax._wellscape_scale_bar_args = (length, unit, ylim)  # noqa: SLF001
    ax._wellscape_scale_bar_dark = dark  # noqa: SLF001
    bar = AnchoredSizeBar(ax.transData, length, f"{_fmt_len(length)} {unit}", loc, pad=0.3, sep=2,
                          color=colour, frameon=not dark, size_vertical=(ylim[1] - ylim[0]) * 0.012,
                          fontproperties=FontProperties(size=t.font_pt * 0.7))
    bar.patch.set_alpha(0.75)
    bar.patch.set_edgecolor("none")
    ax.add_artist(bar)
    ax._wellscape_scale_bar = bar  # noqa: SLF001
    return bar


def _fit_colorbar_labels(fig, axes: list, t: Template) -> None:
    """Shrink a colour bar's label (down to 72% of the type size) when it is longer than the bar."""
    renderer = fig._get_renderer()  # noqa: SLF001
    for ax in axes:
        cb = getattr(ax, "_wellscape_colorbar", None)
        if cb is None:
            continue
        label = cb.ax.yaxis.label
        label.set_fontsize(t.font_pt)
        size = t.font_pt
        for _ in range(8):
            need = label.get_window_extent(renderer).height
            have = cb.ax.get_window_extent(renderer).height * 0.98   # never above the bar (titles sit there)
            if need <= have or size <= 0.72 * t.font_pt:
                break
            size = max(0.72 * t.font_pt, size * have / need * 0.98)
            label.set_fontsize(size)


def _label_gates(fig, ax, p: dict, t: Template) -> None:
    """Name each gate (label and voltage) where the text fits inside the gate's visible part
    and clear of the scale bar; gates left unnamed keep their outline (the caption names
    every gate).  Runs once the layout is fixed."""
    if not p.get("gates"):
        return
    renderer = fig._get_renderer()  # noqa: SLF001
    lo, hi = ax.get_xlim(), ax.get_ylim()
    bar = getattr(ax, "_wellscape_scale_bar", None)
    avoid = [bar.get_window_extent(renderer)] if bar is not None else []
    for g in p["gates"]:
        vx = np.clip(g["vertices"][:, 0], *lo)
        vy = np.clip(g["vertices"][:, 1], *hi)
        if vx.max() - vx.min() <= 0 or vy.max() - vy.min() <= 0:
            continue
        txt = ax.text(0.5 * (vx.min() + vx.max()), 0.5 * (vy.min() + vy.max()),
                      f"{g['label']}\n{g['voltage']:g} V", ha="center", va="center", color="white",
                      fontsize=t.font_pt * 0.7, clip_on=True)
        _outline(txt, 1.8, "black")
        tb = txt.get_window_extent(renderer)
        (x0, y0), (x1, y1) = ax.transData.transform([(vx.min(), vy.min()), (vx.max(), vy.max())])
        fits = tb.x0 >= x0 and tb.x1 <= x1 and tb.y0 >= y0 and tb.y1 <= y1
        if not fits or any(tb.overlaps(b) for b in avoid):
            txt.remove()
        else:
            avoid.append(tb)


def _draw_state(fig, ax, p: dict, t: Template) -> None:
    v = p["values"]
    signed = p["mode"] == "signed"
    if "s" in p:
        ax.plot(p["s"], v, color="black")
        if signed:
            ax.axhline(0.0, color="0.5", linewidth=0.5 * t.line_width)
        ax.set_xlabel(p["x_label"])
        ax.set_ylabel(p["value_label"])
        ax.set_xlim(p["s"][0], p["s"][-1])
        return
    x, y = p["x"], p["y"]
    top, clipped = _percentile_top(np.abs(v))
    if signed:
        m = top or 1.0
        im = ax.imshow(v.T, origin="lower", extent=_extent(x, y), interpolation="none", cmap=_SIGNED_CMAP,
                       vmin=-m, vmax=m, aspect="equal")
        if v.min() < 0 < v.max():
            # nodal lines, where the state is not negligible (they show the sign pattern in grey too)
            masked = np.ma.masked_where(np.abs(v.T) < 1e-3 * m, v.T)
            ax.contour(x, y, masked, levels=[0.0], colors="black", linewidths=0.5 * t.line_width)
    else:
        im = ax.imshow(v.T, origin="lower", extent=_extent(x, y), interpolation="none", cmap=_DENSITY_CMAP,
                       vmin=0.0, vmax=top or None, aspect="equal")
    from matplotlib.ticker import MaxNLocator
    few = 3 if t.name == "column" else 4       # a small map: few ticks, so that their labels keep apart
    ax.xaxis.set_major_locator(MaxNLocator(nbins=few, min_n_ticks=2))
    ax.yaxis.set_major_locator(MaxNLocator(nbins=few, min_n_ticks=2))
    unit = re.search(r"\[(.*)\]", p["x_label"])
    ext = _extent(x, y)
    length = _nice_length(ext[1] - ext[0])
    if unit and length > 0:
        _scale_bar(ax, length, unit.group(1), ext[2:], t, dark=not signed)
    ax.set_xlabel(p["x_label"])
    ax.set_ylabel(p["y_label"])
    cb = fig.colorbar(im, cax=_side_axes(ax), extend=("both" if signed else "max") if clipped else "neither")
    _scaled_colorbar(cb, top, p["value_label"])
    if clipped:
        cb.set_label(cb.ax.yaxis.label.get_text() + f"\nclipped at the {_CLIP_PERCENTILE:g}th percentile")
    ax._wellscape_colorbar = cb  # noqa: SLF001


_CLIP_PERCENTILE = 99.5   # colour scale of a state: up to this percentile of the panel's values ...
_CLIP_FLOOR = 0.01        # (of the pixels above 1 % of the peak: the state, not the empty box around it)
_CLIP_KEEP = 0.9          # ... unless that is within 10 % of the peak: then the peak (nothing clipped)


def _percentile_top(a: np.ndarray) -> tuple:
    """``(top, clipped)``: the top of a colour scale for the values ``a`` (>= 0), chosen from the data.
    A few bright pixels (a sharp peak) would leave the rest of the state dark, so the scale ends at the
    99.5th percentile of the pixels where the state is (above 1 % of its peak), and says so, when that
    is well below the peak."""
    peak = float(np.max(a)) if a.size else 0.0
    if not peak > 0:
        return peak, False
    q = float(np.percentile(a[a >= _CLIP_FLOOR * peak], _CLIP_PERCENTILE))
    if q >= _CLIP_KEEP * peak or q <= 0:
        return peak, False
    return q, True


def _scaled_axis(axis, vmax: float, label: str) -> None:
    """Tick labels in units of a power of ten written into the axis label (``eps [10^-3 V]``)
    when the values are very small or very large; the plotted values are never rescaled."""
    from matplotlib.ticker import FuncFormatter, MaxNLocator
    axis.set_major_locator(MaxNLocator(nbins=6))
    k = int(math.floor(math.log10(vmax))) if vmax > 0 else 0
    if -2 <= k <= 3:
        axis.set_label_text(label)
        return
    k = 3 * math.floor(k / 3)
    scale = 10.0 ** k
    axis.set_major_formatter(FuncFormatter(lambda v, _pos: f"{v / scale:g}"))
    if "[" in label:
        axis.set_label_text(label.replace("[", f"[10$^{{{k}}}$ ", 1))
    else:
        axis.set_label_text(f"{label} [10$^{{{k}}}$]")


def _side_axes(ax):
    """An axes for a colour bar just right of ``ax``'s image, exactly as tall as the image."""
    return ax.inset_axes([1.04, 0.0, 0.06, 1.0])


def _scaled_colorbar(cb, vmax: float, label: str) -> None:
    """Colour-bar ticks in units of a power of ten written into the label (``[10^-4 nm^-2]``);
    the plotted values themselves are never rescaled."""
    from matplotlib.ticker import FuncFormatter
    k = int(math.floor(math.log10(vmax))) if vmax > 0 else 0
    if -2 <= k <= 3 or "[" not in label:
        cb.set_label(label)
        return
    scale = 10.0 ** k
    cb.formatter = FuncFormatter(lambda v, _pos: f"{v / scale:g}")
    cb.update_ticks()
    cb.set_label(label.replace("[", f"[10$^{{{k}}}$ ", 1))


def _draw_cut(fig, ax, p: dict, t: Template) -> None:
    s, v, e = p["s"], p["values"], p["energies"]
    ax.plot(s, v, color="black", linewidth=1.2 * t.line_width, zorder=3)
    cmap = _cmap(_DENSITY_CMAP)
    groups = p["groups"]
    for gi, g in enumerate(groups):
        en = float(np.mean(e[g]))
        colour = cmap(0.85 * gi / max(1, len(groups) - 1))
        # each level over the classically allowed stretches of the cut (V < E); over the
        # whole cut when the cut never dips below it (the level's energy is partly in the
        # motion across the cut)
        below = np.concatenate([[False], v < en, [False]])
        edges = np.flatnonzero(np.diff(below.astype(int)))
        runs = list(zip(edges[::2], edges[1::2] - 1)) or [(0, v.size - 1)]
        for a, b in runs:
            ax.plot([s[a], s[b]], [en, en], color=colour, linewidth=t.line_width, zorder=2)
        if len(g) > 1:
            ax.text(s[runs[-1][1]], en, f" ×{len(g)}", va="center", ha="left", fontsize=t.font_pt * 0.7,
                    color="black", clip_on=True)
    ax.set_xlim(s[0], s[-1])
    ax.set_ylim(*p["ylim"])
    ax.set_xlabel(p["x_label"])
    ax.set_ylabel(p["y_label"])


def _cmap(name):
    import matplotlib
    return matplotlib.colormaps[name]


def _spread(positions: Sequence[float], heights: Sequence[float]) -> list:
    """Move label centres apart so that neighbours do not overlap (each label ``heights[i]``
    tall), keeping their order and moving each as little as the others allow."""
    pos = [float(p) for p in positions]
    if len(pos) < 2:
        return pos
    for _ in range(300):
        moved = False
        for i in range(1, len(pos)):
            need = 0.5 * (heights[i - 1] + heights[i])
            d = pos[i] - pos[i - 1]
            if d < need - 1e-12:
                shift = 0.5 * (need - d)
                pos[i - 1] -= shift
                pos[i] += shift
                moved = True
        if not moved:
            break
    return pos


def _labels_that_fit(clusters: list, heights: list, highlight: set, room: float) -> list:
    """Indices of the clusters that get a label: all when they fit in ``room``; otherwise those
    holding a shown state first, then the lowest others, while the labels' heights fit."""
    order = sorted(range(len(clusters)),
                   key=lambda k: (not any(i in highlight for g in clusters[k]["groups"] for i in g), k))
    keep, used = [], 0.0
    for k in order:
        if used + heights[k] <= 0.98 * room:
            keep.append(k)
            used += heights[k]
    return sorted(keep)


def _spread_within(pos: list, heights: list, limits) -> list:
    """:func:`_spread`, then every label pushed inside ``limits`` (bottom, top) without overlapping."""
    placed = _spread(pos, heights)
    lo, hi = float(limits[0]), float(limits[1])
    for i in range(len(placed)):        # upwards from the bottom edge
        floor = lo + 0.5 * heights[i] if i == 0 else placed[i - 1] + 0.5 * (heights[i - 1] + heights[i])
        placed[i] = max(placed[i], floor)
    for i in reversed(range(len(placed))):   # downwards from the top edge
        ceil = hi - 0.5 * heights[i] if i == len(placed) - 1 else placed[i + 1] - 0.5 * (heights[i + 1] + heights[i])
        placed[i] = min(placed[i], ceil)
    return placed


def _raw_unit(p: dict) -> str:
    """The energy unit of a panel as the unit system names it (panels store it as written)."""
    from .formatting import UNIT_TEXT
    shown = p["energy_unit"]
    return next((k for k, v in UNIT_TEXT.items() if v == shown and v), shown)


def _draw_levels_frame(fig, ax, p: dict, t: Template) -> None:
    """Axes, limits and labels of the level diagram; the levels follow once the layout is fixed."""
    e = p["energies"]
    lo, hi = float(e.min()), float(e.max())
    span = hi - lo if hi > lo else max(1.0, abs(hi)) * 0.1
    ax.set_ylim(lo - 0.07 * span, hi + 0.07 * span)
    ax.set_xlim(0.0, 1.0)
    ax.set_xticks([])
    for side in ("top", "right", "bottom"):
        ax.spines[side].set_visible(False)
    ax.set_ylabel(p["y_label"])
    # the energy unit is on the y axis once; below the diagram only the legend of a convergence check
    if p.get("splittings") is not None:
        xlabel = f"{MARKS[RESOLVED]} resolved · {MARKS[NOT_RESOLVED]} not resolved"
        if p.get("errors") is not None:
            xlabel += "\nbars: grid error"
        ax.set_xlabel(xlabel, fontsize=t.font_pt * 0.75, color="0.35")


def _draw_levels(fig, ax, p: dict, t: Template) -> None:
    """The level bars and their labels, sized from the laid-out axes.

    Multiplets closer than the eye can separate (4 pt) are drawn side by side, each bar
    at its own energy; an exact multiplet is marked with its degeneracy, a cluster of
    split levels with the size of the splitting."""
    e, groups = p["energies"], p["groups"]
    highlight = set(p["highlight"])
    dec = int(p["decimals"])
    ylim = ax.get_ylim()
    box = ax.get_window_extent()
    height_pt = max(box.height * 72.0 / fig.dpi, 1.0)
    width_pt = max(box.width * 72.0 / fig.dpi, 1.0)
    per_pt = (ylim[1] - ylim[0]) / height_pt
    clusters: list = []
    for g in groups:
        en = float(np.mean(e[g]))
        if clusters and en - clusters[-1]["top"] < 4.0 * per_pt:
            clusters[-1]["groups"].append(g)
            clusters[-1]["top"] = en
        else:
            clusters.append({"groups": [g], "top": en})
    bar_x0 = (0.3 + (1.6 if p.get("splittings") is not None else 0.0)) * t.font_pt / width_pt
    bar_x1 = min(0.45, bar_x0 + _LEVEL_BARS * t.font_pt / width_pt)
    label_pt = 0.75 * t.font_pt
    pos, heights, texts = [], [], []
    for c in clusters:
        members = [i for g in c["groups"] for i in g]
        n = len(members)
        w = (bar_x1 - bar_x0) / n
        for k, i in enumerate(members):
            strong = i in highlight
            ax.plot([bar_x0 + (k + 0.08) * w, bar_x0 + (k + 0.92) * w], [e[i], e[i]],
                    color="black" if strong else "0.45", linewidth=(2.2 if strong else 1.3) * t.line_width,
                    solid_capstyle="butt")
        centre = float(np.mean(e[members]))
        txt = f"{_span_text(members)}: {centre:.{dec}f}"
        lines = 1
        if len(c["groups"]) == 1 and n > 1:
            txt += f" (×{n})"
        elif len(c["groups"]) > 1:
            # levels the eye cannot separate but the grouping keeps apart: each named, with the splitting
            from .labels import splitting_text
            rows = [f"{_span_text(g)}: {float(np.mean(e[g])):.{dec}f}" + (f" (×{len(g)})" if len(g) > 1 else "")
                    for g in reversed(c["groups"])]
            rows.append(f"split {splitting_text(float(e[members].max() - e[members].min()), _raw_unit(p), 3)}")
            txt = "\n".join(rows)
            lines = len(rows)
        if set(members) & set(p.get("box_states", ())):
            txt += "\n▲ box state (not bound)"
            lines += 1
        pos.append(centre)
        heights.append(1.3 * label_pt * lines * per_pt)
        texts.append(txt)
    if p.get("splittings") is not None:
        _draw_verdicts(ax, p, t, clusters, (bar_x0, bar_x1), width_pt, per_pt, texts)
    keep = _labels_that_fit(clusters, heights, highlight, ylim[1] - ylim[0])
    pos, heights, texts = ([v[i] for i in keep] for v in (pos, heights, texts))
    placed = _spread_within(pos, heights, ylim)
    for yt, yb, txt in zip(placed, pos, texts):
        a = ax.annotate(txt, xy=(bar_x1 + 0.1 * t.font_pt / width_pt, yb),
                        xytext=(bar_x1 + 0.8 * t.font_pt / width_pt, yt), va="center", ha="left",
                        fontsize=label_pt, annotation_clip=False, linespacing=1.1,
                        arrowprops={"arrowstyle": "-", "color": "0.6", "linewidth": 0.5, "shrinkA": 0,
                                    "shrinkB": 0})
        a.set_in_layout(False)


def _draw_verdicts(ax, p: dict, t: Template, clusters: list, bars: tuple, width_pt: float, per_pt: float,
                   texts: list) -> None:
    """Marks of a convergence check on the level diagram (never by colour alone).

    * each level: an error bar of its estimated grid error at the middle of its bar;
    * a splitting between drawn clusters: a bracket left of the bars with ✓ (resolved) or ≈ (not
      resolved) beside it;
    * splittings inside a cluster (levels drawn side by side): the cluster's label ends with the
      marks, e.g. "≈" when the grid cannot tell its levels apart."""
    e = p["energies"]
    errors = p.get("errors")
    bar_x0, bar_x1 = bars
    member_x = {}
    for c in clusters:
        members = [i for g in c["groups"] for i in g]
        w = (bar_x1 - bar_x0) / len(members)
        for k, i in enumerate(members):
            member_x[i] = bar_x0 + (k + 0.5) * w
    if errors is not None:
        ok = [i for i in member_x if np.isfinite(errors[i]) and errors[i] > 0]
        if ok:
            ax.errorbar([member_x[i] for i in ok], [e[i] for i in ok], yerr=[errors[i] for i in ok], fmt="none",
                        ecolor="0.35", elinewidth=0.6 * t.line_width, capsize=0.25 * t.font_pt)
    cluster_of = {i: ci for ci, c in enumerate(clusters) for g in c["groups"] for i in g}
    x_col = bar_x0 - 0.35 * t.font_pt / width_pt
    tick = 0.2 * t.font_pt / width_pt
    inside: dict = {}
    for sp in p["splittings"]:
        a, b = int(sp["lower"]), int(sp["upper"])
        if a not in cluster_of or b not in cluster_of:
            continue
        mark = MARKS[RESOLVED if sp["resolved"] else NOT_RESOLVED]
        if cluster_of[a] == cluster_of[b]:
            inside.setdefault(cluster_of[a], []).append(mark)
            continue
        lo, hi = sorted((float(e[a]), float(e[b])))
        inset = min(0.12 * (hi - lo), 1.5 * per_pt)
        ax.plot([x_col + tick, x_col, x_col, x_col + tick], [lo + inset, lo + inset, hi - inset, hi - inset],
                color="black", linewidth=0.6 * t.line_width,
                linestyle="-" if sp["resolved"] else (0, (2.0, 1.5)), solid_capstyle="butt")
        txt = ax.text(x_col - 0.15 * t.font_pt / width_pt, 0.5 * (lo + hi), mark, ha="right", va="center",
                      fontsize=0.75 * t.font_pt, clip_on=False)
        txt.set_in_layout(False)
    for ci, marks in inside.items():
        if ci < len(texts):
            lines = texts[ci].split("\n")
            lines[0] += "  " + "".join(sorted(set(marks), key=marks.index))
            texts[ci] = "\n".join(lines)


def _draw_fan(fig, ax, p: dict, t: Template) -> None:
    x, tr = p["values"], p["tracks"]
    cmap = _cmap(_DENSITY_CMAP)
    n = tr.shape[0]
    for k in range(n):
        ax.plot(x, tr[k], color=cmap(0.85 * k / max(1, n - 1)), linewidth=t.line_width)
    acs = sorted(p["anticrossings"], key=lambda a: a["gap"])
    anti = [a for a in acs if a["kind"] == "anticrossing"]
    for a in acs:
        if a["kind"] == "crossing":             # the window's mark for a crossing: x
            ax.plot([a["at"]], [a["centre"]], marker="x", markersize=1.2 * t.font_pt * 0.5,
                    markeredgecolor="black", markeredgewidth=0.6 * t.line_width, linestyle="none")
        elif a["kind"] == "not settled":
            q = ax.annotate("?", xy=(a["at"], a["centre"]), fontsize=t.font_pt * 0.8, ha="center", va="center",
                            color="#8a3b00")
            _outline(q, 2.0, "white")
    ymin, ymax = np.nanmin(tr), np.nanmax(tr)
    yspan = (ymax - ymin) or 1.0
    for rank, a in enumerate(anti):
        lo, hi = a["centre"] - a["gap"] / 2, a["centre"] + a["gap"] / 2
        if a["gap"] >= 0.02 * yspan:
            ax.annotate("", xy=(a["at"], hi), xytext=(a["at"], lo),
                        arrowprops={"arrowstyle": "<->", "color": "black", "linewidth": 0.8 * t.line_width,
                                    "shrinkA": 0, "shrinkB": 0})
        else:                        # a gap too small to draw: a short bar, never the crossing's x
            ax.plot([a["at"]], [a["centre"]], marker="|", markersize=1.4 * t.font_pt * 0.5, color="black",
                    markeredgewidth=0.8 * t.line_width, linestyle="none")
        if rank < 8:
            # two short lines on the side with room (a long label ran out of the axes)
            text = (a.get("text") or f"gap {a['gap']:.3g} {p['energy_unit']}").replace("h*", "h·")
            text = text.replace(" = ", " =\n", 1)
            frac = (a["at"] - float(x.min())) / max(float(np.ptp(x)), 1e-300)
            ha = "left" if frac < 0.3 else "right" if frac > 0.7 else "center"
            dx = {"left": 4, "right": -4, "center": 0}[ha]
            txt = ax.annotate(text, xy=(a["at"], hi), xytext=(dx, 4 + (rank % 2) * 1.8 * t.font_pt),
                              textcoords="offset points", fontsize=t.font_pt * 0.72, ha=ha, va="bottom",
                              multialignment="center")
            _outline(txt, 2.5, "white")
    ax.set_xlim(x.min(), x.max())
    ax.set_ylim(ymin - 0.04 * yspan, ymax + 0.04 * yspan)
    _scaled_axis(ax.xaxis, float(np.abs(x).max()), p["x_label"])
    ax.set_ylabel(p["y_label"])


_DRAW = {"potential": _draw_potential, "state": _draw_state, "cut": _draw_cut, "levels": _draw_levels_frame,
         "fan": _draw_fan}


# panels without a map: (smallest width of the axes, in font sizes; share of spare width)
_FLEX = {"levels": (9.0, 1.0), "cut": (14.0, 2.0), "fan": (18.0, 4.0), "state": (14.0, 1.5),
         "potential": (16.0, 2.0)}


_FLEX_OVERHEAD = 5.0   # first guess of the room for the y tick labels and label of such a panel, font sizes


def _level_label_chars(p: dict) -> int:
    """Length of the longest label the level diagram may write (with a split, the worst case)."""
    e, dec = p["energies"], int(p["decimals"])
    longest = 0
    for g in p["groups"]:
        text = f"{_span_text(g)}: {float(np.mean(e[g])):.{dec}f}" + (f" (×{len(g)})" if len(g) > 1 else "")
        longest = max(longest, len(text))
    if p.get("splittings") is not None:
        longest += 4          # the marks of splittings inside a cluster ("  ≈✓")
    return max(longest, 12)


def _flex_width(p: dict) -> float:
    """Smallest width of the axes of a panel without a map, in font sizes."""
    if p["kind"] == "levels":
        marks = 1.6 if p.get("splittings") is not None else 0.0     # the bracket column left of the bars
        return _LEVEL_BARS + 1.0 + marks + 0.75 * 0.6 * _level_label_chars(p)
    return _FLEX[p["kind"]][0]


_LEVEL_BARS = 5.0   # width of the level bars, in font sizes


def _is_map(p: dict) -> bool:
    return p["kind"] in ("potential", "state") and "x" in p


def _aspect(p: dict) -> float:
    x, y = p["x"], p["y"]
    return float((x[-1] - x[0]) / (y[-1] - y[0])) if y[-1] > y[0] else 1.0


_WIDE_MAP = 1.4   # a map this much wider than tall spans both columns of a two-column sheet


def _widen_last(cells: list, panels: Sequence[dict], filled: int, c: int) -> None:
    """A plot (fan, level diagram, cut) left alone on the last row of a grid takes the whole row
    (a narrow fan squeezed its tick labels into each other and left half the row empty)."""
    if c > 1 and filled % c == 1 and panels[-1]["kind"] in ("fan", "levels", "cut"):
        rows, _col, xl, yl = cells[-1]
        cells[-1] = (rows, slice(0, c), xl, yl)


def _arrangement(panels: Sequence[dict], t: Template, columns: int | None) -> tuple:
    """(rows, column specs, [(row slice, column, x labels?, y labels?) per panel]), or rows,
    None, cells for a plain grid.

    With ``columns``, or on a template without a fixed height (the journal columns, where a
    plain grid packs best), panels fill a plain grid row by row.
    Otherwise every panel but a state takes a column of full height, and each run of
    state panels fills a block of columns, row by row.  A column spec is
    ``("map", aspect, rows spanned)`` for maps drawn at equal aspect, else ``("flex", kind)``.
    """
    n = len(panels)
    n_states = sum(1 for p in panels if p["kind"] == "state")
    if columns or t.height_in is None or (n_states == 0 and n > 4):
        c, r = _grid_shape(n, t, columns)
        if not columns and c == 2 and n > 2 and _is_map(panels[0]) and _aspect(panels[0]) >= _WIDE_MAP:
            # a wide potential map across the whole width of a two-column sheet, the rest below it
            cells = [(slice(0, 1), slice(0, 2), True, True)]
            cells += [(slice(1 + i // 2, 2 + i // 2), i % 2, True, True) for i in range(n - 1)]
            _widen_last(cells, panels, n - 1, 2)
            return 1 + math.ceil((n - 1) / 2), c, None, cells
        cells = [(slice(i // c, i // c + 1), i % c, True, True) for i in range(n)]
        _widen_last(cells, panels, n, c)
        return r, c, None, cells
    runs = []
    for p in panels:
        if p["kind"] == "state" and runs and runs[-1][0] == "state":
            runs[-1][1].append(p)
        else:
            runs.append((p["kind"], [p]))
    longest = max((len(ps) for k, ps in runs if k == "state"), default=0)
    rows = 1 if longest <= 1 else (2 if longest <= 8 else 3)
    cols, cells = [], []
    for kind, ps in runs:
        if kind == "state":
            c0 = len(cols)
            ncol = math.ceil(len(ps) / rows)
            maps = all(_is_map(q) for q in ps)
            same = maps and all(np.array_equal(q["x"], ps[0]["x"]) and np.array_equal(q["y"], ps[0]["y"])
                                for q in ps)
            for j in range(ncol):
                cols.append(("map", max(_aspect(q) for q in ps[j::ncol]), rows) if maps
                            else ("flex", "state", _FLEX["state"][0]))
            for i in range(len(ps)):
                # within a block of maps on one window, only the outer axes carry labels
                lowest = i + ncol >= len(ps)
                cells.append((slice(i // ncol, i // ncol + 1), c0 + i % ncol,
                              lowest or not same, i % ncol == 0 or not same))
        else:
            p = ps[0]
            cells.append((slice(0, rows), len(cols), True, True))
            cols.append(("map", _aspect(p), 1) if _is_map(p) else ("flex", kind, _flex_width(p)))
    return rows, len(cols), cols, cells


def _column_widths(cols: list, t: Template, height_in: float | None, fixed_h: float,
                   overheads: dict) -> tuple:
    """(figure height, inner column widths in inches) so that equal-aspect maps fill their cells.

    The widths are those of the axes themselves: constrained layout treats width ratios
    as ratios of the axes, and adds the room for the decorations around them.

    ``overheads[j] = (width, height)`` in inches around the image of map column ``j``
    (tick labels, axis labels, colour bar, titles, padding): estimated from the type
    sizes first, then measured on a drawn layout.  Spare width goes to the level
    diagram, cuts and fans; a template without a fixed height gets the height at which
    the maps just fill the width.
    """
    f = t.font_pt / 72.0

    rows = max((c[2] for c in cols if c[0] == "map"), default=1)

    def widths_for(h_panels: float) -> list:
        heights = {}
        for j, c in enumerate(cols):
            if c[0] == "map":
                heights[j] = max(0.25, h_panels / c[2] - overheads[j][1])
        block = [h * math.sqrt(cols[j][1]) for j, h in heights.items() if cols[j][2] > 1]
        if block and rows > 1:
            # a map of full height beside a block of states is kept at most 1.5 times their
            # linear size (square root of the area), so that the states stay readable
            cap = 1.5 * min(block)
            heights = {j: (min(h, cap / math.sqrt(cols[j][1])) if cols[j][2] == 1 else h)
                       for j, h in heights.items()}
        return [heights[j] * cols[j][1] + overheads[j][0] if j in heights else None for j in range(len(cols))]

    flex_min = sum(c[2] * f + overheads[j][0] for j, c in enumerate(cols) if c[0] == "flex")
    has_maps = any(c[0] == "map" for c in cols)
    if height_in is None:
        if has_maps:
            lo_h, hi_h = 0.5, 14.0
            for _ in range(40):
                mid = 0.5 * (lo_h + hi_h)
                used = sum(w for w in widths_for(mid) if w is not None) + flex_min
                lo_h, hi_h = (mid, hi_h) if used < t.width_in else (lo_h, mid)
            h_panels = lo_h
        else:
            h_panels = t.width_in * 0.62
        height = h_panels + fixed_h
    else:
        height = height_in
        h_panels = height_in - fixed_h
    widths = widths_for(h_panels)
    inner = [w - overheads[j][0] if w is not None else c[2] * f for j, (w, c) in enumerate(zip(widths, cols))]
    avail = t.width_in - sum(overheads[j][0] for j in range(len(cols)))
    spare = avail - sum(inner)
    if spare < 0:
        # too wide: the maps shrink (their decorations keep their size) and the plots keep
        # the width their labels need; only when the maps would become tiny does everything shrink
        is_map = [c[0] == "map" for c in cols]
        maps = sum(w for w, m in zip(inner, is_map) if m)
        rest = sum(w for w, m in zip(inner, is_map) if not m)
        s = (avail - rest) / maps if maps > 0 else 0.0
        if maps > 0 and s >= 0.35:
            return height, [w * s if m else w for w, m in zip(inner, is_map)]
        scale = max(0.05, avail) / sum(inner)
        return height, [w * scale for w in inner]
    shares = sum(_FLEX[c[1]][1] for c in cols if c[0] == "flex")
    if shares == 0:
        return height, [w + spare / len(cols) for w in inner]
    return height, [w + (spare * _FLEX[c[1]][1] / shares if c[0] == "flex" else 0.0) for w, c in zip(inner, cols)]


def _estimated_overheads(cols: list, panels: Sequence[dict], cells: list, t: Template) -> dict:
    f = t.font_pt / 72.0
    out = {}
    for j, c in enumerate(cols):
        if c[0] != "map":
            out[j] = (_FLEX_OVERHEAD * f + 0.12, 0.0)
            continue
        lines = max((p.get("title", "").count("\n") + 1 for p, cell in zip(panels, cells) if cell[1] == j),
                    default=1)
        ylab = any(cell[3] for cell in cells if cell[1] == j)
        out[j] = (0.1 + 4.6 * f + (4.0 * f if ylab else 0.4 * f) + 0.12,
                  lines * 1.25 * t.title_pt / 72.0 + 3.6 * f + 0.15)
    return out


def _measured_overheads(fig, axes: list, cells: list, cols: list) -> dict:
    """Room that each map column's decorations really take, from a drawn layout (inches)."""
    renderer = fig.canvas.get_renderer() if hasattr(fig.canvas, "get_renderer") else fig._get_renderer()
    dpi = fig.dpi
    fw, fh = fig.get_size_inches()
    out: dict = {}
    for ax, cell in zip(axes, cells):
        j = cell[1]
        if cols[j][0] != "map":
            bb = ax.get_tightbbox(renderer)
            out[j] = (max(bb.width / dpi - ax.get_position().width * fw, 0.0), 0.0)
            continue
        pos = ax.get_position()             # the image's box after the equal aspect
        bb = ax.get_tightbbox(renderer)
        w_img, h_img = pos.width * fw, pos.height * fh
        # the decorations, plus the layout's padding: what the cell holds beyond the image
        ow = max(bb.width / dpi - w_img, 0.0)
        oh = max(bb.height / dpi - h_img, 0.0)
        prev = out.get(j, (0.0, 0.0))
        out[j] = (max(prev[0], ow), max(prev[1], oh))
    return out


def _fit_row_heights(fig, gs, axes: list, cells: list, panels: Sequence[dict], rows: int, fixed_h: float,
                     pad_h: float) -> float:
    """Row heights of a plain grid from a drawn layout: a row of maps (width-limited at equal
    aspect) needs its image height plus its titles and labels; returns the new figure height."""
    renderer = fig._get_renderer()  # noqa: SLF001
    fw, fh = fig.get_size_inches()
    need = [0.0] * rows
    for ax, cell, p in zip(axes, cells, panels):
        r = cell[0].start
        pos = ax.get_position()
        if _is_map(p):
            bb = ax.get_tightbbox(renderer)
            img_w = pos.width * fw
            want = img_w / _aspect(p) + (bb.height / fig.dpi - pos.height * fh)
        else:
            want = 0.0
        need[r] = max(need[r], want)
    ncols = gs.ncols
    default = max(max(need), 0.62 * fw / ncols)
    need = [n if n > 0 else default for n in need]
    need = [n + 2 * pad_h + 0.05 for n in need]
    gs.set_height_ratios(need)
    height = sum(need) + fixed_h
    fig.set_size_inches(fw, height)
    return height


def _layout(fig) -> None:
    """Run the layout engine (constrained layout) without drawing the artists."""
    fig.get_layout_engine().execute(fig)


def _figure_in_context(sheet: Sheet, t: Template, columns: int | None):
    from matplotlib.figure import Figure
    panels = sheet.panels
    caption = _wrap_caption([short_caption(sheet.caption, with_title=not sheet.title)], t)
    cap_h = (len(caption) * 1.3 * t.caption_pt + 0.6 * t.caption_pt) / 72.0
    title_lines = _wrap_measured(sheet.title, t.suptitle_pt, t.width_in * 72.0 * 0.9, "bold") if sheet.title else []
    title_h = ((0.4 + 1.2 * len(title_lines)) * t.suptitle_pt / 72.0) if title_lines else 0.0
    rows, ncols, cols, cells = _arrangement(panels, t, columns)
    pad_w, pad_h = 0.05, 0.04
    if cols is None:
        ratios = [1.0] * ncols
        height = t.height_in if t.height_in is not None else rows * (t.width_in / ncols) * 0.92 + cap_h + title_h
    else:
        est = _estimated_overheads(cols, panels, cells, t)
        height, ratios = _column_widths(cols, t, t.height_in, cap_h + title_h, est)
    fig = Figure(figsize=(t.width_in, height), dpi=100)

    trim = [0.0, 0.0, 0.0, 0.0]   # inches taken off the layout's left, bottom, right, top (see _keep_inside)

    def set_rect(h):
        bottom = (cap_h + trim[1]) / h
        top = 1.0 - (title_h + trim[3]) / h
        left, right = trim[0] / t.width_in, 1.0 - trim[2] / t.width_in
        fig.set_layout_engine("constrained", rect=(left, bottom, right - left, top - bottom), w_pad=pad_w,
                              h_pad=pad_h, wspace=0.02, hspace=0.02)

    set_rect(height)
    gs = fig.add_gridspec(rows, ncols, width_ratios=ratios)
    axes = []
    for p, (rs, col, _xl, _yl) in zip(panels, cells):
        ax = fig.add_subplot(gs[rs, col])
        ax.set_title(p.get("title", ""))
        axes.append(ax)
    for ax, p, (_rs, _col, xlab, ylab) in zip(axes, panels, cells):
        _DRAW[p["kind"]](fig, ax, p, t)
        if not xlab:
            ax.set_xlabel("")
            ax.tick_params(labelbottom=False)
        if not ylab:
            ax.set_ylabel("")
            ax.tick_params(labelleft=False)
    _layout(fig)
    _fit_colorbar_labels(fig, axes, t)
    if _clear_titles(fig, axes):
        _layout(fig)
        _fit_colorbar_labels(fig, axes, t)
    if cols is None and t.height_in is None:
        # second pass for a plain grid of free height: each row as tall as its tallest map needs
        height = _fit_row_heights(fig, gs, axes, cells, panels, rows, cap_h + title_h, pad_h)
        set_rect(height)
        _layout(fig)
        _fit_colorbar_labels(fig, axes, t)
    if cols is not None:
        # second pass: measure what the decorations really take and size the columns again
        measured = _measured_overheads(fig, axes, cells, cols)
        pads = {j: (ow + 2 * pad_w + 0.04, oh + 2 * pad_h + 0.04 if cols[j][0] == "map" else 0.0)
                for j, (ow, oh) in measured.items()}
        height, ratios = _column_widths(cols, t, t.height_in, cap_h + title_h, pads)
        fig.set_size_inches(t.width_in, height)
        set_rect(height)
        gs.set_width_ratios(ratios)
    if sheet.title:
        fig.text(0.5, 1.0 - 0.2 * t.suptitle_pt / 72.0 / height, "\n".join(title_lines), ha="center", va="top",
                 fontsize=t.suptitle_pt, linespacing=1.1,
                 fontweight="bold")
    fig.text(0.008, cap_h / height - 0.2 * t.caption_pt / 72.0 / height, "\n".join(caption), ha="left", va="top",
             fontsize=t.caption_pt, color="0.2", linespacing=1.25)
    if cols is not None:
        _layout(fig)
        _fit_colorbar_labels(fig, axes, t)
    for _ in range(3):
        moved = _clear_titles(fig, axes)
        if _keep_inside(fig, trim):
            set_rect(fig.get_size_inches()[1])
            moved = True
        if not moved:
            break
        _layout(fig)
        _fit_colorbar_labels(fig, axes, t)
    for ax, p in zip(axes, panels):
        if p["kind"] == "levels":
            _draw_levels(fig, ax, p, t)
        elif p["kind"] == "potential":
            _label_gates(fig, ax, p, t)
        elif p["kind"] == "state":
            _scale_bar_clear_of_state(fig, ax, p, t)
    # the layout is final: keep it as it is when the file is written (saves a layout pass)
    fig.set_layout_engine("none")
    fig._wellscape_panels = axes  # noqa: SLF001 - handy for callers that inspect the drawing
    return fig


def sheet_figure(sheet: Sheet, *, template: str | None = None, columns: int | None = None):
    """Draw ``sheet`` into a new :class:`matplotlib.figure.Figure` (no GUI, no pyplot).

    The figure's panels (one Axes per panel, in order) are in ``figure._wellscape_panels``.
    Type sizes come from the template and are set while the figure is drawn; use
    :func:`render_sheet` to write files.
    """
    import matplotlib
    t = _template(template or sheet.template)
    with matplotlib.rc_context(_rc(t)):
        return _figure_in_context(sheet, t, _columns(columns) if columns is not None else sheet.columns)


def _format_of(path: Path, fmt: str | None) -> str:
    f = (fmt or path.suffix.lstrip(".")).lower()
    if f not in FIGURE_FORMATS:
        raise InputError(f"{path.name}: unknown figure type {('.' + f) if f else '(no extension)'}; "
                         f"use .png, .pdf or .svg")
    return f


def render_sheet(sheet: Sheet, path: str | os.PathLike, *, dpi: float = 200, format: str | None = None,
                 template: str | None = None, columns: int | None = None) -> Path:
    """Draw ``sheet`` into ``path`` (.png, .pdf or .svg) and return the path.

    ``dpi`` sets the PNG's pixel size (width = template width x dpi); PDF and SVG stay
    vector, with images embedded at the grid's own resolution.  The file is written to
    a temporary name first, so a failure leaves an existing file untouched.
    """
    import matplotlib
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    from . import __version__
    p = Path(path)
    fmt = _format_of(p, format)
    try:
        dpi = float(dpi)
    except (TypeError, ValueError):
        raise InputError(f"dpi: expected a number, got {dpi!r}") from None
    if not (10 <= dpi <= 2400):
        raise InputError(f"dpi: expected a value from 10 to 2400, got {dpi:g}")
    t = _template(template or sheet.template)
    cols = _columns(columns) if columns is not None else sheet.columns
    folder = p.parent if str(p.parent) else Path(".")
    if not folder.is_dir():
        raise InputError(f"cannot write {p}: the folder {folder} does not exist")
    meta_title = sheet.title or (sheet.caption[0] if sheet.caption else "Wellscape figure sheet")
    creator = f"Wellscape {__version__}"
    if fmt == "pdf":
        metadata = {"Title": meta_title, "Creator": creator, "Subject": f"project hash {sheet.project_hash}",
                    "CreationDate": None}
    elif fmt == "svg":
        metadata = {"Title": meta_title, "Creator": creator, "Date": None,
                    "Description": f"project hash {sheet.project_hash}"}
    else:
        metadata = {"Title": meta_title, "Software": creator, "Description": f"project hash {sheet.project_hash}"}
    def draw(tmp):
        with matplotlib.rc_context(_rc(t)):
            fig = _figure_in_context(sheet, t, cols)
            if fmt == "png":
                FigureCanvasAgg(fig)
            fig.savefig(tmp, format=fmt, dpi=dpi, metadata=metadata)

    return atomic_write(p, draw, suffix=f".{fmt}")


def sheet_json_path(figure_path: str | os.PathLike) -> Path:
    """Where the data of a figure goes: ``sheet.pdf`` -> ``sheet.sheet.json``."""
    p = Path(figure_path)
    return p.with_name(p.stem + ".sheet.json")


def save_sheet(sheet: Sheet, path: str | os.PathLike, *, dpi: float = 200, format: str | None = None,
               template: str | None = None, columns: int | None = None, data: bool = True) -> tuple:
    """Render ``sheet`` into ``path`` and write its data beside it (``NAME.sheet.json``).

    Returns ``(figure path, data path or None)``.  An existing file at the data path is
    replaced only if it is itself a figure-sheet file.
    """
    p = Path(path)
    _format_of(p, format)
    if template is not None or columns is not None:
        changes = {}
        if template is not None:
            changes["template"] = _template(template).name
        if columns is not None:
            changes["columns"] = columns
        sheet = sheet.with_options(**changes)
    jpath = sheet_json_path(p) if data else None
    if jpath is not None:
        _check_replaceable(jpath)
        text = json.dumps(sheet_to_dict(sheet), ensure_ascii=False, allow_nan=False, separators=(",", ":"))
    render_sheet(sheet, p, dpi=dpi, format=format)
    if jpath is not None:
        _atomic_text(jpath, text + "\n")
    return p, jpath


def _check_replaceable(path: Path) -> None:
    if not path.exists():
        return
    try:
        with open(path, "rb") as fh:
            head = fh.read(200)
    except OSError as exc:
        raise InputError(f"cannot replace {path}: {exc.strerror or exc}") from None
    if f'"format":"{SHEET_FORMAT}"'.encode() not in head.replace(b" ", b""):
        raise InputError(f"{path} exists and is not a figure-sheet data file; not overwriting it "
                         f"(choose another figure name)")


def _atomic_text(path: Path, text: str) -> None:
    atomic_write(path, data=text.encode("utf-8"), suffix=".tmp")


# --- the sheet's JSON document ------------------------------------------------------------------

def _plain(value):
    if isinstance(value, np.ndarray):
        if value.dtype.kind == "f":
            if np.all(np.isfinite(value)):
                return value.tolist()
            return np.where(np.isfinite(value), value, None).tolist()
        return value.tolist()
    if isinstance(value, dict):
        return {k: _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, np.floating):
        return float(value)
    if isinstance(value, np.integer):
        return int(value)
    return value


def sheet_to_dict(sheet: Sheet) -> dict:
    """The JSON document of a sheet (plain lists and numbers; float64 values round-trip exactly)."""
    return {"format": SHEET_FORMAT, "format_version": SHEET_FORMAT_VERSION,
            "wellscape_version": sheet.wellscape_version, "title": sheet.title, "layout": sheet.layout,
            "template": sheet.template, "columns": sheet.columns, "units": dict(sheet.units),
            "project_hash": sheet.project_hash, "caption": list(sheet.caption),
            "panels": [_plain(p) for p in sheet.panels], "project": sheet.project}


class _Reader:
    def __init__(self, source: str):
        self.source = source

    def fail(self, path: str, msg: str):
        raise InputError(f"{self.source}: {path}: {msg}")

    def obj(self, v, path) -> dict:
        if not isinstance(v, dict):
            self.fail(path, f"expected an object, got {type(v).__name__}")
        return v

    def text(self, v, path, *, limit=20000) -> str:
        if not isinstance(v, str):
            self.fail(path, f"expected text, got {type(v).__name__}")
        if len(v) > limit:
            self.fail(path, f"text longer than {limit} characters")
        return v

    def number(self, v, path) -> float:
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(float(v)):
            self.fail(path, f"expected a finite number, got {v!r}"[:200])
        return float(v)

    def integer(self, v, path, lo=0, hi=10**9) -> int:
        if isinstance(v, bool) or not isinstance(v, int) or not lo <= v <= hi:
            self.fail(path, f"expected a whole number from {lo} to {hi}, got {v!r}"[:200])
        return v

    def array(self, v, path, ndim: int, *, allow_nan=False, min_size=1) -> np.ndarray:
        if not isinstance(v, list):
            self.fail(path, f"expected a list of numbers, got {type(v).__name__}")
        try:
            arr = np.asarray(v)
        except (ValueError, TypeError):
            self.fail(path, "rows of different lengths")
        if arr.dtype == object:
            if not allow_nan:
                self.fail(path, "expected numbers only (null, text or ragged rows found)")
            flat = arr.ravel()
            for item in flat:
                if item is not None and (isinstance(item, bool) or not isinstance(item, (int, float))):
                    self.fail(path, f"expected numbers or null, got {item!r}"[:200])
            arr = np.array(flat.tolist(), dtype=float).reshape(arr.shape)
        elif arr.dtype.kind not in "iuf" or arr.dtype == bool:
            self.fail(path, f"expected numbers, got {arr.dtype.kind == 'b' and 'true/false' or 'text'}")
        if arr.ndim != ndim:
            self.fail(path, f"expected a {ndim}D array, got {arr.ndim}D with shape {arr.shape}")
        if arr.size < min_size:
            self.fail(path, f"expected at least {min_size} values")
        if arr.size > MAX_ARRAY_POINTS:
            self.fail(path, f"{arr.size} values is more than a sheet holds ({MAX_ARRAY_POINTS})")
        arr = arr.astype(float)
        if not allow_nan and not np.all(np.isfinite(arr)):
            self.fail(path, "expected finite numbers")
        if np.any(np.isinf(arr)):
            self.fail(path, "infinite values are not allowed")
        return arr

    def increasing(self, arr, path):
        if arr.size > 1 and not np.all(np.diff(arr) > 0):
            self.fail(path, "coordinates must increase")
        return arr

    def groups(self, v, path, n: int) -> list:
        if not isinstance(v, list):
            self.fail(path, "expected a list of level lists")
        seen = []
        for i, g in enumerate(v):
            if not isinstance(g, list) or not g:
                self.fail(f"{path}[{i}]", "expected a non-empty list of level numbers")
            seen.extend(self.integer(k, f"{path}[{i}]", 0, n - 1) for k in g)
        if sorted(seen) != list(range(n)):
            self.fail(path, f"the groups must hold each level 0..{n - 1} exactly once")
        return [list(g) for g in v]


_PANEL_KEYS = {
    "potential": {"kind", "title", "x", "y", "values", "x_label", "y_label", "value_label", "contours", "gates",
                  "scale_bar", "length_unit", "colour_range"},
    "cut": {"kind", "title", "s", "values", "energies", "groups", "ylim", "x_label", "y_label"},
    "state": {"kind", "title", "level", "energy", "mode", "value_label", "x_label", "y_label", "x", "y", "s",
              "values"},
    "levels": {"kind", "title", "energies", "groups", "highlight", "decimals", "y_label", "energy_unit",
               "errors", "splittings", "check", "box_states"},
    "fan": {"kind", "title", "values", "tracks", "anticrossings", "x_label", "y_label", "energy_unit", "parameter"},
}


def _read_panel(r: _Reader, raw, path: str) -> dict:
    d = r.obj(raw, path)
    kind = d.get("kind")
    if not isinstance(kind, str) or kind not in _PANEL_KEYS:
        r.fail(f"{path}.kind", f"expected one of {', '.join(_PANEL_KEYS)}, got {kind!r}"[:200])
    extra = set(d) - _PANEL_KEYS[kind] - {"state"}
    if extra:
        r.fail(path, f"unknown keys {', '.join(sorted(extra))} for a {kind} panel")
    out = {"kind": kind, "title": r.text(d.get("title", ""), f"{path}.title")}
    if "state" in d:                   # the project state the panel's data came from (core.provenance)
        out["state"] = r.text(d["state"], f"{path}.state", limit=64)

    def need(key):
        if key not in d:
            r.fail(path, f"a {kind} panel needs {key!r}")
        return d[key]

    required = {"potential": ("x_label", "y_label", "value_label", "length_unit"),
                "state": ("x_label", "value_label") + (() if "s" in d else ("y_label",)),
                "cut": ("x_label", "y_label"), "levels": ("y_label", "energy_unit"),
                "fan": ("x_label", "y_label", "energy_unit", "parameter")}[kind]
    for key in required:
        out[key] = r.text(need(key), f"{path}.{key}", limit=200)
    if kind in ("potential", "state") and "s" not in d:
        x = r.increasing(r.array(need("x"), f"{path}.x", 1, min_size=2), f"{path}.x")
        y = r.increasing(r.array(need("y"), f"{path}.y", 1, min_size=2), f"{path}.y")
        v = r.array(need("values"), f"{path}.values", 2)
        if v.shape != (x.size, y.size):
            r.fail(f"{path}.values", f"shape {v.shape} does not match x and y ({x.size}, {y.size})")
        out.update({"x": x, "y": y, "values": v})
    if kind == "potential":
        out["contours"] = r.array(need("contours"), f"{path}.contours", 1, min_size=0)
        cr = r.array(need("colour_range"), f"{path}.colour_range", 1)
        if cr.size != 2 or not cr[1] >= cr[0]:
            r.fail(f"{path}.colour_range", "expected [low, high] with high >= low")
        out["colour_range"] = cr
        gates = need("gates")
        if not isinstance(gates, list):
            r.fail(f"{path}.gates", "expected a list")
        out["gates"] = []
        for j, g in enumerate(gates):
            gp = f"{path}.gates[{j}]"
            g = r.obj(g, gp)
            verts = r.array(g.get("vertices"), f"{gp}.vertices", 2, min_size=6)
            if verts.shape[1] != 2:
                r.fail(f"{gp}.vertices", "expected (x, y) pairs")
            out["gates"].append({"label": r.text(g.get("label", ""), f"{gp}.label", limit=200),
                                 "voltage": r.number(g.get("voltage"), f"{gp}.voltage"), "vertices": verts})
        out["scale_bar"] = r.number(need("scale_bar"), f"{path}.scale_bar")
    elif kind == "state":
        out["level"] = r.integer(need("level"), f"{path}.level")
        out["energy"] = r.number(need("energy"), f"{path}.energy")
        mode = need("mode")
        if mode not in WAVEFUNCTION_MODES:
            r.fail(f"{path}.mode", f"expected one of {', '.join(WAVEFUNCTION_MODES)}")
        out["mode"] = mode
        if "s" in d:
            s = r.increasing(r.array(d["s"], f"{path}.s", 1, min_size=2), f"{path}.s")
            v = r.array(need("values"), f"{path}.values", 1)
            if v.size != s.size:
                r.fail(f"{path}.values", f"{v.size} values for {s.size} points")
            out.update({"s": s, "values": v})
    elif kind == "cut":
        s = r.increasing(r.array(need("s"), f"{path}.s", 1, min_size=2), f"{path}.s")
        v = r.array(need("values"), f"{path}.values", 1)
        if v.size != s.size:
            r.fail(f"{path}.values", f"{v.size} values for {s.size} points")
        e = r.array(need("energies"), f"{path}.energies", 1)
        ylim = r.array(need("ylim"), f"{path}.ylim", 1)
        if ylim.size != 2 or not ylim[1] > ylim[0]:
            r.fail(f"{path}.ylim", "expected [low, high] with high > low")
        out.update({"s": s, "values": v, "energies": e, "ylim": ylim,
                    "groups": r.groups(need("groups"), f"{path}.groups", e.size)})
    elif kind == "levels":
        e = r.array(need("energies"), f"{path}.energies", 1)
        hl = need("highlight")
        if not isinstance(hl, list):
            r.fail(f"{path}.highlight", "expected a list of level numbers")
        out.update({"energies": e, "groups": r.groups(need("groups"), f"{path}.groups", e.size),
                    "highlight": [r.integer(k, f"{path}.highlight[{i}]", 0, e.size - 1) for i, k in enumerate(hl)],
                    "decimals": r.integer(need("decimals"), f"{path}.decimals", 0, 12)})
        if "box_states" in d:
            bs = d["box_states"]
            if not isinstance(bs, list):
                r.fail(f"{path}.box_states", "expected a list of level numbers")
            out["box_states"] = [r.integer(k, f"{path}.box_states[{i}]", 0, e.size - 1) for i, k in enumerate(bs)]
        if "errors" in d:
            err = r.array(d["errors"], f"{path}.errors", 1, allow_nan=True)
            if err.size != e.size:
                r.fail(f"{path}.errors", f"{err.size} errors for {e.size} levels")
            out["errors"] = err
        if "splittings" in d:
            sps = d["splittings"]
            if not isinstance(sps, list):
                r.fail(f"{path}.splittings", "expected a list")
            out["splittings"] = []
            for j, sp in enumerate(sps):
                sp_path = f"{path}.splittings[{j}]"
                sp = r.obj(sp, sp_path)
                resolved = sp.get("resolved")
                if not isinstance(resolved, bool):
                    r.fail(f"{sp_path}.resolved", "expected true or false")
                out["splittings"].append({"lower": r.integer(sp.get("lower"), f"{sp_path}.lower", 0, e.size - 1),
                                          "upper": r.integer(sp.get("upper"), f"{sp_path}.upper", 0, e.size - 1),
                                          "resolved": resolved})
        if "check" in d:
            out["check"] = r.text(d["check"], f"{path}.check", limit=300)
    elif kind == "fan":
        x = r.array(need("values"), f"{path}.values", 1, min_size=2)
        tr = r.array(need("tracks"), f"{path}.tracks", 2, allow_nan=True)
        if tr.shape[1] != x.size:
            r.fail(f"{path}.tracks", f"shape {tr.shape} does not match {x.size} sweep points")
        acs = need("anticrossings")
        if not isinstance(acs, list):
            r.fail(f"{path}.anticrossings", "expected a list")
        out_acs = []
        for j, a in enumerate(acs):
            ap = f"{path}.anticrossings[{j}]"
            a = r.obj(a, ap)
            tracks = a.get("tracks")
            if not isinstance(tracks, list) or len(tracks) != 2:
                r.fail(f"{ap}.tracks", "expected two track numbers")
            kind_ac = a.get("kind")
            if kind_ac not in ("anticrossing", "crossing", "not settled"):
                r.fail(f"{ap}.kind", "expected 'anticrossing', 'crossing' or 'not settled'")
            gap = r.number(a.get("gap"), f"{ap}.gap")
            if gap < 0:
                r.fail(f"{ap}.gap", "a gap cannot be negative")
            out_acs.append({"at": r.number(a.get("at"), f"{ap}.at"), "gap": gap,
                            "tracks": [r.integer(t, f"{ap}.tracks", 0, tr.shape[0] - 1) for t in tracks],
                            "kind": kind_ac, "centre": r.number(a.get("centre"), f"{ap}.centre")})
            if "text" in a:
                if not isinstance(a["text"], str) or len(a["text"]) > 200:
                    r.fail(f"{ap}.text", "expected a short text")
                out_acs[-1]["text"] = a["text"]
        out.update({"values": x, "tracks": tr, "anticrossings": out_acs})
    return out


def sheet_from_dict(data: Any, *, source: str = "sheet") -> Sheet:
    """Validate a sheet document (as written by :func:`save_sheet`) and return the :class:`Sheet`."""
    r = _Reader(source)
    d = r.obj(data, "(top level)")
    if d.get("format") != SHEET_FORMAT:
        r.fail("format", f"this is not a Wellscape figure-sheet file (expected format {SHEET_FORMAT!r})")
    version = d.get("format_version")
    if not isinstance(version, int) or isinstance(version, bool):
        r.fail("format_version", "expected a whole number")
    if version > SHEET_FORMAT_VERSION:
        r.fail("format_version", f"version {version} is newer than this Wellscape reads ({SHEET_FORMAT_VERSION}); "
                                 f"update Wellscape")
    known = {"format", "format_version", "wellscape_version", "title", "layout", "template", "columns", "units",
             "project_hash", "caption", "panels", "project"}
    extra = set(d) - known
    if extra:
        r.fail("(top level)", f"unknown keys {', '.join(sorted(extra))}")
    template = r.text(d.get("template", "slide"), "template", limit=40)
    if template not in TEMPLATES:
        r.fail("template", f"expected one of {', '.join(TEMPLATES)}, got {template!r}")
    cols = d.get("columns")
    if cols is not None:
        cols = r.integer(cols, "columns", 1, 8)
    units = r.obj(d.get("units", {}), "units")
    units = {str(k): r.text(v, f"units.{k}", limit=40) for k, v in units.items()}
    caption = d.get("caption")
    if not isinstance(caption, list):
        r.fail("caption", "expected a list of lines")
    caption = tuple(r.text(c, f"caption[{i}]", limit=4000) for i, c in enumerate(caption))
    panels = d.get("panels")
    if not isinstance(panels, list) or not panels:
        r.fail("panels", "expected a non-empty list of panels")
    if len(panels) > MAX_PANELS:
        r.fail("panels", f"{len(panels)} panels; a sheet holds at most {MAX_PANELS}")
    panels = tuple(_read_panel(r, p, f"panels[{i}]") for i, p in enumerate(panels))
    project = d.get("project")
    h = r.text(d.get("project_hash", ""), "project_hash", limit=64)
    if project is not None:
        from .project import project_from_dict
        r.obj(project, "project")
        try:
            project_from_dict(project)
        except InputError as exc:
            r.fail("project", str(exc))
        if h:
            # the hash also covers map files, which the sheet names but does not hold; check what it can
            if project_hash(project) != h and not any(
                    isinstance(t, dict) and t.get("kind") == "map" for t in project.get("potential", [])):
                r.fail("project_hash", "does not match the project stored in the file (was the project edited?)")
    return Sheet(panels=panels, caption=caption, layout=r.text(d.get("layout", ""), "layout", limit=400),
                 template=template, columns=cols, title=r.text(d.get("title", ""), "title", limit=400),
                 units=units, project=project, project_hash=h,
                 wellscape_version=r.text(d.get("wellscape_version", ""), "wellscape_version", limit=40))


def load_sheet(path: str | os.PathLike) -> Sheet:
    """Read and validate ``NAME.sheet.json``; raises :class:`InputError` naming any problem."""
    from .jsonfile import parse_json, read_text_file
    p = Path(path)
    data = parse_json(read_text_file(p, kind="sheet file", max_bytes=MAX_SHEET_BYTES), source=str(p))
    return sheet_from_dict(data, source=str(p))
