"""Plain-words text for a decision: the failure message and the notes on assumptions."""

from __future__ import annotations

import math
from collections.abc import Collection
from statistics import NormalDist

from meanband.stats.bands import Band, Decision, Verdict
from meanband.stats.diagnostics import BIMODAL_THRESHOLD, Diagnostics
from meanband.stats.rules import format_probability
from meanband.units import SECONDS, format_value, significant_digits, time_scale

__all__ = [
    "COCHRAN_FACTOR",
    "assumption_notes",
    "describe",
    "format_band",
    "format_interval",
    "judged_skewness",
    "lognormal_skewness",
    "trials_for_skewness",
]


def format_interval(
    low: float, high: float, unit: str | None, scale: float | None = None, digits: int = 4
) -> str:
    """``[low, high]`` with units; open ends show as -inf/inf."""
    return f"[{_fmt(low, unit, scale, digits)}, {_fmt(high, unit, scale, digits)}]"


def format_band(band: Band, digits: int = 4) -> str:
    """A band the way a user wrote it: ``<= 3 ms``, ``>= 10 V`` or ``[84.6, 85.4] degC``."""
    from meanband.report.terminal import format_band as format_edges

    return format_edges(band.low, band.high, band.unit, digits)


def _fmt(value: float, unit: str | None, scale: float | None, digits: int = 4) -> str:
    if not math.isfinite(value):
        return "-inf" if value < 0 else "inf"
    return format_value(value, unit, digits, scale=scale)


#: Cochran's rule: the normal approximation to the mean holds when n > 25 * G1^2 (Cochran 1977,
#: Sampling Techniques, 3rd ed., section 2.15; rule and section number from memory).
COCHRAN_FACTOR = 25.0
#: Methods that assume roughly normal raw trials (batch means average them first).
_NORMAL_THEORY = ("t",)
_LOG_NORMAL_THEORY = ("log-t", "cox")


def trials_for_skewness(skewness: float) -> float:
    """Trials the t interval needs before a skewness G1 stops moving its coverage (Cochran 1977)."""
    return COCHRAN_FACTOR * skewness * skewness


def assumption_notes(
    diagnostics: Diagnostics,
    *,
    min_n: int = 10,
    normality_alpha: float = 0.05,
    method: str = "t",
    alpha: float = 0.05,
    drift_alpha: float = 0.01,
    skip: Collection[str] = (),
) -> list[dict[str, str]]:
    """Notes on the assumptions behind the interval, each ``{"code": ..., "text": ...}``.

    A note that recommends another interval method carries its name under ``"recommend"``.
    Notes judge risk, not significance: a normality rejection is called harmful only when the
    skewness is large for this n by Cochran's rule (n > 25 G1^2, Cochran 1977); positive lag-1
    autocorrelation only when one-sided significant at ``alpha`` (Box & Jenkins 1976 limits); a
    drift when Mann-Kendall rejects at ``drift_alpha`` (stricter, as a drift note asks for action);
    ``method`` is the interval method in use, so no note recommends what is already used.
    Codes in ``skip`` are left out (e.g. "drift" when the timing engine has its own drift note).
    """
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
        return [note for note in notes if note["code"] not in skip]
    skew_risk = _skew_risk(d, normality_alpha)
    if method in _NORMAL_THEORY:
        notes.extend(_normality_notes(d, normality_alpha, skew_risk))
    elif method in _LOG_NORMAL_THEORY:
        notes.extend(_log_normality_notes(d, normality_alpha, method))
    if skew_risk and d.outliers > 0 and method in _NORMAL_THEORY:
        notes.append({
            "code": "outliers",
            "text": f"{d.outliers} of {d.n} trials lie outside Tukey's fences (1.5 IQR beyond "
            "the quartiles); they are kept, and they make the skewness that puts the t "
            "interval at risk",
        })
    drift = d.drift
    drifting = drift.rejects(drift_alpha)
    # A steady drift spreads the trials evenly, which the bimodality coefficient reads as two
    # groups: the drift note says what is going on.
    if not drifting and _bimodal(d, normality_alpha):
        text = (f"trials look like two groups (bimodality coefficient {d.bimodality:.2f} > 5/9): "
                "the mean mixes two regimes in this run's proportions, and the interval holds "
                "only while that proportion is steady")
        note = {"code": "bimodal", "text": text}
        if skew_risk and method in _NORMAL_THEORY:
            note["text"] += "; method='bootstrap' does not assume one normal group"
            note["recommend"] = "bootstrap"
        notes.append(note)
    independence = _independence_notes(d, alpha, method)
    notes.extend(independence)
    if drifting:
        text = (f"trials drift: the level moved by about {drift.change:.4g} from first to last "
                f"trial (Mann-Kendall p = {drift.pvalue:.3g}); the mean is not steady, so the "
                "interval describes this run only: warm up longer or find the cause")
        if independence or d.lag1_significant:
            text += " (autocorrelated trials alone can make this test fire)"
        notes.append({"code": "drift", "text": text})
    return [note for note in notes if note["code"] not in skip]


def lognormal_skewness(log_sd: float) -> float:
    """Skewness of a log-normal population with log-sd ``log_sd``: (e^s2 + 2) sqrt(e^s2 - 1)
    (Johnson, Kotz & Balakrishnan 1994, chapter 14)."""
    s2 = log_sd * log_sd
    if s2 > 300.0:  # e^s2 alone would overflow the cube below: the skewness is beyond any n
        return math.inf
    w = math.exp(s2)
    return (w + 2.0) * math.sqrt(w - 1.0)


