"""The desktop window's model: one :class:`Session` owns the project, the latest results,
the undo stack and the background jobs, and tells the widgets what changed through signals.

Widgets never change the project themselves: every edit is a new
:class:`core.project.Project` passed to :meth:`Session.set_project` (undoable),
or a parameter value passed to :meth:`Session.set_parameter`.  Widgets repaint
on the signals.  The session holds no physics: it calls :mod:`core`.

Threads: solves and sweeps run in :class:`app.workers.Job` threads; every
signal of the session is emitted on the GUI thread.

Live exploration: ``set_parameter(name, value, live=True)`` (a slider being
dragged) re-solves with a warm start from the previous result's
``spectrum.block()``.  While a solve is running, newer requests replace older
ones that have not started yet ("drop intermediate requests when behind"),
so the levels follow the slider as fast as the machine allows.  A warm start
only refines the previous subspace, so when the drag ends
(``set_parameter(..., live=False)``) the session runs one cold solve to
confirm the levels.

Recovery: while the project has unsaved changes it is written every few
seconds to a recovery file (in ``QStandardPaths.AppDataLocation``), listed in
``QSettings`` under the process id.  A normal :meth:`shutdown` removes it; after
a crash :meth:`recoverable` lists it and :meth:`restore` reads it back.
"""
from __future__ import annotations

import dataclasses
import math
import os
import time
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from PySide6.QtCore import QObject, QSettings, QStandardPaths, QTimer, Signal
from PySide6.QtGui import QUndoCommand, QUndoStack

from core.atomic import clean_stale_temporaries
from core.errors import InputError, WellscapeError
from core.project import MapTerm, Project, load_project, project_from_dict, project_to_dict, save_project
from core.project import new_project as core_new_project

from .workers import Job, describe_error

__all__ = ["Session", "RecoveryEntry", "validated", "SAMPLES_DIR", "sample_projects"]

SAMPLES_DIR = Path(__file__).resolve().parent.parent / "sample_projects"
ORGANIZATION = "Wellscape"
APPLICATION = "Wellscape"
MAX_RECENT = 8

_MODE_RANK = {"live": 0, "settle": 1, "manual": 2}


def sample_projects() -> list:
    """The bundled sample projects (paths), sorted by file name."""
    return sorted(SAMPLES_DIR.glob("*.json"))


def validated(project: Project) -> Project:
    """Run ``project`` through the loader's validation (the same checks as opening a file).

    Returns the validated project (numbers normalised); raises
    :class:`core.errors.ProjectError` naming the bad field.
    """
    checked = project_from_dict(project_to_dict(project), base_dir=project.base_dir)
    return dataclasses.replace(checked, warnings=(), migrated_from=None)


def _absolute_map_paths(project: Project) -> Project:
    """The same project with every map file given as an absolute path (resolved against base_dir)."""
    terms, changed = [], False
    for t in project.potential:
        if isinstance(t, MapTerm) and not Path(t.file).is_absolute():
            t = dataclasses.replace(t, file=str((Path(project.base_dir or ".") / t.file).resolve()))
            changed = True
        terms.append(t)
    return dataclasses.replace(project, potential=tuple(terms)) if changed else project


def _rebased(project: Project, folder: Path) -> Project:
    """The project as it must be written into ``folder``: map paths stay valid from there."""
    folder = folder.resolve()
    terms, changed = [], False
    for t in project.potential:
        if isinstance(t, MapTerm):
            target = Path(t.file)
            if not target.is_absolute():
                target = (Path(project.base_dir or ".") / target).resolve()
            if folder not in target.resolve().parents:
                # the map stays where it was: reading it from outside the new folder is allowed here
                from core.maps import allow_map_folder
                allow_map_folder(target.resolve().parent)
            try:
                new = os.path.relpath(target, folder)
            except ValueError:          # another drive (Windows): keep it absolute
                new = str(target)
            if new != t.file:
                t = dataclasses.replace(t, file=new)
                changed = True
        terms.append(t)
    out = dataclasses.replace(project, potential=tuple(terms)) if changed else project
    return dataclasses.replace(out, base_dir=str(folder))


def _pid_alive(pid: int) -> bool:
    if pid <= 0:
        return False
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    except OSError:
        return False
    return True


def _start_time(pid: int) -> str | None:
    """The start time of process ``pid`` (clock ticks since boot, /proc), or None where unknown."""
    try:
        with open(f"/proc/{int(pid)}/stat", encoding="ascii", errors="replace") as fh:
            fields = fh.read().rsplit(")", 1)[1].split()
        return fields[19]                  # field 22 of stat(5); fields[0] is field 3
    except (OSError, IndexError, ValueError):
        return None


