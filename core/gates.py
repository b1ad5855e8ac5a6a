"""Bare potential of surface gates above a buried electron gas (pinned-surface model).

Model (J. H. Davies, I. A. Larkin, E. V. Sukhorukov, J. Appl. Phys. 77, 4504 (1995)):
the surface ``z = 0`` of a uniform dielectric is held at ``V_g`` under each gate and at
0 V everywhere else.  At depth ``d`` below the surface the potential is

    phi(x, y) = V_g * Omega(x, y) / (2 pi),

where ``Omega`` is the solid angle the gate subtends from the point.  This is the
unscreened ("bare") potential; the electron energy is ``U = -e * phi``.

All functions here return the potential **per volt** of gate voltage (a number between
-1 and 1, dimensionless) except :func:`gates_potential`, which returns volts.  Lengths
(coordinates, gate outlines, depth) may be in any unit as long as it is the same for all.

Coordinates broadcast: pass ``x`` and ``y`` as scalars, equal-shape arrays or the sparse
arrays of ``numpy.meshgrid(..., indexing="ij", sparse=True)`` (e.g. ``Grid.mesh_sparse()``).
"""
from __future__ import annotations

import hashlib
import math
import threading
from collections import OrderedDict
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np

from .errors import InputError
from .limits import MAX_POLYGON_VERTICES

__all__ = [
    "Gate",
    "cached_unit_potential",
    "clear_unit_cache",
    "gates_potential",
    "polygon_potential",
    "rectangle_potential",
    "validate_polygon",
]

_TWO_PI = 2.0 * math.pi


# -- argument checks -------------------------------------------------------------------------
def _check_depth(depth) -> float:
    try:
        d = float(depth)
    except (TypeError, ValueError):
        raise InputError(f"gate depth: expected a positive number, got {depth!r}") from None
    if not (math.isfinite(d) and d > 0.0):
        raise InputError(f"gate depth: expected a positive finite number, got {depth!r}")
    return d


