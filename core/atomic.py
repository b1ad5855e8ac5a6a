"""Atomic file writes: a temporary file in the same folder, then ``os.replace``.

A failed write leaves any existing file untouched and no temporary file behind;
the new file keeps the old file's permissions (or the umask's default).
"""
from __future__ import annotations

import os
import tempfile
from pathlib import Path
from typing import Callable, Optional, Union

from .errors import InputError

__all__ = ["atomic_write", "file_mode"]


def file_mode(path: Path) -> int:
    """Permissions of ``path`` if it exists, else the umask's default for a new file."""
    try:
        return os.stat(path).st_mode & 0o7777
    except OSError:
        umask = os.umask(0)
        os.umask(umask)
        return 0o666 & ~umask


def atomic_write(path: Union[str, os.PathLike], write: Optional[Callable[[str], None]] = None, *,
                 data: Optional[bytes] = None, suffix: Optional[str] = None, verb: str = "write") -> Path:
    """Write ``data`` (bytes, flushed and synced) or call ``write(tmp_path)``, then move it to ``path``."""
    p = Path(path)
    folder = p.parent if str(p.parent) else Path(".")
    if not folder.is_dir():
        raise InputError(f"cannot {verb} {p}: the folder {folder} does not exist")
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{p.name}.", suffix=suffix or p.suffix or ".tmp", dir=folder)
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
