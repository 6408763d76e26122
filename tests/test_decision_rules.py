"""Tests for decision_rules.py: rules as values, specific and global risks, the TUR."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from meanband import TrialError
from meanband.stats.decision_rules import (
    BINARY,
    CONDITIONAL_FAIL,
    CONDITIONAL_PASS,
    NON_BINARY,
    STATEMENTS,
    VERDICT_OF_STATEMENT,
    GuardedAcceptance,
    Measurement,
    ProcessPrior,
    SimpleAcceptance,
    SpecificRiskAcceptance,
    apply_decision_rule,
    as_decision_rule,
    global_risk_curve,
    global_risks,
    measurement_capability,
    process_capability,
    specific_risk_guard_band,
    uncertainty_ratio,
)
from meanband.stats.rules import apply_rule, conformance_probability
from meanband.stats.uncertainty import coverage_factor, uncertainty_budget

INF = math.inf


def _phi(z: float) -> float:
    """Standard normal distribution function, written out with math.erf (no scipy)."""
    return 0.5 * (1.0 + math.erf(z / math.sqrt(2.0)))


# --- worked examples ----------------------------------------------------------------------------


def test_guarded_w_equals_u_with_k2_keeps_the_risk_at_the_limit_below_2_5_percent() -> None:
    # ILAC-G8:2019, 4.2.2 (from memory): guard band w = U at k = 2 (95 %), normal distribution,
    # gives a probability of false accept below 2.5 %; on the acceptance limit it is
    # Phi(-2) = 0.02275 (JCGM 106:2012, 8.3.2 and 9.3, from memory).
    u = 0.05
    limit = 12.0
    at_acceptance_limit = Measurement(limit - 2 * u, u, INF, 2.0)
    outcome = GuardedAcceptance().apply(at_acceptance_limit, -INF, limit)
    assert outcome.verdict == "PASS" and outcome.statement == "pass"
    assert outcome.guard_band == pytest.approx(0.1)
    assert outcome.acceptance_high == pytest.approx(11.9)
    assert outcome.risk_kind == "false accept"
    assert outcome.specific_risk == pytest.approx(_phi(-2.0), rel=1e-10)
    assert outcome.specific_risk < 0.025


def test_simple_acceptance_on_the_limit_carries_half_the_risk() -> None:
    # ILAC-G8:2019, 4.2.1 (from memory): simple acceptance accepts up to the limit, where the
    # probability of false accept reaches 50 %; JCGM 106:2012, 8.2 ("shared risk", from memory).
    outcome = SimpleAcceptance().apply(Measurement(5.0, 0.2, 9, 2.26), -INF, 5.0)
    assert outcome.verdict == "PASS"
    assert outcome.guard_band == 0.0
    assert outcome.specific_risk == pytest.approx(0.5)


def test_a_95_percent_conformance_probability_needs_1_645_u_from_a_single_limit() -> None:
    # JCGM 106:2012, 7.3 with 8.3.2 (from memory): with a normal PDF and a single upper limit,
    # p_c >= 0.95 holds for y <= T_U - 1.645 u, so the guard band for specific risk 5 % is
    # w = 1.645 u (z_0.95 = 1.6449, NIST/SEMATECH e-Handbook 1.3.6.7.1 normal table).
    u = 0.3
    w = specific_risk_guard_band(0.05, u, INF, -INF, 20.0)
    assert w == pytest.approx(1.6449 * u, abs=1e-4 * u)
    rule = SpecificRiskAcceptance(0.05)
    on_limit = rule.apply(Measurement(20.0 - w, u), -INF, 20.0)
    assert on_limit.verdict == "PASS"
    assert on_limit.conformance_probability == pytest.approx(0.95, abs=1e-12)
    just_beyond = rule.apply(Measurement(20.0 - w + 1e-9, u), -INF, 20.0)
    assert just_beyond.verdict == "UNDECIDED" and just_beyond.zone == CONDITIONAL_PASS


def test_ilac_g8_non_binary_zones_along_an_upper_limit() -> None:
    # ILAC-G8:2019, 4.2.3 (from memory; the figure of the non-binary statement with guard band):
    # below T_U - w "pass", between T_U - w and T_U "conditional pass", between T_U and
    # T_U + w "conditional fail", above T_U + w "fail". Here T_U = 10, U = 2 x 0.1 = w.
    rule = GuardedAcceptance(statement=NON_BINARY)
    zones = [rule.apply(Measurement(y, 0.1), -INF, 10.0).statement for y in (9.7, 9.9, 10.1, 10.3)]
    assert zones == ["pass", "conditional pass", "conditional fail", "fail"]
    verdicts = [rule.apply(Measurement(y, 0.1), -INF, 10.0).verdict for y in (9.7, 9.9, 10.1, 10.3)]
    assert verdicts == ["PASS", "UNDECIDED", "UNDECIDED", "FAIL"]


def test_binary_statement_with_guard_band_says_fail_outside_the_acceptance_zone() -> None:
    # ILAC-G8:2019, 4.2.2 (from memory): a binary statement with guard band is "pass" inside the
    # acceptance zone and "fail" everywhere else. The verdict still tells the zones apart.
    rule = GuardedAcceptance(statement=BINARY)
    outcomes = [rule.apply(Measurement(y, 0.1), 2.0, 3.0) for y in (2.5, 2.9, 3.1, 3.4)]
    assert [o.statement for o in outcomes] == ["pass", "fail", "fail", "fail"]
    assert [o.zone for o in outcomes] == ["pass", CONDITIONAL_PASS, CONDITIONAL_FAIL, "fail"]
    assert [o.verdict for o in outcomes] == ["PASS", "UNDECIDED", "UNDECIDED", "FAIL"]


def test_four_outcomes_map_onto_three_verdicts() -> None:
    # The documented mapping (docs/decision-rules.md): both conditional outcomes are UNDECIDED.
    assert VERDICT_OF_STATEMENT == {
        "pass": "PASS", "conditional pass": "UNDECIDED", "conditional fail": "UNDECIDED", "fail": "FAIL",
    }
    assert set(STATEMENTS) == set(VERDICT_OF_STATEMENT)


def test_risk_on_the_far_side_is_the_false_reject_probability() -> None:
    # JCGM 106:2012, 9.3 (from memory): the specific producer's risk of a rejection is p_c.
    outcome = GuardedAcceptance().apply(Measurement(10.25, 0.1), 9.0, 10.0)
    assert outcome.verdict == "FAIL" and outcome.risk_kind == "false reject"
    assert outcome.specific_risk == pytest.approx(_phi(-2.5) - _phi(-12.5), rel=1e-9)


# --- limiting cases -----------------------------------------------------------------------------

_GRID = [
    (mean, u, k, df, band)
    for mean in (9.5, 9.75, 9.8, 9.875, 10.0, 10.125, 10.2, 10.25, 10.5, 11.0)
    for u in (0.0, 0.0625, 0.1, 0.25)
    for k in (1.0, 2.0, 2.5)
    for df in (4.0, INF)
    for band in ((9.75, 10.25), (9.8, 10.2), (-INF, 10.0), (10.0, INF), (9.9375, 10.0625))
]


@pytest.mark.parametrize("r", [1.0, 0.0])
def test_guarded_r1_and_r0_reproduce_the_existing_rules_exactly(r) -> None:
    # r = 1 is meanband's guarded rule (rules.apply_rule "guarded" with the interval y +/- U);
    # r = 0 is simple acceptance (rules.apply_rule "simple"; JCGM 106:2012, 8.2 and 8.3.2). Exact
    # equality on a grid that puts values exactly on acceptance and rejection limits (dyadic
    # numbers, so y - U lands on the limit without rounding).
    rule = GuardedAcceptance(r)
    for mean, u, k, df, (band_low, band_high) in _GRID:
        expanded = k * u
        new = rule.apply(Measurement(mean, u, df, k), band_low, band_high)
        old = apply_rule(
            "guarded" if r == 1.0 else "simple", mean=mean, low=mean - expanded, high=mean + expanded,
            band_low=band_low, band_high=band_high, standard_uncertainty=u, df=df,
        )
        case = (mean, u, k, df, band_low, band_high)
        assert new.verdict == old.verdict, case
        assert new.acceptance_low == old.acceptance_low and new.acceptance_high == old.acceptance_high, case
        assert new.conformance_probability == old.conformance_probability, case
        if old.verdict == "PASS":
            assert new.specific_risk == old.false_accept_probability, case
        if old.verdict == "FAIL":
            assert new.specific_risk == old.false_reject_probability, case


def test_r0_is_simple_acceptance() -> None:
    for mean, u, k, df, (band_low, band_high) in _GRID:
        measurement = Measurement(mean, u, df, k)
        assert (GuardedAcceptance(0.0).apply(measurement, band_low, band_high).verdict
                == SimpleAcceptance().apply(measurement, band_low, band_high).verdict)


@pytest.mark.parametrize("confidence", [0.9, 0.95, 0.99])
def test_target_one_minus_c_gives_the_one_sided_guarded_zone(confidence) -> None:
    # With normal statistics, 1 - p_c at T_U - w equals 1 - C exactly when w = z_C u = U with
    # the one-sided coverage factor (JCGM 106:2012, 8.3.2 and 9.3, from memory).
    u = 0.2
    k = coverage_factor(confidence, INF, "upper")
    w = specific_risk_guard_band(1 - confidence, u, INF, -INF, 7.0)
    assert w == pytest.approx(k * u, rel=1e-12)
    measurement = Measurement(6.0, u, INF, k)
    by_risk = SpecificRiskAcceptance(1 - confidence).apply(measurement, -INF, 7.0)
    by_u = GuardedAcceptance().apply(measurement, -INF, 7.0)
    assert by_risk.acceptance_high == pytest.approx(by_u.acceptance_high, rel=1e-12)
    w_low = specific_risk_guard_band(1 - confidence, u, INF, 3.0, INF)
    assert w_low == pytest.approx(k * u, rel=1e-12)


@pytest.mark.parametrize("df", [3.0, 12.5, 60.0])
def test_target_risk_with_t_statistics_uses_the_t_quantile(df) -> None:
    from scipy.stats import t as student_t

    # Reference library: scipy.stats.t.isf, the t distribution of the true mean given y
    # (JCGM 100:2008, G.3, as in rules.conformance_probability).
    w = specific_risk_guard_band(0.01, 0.4, df, -INF, 2.0)
    assert w == pytest.approx(float(student_t.isf(0.01, df)) * 0.4, rel=1e-12)


@pytest.mark.parametrize(
    ("target", "width", "df"), [(0.025, 6.0, 8.0), (0.01, 8.0, 8.0), (0.2, 3.0, 8.0), (1e-6, 12.0, INF)]
)
def test_two_sided_solved_guard_band_meets_the_target_at_the_limit(target, width, df) -> None:
    # At y = T_U - w the risk 1 - p_c (rules.conformance_probability) equals the target.
    u, low = 1.0, -width / 2
    w = specific_risk_guard_band(target, u, df, low, width / 2)
    p_c = conformance_probability(width / 2 - w, u, df, low, width / 2)
    assert 1 - p_c == pytest.approx(target, rel=1e-7)
    w_reject = specific_risk_guard_band(target, u, df, low, width / 2, reject=True)
    assert conformance_probability(width / 2 + w_reject, u, df, low, width / 2) == pytest.approx(
        target, rel=1e-7
    )


def test_a_tolerance_too_narrow_for_the_target_accepts_nothing() -> None:
    # At the centre of +/- 1u the risk is 2 Phi(-1) = 0.317 > 0.05: no value may be accepted.
    rule = SpecificRiskAcceptance(0.05)
    assert specific_risk_guard_band(0.05, 1.0, INF, -1.0, 1.0) == INF
    outcome = rule.apply(Measurement(0.0, 1.0), -1.0, 1.0)
    assert outcome.verdict == "UNDECIDED" and outcome.acceptance_zone_empty
    assert outcome.to_dict()["guard_band"] is None


def test_no_uncertainty_needs_no_guard_band() -> None:
    assert specific_risk_guard_band(0.01, 0.0, INF, 0.0, 1.0) == 0.0


# --- properties ---------------------------------------------------------------------------------


@settings(max_examples=150, deadline=None)
@given(
    y=st.floats(-3, 3), u=st.floats(0.0, 2.0), k=st.floats(0.5, 3.0),
    r_small=st.floats(0, 3), extra=st.floats(0, 3),
    band=st.sampled_from([(-1.0, 1.0), (-INF, 1.0), (-1.0, INF), (-0.2, 0.3)]),
)
def test_a_larger_guard_band_never_turns_a_fail_into_a_pass(y, u, k, r_small, extra, band) -> None:
    measurement = Measurement(y, u, INF, k)
    smaller = GuardedAcceptance(r_small).apply(measurement, *band).verdict
    larger = GuardedAcceptance(r_small + extra).apply(measurement, *band).verdict
    assert not (smaller == "FAIL" and larger == "PASS")
    assert larger != "PASS" or smaller == "PASS"


@settings(max_examples=50, deadline=None)
@given(
    y=st.floats(-3, 3), u=st.floats(0.01, 2.0), df=st.sampled_from([2.0, 10.0, INF]),
    target=st.floats(1e-6, 0.5), shrink=st.floats(0.05, 1.0),
    band=st.sampled_from([(-1.0, 1.0), (-INF, 1.0), (-1.0, INF), (-3.0, 4.0)]),
)
def test_a_smaller_target_risk_never_passes_what_a_larger_one_fails(y, u, df, target, shrink, band) -> None:
    measurement = Measurement(y, u, df)
    loose = SpecificRiskAcceptance(target).apply(measurement, *band)
    strict = SpecificRiskAcceptance(target * shrink).apply(measurement, *band)
    assert strict.guard_band >= loose.guard_band * (1 - 1e-12)
    assert strict.verdict != "PASS" or loose.verdict == "PASS"
    if loose.verdict == "PASS":  # the risk of a PASS is within the target (JCGM 106:2012, 9.3)
        assert loose.specific_risk <= target * (1 + 1e-7)


@settings(max_examples=20, deadline=None)
@given(
    mean=st.floats(-1.5, 1.5), sd=st.floats(0.05, 2.0), u=st.floats(0.0, 1.0),
    band=st.sampled_from([(-1.0, 1.0), (-INF, 1.0), (-1.0, INF)]),
)
def test_global_risks_lie_in_0_1_and_move_the_right_way_as_w_grows(mean, sd, u, band) -> None:
    curve = global_risk_curve(ProcessPrior(mean, sd), u, *band, np.linspace(0.0, 1.2, 7))
    for risk in (curve.consumer_risk, curve.producer_risk, curve.acceptance_probability):
        assert np.all((risk >= 0) & (risk <= 1))
    # JCGM 106:2012, 9.5 (from memory): a wider guard band lowers R_C and raises R_P.
    assert np.all(np.diff(curve.consumer_risk) <= 1e-12)
    assert np.all(np.diff(curve.producer_risk) >= -1e-12)
    # P(accepted) = P(conforming) - R_P + R_C (the four outcomes add up to one).
    assert np.allclose(
        curve.acceptance_probability,
        curve.conforming_probability - curve.producer_risk + curve.consumer_risk, atol=1e-9,
    )


# --- global risks against independent integrations -----------------------------------------------


def _bvn_rectangle(mean: float, sd: float, u: float, eta: tuple[float, float],
                   y: tuple[float, float]) -> float:
    """P(eta in [a, b], y in [c, d]) for eta ~ N(mean, sd^2), y = eta + N(0, u^2)."""
    from scipy.stats import multivariate_normal

    cov = [[sd * sd, sd * sd], [sd * sd, sd * sd + u * u]]
    lower = [max(eta[0], mean - 40 * sd), max(y[0], mean - 40 * math.hypot(sd, u))]
    upper = [min(eta[1], mean + 40 * sd), min(y[1], mean + 40 * math.hypot(sd, u))]
    if lower[0] >= upper[0] or lower[1] >= upper[1]:
        return 0.0
    return float(multivariate_normal.cdf(
        upper, mean=[mean, mean], cov=cov, lower_limit=lower, abseps=1e-9, releps=1e-9,
        maxpts=2_000_000, rng=np.random.default_rng(7)))


@pytest.mark.parametrize(
    ("mean", "sd", "u", "band", "w"),
    [(0.0, 1 / 3, 0.25, (-1.0, 1.0), 0.5), (0.3, 0.4, 0.1, (-1.0, 1.0), 0.2),
     (2.0, 0.5, 0.2, (-INF, 3.0), 0.33), (1.0, 0.8, 0.3, (0.5, INF), 0.0),
     # An instrument far finer than the process: the accepted bad units sit within a few u of
     # a limit, a feature the quadrature must not step over.
     (0.0, 1.0, 1e-3, (-1.0, 1.0), 2e-3)],
)
def test_global_risks_match_the_bivariate_normal_cdf(mean, sd, u, band, w) -> None:
    # Reference library: scipy.stats.multivariate_normal.cdf of (eta, y), cov(eta, y) = u_p^2:
    # R_C = P(eta outside C, y in A), R_P = P(eta in C) - P(eta in C, y in A) (JCGM 106:2012, 9.4).
    low, high = band
    a_low, a_high = (low + w if math.isfinite(low) else -INF), (high - w if math.isfinite(high) else INF)
    risks = global_risks(ProcessPrior(mean, sd), u, low, high, w)
    inside = _bvn_rectangle(mean, sd, u, (low, high), (a_low, a_high))
    consumer = (_bvn_rectangle(mean, sd, u, (-INF, low), (a_low, a_high))
                + _bvn_rectangle(mean, sd, u, (high, INF), (a_low, a_high)))
    assert risks.consumer_risk == pytest.approx(consumer, abs=1e-7)
    assert risks.producer_risk == pytest.approx(risks.conforming_probability - inside, abs=1e-7)


def test_global_risks_match_a_monte_carlo_estimate() -> None:
    # Independent check: simulate units from the prior and measure them (fixed seed, 400 000
    # units); agreement within 4 standard errors of the simulated proportions.
    rng = np.random.default_rng(20261202)
    mean, sd, u, low, high, w = 0.1, 0.35, 0.2, -1.0, 1.0, 0.3
    eta = rng.normal(mean, sd, 400_000)
    y = eta + rng.normal(0.0, u, eta.size)
    conforming = (eta >= low) & (eta <= high)
    accepted = (y >= low + w) & (y <= high - w)
    risks = global_risks(ProcessPrior(mean, sd), u, low, high, w)
    for estimate, computed in (
        (np.mean(~conforming & accepted), risks.consumer_risk),
        (np.mean(conforming & ~accepted), risks.producer_risk),
    ):
        se = math.sqrt(max(estimate * (1 - estimate), 1e-6) / eta.size)
        assert abs(computed - estimate) < 4 * se


def test_cp_1_cm_2_guarded_rejects_about_23_percent_of_conforming_units() -> None:
    # The review's 23 % figure, with JCGM 106:2012, 9.5 (from memory): Cp = (T_U - T_L)/(6 u_p) = 1,
    # Cm = (T_U - T_L)/(4 u_m) = 2, process centred, guarded acceptance w = U = 2 u_m.
    low, high = -1.0, 1.0
    sd = (high - low) / 6.0
    u = (high - low) / (4.0 * 2.0)
    assert process_capability(low, high, sd) == pytest.approx(1.0)
    assert measurement_capability(low, high, u) == pytest.approx(2.0)
    risks = global_risks(ProcessPrior(0.0, sd), u, low, high, GuardedAcceptance(), coverage_factor=2.0)
    assert risks.guard_band == pytest.approx(0.5)
    assert risks.conforming_rejected_share == pytest.approx(0.23, abs=0.005)
    # Checked against scipy.stats.multivariate_normal.cdf (as above).
    inside = _bvn_rectangle(0.0, sd, u, (low, high), (-0.5, 0.5))
    assert risks.producer_risk == pytest.approx(risks.conforming_probability - inside, abs=1e-7)
    # The other reading, Cm = (T_U - T_L)/(4U), gives about 3 %: not the review's 23 %.
    other = global_risks(ProcessPrior(0.0, sd), u / 2, low, high, 2 * (u / 2))
    assert other.conforming_rejected_share == pytest.approx(0.033, abs=0.002)


def test_a_perfect_measurement_has_no_consumer_risk() -> None:
    from scipy.stats import norm

    # u = 0: the accepted units are exactly those with eta in A; R_P is the prior mass of C \ A
    # (scipy.stats.norm.cdf).
    risks = global_risks(ProcessPrior(0.0, 1.0), 0.0, -2.0, 2.0, 0.5)
    assert risks.consumer_risk == 0.0
    assert risks.producer_risk == pytest.approx(2 * (norm.cdf(2.0) - norm.cdf(1.5)), rel=1e-12)


# --- test uncertainty ratio ---------------------------------------------------------------------


def test_tur_of_a_band_is_the_tolerance_over_2u() -> None:
    ratio = uncertainty_ratio(9.6, 10.4, 0.1)
    assert ratio.ratio == pytest.approx(4.0)
    assert not ratio.below_threshold and ratio.note() is None
    low_ratio = uncertainty_ratio(9.6, 10.4, 0.2)
    assert low_ratio.ratio == pytest.approx(2.0) and low_ratio.below_threshold
    assert "below 4:1 (common practice)" in low_ratio.note()
    # With U = 2u the TUR equals JCGM 106's measurement capability index C_m (9.5, from memory).
    assert uncertainty_ratio(-1, 1, 0.5).ratio == pytest.approx(measurement_capability(-1, 1, 0.25))


def test_tur_of_a_single_limit_needs_a_nominal_value() -> None:
    assert uncertainty_ratio(-INF, 3.0, 0.1).ratio is None
    assert not uncertainty_ratio(-INF, 3.0, 0.1).below_threshold
    assert uncertainty_ratio(-INF, 3.0, 0.1, nominal=2.0).ratio == pytest.approx(10.0)
    assert uncertainty_ratio(1.0, INF, 0.1, nominal=1.2, threshold=3.0).below_threshold
    assert uncertainty_ratio(1.0, 2.0, 0.0).ratio == INF


# --- specs and bad input ------------------------------------------------------------------------


def test_rule_specs_parse_to_rule_values() -> None:
    assert as_decision_rule(None) == GuardedAcceptance(1.0)
    assert as_decision_rule("guarded") == GuardedAcceptance()
    assert as_decision_rule(" Guarded:0.5 ") == GuardedAcceptance(0.5)
    assert as_decision_rule("simple") == SimpleAcceptance()
    assert as_decision_rule("specific-risk:0.01") == SpecificRiskAcceptance(0.01)
    rule = SpecificRiskAcceptance(0.02)
    assert as_decision_rule(rule) is rule
    assert as_decision_rule("guarded", statement=BINARY).statement == BINARY
    assert "w = 0.5 U" in GuardedAcceptance(0.5).describe()
    outcome = apply_decision_rule("simple", Measurement(1.0, 0.1), 0.0, 2.0)
    assert outcome.to_dict()["rule"] == "simple" and outcome.to_dict()["acceptance_low"] == 0.0


def test_budget_feeds_a_measurement() -> None:
    budget = uncertainty_budget([9.8, 9.9, 10.0, 10.1, 10.2], 0.95, "two-sided", (0.05, 8))
    measurement = Measurement.from_budget(budget)
    assert measurement.expanded == pytest.approx(budget.expanded)
    interval = budget.interval()
    old = apply_rule("guarded", mean=budget.mean, low=interval.low, high=interval.high,
                     band_low=9.5, band_high=10.3)
    assert GuardedAcceptance().apply(measurement, 9.5, 10.3).verdict == old.verdict


@pytest.mark.parametrize(
    ("spec", "match"),
    [("lenient", "unknown decision rule"), ("guarded:wide", "not a number"),
     ("simple:1", "unknown decision rule"), ("specific-risk:0", r"\(0, 0.5\]"),
     ("specific-risk:0.7", "outside the tolerance"), ("guarded:-1", ">= 0"), (3, "a decision rule is"),
     ("guarded:nan", ">= 0")],
)
def test_bad_rule_specs_are_refused(spec, match) -> None:
    with pytest.raises(TrialError, match=match):
        as_decision_rule(spec)


@pytest.mark.parametrize(
    ("build", "match"),
    [(lambda: Measurement(math.nan, 1.0), "measured value"),
     (lambda: Measurement(1.0, -0.1), "standard uncertainty"),
     (lambda: Measurement(1.0, 0.1, 0.0), "degrees of freedom"),
     (lambda: Measurement(1.0, 0.1, INF, 0.0), "coverage factor"),
     (lambda: Measurement("x", 0.1), "must be a number"),
     (lambda: GuardedAcceptance(statement="maybe"), "statement mode"),
     (lambda: as_decision_rule("simple", statement="both"), "statement mode"),
     (lambda: GuardedAcceptance().apply(Measurement(1, 0.1), 2.0, 1.0), "lies above"),
     (lambda: GuardedAcceptance().apply(Measurement(1, 0.1), -INF, INF), "at least one finite"),
     (lambda: GuardedAcceptance().apply(Measurement(1, 0.1), math.nan, 1.0), "must be numbers"),
     (lambda: apply_decision_rule("guarded", (1.0, 0.1), 0.0, 2.0), "Measurement"),
     (lambda: ProcessPrior(0.0, 0.0), "process standard deviation"),
     (lambda: global_risks((0.0, 1.0), 0.1, 0.0, 1.0), "ProcessPrior"),
     (lambda: global_risk_curve(ProcessPrior(0, 1), 0.1, 0, 1, [-0.1]), "guard bands must be >= 0"),
     (lambda: global_risks(ProcessPrior(0, 1), -0.1, 0, 1), "standard uncertainty"),
     (lambda: process_capability(-INF, 1.0, 0.1), "two distinct finite limits"),
     (lambda: measurement_capability(0.0, 1.0, 0.0), "> 0"),
     (lambda: uncertainty_ratio(0.0, 1.0, 0.1, nominal=0.5), "only used for a single limit"),
     (lambda: uncertainty_ratio(-INF, 1.0, 0.1, nominal=2.0), "conforming side"),
     (lambda: uncertainty_ratio(0.0, 1.0, -0.1), "expanded uncertainty"),
     (lambda: specific_risk_guard_band(0.0, 1.0, INF, 0.0, 1.0), "target specific risk")],
)
def test_bad_input_gets_a_clear_error(build, match) -> None:
    with pytest.raises(TrialError, match=match):
        build()


def test_conditional_fail_zone_is_named() -> None:
    outcome = GuardedAcceptance().apply(Measurement(1.05, 0.05), 0.0, 1.0)
    assert outcome.zone == CONDITIONAL_FAIL and outcome.verdict == "UNDECIDED"
