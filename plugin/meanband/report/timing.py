"""The timing section of the verbose summary: the clocks as measured, and how each series was timed."""

from __future__ import annotations

from collections.abc import Callable, Sequence

from meanband.record.row import ResultRow
from meanband.report.rows import row_name
from meanband.units import SECONDS, format_value

__all__ = ["timing_lines"]


def timing_lines(rows: Sequence[ResultRow], verbosity: int = 1) -> list[str]:
    """The timing section of the verbose summary (``verbosity >= 1``), from rows alone."""
    if verbosity < 1:
        return []
    # Rows the engine timed; other features (e.g. in-run comparisons) keep their own details.
    timed = [
        r for r in rows
        if r.get("source") == "time" and "resolution_ns" in (r.get("timing") or {})
    ]
    if not timed:
        return []

    def duration(seconds: float) -> str:
        return format_value(seconds, SECONDS, 3)

    lines = ["", "timing clocks (measured once per test process):"]
    clocks: dict[tuple[str, str], list[tuple[float, float]]] = {}
    for row in timed:
        t = row["timing"] or {}
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
        t = row["timing"] or {}
        k = int(t.get("k", 1))
        values = row.get("values") or []
        trial = sorted(values)[len(values) // 2] * k if values else float("nan")
        parts = [
            # "k" is the coverage factor in the uncertainty lines: the count is written out.
            f"{k} call{'s' if k != 1 else ''} per trial",
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


def _span(values: list[float], fmt: Callable[[float], str]) -> str:
    if len(values) == 1:
        return fmt(values[0] * 1e-9)
    return f"{fmt(values[0] * 1e-9)} to {fmt(values[-1] * 1e-9)}"
