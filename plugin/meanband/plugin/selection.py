"""Whether a session ran its tests, and whether it ran the whole selection it was asked for.

Reports are written only by a session that ran its tests, so ``--co``, a ``-k`` that matches
nothing, a collection error or ``pytest.exit()`` never replace a good report with an empty one.
A run is recorded in the history store only when it ran everything asked for: a run cut short
by ``-x`` or narrowed by ``-k``, ``-m``, ``--lf`` or ``--deselect`` is a poor baseline, unless
``--meanband-record-partial`` asks for it.
"""

from __future__ import annotations

import pytest

DESELECTED_KEY = pytest.StashKey[int]()


def count_deselected(config: pytest.Config, count: int) -> None:
    """Add ``count`` tests that ``-k``, ``-m``, ``--lf`` or another plugin deselected."""
    config.stash[DESELECTED_KEY] = config.stash.get(DESELECTED_KEY, 0) + count


def not_run_reason(session: pytest.Session) -> str | None:
    """Why this session did not run its tests, or None when it did."""
    config = session.config
    if config.getoption("collectonly", False):
        return "the session only collected tests (--collect-only)"
    status = session.exitstatus
    if status == pytest.ExitCode.NO_TESTS_COLLECTED:
        return "no test was selected"
    if status not in (pytest.ExitCode.OK, pytest.ExitCode.TESTS_FAILED):
        return f"the session ended early (exit status {int(status)})"
    if getattr(session, "testscollected", 1) == 0:
        return "no test was selected"
    return None


def partial_reason(session: pytest.Session) -> str | None:
    """Why this session ran only part of its selection, or None when it ran the whole of it."""
    config = session.config
    maxfail = config.getoption("maxfail", 0) or 0
    if session.shouldfail or session.shouldstop or (maxfail and session.testsfailed >= maxfail):
        return "the session stopped at the first failures (-x / --maxfail)"
    narrowed = [
        word for word, on in (
            ("-k", config.getoption("keyword", "")),
            ("-m", config.getoption("markexpr", "")),
            ("--lf", config.getoption("lf", False)),
            ("--sw", config.getoption("stepwise", False)),
            ("--deselect", config.getoption("deselect", None)),
        ) if on
    ]
    if narrowed:
        return f"the session ran a subset of its tests ({', '.join(narrowed)})"
    if config.stash.get(DESELECTED_KEY, 0):
        return f"{config.stash[DESELECTED_KEY]} test(s) were deselected"
    return None
