"""Timing in the pytest layer: each clock measured once per session, and the worker identity."""

from __future__ import annotations

import contextlib
from collections.abc import Callable
from typing import TYPE_CHECKING

import pytest

if TYPE_CHECKING:
    from meanband.collect.clock import Clock, ClockInfo

TIMING_SESSION_KEY = pytest.StashKey["TimingSession"]()

class TimingSession:
    """What every timing call of a session shares: clock measurements, the process's role and
    where a long run reports its progress."""

    def __init__(self, environ: dict[str, str], config: pytest.Config | None = None) -> None:
        #: Passed to the engine for its notes: names the xdist worker when this is one.
        self.environ = environ
        self._infos: dict[Clock, ClockInfo] = {}
        self._config = config

    def progress(self, label: str, verb: str = "timed") -> Callable[[int, int, float], None] | None:
        """A reporter of a long timing run's progress for ``label`` (a test id), or None where
        none is wanted: under ``-q``, in an xdist worker (only the controller owns the
        terminal) and without pytest's terminal."""
        config = self._config
        if config is None or self.environ or config.get_verbosity() < 0:
            return None
        terminal = config.pluginmanager.get_plugin("terminalreporter")
        if terminal is None:
            return None
        capture = config.pluginmanager.get_plugin("capturemanager")

        def report(done: int, wanted: int, seconds: float) -> None:
            state = "done" if done >= wanted else "so far"
            line = (f"meanband: {label}: {done} of {wanted} trials {verb}, {seconds:.1f} s "
                    f"{state}")
            # Past the test's output capture, as pytest's own live lines are written.
            quiet = capture.global_and_fixture_disabled() if capture else contextlib.nullcontext()
            with quiet:
                terminal.write_line(line)

        return report

    def clock_info(self, clock: Clock) -> ClockInfo:
        """The clock's step and read cost, measured on first use and then reused."""
        info = self._infos.get(clock)
        if info is None:
            from meanband.collect.clock import measure

            info = self._infos[clock] = measure(clock)
        return info


def pytest_configure(config: pytest.Config) -> None:
    config.stash[TIMING_SESSION_KEY] = TimingSession(_worker_environ(config), config)


def timing_session(config: pytest.Config) -> TimingSession:
    """The session's :class:`TimingSession` (made on first use if configure has not run)."""
    session = config.stash.get(TIMING_SESSION_KEY, None)
    if session is None:
        session = config.stash[TIMING_SESSION_KEY] = TimingSession(_worker_environ(config), config)
    return session


def _worker_environ(config: pytest.Config) -> dict[str, str]:
    """xdist's worker id and count when this session is a worker, else nothing.

    Read from the session rather than ``os.environ``: a pytest run started inside a worker (as
    pytester does) is not itself a worker.
    """
    workerinput = getattr(config, "workerinput", None)
    if not workerinput:
        return {}
    return {
        "PYTEST_XDIST_WORKER": str(workerinput.get("workerid", "")),
        "PYTEST_XDIST_WORKER_COUNT": str(workerinput.get("workercount", "")),
    }
