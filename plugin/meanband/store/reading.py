"""Bounded reads of the files meanband is given: a depth limit on what they hold.

A report, a plan or a file of rows may come from anywhere (a CI artifact, a cache, a typo that
names ``/dev/zero``): reading one must end quickly with a message that names the file, never
hang on a FIFO, fill memory, or end in a ``RecursionError`` traceback on deeply nested data.
"""

from __future__ import annotations

import json
from collections.abc import Callable
from typing import Any

from meanband.errors import MeanbandError

__all__ = ["MAX_DEPTH", "ReadError", "check_depth", "loads_json"]

#: Deepest nesting of arrays and objects a meanband file may hold. A report is about eight levels
#: deep; the limit leaves room for extra fields a hook adds, and stays far below the depth at
#: which Python's recursion limit would stop the readers and the schema validator.
MAX_DEPTH = 64


class ReadError(MeanbandError, ValueError):
    """A file that meanband refuses to read; the message names the file and the remedy."""


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
