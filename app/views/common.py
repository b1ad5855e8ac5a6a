"""Small pieces shared by the views: plots with unit-carrying axes, hints, number formatting.

No physics here: only presentation of what ``core`` computed.
"""
from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtGui, QtWidgets

__all__ = ["pretty_unit", "axis_title", "fmt", "fmt_energy", "make_plot", "HintStack", "image_rect",
           "view_units", "AXIS_NAMES", "density_unit", "sample_line", "SOLVE_KEY", "StaleNote", "stale_message",
           "grey_plot"]

AXIS_NAMES = ("x", "y", "z")


def pretty_unit(unit: str) -> str:
    """A unit as a reader expects to see it (``um`` -> ``µm``, ``h*kHz`` -> ``h·kHz``, ``1`` -> none);
    the one table is :data:`core.formatting.UNIT_TEXT`."""
    from core.formatting import pretty_unit as _pretty
    return _pretty(unit)


def axis_title(name: str, unit: str) -> str:
    """``"x [nm]"``; dimensionless quantities get no brackets."""
    u = pretty_unit(unit)
    return f"{name} [{u}]" if u else name


def density_unit(length_unit: str, ndim: int) -> str:
    """Unit of |psi|^2 on an ndim grid: ``nm⁻²``."""
    u = pretty_unit(length_unit)
    if not u:
        return ""
    return u + {1: "⁻¹", 2: "⁻²", 3: "⁻³"}[ndim]


def wave_unit(length_unit: str, ndim: int) -> str:
    """Unit of psi on an ndim grid: ``nm⁻¹`` in 2D, ``nm⁻³ᐟ²`` in 3D."""
    u = pretty_unit(length_unit)
    if not u:
        return ""
    return u + {1: "⁻¹ᐟ²", 2: "⁻¹", 3: "⁻³ᐟ²"}[ndim]


def fmt(value: float, digits: int = 5) -> str:
    """A number with ``digits`` significant figures, no exponent unless it is needed."""
    v = float(value)
    if not np.isfinite(v):
        return str(v)
    if v == 0.0:
        return "0"
    mag = abs(v)
    if 1e-3 <= mag < 1e6:
        decimals = max(0, digits - 1 - int(np.floor(np.log10(mag))))
        text = f"{v:.{decimals}f}"
        if "." in text:
            text = text.rstrip("0").rstrip(".")
        return text
    return f"{v:.{digits - 1}e}"


def fmt_energy(value: float, unit: str, digits: int = 5) -> str:
    u = pretty_unit(unit)
    return f"{fmt(value, digits)} {u}".rstrip()


def view_units(session):
    """The unit system to label with: the result's if there is one, else the project's."""
    from core.units import get_units
    result = getattr(session, "result", None)
    if result is not None:
        return result.units
    project = getattr(session, "project", None)
    return get_units(project.units if project is not None else "dimensionless")


def make_plot(parent: QtWidgets.QWidget | None = None, *, x_title: str = "", y_title: str = "",
              aspect_locked: bool = False) -> pg.PlotWidget:
    """A white PlotWidget with dark axes, unit-carrying titles and no SI prefix rescaling."""
    plot = pg.PlotWidget(parent=parent, background="w")
    item = plot.getPlotItem()
    for side in ("left", "bottom"):
        ax = item.getAxis(side)
        ax.setPen(pg.mkPen("#333333"))
        ax.setTextPen(pg.mkPen("#222222"))
        ax.enableAutoSIPrefix(False)
    item.setLabel("bottom", x_title, color="#222222")
    item.setLabel("left", y_title, color="#222222")
    item.showGrid(x=False, y=False)
    if aspect_locked:
        plot.setAspectLocked(True)
    plot.setMenuEnabled(False)
    return plot


def set_titles(plot: pg.PlotWidget, x_title: str | None, y_title: str | None) -> None:
    """Axis titles (None leaves an axis alone, so a hidden axis stays hidden)."""
    item = plot.getPlotItem()
    if x_title is not None:
        item.setLabel("bottom", x_title, color="#222222")
    if y_title is not None:
        item.setLabel("left", y_title, color="#222222")


def colorbar(image_items, plot: pg.PlotWidget, cmap) -> pg.ColorBarItem:
    """A non-interactive colour bar beside ``plot`` with dark, unprefixed tick labels."""
    bar = pg.ColorBarItem(colorMap=cmap, interactive=False, width=14, pen="#333333")
    bar.setImageItem(image_items, insert_in=plot.getPlotItem())
    ax = bar.getAxis("right")
    ax.setPen(pg.mkPen("#333333"))
    ax.setTextPen(pg.mkPen("#222222"))
    ax.enableAutoSIPrefix(False)
    return bar


