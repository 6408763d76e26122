"""Timing in the pytest layer: each clock measured once per session, and the ``-v`` timing lines."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import pytest

if TYPE_CHECKING:
    from meanband.collect.clock import Clock, ClockInfo

TIMING_SESSION_KEY = pytest.StashKey["TimingSession"]()

Row = dict[str, Any]


class TimingSession:
    """What every timing call of a session shares: clock measurements and the process's role."""

    def __init__(self, environ: dict[str, str]) -> None:
        #: Passed to the engine for its notes: names the xdist worker when this is one.
        self.environ = environ
        self._infos: dict[Clock, ClockInfo] = {}

    def clock_info(self, clock: Clock) -> ClockInfo:
        """The clock's step and read cost, measured on first use and then reused."""
        info = self._infos.get(clock)
        if info is None:
            from meanband.collect.clock import measure

            info = self._infos[clock] = measure(clock)
        return info


def pytest_configure(config: pytest.Config) -> None:
    config.stash[TIMING_SESSION_KEY] = TimingSession(_worker_environ(config))


def timing_session(config: pytest.Config) -> TimingSession:
    """The session's :class:`TimingSession` (made on first use if configure has not run)."""
    session = config.stash.get(TIMING_SESSION_KEY, None)
    if session is None:
        session = config.stash[TIMING_SESSION_KEY] = TimingSession(_worker_environ(config))
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


def pytest_meanband_summary_lines(config: pytest.Config, rows: list[Row]) -> list[str] | None:
    """At ``-v``: each clock's measured step and read cost, and how each series was timed."""
    if config.get_verbosity() < 1:
        return None
    return timing_lines(rows)


def timing_lines(rows: list[Row]) -> list[str]:
    """The timing section of the verbose summary, from rows alone."""
    from meanband.report.terminal import row_name
    from meanband.units import SECONDS, format_value

    # Rows the engine timed; other features (e.g. in-run comparisons) keep their own details.
    timed = [
        r for r in rows
        if r.get("source") == "time" and isinstance(r.get("timing"), dict)
        and "resolution_ns" in r["timing"]
    ]
    if not timed:
        return []

    def duration(seconds: float) -> str:
        return format_value(seconds, SECONDS, 3)

    lines = ["", "timing clocks (measured once per test process):"]
    clocks: dict[tuple[str, str], list[tuple[float, float]]] = {}
    for row in timed:
        t = row["timing"]
        clocks.setdefault((t.get("clock", "?"), t.get("source", "?")), []).append(
            (float(t.get("resolution_ns", 0.0)), float(t.get("read_cost_ns", 0.0)))
        )
    for (name, source), figures in sorted(clocks.items()):
        distinct = sorted(set(figures))
        steps = sorted({step for step, _ in distinct})
        costs = sorted({cost for _, cost in distinct})
        lines.append(
            f"  {name} ({source}): step {_span(steps, duration)}, "
            f"one read {_span(costs, duration)}"
        )
    lines.append("timed series:")
    seen = set()
    for row in sorted(timed, key=row_name):
        if row_name(row) in seen:
            continue
        seen.add(row_name(row))
        t = row["timing"]
        k = int(t.get("k", 1))
        values = row.get("values") or []
        trial = sorted(values)[len(values) // 2] * k if values else float("nan")
        parts = [
            f"k={k} call{'s' if k != 1 else ''}/trial",
            f"{t.get('trials', len(values))} trials of about {duration(trial)}",
            f"min trial {duration(float(t.get('min_trial_time', 0.0)))}",
            f"warm-up {t.get('warmup_trials', 0)}",
            f"gc {'on' if t.get('gc_enabled') else 'off'}",
            f"{t.get('clock', '?')} clock",
        ]
        if t.get("setup"):
            parts.append("setup per call")
        if t.get("stopped_early"):
            parts.append(f"stopped early at the {duration(float(t.get('time_limit') or 0))} limit")
        lines.append(f"  {row_name(row)}: " + ", ".join(parts))
    return lines


def _span(values: list[float], fmt) -> str:
    if len(values) == 1:
        return fmt(values[0] * 1e-9)
    return f"{fmt(values[0] * 1e-9)} to {fmt(values[-1] * 1e-9)}"
