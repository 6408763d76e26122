"""Plain-words text for a decision: the failure message and the notes on assumptions."""

from __future__ import annotations

import math

from meanband.bands import Band, Decision, Verdict
from meanband.diagnostics import Diagnostics
from meanband.rules import format_probability
from meanband.units import SECONDS, format_value, significant_digits, time_scale

__all__ = ["assumption_notes", "describe", "format_band", "format_interval"]


def format_interval(
    low: float, high: float, unit: str | None, scale: float | None = None, digits: int = 4
) -> str:
    """``[low, high]`` with units; open ends show as -inf/inf."""
    return f"[{_fmt(low, unit, scale, digits)}, {_fmt(high, unit, scale, digits)}]"


def format_band(band: Band, digits: int = 4) -> str:
    """A band the way a user wrote it: ``<= 3 ms``, ``>= 10 V`` or ``[84.6, 85.4] degC``."""
    from meanband.summary import format_band as format_edges

    return format_edges(band.low, band.high, band.unit, digits)


def _fmt(value: float, unit: str | None, scale: float | None, digits: int = 4) -> str:
    if not math.isfinite(value):
        return "-inf" if value < 0 else "inf"
    return format_value(value, unit, digits, scale=scale)


def assumption_notes(
    diagnostics: Diagnostics, *, min_n: int = 10, normality_alpha: float = 0.05
) -> list[dict[str, str]]:
    """Notes on the assumptions behind the interval, each ``{"code": ..., "text": ...}``."""
    notes: list[dict[str, str]] = []
    d = diagnostics
    if d.n < min_n:
        notes.append({
            "code": "few-trials",
            "text": f"only {d.n} trials (fewer than {min_n}): the interval rests on few trials and "
            "the normality check has little power",
        })
    if d.zero_spread:
        notes.append({
            "code": "zero-spread",
            "text": "all trials are equal: the interval is the single point [mean, mean]; "
            "check that the measurement resolves the quantity",
        })
    if d.normality.rejects(normality_alpha):
        notes.append({
            "code": "not-normal",
            "text": f"normality doubtful: {d.normality.method} p = {d.normality.pvalue:.3g} "
            f"(< {normality_alpha:g}); the t interval assumes roughly normal trials",
        })
    if d.lag1_significant:
        notes.append({
            "code": "autocorrelated",
            "text": f"trials autocorrelated: lag-1 r = {d.lag1:.3f}, effective n about "
            f"{d.effective_n:.0f} of {d.n}; the interval is likely too narrow",
        })
    return notes


def describe(decision: Decision, *, label: str = "", notes: list[dict[str, str]] | None = None) -> str:
    """The failure message: n, mean, interval, band, verdict and diagnostics in one block."""
    iv, d, unit = decision.interval, decision.diagnostics, decision.unit
    scale = time_scale(iv.mean) if unit == SECONDS else None
    digits = significant_digits(iv.mean, iv.sem)
    which = {"two-sided": "two-sided", "upper": "upper bound", "lower": "lower bound"}[iv.side]
    head = {
        Verdict.PASS: "the interval of the mean lies inside the band",
        Verdict.FAIL: "the mean is confidently outside the band",
        Verdict.UNDECIDED: "the interval straddles a band edge: not enough evidence either way",
    }[decision.verdict]
    simple = decision.rule is not None and decision.rule.rule == "simple"
    if simple:
        head = {
            Verdict.PASS: "the mean lies inside the band (simple acceptance, no guard band)",
            Verdict.FAIL: "the mean lies outside the band (simple acceptance, no guard band)",
        }.get(decision.verdict, head)
    lines = [
        f"meanband {decision.verdict.value}{' [' + label + ']' if label else ''}: {head}",
        f"  n          {iv.n}",
        f"  mean       {_fmt(iv.mean, unit, scale, digits)}",
        f"  interval   {format_interval(iv.low, iv.high, unit, scale, digits)} "
        f"({iv.confidence * 100:g}% {which}, {iv.method}; about the {iv.estimand})",
        f"  band       {format_band(decision.band, digits)}",
        f"  verdict    {decision.verdict.value}",
        f"  sd         {_fmt(iv.sd, unit, scale)} (df {_sd_df(decision):g})",
    ]
    lines.extend(_metrology_lines(decision, scale))
    normality = d.normality
    if normality.testable:
        lines.append(f"  normality  {normality.method} W/stat = {normality.statistic:.4g}, "
                     f"p = {normality.pvalue:.3g}")
    else:
        lines.append(f"  normality  not testable ({normality.reason})")
    if not math.isnan(d.lag1):
        lines.append(f"  lag-1 r    {d.lag1:.3f} (effective n about {d.effective_n:.0f})")
    budget = decision.uncertainty
    if decision.verdict is Verdict.UNDECIDED:
        if decision.suggested_n is None and budget is not None and budget.has_instrument:
            lines.append("  to decide  more trials will not decide it: the instrument's own "
                         "uncertainty leaves too little room; a better calibrated instrument may")
        elif decision.suggested_n is None:
            lines.append("  to decide  the mean sits on the edge: no number of trials is likely to decide")
        else:
            lines.append(f"  to decide  about {decision.suggested_n} trials would likely decide it "
                         "(90% power, from this mean and sd)")
    for note in notes or []:
        lines.append(f"  note       {note['text']}")
    return "\n".join(lines)


def _metrology_lines(decision: Decision, scale: float | None) -> list[str]:
    """The uncertainty budget (when an instrument enters it) and the decision rule."""
    lines: list[str] = []
    budget, outcome, unit = decision.uncertainty, decision.rule, decision.unit
    if budget is not None and budget.has_instrument:
        lines.append(
            f"  u(mean)    u_A {_fmt(budget.type_a, unit, scale)} (df {budget.type_a_df:g}), "
            f"u_B {_fmt(budget.type_b, unit, scale)} (df {_df_text(budget.type_b_df)}), "
            f"u_c {_fmt(budget.combined, unit, scale)} (nu_eff {_df_text(budget.effective_df)})"
        )
        lines.append(
            f"  U          {_fmt(budget.expanded, unit, scale)} "
            f"(k = {budget.coverage_factor:.3f}, {budget.confidence * 100:g}% {budget.side})"
        )
    if outcome is None:
        return lines
    if outcome.rule == "simple":
        text = "simple acceptance (w = 0): the mean alone is compared with the band"
    else:
        text = f"guarded acceptance (guard band w = U = {_fmt(outcome.guard_band, unit, scale)})"
    if outcome.conformance_probability is not None:
        text += f"; conformance probability {format_probability(outcome.conformance_probability)}"
    if outcome.false_accept_probability is not None:
        risk = format_probability(outcome.false_accept_probability)
        text += f"; probability of false acceptance {risk}"
    if outcome.false_reject_probability is not None:
        text += f"; probability of false rejection {format_probability(outcome.false_reject_probability)}"
    lines.append(f"  rule       {text}")
    return lines


def _sd_df(decision: Decision) -> float:
    """Degrees of freedom of the trials' sd (the interval's df is nu_eff once u_B enters)."""
    budget = decision.uncertainty
    return budget.type_a_df if budget is not None else decision.interval.df


def _df_text(df: float) -> str:
    return "inf" if math.isinf(df) else f"{df:.0f}" if df >= 100 else f"{df:.3g}"
