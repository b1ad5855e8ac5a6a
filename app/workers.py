"""Background jobs for the desktop window: solves and sweeps run off the GUI thread.

A :class:`Job` is a ``QThread`` that runs one piece of core work,
``work(progress=..., should_stop=...)``, and reports through Qt signals:

* ``progressed(stage, fraction)`` - throttled to about 20 per second, so a
  chatty solver cannot flood the GUI's event queue;
* ``solved(result)`` - the work returned;
* ``failed(message)`` - the work raised; the message is one readable line, never
  a traceback (unexpected errors also print their traceback on stderr for a
  bug report);
* ``cancelled()`` - :meth:`Job.cancel` was called; the work noticed through
  ``should_stop()`` and raised :class:`core.errors.Cancelled` (or finished
  anyway, in which case its result is dropped).

Exactly one of ``solved``/``failed``/``cancelled`` is emitted, then the
thread's own ``finished``.  The signals are emitted from the worker thread and
delivered to receivers in the GUI thread through queued connections, so slots
run on the GUI thread.

:func:`running_jobs` lists jobs whose thread is alive (the test suite fails a
test that leaves one behind).  Owners keep a strong reference to a job until
its ``finished`` signal arrived and call :meth:`Job.join` before dropping it.
"""
from __future__ import annotations

import os
import sys
import threading
import time
import traceback
import weakref
from collections.abc import Callable

from PySide6.QtCore import QThread, Signal

from core.errors import Cancelled, NotConverged, WellscapeError

__all__ = ["Job", "running_jobs", "compute_lock", "describe_error", "guard_singleton_refcounts"]


def guard_singleton_refcounts() -> bool:
    """Apply the views' guard against the PySide6 6.12.0 / CPython 3.11 reference-count bug
    (``app/views/_refcount_guard.py``: every signal emission loses a reference to True, many void
    calls one to None) before the session emits its first signal.

    The module is loaded by its path under its own package name, so that the views package's
    ``__init__`` (which imports every view, and through them this module) is not run from here.
    Returns whether the bug was found; False if the guard module is not there."""
    import importlib.util
    from pathlib import Path
    name = "app.views._refcount_guard"
    mod = sys.modules.get(name)
    if mod is None:
        path = Path(__file__).resolve().parent / "views" / "_refcount_guard.py"
        if not path.is_file():
            return False
        spec = importlib.util.spec_from_file_location(name, path)
        if spec is None or spec.loader is None:
            return False
        mod = importlib.util.module_from_spec(spec)
        sys.modules[name] = mod
        try:
            spec.loader.exec_module(mod)
        except Exception:      # noqa: BLE001 - a broken guard must not stop the application
            sys.modules.pop(name, None)
            return False
    try:
        return bool(mod.guard())
    except Exception:          # noqa: BLE001
        return False


guard_singleton_refcounts()

_JOBS: weakref.WeakSet[Job] = weakref.WeakSet()
_JOBS_LOCK = threading.Lock()


def running_jobs() -> list:
    """Jobs whose thread is still alive."""
    with _JOBS_LOCK:
        jobs = list(_JOBS)
    out = []
    for j in jobs:
        try:
            if j.isRunning():
                out.append(j)
        except RuntimeError:        # the C++ object is gone: not running
            pass
    return out


def _parallel_kernels_are_thread_safe() -> bool:
    """True unless numba would fall back to its 'workqueue' layer, which must not be
    entered from two threads at once (numba documentation, "The Threading Layers").
    """
    layer = os.environ.get("NUMBA_THREADING_LAYER", "default").lower()
    if layer == "workqueue":
        return False
    if layer in ("omp", "tbb", "threadsafe"):
        return True
    for mod in ("numba.np.ufunc.omppool", "numba.np.ufunc.tbbpool"):
        try:
            __import__(mod)
            return True
        except Exception:        # noqa: BLE001 - any import failure means "not available"
            continue
    return False


class _NullLock:
    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False


#: Held around every job when numba's parallel kernels cannot run from two threads at once
#: (then a sweep and a solve take turns instead of running side by side).
_compute_lock = None
_compute_lock_guard = threading.Lock()