def _check_number(value, what: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{what}: expected a finite number, got {value!r}") from None
    if not math.isfinite(v):
        raise InputError(f"{what}: expected a finite number, got {value!r}")
    return v


def _coordinates(x, y) -> tuple[np.ndarray, np.ndarray]:
    try:
        xa = np.asarray(x, dtype=float)
        ya = np.asarray(y, dtype=float)
    except (TypeError, ValueError):
        raise InputError("gate potential: x and y must be real numbers or arrays of them") from None
    try:
        np.broadcast_shapes(xa.shape, ya.shape)
    except ValueError:
        raise InputError(f"gate potential: x of shape {xa.shape} and y of shape {ya.shape} "
                         f"do not broadcast together") from None
    return xa, ya


def _where(label: str) -> str:
    return f"gate {label!r}" if label else "gate"


# -- rectangle (closed form) -----------------------------------------------------------------
def rectangle_potential(x, y, *, left: float, right: float, bottom: float, top: float,
                        depth: float) -> np.ndarray:
    """Potential per volt at depth ``depth`` below a rectangular gate ``left<x'<right, bottom<y'<top``.

    Closed form: the sum over the four corners of
    ``g(u, v) = atan2(u v, d sqrt(u^2 + v^2 + d^2)) / (2 pi)``,
    ``phi = g(x-L, y-B) + g(x-L, T-y) + g(R-x, y-B) + g(R-x, T-y)``.
    """
    d = _check_depth(depth)
    lo_x = _check_number(left, "rectangle left")
    hi_x = _check_number(right, "rectangle right")
    lo_y = _check_number(bottom, "rectangle bottom")
    hi_y = _check_number(top, "rectangle top")
    if not hi_x > lo_x:
        raise InputError(f"rectangle: right ({hi_x}) must be greater than left ({lo_x})")
    if not hi_y > lo_y:
        raise InputError(f"rectangle: top ({hi_y}) must be greater than bottom ({lo_y})")
    xa, ya = _coordinates(x, y)
    d2 = d * d

    def g(u, v):
        return np.arctan2(u * v, d * np.sqrt(u * u + v * v + d2))

    ul, ur = xa - lo_x, hi_x - xa          # shape of x
    vb, vt = ya - lo_y, hi_y - ya          # shape of y
    total = g(ul, vb) + g(ul, vt) + g(ur, vb) + g(ur, vt)
    return np.asarray(total / _TWO_PI, dtype=float)


# -- polygon ---------------------------------------------------------------------------------
def _signed_area(v: np.ndarray) -> float:
    """Shoelace area, positive for counter-clockwise vertices (computed about the centroid)."""
    c = v - v.mean(axis=0)
    xs, ys = c[:, 0], c[:, 1]
    return 0.5 * float(np.sum(xs * np.roll(ys, -1) - np.roll(xs, -1) * ys))


def _orient(p, q, r) -> float:
    return (q[0] - p[0]) * (r[1] - p[1]) - (q[1] - p[1]) * (r[0] - p[0])


def _edges_cross(v, n: int, i: int, j: int) -> bool:
    """True when non-adjacent edges ``i`` and ``j`` (edge k joins vertex k to k+1) properly cross."""
    if i == j or abs(i - j) in (1, n - 1):
        return False
    p1, p2, q1, q2 = v[i], v[(i + 1) % n], v[j], v[(j + 1) % n]
    return (_orient(p1, p2, q1) * _orient(p1, p2, q2) < 0) and (_orient(q1, q2, p1) * _orient(q1, q2, p2) < 0)


def _crossing_edges(v: np.ndarray) -> list[tuple[int, int]]:
    """A pair (i, j), i < j, of non-adjacent edges that properly cross, or [] when none does.

    Sweep line (M. I. Shamos and D. Hoey, "Geometric intersection problems", 17th Annual
    Symposium on Foundations of Computer Science, 208 (1976)): the edges met by a vertical line
    moving left to right are kept ordered by height; an edge is tested only against its
    neighbours in that order when it enters or leaves, so the leftmost crossing is always found
    with O(n log n) comparisons (plus list moves that are memory copies).
    """
    n = len(v)
    pts = [(float(x), float(y)) for x, y in v]
    left, right = {}, {}
    events = []
    for k in range(n):
        a, b = pts[k], pts[(k + 1) % n]
        if a == b:
            continue                          # a zero-length edge can only touch
        lo, hi = (a, b) if a < b else (b, a)
        left[k], right[k] = lo, hi
        events.append((lo, 1, k))             # at one point: exits before entries
        events.append((hi, 0, k))
    events.sort()

    def height(k, px, py):
        (x1, y1), (x2, y2) = left[k], right[k]
        if x1 == x2:                          # vertical: met along its length
            return min(max(py, y1), y2)
        if px == x1:
            return y1
        if px == x2:
            return y2
        return y1 + (y2 - y1) * (px - x1) / (x2 - x1)

    def slope(k):
        (x1, y1), (x2, y2) = left[k], right[k]
        return math.inf if x1 == x2 else (y2 - y1) / (x2 - x1)

    def position(status, k, px, py, sign):
        """Index at which edge k belongs in the status: by height at the sweep point, then by slope
        (``sign`` +1: the order just right of the point, for an entry; -1: just left, for an exit)."""
        hk, sk = height(k, px, py), sign * slope(k)
        lo, hi = 0, len(status)
        while lo < hi:
            mid = (lo + hi) // 2
            t = status[mid]
            ht = height(t, px, py)
            if ht < hk or (ht == hk and sign * slope(t) < sk):
                lo = mid + 1
            else:
                hi = mid
        return lo

    def found(i, j):
        return [(min(i, j), max(i, j))] if _edges_cross(pts, n, i, j) else None

    status: list = []
    for (px, py), kind, k in events:
        if kind == 1:
            at = position(status, k, px, py, 1)
            status.insert(at, k)
            for nb in (at - 1, at + 1):
                if 0 <= nb < len(status):
                    hit = found(k, status[nb])
                    if hit:
                        return hit
        else:
            at = position(status, k, px, py, -1)
            probe = at
            while probe < min(at + 8, len(status)) and status[probe] != k:
                probe += 1                    # edges of equal height and slope: a few steps on
            at = probe if probe < len(status) and status[probe] == k else status.index(k)
            if 0 < at < len(status) - 1:
                hit = found(status[at - 1], status[at + 1])
                if hit:
                    return hit
            del status[at]
    return []


def validate_polygon(vertices, *, label: str = "") -> np.ndarray:
    """Check a gate outline and return it as a float array of shape ``(n, 2)``.

    Raises :class:`InputError` (naming the gate ``label``) for a wrong shape, fewer than
    three vertices, non-finite coordinates, zero area, or edges that cross each other.
    Edge ``k`` joins vertex ``k`` to vertex ``k+1`` (the last edge closes the outline);
    vertex numbers in messages start at 0.
    """
    where = _where(label)
    try:
        v = np.array(vertices, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"{where}: vertices must be a list of (x, y) number pairs") from None
    key = (v.shape, v.tobytes())
    known = _valid_outlines.get(key)
    if known is not None:              # checked before (a voltage slider rebuilds the same gates)
        return known
    if v.ndim != 2 or v.shape[1] != 2:
        raise InputError(f"{where}: vertices must have shape (n, 2), got {v.shape}")
    n = v.shape[0]
    if n < 3:
        raise InputError(f"{where}: a polygon needs at least 3 vertices, got {n}")
    bad = np.argwhere(~np.isfinite(v))
    if bad.size:
        k = int(bad[0, 0])
        raise InputError(f"{where}: vertex {k} has a non-finite coordinate {tuple(v[k].tolist())}")
    if n > MAX_POLYGON_VERTICES:
        raise InputError(f"{where}: {n:,} vertices; a polygon gate has at most {MAX_POLYGON_VERTICES:,}")
    crossings = _crossing_edges(v)
    if crossings:
        s, t = crossings[0]
        raise InputError(f"{where}: outline intersects itself: edge {s} (vertex {s}->{(s + 1) % n}) crosses "
                         f"edge {t} (vertex {t}->{(t + 1) % n})")
    extent = float(np.max(np.ptp(v, axis=0)))
    area = _signed_area(v)
    if extent == 0.0 or abs(area) <= 1e-12 * extent * extent:
        raise InputError(f"{where}: polygon has zero area (all vertices on one line or point)")
    v.setflags(write=False)
    if len(_valid_outlines) >= 4096:
        _valid_outlines.clear()
    _valid_outlines[key] = v
    return v


#: outlines that passed validate_polygon, by their exact coordinates (read-only arrays)
_valid_outlines: dict = {}


def polygon_potential(x, y, vertices, *, depth: float) -> np.ndarray:
    """Potential per volt at depth ``depth`` below a polygonal gate (either orientation).

    Solid-angle sum after A. Van Oosterom and J. Strackee, IEEE Trans. Biomed. Eng.
    BME-30, 125 (1983), over the triangles that join the point's foot on the surface to
    each edge.  With vertices counter-clockwise, ``u_k = x_k - x``, ``v_k = y_k - y``,
    ``R_k = sqrt(u_k^2 + v_k^2 + d^2)``::

        phi = (1/pi) sum_k atan2(u_k v_{k+1} - u_{k+1} v_k,
                                 R_k R_{k+1} + d (R_k + R_{k+1}) + u_k u_{k+1} + v_k v_{k+1} + d^2)

    Work and memory scale with one vertex pair at a time (a few arrays of the broadcast
    shape of ``x`` and ``y``).
    """
    d = _check_depth(depth)
    v = validate_polygon(vertices)
    if _signed_area(v) < 0.0:
        v = v[::-1]
    xa, ya = _coordinates(x, y)
    d2 = d * d
    shape = np.broadcast_shapes(xa.shape, ya.shape)
    total = np.zeros(shape, dtype=float)
    u0 = v[0, 0] - xa
    v0 = v[0, 1] - ya
    r0 = np.sqrt(u0 * u0 + v0 * v0 + d2)
    uk, vk, rk = u0, v0, r0
    n = len(v)
    for k in range(n):
        if k + 1 < n:
            un = v[k + 1, 0] - xa
            vn = v[k + 1, 1] - ya
            rn = np.sqrt(un * un + vn * vn + d2)
        else:
            un, vn, rn = u0, v0, r0
        numerator = uk * vn - un * vk
        denominator = rk * rn + d * (rk + rn) + uk * un + vk * vn + d2
        total += np.arctan2(numerator, denominator)
        uk, vk, rk = un, vn, rn
    return total / math.pi


# -- gates -----------------------------------------------------------------------------------
def _rectangle_bounds(v: np.ndarray):
    """(left, right, bottom, top) if the outline is an axis-aligned rectangle, else None."""
    if len(v) != 4:
        return None
    xs = np.unique(v[:, 0])
    ys = np.unique(v[:, 1])
    if len(xs) != 2 or len(ys) != 2:
        return None
    corners = {(float(a), float(b)) for a, b in v}
    if corners != {(float(a), float(b)) for a in xs for b in ys}:
        return None
    return float(xs[0]), float(xs[1]), float(ys[0]), float(ys[1])


@dataclass(frozen=True, eq=False)
class Gate:
    """A surface gate: a polygon outline (``(n, 2)`` array, length unit) held at ``voltage`` volts."""

    label: str
    voltage: float
    vertices: np.ndarray

    def __post_init__(self):
        if not isinstance(self.label, str):
            raise InputError(f"gate label: expected text, got {self.label!r}")
        volts = _check_number(self.voltage, f"{_where(self.label)} voltage")
        object.__setattr__(self, "voltage", volts)
        object.__setattr__(self, "vertices", validate_polygon(self.vertices, label=self.label))

    @classmethod
    def from_rectangle(cls, label: str, voltage: float, corners: Sequence[float]) -> Gate:
        """A rectangular gate from two opposite corners ``(x0, y0, x1, y1)`` (any order)."""
        try:
            x0, y0, x1, y1 = (float(c) for c in corners)
        except (TypeError, ValueError):
            raise InputError(f"{_where(label)}: rectangle needs four numbers (x0, y0, x1, y1), "
                             f"got {corners!r}") from None
        for name, c in zip(("x0", "y0", "x1", "y1"), (x0, y0, x1, y1)):
            if not math.isfinite(c):
                raise InputError(f"{_where(label)}: rectangle {name} is not finite ({c})")
        if x0 == x1 or y0 == y1:
            raise InputError(f"{_where(label)}: rectangle ({x0}, {y0}, {x1}, {y1}) has zero width or height")
        left, right = sorted((x0, x1))
        bottom, top = sorted((y0, y1))
        vertices = [(left, bottom), (right, bottom), (right, top), (left, top)]
        return cls(label, voltage, np.array(vertices, dtype=float))

    @property
    def rectangle(self):
        """``(left, right, bottom, top)`` when the gate is an axis-aligned rectangle, else ``None``."""
        return _rectangle_bounds(self.vertices)

    def unit_potential(self, x, y, *, depth: float) -> np.ndarray:
        """Potential per volt of this gate's outline (closed form for axis-aligned rectangles)."""
        rect = self.rectangle
        if rect is not None:
            left, right, bottom, top = rect
            return rectangle_potential(x, y, left=left, right=right, bottom=bottom, top=top, depth=depth)
        return polygon_potential(x, y, self.vertices, depth=depth)


#: Unit potentials depend only on a gate's outline, the depth and the points, not on the voltage:
#: they are kept (least recently used first out, within this many bytes) so that moving a voltage
#: slider re-sums cached arrays instead of re-evaluating the closed forms (256^2, five gates:
#: 41 ms -> under 1 ms).
UNIT_CACHE_BYTES = 256 * 2**20
_unit_cache: OrderedDict[tuple, np.ndarray] = OrderedDict()
_unit_cache_bytes = 0
_unit_cache_lock = threading.Lock()


def _array_key(a: np.ndarray) -> tuple:
    a = np.ascontiguousarray(a, dtype=float)
    return a.shape, hashlib.blake2b(a.tobytes(), digest_size=16).digest()


def clear_unit_cache() -> None:
    """Forget the cached unit potentials."""
    global _unit_cache_bytes
    with _unit_cache_lock:
        _unit_cache.clear()
        _unit_cache_bytes = 0


def cached_unit_potential(gate: Gate, x: np.ndarray, y: np.ndarray, depth: float,
                          keys: tuple = ()) -> np.ndarray:
    """``gate.unit_potential(x, y, depth=depth)``, from the cache when the same outline, depth and
    points were asked for before.  The array returned is read-only (shared between callers)."""
    global _unit_cache_bytes
    key = (_array_key(gate.vertices), float(depth)) + (keys or (_array_key(x), _array_key(y)))
    with _unit_cache_lock:
        hit = _unit_cache.get(key)
        if hit is not None:
            _unit_cache.move_to_end(key)
            return hit
    value = np.asarray(gate.unit_potential(x, y, depth=depth), dtype=float)
    value.flags.writeable = False
    if value.nbytes <= UNIT_CACHE_BYTES // 4:
        with _unit_cache_lock:
            if key not in _unit_cache:
                _unit_cache[key] = value
                _unit_cache_bytes += value.nbytes
            while _unit_cache_bytes > UNIT_CACHE_BYTES and _unit_cache:
                _k, old = _unit_cache.popitem(last=False)
                _unit_cache_bytes -= old.nbytes
    return value


def gates_potential(gates: Iterable[Gate], x, y, *, depth: float) -> np.ndarray:
    """Bare potential in volts: the sum of ``V_g * unit potential`` over ``gates``.

    Gates must not overlap (the pinned-surface model holds each surface point at one
    voltage); overlapping outlines simply add.
    """
    d = _check_depth(depth)
    xa, ya = _coordinates(x, y)
    total = np.zeros(np.broadcast_shapes(xa.shape, ya.shape), dtype=float)
    points = None
    for k, gate in enumerate(gates):
        if not isinstance(gate, Gate):
            raise InputError(f"gates[{k}]: expected a Gate, got {type(gate).__name__}")
        if gate.voltage != 0.0:
            if points is None:
                points = (_array_key(xa), _array_key(ya))      # hashed once for all gates
            total += gate.voltage * cached_unit_potential(gate, xa, ya, d, points)
    return total
