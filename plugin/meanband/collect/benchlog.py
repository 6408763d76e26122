"""Read one channel of a bench log (CSV or whitespace-separated text) as trials."""

from __future__ import annotations

import csv
import datetime
import math
import os
from pathlib import Path

import numpy as np

from meanband.errors import TrialError, hide_plugin_frames

__all__ = ["WHITESPACE", "log_time_notes", "read_column", "read_timed_column"]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

#: ``delimiter=WHITESPACE`` splits on runs of spaces and tabs.
WHITESPACE = " "
_MAX_SHOWN_NAMES = 12


def read_column(
    path: str | os.PathLike[str],
    column: str | int | None = None,
    *,
    delimiter: str | None = None,
    header: bool | None = None,
) -> np.ndarray:
    """Values of one column of a bench log, as float64, in file order.

    - Blank lines and lines whose first non-blank character is ``#`` are skipped.
    - ``delimiter=None`` looks at the first line that is not a comment: ``,`` if it holds a
      comma, else ``;`` if it holds a semicolon, else ``\\t`` if it holds a tab, else runs of
      whitespace. Delimited lines are split with the csv module, so quoted fields work.
    - ``header=None`` takes the first line as a header when none of its fields is a number;
      ``True``/``False`` say so explicitly.
    - ``column`` is a header name or a 0-based index; it may be left out when the log has one
      column.

    Any row that lacks the column or holds a value that is not a finite number raises
    :class:`TrialError` naming the file and line: nothing is skipped silently.
    """
    where = os.fspath(path)
    lines = _content_lines(where)
    if not lines:
        raise TrialError(f"{where}: the log holds no data (only blank or '#' comment lines)")
    sep = _delimiter(lines[0][1]) if delimiter is None else delimiter
    if sep == "":
        raise TrialError("delimiter must be one character, or None to detect it")
    rows = [(number, _split(text, sep)) for number, text in lines]
    first_number, first_fields = rows[0]
    if header is None:
        header = not any(_is_number(field) for field in first_fields)
    names = first_fields if header else None
    data = rows[1:] if header else rows
    if not data:
        raise TrialError(f"{where}: the log has a header (line {first_number}) but no data rows")
    index = _column_index(where, column, names, data[0][1], first_number)
    label = f"column {names[index]!r}" if names else f"column {index}"
    values = np.empty(len(data), dtype=np.float64)
    for position, (number, fields) in enumerate(data):
        if index >= len(fields):
            raise TrialError(
                f"{where}, line {number}: {label} is missing (the row has {len(fields)} "
                f"field{'s' if len(fields) != 1 else ''}); fix or remove the row"
            )
        text = fields[index]
        try:
            value = float(text)
        except ValueError:
            raise TrialError(
                f"{where}, line {number}: {label} holds {text!r}, which is not a number; "
                "fix the row, or comment it out with '#'"
            ) from None
        if not math.isfinite(value):
            raise TrialError(
                f"{where}, line {number}: {label} holds {text!r}, which is not a finite "
                "number; re-measure or comment the row out with '#'"
            )
        values[position] = value
    return values


def _content_lines(where: str) -> list[tuple[int, str]]:
    """(1-based line number, stripped text) of every line that is neither blank nor comment."""
    try:
        raw = Path(where).read_bytes()
    except OSError as exc:
        raise TrialError(f"cannot read the bench log {where}: {exc.strerror or exc}") from exc
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        bad_line = raw.count(b"\n", 0, exc.start) + 1
        raise TrialError(
            f"{where}, line {bad_line}: bytes that are not UTF-8 text; is this a text log? "
            "Save it as UTF-8 (or plain ASCII)"
        ) from exc
    lines = []
    for number, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        if stripped and not stripped.startswith("#"):
            lines.append((number, stripped))
    return lines


def _delimiter(first_line: str) -> str:
    for candidate in (",", ";", "\t"):
        if candidate in first_line:
            return candidate
    return WHITESPACE


