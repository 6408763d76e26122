"""The summary as a Markdown table with its notes, for CI pages and job summaries."""

from __future__ import annotations

import math
import os
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from meanband.record.message import CAUTION, budget_words, gates_a_measurement, rule_words
from meanband.report.rows import trials_text
from meanband.store.report_json import ReportError, totals
from meanband.units import SECONDS, format_band, format_value, significant_digits, time_scale

__all__ = ["DEFAULT_SUMMARY_VARIABLE", "append_job_summary", "format_markdown", "write_markdown"]

#: The environment variable that names the job-summary file on the most common CI service.
DEFAULT_SUMMARY_VARIABLE = "GITHUB_STEP_SUMMARY"

_SIDE_WORDS = {"two-sided": "two-sided", "upper": "upper bound", "lower": "lower bound"}


def _cell(text: str) -> str:
    """Table cell text: a pipe would end the cell and a newline the row."""
    return text.replace("|", "\\|").replace("\n", " ")


def _code(text: str) -> str:
    fence = "``" if "`" in text else "`"
    pad = " " if "`" in text else ""
    return f"{fence}{pad}{_cell(text)}{pad}{fence}"


def _number(value: float, unit: str | None, digits: int, scale: float | None) -> str:
    if not math.isfinite(value):
        return "nan" if math.isnan(value) else ("-inf" if value < 0 else "inf")
    return format_value(value, unit, digits, scale=scale)


def _interval_text(
    interval: Mapping[str, Any], unit: str | None, digits: int, scale: float | None
) -> str:
    side = interval["side"]
    level = f"{interval['confidence'] * 100:g}%"
    if side == "upper":
        bound = f"<= {_number(interval['high'], unit, digits, scale)}"
    elif side == "lower":
        bound = f">= {_number(interval['low'], unit, digits, scale)}"
    else:
        bound = (f"[{_number(interval['low'], unit, digits, scale)}, "
                 f"{_number(interval['high'], unit, digits, scale)}]")
    method = interval.get("method", "t")
    return f"{bound} ({level} {_SIDE_WORDS.get(side, side)}{'' if method == 't' else ', ' + method})"


def _rule_mark(row: Mapping[str, Any]) -> str:
    """Simple acceptance compares the mean alone: every table says so beside the verdict."""
    return " (simple acceptance)" if (row.get("rule") or {}).get("rule") == "simple" else ""


def _row_notes(row: Mapping[str, Any]) -> list[str]:
    texts = [note["text"] for note in row.get("notes") or []]
    decision = row.get("decision")
    suggestion = row.get("suggestion")
    if isinstance(suggestion, dict) and suggestion.get("text"):
        texts.append(str(suggestion["text"]))
    elif decision and decision["verdict"] == "UNDECIDED":
        if decision.get("suggested_n") is None:
            texts.append("the mean sits on a band edge: no number of trials is likely to decide")
        else:
            texts.append(f"about {decision['suggested_n']} trials would likely decide it")
    return texts


def _row_cells(row: Mapping[str, Any]) -> list[str]:
    """Verdict, n, mean, interval and band, with the digits and units of the terminal summary."""
    unit = row.get("unit")
    decision = row.get("decision")
    if decision is None:
        values = row.get("values")
        if values is None:
            return ["no check", "", "", "", ""]
        mean = math.fsum(values) / len(values) if values else math.nan
        return ["no check", str(len(values)), _number(mean, unit, 4, None), "", ""]
    interval = decision["interval"]
    mean = interval["mean"]
    scale = time_scale(mean) if unit == SECONDS else None
    digits = significant_digits(mean, interval["sem"])
    band = decision["band"]
    verdict = decision["verdict"]
    return [
        (verdict if verdict == "PASS" else f"**{verdict}**") + _rule_mark(row),
        trials_text(row),
        _number(mean, unit, digits, scale),
        _interval_text(interval, unit, digits, scale),
        format_band(band["low"], band["high"], unit, digits),
    ]


