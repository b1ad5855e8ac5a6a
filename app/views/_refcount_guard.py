"""Stop-gap for a reference-count bug of PySide6 6.12.0 on CPython 3.11.

Measured here: with PySide6 6.12.0 on CPython 3.11, every ``Signal.emit()`` hands back ``True``
without taking a reference, and many void methods (``setObjectName``, pyqtgraph's paint paths) do
the same with ``None``.  Each call then removes one reference from these singletons; after a few
thousand signals or repaints CPython aborts with "bool_dealloc / none_dealloc: deallocating ...".
PySide6 6.11.3 does not do this, and CPython >= 3.12 is immune (its singletons are immortal).

When -- and only when -- the bug is detected, :func:`guard` gives ``None``, ``True`` and ``False``
a very large reference count, which is what CPython 3.12 does for them.  The real fix is to avoid
that PySide6 release (``pyside6-essentials != 6.12.0`` on Python < 3.12); then this does nothing.
"""
from __future__ import annotations

import sys

__all__ = ["guard", "bug_detected"]

_PAD = 1 << 40
_DONE: list = []


def bug_detected() -> bool:
    """True if emitting a PySide6 signal loses a reference to ``True`` (CPython < 3.12 only)."""
    if sys.version_info >= (3, 12):
        return False
    from PySide6 import QtCore

    class _Probe(QtCore.QObject):
        fired = QtCore.Signal()

    probe = _Probe()
    before = sys.getrefcount(True)
    probe.fired.emit()
    return sys.getrefcount(True) < before


def guard() -> bool:
    """Pad the singletons' reference counts if the bug is present; returns whether it was."""
    if _DONE:
        return _DONE[0]
    found = bug_detected()
    if found:
        import ctypes
        for obj in (None, True, False):
            ctypes.c_ssize_t.from_address(id(obj)).value += _PAD
    _DONE.append(found)
    return found
