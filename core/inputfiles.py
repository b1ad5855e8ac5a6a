"""Checks of a file the user points us at, before anything is read: it exists, is a regular file
and is not larger than a stated limit.  One wording for every reader (layouts, point tables, ...)."""
from __future__ import annotations

from pathlib import Path

from .errors import InputError

__all__ = ["check_input_file"]


def check_input_file(path, what: str, max_bytes: int, *, error=InputError) -> int:
    """Size in bytes of ``path`` after checking it; ``what`` names the file in errors ("layout",
    "points file").  Raises ``error`` with one line naming the problem and the limit."""
    p = Path(path)
    try:
        size = p.stat().st_size
    except FileNotFoundError:
        raise error(f"{what} {p}: no such file") from None
    except OSError as exc:
        raise error(f"{what} {p}: cannot be read ({exc.strerror or exc})") from None
    if not p.is_file():
        raise error(f"{what} {p}: is not a regular file")
    if size > max_bytes:
        raise error(f"{what} {p}: {size / 2**20:.0f} MiB is more than the {max_bytes // 2**20} MiB "
                    f"a {what} may hold")
    return size
