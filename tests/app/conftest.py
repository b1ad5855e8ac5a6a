"""Shared set-up for the desktop application's tests (pytest-qt).

* Without a display, Qt runs on the ``offscreen`` platform (set before Qt loads).
  OpenGL views need ``xvfb-run -a`` with ``QT_QPA_PLATFORM=xcb``; their tests skip elsewhere.
* Settings (recent files, recovery entries) and the recovery folder go to a
  throw-away folder, never to the user's own.
* Every test fails if it leaves a background job (solve or sweep) or a Python
  thread running: windows and sessions must cancel and join their workers.
"""
from __future__ import annotations

import os
import sys
import tempfile
import threading
import time
from pathlib import Path

import pytest

if not os.environ.get("DISPLAY") and not os.environ.get("WAYLAND_DISPLAY"):
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

_HOME = Path(tempfile.mkdtemp(prefix="wellscape-test-home-"))
for _var, _sub in (("XDG_CONFIG_HOME", "config"), ("XDG_DATA_HOME", "data"), ("XDG_CACHE_HOME", "cache")):
    os.environ[_var] = str(_HOME / _sub)

ROOT = Path(__file__).resolve().parents[2]

from app.style import share_gl_contexts  # noqa: E402 - before pytest-qt makes the QApplication

share_gl_contexts()
SAMPLES = ROOT / "sample_projects"


def _running_jobs():
    workers = sys.modules.get("app.workers")
    return workers.running_jobs() if workers is not None else []


def _python_threads():
    return {t for t in threading.enumerate()
            if t.is_alive() and not isinstance(t, threading._DummyThread) and t is not threading.main_thread()}


@pytest.fixture(autouse=True)
def no_worker_left_running():
    """Fail a test that leaves a worker (Qt job or Python thread) running after it ends."""
    before = _python_threads()
    yield
    grace = time.monotonic() + 0.5
    while (_running_jobs() or (_python_threads() - before)) and time.monotonic() < grace:
        time.sleep(0.02)
    jobs = _running_jobs()
    threads = [t for t in _python_threads() - before if not t.daemon]
    for job in jobs:                       # clean up so that one failure does not cascade
        job.cancel()
        job.wait(30000)
    assert not jobs, f"the test left {len(jobs)} background job(s) running: {[j.objectName() for j in jobs]}"
    assert not threads, f"the test left Python threads running: {[t.name for t in threads]}"


@pytest.fixture
def settings(tmp_path, qapp):
    from PySide6.QtCore import QSettings
    s = QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat)
    yield s
    s.sync()


@pytest.fixture
def session(qapp, settings, tmp_path):
    """A Session with throw-away settings and recovery folder; shut down (jobs joined) afterwards."""
    from app.session import Session
    s = Session(settings=settings, recovery_dir=tmp_path / "recovery", autosave_ms=200)
    yield s
    s.shutdown()


@pytest.fixture
def sample_path():
    def get(name: str) -> Path:
        return SAMPLES / (name if name.endswith(".json") else name + ".json")
    return get
