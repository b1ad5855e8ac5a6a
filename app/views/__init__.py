"""The views of the desktop application: thin widgets over a ``Session`` that repaint on its signals.

Each view is built as ``View(session)``.  Views hold no physics: they draw what ``core`` computed and
send edits back to the session.  OpenGL widgets (3D isosurfaces) are made lazily, only when a 3D
grid is shown on a display that has OpenGL.
"""
from ._refcount_guard import guard as _guard_refcounts

_guard_refcounts()      # PySide6 6.12.0 on CPython 3.11 loses references to None/True (see the module)

from .isosurface import share_gl_contexts as _share_gl_contexts  # noqa: E402

_share_gl_contexts()    # before the QApplication exists: every GL view can use pyqtgraph's shaders

from .levels_view import LevelsView  # noqa: E402
from .potential_view import PotentialView  # noqa: E402
from .states_view import StatesView  # noqa: E402
from .sweep_view import SweepView  # noqa: E402

__all__ = ["PotentialView", "LevelsView", "StatesView", "SweepView"]