def judged_skewness(d: Diagnostics, alpha: float) -> float:
    """The skewness that Cochran's rule is applied to.

    The sample G1 of a strongly skewed population is biased low and rarely reaches the
    population value at small n (the long tail is seldom sampled). When the trials are positive,
    right-skewed and their logarithms look normal, the skewness implied by the log-normal fit is
    used if larger.
    """
    g1 = abs(d.skewness)
    if d.skewness > 0 and _log_normal_fits(d, alpha) and not math.isnan(d.log_sd):
        g1 = max(g1, lognormal_skewness(d.log_sd))
    return g1


def _skew_risk(d: Diagnostics, alpha: float) -> bool:
    """A real departure (the test rejects) whose skewness is too large for this n."""
    if not d.normality.rejects(alpha) or math.isnan(d.skewness):
        return False
    return d.n <= trials_for_skewness(judged_skewness(d, alpha))


def _log_normal_fits(d: Diagnostics, alpha: float) -> bool:
    """Positive trials whose logarithms look normal enough for a log-normal model.

    The cox interval leans on the log-normal shape through s^2/2, so both must hold: the
    normality test does not reject on log x, and the skewness of log x lies within two
    large-sample standard errors sqrt(6/n) of zero (common practice). A fixed floor plus a
    skewed wait (not log-normal) often passes the first at n = 30 but rarely the second.
    """
    if math.isnan(d.log_skewness) or math.isnan(d.log_normality_pvalue):
        return False
    return d.log_normality_pvalue >= alpha and abs(d.log_skewness) <= 2.0 * math.sqrt(6.0 / d.n)


def _normality_notes(d: Diagnostics, alpha: float, skew_risk: bool) -> list[dict[str, str]]:
    normality = d.normality
    if not normality.rejects(alpha):
        return []
    judged = judged_skewness(d, alpha)
    needed = trials_for_skewness(judged)
    test = f"{normality.method} p = {normality.pvalue:.3g}"
    shown = f"G1 = {d.skewness:.2f}"
    if judged > abs(d.skewness):
        shown += f", {judged:.2f} for the log-normal fit"
    if not skew_risk:
        return [{
            "code": "not-normal-harmless",
            "text": f"normality rejected ({test}), but the skewness ({shown}) is "
            f"small for {d.n} trials (Cochran's rule asks n > 25 G1^2 = {needed:.0f}): the "
            "t interval's coverage is not at risk",
        }]
    if _log_normal_fits(d, alpha):
        recommend = "cox"
        why = ("the logarithms of the trials look normal, so method='cox' bounds the mean under "
               "a log-normal model (Zhou & Gao 1997)")
    else:
        recommend = "bootstrap"
        why = ("method='bootstrap' (BCa) bounds the mean without assuming a shape "
               "(Efron 1987)")
        if d.n < 20:
            why += ", though with so few trials it under-covers too: collect more trials"
    return [{
        "code": "not-normal",
        "text": f"normality matters here: skewness {shown} ({test}) needs about "
        f"{needed:.0f} trials before the t interval holds its coverage (Cochran's rule "
        f"n > 25 G1^2), this check has {d.n}; {why}",
        "recommend": recommend,
    }]


def _log_normality_notes(d: Diagnostics, alpha: float, method: str) -> list[dict[str, str]]:
    if math.isnan(d.log_normality_pvalue) or _log_normal_fits(d, alpha):
        return []
    return [{
        "code": "log-not-normal",
        "text": f"method={method!r} assumes log-normal trials, but their logarithms are not "
        f"normal (p = {d.log_normality_pvalue:.3g}, log skewness {d.log_skewness:.2f}); "
        "method='bootstrap' (BCa) assumes no shape",
        "recommend": "bootstrap",
    }]


def _bimodal(d: Diagnostics, alpha: float) -> bool:
    if d.n < 20 or math.isnan(d.bimodality) or d.bimodality <= BIMODAL_THRESHOLD:
        return False
    if not d.normality.rejects(alpha):
        return False
    # A strong skew alone raises the coefficient; two groups stay two groups on the log scale.
    return math.isnan(d.log_bimodality) or d.log_bimodality > BIMODAL_THRESHOLD


def _independence_notes(d: Diagnostics, alpha: float, method: str) -> list[dict[str, str]]:
    if math.isnan(d.lag1) or d.n < 4 or method == "batch-means":
        return []
    # One-sided: only positive autocorrelation narrows the interval too much (Box & Jenkins 1976,
    # white-noise limits -1/n +/- z / sqrt(n)).
    limit = -1.0 / d.n + NormalDist().inv_cdf(1.0 - alpha) / math.sqrt(d.n)
    if d.lag1 <= limit:
        return []
    inflation = math.sqrt((1.0 + d.lag1) / (1.0 - d.lag1)) if d.lag1 < 1.0 else math.inf
    return [{
        "code": "autocorrelated",
        "text": f"trials autocorrelated: lag-1 r = {d.lag1:.3f}, effective n about "
        f"{d.effective_n:.0f} of {d.n}; the standard error is about {inflation:.1f}x larger "
        "than independent trials would give, so the interval is too narrow; "
        "method='batch-means' allows for it",
        "recommend": "batch-means",
    }]


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
