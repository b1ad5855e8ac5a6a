"""What every ``wellscape`` subcommand shares: the exit status for user errors, the terminal
progress bar, ``--set`` parsing, loading a project with its notes printed, and JSON conversion.

Kept apart from :mod:`app.cli` so that the subcommand modules (sweep, converge, figure, layout)
import it without importing the dispatcher that imports them.
"""
from __future__ import annotations

import contextlib
import sys
import threading
import time
from collections.abc import Sequence

import numpy as np

EXIT_USER_ERROR = 2


class Progress:
    """A one-line progress bar on a terminal; silent when stderr is not a terminal."""

    def __init__(self, label: str, enabled: bool | None = None):
        self.label = label
        self.enabled = sys.stderr.isatty() if enabled is None else enabled
        self.t0 = time.perf_counter()
        self.last = -1.0

    def __call__(self, stage: str, fraction: float) -> None:
        if not self.enabled:
            return
        now = time.perf_counter()
        if fraction < 1.0 and now - self.last < 0.1:
            return
        self.last = now
        width = 28
        filled = int(round(width * max(0.0, min(1.0, fraction))))
        sys.stderr.write(f"\r{self.label}: {stage:<10} [{'#' * filled}{'.' * (width - filled)}] "
                         f"{100 * fraction:5.1f}%  {now - self.t0:6.1f} s")
        sys.stderr.flush()

    def done(self) -> None:
        if self.enabled:
            sys.stderr.write("\n")
            sys.stderr.flush()

    @contextlib.contextmanager
    def waiting(self, stage: str, *, after: float = 1.0):
        """For one long call that reports no fraction (a factorisation): after ``after`` seconds, a
        line with the elapsed time, updated twice a second until the call returns."""
        if not self.enabled:
            yield
            return
        stop = threading.Event()
        t0 = time.perf_counter()

        def tick():
            if stop.wait(after):
                return
            while True:
                sys.stderr.write(f"\r{self.label}: {stage} ... {time.perf_counter() - t0:6.1f} s")
                sys.stderr.flush()
                if stop.wait(0.5):
                    sys.stderr.write("\n")
                    sys.stderr.flush()
                    return

        thread = threading.Thread(target=tick, daemon=True)
        thread.start()
        try:
            yield
        finally:
            stop.set()
            thread.join()


def parse_sets(items: Sequence[str]) -> dict:
    out = {}
    for item in items or ():
        if "=" not in item:
            raise UsageError(f"--set expects NAME=VALUE, got {item!r}")
        name, value = item.split("=", 1)
        try:
            out[name.strip()] = float(value)
        except ValueError:
            raise UsageError(f"--set {name}: {value!r} is not a number") from None
    return out


class UsageError(Exception):
    """A command-line mistake: printed as one line, exit status 2."""


def apply_sets(project, items: Sequence[str]):
    """``(project, parameter overrides)`` for ``--set`` items: parameters become overrides; a field
    component (``magnetic_field[2]``) or a gate voltage (``gate:P1``) is fixed in the project."""
    from core.errors import InputError
    from core.sweep.targets import set_target, sweep_targets
    overrides = {}
    for name, value in parse_sets(items).items():
        if name in project.parameters:
            overrides[name] = value
            continue
        try:
            project = set_target(project, name, value)
        except InputError:
            known = ", ".join(sweep_targets(project)) or "none"
            raise UsageError(f"--set {name}: unknown parameter, field component or gate; this project's "
                              f"settable names are: {known}") from None
    return project, overrides


def load_with_notes(path: str):
    """The project at ``path``; its warnings and a schema migration printed on stderr."""
    from core.project import load_project
    project = load_project(path)
    for w in project.warnings:
        print(f"wellscape: warning: {w}", file=sys.stderr)
    if project.migrated_from:
        print(f"wellscape: note: {path} uses schema {project.migrated_from}; read it in the current schema "
              f"(the file is unchanged)", file=sys.stderr)
    return project


def jsonable(obj):
    if isinstance(obj, dict):
        return {k: jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return jsonable(obj.tolist())
    if isinstance(obj, (np.floating,)):
        return float(obj)
    if isinstance(obj, (np.integer,)):
        return int(obj)
    return obj
