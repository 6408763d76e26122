"""The words of a check: the failure message, and the metrology wording the summary shares."""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any

from meanband.errors import hide_plugin_frames
from meanband.stats.decision import Decision
from meanband.stats.notes import skew_shift
from meanband.stats.verdict import Verdict
from meanband.units import (
    SECONDS,
    format_band,
    format_bound,
    format_df,
    format_probability,
    significant_digits,
    time_scale,
)

__all__ = ["CAUTION", "budget_words", "describe", "gates_a_measurement", "rule_words"]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

#: What a passing gate on a measurement does and does not say; printed with every result that
#: gates hardware (the summary, the Markdown and the JSON report).
CAUTION = (
    "A passing gate is a statistical statement about the measured mean, not a safety or "
    "compliance certificate: it rests on the data, the stated instrument uncertainty and the "
    "model behind them (roughly normal, independent readings; a complete uncertainty budget). "
    "Whether a unit is accepted is decided by the applicable local codes, the product's "
    "standards and licensed professional practice."
)

_SIDE_WORDS = {"two-sided": "two-sided", "upper": "upper bound", "lower": "lower bound"}
_HEADS = {
    Verdict.PASS: "the interval of the mean lies inside the band",
    Verdict.FAIL: "the mean is confidently outside the band",
    Verdict.UNDECIDED: "the interval straddles a band edge: not enough evidence either way",
}
_SIMPLE_HEADS = {
    Verdict.PASS: "the mean lies inside the band (simple acceptance, no guard band)",
    Verdict.FAIL: "the mean lies outside the band (simple acceptance, no guard band)",
}


def gates_a_measurement(row: Mapping[str, Any]) -> bool:
    """Whether a result row is a check on measured values (not on timings or a comparison)."""
    return bool(row.get("decision")) and row.get("unit") != SECONDS and row.get("source") in (
        "sample", "values")


def budget_words(
    budget: Mapping[str, Any], unit: str | None, scale: float | None = None, digits: int = 4
) -> str:
    """The uncertainty budget of a mean in one phrase: U with k and nu_eff, then u_A, u_B, u_c.

    ``budget`` is an ``UncertaintyBudget.to_dict()``; an infinite df is None there.
    """

    def fmt(value: float) -> str:
        return format_bound(value, unit, digits, scale=scale)

    text = (f"U = {fmt(budget['expanded'])} (k = {budget['coverage_factor']:.3f}, "
            f"nu_eff {_effective_df(budget['effective_df'])}); u_A {fmt(budget['type_a'])} "
            f"(df {format_df(budget['type_a_df'])})")
    if budget.get("type_b"):
        text += f", u_B {fmt(budget['type_b'])} (df {format_df(budget['type_b_df'])})"
    return text + f", u_c {fmt(budget['combined'])}"


def rule_words(rule: Mapping[str, Any], unit: str | None, scale: float | None = None) -> str:
    """The decision rule and its probabilities in one phrase (``RuleOutcome.to_dict()``)."""
    name = str(rule.get("rule", "guarded"))
    guard = format_bound(float(rule.get("guard_band") or 0.0), unit, scale=scale)
    if name == "simple":
        text = "simple acceptance (w = 0): the mean alone is compared with the band"
    elif name.startswith("guarded:"):
        text = f"guarded acceptance (guard band w = {name.partition(':')[2]} U = {guard})"
    elif name.startswith("specific-risk:"):
        text = (f"guarded acceptance for a specific risk of at most {name.partition(':')[2]} "
                f"(guard band w = {guard})")
    else:
        text = f"guarded acceptance (guard band w = U = {guard})"
    if rule.get("statement"):
        text += f"; ILAC-G8 statement: {rule['statement']}"
    risks = rule.get("risks")
    if risks:
        share = risks.get("conforming_rejected_share")
        text += (f"; for the stated process: consumer's risk {format_probability(risks['consumer_risk'])}"
                 f", producer's risk {format_probability(risks['producer_risk'])}")
        if share is not None:
            text += f" ({share:.1%} of good units turned away)"
    for key, words in (("conformance_probability", "conformance probability"),
                       ("false_accept_probability", "probability of false acceptance"),
                       ("false_reject_probability", "probability of false rejection")):
        if rule.get(key) is not None:
            text += f"; {words} {format_probability(rule[key])}"
    return text


