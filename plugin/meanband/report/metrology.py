"""Summary lines on measurement uncertainty and decision rules, for checks that gate hardware."""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

from meanband.report.terminal import row_name
from meanband.stats.rules import format_probability
from meanband.units import SECONDS, format_value, significant_digits, time_scale

if TYPE_CHECKING:
    import pytest

__all__ = ["metrology_lines"]

Row = dict[str, Any]


def pytest_meanband_summary_lines(config: pytest.Config, rows: list[Row]) -> list[str]:
    return metrology_lines(rows, config.get_verbosity())


def metrology_lines(rows: Sequence[Row], verbosity: int = 0) -> list[str]:
    """One line per check that carries an instrument uncertainty or uses simple acceptance
    (every check at ``verbosity > 0``): U, k, nu_eff, u_A, u_B, the rule and the conformance
    probability, in the unit of the trials."""
    if verbosity < 0:
        return []
    out = []
    for row in sorted(rows, key=lambda r: (r.get("nodeid", ""), r.get("series", ""))):
        budget, rule = row.get("uncertainty"), row.get("rule")
        if not row.get("decision") or (budget is None and rule is None):
            continue
        instrument = bool(budget and budget.get("type_b"))
        simple = bool(rule and rule.get("rule") == "simple")
        if instrument or simple or verbosity > 0:
            out.append(f"  {row_name(row)}: {_describe(row, budget, rule)}")
    return ["", "measurement uncertainty and decision rule:", *out] if out else []


def _describe(row: Row, budget: dict[str, Any] | None, rule: dict[str, Any] | None) -> str:
    unit = row.get("unit")
    parts = []
    if budget is not None:
        scale = time_scale(budget["mean"]) if unit == SECONDS else None
        digits = min(significant_digits(budget["expanded"], budget["combined"] / 10), 4)

        def fmt(value: float) -> str:
            return format_value(value, unit, digits, scale=scale)

        text = (f"U = {fmt(budget['expanded'])} (k = {budget['coverage_factor']:.3f}, "
                f"nu_eff {_df(budget['effective_df'])}; u_A {fmt(budget['type_a'])}")
        if budget.get("type_b"):
            text += f", u_B {fmt(budget['type_b'])} (df {_df(budget['type_b_df'])})"
        parts.append(text + ")")
    if rule is not None:
        if rule.get("rule") == "simple":
            text = "simple acceptance (w = 0)"
        else:
            text = "guarded acceptance (w = U)"
        if rule.get("conformance_probability") is not None:
            text += f", conformance probability {format_probability(rule['conformance_probability'])}"
        if rule.get("false_accept_probability") is not None:
            risk = format_probability(rule["false_accept_probability"])
            text += f", probability of false acceptance {risk}"
        if rule.get("false_reject_probability") is not None:
            risk = format_probability(rule["false_reject_probability"])
            text += f", probability of false rejection {risk}"
        parts.append(text)
    decision = row["decision"]
    if (decision.get("verdict") == "UNDECIDED" and decision.get("suggested_n") is None
            and budget is not None and budget.get("type_b")):
        parts.append("more trials will not decide it: the instrument's own uncertainty leaves "
                     "too little room")
    return "; ".join(parts)


def _df(value: float | None) -> str:
    if value is None:
        return "inf"
    return f"{value:.0f}" if value >= 100 else f"{value:.3g}"
