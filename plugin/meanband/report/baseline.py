"""The baseline section of the summary: each check against its stored run, then the verdicts."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

from meanband.record.row import ResultRow
from meanband.report.rows import row_name, sorted_rows
from meanband.report.tables import format_table
from meanband.stats.multiplicity import ADJUSTMENTS
from meanband.stats.regression import CANNOT_TELL, NO_BASELINE, REGRESSED
from meanband.units import format_value

__all__ = [
    "baseline_lines",
    "baseline_properties",
    "failure_block",
    "format_limit",
    "format_noise",
    "format_ratio",
]


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
        several = info.get("runs") or []
        made_of = (f" (newest of {len(several)} runs: {', '.join(str(r) for r in several)})"
                   if len(several) > 1 else "")
        lines += ["", f"baseline: {_run_words(info)}{made_of}"]
        judged = [r["baseline"] for r in compared
                  if r["baseline"].get("p_value") is not None and r["baseline"]["run"] == info["run"]]
        if judged:
            adjustment = str(judged[0].get("adjustment", "none"))
            family = max(int(j.get("comparisons") or 0) for j in judged)
            lines.append(f"  regression verdicts adjusted: {ADJUSTMENTS.get(adjustment, adjustment)}"
                         + (f", over {_comparisons(family)}" if adjustment != "none" else ""))
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
                notes.append(f"  {name}: {info['status']}: {info.get('reason', '')}")
            continue
        unit = row.get("unit")
        levels.add(info["ratio"]["confidence"])
        table.append([
            name, format_value(info["baseline_mean"], unit),
            format_value(info["current_mean"], unit), format_ratio(info["ratio"]),
            format_limit(info), format_noise(info), info["status"],
        ])
        more = info.get("suggested_n")
        if info["status"] == CANNOT_TELL and (more or not info.get("note")):
            notes.append(
                f"  {name}: cannot tell yet at n={info['n_current']} (baseline "
                f"n={info['n_baseline']}); "
                + (f"about {more} trials in both runs would likely decide it" if more else
                   "the ratio sits on the limit, more trials are unlikely to decide it")
            )
        if info.get("note"):
            prefix = "cannot tell yet: " if info["status"] == CANNOT_TELL and not more else ""
            notes.append(f"  {name}: {prefix}{info['note']}")
        if info["status"] == REGRESSED and not info.get("found_at_end"):
            regressed.append(name)
    if table:
        level = f"{levels.pop() * 100:g}% " if len(levels) == 1 else ""
        header = ["test", "baseline mean", "mean", f"ratio, {level}interval", "allowed",
                  "run noise", "verdict"]
        lines += format_table(header, table)
    if notes:
        lines += ["", "baseline notes:", *notes]
    if regressed:
        which = " or ".join(_run_words(info, short=True) for info in runs.values())
        lines += ["", f"meanband: REGRESSION: {len(regressed)} check(s) slower or moved beyond the "
                  f"allowed change from {which}; their tests failed:"]
        lines += [f"  {name}" for name in regressed]
    return lines


def _comparisons(count: int) -> str:
    return f"{count} comparison" + ("" if count == 1 else "s")


def format_noise(info: Mapping[str, Any]) -> str:
    """The run-to-run allowance a comparison used: ``2.1% (5 runs)``, ``3% (assumed)``."""
    noise = info.get("noise")
    if not noise:
        return "-"
    source = noise.get("source", "")
    where = {"baseline runs": f"{noise.get('runs')} runs", "suite": "suite",
             "calibration": "A/A", "assumed": "assumed",
             "none measured": "one run"}.get(source, source)
    floor = noise.get("floor")
    if floor is not None and source != "calibration":
        where += f"; A/A {float(floor):.1%}"
    return f"{float(noise['between_sd']):.1%} ({where})"


def failure_block(row: ResultRow, adjustment: str) -> list[str]:
    """The message of a test failed by its baseline: runs, ratio and interval, the limit, the
    p-value and threshold, and the run-to-run noise allowed for."""
    info = row["baseline"]
    unit = row.get("unit")
    name = row_name(row)
    verdict = "REGRESSED" if info["status"] == REGRESSED else str(info["status"]).upper()
    runs = info.get("runs") or [info["run"]]
    lines = [f"meanband baseline: {name}: {verdict} against {_run_words(info)}"
             + (f" (baseline of runs {', '.join(str(r) for r in runs)})" if len(runs) > 1 else "")]
    if "ratio" in info:
        ratio = info["ratio"]
        lines.append(f"  ratio {format_ratio(ratio)} at {ratio['confidence'] * 100:g}%; "
                     f"allowed {format_limit(info)}")
        lines.append(f"  mean {format_value(info['current_mean'], unit)} (n={info['n_current']}) "
                     f"against {format_value(info['baseline_mean'], unit)} "
                     f"(n={info['n_baseline']} over {len(runs)} run"
                     f"{'' if len(runs) == 1 else 's'})")
    if info.get("p_value") is not None:
        words = ADJUSTMENTS.get(adjustment, adjustment)
        family = info.get("comparisons") or 0
        lines.append(f"  p-value {info['p_value']:.3g} that it is within the limit; threshold "
                     f"{info['threshold']:.3g} ({words}"
                     + (f" over {family} comparisons)" if adjustment != "none" else ")"))
    if info.get("noise"):
        noise = info["noise"]
        lines.append(f"  run-to-run noise allowed for: {float(noise['between_sd']):.1%} between "
                     f"runs ({noise['source']})")
    if info["status"] == CANNOT_TELL:
        lines.append("  cannot tell yet fails this test because --meanband-baseline-undecided=fail")
    if info.get("note"):
        lines.append(f"  note: {info['note']}")
    return lines


def baseline_properties(row: ResultRow) -> list[tuple[str, object]]:
    """JUnit properties of a row's baseline comparison: ``meanband[series].baseline.ratio``..."""
    info = row.get("baseline")
    if not info:
        return []
    prefix = "meanband" + (f"[{row['series']}]" if row.get("series") else "") + ".baseline"
    props: list[tuple[str, object]] = [
        (f"{prefix}.run", info["run"]),
        (f"{prefix}.status", info["status"]),
        (f"{prefix}.regression", info["status"] == REGRESSED),
    ]
    if "ratio" in info:
        props += [(f"{prefix}.ratio", info["ratio"]["ratio"]),
                  (f"{prefix}.ratio_low", info["ratio"]["low"]),
                  (f"{prefix}.ratio_high", info["ratio"]["high"]),
                  (f"{prefix}.limit_high", info["limit_high"])]
    if info.get("p_value") is not None:
        props.append((f"{prefix}.p_value", info["p_value"]))
    if info.get("noise"):
        props.append((f"{prefix}.run_noise", info["noise"]["between_sd"]))
    return props


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
