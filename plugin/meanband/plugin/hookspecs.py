"""meanband's own hooks, so other plugins can read each result and add exporters."""

from __future__ import annotations

from typing import Any

import pytest

Row = dict[str, Any]


def pytest_meanband_result(config: pytest.Config, row: Row) -> None:
    """Called on the controller (never on an xdist worker) once per result row, as the report
    of its test arrives.

    ``row`` holds builtin types only (see ``recorder.Series`` for its keys). An implementation
    may add a key of its own to the row, e.g. ``"baseline"``; readers tolerate missing keys.
    """


def pytest_meanband_summary_lines(config: pytest.Config, rows: list[Row]) -> list[str] | None:
    """Called while the terminal summary is written; return extra lines to print after the
    meanband table (or None). ``rows`` are all rows of the session."""


def pytest_meanband_session_finish(config: pytest.Config, rows: list[Row]) -> None:
    """Called once on the controller at the end of the session, before the terminal summary is
    printed, with every row (an empty list when no test used ``trials``). Exporters (history,
    JSON, Markdown, plots) write their files here."""


@pytest.hookspec(firstresult=True)
def pytest_meanband_item_settings(item: pytest.Item) -> dict[str, Any] | None:
    """Return settings for ``item`` from a plan (e.g. ``{"n": 48}``) or None.

    The settings apply to the test's default series; an optional ``"series"`` key maps a
    series name to settings of its own (``{"n": 48, "series": {"cold": {"n": 20}}}``).

    The first non-None result is used as the "plan" layer, which ranks below the marker and the
    call arguments and above the command line, the ini file and the defaults.
    """
