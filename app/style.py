"""Look and start-up configuration shared by the window and its views."""
from __future__ import annotations

__all__ = ["configure_pyqtgraph", "share_gl_contexts",
           "CAUTION", "ERROR_COLOR", "OK_COLOR", "WARN_COLOR", "IMAGE_AXIS_ORDER"]

#: pyqtgraph image axis order used everywhere.  Wellscape arrays are indexed [x, y]
#: (``indexing="ij"``); with "col-major" pyqtgraph reads ``image[i, j]`` as column i (x) and
#: row j (y), so a potential or a state is passed to ``ImageItem`` as it is, never transposed.
IMAGE_AXIS_ORDER = "col-major"

CAUTION = ("Results come from an idealised effective-mass model. They are not settings for a real "
           "device or experiment, and do not replace your lab's own safety rules for high voltages, "
           "cryogenics or lasers.")

ERROR_COLOR = "#b00020"
WARN_COLOR = "#9a5b00"
OK_COLOR = "#1b6e3a"

_configured = False


def configure_pyqtgraph() -> None:
    """Set pyqtgraph's global options once (axis order, antialiasing, light background)."""
    global _configured
    if _configured:
        return
    import pyqtgraph as pg
    pg.setConfigOptions(imageAxisOrder=IMAGE_AXIS_ORDER, antialias=True, background="w", foreground="k")
    _configured = True


def share_gl_contexts() -> None:
    """Let every OpenGL view share one context, so that pyqtgraph's shader programs, compiled once,
    are valid in each of them (without it a second 3D view fails with "glUseProgram: invalid
    value"; pyqtgraph issues #1822, #2618 and #3455).  Must run before the QApplication exists;
    harmless afterwards (then it does nothing)."""
    from PySide6.QtCore import QCoreApplication, Qt
    if QCoreApplication.instance() is None:
        QCoreApplication.setAttribute(Qt.ApplicationAttribute.AA_ShareOpenGLContexts, True)
