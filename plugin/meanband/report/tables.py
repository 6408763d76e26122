"""Text tables for the terminal and the console command: the one table renderer."""

from __future__ import annotations

from collections.abc import Collection, Sequence

__all__ = ["format_table"]


def format_table(
    header: Sequence[str],
    rows: Sequence[Sequence[str]],
    *,
    right: Collection[int] = (),
    rule: bool = False,
    indent: str = "",
) -> list[str]:
    """Columns two spaces apart, each as wide as its widest cell; trailing blanks stripped.

    ``right`` holds the indexes of right-aligned (numeric) columns; ``rule`` draws a line of
    dashes under the header.
    """
    widths = [len(h) for h in header]
    for cells in rows:
        if len(cells) != len(header):
            raise ValueError(f"a table row has {len(cells)} cells for {len(header)} columns")
        widths = [max(w, len(cell)) for w, cell in zip(widths, cells, strict=True)]

    def line(cells: Sequence[str]) -> str:
        parts = [c.rjust(w) if i in right else c.ljust(w)
                 for i, (c, w) in enumerate(zip(cells, widths, strict=True))]
        return (indent + "  ".join(parts)).rstrip()

    lines = [line(header)]
    if rule:
        lines.append(indent + "  ".join("-" * w for w in widths))
    lines.extend(line(cells) for cells in rows)
    return lines
