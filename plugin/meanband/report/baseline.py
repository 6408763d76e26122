"""The baseline section of the summary: each check against its stored run, then the verdicts."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

from meanband.record.row import ResultRow
from meanband.report.rows import row_name, sorted_rows
from meanband.report.tables import format_table
from meanband.stats.regression import CANNOT_TELL, NO_BASELINE, REGRESSED
from meanband.units import format_value

__all__ = ["baseline_lines", "format_limit", "format_ratio"]


def baseline_lines(rows: Sequence[ResultRow]) -> list[str]:
    """One line per check compared with its baseline, the notes, then the regressed checks.

    Each row's ``baseline`` entry names the stored run it was compared with, so the section reads
    the same in the live summary and in ``meanband report``.
    """
    compared = [row for row in sorted_rows(rows) if row.get("baseline")]
    if not compared:
        return []
    lines: list[str] = []
    runs: dict[int, Mapping[str, Any]] = {}
    for row in compared:
        runs.setdefault(int(row["baseline"]["run"]), row["baseline"])
    for info in runs.values():
        lines += ["", f"baseline: {_run_words(info)}"]
    table: list[list[str]] = []
    notes: list[str] = []
    regressed: list[str] = []
    levels: set[float] = set()
    for row in compared:
        info = row["baseline"]
        name = row_name(row)
        if "ratio" not in info:
            if info["status"] == NO_BASELINE:
                notes.append(f"  {name}: no baseline in run {info['run']}; nothing to compare yet")
            else:
                notes.append(f"  {name}: not compared: {info.get('reason', '')}")
            continue
        unit = row.get("unit")
        levels.add(info["ratio"]["confidence"])
        table.append([
            name, format_value(info["baseline_mean"], unit),
            format_value(info["current_mean"], unit), format_ratio(info["ratio"]),
            format_limit(info), info["status"],
        ])
        if info["status"] == CANNOT_TELL:
            more = info.get("suggested_n")
            notes.append(
                f"  {name}: cannot tell yet at n={info['n_current']} (baseline "
                f"n={info['n_baseline']}); "
                + (f"about {more} trials in both runs would likely decide it" if more else
                   "the ratio sits on the limit, more trials are unlikely to decide it")
            )
        if info.get("note"):
            notes.append(f"  {name}: {info['note']}")
        if info["status"] == REGRESSED:
            regressed.append(name)
    if table:
        level = f"{levels.pop() * 100:g}% " if len(levels) == 1 else ""
        header = ["test", "baseline mean", "mean", f"ratio, {level}interval", "allowed", "verdict"]
        lines += format_table(header, table)
    if notes:
        lines += ["", "baseline notes:", *notes]
    if regressed:
        which = " or ".join(_run_words(info, short=True) for info in runs.values())
        lines += ["", f"meanband: REGRESSION: {len(regressed)} check(s) slower or moved beyond the "
                  f"allowed change from {which}; the session fails:"]
        lines += [f"  {name}" for name in regressed]
    return lines


def _run_words(info: Mapping[str, Any], *, short: bool = False) -> str:
    label = f" '{info['label']}'" if info.get("label") else ""
    if short:
        return f"run {info['run']}{label}"
    started = f" of {info['started']}" if info.get("started") else ""
    commit = f", commit {info['commit'][:10]}" if info.get("commit") else ""
    return f"run {info['run']}{label}{started}{commit}"


def format_limit(comparison: Mapping[str, Any]) -> str:
    """The allowed range of a comparison in words: ``<= 1.05x`` or ``0.95x..1.05x``."""
    high = comparison["limit_high"]
    low = comparison.get("limit_low")
    if low is None:
        return f"<= {high:.4g}x"
    return f"{low:.4g}x..{high:.4g}x"


def format_ratio(ratio: Mapping[str, Any]) -> str:
    """A ratio interval as ``1.21x [1.15, 1.27]``; unbounded intervals say so."""
    if not ratio.get("bounded", True):
        return f"{ratio['ratio']:.3f}x [unbounded]"
    return f"{ratio['ratio']:.3f}x [{ratio['low']:.3f}, {ratio['high']:.3f}]"
