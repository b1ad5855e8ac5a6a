"""Atomic file writes: a temporary file in the same folder, then ``os.replace``.

A failed write leaves any existing file untouched and no temporary file behind (and one
killed mid-write leaves one that the next write of the same file removes);
the new file keeps the old file's permissions (or the umask's default).
"""
from __future__ import annotations

import os
import re
import tempfile
import time
from collections.abc import Callable
from pathlib import Path

from .errors import InputError

__all__ = ["atomic_write", "file_mode", "clean_stale_temporaries"]


def file_mode(path: Path) -> int:
    """Permissions of ``path`` if it exists, else the umask's default for a new file."""
    try:
        return os.stat(path).st_mode & 0o7777
    except OSError:
        umask = os.umask(0)
        os.umask(umask)
        return 0o666 & ~umask


def _pid_alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:                      # someone else's process: alive
        return True
    return True


#: a temporary file of our own younger than this may belong to a save still running in this process
_OWN_TMP_GRACE_S = 60.0


def clean_stale_temporaries(path: str | os.PathLike, *, any_name: bool = False) -> int:
    """Remove temporary files that a killed save of ``path`` left beside it; returns how many.

    A temporary file is named ``.NAME.PID.XXXX.SUFFIX``: it is stale when process PID is gone
    (a save that was killed), or is this process and the file is older than a minute.
    ``any_name=True``: those of every file in the folder ``path`` (at a program's start).
    """
    p = Path(path)
    folder = p if any_name else (p.parent if str(p.parent) else Path("."))
    head = r"\..+\." if any_name else re.escape(f".{p.name}.")
    pattern = re.compile(head + r"(\d+)\.[A-Za-z0-9_]+" + r"\.[A-Za-z0-9_]+$")
    removed = 0
    try:
        candidates = [e for e in os.scandir(folder) if e.name.startswith("." if any_name else f".{p.name}.")]
    except OSError:
        return 0
    for entry in candidates:
        m = pattern.match(entry.name)
        if not m or not entry.is_file(follow_symlinks=False):
            continue
        pid = int(m.group(1))
        try:
            age = time.time() - entry.stat(follow_symlinks=False).st_mtime
        except OSError:
            continue
        if (pid == os.getpid() and age > _OWN_TMP_GRACE_S) or (pid != os.getpid() and not _pid_alive(pid)):
            try:
                os.unlink(entry.path)
                removed += 1
            except OSError:
                pass
    return removed


def atomic_write(path: str | os.PathLike, write: Callable[[str], None] | None = None, *,
                 data: bytes | None = None, suffix: str | None = None, verb: str = "write") -> Path:
    """Write ``data`` (bytes, flushed and synced) or call ``write(tmp_path)``, then move it to ``path``.

    When ``path`` is a symbolic link, the file it points to is written (the link stays a link).
    Temporary files that an earlier, killed write of the same file left behind are removed first.
    """
    p = Path(path)
    if p.is_symlink():
        p = Path(os.path.realpath(p))
    folder = p.parent if str(p.parent) else Path(".")
    if not folder.is_dir():
        raise InputError(f"cannot {verb} {p}: the folder {folder} does not exist")
    clean_stale_temporaries(p)
    ext = suffix or p.suffix or ".tmp"
    if not re.fullmatch(r"\.[A-Za-z0-9_]+", ext):
        ext = ".tmp"
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{p.name}.{os.getpid()}.", suffix=ext, dir=folder)
    except OSError as exc:
        raise InputError(f"cannot write in {folder}: {exc.strerror or exc}") from None
    try:
        os.chmod(tmp, file_mode(p))
        if data is not None:
            with os.fdopen(fd, "wb") as fh:
                fh.write(data)
                fh.flush()
                os.fsync(fh.fileno())
        else:
            os.close(fd)
            write(tmp)
        os.replace(tmp, p)
    except BaseException as exc:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        if isinstance(exc, OSError):
            raise InputError(f"cannot {verb} {p}: {exc.strerror or exc}") from None
        raise
    return p