def set_colorbar_title(bar: pg.ColorBarItem, name: str, unit: str = "", top: float | None = None) -> None:
    """Title ``name [unit]``; when the values (up to ``top``) are very small or large, the ticks are
    shown times a power of ten that goes into the unit: ``|ψ|² [10⁻⁴ nm⁻²]``."""
    factor, prefix = decade(top) if top is not None else (1.0, "")
    ax = bar.getAxis("right")
    ax.setScale(factor)
    u = pretty_unit(unit)
    title = f"{name} [{prefix}{u}]" if (u or prefix) else name
    ax.setLabel(title.replace(" ]", "]"), color="#222222")


class NumberBox(QtWidgets.QDoubleSpinBox):
    """A spin box for any real number, shown with 6 significant figures and no trailing zeros."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.setDecimals(12)
        self.setRange(-1e12, 1e12)
        self.setKeyboardTracking(False)

    def textFromValue(self, value: float) -> str:  # noqa: N802 - Qt override
        return fmt(value, 6)

    def valueFromText(self, text: str) -> float:  # noqa: N802 - Qt override
        try:
            return float(text.replace(self.suffix(), "").strip())
        except ValueError:
            return self.value()

    def validate(self, text: str, pos: int):
        body = text.replace(self.suffix(), "").strip()
        try:
            float(body)
            state = QtGui.QValidator.State.Acceptable
        except ValueError:
            state = QtGui.QValidator.State.Intermediate
        return state, text, pos


def decade(top: float) -> tuple:
    """``(factor, text)`` to show numbers up to ``top`` in readable units: values times ``factor``,
    unit prefixed by ``text`` (e.g. ``(1e4, "10⁻⁴ ")`` for a top of 3e-4); ``(1, "")`` when not needed."""
    top = abs(float(top))
    if not np.isfinite(top) or top == 0.0:
        return 1.0, ""
    e = int(np.floor(np.log10(top)))
    if -2 <= e <= 3:
        return 1.0, ""
    sup = str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹")
    return 10.0 ** (-e), f"10{str(e).translate(sup)} "


def contour_lines(data: np.ndarray, levels, axes: tuple, keep: np.ndarray | None = None) -> tuple:
    """Contour lines of a 2D array on grid ``axes`` as ``(x, y)`` arrays with NaN between pieces.

    Marching squares (skimage.measure.find_contours; vertices by linear interpolation along cell
    edges), mapped from indices to physical coordinates.  ``keep`` (boolean, data's shape) drops the
    vertices that fall in cells where it is False (used to hide nodal lines in a state's empty tails).
    """
    from skimage.measure import find_contours
    data = np.asarray(data, dtype=float)
    ax0, ax1 = (np.asarray(a, dtype=float) for a in axes)
    h0 = ax0[1] - ax0[0] if ax0.size > 1 else 1.0
    h1 = ax1[1] - ax1[0] if ax1.size > 1 else 1.0
    xs, ys = [], []
    for level in np.atleast_1d(levels):
        for piece in find_contours(data, float(level)):
            r, c = piece[:, 0], piece[:, 1]
            x = ax0[0] + r * h0
            y = ax1[0] + c * h1
            if keep is not None:
                ok = keep[np.clip(np.rint(r).astype(int), 0, data.shape[0] - 1),
                          np.clip(np.rint(c).astype(int), 0, data.shape[1] - 1)]
                x = np.where(ok, x, np.nan)
                y = np.where(ok, y, np.nan)
            xs += [x, [np.nan]]
            ys += [y, [np.nan]]
    if not xs:
        return np.array([]), np.array([])
    return np.concatenate(xs), np.concatenate(ys)


def clean_zero(value: float, scale: float) -> float:
    """Round-off (below 1e-9 of ``scale``) shown as exactly 0."""
    return 0.0 if abs(value) < 1e-9 * abs(scale) else float(value)


def image_rect(grid, axes=(0, 1)) -> QtCore.QRectF:
    """Physical rectangle covered by an image of the grid's ``axes`` (pixel centres on the nodes)."""
    a, b = axes
    xa, xb = grid.axes[a], grid.axes[b]
    ha, hb = grid.spacing[a], grid.spacing[b]
    return QtCore.QRectF(float(xa[0] - ha / 2), float(xb[0] - hb / 2),
                         float(xa[-1] - xa[0] + ha), float(xb[-1] - xb[0] + hb))


def sample_line(values: np.ndarray, axes: tuple, start, end, samples: int = 256) -> tuple:
    """Values of a 2D array on ``axes`` along the segment ``start`` -> ``end`` (linear interpolation).

    Returns ``(distance, values)``; points outside the grid are NaN.  Presentation only: the
    curve shown under a line cut.
    """
    from scipy.ndimage import map_coordinates
    start = np.asarray(start, dtype=float)
    end = np.asarray(end, dtype=float)
    t = np.linspace(0.0, 1.0, samples)
    pts = start[None, :] + t[:, None] * (end - start)[None, :]
    coords = []
    inside = np.ones(samples, dtype=bool)
    for k, ax in enumerate(axes):
        h = ax[1] - ax[0] if ax.size > 1 else 1.0
        c = (pts[:, k] - ax[0]) / h
        inside &= (c >= -1e-9) & (c <= ax.size - 1 + 1e-9)
        coords.append(c)
    vals = map_coordinates(np.asarray(values, dtype=float), coords, order=1, mode="nearest")
    vals[~inside] = np.nan
    dist = t * float(np.hypot(*(end - start)))
    return dist, vals


class HintStack(QtWidgets.QStackedWidget):
    """Shows either the content or a centred hint in plain words (never an error dialog)."""

    def __init__(self, content: QtWidgets.QWidget, hint: str, parent=None):
        super().__init__(parent)
        self.hint_label = QtWidgets.QLabel(hint)
        self.hint_label.setAlignment(QtCore.Qt.AlignmentFlag.AlignCenter)
        self.hint_label.setWordWrap(True)
        self.hint_label.setMargin(24)
        font = self.hint_label.font()
        font.setPointSizeF(font.pointSizeF() * 1.15)
        self.hint_label.setFont(font)
        self.hint_label.setStyleSheet("color: #444444;")
        self.content = content
        self.addWidget(self.hint_label)
        self.addWidget(content)
        self.setCurrentIndex(0)

    def show_hint(self, text: str | None = None) -> None:
        if text is not None:
            self.hint_label.setText(text)
        self.setCurrentIndex(0)

    def show_content(self) -> None:
        self.setCurrentIndex(1)

    @property
    def showing_hint(self) -> bool:
        return self.currentIndex() == 0

    @property
    def hint_text(self) -> str:
        return self.hint_label.text()


def status_label() -> QtWidgets.QLabel:
    """A one-line label for messages under a plot (errors in dark red, never a traceback)."""
    lab = QtWidgets.QLabel("")
    lab.setWordWrap(True)
    lab.setTextInteractionFlags(QtCore.Qt.TextInteractionFlag.TextSelectableByMouse)
    return lab


def show_message(label: QtWidgets.QLabel, text: str, *, error: bool = False) -> None:
    label.setStyleSheet("color: #9b1c1c;" if error else "color: #333333;")
    label.setText(text)


def text_item(text: str, *, anchor=(0, 0.5), colour: str = "#222222", html: bool = False) -> pg.TextItem:
    item = pg.TextItem(anchor=anchor, color=colour)
    if html:
        item.setHtml(text)
    else:
        item.setText(text)
    return item


def qcolor(hex_colour: str) -> QtGui.QColor:
    return QtGui.QColor(hex_colour)


#: the key of the window's Solve action (app.main uses it for the shortcut; messages name it)
SOLVE_KEY = "F5"
STALE_COLOUR = "#8a5a00"
#: plot background of a view whose results are out of date (greyed; the note says why)
STALE_BACKGROUND = "#ececec"


def stale_message(session, kind: str = "result", *, short: bool = False) -> str:
    """Plain words for results that are out of date (``kind`` "result" or "sweep"); "" when current.
    ``short``: the few words a view shows under the window's banner."""
    if kind == "sweep":
        if getattr(session, "sweep_result", None) is None or session.sweep_is_current:
            return ""
        what = ", ".join(session.sweep_changes())
        return (f"Out of date: this sweep ran on an earlier version of the project (changed since: {what}). "
                f"Run the sweep again to update it.")
    if getattr(session, "result", None) is None or session.result_is_current:
        return ""
    if getattr(session, "live_dragging", False) and getattr(session, "solving_current", False):
        return ""          # a slider drag: the live solve under way replaces the results in a moment
    what = ", ".join(session.result_changes())
    if short:
        return f"Out of date (changed: {what}) — greyed until solved again ({SOLVE_KEY})"
    if getattr(session, "solving", False):
        return f"Updating: the results shown are for an earlier version of the project (changed: {what})…"
    return (f"Out of date: the results shown are for an earlier version of the project (changed: {what}). "
            f"Press {SOLVE_KEY} to solve again.")


class StaleNote(QtWidgets.QLabel):
    """An amber line over a view whose results no longer match the project; hidden while they do."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.setObjectName("stale_note")
        self.setWordWrap(True)
        self.setStyleSheet(f"QLabel#stale_note {{ color: {STALE_COLOUR}; background: #fff4d6; "
                           f"border: 1px solid #e0b54a; padding: 3px 6px; font-weight: bold; }}")
        self.setTextInteractionFlags(QtCore.Qt.TextInteractionFlag.TextSelectableByMouse)
        self.hide()

    def show_text(self, text: str) -> None:
        self.setText(text)
        self.setVisible(bool(text))

    @property
    def stale(self) -> bool:
        return not self.isHidden()


def grey_plot(plot: pg.PlotWidget, stale: bool) -> None:
    """Grey a plot's background while what it shows is out of date."""
    plot.setBackground(STALE_BACKGROUND if stale else "w")
