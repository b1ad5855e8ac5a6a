"""Isosurfaces of 3D arrays: the mesh (skimage marching cubes) and a lazily created OpenGL view.

OpenGL widgets cannot be made on Qt's ``offscreen`` platform (they may crash the process), so
:class:`IsosurfaceWidget` creates its ``pyqtgraph.opengl.GLViewWidget`` only when it is first
shown *and* :func:`gl_available` says a context can be made; otherwise it shows a plain note.
"""
from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from PySide6 import QtCore, QtGui, QtWidgets

from .common import axis_title, pretty_unit

__all__ = ["surface_mesh", "level_enclosing", "gl_available", "share_gl_contexts", "IsosurfaceWidget", "Surface"]

_NO_GL_PLATFORMS = ("offscreen", "minimal", "vnc", "linuxfb")
_GL_STATE: dict = {}


def share_gl_contexts() -> bool:
    """Ask Qt to let all OpenGL widgets share one set of GL objects (must run before the QApplication
    exists).  pyqtgraph compiles its shaders once per process, so a second GL view (the potential's
    and the states' isosurfaces) can only use them if the contexts share.  Returns whether it is on."""
    attr = QtCore.Qt.ApplicationAttribute.AA_ShareOpenGLContexts
    if QtCore.QCoreApplication.instance() is None:
        QtCore.QCoreApplication.setAttribute(attr, True)
    return QtCore.QCoreApplication.testAttribute(attr)


def surface_mesh(volume: np.ndarray, level: float, grid) -> tuple | None:
    """Vertices (physical coordinates, length unit) and triangles of ``volume == level``.

    ``volume`` is indexed ``[x, y, z]`` on ``grid``.  Returns ``None`` when the level lies outside
    the values of the array (no surface); never raises for that case.
    """
    from skimage.measure import marching_cubes
    vol = np.asarray(volume, dtype=float)
    if vol.ndim != 3 or min(vol.shape) < 2:
        raise ValueError(f"an isosurface needs a 3D array, got shape {vol.shape}")
    lo, hi = float(np.nanmin(vol)), float(np.nanmax(vol))
    if not (lo < level < hi):
        return None
    verts, faces, _normals, _values = marching_cubes(vol, level=float(level), spacing=tuple(grid.spacing))
    origin = np.array([ax[0] for ax in grid.axes], dtype=float)
    return verts + origin[None, :], faces


def level_enclosing(density: np.ndarray, fraction: float) -> float:
    """The density value whose super-level set {rho >= value} holds ``fraction`` of sum(rho).

    Used to pick the |psi|^2 isosurface that encloses, e.g., half the probability; a presentation
    choice, independent of the grid's volume element.
    """
    rho = np.sort(np.asarray(density, dtype=float).ravel())[::-1]
    total = rho.sum()
    if total <= 0:
        return 0.0
    f = min(max(float(fraction), 1e-6), 1.0 - 1e-9)
    k = int(np.searchsorted(np.cumsum(rho), f * total))
    return float(rho[min(k, rho.size - 1)])


def gl_available() -> bool:
    """True if an OpenGL context can be created here (never on the offscreen platform)."""
    app = QtGui.QGuiApplication.instance()
    if app is None:
        return False
    platform = app.platformName()
    if platform in _NO_GL_PLATFORMS:
        return False
    if platform in _GL_STATE:
        return _GL_STATE[platform]
    ok = False
    try:
        ctx = QtGui.QOpenGLContext()
        if ctx.create():
            surface = QtGui.QOffscreenSurface()
            surface.setFormat(ctx.format())
            surface.create()
            if surface.isValid() and ctx.makeCurrent(surface):
                ok = True
                ctx.doneCurrent()
    except Exception:  # noqa: BLE001 - any failure here just means "no GL"
        ok = False
    _GL_STATE[platform] = ok
    return ok


class Surface:
    """One surface to draw: a volume, a level, an RGBA colour (0..1) and a legend text."""

    def __init__(self, volume: np.ndarray, level: float, colour: Sequence[float], legend: str):
        self.volume = volume
        self.level = float(level)
        self.colour = tuple(float(c) for c in colour)
        self.legend = legend


