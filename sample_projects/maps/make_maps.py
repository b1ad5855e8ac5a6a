"""Regenerate the invented potential map used by imported_map_dot.json.

The map stands in for the export of an electrostatics solver: a smooth
conduction-band profile (meV) on a 121 x 81 node grid covering
x in [-300, 300] nm, y in [-200, 200] nm, ends included.  It is an invented
scenario (a dot squeezed by a split gate, with a weak disorder ripple), made
with plain numpy so anyone can reproduce it:

    python sample_projects/maps/make_maps.py
"""
from pathlib import Path

import numpy as np

x = np.linspace(-300.0, 300.0, 121)
y = np.linspace(-200.0, 200.0, 81)
X, Y = np.meshgrid(x, y, indexing="ij")
band = (12.0 * (1 - np.exp(-(X / 140.0) ** 2)) + 9.0 * (Y / 90.0) ** 2
        - 2.0 * np.exp(-((X - 35.0) ** 2 + (Y + 10.0) ** 2) / (2 * 60.0**2))
        + 0.35 * np.sin(X / 37.0) * np.cos(Y / 29.0))
np.save(Path(__file__).with_name("split_gate_dot.npy"), band.astype(np.float64), allow_pickle=False)