def describe(
    decision: Decision, *, label: str = "", notes: Sequence[Mapping[str, str]] | None = None
) -> str:
    """The failure message: n, mean, interval, band, verdict and diagnostics in one block."""
    iv, d, unit = decision.interval, decision.diagnostics, decision.unit
    scale = time_scale(iv.mean) if unit == SECONDS else None
    digits = significant_digits(iv.mean, iv.sem)
    head = _HEADS[decision.verdict]
    if decision.rule is not None and decision.rule.rule == "simple":
        head = _SIMPLE_HEADS.get(decision.verdict, head)
    budget = decision.uncertainty
    sd_df = budget.type_a_df if budget is not None else iv.df  # nu_eff is the interval's df
    lines = [
        f"meanband {decision.verdict.value}{' [' + label + ']' if label else ''}: {head}",
        f"  n          {iv.n}",
        f"  mean       {format_bound(iv.mean, unit, digits, scale=scale)}",
        f"  interval   [{format_bound(iv.low, unit, digits, scale=scale)}, "
        f"{format_bound(iv.high, unit, digits, scale=scale)}] "
        f"({iv.confidence * 100:g}% {_SIDE_WORDS[iv.side]}, {iv.method}; about the {iv.estimand})",
        f"  band       {format_band(decision.band.low, decision.band.high, decision.band.unit, digits)}",
        f"  verdict    {decision.verdict.value}",
        f"  sd         {format_bound(iv.sd, unit, scale=scale)} (df {sd_df:g})",
    ]
    if budget is not None and budget.has_instrument:
        lines.append(f"  U          {budget_words(budget.to_dict(), unit, scale)}")
    if decision.rule is not None:
        words = decision.rule.to_dict()
        if decision.risks is not None:
            words["risks"] = decision.risks.to_dict()
        lines.append(f"  rule       {rule_words(words, unit, scale)}")
    normality = d.normality
    if normality.testable:
        line = (f"  normality  {normality.method} W/stat = {normality.statistic:.4g}, "
                f"p = {normality.pvalue:.3g}")
        if math.isfinite(d.skewness):
            # The figures a rejection without a note rests on: how far the skew can move a
            # 95% bound's error rate at this n (the not-normal note fires above 2 points).
            line += (f"; skewness G1 = {d.skewness:.2f}, moves a 95% bound by about "
                     f"{100 * skew_shift(d.skewness, d.n):.1f} points")
        lines.append(line)
    else:
        lines.append(f"  normality  not testable ({normality.reason})")
    if not math.isnan(d.lag1):
        lines.append(f"  lag-1 r    {d.lag1:.3f} (effective n about {d.effective_n:.0f})")
    # A check that stopped when decided says in its own note what its cap did.
    own_account = any(note.get("code") in _SEQUENTIAL_CODES for note in notes or [])
    if decision.verdict is Verdict.UNDECIDED and not own_account:
        if decision.suggested_n is None and budget is not None and budget.has_instrument:
            lines.append("  to decide  more trials will not decide it: the instrument's own "
                         "uncertainty leaves too little room; a better calibrated instrument may")
        elif decision.suggested_n is None:
            lines.append("  to decide  the mean sits on the edge: no number of trials is likely "
                         "to decide")
        else:
            lines.append(f"  to decide  about {decision.suggested_n} trials would likely decide it "
                         f"({decision.power:.0%} power, from this mean and sd)")
    for note in notes or []:
        lines.append(f"  note       {note['text']}")
    return "\n".join(lines)


#: Above this many effective degrees of freedom, k is within 0.2% of the normal quantile and
#: the exact count (Welch-Satterthwaite gives figures like 781483) says nothing more.
_MANY_DF = 1000


_SEQUENTIAL_CODES = ("until-decided-capped", "planned-looks")


def _effective_df(df: float | None) -> str:
    """nu_eff as the budget line writes it: ``> 1000`` for the many that make k normal."""
    if df is not None and math.isfinite(df) and df > _MANY_DF:
        return f"> {_MANY_DF}"
    return format_df(df)