def _process_key(pid: int) -> str:
    """A recovery key unique to this process even after its id is reused: ``PID-STARTTIME``
    (``PID-RANDOM`` where the start time is unknown)."""
    tag = _start_time(pid)
    if tag is None:
        import uuid
        tag = "u" + uuid.uuid4().hex[:12]
    return f"{pid}-{tag}"


def _key_alive(key: str) -> bool:
    """True when the process that wrote recovery entry ``key`` is still running (the same process, not one
    that was given its id later). Entries keyed by the bare id (older versions) are judged by the id."""
    pid_text, _, tag = key.partition("-")
    try:
        pid = int(pid_text)
    except ValueError:
        return False
    if not _pid_alive(pid):
        return False
    if not tag or tag.startswith("u"):
        return True
    return _start_time(pid) in (tag, None)


@dataclass(frozen=True)
class RecoveryEntry:
    """Unsaved work left behind by a window that did not close normally."""

    key: str
    file: Path
    original: Path | None
    saved_at: str
    title: str


class _ProjectCommand(QUndoCommand):
    """Replace the project (undo puts the old one back).  Consecutive live edits of the
    same parameter merge into one command, so a slider drag is one undo step."""

    MERGE_ID = 0x5745

    def __init__(self, session: Session, old: Project, new: Project, text: str,
                 merge_key: tuple | None = None, open_chain: bool = False):
        super().__init__(text)
        self._session = session
        self.old = old
        self.new = new
        self.merge_key = merge_key
        self.open_chain = open_chain

    def id(self) -> int:  # noqa: A003 - Qt override
        return self.MERGE_ID if self.merge_key is not None else -1

    def mergeWith(self, other) -> bool:  # noqa: N802 - Qt override
        if not isinstance(other, _ProjectCommand) or not self.open_chain or other.merge_key != self.merge_key:
            return False
        self.new = other.new
        self.open_chain = other.open_chain
        self.setText(other.text())
        return True

    def redo(self) -> None:
        self._session._apply(self.new)

    def undo(self) -> None:
        self._session._apply(self.old)


#: where the solve's worker leaves the two-electron levels in ``StudyResult.extra`` (and ``+ "_error"``)
TWO_ELECTRON_KEY = "two_electron"


def _add_two_electron(result, live: bool, progress, should_stop) -> None:
    """Two-electron levels of a solved two-electron project, into ``result.extra`` (worker thread).

    A failure (memory refused, no permittivity, ...) becomes a one-line message beside the orbital
    result, which stands; cancelling cancels the solve.  Live solves during a slider drag skip it
    (the solve when the drag ends computes it)."""
    if live:
        result.extra[TWO_ELECTRON_KEY + "_error"] = "two-electron levels follow when the slider is released"
        return
    from core.errors import Cancelled
    from core.two_electron import two_electron_for_study
    try:
        result.extra[TWO_ELECTRON_KEY] = two_electron_for_study(result, progress=progress, should_stop=should_stop)
    except Cancelled:
        raise
    except Exception as exc:      # noqa: BLE001 - the orbital levels stand; the window shows one line
        if not isinstance(exc, (WellscapeError, MemoryError)):
            import traceback
            traceback.print_exc()
        result.extra[TWO_ELECTRON_KEY + "_error"] = "two-electron levels: " + describe_error(exc)