def _headline(rows: Sequence[Mapping[str, Any]]) -> str:
    count = totals(rows)
    parts = [f"{count[v]} {v}" for v in ("PASS", "FAIL", "UNDECIDED") if count[v]]
    text = f"{count['checks']} check{'s' if count['checks'] != 1 else ''}"
    if parts:
        text += ": " + ", ".join(parts)
    if count["unchecked"]:
        text += f"; {count['unchecked']} series without a check"
    return text


def format_markdown(rows: Sequence[Mapping[str, Any]], *, title: str = "meanband") -> str:
    """A Markdown section: a headline with the counts, one table row per check, then the notes.

    Rows come in the terminal summary's order (node id, then series).
    Verdicts read without colour (FAIL and UNDECIDED in bold); note numbers in the table point
    into the numbered list below it.
    """
    lines = [f"## {title}: {_headline(rows)}", ""]
    if not rows:
        lines.append("No checks were recorded.")
        return "\n".join(lines) + "\n"
    lines += [
        "| Test | Series | Verdict | n | Mean | Interval of the mean | Band | Notes |",
        "| --- | --- | --- | ---: | ---: | --- | --- | --- |",
    ]
    notes: list[str] = []
    for row in sorted(rows, key=lambda r: (r["nodeid"], r["series"])):  # the summary's order
        refs = []
        for text in _row_notes(row):
            notes.append(f"{len(notes) + 1}. {_code(row['nodeid'])}"
                         f"{' [' + row['series'] + ']' if row['series'] else ''}: {text}")
            refs.append(str(len(notes)))
        cells = [_code(row["nodeid"]), _cell(row["series"]), *_row_cells(row), ", ".join(refs)]
        lines.append("| " + " | ".join(cells) + " |")
    if notes:
        lines += ["", "Notes:", "", *notes]
    lines += _uncertainty_section(rows)
    if any(gates_a_measurement(row) for row in rows):
        lines += ["", f"> {CAUTION}"]
    return "\n".join(lines) + "\n"


def _uncertainty_section(rows: Sequence[Mapping[str, Any]]) -> list[str]:
    """A table of every check that carries an uncertainty budget with an instrument part or uses
    simple acceptance: U with k and nu_eff, the decision rule and its probabilities."""
    shown = [row for row in sorted(rows, key=lambda r: (r["nodeid"], r["series"]))
             if row.get("decision") and (
                 (row.get("uncertainty") or {}).get("type_b")
                 or (row.get("rule") or {}).get("rule") == "simple")]
    if not shown:
        return []
    out = ["", "Measurement uncertainty and decision rule:", "",
           "| Test | Series | Uncertainty of the mean | Decision rule |", "| --- | --- | --- | --- |"]
    for row in shown:
        unit = row.get("unit")
        budget, rule = row.get("uncertainty"), row.get("rule")
        scale = time_scale(budget["mean"]) if budget and unit == SECONDS else None
        words = budget_words(budget, unit, scale) if budget and budget.get("type_b") else "-"
        decided = rule_words(rule, unit, scale) if rule else "-"
        out.append(f"| {_code(row['nodeid'])} | {_cell(row['series'])} | {_cell(words)} | "
                   f"{_cell(decided)} |")
    return out


def write_markdown(text: str, path: str | os.PathLike[str]) -> Path:
    """Write the Markdown to ``path`` atomically (replacing it), creating its directory if needed."""
    from meanband.store.atomic import write_atomic

    return write_atomic(path, text)


def append_job_summary(
    text: str,
    variable: str = DEFAULT_SUMMARY_VARIABLE,
    environ: Mapping[str, str] | None = None,
) -> Path:
    """Append ``text`` to the file that the CI service names in the environment ``variable``."""
    env = os.environ if environ is None else environ
    name = env.get(variable, "")
    if not name:
        raise ReportError(
            f"the environment variable {variable} is not set, so there is no job-summary file to "
            "append to; run under a CI service that sets it, or name the variable your service "
            "uses with --meanband-job-summary-var"
        )
    target = Path(name)
    try:
        with target.open("a", encoding="utf-8") as handle:
            handle.write(text if text.endswith("\n") else text + "\n")
    except OSError as exc:
        raise ReportError(
            f"cannot append to the job summary {name} (from {variable}): {exc}"
        ) from exc
    return target
