"""The terminal summary, as text lines computed from result rows alone."""

from __future__ import annotations

import math
from collections import Counter
from collections.abc import Callable, Mapping, Sequence
from typing import Any

from meanband import defaults
from meanband.record.row import ResultRow
from meanband.report.attention import threatens_verdict
from meanband.report.baseline import baseline_lines
from meanband.report.metrology import caution_lines, metrology_lines
from meanband.report.rows import row_name, sorted_rows, trials_text
from meanband.report.tables import MIN_NAME, fit_lines, fit_table, shorten_left
from meanband.report.timing import timing_lines
from meanband.stats.verdict import Verdict
from meanband.units import (
    SECONDS,
    format_band,
    format_df,
    format_pair,
    format_value,
    significant_digits,
    time_scale,
)

__all__ = ["DROP_ORDER", "ROW_SECTIONS", "format_summary", "totals_line"]

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


def format_summary(
    rows: Sequence[ResultRow], verbosity: int = 0, width: int | None = None
) -> list[str]:
    """The meanband summary of ``rows``: the one renderer behind the live summary and
    ``meanband report``.

    The totals line, a table of checks, notes, suggested counts and unchecked trials, then one
    section per feature that reads rows (``ROW_SECTIONS``: measurement uncertainty, timing,
    baselines). ``verbosity < 0`` gives the totals line only; ``verbosity > 0`` adds sd, df and
    the critical value to the table, every check's uncertainty line and the timing section.

    ``width`` (the terminal's, in characters) makes every line fit: test ids are cut from the
    left, long lines wrap with an indent, and the table drops columns in the order of
    ``DROP_ORDER`` until it fits, so a wider terminal keeps more columns.
    ``width=None`` leaves every line as long as its content.
    """
    if not rows:
        return []
    if verbosity < 0:
        return fit_lines([totals_line(rows)], width)
    rows = sorted_rows(rows)
    lines = [totals_line(rows)]
    checks = [r for r in rows if r.get("decision")]
    if checks:
        lines.append("")
        lines.extend(_table([_cells(r) for r in checks], verbosity=verbosity, width=width))
    lines.extend(_notes(rows, width, verbosity))
    lines.extend(_suggestions(checks, width))
    lines.extend(_unchecked(rows, width))
    for section in ROW_SECTIONS:
        lines.extend(section(rows, verbosity))
    return fit_lines(lines, width)


def _baseline_section(rows: Sequence[ResultRow], verbosity: int) -> list[str]:
    return baseline_lines(rows)


#: Sections that features contribute from rows alone, in the order they are printed.
ROW_SECTIONS: tuple[Callable[[Sequence[ResultRow], int], list[str]], ...] = (
    metrology_lines, timing_lines, _baseline_section, caution_lines,
)


_HEADER = ("test", "n", "mean", "interval", "conf", "band", "verdict", "sd", "df", "t")
#: The columns a narrow terminal loses first: the extras, then the confidence level (the same
#: for most runs), the count, the mean (the interval shows where it lies). Test id, interval,
#: band and verdict always stay.
DROP_ORDER = ("t", "df", "sd", "conf", "n", "mean")
_EXTRAS = ("sd", "df", "t")


def _cells(row: Row) -> list[str]:
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
        bounds = format_pair(fmt(interval["low"]), fmt(interval["high"]))
    band_text = format_band(band["low"], band["high"], unit, digits, unit_once=True)
    about = interval.get("estimand", "mean")
    method = interval.get("method", "t")
    level = f"{interval['confidence'] * 100:g}%"
    if method != "t" or about != "mean":
        level += f" {method}"
        if about != "mean":
            level += f" ({about})"
    if (row.get("rule") or {}).get("rule") == "simple":
        level += " simple"  # the mean alone was compared with the band: the row says so
    critical = interval.get("critical")
    # Only a t interval has a t critical value; bootstrap and ratio rows have none to show.
    t_text = f"{critical:.4g}" if critical is not None and math.isfinite(critical) else "-"
    sd = interval.get("sd")
    sd_text = fmt(sd) if sd is not None and math.isfinite(sd) else "-"
    return [row_name(row), trials_text(row), fmt(mean), bounds, level, band_text,
            decision["verdict"], sd_text, format_df(interval.get("df")), t_text]


