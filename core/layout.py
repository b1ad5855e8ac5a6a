"""Gate patterns from GDSII layout files, read with `gdstk <https://github.com/heitzmann/gdstk>`_.

GDSII (the open stream format of chip layouts) stores polygons on numbered layers, each with
a datatype number.  :func:`read_layout_gates` takes the polygons of the chosen layers from one
cell (references and arrays flattened, paths turned into their outlines), maps each vertex
``(u, v)`` of the layout to the project plane as

    x = scale * (u - origin_u),    y = scale * (v - origin_v)

(``origin`` in layout units: the layout point that becomes x = y = 0; ``scale`` in project
length units per layout unit), and returns them as editable :class:`core.project.GateSpec`
entries: an axis-aligned rectangle as a ``rectangle``, any other outline as a ``polygon``.

gdstk is an optional dependency (``pip install wellscape[layout]``).  The file is checked
before it is parsed: its size (:data:`MAX_FILE_BYTES`) and the GDSII header record.  Errors
name the file and the layer or polygon number, never the file's content.
"""
from __future__ import annotations

import os
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .errors import InputError
from .gates import validate_polygon
from .project import GateSpec

__all__ = ["LayerChoice", "parse_layer", "read_layout_gates", "layout_unit_scale", "project_with_gates",
           "MAX_FILE_BYTES",
           "MAX_GATE_VERTICES", "MAX_GATES"]

from .limits import MAX_IMPORTED_GATE_VERTICES  # noqa: E402

MAX_FILE_BYTES = 64 * 2**20
MAX_GATE_VERTICES = MAX_IMPORTED_GATE_VERTICES      # core.limits: one place for every bound
MAX_GATES = 500
_GDS_HEADER = b"\x00\x06\x00\x02"      # the HEADER record: length 6, record type 0x00, data type 0x02


@dataclass(frozen=True)
class LayerChoice:
    """A GDSII layer number and, optionally, one datatype (None: every datatype of the layer)."""

    layer: int
    datatype: int | None = None

    def __str__(self) -> str:
        return f"{self.layer}" if self.datatype is None else f"{self.layer}/{self.datatype}"


def parse_layer(text: str) -> LayerChoice:
    """``"5"`` or ``"5/2"`` (layer / datatype, integers 0..65535)."""
    parts = str(text).strip().split("/")
    try:
        if len(parts) > 2:
            raise ValueError
        numbers = [int(x) for x in parts]
    except ValueError:
        raise InputError(f"layer {text!r}: expected LAYER or LAYER/DATATYPE (whole numbers, e.g. 5 or 5/2)") from None
    if any(not 0 <= n <= 65535 for n in numbers):
        raise InputError(f"layer {text!r}: GDSII layer and datatype numbers run from 0 to 65535")
    return LayerChoice(*numbers)


def _read_library(path: Path):
    try:
        import gdstk
    except ImportError:
        raise InputError(f"layout {path}: reading GDSII needs the optional package gdstk "
                         f"(pip install 'wellscape[layout]')") from None
    from .inputfiles import check_input_file
    size = check_input_file(path, "layout", MAX_FILE_BYTES)
    try:
        with open(path, "rb") as fh:
            head = fh.read(4)
    except OSError as exc:
        raise InputError(f"layout {path}: cannot be read ({exc.strerror or exc})") from None
    if head != _GDS_HEADER:
        raise InputError(f"layout {path}: not a GDSII stream file (it does not start with a GDSII header)")
    if not _ends_with_endlib(path, size):
        raise InputError(f"layout {path}: the GDSII stream is cut short (no end-of-library record)")
    try:
        return gdstk.read_gds(str(path))
    except (OSError, RuntimeError, ValueError):
        raise InputError(f"layout {path}: the GDSII stream is damaged or cut short") from None


def _ends_with_endlib(path: Path, size: int) -> bool:
    """True when the last record (before any zero padding to a block) is ENDLIB: length 4, type 0x04."""
    try:
        with open(path, "rb") as fh:
            fh.seek(max(0, size - 8192))
            tail = fh.read()
    except OSError:
        return False
    # ENDLIB is 00 04 04 00; its last byte is stripped with the padding
    return tail.rstrip(b"\x00").endswith(b"\x00\x04\x04")


def layout_unit_scale(path, length_si: float) -> float:
    """Project length units per layout unit, from the file's user unit (metres) and the project's unit."""
    return float(_read_library(Path(os.fspath(path))).unit) / float(length_si)


def _pick_cell(lib, path: Path, cell: str | None):
    if cell is not None:
        for c in lib.cells:
            if c.name == cell:
                return c
        raise InputError(f"layout {path}: no cell named {cell!r}")
    tops = lib.top_level()
    if not tops:
        raise InputError(f"layout {path}: holds no cells (an empty layout)")
    if len(tops) > 1:
        shown = ", ".join(repr(c.name[:40]) for c in tops[:6]) + (" ..." if len(tops) > 6 else "")
        raise InputError(f"layout {path}: has {len(tops)} top cells ({shown}); choose one by name")
    return tops[0]


def _is_rectangle(v: np.ndarray) -> bool:
    if len(v) != 4:
        return False
    xs, ys = np.unique(v[:, 0]), np.unique(v[:, 1])
    return (len(xs) == 2 and len(ys) == 2
            and {(float(a), float(b)) for a, b in v} == {(float(a), float(b)) for a in xs for b in ys})


