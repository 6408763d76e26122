"""Text tables for the terminal and the console command: the one table renderer, and fitting
tables and lines to a terminal's width."""

from __future__ import annotations

import textwrap
from collections.abc import Collection, Sequence
from dataclasses import dataclass

__all__ = ["ELLIPSIS", "FittedTable", "fit_lines", "fit_table", "format_table", "shorten_left"]

#: What stands for the part of a test id left out at its start.
ELLIPSIS = "…"
#: A test id cut to share its line with the figures keeps at least this many characters; with
#: less room the ids go on lines of their own (see fit_table).
MIN_NAME = 48
#: Figures under a test id on its own line (the stacked layout) are indented this far.
STACK_INDENT = "    "


@dataclass(frozen=True)
class FittedTable:
    """A table fitted to a width: its lines, the columns left out (in the order they were
    dropped) and whether each row's name went on a line of its own above its figures."""

    lines: list[str]
    dropped: tuple[str, ...] = ()
    stacked: bool = False


def format_table(
    header: Sequence[str],
    rows: Sequence[Sequence[str]],
    *,
    right: Collection[int] = (),
    rule: bool = False,
    indent: str = "",
    width: int | None = None,
) -> list[str]:
    """Columns two spaces apart, each as wide as its widest cell; trailing blanks stripped.

    ``right`` holds the indexes of right-aligned (numeric) columns; ``rule`` draws a line of
    dashes under the header. With ``width``, the first column is shortened from the left
    (``…`` stands for what was cut) so that lines fit when they can; see :func:`fit_table`.
    """
    return fit_table(header, rows, right=right, rule=rule, indent=indent, width=width,
                     shorten=0 if width is not None else None).lines


def fit_table(
    header: Sequence[str],
    rows: Sequence[Sequence[str]],
    *,
    right: Collection[int] = (),
    rule: bool = False,
    indent: str = "",
    width: int | None = None,
    drop: Sequence[int] = (),
    shorten: int | None = None,
    stack: bool = False,
) -> FittedTable:
    """The table of :func:`format_table`, fitted to ``width`` characters where it can be.

    In this order, until the lines fit: the ``shorten`` column (a test id) is cut from the left
    down to :data:`MIN_NAME` characters; with ``stack``, each row's ``shorten`` cell goes on a
    line of its own above the row's other cells; the columns in ``drop`` are left out one by
    one, least useful first, each step trying the two before again; last, the ``shorten``
    column is cut further. ``width=None`` leaves the table as wide as its cells.
    """
    for cells in rows:
        if len(cells) != len(header):
            raise ValueError(f"a table row has {len(cells)} cells for {len(header)} columns")
    columns = list(range(len(header)))
    if width is None:
        return FittedTable(_render(header, rows, columns, right, rule, indent))
    for count in range(len(drop) + 1):
        kept = [c for c in columns if c not in drop[:count]]
        dropped = tuple(header[c] for c in drop[:count])
        lines = _render(header, rows, kept, right, rule, indent, shorten, width, MIN_NAME)
        if _fits(lines, width):
            return FittedTable(lines, dropped)
        if stack and shorten is not None:
            lines = _stacked(header, rows, kept, right, rule, indent, shorten, width)
            if _fits(lines, width):
                return FittedTable(lines, dropped, stacked=True)
    lines = _render(header, rows, kept, right, rule, indent, shorten, width, 8)
    if stack and shorten is not None and not _fits(lines, width):
        return FittedTable(_stacked(header, rows, kept, right, rule, indent, shorten, width),
                           dropped, stacked=True)
    return FittedTable(lines, dropped)


def _fits(lines: Sequence[str], width: int) -> bool:
    return all(len(line) <= width for line in lines)


def _render(
    header: Sequence[str], rows: Sequence[Sequence[str]], columns: Sequence[int],
    right: Collection[int], rule: bool, indent: str, shorten: int | None = None,
    width: int | None = None, min_name: int = MIN_NAME,
) -> list[str]:
    widths = {c: max([len(header[c]), *(len(cells[c]) for cells in rows)]) for c in columns}
    if shorten is not None and width is not None and shorten in widths:
        others = sum(w for c, w in widths.items() if c != shorten) + 2 * (len(columns) - 1)
        room = max(width - len(indent) - others, min(min_name, widths[shorten]))
        widths[shorten] = max(min(widths[shorten], room), len(header[shorten]))

    def line(cells: Sequence[str]) -> str:
        parts = []
        for c in columns:
            text = cells[c] if c != shorten else shorten_left(cells[c], widths[c])
            parts.append(text.rjust(widths[c]) if c in right else text.ljust(widths[c]))
        return (indent + "  ".join(parts)).rstrip()

    lines = [line(header)]
    if rule:
        lines.append(indent + "  ".join("-" * widths[c] for c in columns))
    lines.extend(line(cells) for cells in rows)
    return lines


def _stacked(
    header: Sequence[str], rows: Sequence[Sequence[str]], columns: Sequence[int],
    right: Collection[int], rule: bool, indent: str, shorten: int, width: int,
) -> list[str]:
    """Each row's name on a line of its own, its other cells on the line below."""
    figures = [c for c in columns if c != shorten]
    table = _render(header, rows, figures, right, rule, indent + STACK_INDENT)
    room = max(width - len(indent), 8)
    lines = [(indent + header[shorten]).rstrip(), *table[: 2 if rule else 1]]
    for cells, row_line in zip(rows, table[2 if rule else 1:], strict=True):
        lines.append(indent + shorten_left(cells[shorten], room))
        lines.append(row_line)
    return lines


def shorten_left(text: str, width: int) -> str:
    """``text`` cut from the left to ``width`` characters, ``…`` standing for the cut part:
    the end of a test id (its file and name) says most about it."""
    if len(text) <= width:
        return text
    if width <= len(ELLIPSIS):
        return text[-width:] if width > 0 else ""
    return ELLIPSIS + text[len(text) - width + len(ELLIPSIS):]


def fit_lines(lines: Sequence[str], width: int | None) -> list[str]:
    """``lines`` with every line longer than ``width`` wrapped at spaces, its continuation
    indented four places past its own indent; ``width=None`` leaves them as they are."""
    if width is None:
        return list(lines)
    out: list[str] = []
    for line in lines:
        if len(line) <= width:
            out.append(line)
            continue
        lead = line[: len(line) - len(line.lstrip(" "))]
        # A list item ("- text") continues under its text, anything else four places in.
        more = "  " if line.lstrip(" ").startswith("- ") else "    "
        out.extend(textwrap.wrap(
            line.strip(), width=width, initial_indent=lead, subsequent_indent=lead + more,
            break_on_hyphens=False,
        ) or [line[:width]])
    return out
