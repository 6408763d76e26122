"""How every report names and orders result rows."""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from typing import Any, TypeVar

__all__ = ["row_name", "sorted_rows", "trials_text"]

RowT = TypeVar("RowT", bound=Mapping[str, Any])


def row_name(row: Mapping[str, Any]) -> str:
    """Test id, with the series in brackets when it has one."""
    series = row.get("series") or ""
    return f"{row.get('nodeid', '')}{f' [{series}]' if series else ''}"


def trials_text(row: Mapping[str, Any]) -> str:
    """The table's ``n``: the interval's count, and for ``n="auto"`` the pilot beside it
    (``2 + 10 pilot``), since Stein's interval takes its mean from the second stage alone."""
    n = str(row["decision"]["interval"]["n"])
    stages = row.get("two_stage") or {}
    if stages.get("pilot_n"):
        return f"{n} + {stages['pilot_n']} pilot"
    return n


def sorted_rows(rows: Iterable[RowT]) -> list[RowT]:
    """Rows in the order of every summary: by test id, then series (stable within a series)."""
    return sorted(rows, key=lambda r: (r.get("nodeid", ""), r.get("series", "")))