def read_layout_gates(path, layers: Sequence[LayerChoice], *, scale: float, origin=(0.0, 0.0),
                      voltage=0.0, cell: str | None = None) -> tuple:
    """The polygons of ``layers`` in ``cell`` (default: the only top cell) as a tuple of GateSpec.

    Each gate is labelled ``L<layer>/<datatype> #<n>`` (n counts from 1 per layer) and held at
    ``voltage`` (volts; a number or a parameter name).  Raises :class:`InputError` for a file that
    is not GDSII, an empty layout, a layer with no polygons, an outline with more than
    :data:`MAX_GATE_VERTICES` vertices or one that crosses itself, or a non-positive scale.
    """
    p = Path(os.fspath(path))
    if not layers:
        raise InputError(f"layout {p}: choose at least one layer")
    try:
        s = float(scale)
        ou, ov = (float(c) for c in origin)
    except (TypeError, ValueError):
        raise InputError("layout scale and origin: expected numbers") from None
    if not (np.isfinite(s) and s > 0):
        raise InputError(f"layout scale: expected a positive number (project length units per layout "
                         f"unit), got {scale!r}")
    if not (np.isfinite(ou) and np.isfinite(ov)):
        raise InputError(f"layout origin: expected finite numbers, got {tuple(origin)!r}")
    lib = _read_library(p)
    top = _pick_cell(lib, p, cell)
    everything = top.get_polygons()
    if not everything:
        raise InputError(f"layout {p}: cell {top.name[:40]!r} holds no polygons (an empty layout)")
    present = sorted({(q.layer, q.datatype) for q in everything})
    gates, taken = [], set()
    for choice in layers:
        matching = [k for k, q in enumerate(everything) if q.layer == choice.layer
                    and (choice.datatype is None or q.datatype == choice.datatype)]
        chosen = [everything[k] for k in matching if k not in taken]      # a layer named twice: once
        taken.update(matching)
        if matching and not chosen:
            continue
        if not matching:
            listing = ", ".join(f"{a}/{b}" for a, b in present[:20]) + (" ..." if len(present) > 20 else "")
            raise InputError(f"layout {p}: layer {choice} has no polygons; the layout's layers are {listing}")
        for n, q in enumerate(chosen, start=1):
            label = f"L{q.layer}/{q.datatype} #{n}"
            raw = np.asarray(q.points, dtype=float)
            if len(raw) > MAX_GATE_VERTICES:
                raise InputError(f"layout {p}: polygon {label} has {len(raw)} vertices, more than the "
                                 f"{MAX_GATE_VERTICES} a gate may have; simplify it in the layout")
            v = s * (raw - np.array([ou, ov]))
            try:
                validate_polygon(v, label=label)
            except InputError as exc:
                raise InputError(f"layout {p}: {exc}") from None
            if _is_rectangle(v):
                rect = (float(v[:, 0].min()), float(v[:, 1].min()), float(v[:, 0].max()), float(v[:, 1].max()))
                gates.append(GateSpec(label=label, voltage=voltage, rectangle=rect))
            else:
                gates.append(GateSpec(label=label, voltage=voltage,
                                      polygon=tuple((float(a), float(b)) for a, b in v)))
            if len(gates) > MAX_GATES:
                raise InputError(f"layout {p}: the chosen layers hold more than {MAX_GATES} polygons")
    return tuple(gates)


def _gate_bounds(gates) -> tuple:
    xs, ys = [], []
    for g in gates:
        if g.rectangle is not None:
            xs += [g.rectangle[0], g.rectangle[2]]
            ys += [g.rectangle[1], g.rectangle[3]]
        else:
            xs += [v[0] for v in g.polygon]
            ys += [v[1] for v in g.polygon]
    return min(xs), min(ys), max(xs), max(ys)


def project_with_gates(gates: Sequence[GateSpec], *, depth=None, into=None, label: str = "gates from layout",
                       title: str = "Gates from a layout"):
    """``into`` (a 2D Project) with a new gates term holding ``gates``, or a new project around them.

    ``depth`` (length unit) is the electron gas's depth below the gates; when None it is taken
    from the first gates term of ``into``.  A new project is a GaAs electron gas on a 64 x 64 grid
    covering the gates' extent with a margin of a quarter of it (and at least twice the depth)
    on each side, for the user to adjust.
    """
    from dataclasses import replace

    from .grid import Grid
    from .project import GatesTerm, MaterialSpec, Project, project_from_dict, project_to_dict
    if not gates:
        raise InputError("no gates to add")
    if into is not None and into.grid.ndim != 2:
        raise InputError(f"surface gates need a 2D grid; the project's grid is {into.grid.ndim}D")
    if depth is None and into is not None:
        depth = next((t.depth for t in into.potential if isinstance(t, GatesTerm)), None)
    if depth is None:
        raise InputError("give the depth of the electron gas below the gates (the project has no gates term "
                         "to take it from)")
    term = GatesTerm(label=label, depth=depth, gates=tuple(gates))
    if into is not None:
        labels = {t.label for t in into.potential}
        k = 2
        while term.label in labels:
            term = replace(term, label=f"{label} ({k})")
            k += 1
        out = replace(into, potential=tuple(into.potential) + (term,))
    else:
        x0, y0, x1, y1 = _gate_bounds(gates)
        pad_x = max(0.25 * (x1 - x0), 2.0 * float(depth))
        pad_y = max(0.25 * (y1 - y0), 2.0 * float(depth))
        grid = Grid([x0 - pad_x, y0 - pad_y], [x1 + pad_x, y1 + pad_y], [64, 64])
        out = Project(title=title, units="semiconductor", material=MaterialSpec(name="GaAs"), grid=grid,
                      potential=(term,), electric_field=(0.0, 0.0),
                      notes="Gates imported from a GDSII layout; adjust the grid, depth and voltages.")
    # validate the whole project as a file would be (formulas, polygons, depth)
    return project_from_dict(project_to_dict(out), base_dir=out.base_dir)
