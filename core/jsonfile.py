"""Reading small JSON data files safely: size limit, UTF-8, no NaN/Infinity literals, clear errors."""
from __future__ import annotations

import json
import os
import re
from pathlib import Path
from typing import Any

from .errors import InputError

__all__ = ["read_text_file", "parse_json", "repair_text"]


def read_text_file(path: str | os.PathLike, *, kind: str, max_bytes: int, error=InputError,
                   too_big_hint: str = "") -> str:
    """The UTF-8 text of a small file, or ``error`` naming the problem (missing, folder, too big, not UTF-8)."""
    p = Path(path)
    shown = str(p) if len(str(p)) <= 200 else str(p)[:197] + "..."
    if "\0" in str(p):
        raise error(f"the {kind} path holds a NUL character, which no file name can contain")
    try:
        size = p.stat().st_size
    except FileNotFoundError:
        raise error(f"no such {kind}: {shown}") from None
    except OSError as exc:
        raise error(f"cannot read {shown}: {exc.strerror or exc}") from None
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


class _DuplicateKey(ValueError):
    pass


def _unique_object(pairs):
    out = {}
    for key, value in pairs:
        if key in out:
            shown = key if len(key) <= 40 else key[:37] + "..."
            raise _DuplicateKey(f"the key {json.dumps(shown)} appears twice in one object; keep one")
        out[key] = value
    return out


def _lone_surrogate_path(value, path: str = "") -> str | None:
    """The path of the first key or text holding a lone UTF-16 surrogate (no UTF-8 file can hold one)."""
    stack = [(value, path)]
    while stack:
        item, where = stack.pop()
        if isinstance(item, str):
            if _SURROGATE.search(item):
                return where or "(top level)"
        elif isinstance(item, dict):
            for k, v in item.items():
                sub = f"{where}.{k}" if where else k
                if _SURROGATE.search(k):
                    return f"{where or '(top level)'} (a key)"
                stack.append((v, sub))
        elif isinstance(item, list):
            stack.extend((v, f"{where}[{i}]") for i, v in enumerate(item))
    return None


_SURROGATE = re.compile("[\ud800-\udfff]")
_SURROGATE_ESCAPE = re.compile(r"\\u[dD][89a-fA-F][0-9a-fA-F]{2}")


def parse_json(text: str, *, source: str, error=InputError) -> Any:
    """json.loads that refuses NaN/Infinity, duplicate keys, integers of more than 4300 digits and lone
    surrogates (``"\\ud800"``), and reports the line and column of a syntax error."""
    try:
        data = json.loads(text, parse_constant=_refuse_constant, object_pairs_hook=_unique_object)
    except json.JSONDecodeError as exc:
        raise error(f"{source} is not valid JSON: {exc.msg} at line {exc.lineno}, column {exc.colno}") from None
    except ValueError as exc:       # NaN, duplicate keys, and Python's limit on integer digits
        reason = str(exc)
        if "integer string conversion" in reason or "digits" in reason:
            reason = "an integer has too many digits"
        raise error(f"{source}: {reason}") from None
    except RecursionError:
        raise error(f"{source}: the JSON is nested too deeply") from None
    if _SURROGATE_ESCAPE.search(text):
        where = _lone_surrogate_path(data)
        if where is not None:
            raise error(f"{source}: {where} holds a lone surrogate escape (\\ud800-\\udfff), which is not a "
                        f"character; remove it or write the whole character") from None
    return data


def repair_text(value: str) -> str:
    """``value`` with every lone surrogate replaced by U+FFFD, so that it can always be written as UTF-8."""
    return _SURROGATE.sub("\ufffd", value) if isinstance(value, str) else value
