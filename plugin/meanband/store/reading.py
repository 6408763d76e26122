"""Bounded reads of the files meanband is given: regular files only, a size limit, a depth limit.

A report, a plan or a file of rows may come from anywhere (a CI artifact, a cache, a typo that
names ``/dev/zero``): reading one must end quickly with a message that names the file, never
hang on a FIFO, fill memory, or end in a ``RecursionError`` traceback on deeply nested data.
"""

from __future__ import annotations

import json
import os
import stat
from collections.abc import Callable
from typing import Any

from meanband import defaults
from meanband.errors import MeanbandError

__all__ = ["MAX_DEPTH", "ReadError", "check_depth", "loads_json", "parse_size", "read_text"]

#: Deepest nesting of arrays and objects a meanband file may hold. A report is about eight levels
#: deep; the limit leaves room for extra fields a hook adds, and stays far below the depth at
#: which Python's recursion limit would stop the readers and the schema validator.
MAX_DEPTH = 64

_UNITS = {"": 1, "b": 1, "k": 1024, "kb": 1024, "kib": 1024, "m": 1024**2, "mb": 1024**2,
          "mib": 1024**2, "g": 1024**3, "gb": 1024**3, "gib": 1024**3}


class ReadError(MeanbandError, ValueError):
    """A file that meanband refuses to read; the message names the file and the remedy."""


def parse_size(value: Any) -> int:
    """A byte count from ``268435456``, ``"256MiB"``, ``"64k"`` (binary units); at least 1."""
    if isinstance(value, bool):
        raise ReadError(f"a byte count is a whole number such as 268435456 or 256MiB, got {value!r}")
    if isinstance(value, int):
        count = value
    else:
        text = str(value).strip().lower().replace(" ", "")
        digits = text.rstrip("abcdefghijklmnopqrstuvwxyz")
        unit = text[len(digits):]
        if not digits.isdigit() or unit not in _UNITS:
            raise ReadError(f"a byte count is a whole number such as 268435456 or 256MiB, "
                            f"got {value!r}")
        count = int(digits) * _UNITS[unit]
    if count < 1:
        raise ReadError(f"a byte count must be at least 1, got {value!r}")
    return count


def read_text(path: str | os.PathLike[str], *, max_bytes: int | None = None,
              setting: str = "--max-bytes") -> str:
    """The UTF-8 text of the regular file at ``path``, refused when larger than ``max_bytes``.

    The file is opened without blocking and checked before any byte is read, so a FIFO, a
    device or a directory is refused at once; at most ``max_bytes + 1`` bytes are read, so a
    file that grows while it is read cannot exhaust memory either. ``setting`` names what
    raises the limit, for the message. ``FileNotFoundError``, other ``OSError`` and
    ``UnicodeDecodeError`` pass through for the caller to word.
    """
    limit = defaults.MAX_READ_BYTES if max_bytes is None else max_bytes
    source = os.fspath(path)
    handle = os.open(source, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_BINARY", 0))
    try:
        info = os.fstat(handle)
        if not stat.S_ISREG(info.st_mode):
            raise ReadError(f"{source} is {_kind(info.st_mode)}, not a regular file; "
                            "give the path of a file")
        if info.st_size > limit:
            raise ReadError(_too_large(source, info.st_size, limit, setting))
        chunks = []
        left = limit + 1
        while left > 0:
            chunk = os.read(handle, min(left, 1 << 20))
            if not chunk:
                break
            chunks.append(chunk)
            left -= len(chunk)
    finally:
        os.close(handle)
    data = b"".join(chunks)
    if len(data) > limit:
        raise ReadError(_too_large(source, len(data), limit, setting))
    return data.decode("utf-8")


def loads_json(text: str, *, source: str,
               parse_constant: Callable[[str], Any] | None = None) -> Any:
    """Parse JSON text, refusing nesting deeper than :data:`MAX_DEPTH` with a message naming
    ``source``; ``json.JSONDecodeError`` passes through for the caller to word."""
    try:
        document = json.loads(text, parse_constant=parse_constant)
    except RecursionError:
        raise ReadError(_too_deep(source)) from None
    check_depth(document, source=source)
    return document


def check_depth(document: Any, *, source: str, limit: int = MAX_DEPTH) -> None:
    """Raise :class:`ReadError` when arrays and objects nest deeper than ``limit``.

    Walks with an explicit stack (no recursion); a list without containers, such as a list of
    trials, is passed over at C speed.
    """
    stack = [(document, 1)]
    while stack:
        value, depth = stack.pop()
        if isinstance(value, dict):
            children: Any = value.values()
        elif isinstance(value, list):
            if not {dict, list} & set(map(type, value)):
                if depth > limit:
                    raise ReadError(_too_deep(source))
                continue
            children = value
        else:
            continue
        if depth > limit:
            raise ReadError(_too_deep(source))
        stack.extend((child, depth + 1) for child in children
                     if isinstance(child, (dict, list)))


def _too_deep(source: str) -> str:
    return (f"{source}: arrays and objects are nested too deeply (more than {MAX_DEPTH} "
            "levels, deeper than any meanband file); was the right file given?")


def _too_large(source: str, size: int, limit: int, setting: str) -> str:
    return (f"{source} is larger than the read limit of {limit:,} bytes ({size:,} bytes or "
            f"more); raise the limit with {setting} if the file is meant to be this large")


def _kind(mode: int) -> str:
    if stat.S_ISDIR(mode):
        return "a directory"
    if stat.S_ISFIFO(mode):
        return "a FIFO (named pipe)"
    if stat.S_ISSOCK(mode):
        return "a socket"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    return "not a plain file"
