"""Trust in the numbers, in the window: convergence studies and certified level counts in the background.

:class:`NumberChecks` belongs to a :class:`app.session.Session` (``session.checks``) and runs two
kinds of check, each in a :class:`app.workers.Job`:

* **convergence** - :func:`core.convergence.convergence_study` of the project as it is now: levels
  on the project's grid and coarser ones, Richardson-extrapolated, with error estimates and a
  "resolved" / "not resolved" verdict for every splitting (worded by :mod:`core.convergence_report`:
  "degenerate on every grid", "the grid is too coarse to judge these levels").  Its memory and time estimate
  (:func:`core.estimate.estimate_convergence`) is reported before the study starts, and a study
  that will not fit is refused with a suggestion.
* **count** - :func:`core.inertia.certify_count` on the latest result: an independent count of the
  eigenvalues below a shift just above the top returned level (Sylvester's law of inertia), so
  that a missed level is caught.  After every solve that is not a live (slider) solve, the count
  runs by itself when the factorisation is estimated to take at most
  :attr:`NumberChecks.auto_count_seconds`; larger counts run when asked for.  Any count that is not
  tiny runs in a separate process, so that the window never waits for the interpreter lock and
  Cancel (and closing the window) stops it at once.

A report applies while the project is unchanged; a certificate applies to the result it counted.
Views ask :meth:`report_for` / :meth:`certificate_for` and repaint on :attr:`changed`.
"""
from __future__ import annotations

import os
import select
import subprocess
import sys
import threading
from pathlib import Path

from PySide6.QtCore import QObject, Signal

from core.errors import Cancelled

from .workers import Job

__all__ = ["NumberChecks", "CONVERGENCE", "COUNT"]

CONVERGENCE = "convergence"
COUNT = "count"
#: Only a count estimated to take at most this long runs in a thread; every other count runs in its
#: own process: cancellable at once, and the window keeps its interpreter lock.  Measured in a thread
#: against a 5 ms heartbeat: SuperLU 2D 256^2 fourth order stalled it for 224 ms, LAPACK's dense
#: LDL^T (spectral 40^2) for 1.8 s, and even a 128^2 second-order count (0.1 s) for 130-230 ms while
#: the window was drawing the solve's result (found by sampling the threads' stacks).
_IN_THREAD_SECONDS = 0.02


class CountProcess:
    """One long-lived child process (``python -m app.count_server``) that certifies level counts,
    started once (at the window's warm-up) and reused: starting a process forks the window's large
    address space while holding the interpreter lock (130-230 ms stalls when done for every count).
    Cancelling kills the child; the next count starts a new one."""

    def __init__(self):
        self._proc = None
        self._lock = threading.Lock()

    def start(self) -> None:
        with self._lock:
            if self._proc is not None and self._proc.poll() is None:
                return
            root = str(Path(__file__).resolve().parents[1])        # the folder holding app/ and core/
            env = dict(os.environ)
            env["PYTHONPATH"] = root + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
            self._proc = subprocess.Popen([sys.executable, "-m", "app.count_server"], stdin=subprocess.PIPE,
                                          stdout=subprocess.PIPE, env=env, cwd=root)

    def count(self, hamiltonian, spectrum, max_seconds, should_stop, poll_s: float = 0.05):
        """certify_count in the child; the child is killed at once when ``should_stop()`` turns True."""
        from .count_server import read_message, write_message
        self.start()
        proc = self._proc
        try:
            write_message(proc.stdin, (hamiltonian, spectrum, max_seconds))
        except (BrokenPipeError, OSError):
            self.stop()
            raise RuntimeError("the level count process is not running") from None
        while True:
            if should_stop():
                self.stop()
                raise Cancelled("level count cancelled")
            ready, _, _ = select.select([proc.stdout], [], [], poll_s)
            if ready:
                reply = read_message(proc.stdout)
                if reply is None:
                    code = proc.poll()
                    self.stop()
                    raise RuntimeError(f"the level count stopped unexpectedly (exit code {code})")
                status, value = reply
                break
        if status != "ok":
            raise RuntimeError(f"the level count failed: {value}")
        return value

    def stop(self) -> None:
        with self._lock:
            proc, self._proc = self._proc, None
        if proc is None:
            return
        for stream in (proc.stdin, proc.stdout):
            try:
                stream.close()
            except OSError:
                pass
        if proc.poll() is None:
            proc.terminate()
        try:
            proc.wait(5.0)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait(5.0)