class Session(QObject):
    """Project, results, undo stack and background work of one window."""

    project_changed = Signal()
    potential_changed = Signal()
    parameters_changed = Signal()
    solve_started = Signal()
    progressed = Signal(str, float)
    solved = Signal(object)
    failed = Signal(str)
    cancelled = Signal()
    selection_changed = Signal(int)
    dirty_changed = Signal(bool)
    path_changed = Signal(str)
    sweep_started = Signal()
    sweep_progressed = Signal(float)
    sweep_finished = Signal(object)
    sweep_failed = Signal(str)
    sweep_estimated = Signal(object)  # core.estimate.Estimate of a sweep that is about to run
    # beyond the contract: small conveniences for the window
    degeneracy_changed = Signal()
    notice = Signal(str)              # a one-line message for the status strip (warnings, autosave trouble)
    busy_changed = Signal(bool)       # a solve or sweep started or ended
    estimated = Signal(object)        # core.estimate.Estimate of a solve that is about to run (not live ones)
    stale_changed = Signal()          # the project, the result or the sweep changed: is what is shown current?
    two_electron_changed = Signal()   # the two-electron levels (or the message why there are none) changed

    def __init__(self, parent: QObject | None = None, *, project: Project | None = None,
                 settings: QSettings | None = None, recovery_dir: Path | None = None,
                 autosave_ms: int = 4000):
        super().__init__(parent)
        self._project: Project = project if project is not None else core_new_project()
        self._path: Path | None = None
        self.result = None
        self.sweep_result = None
        #: core.two_electron.TwoElectronResult of the latest result when the project has two electrons
        self.two_electron = None
        #: one line saying why there are no two-electron levels for the latest result ("" when there are)
        self.two_electron_message = ""
        self._two_electron_fingerprint = ""     # the project state the two-electron levels were solved for
        self._selected = 0
        self._degeneracy_tolerance: float | None = None
        self.undo_stack = QUndoStack(self)
        self._force_dirty = False
        self._dirty = False
        self.undo_stack.cleanChanged.connect(self._update_dirty)
        self.undo_stack.indexChanged.connect(self._update_dirty)

        self._potential = None
        self._potential_error: str | None = None
        self._potential_for: Project | None = None
        self._fingerprint: tuple = (None, "")           # (project, its core.provenance.fingerprint)

        self._generation = 0
        self._solve_job: Job | None = None
        self._solve_mode: str | None = None
        self._pending_mode: str | None = None
        self._sweep_job: Job | None = None
        self._finished_jobs: list = []
        self._aux_jobs: list = []         # background work whose results nobody waits for (warm-up)
        self._analyses: dict = {}
        self.last_solve_seconds: float | None = None
        self._result_mode: str | None = None       # how the latest result was started: live (warm) or cold
        #: residual tolerance of the warm-started solves during a drag (never tighter than the project's);
        #: 1e-5 halves their cost against 1e-7 and still gives energies to ~1e-9 of the energy scale
        #: (measured on the elliptical sample at 128^2); the confirming solve uses the project's own
        self.live_tolerance: float | None = 1e-5
        #: True while a parameter slider is being dragged (views may then repaint less often)
        self.live_dragging = False

        self._settings = settings if settings is not None else QSettings(ORGANIZATION, APPLICATION)
        if recovery_dir is None:
            base = QStandardPaths.writableLocation(QStandardPaths.StandardLocation.AppDataLocation)
            recovery_dir = Path(base or Path.home() / ".wellscape") / "recovery"
        self._recovery_dir = Path(recovery_dir)
        self._recovery_key = _process_key(os.getpid())
        self._recovery_file = self._recovery_dir / f"unsaved-{self._recovery_key}.json"
        clean_stale_temporaries(self._recovery_dir, any_name=True)   # left by a window killed mid-write
        self._autosaved: Project | None = None
        self._autosave_error_shown = False
        self._autosave_timer = QTimer(self)
        self._autosave_timer.setInterval(max(200, int(autosave_ms)))
        self._autosave_timer.timeout.connect(self.autosave)
        self._autosave_timer.start()
        self._shut_down = False
        from .checks import NumberChecks
        #: convergence studies and level-count certificates of this session's project and results
        self.checks = NumberChecks(self)
        self.checks.changed.connect(self.degeneracy_changed)     # a study may bring an error-based tolerance

    # ------------------------------------------------------------------ properties
    @property
    def project(self) -> Project:
        return self._project

    @property
    def path(self) -> Path | None:
        return self._path

    @property
    def dirty(self) -> bool:
        return self._dirty

    @property
    def selected_state(self) -> int:
        return self._selected

    @property
    def units(self):
        from core.units import get_units
        return get_units(self._project.units)

    @property
    def potential(self) -> np.ndarray | None:
        """V on ``project.grid`` (energy unit), cached; None if it cannot be evaluated
        (then :attr:`potential_error` says why)."""
        if self._potential_for is not self._project:
            self._evaluate_potential()
        return self._potential

    @property
    def potential_error(self) -> str | None:
        if self._potential_for is not self._project:
            self._evaluate_potential()
        return self._potential_error

    def _evaluate_potential(self) -> None:
        from core.potentials import evaluate_potential
        project = self._project
        try:
            v = evaluate_potential(project)
            self._potential, self._potential_error = v, None
        except WellscapeError as exc:
            self._potential, self._potential_error = None, str(exc)
        except MemoryError:
            self._potential, self._potential_error = None, describe_error(MemoryError())
        self._potential_for = project

    @property
    def degeneracy_tolerance(self) -> float | None:
        """Levels closer than this (energy unit) count as degenerate; None: the solver's own."""
        return self._degeneracy_tolerance

    @degeneracy_tolerance.setter
    def degeneracy_tolerance(self, value: float | None) -> None:
        if value is not None:
            value = float(value)
            if not (math.isfinite(value) and value >= 0):
                raise InputError(f"the degeneracy tolerance must be a number >= 0, got {value!r}")
        if value != self._degeneracy_tolerance:
            self._degeneracy_tolerance = value
            self.degeneracy_changed.emit()

    def effective_degeneracy_tolerance(self) -> float | None:
        """The tolerance in use: the user's; else one built from the error estimates of a convergence
        study of this result's project (:func:`core.convergence.default_degeneracy_tolerance`); else
        the latest solve's (None before any solve)."""
        if self._degeneracy_tolerance is not None:
            return self._degeneracy_tolerance
        if self.result is None:
            return None
        tol = self.error_based_tolerance()
        return tol if tol is not None else float(self.result.spectrum.degeneracy_tolerance)

    def error_based_tolerance(self) -> float | None:
        """The degeneracy tolerance built from a convergence study of the latest result's project, if any."""
        report = self.checks.report_for(self.result) if self.result is not None else None
        if report is None:
            return None
        from core.convergence import default_degeneracy_tolerance
        tol = float(default_degeneracy_tolerance(report))
        return tol if tol > 0 else None

    @property
    def result_mode(self) -> str | None:
        """How the latest result was started: "live" (a warm solve during a slider drag), "settle"
        (the confirming solve after one) or "manual"; None before any solve."""
        return self._result_mode

    def groups(self) -> tuple:
        """Degenerate multiplets of the latest result (tuples of level indices) at the tolerance in use."""
        if self.result is None:
            return ()
        from core.eigensolve import group_levels
        return group_levels(self.result.energies, self.effective_degeneracy_tolerance())

    @property
    def fingerprint(self) -> str:
        """The project state as it is now (:func:`core.provenance.fingerprint`: its physics only)."""
        project, value = self._fingerprint
        if project is not self._project:
            from core.provenance import fingerprint
            try:
                value = fingerprint(self._project)
            except (WellscapeError, ValueError, TypeError):
                value = ""
            self._fingerprint = (self._project, value)
        return value

    @property
    def result_is_current(self) -> bool:
        """True when the latest result was computed for the project state as it is now."""
        from core.provenance import result_fingerprint
        return self.result is not None and result_fingerprint(self.result) == self.fingerprint

    def result_changes(self) -> list:
        """What changed in the physics since the latest result was solved (a few words per item);
        [] when it is current or there is none."""
        if self.result is None or self.result_is_current:
            return []
        from core.provenance import changes
        r = self.result
        found = changes(r.project, self._project, old_parameters=r.parameters, old_grid=r.grid)
        if not found:            # the same document: an imported map file was changed on disk
            found = ["the content of an imported map file"] if any(t.kind == "map" for t in self._project.potential) \
                else ["the project"]
        return found

    @property
    def two_electron_is_current(self) -> bool:
        """True when the two-electron levels were computed for the project state as it is now (the same
        rule as :attr:`result_is_current`: they come with the orbital result they were built from)."""
        return self.two_electron is not None and self._two_electron_fingerprint == self.fingerprint

    @property
    def sweep_is_current(self) -> bool:
        """True when the latest sweep ran on the project as it is now (the swept quantity aside)."""
        if self.sweep_result is None:
            return False
        from core.provenance import sweep_matches
        return sweep_matches(self.sweep_result, self._project)

    def sweep_changes(self) -> list:
        """What changed in the physics since the latest sweep ran (the swept quantity aside)."""
        if self.sweep_result is None or self.sweep_is_current:
            return []
        from core.provenance import sweep_changes
        return sweep_changes(self.sweep_result, self._project) or ["the project"]

    @property
    def solving(self) -> bool:
        return self._solve_job is not None

    @property
    def solving_current(self) -> bool:
        """True when the running (or queued) solve is of the project as it is now."""
        job = self._solve_job
        return job is not None and (job.tag[1] is self._project or self._pending_mode is not None)

    @property
    def solve_queued(self) -> bool:
        """True when a newer solve request waits for the running one to end."""
        return self._pending_mode is not None

    @property
    def sweeping(self) -> bool:
        return self._sweep_job is not None

    # ------------------------------------------------------------------ project edits
    def set_project(self, project: Project, text: str = "edit") -> None:
        """Replace the project (one undoable step).  The new project is validated first, like a
        file being opened; a :class:`core.errors.ProjectError` naming the field leaves everything
        as it was."""
        if not isinstance(project, Project):
            raise InputError(f"set_project expects a Project, got {type(project).__name__}")
        checked = validated(project)
        if checked == self._project and checked.base_dir == self._project.base_dir:
            return
        self.undo_stack.push(_ProjectCommand(self, self._project, checked, text))

    def set_parameter(self, name: str, value: float, *, live: bool = False) -> None:
        """Set one named parameter (undoable; a drag is one step).

        ``live=True`` (a slider being dragged) re-solves at once with a warm start if a result
        exists; ``live=False`` ends a drag or sets a typed value, and re-solves from scratch
        when a result exists, so that the levels on show always match the parameters."""
        if name not in self._project.parameters:
            known = ", ".join(self._project.parameters) or "none"
            raise InputError(f"no parameter called {name!r}; this project's parameters are: {known}")
        try:
            v = float(value)
        except (TypeError, ValueError):
            raise InputError(f"{name}: expected a number, got {value!r}") from None
        if not math.isfinite(v):
            raise InputError(f"{name}: expected a finite number, got {value!r}")
        new = self._project.with_parameters(**{name: v})
        self.live_dragging = bool(live)
        if new.parameters != self._project.parameters:
            self.undo_stack.push(_ProjectCommand(self, self._project, new, f"set {name} = {v:.6g}",
                                                 merge_key=("parameter", name), open_chain=live))
        else:
            # same value: close an open drag chain so that the next drag is its own undo step
            top = self.undo_stack.command(self.undo_stack.index() - 1) if self.undo_stack.index() > 0 else None
            if isinstance(top, _ProjectCommand) and not live:
                top.open_chain = False
        if self.result is None:
            return
        if live:
            self._request_solve("live")
            self.stale_changed.emit()      # the live solve under way stands in for the mark (see stale_message)
        elif not (self.result_is_current and self._result_mode != "live" and self._solve_job is None
                  and self._pending_mode is None):
            self._request_solve("settle")

    def _apply(self, project: Project) -> None:
        """Make ``project`` current and tell the widgets (called by undo commands)."""
        old = self._project
        self._project = project
        params = (old.parameters != project.parameters or old.parameter_ranges != project.parameter_ranges)
        pot = (params or old.grid != project.grid or old.potential != project.potential
               or old.units != project.units or old.electric_field != project.electric_field
               or old.base_dir != project.base_dir or old.material != project.material)
        self.project_changed.emit()
        if params:
            self.parameters_changed.emit()
        if pot:
            self.potential_changed.emit()
        self.stale_changed.emit()

    def _replace_all(self, project: Project, path: Path | None, *, dirty: bool = False) -> None:
        """A different project (new, open, restore): no undo history, no results."""
        self._generation += 1
        self._cancel_jobs()
        self._pending_mode = None
        self.undo_stack.clear()
        self._project = project
        self.result = None
        self.sweep_result = None
        self.two_electron, self.two_electron_message, self._two_electron_fingerprint = None, "", ""
        self._autosaved = None
        self._selected = 0
        self._force_dirty = dirty
        old_path = self._path
        self._path = path
        self.project_changed.emit()
        self.parameters_changed.emit()
        self.potential_changed.emit()
        self.selection_changed.emit(0)
        self.two_electron_changed.emit()
        self.stale_changed.emit()
        if old_path != path:
            self.path_changed.emit(str(path) if path else "")
        self._update_dirty()
        if not dirty:
            self._drop_recovery_file()

    def _update_dirty(self, *_args) -> None:
        dirty = bool(self._force_dirty or not self.undo_stack.isClean())
        if dirty != self._dirty:
            self._dirty = dirty
            self.dirty_changed.emit(dirty)

    # ------------------------------------------------------------------ files
    def new_project(self) -> None:
        """Start from the template project (unsaved, no file name)."""
        self._replace_all(core_new_project(), None)

    def open(self, path) -> Project:
        """Read a project file; on any error the current project stays as it was."""
        p = Path(path)
        project = load_project(p)
        for w in project.warnings:
            self.notice.emit(f"{p.name}: {w}")
        if project.migrated_from:
            self.notice.emit(f"{p.name} uses the older schema {project.migrated_from}; it was read in the current "
                             f"one (the file is unchanged until you save)")
        self._replace_all(dataclasses.replace(project, warnings=()), p.resolve())
        self._add_recent(p.resolve())
        return project

    def save(self, path=None) -> Path:
        """Write the project (atomically) to ``path`` or to its own file."""
        target = Path(path) if path is not None else self._path
        if target is None:
            raise InputError("this project has no file yet; choose where to save it")
        target = target.resolve() if target.parent.exists() else target
        project = _rebased(self._project, target.parent)
        save_project(project, target)
        self._project = project            # base_dir and map paths as written (same files, same potential)
        self._potential_for = project if self._potential_for is not None else None
        self.undo_stack.setClean()
        self._force_dirty = False
        if target != self._path:
            self._path = target
            self.path_changed.emit(str(target))
        self._update_dirty()
        self._add_recent(target)
        self._drop_recovery_file()
        return target

    def recent_files(self) -> list:
        value = self._settings.value("recent_files", [])
        if isinstance(value, str):
            value = [value]
        return [Path(v) for v in (value or []) if isinstance(v, str) and v]

    def _add_recent(self, path: Path) -> None:
        items = [str(path)] + [str(p) for p in self.recent_files() if str(p) != str(path)]
        self._settings.setValue("recent_files", items[:MAX_RECENT])
        self._settings.sync()

    def clear_recent(self) -> None:
        self._settings.setValue("recent_files", [])
        self._settings.sync()

    # ------------------------------------------------------------------ recovery
    @property
    def recovery_file(self) -> Path:
        return self._recovery_file

    def autosave(self) -> bool:
        """Write the project to the recovery file if it has unsaved changes not yet written."""
        if self._shut_down or not self._dirty or self._autosaved is self._project:
            return False
        if self._solve_mode == "live" or self._pending_mode == "live":
            return False                  # mid-drag: the copy is written once the drag has settled
        try:
            self._recovery_dir.mkdir(parents=True, exist_ok=True)
            save_project(_absolute_map_paths(self._project), self._recovery_file)
        except (WellscapeError, OSError) as exc:
            if not self._autosave_error_shown:
                self._autosave_error_shown = True
                self.notice.emit(f"could not write the recovery copy ({exc}); save your work by hand")
            return False
        self._autosaved = self._project
        self._settings.setValue(f"recovery/{self._recovery_key}",
                                [str(self._recovery_file), str(self._path or ""),
                                 time.strftime("%Y-%m-%d %H:%M:%S"), self._project.title])
        self._settings.sync()
        return True

    def _drop_recovery_file(self) -> None:
        self._autosaved = None
        try:
            self._recovery_file.unlink()
        except FileNotFoundError:
            pass
        except OSError:
            return
        self._settings.remove(f"recovery/{self._recovery_key}")
        self._settings.sync()

    def recoverable(self) -> list:
        """Recovery copies left by windows that did not close normally (their process is gone)."""
        out = []
        self._settings.beginGroup("recovery")
        try:
            keys = list(self._settings.childKeys())
            values = {k: self._settings.value(k) for k in keys}
        finally:
            self._settings.endGroup()
        for key, value in values.items():
            if key == self._recovery_key:
                continue
            if _key_alive(key):
                continue            # another window is running and owns it
            if not isinstance(value, (list, tuple)) or len(value) < 4 or not Path(str(value[0])).is_file():
                self._settings.remove(f"recovery/{key}")
                continue
            out.append(RecoveryEntry(key=key, file=Path(str(value[0])),
                                     original=Path(str(value[1])) if value[1] else None,
                                     saved_at=str(value[2]), title=str(value[3])))
        self._settings.sync()
        return out

    def restore(self, entry: RecoveryEntry) -> None:
        """Open a recovery copy as unsaved work (its original file name, if any, is kept)."""
        project = load_project(entry.file)
        if entry.original is not None:
            project = dataclasses.replace(project, base_dir=str(entry.original.parent))
        self._replace_all(dataclasses.replace(project, warnings=()), entry.original, dirty=True)
        self.discard_recovery(entry)
        self.notice.emit(f"restored unsaved work from {entry.saved_at}")

    def discard_recovery(self, entry: RecoveryEntry) -> None:
        try:
            entry.file.unlink()
        except OSError:
            pass
        self._settings.remove(f"recovery/{entry.key}")
        self._settings.sync()

    # ------------------------------------------------------------------ selection
    def select_state(self, index: int) -> None:
        i = int(index)
        if self.result is not None:
            i = max(0, min(i, self.result.energies.size - 1))
        elif i < 0:
            i = 0
        if i != self._selected:
            self._selected = i
            self.selection_changed.emit(i)

    # ------------------------------------------------------------------ solving
    def solve(self) -> None:
        """Solve the current project in the background (cold start)."""
        self._request_solve("manual")

    def cancel(self) -> None:
        """Stop the running solve (and forget queued ones)."""
        self._pending_mode = None
        if self._solve_job is not None:
            self._solve_job.cancel()

    def _request_solve(self, mode: str) -> None:
        if self._shut_down:
            return
        job = self._solve_job
        if job is None:
            self._start_solve(mode)
            return
        if self._pending_mode is None or _MODE_RANK[mode] >= _MODE_RANK[self._pending_mode]:
            self._pending_mode = mode
        # a slow cold solve of parameters that are already outdated is not worth finishing
        if self._solve_mode != "live" and job.tag[1] != self._project:
            job.cancel()

    def add_result_analysis(self, name: str, fn) -> None:
        """Run ``fn(result)`` in the worker after every solve and keep its value in
        ``result.extra[name]`` (``result.extra[name + "_error"]`` holds the message if it raised).

        For observables a view needs on every result (level labels, <L_z>, parities): computed
        next to the solve, they never hold up the window.  ``fn`` must not touch widgets."""
        self._analyses[str(name)] = fn

    def _start_solve(self, mode: str) -> None:
        from core.study import solve_project
        project = self._project
        start = None
        tolerance = None
        if mode == "live" and self.result is not None and self.result.grid == project.grid:
            start = self.result.spectrum.block()
            if self.live_tolerance is not None:
                tolerance = max(float(self.live_tolerance), project.solver.tolerance)
        self._solve_mode = mode
        self._pending_mode = None

        analyses = dict(self._analyses)
        live = mode == "live"

        def work(progress, should_stop, note):
            if not live:
                from core.estimate import estimate_solve
                est = estimate_solve(project)
                note(est)
                est.check()        # refused before any large allocation, with a suggestion
            result = solve_project(project, start=start, tolerance=tolerance, progress=progress,
                                   should_stop=should_stop)
            for name, fn in analyses.items():
                if should_stop():
                    break
                try:
                    result.extra[name] = fn(result)
                except Exception as exc:      # noqa: BLE001 - a label is never a reason to fail a solve
                    result.extra[name + "_error"] = describe_error(exc)
            if project.electrons == 2:
                _add_two_electron(result, live, progress, should_stop)
            return result

        job = Job(work, kind="solve", tag=(self._generation, project), notes=True)
        job.progressed.connect(self.progressed)
        job.noted.connect(self._on_estimated)
        job.solved.connect(self._on_solved)
        job.failed.connect(self._on_solve_failed)
        job.cancelled.connect(self._on_solve_cancelled)
        job.finished.connect(self._on_solve_finished)
        self._solve_job = job
        self._solve_t0 = time.perf_counter()
        job.start()
        self.solve_started.emit()
        self.busy_changed.emit(True)

    def _on_estimated(self, estimate) -> None:
        job = self._current_job()
        if job is not None and job.tag[0] == self._generation:
            self.estimated.emit(estimate)

    def _current_job(self) -> Job | None:
        job = self.sender()
        return job if isinstance(job, Job) else self._solve_job

    def _on_solved(self, result) -> None:
        job = self._current_job()
        if job is None or job.tag[0] != self._generation:
            return
        self.last_solve_seconds = time.perf_counter() - self._solve_t0
        self.result = result
        self._result_mode = self._solve_mode
        self._keep_two_electron(result)
        n = int(result.energies.size)
        if self._selected >= n:
            self._selected = n - 1
            self.selection_changed.emit(self._selected)
        self.solved.emit(result)
        self.stale_changed.emit()

    def _keep_two_electron(self, result) -> None:
        """Keep the two-electron levels the worker put beside ``result`` (with its fingerprint)."""
        from core.provenance import result_fingerprint
        pair = result.extra.get(TWO_ELECTRON_KEY)
        message = result.extra.get(TWO_ELECTRON_KEY + "_error", "")
        if pair is None and message == "" and self.two_electron is None and not self.two_electron_message:
            return                    # a one-electron project, as before
        self.two_electron = pair
        self.two_electron_message = message
        self._two_electron_fingerprint = result_fingerprint(result) if pair is not None else ""
        self.two_electron_changed.emit()

    def _on_solve_failed(self, message: str) -> None:
        job = self._current_job()
        if job is None or job.tag[0] != self._generation:
            return
        self.failed.emit(message)

    def _on_solve_cancelled(self) -> None:
        job = self._current_job()
        if job is None or job.tag[0] != self._generation:
            return
        self.cancelled.emit()

    def _on_solve_finished(self) -> None:
        job = self.sender()
        if isinstance(job, Job):
            job.join()
            self._retire(job)
        if job is self._solve_job or not isinstance(job, Job):
            self._solve_job = None
            self._solve_mode = None
        if self._pending_mode is not None and not self._shut_down:
            mode = self._pending_mode
            if mode == "live" and self.result is None:
                mode = "settle"
            self._start_solve(mode)
        elif self._solve_job is None and self._sweep_job is None:
            self.busy_changed.emit(False)

    def warm_up(self) -> None:
        """Load the solver's compiled kernels and lazy imports in the background, once.

        The first solve of a process loads numba and its cached kernels.  Importing numba from a
        worker thread holds the interpreter lock in long pieces (a 128^2 first solve stalled the
        window for 145-219 ms; with numba imported beforehand, 17 ms), and so does importing scipy's
        sparse solvers for the level count that follows the first solve (a further 320-400 ms,
        found by sampling the threads' stacks).  Both are imported here, on the GUI thread, once,
        right after the window opened (about 0.4 s before anything is asked of it); the kernels
        are then loaded by a tiny solve in the background."""
        if self._shut_down or self._aux_jobs:
            return
        import dataclasses as dc
        import importlib

        from .workers import compute_lock
        compute_lock()                             # imports numba and picks its threading layer
        # the level count that follows each solve imports scipy's sparse solvers: likewise here, once
        for name in ("core.kernels", "core.inertia", "core.estimate", "core.analysis"):
            importlib.import_module(name)

        from core.grid import Grid

        base = core_new_project()
        tiny = dc.replace(base, grid=Grid([-120.0, -120.0], [120.0, 120.0], [40, 40]),
                          solver=dc.replace(base.solver, states=2, scheme="fd2", tolerance=1e-4))

        count_process = self.checks.count_process

        def work(progress, should_stop):
            from core.study import solve_project
            count_process.start()              # the level counts' child process, started while idle
            from core.inertia import dense_factor_rate
            dense_factor_rate()                # this machine's factorisation rate, for the count estimates
            return solve_project(tiny, should_stop=should_stop)

        job = Job(work, kind="warm-up")
        job.finished.connect(lambda: self._finished_jobs.append(job))
        self._aux_jobs.append(job)
        job.start()

    # ------------------------------------------------------------------ sweeps
    def run_sweep(self, parameter: str, values: Sequence[float], states: int | None = None, *,
                  keep_states: bool | None = None) -> bool:
        """Sweep one parameter in the background (:func:`core.sweep.run_sweep`).

        Returns False (and emits ``sweep_failed``) if the request is refused at once.
        ``keep_states`` None: keep the states of every point when they fit in about 512 MiB."""
        if self._shut_down:
            return False
        if self._sweep_job is not None:
            self.sweep_failed.emit("a sweep is already running; cancel it or wait for it to finish")
            return False
        try:
            from core import sweep as core_sweep
        except ImportError as exc:
            self.sweep_failed.emit(f"the sweep engine is not available in this build ({exc})")
            return False
        project = self._project
        if parameter not in project.parameters:
            self.sweep_failed.emit(f"no parameter called {parameter!r}; this project's parameters are: "
                                   f"{', '.join(project.parameters) or 'none'}")
            return False
        try:
            vals = np.asarray(values, dtype=float).ravel()
        except (TypeError, ValueError):
            self.sweep_failed.emit("the sweep values must be numbers")
            return False
        if vals.size < 2 or not np.all(np.isfinite(vals)):
            self.sweep_failed.emit("a sweep needs at least two finite values")
            return False
        if keep_states is None:
            k = int(states or project.solver.states)
            item = 16 if any(v != 0 for v in project.magnetic_field) else 8
            keep_states = vals.size * (k + 4) * project.grid.size * item < 512 * 2**20

        def work(progress, should_stop, note):
            from core.estimate import estimate_sweep
            est = estimate_sweep(project, vals.size, states=states)
            note(est)
            est.check()        # refused before any large allocation, with a suggestion
            return core_sweep.run_sweep(project, parameter, vals, states=states, keep_states=keep_states,
                                        progress=progress, should_stop=should_stop)

        job = Job(work, kind="sweep", tag=(self._generation, project), notes=True)
        job.noted.connect(self.sweep_estimated)
        job.progressed.connect(lambda _stage, f: self.sweep_progressed.emit(f))
        job.solved.connect(self._on_sweep_done)
        job.failed.connect(self._on_sweep_failed)
        job.cancelled.connect(self._on_sweep_cancelled)
        job.finished.connect(self._on_sweep_finished)
        self._sweep_job = job
        job.start()
        self.sweep_started.emit()
        self.busy_changed.emit(True)
        return True

    def cancel_sweep(self) -> None:
        if self._sweep_job is not None:
            self._sweep_job.cancel()

    def _on_sweep_done(self, result) -> None:
        job = self.sender()
        if isinstance(job, Job) and job.tag[0] != self._generation:
            return
        self.sweep_result = result
        self.sweep_finished.emit(result)
        self.stale_changed.emit()

    def _on_sweep_failed(self, message: str) -> None:
        job = self.sender()
        if isinstance(job, Job) and job.tag[0] != self._generation:
            return
        self.sweep_failed.emit(message)

    def _on_sweep_cancelled(self) -> None:
        job = self.sender()
        if isinstance(job, Job) and job.tag[0] != self._generation:
            return
        self.sweep_failed.emit("sweep cancelled")

    def _on_sweep_finished(self) -> None:
        job = self.sender()
        if isinstance(job, Job):
            job.join()
            self._retire(job)
        self._sweep_job = None
        if self._solve_job is None:
            self.busy_changed.emit(False)

    def _retire(self, job: Job) -> None:
        """Keep a finished job alive a little longer: it must not be destroyed inside its own signal."""
        self._finished_jobs = [j for j in self._finished_jobs[-3:] if j is not job] + [job]

    # ------------------------------------------------------------------ shutdown
    def _cancel_jobs(self) -> None:
        self._pending_mode = None
        for job in (self._solve_job, self._sweep_job, *self._aux_jobs):
            if job is not None:
                job.cancel()

    def shutdown(self, *, keep_recovery: bool = False) -> None:
        """Cancel and join every background job; stop autosaving and remove the recovery copy
        (unless ``keep_recovery``).  Safe to call more than once."""
        self._shut_down = True
        self._generation += 1            # results still in the event queue are dropped
        self._autosave_timer.stop()
        self.checks.shutdown()
        self._cancel_jobs()
        for job in (self._solve_job, self._sweep_job, *self._aux_jobs):
            if job is not None:
                job.join()
        self._solve_job = None
        self._sweep_job = None
        if not keep_recovery:
            self._drop_recovery_file()
