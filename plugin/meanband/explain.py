"""Plain-words text for a decision: the failure message and the notes on assumptions."""

from __future__ import annotations

import math

from meanband.bands import Band, Decision, Verdict
from meanband.diagnostics import Diagnostics
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
    lines = [
        f"meanband {decision.verdict.value}{' [' + label + ']' if label else ''}: {head}",
        f"  n          {iv.n}",
        f"  mean       {_fmt(iv.mean, unit, scale, digits)}",
        f"  interval   {format_interval(iv.low, iv.high, unit, scale, digits)} "
        f"({iv.confidence * 100:g}% {which}, {iv.method}; about the {iv.estimand})",
        f"  band       {format_band(decision.band, digits)}",
        f"  verdict    {decision.verdict.value}",
        f"  sd         {_fmt(iv.sd, unit, scale)} (df {iv.df:g})",
    ]
    normality = d.normality
    if normality.testable:
        lines.append(f"  normality  {normality.method} W/stat = {normality.statistic:.4g}, "
                     f"p = {normality.pvalue:.3g}")
    else:
        lines.append(f"  normality  not testable ({normality.reason})")
    if not math.isnan(d.lag1):
        lines.append(f"  lag-1 r    {d.lag1:.3f} (effective n about {d.effective_n:.0f})")
    if decision.verdict is Verdict.UNDECIDED:
        if decision.suggested_n is None:
            lines.append("  to decide  the mean sits on the edge: no number of trials is likely to decide")
        else:
            lines.append(f"  to decide  about {decision.suggested_n} trials would likely decide it "
                         "(90% power, from this mean and sd)")
    for note in notes or []:
        lines.append(f"  note       {note['text']}")
    return "\n".join(lines)