class NumberChecks(QObject):
    """Convergence studies and level-count certificates for one session."""

    started = Signal(str)                 # kind
    progressed = Signal(str, float)       # stage, fraction
    estimated = Signal(str, object)       # kind, core.estimate.Estimate (before the study starts)
    finished = Signal(str, object)        # kind, ConvergenceReport or CountCertificate
    failed = Signal(str, str)             # kind, one readable line
    changed = Signal()                    # what applies to the current project or result changed
    running_changed = Signal()            # a check started or its thread ended

    def __init__(self, session, parent: QObject | None = None):
        super().__init__(parent if parent is not None else session)
        self.session = session
        #: automatic count after a (non-live) solve when the factorisation should take at most this
        self.auto_count_seconds: float = 4.0
        self.auto_count: bool = True
        self._report = None
        self._certificate = None          # (result, CountCertificate, time limit or None)
        self._jobs: dict = {CONVERGENCE: None, COUNT: None}
        self._pending_count = None        # (result, max_seconds) waiting for the running count
        self._retired: list = []
        self._shut_down = False
        self._report_was_current = False
        #: the child process that runs level counts off the window's interpreter lock
        self.count_process = CountProcess()
        session.solved.connect(self._on_solved)
        session.project_changed.connect(self._on_project_changed)

    # ------------------------------------------------------------------ what applies now
    def report_for(self, result=None):
        """The latest convergence report if it was made for ``result``'s project (default: the session's)."""
        result = result if result is not None else self.session.result
        rep = self._report
        if rep is None or result is None:
            return None
        from core.provenance import result_fingerprint
        return rep if result_fingerprint(rep.reference) == result_fingerprint(result) else None

    @property
    def latest_report(self):
        """The latest convergence report, whatever project it was made for (None before any)."""
        return self._report

    def current_report(self):
        """The latest convergence report if it was made for the project as it is now."""
        rep = self._report
        if rep is None:
            return None
        from core.provenance import result_fingerprint
        return rep if result_fingerprint(rep.reference) == self.session.fingerprint else None

    def certificate_for(self, result=None):
        """The level-count certificate of ``result`` (default: the session's), or None."""
        result = result if result is not None else self.session.result
        if self._certificate is None or result is None:
            return None
        counted, cert, _limit = self._certificate
        return cert if counted is result else None

    def skipped_as_too_long(self, result=None) -> float | None:
        """The estimated seconds of a count that the automatic check after a solve skipped because it
        would take longer than :attr:`auto_count_seconds` (None if it was not skipped for that)."""
        cert = self.certificate_for(result)
        if cert is None or cert.count_below is not None or cert.estimate is None:
            return None
        limit = self._certificate[2]
        return float(cert.estimate.seconds) if limit is not None and cert.estimate.seconds > limit else None

    def running(self, kind: str | None = None) -> bool:
        if kind is None:
            return any(j is not None for j in self._jobs.values())
        return self._jobs.get(kind) is not None

    # ------------------------------------------------------------------ convergence
    def check_convergence(self, *, factor: float = 1.5, grids: int = 3, refine: str = "coarser") -> bool:
        """Start a convergence study of the project as it is now.  False if one is already running."""
        if self._shut_down or self._jobs[CONVERGENCE] is not None:
            return False
        from core.convergence import convergence_study
        from core.estimate import estimate_convergence
        project = self.session.project

        def work(progress, should_stop, note):
            est = estimate_convergence(project, factor=factor, grids=grids, refine=refine)
            note((CONVERGENCE, est))
            est.check()
            return convergence_study(project, factor=factor, grids=grids, refine=refine,
                                     progress=progress, should_stop=should_stop)

        self._start(CONVERGENCE, work, tag=project, notes=True)
        return True

    # ------------------------------------------------------------------ level counts
    def verify_count(self, result=None, *, max_seconds: float | None = None) -> bool:
        """Count the levels below the top of ``result`` (default: the session's latest) independently.

        ``max_seconds`` refuses (with a "not certified" certificate, no error) a factorisation
        estimated to take longer.  Queued if a count is running.  False if there is nothing to count."""
        result = result if result is not None else self.session.result
        if self._shut_down or result is None:
            return False
        if self._jobs[COUNT] is not None:
            self._pending_count = (result, max_seconds)
            self._jobs[COUNT].cancel()
            return True

        def work(progress, should_stop):
            from core.inertia import certify_count, estimate_factorisation
            from core.study import project_hamiltonian
            progress("building the matrix", 0.0)
            h = project_hamiltonian(result.project, parameters=result.parameters, scheme=result.scheme,
                                    potential=result.potential)[0]
            if should_stop():
                raise Cancelled("level count cancelled")
            est = estimate_factorisation(h)
            progress(f"factorising ({est.method})", 0.1)
            if max_seconds is not None and est.seconds > max_seconds:
                return certify_count(h, result.spectrum, max_seconds=max_seconds)   # "not checked", at once
            if est.seconds > _IN_THREAD_SECONDS:
                cert = self.count_process.count(h, result.spectrum, max_seconds, should_stop)
            else:
                cert = certify_count(h, result.spectrum, max_seconds=max_seconds)
            if cert.count_below is not None:           # a count ran: the next estimate knows its time
                from core.inertia import record_count
                record_count(est, cert.seconds)
            return cert

        # a sparse factorisation does not use the parallel kernels: it may run beside a solve
        self._start(COUNT, work, tag=(result, max_seconds), exclusive=False)
        return True

    def _on_solved(self, result) -> None:
        if not self.auto_count or self._shut_down:
            return
        if getattr(self.session, "result_mode", None) == "live":
            return                         # a slider drag: the settling solve gets counted
        self.verify_count(result, max_seconds=self.auto_count_seconds)

    def _on_project_changed(self) -> None:
        # what the views show depends on the result, not on the project being edited; only say so
        # when the latest report stops (or starts) being the one for the project as it is now
        current = self.current_report() is not None
        if current != self._report_was_current:
            self._report_was_current = current
            self.changed.emit()

    # ------------------------------------------------------------------ jobs
    def _start(self, kind: str, work, *, tag, exclusive: bool = True, notes: bool = False) -> None:
        job = Job(work, kind=kind, tag=tag, exclusive=exclusive, notes=notes)
        job.progressed.connect(self.progressed)
        job.noted.connect(self._on_noted)
        job.solved.connect(self._on_done)
        job.failed.connect(self._on_failed)
        job.cancelled.connect(self._on_cancelled)
        job.finished.connect(self._on_finished)
        self._jobs[kind] = job
        job.start()
        self.started.emit(kind)
        self.running_changed.emit()

    def _sender_job(self) -> Job | None:
        job = self.sender()
        return job if isinstance(job, Job) else None

    def _on_noted(self, payload) -> None:
        kind, est = payload
        self.estimated.emit(kind, est)

    def _on_done(self, value) -> None:
        job = self._sender_job()
        if job is None or self._shut_down:
            return
        if job.kind == CONVERGENCE:
            self._report = value
            self._report_was_current = self.current_report() is not None
            # the study's own solve on the project grid is as good as a manual solve of the same project
        else:
            if self._pending_count is not None:
                return                     # superseded by a newer request
            self._certificate = (job.tag[0], value, job.tag[1])
        self.finished.emit(job.kind, value)
        self.changed.emit()

    def _on_failed(self, message: str) -> None:
        job = self._sender_job()
        if job is not None and not self._shut_down:
            if job.kind == COUNT and self._pending_count is not None:
                return
            self.failed.emit(job.kind, message)

    def _on_cancelled(self) -> None:
        job = self._sender_job()
        if job is not None and not self._shut_down and not (job.kind == COUNT and self._pending_count is not None):
            self.failed.emit(job.kind, f"{job.kind} check cancelled")

    def _on_finished(self) -> None:
        job = self._sender_job()
        if job is None:
            return
        job.join()
        self._retired = [j for j in self._retired[-3:] if j is not job] + [job]
        if self._jobs.get(job.kind) is job:
            self._jobs[job.kind] = None
            self.running_changed.emit()
        if job.kind == COUNT and self._pending_count is not None and not self._shut_down:
            result, max_seconds = self._pending_count
            self._pending_count = None
            if result is self.session.result:
                self.verify_count(result, max_seconds=max_seconds)

    def cancel(self, kind: str | None = None) -> None:
        """Stop the running check(s)."""
        if kind in (None, COUNT):
            self._pending_count = None
        for k, job in self._jobs.items():
            if job is not None and kind in (None, k):
                job.cancel()

    def shutdown(self) -> None:
        """Cancel and join every check (a count in its own process is terminated)."""
        self._shut_down = True
        self.cancel()
        for job in list(self._jobs.values()):
            if job is not None:
                job.join()
        self._jobs = {CONVERGENCE: None, COUNT: None}
        self.count_process.stop()