class IsosurfaceWidget(QtWidgets.QWidget):
    """A rotatable 3D view of isosurfaces inside the grid's box, made lazily (see module notes)."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.gl_view = None                # pyqtgraph.opengl.GLViewWidget once created
        self._grid = None
        self._surfaces: list = []
        self._units = ("", "")
        self._items: list = []
        self.meshes: list = []             # (vertices, faces) actually drawn, for tests and export
        lay = QtWidgets.QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        self.note = QtWidgets.QLabel("The 3D isosurface appears here when the window is shown on a "
                                     "display with OpenGL. The slices show the same data.")
        self.note.setWordWrap(True)
        self.note.setAlignment(QtCore.Qt.AlignmentFlag.AlignCenter)
        self.legend = QtWidgets.QLabel("")
        self.legend.setWordWrap(True)
        lay.addWidget(self.note, 1)
        lay.addWidget(self.legend)
        self.setMinimumSize(200, 200)

    # -- public -----------------------------------------------------------------------------
    def set_scene(self, grid, surfaces: Sequence[Surface], length_unit: str = "") -> None:
        """Replace what is drawn.  Surfaces whose level is outside their volume are skipped."""
        self._grid = grid
        self._surfaces = list(surfaces)
        self._units = (length_unit, "")
        self.meshes = []
        lines = []
        for s in self._surfaces:
            mesh = surface_mesh(s.volume, s.level, grid)
            self.meshes.append(mesh)
            lines.append(s.legend if mesh is not None else f"{s.legend}: no surface at this level")
        box = f"Grey box: the grid, {grid.upper[0] - grid.lower[0]:.4g} × {grid.upper[1] - grid.lower[1]:.4g} × " \
              f"{grid.upper[2] - grid.lower[2]:.4g} {pretty_unit(length_unit)} (x × y × z). Drag to turn it."
        self.legend.setText("   ·   ".join(lines) + "<br>" + box)
        self._draw()

    def ensure_gl(self) -> bool:
        """Create the OpenGL view if possible; returns whether it exists."""
        if self.gl_view is not None:
            return True
        if not gl_available():
            return False
        import pyqtgraph.opengl as gl
        self.gl_view = gl.GLViewWidget()
        self.gl_view.setBackgroundColor("w")
        self.gl_view.setMinimumSize(200, 200)
        self.layout().replaceWidget(self.note, self.gl_view)
        self.note.hide()
        self._draw()
        return True

    def showEvent(self, event):  # noqa: N802 - Qt override
        super().showEvent(event)
        self.ensure_gl()

    # -- drawing ----------------------------------------------------------------------------
    def _draw(self) -> None:
        if self.gl_view is None or self._grid is None:
            return
        import pyqtgraph.opengl as gl
        from pyqtgraph import Vector
        for item in self._items:
            self.gl_view.removeItem(item)
        self._items = []
        grid = self._grid
        lo = np.array([ax[0] for ax in grid.axes])
        hi = np.array([ax[-1] for ax in grid.axes])
        size = hi - lo
        box = gl.GLBoxItem(size=QtGui.QVector3D(*size), color=(90, 90, 90, 255))
        box.translate(*lo)
        self._items.append(box)
        for k, name in enumerate(("x", "y", "z")):
            pos = lo.copy()
            pos[k] = hi[k] + 0.08 * size.max()
            label = gl.GLTextItem(pos=pos, text=axis_title(name, self._units[0]), color=(30, 30, 30, 255))
            self._items.append(label)
        for s, mesh in zip(self._surfaces, self.meshes):
            if mesh is None:
                continue
            verts, faces = mesh
            md = gl.MeshData(vertexes=verts, faces=faces)
            item = gl.GLMeshItem(meshdata=md, smooth=True, color=s.colour, shader="shaded",
                                 glOptions="translucent" if s.colour[3] < 1 else "opaque")
            self._items.append(item)
        for item in self._items:
            self.gl_view.addItem(item)
        centre = (lo + hi) / 2
        self.gl_view.opts["center"] = Vector(*centre)
        self.gl_view.setCameraPosition(distance=2.2 * float(size.max()), elevation=25, azimuth=-60)