def _table(cells: list[list[str]], *, verbosity: int, width: int | None) -> list[str]:
    """The table of checks; sd, df and t at ``-v``."""
    shown = list(_HEADER) if verbosity > 0 else [h for h in _HEADER if h not in _EXTRAS]
    index = [_HEADER.index(h) for h in shown]
    header = [_HEADER[i] for i in index]
    table = [[row[i] for i in index] for row in cells]
    fitted = fit_table(
        header, table, right={1, 2}, width=width, shorten=0, stack=True,
        drop=[header.index(h) for h in DROP_ORDER if h in header],
    )
    lines = list(fitted.lines)
    missed = [h for h in fitted.dropped if h not in _EXTRAS or verbosity > 0]
    if missed and width is not None:
        lines.append(f"(left out to fit {width} columns: {', '.join(missed)}; "
                     "--meanband-report has them)")
    return lines


def _name(row: Row, width: int | None) -> str:
    """A row's name for a line of text: cut from the left on a narrow terminal."""
    name = row_name(row)
    return name if width is None else shorten_left(name, max(width // 2, MIN_NAME))


def _notes(rows: Sequence[Row], width: int | None = None, verbosity: int = 0) -> list[str]:
    """The notes that could change a verdict (every note at ``-v``), then one line counting
    the rest: one line per note, ``name: text``; when those lines do not fit ``width``, each
    test id once on a line of its own with its notes indented below it."""
    chosen = [(r, [n for n in r.get("notes") or () if verbosity > 0 or threatens_verdict(r, n)])
              for r in rows]
    hidden = sum(len(r.get("notes") or ()) for r in rows) - sum(len(n) for _, n in chosen)
    out = [f"  {row_name(r)}: {note['text']}" for r, notes in chosen for note in notes]
    if width is not None and any(len(line) > width for line in out):
        out = []
        for row, notes in chosen:
            if notes:
                out.append(f"  {shorten_left(row_name(row), width - 2)}")
                out.extend(f"    - {note['text']}" for note in notes)
    if hidden:
        out.append(f"  ({hidden} more note{'s' if hidden != 1 else ''} on checks that pass with "
                   "room to spare or were never checked: -v shows them, the JSON report has "
                   "all)")
    return ["", "notes:", *out] if out else []


def _suggestions(checks: Sequence[Row], width: int | None = None) -> list[str]:
    out = []
    for row in checks:
        suggestion = row.get("suggestion")
        decision = row["decision"]
        n = decision["interval"]["n"]
        if suggestion and "text" in suggestion:
            if suggestion["text"]:  # an empty text: the count is right, nothing to say
                out.append(f"  {_name(row, width)}: {suggestion['text']}")
            continue
        suggested = decision.get("suggested_n")
        verdict = decision["verdict"]
        if verdict == "UNDECIDED":
            if suggested is None:
                out.append(f"  {_name(row, width)}: UNDECIDED at n={n}; the mean sits on the band "
                           "edge, more trials are unlikely to decide it")
            else:
                out.append(f"  {_name(row, width)}: UNDECIDED at n={n}; about {suggested} trials "
                           "would likely decide it")
        elif verdict == "PASS" and suggested is not None and suggested < n:
            out.append(f"  {_name(row, width)}: PASS at n={n}; about {suggested} trials would "
                       "still pass")
    powers = {r.get("settings", {}).get("power", defaults.POWER) for r in checks}
    power = f"{powers.pop() * 100:g}% power" if len(powers) == 1 else "stated power"
    return ["", f"suggested trial counts ({power}):", *out] if out else []


def _unchecked(rows: Sequence[Row], width: int | None = None) -> list[str]:
    out = []
    for row in rows:
        if row.get("kind") != "unchecked":
            continue
        values = row.get("values")
        if values is None:  # a report written without its trials
            out.append(f"  {_name(row, width)}: trials not kept in the report")
            continue
        mean = math.fsum(values) / len(values) if values else math.nan
        out.append(f"  {_name(row, width)}: {len(values)} trials, mean "
                   f"{format_value(mean, row.get('unit'))}")
    return ["", "recorded but never checked:", *out] if out else []