def compute_lock():
    """The lock held around every job when numba's parallel kernels cannot run from two threads at
    once (a no-op lock otherwise).  Decided on first use: finding out imports numba, which the
    window need not load before its first solve."""
    global _compute_lock
    with _compute_lock_guard:
        if _compute_lock is None:
            _compute_lock = _NullLock() if _parallel_kernels_are_thread_safe() else threading.Lock()
        return _compute_lock


def describe_error(exc: BaseException) -> str:
    """One readable line for an error raised by core (or an unexpected one)."""
    if isinstance(exc, NotConverged):
        return f"the solver did not converge: {exc}"
    if isinstance(exc, WellscapeError):
        return str(exc)
    if isinstance(exc, MemoryError):
        return ("not enough memory for this request; use a coarser grid, fewer states or the spectral "
                "scheme (accurate on far fewer points for smooth potentials)")
    text = str(exc) or type(exc).__name__
    return f"unexpected error ({type(exc).__name__}: {text}); details were printed on the console"


class Job(QThread):
    """One background computation. See the module docstring for the signals."""

    progressed = Signal(str, float)
    solved = Signal(object)
    failed = Signal(str)
    cancelled = Signal()
    noted = Signal(object)            # something the work reports before its result (e.g. an estimate)

    PROGRESS_INTERVAL_S = 0.05

    def __init__(self, work: Callable, *, kind: str = "solve", tag: object = None, parent=None,
                 exclusive: bool = True, notes: bool = False):
        """``exclusive``: hold :data:`compute_lock` while working (False for work that does not run
        numba's parallel kernels, e.g. a sparse factorisation).  ``notes``: the work takes a third
        keyword, ``note(obj)``, which emits :attr:`noted` from the worker thread."""
        super().__init__(parent)
        self._work = work
        self.kind = kind
        self.tag = tag
        self._exclusive = bool(exclusive)
        self._notes = bool(notes)
        self._stop = threading.Event()
        self._last_progress = 0.0
        self.started_at: float | None = None
        self.setObjectName(f"wellscape-{kind}")
        with _JOBS_LOCK:
            _JOBS.add(self)

    # -- called from the GUI thread ---------------------------------------------------------
    def cancel(self) -> None:
        """Ask the work to stop; it notices at its next ``should_stop()`` check."""
        self._stop.set()

    @property
    def cancel_requested(self) -> bool:
        return self._stop.is_set()

    def join(self, timeout_s: float | None = None) -> bool:
        """Wait for the thread to end; True if it did."""
        if timeout_s is None:
            return bool(self.wait())
        return bool(self.wait(int(max(0.0, timeout_s) * 1000)))

    # -- called from the worker thread ------------------------------------------------------
    def should_stop(self) -> bool:
        return self._stop.is_set()

    def _progress(self, *args) -> None:
        """Accepts ``(stage, fraction)`` or ``(fraction,)``; forwards at most ~20 per second."""
        if not args:
            return
        if len(args) == 1:
            stage, fraction = self.kind, args[0]
        else:
            stage, fraction = args[0], args[-1]
        try:
            fraction = float(fraction)
        except (TypeError, ValueError):
            return
        now = time.perf_counter()
        if fraction < 1.0 and now - self._last_progress < self.PROGRESS_INTERVAL_S:
            return
        self._last_progress = now
        self.progressed.emit(str(stage), max(0.0, min(1.0, fraction)))

    def run(self) -> None:  # noqa: D401 - Qt override
        self.started_at = time.perf_counter()
        kwargs = {"progress": self._progress, "should_stop": self.should_stop}
        if self._notes:
            kwargs["note"] = self.noted.emit
        try:
            with (compute_lock() if self._exclusive else _NullLock()):
                if self._stop.is_set():
                    raise Cancelled("cancelled before it started")
                result = self._work(**kwargs)
        except Cancelled:
            self.cancelled.emit()
        except BaseException as exc:      # noqa: BLE001 - a worker must never die silently
            if not isinstance(exc, (WellscapeError, MemoryError)):
                print(f"wellscape: unexpected error in a background {self.kind}:", file=sys.stderr)
                traceback.print_exc()
            if self._stop.is_set():
                self.cancelled.emit()
            else:
                self.failed.emit(describe_error(exc))
        else:
            if self._stop.is_set():
                self.cancelled.emit()
            else:
                self.solved.emit(result)
