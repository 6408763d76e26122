"""The terminal summary, as text lines computed from result rows alone."""

from __future__ import annotations

import math
from collections import Counter
from collections.abc import Callable, Mapping, Sequence
from typing import Any

from meanband import defaults
from meanband.record.row import ResultRow
from meanband.report.baseline import baseline_lines
from meanband.report.metrology import caution_lines, metrology_lines
from meanband.report.rows import row_name, sorted_rows
from meanband.report.tables import format_table
from meanband.report.timing import timing_lines
from meanband.stats.verdict import Verdict
from meanband.units import SECONDS, format_band, format_value, significant_digits, time_scale

__all__ = ["ROW_SECTIONS", "format_summary", "totals_line"]

Row = Mapping[str, Any]
_VERDICTS = tuple(v.value for v in Verdict)


def totals_line(rows: Sequence[Row]) -> str:
    """One line of totals, e.g. ``meanband: 4 checks: 2 PASS, 1 FAIL, 1 UNDECIDED; 3 notes``."""
    checks = [r for r in rows if r.get("decision")]
    counts = Counter(r["decision"]["verdict"] for r in checks)
    parts = [f"{counts[v]} {v}" for v in _VERDICTS if counts[v]]
    text = f"meanband: {len(checks)} check{'s' if len(checks) != 1 else ''}"
    if parts:
        text += ": " + ", ".join(parts)
    unchecked = sum(1 for r in rows if r.get("kind") == "unchecked")
    if unchecked:
        text += f"; {unchecked} recorded but never checked"
    notes = sum(len(r.get("notes") or ()) for r in rows)
    if notes:
        text += f"; {notes} note{'s' if notes != 1 else ''}"
    return text


def format_summary(rows: Sequence[ResultRow], verbosity: int = 0) -> list[str]:
    """The meanband summary of ``rows``: the one renderer behind the live summary and
    ``meanband report``.

    The totals line, a table of checks, notes, suggested counts and unchecked trials, then one
    section per feature that reads rows (``ROW_SECTIONS``: measurement uncertainty, timing,
    baselines). ``verbosity < 0`` gives the totals line only; ``verbosity > 0`` adds sd, df and
    the critical value to the table, every check's uncertainty line and the timing section.
    """
    if not rows:
        return []
    if verbosity < 0:
        return [totals_line(rows)]
    rows = sorted_rows(rows)
    lines = [totals_line(rows)]
    checks = [r for r in rows if r.get("decision")]
    if checks:
        lines.append("")
        lines.extend(_table([_cells(r, verbosity) for r in checks], verbose=verbosity > 0))
    lines.extend(_notes(rows))
    lines.extend(_suggestions(checks))
    lines.extend(_unchecked(rows))
    for section in ROW_SECTIONS:
        lines.extend(section(rows, verbosity))
    return lines


def _baseline_section(rows: Sequence[ResultRow], verbosity: int) -> list[str]:
    return baseline_lines(rows)


#: Sections that features contribute from rows alone, in the order they are printed.
ROW_SECTIONS: tuple[Callable[[Sequence[ResultRow], int], list[str]], ...] = (
    metrology_lines, timing_lines, _baseline_section, caution_lines,
)


def _cells(row: Row, verbosity: int) -> list[str]:
    decision = row["decision"]
    interval, band, unit = decision["interval"], decision["band"], row.get("unit")
    mean = interval["mean"]
    scale = time_scale(mean) if unit == SECONDS else None
    digits = significant_digits(mean, interval["sem"])

    def fmt(value: float) -> str:
        return format_value(value, unit, digits, scale=scale)

    side = interval["side"]
    if side == "upper":
        bounds = f"<= {fmt(interval['high'])}"
    elif side == "lower":
        bounds = f">= {fmt(interval['low'])}"
    else:
        bounds = f"[{fmt(interval['low'])}, {fmt(interval['high'])}]"
    band_text = format_band(band["low"], band["high"], unit, digits)
    about = interval.get("estimand", "mean")
    method = interval.get("method", "t")
    level = f"{interval['confidence'] * 100:g}%"
    if method != "t" or about != "mean":
        level += f" {method}"
        if about != "mean":
            level += f" ({about})"
    if (row.get("rule") or {}).get("rule") == "simple":
        level += " simple"  # the mean alone was compared with the band: the row says so
    cells = [row_name(row), str(interval["n"]), fmt(mean), bounds, level, band_text,
             decision["verdict"]]
    if verbosity > 0:
        cells += [fmt(interval["sd"]), f"{interval['df']:g}", f"{interval.get('critical', math.nan):.4g}"]
    return cells


def _table(cells: list[list[str]], *, verbose: bool) -> list[str]:
    header = ["test", "n", "mean", "interval", "conf", "band", "verdict"]
    if verbose:
        header += ["sd", "df", "t"]
    return format_table(header, cells, right={1, 2})


def _notes(rows: Sequence[Row]) -> list[str]:
    out = [f"  {row_name(r)}: {note['text']}" for r in rows for note in r.get("notes") or ()]
    return ["", "notes:", *out] if out else []


def _suggestions(checks: Sequence[Row]) -> list[str]:
    out = []
    for row in checks:
        suggestion = row.get("suggestion")
        decision = row["decision"]
        n = decision["interval"]["n"]
        if suggestion and "text" in suggestion:
            if suggestion["text"]:  # an empty text: the count is right, nothing to say
                out.append(f"  {row_name(row)}: {suggestion['text']}")
            continue
        suggested = decision.get("suggested_n")
        verdict = decision["verdict"]
        if verdict == "UNDECIDED":
            if suggested is None:
                out.append(f"  {row_name(row)}: UNDECIDED at n={n}; the mean sits on the band "
                           "edge, more trials are unlikely to decide it")
            else:
                out.append(f"  {row_name(row)}: UNDECIDED at n={n}; about {suggested} trials "
                           "would likely decide it")
        elif verdict == "PASS" and suggested is not None and suggested < n:
            out.append(f"  {row_name(row)}: PASS at n={n}; about {suggested} trials would "
                       "still pass")
    powers = {r.get("settings", {}).get("power", defaults.POWER) for r in checks}
    power = f"{powers.pop() * 100:g}% power" if len(powers) == 1 else "stated power"
    return ["", f"suggested trial counts ({power}):", *out] if out else []


def _unchecked(rows: Sequence[Row]) -> list[str]:
    out = []
    for row in rows:
        if row.get("kind") != "unchecked":
            continue
        values = row.get("values")
        if values is None:  # a report written without its trials
            out.append(f"  {row_name(row)}: trials not kept in the report")
            continue
        mean = math.fsum(values) / len(values) if values else math.nan
        out.append(f"  {row_name(row)}: {len(values)} trials, mean "
                   f"{format_value(mean, row.get('unit'))}")
    return ["", "recorded but never checked:", *out] if out else []