def _split(text: str, sep: str) -> list[str]:
    if sep == WHITESPACE:
        return text.split()
    return [field.strip() for field in next(csv.reader([text], delimiter=sep))]


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def _column_index(
    where: str,
    column: str | int | None,
    names: list[str] | None,
    first_row: list[str],
    header_line: int,
) -> int:
    width = len(names) if names is not None else len(first_row)
    if column is None:
        if width == 1:
            return 0
        listing = _listing(names) if names else f"{width} columns"
        raise TrialError(
            f"{where}: the log has {listing}; say which one with column= (a header name or a "
            "0-based index)"
        )
    if isinstance(column, bool) or not isinstance(column, str | int):
        raise TrialError(f"column= must be a header name or a 0-based index, got {column!r}")
    if isinstance(column, int):
        if column < 0:
            raise TrialError(f"column= is a 0-based index and must be >= 0, got {column}")
        if column >= width:
            raise TrialError(
                f"{where}: column {column} does not exist; the first row has {width} "
                f"column{'s' if width != 1 else ''} (0-based indexes 0..{width - 1})"
            )
        return column
    if names is None:
        raise TrialError(
            f"{where}: column={column!r} names a column, but the log has no header line; give "
            "a 0-based index, or add a header line"
        )
    matches = [i for i, name in enumerate(names) if name == column.strip()]
    if not matches:
        raise TrialError(
            f"{where}: no column named {column!r} in the header (line {header_line}); the "
            f"log has {_listing(names)}"
        )
    if len(matches) > 1:
        raise TrialError(
            f"{where}: the header (line {header_line}) names {len(matches)} columns "
            f"{column!r} (indexes {', '.join(map(str, matches))}); give a 0-based index"
        )
    return matches[0]


def _listing(names: list[str]) -> str:
    shown = ", ".join(repr(name) for name in names[:_MAX_SHOWN_NAMES])
    more = f" and {len(names) - _MAX_SHOWN_NAMES} more" if len(names) > _MAX_SHOWN_NAMES else ""
    return f"columns {shown}{more}"


def read_timed_column(
    path: str | os.PathLike[str],
    column: str | int | None,
    time_column: str | int,
    *,
    delimiter: str | None = None,
    header: bool | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Values of ``column`` and the reading times of ``time_column``, row for row.

    A time is a number of seconds or an ISO 8601 date and time (``2026-12-02T09:15:30``); the
    times come back as seconds since the first reading. A bad time raises :class:`TrialError`
    naming its line, like a bad value.
    """
    values = read_column(path, column, delimiter=delimiter, header=header)
    where = os.fspath(path)
    lines = _content_lines(where)
    sep = _delimiter(lines[0][1]) if delimiter is None else delimiter
    rows = [(number, _split(text, sep)) for number, text in lines]
    first_fields = rows[0][1]
    if header is None:
        header = not any(_is_number(field) for field in first_fields)
    names = first_fields if header else None
    data = rows[1:] if header else rows
    index = _column_index(where, time_column, names, data[0][1], rows[0][0])
    times = np.empty(len(data), dtype=np.float64)
    for position, (number, fields) in enumerate(data):
        if index >= len(fields):
            raise TrialError(f"{where}, line {number}: the time column is missing; fix the row")
        times[position] = _seconds(fields[index], where, number)
    return values, times - times[0]


def _seconds(text: str, where: str, number: int) -> float:
    try:
        return float(text)
    except ValueError:
        pass
    try:
        moment = datetime.datetime.fromisoformat(text)
    except ValueError:
        raise TrialError(
            f"{where}, line {number}: {text!r} is not a time; write seconds or an ISO 8601 "
            "date and time such as 2026-12-02T09:15:30"
        ) from None
    if moment.tzinfo is None:
        moment = moment.replace(tzinfo=datetime.timezone.utc)
    return moment.timestamp()


#: A step between readings longer than this many times the median step is a gap in the log.
GAP_FACTOR = 5.0


def log_time_notes(times: np.ndarray, where: str = "the log") -> list[dict[str, str]]:
    """Notes on a log's reading times: readings out of order, and gaps much longer than the
    usual step (a paused logger, a reading lost), which break the steady series the interval
    assumes."""
    steps = np.diff(times)
    notes = []
    backwards = np.flatnonzero(steps < 0)
    if backwards.size:
        notes.append({
            "code": "log-out-of-order",
            "text": f"{where}: {backwards.size} reading(s) are earlier than the one before "
                    f"(first after reading {int(backwards[0])}); check the logger's clock and the "
                    "row order",
        })
    forward = steps[steps > 0]
    if forward.size >= 3:
        usual = float(np.median(forward))
        gaps = np.flatnonzero(steps > GAP_FACTOR * usual)
        if gaps.size:
            longest = float(steps[gaps].max())
            notes.append({
                "code": "log-gaps",
                "text": f"{where}: {gaps.size} gap(s) in the readings, the longest {longest:.4g} s "
                        f"against a usual step of {usual:.4g} s: the series is not steady; find "
                        "out what the logger missed",
            })
    return notes
