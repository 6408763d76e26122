"""Tests for rules.py: guarded and simple acceptance, conformance probability."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from meanband import BandViolation, TrialError, Verdict, assert_mean_within, decide, make_band
from meanband.stats.methods import METHODS
from meanband.stats.rules import apply_rule, check_rule, conformance_probability
from meanband.stats.uncertainty import uncertainty_budget


def _phi(z: float) -> float:
    """Standard normal distribution function, written out with math.erf (no scipy)."""
    return 0.5 * (1.0 + math.erf(z / math.sqrt(2.0)))


@pytest.mark.parametrize(
    ("y", "u", "low", "high"),
    [(10.0, 0.1, 9.8, 10.2), (10.15, 0.1, 9.8, 10.2), (9.7, 0.05, 9.8, 10.2),
     (0.0, 1.0, -0.5, 3.0)],
)
def test_gaussian_conformance_probability_matches_jcgm_106(y, u, low, high) -> None:
    # JCGM 106:2012, clause 7 (Gaussian PDF, two tolerance limits; sub-clause from memory):
    # p_c = Phi((T_U - y)/u) - Phi((T_L - y)/u).
    expected = _phi((high - y) / u) - _phi((low - y) / u)
    assert conformance_probability(y, u, math.inf, low, high) == pytest.approx(expected, abs=1e-12)


def test_gaussian_conformance_probability_with_one_limit() -> None:
    # JCGM 106:2012, clause 7, single upper limit: p_c = Phi((T_U - y)/u); single lower
    # limit: p_c = Phi((y - T_L)/u) (sub-clauses from memory).
    assert conformance_probability(4.0, 0.5, math.inf, -math.inf, 4.6) == pytest.approx(_phi(1.2))
    assert conformance_probability(4.0, 0.5, math.inf, 3.7, math.inf) == pytest.approx(_phi(0.6))


def test_conformance_probability_landmarks() -> None:
    # A band of +/- 2u around the estimate holds 95.45 % of a normal (JCGM 100:2008, Table G.1,
    # from memory); one z_0.95 = 1.6449 below an upper limit leaves 95 % (common practice).
    assert conformance_probability(0.0, 1.0, math.inf, -2.0, 2.0) == pytest.approx(0.9545, abs=1e-4)
    assert conformance_probability(0.0, 1.0, math.inf, -math.inf, 1.6449) == pytest.approx(
        0.95, abs=1e-4
    )
    # Estimate exactly on a single limit: p_c = 1/2 (symmetry of the t distribution).
    assert conformance_probability(3.0, 0.2, 7, -math.inf, 3.0) == pytest.approx(0.5)


@pytest.mark.parametrize("df", [1.5, 4, 19, 200])
def test_conformance_probability_with_t_matches_scipy(df) -> None:
    from scipy.stats import t as student_t

    y, u, low, high = 2.0, 0.3, 1.5, 2.9
    # Reference library: scipy.stats.t.cdf, the scaled-and-shifted t distribution of the
    # true value given the estimate (JCGM 100:2008, G.3).
    expected = student_t.cdf((high - y) / u, df) - student_t.cdf((low - y) / u, df)
    assert conformance_probability(y, u, df, low, high) == pytest.approx(expected, rel=1e-12)


def test_conformance_probability_keeps_tiny_risks() -> None:
    # 1 - p_c far below double precision's 1e-16 spacing near 1 must still be resolved.
    outcome = apply_rule(
        "guarded", mean=0.0, low=-1.0, high=1.0, band_low=-20.0, band_high=20.0,
        standard_uncertainty=1.0, df=math.inf,
    )
    assert outcome.false_accept_probability is not None
    # Phi(-20) * 2 is about 5.5e-89 (scipy.stats.norm.sf; common practice).
    assert 0 < outcome.false_accept_probability < 1e-80


def test_conformance_probability_with_no_uncertainty_is_zero_or_one() -> None:
    assert conformance_probability(1.0, 0.0, 5, 0.0, 2.0) == 1.0
    assert conformance_probability(2.5, 0.0, 5, 0.0, 2.0) == 0.0


@pytest.mark.parametrize(
    ("args", "match"),
    [((0.0, 1.0, 5, 2.0, 1.0), "low edge"), ((0.0, -1.0, 5, 0, 1), "standard uncertainty"),
     ((0.0, 1.0, 0, 0, 1), "degrees of freedom"), ((0.0, math.nan, 5, 0, 1), "standard")],
)
def test_conformance_probability_refuses_bad_input(args, match) -> None:
    with pytest.raises(TrialError, match=match):
        conformance_probability(*args)


def test_unknown_rule_is_refused_with_the_choices() -> None:
    with pytest.raises(TrialError, match=r"'guarded'.*'simple'"):
        check_rule("relaxed")
    with pytest.raises(TrialError, match="unknown decision rule"):
        decide([1.0, 2.0, 3.0], make_band(0, 4), rule="lenient")


@pytest.mark.parametrize(
    ("interval", "band", "verdict"),
    [
        ((9.9, 10.1), (9.8, 10.2), "PASS"),
        ((9.8, 10.0), (9.8, 10.2), "PASS"),  # touching an edge is inside (closed band)
        ((9.7, 9.9), (9.8, 10.2), "UNDECIDED"),
        ((9.5, 10.5), (9.8, 10.2), "UNDECIDED"),
        ((10.3, 10.5), (9.8, 10.2), "FAIL"),
        ((9.5, 9.7), (9.8, 10.2), "FAIL"),
        ((1.0, 2.9), (-math.inf, 3.0), "PASS"),  # budget: [counter low, upper bound]
        ((2.5, 3.1), (-math.inf, 3.0), "UNDECIDED"),
        ((3.1, 3.4), (-math.inf, 3.0), "FAIL"),
        ((5.1, 6.0), (5.0, math.inf), "PASS"),
        ((4.0, 4.9), (5.0, math.inf), "FAIL"),
    ],
)
def test_guarded_acceptance_verdicts(interval, band, verdict) -> None:
    # ILAC-G8:2019, 4.2.2-4.2.3 (from memory); JCGM 106:2012, clause 8 with w = U: accept only
    # when the interval lies in the band, reject when it lies wholly outside.
    low, high = interval
    outcome = apply_rule(
        "guarded", mean=(low + high) / 2, low=low, high=high, band_low=band[0], band_high=band[1]
    )
    assert outcome.verdict == verdict
    assert outcome.conformance_probability is None  # no u given: no probability


@pytest.mark.parametrize(
    ("mean", "verdict"), [(10.0, "PASS"), (10.2, "PASS"), (10.21, "FAIL"), (9.79, "FAIL")]
)
def test_simple_acceptance_verdicts(mean, verdict) -> None:
    # ILAC-G8:2019, 4.2.1 (from memory): accept when the measured value lies within the
    # tolerance, reject otherwise; no guard band, no third state.
    outcome = apply_rule(
        "simple", mean=mean, low=mean - 0.5, high=mean + 0.5, band_low=9.8, band_high=10.2,
        standard_uncertainty=0.1, df=20,
    )
    assert outcome.verdict == verdict
    assert outcome.guard_band == 0.0
    assert (outcome.acceptance_low, outcome.acceptance_high) == (9.8, 10.2)


def test_simple_acceptance_on_an_edge_risks_half() -> None:
    # ILAC-G8:2019, 4.2.1 (from memory): under simple acceptance the risk of false
    # acceptance can reach 50 % when the measured value sits on the limit.
    outcome = apply_rule(
        "simple", mean=3.0, low=2.8, high=3.2, band_low=-math.inf, band_high=3.0,
        standard_uncertainty=0.1, df=12,
    )
    assert outcome.verdict == "PASS"
    assert outcome.false_accept_probability == pytest.approx(0.5)


@settings(max_examples=300, deadline=None)
@given(
    mean=st.floats(-3, 3),
    u=st.floats(0.01, 2.0),
    df=st.one_of(st.floats(1.0, 500.0), st.just(math.inf)),
    confidence=st.sampled_from([0.8, 0.9, 0.95, 0.99]),
    side=st.sampled_from(["two-sided", "upper", "lower"]),
    width=st.floats(0.1, 10.0),
)
def test_a_guarded_pass_bounds_the_false_acceptance_probability(
    mean, u, df, confidence, side, width
) -> None:
    # DESIGN.md semantics, JCGM 106:2012 clause 8 (w = U): after a guarded PASS the probability
    # of false acceptance is at most 1 - C for a budget and at most (1 - C)/2 at each edge.
    from scipy.stats import norm
    from scipy.stats import t as student_t

    dist = norm if math.isinf(df) else student_t(df)
    q = (1 + confidence) / 2 if side == "two-sided" else confidence
    expanded = float(dist.ppf(q)) * u
    band_low = -math.inf if side == "upper" else -width
    band_high = math.inf if side == "lower" else width
    outcome = apply_rule(
        "guarded", mean=mean, low=mean - expanded, high=mean + expanded, band_low=band_low,
        band_high=band_high, standard_uncertainty=u, df=df,
    )
    if outcome.verdict != "PASS":
        return
    per_edge = (1 - confidence) / 2 if side == "two-sided" else 1 - confidence
    below = float(dist.cdf((band_low - mean) / u))
    above = float(dist.sf((band_high - mean) / u))
    assert below <= per_edge * (1 + 1e-9) and above <= per_edge * (1 + 1e-9)
    assert outcome.false_accept_probability is not None
    assert outcome.false_accept_probability <= (1 - confidence) * (1 + 1e-9)


def test_a_guarded_pass_on_the_edge_uses_up_the_allowed_risk() -> None:
    # The bound of the previous test is reached: an interval ending exactly on the band's upper
    # edge leaves (1 - C)/2 beyond it (t quantile definition, common practice).
    budget = uncertainty_budget([9.8, 9.9, 10.0, 10.1, 10.2], 0.95, "two-sided", (0.05, 8))
    edge = 10.0 + budget.expanded
    outcome = apply_rule(
        "guarded", mean=10.0, low=10.0 - budget.expanded, high=edge, band_low=-50.0,
        band_high=edge, standard_uncertainty=budget.combined, df=budget.effective_df,
    )
    assert outcome.verdict == "PASS"
    assert outcome.false_accept_probability == pytest.approx(0.025, rel=1e-9)


def test_acceptance_zone_is_the_band_shrunk_by_the_guard_band() -> None:
    # JCGM 106:2012, clause 8 (from memory): acceptance interval A = [T_L + w, T_U - w], w = U.
    x = np.random.default_rng(1).normal(50.0, 0.4, 25)
    band = make_band(center=50.0, tolerance=(0.5, 0.7), unit="kPa")
    decision = decide(x, band, instrument_uncertainty=0.05)
    budget, rule = decision.uncertainty, decision.rule
    assert budget is not None and rule is not None
    assert rule.guard_band == pytest.approx(budget.expanded, rel=1e-12)
    assert rule.acceptance_low == pytest.approx(49.5 + budget.expanded)
    assert rule.acceptance_high == pytest.approx(50.7 - budget.expanded)
    inside = rule.acceptance_low <= budget.mean <= rule.acceptance_high
    assert (decision.verdict is Verdict.PASS) == inside


def test_decide_defaults_to_guarded_and_reports_the_rule() -> None:
    x = np.random.default_rng(6).normal(10.0, 0.1, 30)
    decision = decide(x, make_band(9.9, 10.1))
    assert decision.rule is not None and decision.rule.rule == "guarded"
    assert decision.interval == decision.uncertainty.interval()  # type: ignore[union-attr]
    probability = decision.rule.conformance_probability
    # Same formula, computed here with scipy.stats.t (reference library).
    from scipy.stats import t as student_t

    iv = decision.interval
    expected = student_t.cdf((10.1 - iv.mean) / iv.sem, iv.df) - student_t.cdf(
        (9.9 - iv.mean) / iv.sem, iv.df
    )
    assert probability == pytest.approx(expected, rel=1e-10)


def test_simple_rule_decides_what_guarded_leaves_open() -> None:
    rng = np.random.default_rng(9)
    x = rng.normal(2.99, 0.05, 12)  # mean close under a 3.0 budget
    band = make_band(high=3.0, unit="V")
    guarded = decide(x, band)
    simple = decide(x, band, rule="simple")
    assert guarded.verdict is Verdict.UNDECIDED
    assert simple.verdict is Verdict.PASS
    assert simple.rule is not None and simple.rule.rule == "simple"
    risk = simple.rule.false_accept_probability
    assert risk is not None and 0.05 < risk < 0.5
    assert simple.rule.to_dict()["false_accept_probability"] == pytest.approx(risk)


def test_simple_rule_failure_message_says_so() -> None:
    x = np.random.default_rng(9).normal(3.05, 0.05, 12)
    with pytest.raises(BandViolation) as info:
        assert_mean_within(x, high=3.0, unit="V", rule="simple")
    text = str(info.value)
    assert "simple acceptance" in text
    assert "probability of false rejection" in text
    assert info.value.decision.verdict is Verdict.FAIL


def test_guarded_failure_message_names_rule_and_probability() -> None:
    x = np.random.default_rng(9).normal(2.99, 0.05, 12)
    with pytest.raises(BandViolation) as info:
        assert_mean_within(x, high=3.0, unit="V")
    text = str(info.value)
    assert "guarded acceptance (guard band w = U = " in text and " V)" in text
    assert "conformance probability" in text


def test_instrument_uncertainty_needs_the_t_method(monkeypatch) -> None:
    monkeypatch.setitem(METHODS, "other", METHODS["t"])
    x = [1.0, 1.1, 0.9, 1.05]
    decision = decide(x, make_band(0, 2), method="other")
    assert decision.uncertainty is None
    assert decision.rule is not None and decision.rule.conformance_probability is None
    with pytest.raises(TrialError, match="method='t'"):
        decide(x, make_band(0, 2), method="other", instrument_uncertainty=0.01)


def test_rule_rows_are_builtin_types() -> None:
    import json

    decision = decide([1.0, 1.1, 0.9, 1.05], make_band(high=2.0), instrument_uncertainty=0.02)
    assert decision.rule is not None
    row = decision.rule.to_dict()
    assert json.loads(json.dumps(row)) == row
    assert row["acceptance_low"] is None and row["rule"] == "guarded"
