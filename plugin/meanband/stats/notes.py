"""Notes on the assumptions behind an interval, judged by the risk they pose at this n."""

from __future__ import annotations

import math
from collections.abc import Collection
from statistics import NormalDist

from meanband.errors import hide_plugin_frames
from meanband.stats.diagnostics import BIMODAL_THRESHOLD, Diagnostics, DriftTest

__all__ = [
    "ASSUMPTION_CODES",
    "COCHRAN_FACTOR",
    "MIN_BOOTSTRAP_TRIALS",
    "SHAPE_FREE_METHOD",
    "assumption_notes",
    "drift_words",
    "judged_skewness",
    "lognormal_skewness",
    "trials_for_skewness",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours


#: Codes of the notes that :func:`assumption_notes` writes (a pool of runs recomputes them).
ASSUMPTION_CODES = frozenset({
    "few-trials", "zero-spread", "not-normal", "not-normal-harmless", "log-not-normal",
    "outliers", "bimodal", "autocorrelated", "drift",
})

#: Cochran's rule: the normal approximation to the mean holds when n > 25 * G1^2 (Cochran 1977,
#: Sampling Techniques, 3rd ed., section 2.15; rule and section number from memory).
COCHRAN_FACTOR = 25.0
#: Methods that assume roughly normal raw trials (batch means average them first).
_NORMAL_THEORY = ("t",)
_LOG_NORMAL_THEORY = ("log-t", "cox")
#: Fewest trials at which a resampling interval is recommended: below about 20 the bootstrap
#: covers worse than t (BCa 69.9 / 81.5 / 90.5% at n = 3 / 5 / 10 against t's 97.4 / 94.0 /
#: 94.9% on normal data, issue 19's study), so no note recommends it there.
MIN_BOOTSTRAP_TRIALS = 20
#: The shape-free method the notes recommend at n >= MIN_BOOTSTRAP_TRIALS: the studentised
#: bootstrap falsely passes less often than BCa on every skewed scenario of
#: studies/skewed_budgets.py at n = 20 and 30 (docs/skewed-budgets.md).
SHAPE_FREE_METHOD = "bootstrap-t"


def _shape_free(n: int, what: str) -> tuple[str | None, str]:
    """The method to recommend when no shape can be assumed, and why; none below 20 trials."""
    if n < MIN_BOOTSTRAP_TRIALS:
        return None, (f"with {n} trials no method does better than t (the bootstrap covers "
                      f"worse below about {MIN_BOOTSTRAP_TRIALS}): collect at least "
                      f"{MIN_BOOTSTRAP_TRIALS} trials")
    return SHAPE_FREE_METHOD, (f"method={SHAPE_FREE_METHOD!r} (studentised bootstrap, Efron "
                               f"1981; Hall 1988) {what}")


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
    unit: str | None = None,
) -> list[dict[str, str]]:
    """Notes on the assumptions behind the interval, each ``{"code": ..., "text": ...}``.

    A note that recommends another interval method carries its name under ``"recommend"``.
    Notes judge risk, not significance: a normality rejection is called harmful only when the
    skewness is large for this n by Cochran's rule (n > 25 G1^2, Cochran 1977); positive lag-1
    autocorrelation only when one-sided significant at ``alpha`` (Box & Jenkins 1976 limits); a
    drift when Mann-Kendall rejects at ``drift_alpha`` (stricter, as a drift note asks for action);
    ``method`` is the interval method in use, so no note recommends what is already used.
    Codes in ``skip`` are left out (e.g. "drift" when the timing engine has its own drift note).
    ``unit`` is the trials' unit, written with every value a note gives.
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
            recommend, why = _shape_free(d.n, "does not assume one normal group")
            note["text"] += "; " + why
            if recommend is not None:
                note["recommend"] = recommend
        notes.append(note)
    independence = _independence_notes(d, alpha, method)
    notes.extend(independence)
    if drifting:
        text = (f"trials drift: {drift_words(drift, unit)} (Mann-Kendall p = "
                f"{drift.pvalue:.3g}); the mean is not steady, so the interval describes this "
                "run only: warm up longer or find the cause")
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
    recommend: str | None
    if _log_normal_fits(d, alpha):
        recommend = "cox"
        why = ("the logarithms of the trials look normal, so method='cox' bounds the mean under "
               "a log-normal model (Zhou & Gao 1997)")
    else:
        recommend, why = _shape_free(d.n, "bounds the mean without assuming a shape")
    note = {
        "code": "not-normal",
        "text": f"normality matters here: skewness {shown} ({test}) needs about "
        f"{needed:.0f} trials before the t interval holds its coverage (Cochran's rule "
        f"n > 25 G1^2), this check has {d.n}; {why}",
    }
    if recommend is not None:
        note["recommend"] = recommend
    return [note]


def _log_normality_notes(d: Diagnostics, alpha: float, method: str) -> list[dict[str, str]]:
    if math.isnan(d.log_normality_pvalue) or _log_normal_fits(d, alpha):
        return []
    recommend, why = _shape_free(d.n, "assumes no shape")
    note = {
        "code": "log-not-normal",
        "text": f"method={method!r} assumes log-normal trials, but their logarithms are not "
        f"normal (p = {d.log_normality_pvalue:.3g}, log skewness {d.log_skewness:.2f}); {why}",
    }
    if recommend is not None:
        note["recommend"] = recommend
    return [note]


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


def drift_words(drift: DriftTest, unit: str | None) -> str:
    """How the level moved, first third to last, with the unit: as a relative change for
    timings (``the level moved from 13.1 ms (first third) to 2.03 ms (last third), -84.5%``;
    a change of means of durations cannot fall below -100%), else by how much in the unit (a
    percentage of a reading in degC or V would depend on the scale's zero)."""
    from meanband.units import SECONDS, duration_scale, format_value, time_scale

    scale = time_scale(max(abs(drift.first), abs(drift.last))) if unit == SECONDS else None
    first = format_value(drift.first, unit, 4, scale=scale)
    last = format_value(drift.last, unit, 4, scale=scale)
    text = f"the level moved from {first} (first third) to {last} (last third)"
    relative = drift.relative_change
    if duration_scale(unit) is not None and math.isfinite(relative) and drift.last >= 0:
        text += f", {relative:+.1%}"
    else:
        text += f", by {format_value(drift.last - drift.first, unit, 3, scale=scale)}"
    return text
