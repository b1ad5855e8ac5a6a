"""Reading small JSON data files safely: size limit, UTF-8, no NaN/Infinity literals, clear errors."""
from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any, Union

from .errors import InputError

__all__ = ["read_text_file", "parse_json"]


def read_text_file(path: Union[str, os.PathLike], *, kind: str, max_bytes: int, error=InputError,
                   too_big_hint: str = "") -> str:
    """The UTF-8 text of a small file, or ``error`` naming the problem (missing, folder, too big, not UTF-8)."""
    p = Path(path)
    try:
        size = p.stat().st_size
    except FileNotFoundError:
        raise error(f"no such {kind}: {p}") from None
    except OSError as exc:
        raise error(f"cannot read {p}: {exc.strerror or exc}") from None
    if p.is_dir():
        raise error(f"{p} is a folder, not a {kind}")
    if size > max_bytes:
        raise error(f"{p} is {size / 2**20:.0f} MiB, more than a {kind} holds{too_big_hint}")
    try:
        raw = p.read_bytes()
    except OSError as exc:
        raise error(f"cannot read {p}: {exc.strerror or exc}") from None
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise error(f"{p} is not UTF-8 text (byte {exc.start}); {kind}s are UTF-8 JSON") from None


def _refuse_constant(name):
    raise ValueError(f"{name} is not allowed in a data file; use a finite number")


def parse_json(text: str, *, source: str, error=InputError) -> Any:
    """json.loads that refuses NaN/Infinity and reports the line and column of a syntax error."""
    try:
        return json.loads(text, parse_constant=_refuse_constant)
    except json.JSONDecodeError as exc:
        raise error(f"{source} is not valid JSON: {exc.msg} at line {exc.lineno}, column {exc.colno}") from None
    except ValueError as exc:
        raise error(f"{source}: {exc}") from None
    except RecursionError:
        raise error(f"{source}: the JSON is nested too deeply") from None
