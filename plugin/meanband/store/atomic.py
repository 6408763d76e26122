"""Atomic file writes: a reader sees the old file or the new one, never half of one."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def write_error_words(exc: BaseException) -> str:
    """An OSError as words and the file it is about ("Not a directory: out/r.json; ..."), not
    bare errno text; any other error as its message."""
    if isinstance(exc, OSError) and exc.errno:
        where = f": {exc.filename}" if exc.filename else ""
        return f"{os.strerror(exc.errno)}{where}; choose a writable location"
    return str(exc)


def write_atomic(path: str | os.PathLike[str], data: bytes | str) -> Path:
    """Write ``data`` to ``path`` through a temporary file of a unique name in the same folder.

    The temporary file is made with ``O_CREAT | O_EXCL`` (``tempfile.mkstemp``), so a link
    planted under any name is never followed and two writers never share one file; the rename
    then replaces ``path`` itself (a link at ``path`` is replaced, not written through).
    """
    target = Path(path)
    target.parent.mkdir(parents=True, exist_ok=True)
    payload = data.encode("utf-8") if isinstance(data, str) else data
    handle, temporary = tempfile.mkstemp(dir=target.parent, prefix=f".{target.name}.",
                                         suffix=".partial")
    try:
        with os.fdopen(handle, "wb") as out:
            out.write(payload)
            out.flush()
            os.fsync(out.fileno())
        os.chmod(temporary, 0o666 & ~_umask())  # as an ordinary new file, not mkstemp's 0600
        os.replace(temporary, target)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise
    return target
