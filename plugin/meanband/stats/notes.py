"""Notes on the assumptions behind an interval, judged by the risk they pose at this n."""

from __future__ import annotations

import math
from collections.abc import Collection
from statistics import NormalDist

from meanband.errors import hide_plugin_frames
from meanband.stats.diagnostics import BIMODAL_THRESHOLD, Diagnostics, DriftTest

__all__ = [
    "ASSUMPTION_CODES",
    "AUTOCORRELATION_ALPHA",
    "COCHRAN_FACTOR",
    "DIP_ALPHA",
    "DRIFT_ALPHA",
    "FALLBACK_CODE",
    "FALLBACK_DOUBT_Z",
    "FALLBACK_METHOD",
    "FALLBACK_MIN_N",
    "LOG_BIMODAL_LIMIT",
    "MAX_COVERAGE_LOSS",
    "MAX_SKEW_SHIFT",
    "MIN_BOOTSTRAP_TRIALS",
    "SHAPE_FREE_METHOD",
    "TIMING_METHOD_CODE",
    "ar1_coverage",
    "assumption_notes",
    "batch_means_fallback",
    "drift_words",
    "guarded_skewness",
    "judged_skewness",
    "lognormal_skewness",
    "skew_shift",
    "skewed_timing_note",
    "skewness_se",
    "trials_for_skewness",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours


#: Codes of the notes that :func:`assumption_notes` writes (a pool of runs recomputes them).
#: ``not-normal-harmless`` is no longer written (a harmless rejection is no note; its figures
#: stay in the diagnostics) but rows of older runs may carry it.
ASSUMPTION_CODES = frozenset({
    "few-trials", "zero-spread", "not-normal", "not-normal-harmless", "log-not-normal",
    "outliers", "bimodal", "autocorrelated", "drift",
})

#: Cochran's rule: the normal approximation to the mean holds when n > 25 * G1^2 (Cochran 1977,
#: Sampling Techniques, 3rd ed., section 2.15; rule and section number from memory).
COCHRAN_FACTOR = 25.0
#: Largest shift, in probability, of the error rate of a one-sided 95% t bound that a skewness
#: may cause before the ``not-normal`` note fires: 2 points (a 5% false-PASS rate read as up
#: to 7%). The shift is :func:`skew_shift` of the skewness less one standard error
#: (:func:`guarded_skewness`); Cochran's n > 25 G1^2 is about the same line (2.2 points) on
#: the point estimate. With the normality test at 0.05, normal independent trials reach it in
#: well under 1% of samples at n >= 30 (studies/note_false_alarms.py).
MAX_SKEW_SHIFT = 0.02
#: Largest loss, in probability, of the two-sided 95% t interval's coverage that positive
#: lag-1 autocorrelation may cause before the ``autocorrelated`` note fires: 2 points (AR(1)
#: phi about 0.08, see :func:`ar1_coverage`).
MAX_COVERAGE_LOSS = 0.02
#: One-sided level of the lag-1 test behind the ``autocorrelated`` note: independent trials
#: fire it in about 1% of samples at every n (studies/note_false_alarms.py), which leaves room
#: for the other notes within a 2% total on normal independent data. Its power at AR(1)
#: phi = 0.3 and n = 50 is only about a third: no lag-1 limit with few false alarms does better.
AUTOCORRELATION_ALPHA = 0.01
#: Level of the Mann-Kendall test behind the ``drift`` note: independent trials fire it in
#: a quarter of a percent of samples, and a drift worth acting on is far beyond it.
DRIFT_ALPHA = 0.0025
#: Level of the dip test (Hartigan & Hartigan 1985) on x, and on log x for positive trials,
#: behind the ``bimodal`` note, which also needs the normality test to reject. The tabulated
#: p-value is that of uniform samples, the least favourable unimodal case, so one-mode shapes
#: reject far less often: 0-2.3% of normal, log-normal, exponential, gamma, Pareto and
#: floor + exponential samples at n = 30-300 reject on x or log x (300 samples each).
DIP_ALPHA = 0.05
#: Sarle's coefficient of log x above which positive trials show two modes even when the dip
#: test, weak against a small second group, cannot see them: the log of a one-mode timing is
#: at most about as skewed as an exponential (Pareto trials: 5/9 exactly), whose sample
#: coefficient stayed below 0.8 in every one of 300 samples per shape and n = 30-300 of the
#: shapes above; one call in ten at three times the usual time reaches about 1.
LOG_BIMODAL_LIMIT = 0.8
#: Where the lag-1 r of timings is "in doubt": above -1/n + z/sqrt(n) with z = 1.2816, which
#: independent trials pass in one run in ten (Box & Jenkins 1976 large-sample limits, one-sided
#: at 0.10). Timings whose method was not set take batch means there: on AR(1) phi = 0.3 at
#: n = 50 that raises coverage from about 85% to 92%, at 1.8x the width on those series and
#: 1.09x on average on independent ones (studies/note_false_alarms.py).
FALLBACK_DOUBT_Z = 1.2816
#: Fewest trials at which timings fall back to batch means: 30 trials make 3 batches (df 2).
FALLBACK_MIN_N = 30
#: The method timings in doubt fall back to, and the code of the note that says so.
FALLBACK_METHOD = "batch-means"
FALLBACK_CODE = "batch-means-fallback"
#: Methods that assume roughly normal raw trials (batch means average them first).
_NORMAL_THEORY = ("t",)
_LOG_NORMAL_THEORY = ("log-t", "cox")
#: Fewest trials at which a resampling interval is recommended: below about 20 the bootstrap
#: covers worse than t (BCa 69.9 / 81.5 / 90.5% at n = 3 / 5 / 10 against t's 97.4 / 94.0 /
#: 94.9% on normal data, an outside study of the notes), so no note recommends it there.
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


def skew_shift(skewness: float, n: int, confidence: float = 0.95) -> float:
    """How far a population skewness G1 moves the error rate of a one-sided t bound at n.

    The first term of the Edgeworth expansion of the studentised mean,
    P(T <= x) = Phi(x) + n^(-1/2) (G1/6)(2x^2 + 1) phi(x) + O(1/n) (Hall 1992, *The Bootstrap
    and Edgeworth Expansion*, section 2.6; from memory), at x = z(confidence). For a 95% bound
    that is 0.110 |G1| / sqrt(n): 10 points for G1 = 6.2 at n = 30 (log-normal, sigma 1).
    """
    z = NormalDist().inv_cdf(confidence)
    density = math.exp(-z * z / 2.0) / math.sqrt(2.0 * math.pi)
    return abs(skewness) * (2.0 * z * z + 1.0) * density / (6.0 * math.sqrt(n))


def ar1_coverage(phi: float, confidence: float = 0.95) -> float:
    """Large-n coverage of the t interval on an AR(1) series with lag-1 correlation phi.

    The variance of the mean is (1 + phi)/(1 - phi) times what independent trials give
    (Bayley & Hammersley 1946), so the interval's half-width covers z / sqrt of that.
    """
    if phi >= 1.0:
        return 0.0
    z = NormalDist().inv_cdf(0.5 + confidence / 2.0)
    inflation = math.sqrt((1.0 + phi) / (1.0 - phi))
    return 2.0 * NormalDist().cdf(z / inflation) - 1.0


def assumption_notes(
    diagnostics: Diagnostics,
    *,
    min_n: int = 10,
    normality_alpha: float = 0.05,
    method: str = "t",
    alpha: float = AUTOCORRELATION_ALPHA,
    drift_alpha: float = DRIFT_ALPHA,
    skip: Collection[str] = (),
    unit: str | None = None,
) -> list[dict[str, str]]:
    """Notes on the assumptions behind the interval, each ``{"code": ..., "text": ...}``.

    A note that recommends another interval method carries its name under ``"recommend"``.
    Notes judge risk, not significance: a normality rejection is a note only when the skewness
    would move a 95% bound's error rate by more than ``MAX_SKEW_SHIFT`` at this n
    (:func:`skew_shift`; a harmless rejection is no note); positive lag-1 autocorrelation only
    when one-sided significant at ``alpha`` (Box & Jenkins 1976 limits) and the coverage loss it
    implies exceeds ``MAX_COVERAGE_LOSS``; two modes only when the dip test rejects unimodality
    or log x is clearly two groups; a drift when Mann-Kendall rejects at ``drift_alpha``;
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
    # A steady drift spreads the trials evenly, which can read as two groups: the drift note
    # says what is going on.
    if not drifting and _bimodal(d, normality_alpha):
        text = (f"trials look like two groups ({_two_modes_evidence(d)}): the mean mixes two "
                "regimes in this run's proportions, and the interval holds only while that "
                "proportion is steady")
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
    """A real departure (the test rejects) whose skewness would move a 95% bound's error rate
    by more than ``MAX_SKEW_SHIFT`` at this n."""
    if not d.normality.rejects(alpha) or math.isnan(d.skewness):
        return False
    return skew_shift(guarded_skewness(d, alpha), d.n) > MAX_SKEW_SHIFT


def skewness_se(n: int) -> float:
    """Standard error of G1 in normal samples of n: sqrt(6n(n-1) / ((n-2)(n+1)(n+3)))
    (Joanes & Gill 1998; the usual large-sample sqrt(6/n) made exact for normal samples)."""
    if n < 3:
        return math.inf
    return math.sqrt(6.0 * n * (n - 1) / ((n - 2) * (n + 1) * (n + 3)))


def guarded_skewness(d: Diagnostics, alpha: float) -> float:
    """The judged skewness less one standard error of G1: the risk a note claims is one the
    sample shows even at the low end of its skewness, so noise alone seldom makes a note."""
    return max(judged_skewness(d, alpha) - skewness_se(d.n), 0.0)


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
    if not skew_risk:
        # A rejection that cannot move the error rate by MAX_SKEW_SHIFT is no note: the test's
        # figures stay in the diagnostics.
        return []
    judged = judged_skewness(d, alpha)
    needed = trials_for_skewness(judged)
    test = f"{normality.method} p = {normality.pvalue:.3g}"
    shown = f"G1 = {d.skewness:.2f}"
    if judged > abs(d.skewness):
        shown += f", {judged:.2f} for the log-normal fit"
    shift = skew_shift(guarded_skewness(d, alpha), d.n)
    recommend: str | None
    if _log_normal_fits(d, alpha):
        recommend = "cox"
        why = ("the logarithms of the trials look normal, so method='cox' bounds the mean under "
               "a log-normal model (Zhou & Gao 1997)")
    else:
        recommend, why = _shape_free(d.n, "bounds the mean without assuming a shape")
    note = {
        "code": "not-normal",
        "text": f"normality matters here: skewness {shown} ({test}) can move a 95% bound's "
        f"false-PASS rate by {100 * shift:.0f} points or more at {d.n} trials (Edgeworth, Hall "
        f"1992; Cochran's rule asks n > 25 G1^2 = {needed:.0f}); {why}",
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
    """Evidence of two modes: the dip test rejects unimodality on x or log x, or log x is
    clearly two groups by Sarle's coefficient; never on a skew alone."""
    if d.n < 20:
        return False
    # Two groups far enough apart to matter also make the normality test reject; asking for
    # both keeps one-mode samples whose dip reaches the level by chance quiet.
    return d.normality.rejects(alpha) and (_dip_rejects(d) or _log_two_groups(d))


def _dip_rejects(d: Diagnostics) -> bool:
    pvalues = [p for p in (d.dip_pvalue, d.log_dip_pvalue) if not math.isnan(p)]
    return bool(pvalues) and min(pvalues) < DIP_ALPHA


def _log_two_groups(d: Diagnostics) -> bool:
    if math.isnan(d.log_bimodality) or math.isnan(d.bimodality):
        return False
    return d.bimodality > BIMODAL_THRESHOLD and d.log_bimodality > LOG_BIMODAL_LIMIT


def _two_modes_evidence(d: Diagnostics) -> str:
    if _dip_rejects(d):
        scale = "log x" if math.isnan(d.dip_pvalue) or d.log_dip_pvalue < d.dip_pvalue else "x"
        pvalue = min(p for p in (d.dip_pvalue, d.log_dip_pvalue) if not math.isnan(p))
        return f"Hartigan's dip test rejects one mode on {scale}, p = {pvalue:.3g}"
    return (f"bimodality coefficient of log x {d.log_bimodality:.2f} > "
            f"{LOG_BIMODAL_LIMIT:g}")


def _independence_notes(d: Diagnostics, alpha: float, method: str) -> list[dict[str, str]]:
    if math.isnan(d.lag1) or d.n < 4 or method == "batch-means":
        return []
    # One-sided: only positive autocorrelation narrows the interval too much (Box & Jenkins 1976,
    # white-noise limits -1/n +/- z / sqrt(n)).
    limit = -1.0 / d.n + NormalDist().inv_cdf(1.0 - alpha) / math.sqrt(d.n)
    if d.lag1 <= limit:
        return []
    # r(1) is biased low by about (1 + 4 phi)/n (Kendall 1954; from memory): the risk is
    # judged on the corrected value.
    phi = min(d.lag1 + (1.0 + 4.0 * d.lag1) / d.n, 0.999)
    coverage = ar1_coverage(phi)
    if 0.95 - coverage <= MAX_COVERAGE_LOSS:
        return []
    inflation = math.sqrt((1.0 + phi) / (1.0 - phi))
    return [{
        "code": "autocorrelated",
        "text": f"trials autocorrelated: lag-1 r = {d.lag1:.3f}, effective n about "
        f"{d.effective_n:.0f} of {d.n}; if they wander at random around a steady level, the "
        f"standard error is about {inflation:.1f}x what t assumes and a 95% interval covers "
        f"about {100 * coverage:.0f}%, so it may be too narrow (a cycle that completes within "
        "the run would make it too wide instead: the trials cannot tell which); "
        "method='batch-means' allows for a random wander",
        "recommend": "batch-means",
    }]


#: Code of the note that says a timing check took the bootstrap-t interval by default.
TIMING_METHOD_CODE = "timing-method"


def skewed_timing_note(n: int) -> dict[str, str]:
    """The note of timings whose method nobody set that take the bootstrap-t interval."""
    return {
        "code": TIMING_METHOD_CODE,
        "text": f"interval by {SHAPE_FREE_METHOD}, the default for {n} timings: timings are "
        "skewed to the right, where the t bound passes a mean on the budget more often than "
        "it states; the studentised bootstrap allows for the skew (set method='t' to keep the "
        "t interval)",
    }


def batch_means_fallback(lag1: float, n: int) -> dict[str, str] | None:
    """The note of timings that fall back to batch means, or None when lag-1 r is not in
    doubt (see ``FALLBACK_DOUBT_Z``); the caller decides whether the fallback applies (timings
    whose method was not set)."""
    if n < FALLBACK_MIN_N or not math.isfinite(lag1):
        return None
    limit = -1.0 / n + FALLBACK_DOUBT_Z / math.sqrt(n)
    if lag1 <= limit:
        return None
    return {
        "code": FALLBACK_CODE,
        "text": f"interval by batch means, not t: lag-1 r = {lag1:.3f} is above {limit:.3f}, "
        "which independent trials pass in one run in ten, so these timings may be "
        "autocorrelated (t would then be too narrow); batch means allow for it at the cost of "
        "a wider interval; set method='t' to keep the t interval",
    }


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
