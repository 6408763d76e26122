"""The summary section on measurement uncertainty and decision rules, for checks that gate hardware."""

from __future__ import annotations

import textwrap
from collections.abc import Mapping, Sequence
from typing import Any

from meanband.record.message import CAUTION, budget_words, gates_a_measurement, rule_words
from meanband.record.row import ResultRow
from meanband.report.rows import row_name, sorted_rows
from meanband.units import SECONDS, duration_scale, significant_digits, time_scale

__all__ = ["caution_lines", "metrology_lines"]


def metrology_lines(rows: Sequence[ResultRow], verbosity: int = 0) -> list[str]:
    """One line per check that carries an instrument uncertainty or uses simple acceptance
    (every check of a measured value, not a timing, at ``verbosity > 0``): U, k, nu_eff, u_A,
    u_B, the rule and the conformance probability, in the unit of the trials, in the words of
    the failure message."""
    if verbosity < 0:
        return []
    out = []
    for row in sorted_rows(rows):
        budget, rule = row.get("uncertainty"), row.get("rule")
        if not row.get("decision") or (budget is None and rule is None):
            continue
        instrument = bool(budget and budget.get("type_b"))
        simple = bool(rule and rule.get("rule") == "simple")
        # A plain timing check is no measurement gate: U, k and conformance probabilities
        # would only crowd its -v summary.
        timing = duration_scale(row.get("unit")) is not None
        if instrument or simple or (verbosity > 0 and not timing):
            out.append(f"  {row_name(row)}: {_describe(row, budget, rule)}")
    return ["", "measurement uncertainty and decision rule:", *out] if out else []


def _describe(
    row: ResultRow, budget: Mapping[str, Any] | None, rule: Mapping[str, Any] | None
) -> str:
    unit = row.get("unit")
    parts = []
    scale = None
    if budget is not None:
        scale = time_scale(budget["mean"]) if unit == SECONDS else None
        digits = min(significant_digits(budget["expanded"], budget["combined"] / 10), 4)
        parts.append(budget_words(budget, unit, scale, digits))
    if rule is not None:
        parts.append(rule_words(rule, unit, scale))
    ratio = (rule or {}).get("uncertainty_ratio")
    if ratio is not None:
        parts.append(f"test uncertainty ratio {ratio:.2g}:1")
    calibration = (budget or {}).get("calibration")
    if calibration:
        certificate = f" (certificate {calibration['certificate']})" if calibration.get("certificate") else ""
        due = f", due {calibration['due']}" if calibration.get("due") else ""
        parts.append(f"instrument {calibration['instrument']}{certificate}{due}")
    decision = row["decision"]
    if (decision is not None and decision.get("verdict") == "UNDECIDED"
            and decision.get("suggested_n") is None and budget is not None
            and budget.get("type_b")):
        parts.append("more trials will not decide it: the instrument's own uncertainty leaves "
                     "too little room")
    return "; ".join(parts)


def caution_lines(rows: Sequence[ResultRow], verbosity: int = 0) -> list[str]:
    """The caution, once, when any check gates a measured value (wrapped for the terminal)."""
    if verbosity < 0 or not any(gates_a_measurement(row) for row in rows):
        return []
    return ["", *textwrap.wrap(f"note on measurement gates: {CAUTION}", width=78)]
