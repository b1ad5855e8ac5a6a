"""Saving survives links, killed saves, reused process ids and text no UTF-8 file can hold."""
from __future__ import annotations

import dataclasses
import os
import subprocess
import sys
import time

from core.atomic import atomic_write
from core.project import load_project, new_project, save_project


def test_saving_through_a_link_writes_its_target(tmp_path):
    real = tmp_path / "real" / "dot.json"
    real.parent.mkdir()
    save_project(new_project("first"), real)
    link = tmp_path / "link.json"
    link.symlink_to(real)
    save_project(new_project("second"), link)
    assert link.is_symlink() and os.path.realpath(link) == str(real)
    assert load_project(real).title == "second"
    assert not [p for p in real.parent.iterdir() if p.name.startswith(".")]


def test_a_killed_save_leaves_a_temporary_file_that_the_next_save_removes(tmp_path):
    target = tmp_path / "dot.json"
    # a child process starts a save and is killed (SIGKILL) before it can replace the file
    code = ("import os, sys, tempfile; sys.path.insert(0, sys.argv[2]); "
            "fd, t = tempfile.mkstemp(prefix='.dot.json.%d.' % os.getpid(), suffix='.json', dir=sys.argv[1]); "
            "os.write(fd, b'{half'); os.kill(os.getpid(), 9)")
    proc = subprocess.run([sys.executable, "-c", code, str(tmp_path), os.getcwd()], timeout=60)
    assert proc.returncode == -9
    left = [p for p in tmp_path.iterdir() if p.name.startswith(".dot.json.")]
    assert len(left) == 1
    atomic_write(target, data=b"{}")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["dot.json"]


def test_a_recent_temporary_file_of_a_running_process_is_kept(tmp_path):
    # the parent of this test process is alive: its temporary file may belong to a save in progress
    busy = tmp_path / f".dot.json.{os.getppid()}.abcd1234.json"
    busy.write_bytes(b"partial")
    atomic_write(tmp_path / "dot.json", data=b"{}")
    assert busy.exists()


def test_a_title_with_a_lone_surrogate_is_saved_repaired(tmp_path):
    p = tmp_path / "dot.json"
    save_project(new_project("dot \ud800 one"), p)
    assert load_project(p).title == "dot \ufffd one"


def test_recovery_entry_survives_process_id_reuse(session, settings, qtbot, tmp_path):
    """An entry written by a crashed window whose process id now belongs to a live process (here: this one)
    is still offered, because the key holds the process's start time too."""
    session.set_project(dataclasses.replace(session.project, title="Work of a crashed window"), "edit")
    qtbot.waitUntil(lambda: session.recovery_file.is_file(), timeout=5000)
    value = list(settings.value(f"recovery/{session._recovery_key}"))
    pid, _, start = session._recovery_key.partition("-")
    assert pid == str(os.getpid()) and start
    crashed = tmp_path / "left-behind.json"
    crashed.write_bytes(session.recovery_file.read_bytes())
    reused = f"{os.getpid()}-{int(start) - 1000}"          # same id, an earlier process
    settings.setValue(f"recovery/{reused}", [str(crashed)] + value[1:])
    entries = session.recoverable()
    assert [e.key for e in entries] == [reused]
    assert entries[0].title == "Work of a crashed window"


def test_window_session_cleans_stale_recovery_temporaries(qapp, settings, tmp_path):
    from app.session import Session
    folder = tmp_path / "recovery"
    folder.mkdir()
    stale = folder / ".unsaved-1-2.json.999999999.k3j4h5g6.json"
    stale.write_bytes(b"{")
    old = time.time() - 3600
    os.utime(stale, (old, old))
    s = Session(settings=settings, recovery_dir=folder, autosave_ms=200)
    try:
        assert not stale.exists()
    finally:
        s.shutdown()


def test_window_shows_a_dialog_for_a_malformed_file_at_start(session, qtbot, tmp_path):
    """A file whose term kind is a list (it once raised TypeError and the window died at start)."""
    from app.main import MainWindow
    bad = tmp_path / "bad.json"
    bad.write_text('{"schema_version": 2, "units": "semiconductor", "material": "GaAs", "grid": {"lower": [-50, -50],'
                   ' "upper": [50, 50], "points": [16, 16]}, "potential": [{"kind": ["formula"]}]}', encoding="utf-8")
    w = MainWindow(session=session, confirm_close=lambda: "discard")
    qtbot.addWidget(w)
    w.show()
    assert w.open_file(bad, ask=False) is False
    box = w.open_error_box
    assert box.isVisible() and "potential[0].kind: expected one of formula" in box.text()
    assert w.isVisible() and session.project.title != ""
    box.close()
    w.close()
