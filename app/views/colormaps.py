"""Colour maps of the views, chosen once so that every view speaks the same colour language.

* densities |psi|^2: ``viridis`` (perceptually uniform, readable in grey and by colour-blind
  readers; van der Walt & Smith, matplotlib 1.5, 2015);
* potentials: ``cividis`` (uniform and optimised for colour-vision deficiency;
  Nunez, Anderton & Renslow, PLoS ONE 13, e0199239 (2018)), so a potential map is never
  mistaken for a density;
* signed wavefunctions: ``CET-CBD1``, a colour-blind-safe diverging map (blue - grey - yellow;
  P. Kovesi, "Good colour maps: how to design them", arXiv:1509.03700 (2015));
* phases of complex wavefunctions: ``CET-CBC1``, the colour-blind-safe cyclic map of the same
  set, with brightness carrying |psi|.

Colour never carries meaning alone: signed maps also get a nodal line (psi = 0), and phase maps a
legend in words.  Tracks in a sweep use the Okabe-Ito palette (Okabe & Ito, "Color Universal
Design", 2008) *and* a dash pattern.
"""
from __future__ import annotations

from functools import cache

import numpy as np
import pyqtgraph as pg

__all__ = ["DENSITY", "POTENTIAL", "SIGNED", "PHASE", "colormap", "lookup_table", "to_rgba",
           "phase_rgba", "TRACK_COLOURS", "track_pen", "ACCENT"]

DENSITY = "viridis"
POTENTIAL = "cividis"
SIGNED = "CET-CBD1"
PHASE = "CET-CBC1"

#: Okabe-Ito qualitative palette (colour-blind safe), without black.
TRACK_COLOURS = ("#0072B2", "#E69F00", "#009E73", "#CC79A7", "#56B4E9", "#D55E00", "#F0E442", "#000000")
_DASHES = (None, [6, 3], [1, 3], [8, 3, 1, 3])

#: Colour of selections and annotations (a dark orange-red that stands out on viridis and cividis).
ACCENT = "#D55E00"


@cache
def colormap(name: str) -> pg.ColorMap:
    """The pyqtgraph colour map ``name`` (bundled with pyqtgraph; no network)."""
    return pg.colormap.get(name)


@cache
def lookup_table(name: str, points: int = 256) -> np.ndarray:
    """``(points, 4)`` uint8 RGBA table of a colour map (read-only)."""
    lut = np.asarray(colormap(name).getLookupTable(0.0, 1.0, points, alpha=True), dtype=np.uint8)
    lut.setflags(write=False)
    return lut


def to_rgba(values: np.ndarray, name: str, lo: float, hi: float) -> np.ndarray:
    """Map an array to RGBA uint8 (shape ``values.shape + (4,)``) with the colour map ``name``."""
    lut = lookup_table(name)
    span = hi - lo if hi > lo else 1.0
    idx = np.clip((np.asarray(values, dtype=float) - lo) / span, 0.0, 1.0)
    return lut[np.rint(idx * (len(lut) - 1)).astype(np.intp)]


def phase_rgba(psi: np.ndarray) -> np.ndarray:
    """RGBA uint8 picture of a complex array: hue from the cyclic map by phase, brightness by |psi|."""
    psi = np.asarray(psi)
    amp = np.abs(psi)
    top = float(amp.max()) if amp.size else 0.0
    phase = (np.angle(psi) + np.pi) / (2.0 * np.pi)              # 0..1
    rgba = to_rgba(phase, PHASE, 0.0, 1.0).astype(float)
    bright = amp / top if top > 0 else amp
    rgba[..., :3] *= bright[..., None]
    rgba[..., 3] = 255.0
    return rgba.astype(np.uint8)


def track_pen(index: int, width: float = 2.0, selected: bool = False):
    """Pen of sweep track ``index``: a colour of the Okabe-Ito set plus a dash pattern (8 x 4 kinds)."""
    colour = TRACK_COLOURS[index % len(TRACK_COLOURS)]
    pen = pg.mkPen(colour, width=width * (1.8 if selected else 1.0))
    dash = _DASHES[(index // len(TRACK_COLOURS)) % len(_DASHES)]
    if dash is not None:
        pen.setDashPattern(dash)
    return pen
