"""Tests for uncertainty.py: Type A + Type B combination, Welch-Satterthwaite, coverage factors."""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from meanband import BandViolation, TrialError, assert_mean_within, mean_interval
from meanband.stats.uncertainty import (
    COMBINED_METHOD,
    InstrumentUncertainty,
    as_instrument_uncertainty,
    coverage_factor,
    trials_to_decide,
    uncertainty_budget,
    welch_satterthwaite,
)


def _coverage_of_k_sigma(k: float) -> float:
    """p = 2 Phi(k) - 1: the table's 68.27 / 95.45 / 99.73 % columns are k = 1, 2, 3 at nu = inf."""
    return math.erf(k / math.sqrt(2.0))


# JCGM 100:2008 (GUM), Annex G, Table G.2: t_p(nu) for coverage p. Values from memory (not
# copied from the publication); the table prints two decimals, three in the nu = 100 and
# nu = inf rows. Columns p = 68.27, 90, 95, 95.45, 99, 99.73 %.
P_COLUMNS = (
    _coverage_of_k_sigma(1.0), 0.90, 0.95,
    _coverage_of_k_sigma(2.0), 0.99, _coverage_of_k_sigma(3.0),
)
TABLE_G2 = {
    1: (1.84, 6.31, 12.71, 13.97, 63.66, 235.80),
    2: (1.32, 2.92, 4.30, 4.53, 9.92, 19.21),
    3: (1.20, 2.35, 3.18, 3.31, 5.84, 9.22),
    5: (1.11, 2.02, 2.57, 2.65, 4.03, 5.51),
    10: (1.05, 1.81, 2.23, 2.28, 3.17, 3.96),
    20: (1.03, 1.72, 2.09, 2.13, 2.85, 3.42),
    50: (1.01, 1.68, 2.01, 2.05, 2.68, 3.16),
    100: (1.005, 1.660, 1.984, 2.025, 2.626, 3.077),
    math.inf: (1.000, 1.645, 1.960, 2.000, 2.576, 3.000),
}
TABLE_CASES = [
    (nu, p, value)
    for nu, row in TABLE_G2.items()
    for p, value in zip(P_COLUMNS, row, strict=True)
]


@pytest.mark.parametrize(("nu", "p", "printed"), TABLE_CASES)
def test_coverage_factor_matches_gum_table_g2(nu: float, p: float, printed: float) -> None:
    # JCGM 100:2008, Table G.2 (values from memory): the printed value is k rounded to the
    # table's digits, so k must lie within half a unit in the last printed digit.
    decimals = 3 if nu in (100, math.inf) else 2
    k = coverage_factor(p, nu)
    assert abs(k - printed) <= 0.5 * 10.0**-decimals + 1e-12, (nu, p, k)


def test_welch_satterthwaite_matches_a_hand_computation() -> None:
    # JCGM 100:2008, G.4.1, equation (G.2b): nu_eff = u_c^4 / sum(u_i^4 / nu_i), by hand:
    # u = 0.3 (nu 4), 0.4 (nu 12): u_c^2 = 0.25, so nu_eff = 0.0625 / (0.0081/4 + 0.0256/12)
    # = 7500 / 499 exactly.
    expected = float(Fraction(7500, 499))
    assert welch_satterthwaite([0.3, 0.4], [4, 12]) == pytest.approx(expected, rel=1e-14)


def test_welch_satterthwaite_special_cases() -> None:
    # Consequences of equation (G.2b) itself (JCGM 100:2008, G.4.1).
    assert welch_satterthwaite([0.2], [7]) == 7.0
    assert welch_satterthwaite([0.2, 0.0], [7, 3]) == 7.0  # a zero component drops out
    assert welch_satterthwaite([0.2, 0.1], [math.inf, math.inf]) == math.inf
    # An infinite-df component adds to u_c but not to the denominator: nu_eff grows.
    assert welch_satterthwaite([0.2, 0.2], [5, math.inf]) == pytest.approx(20.0)


@settings(max_examples=200, deadline=None)
@given(
    st.lists(
        st.tuples(
            st.floats(1e-6, 1e3, allow_nan=False, allow_infinity=False),
            st.floats(1.0, 1e4, allow_nan=False, allow_infinity=False),
        ),
        min_size=2,
        max_size=6,
    )
)
def test_welch_satterthwaite_lies_between_smallest_and_summed_df(parts) -> None:
    # JCGM 100:2008, G.4.1, inequality (G.2c): nu_eff <= sum(nu_i); and nu_eff >= min(nu_i)
    # (Cauchy-Schwarz on the same formula, common practice).
    u = [p[0] for p in parts]
    nu = [p[1] for p in parts]
    value = welch_satterthwaite(u, nu)
    assert min(nu) * (1 - 1e-9) <= value <= sum(nu) * (1 + 1e-9)


@pytest.mark.parametrize(
    ("u", "nu"),
    [([0.1, -0.1], [3, 3]), ([0.1, math.nan], [3, 3]), ([0.1], [0]), ([0.1, 0.2], [3]),
     ([0.0, 0.0], [3, 3]), ([], [])],
)
def test_welch_satterthwaite_refuses_bad_components(u, nu) -> None:
    with pytest.raises(TrialError):
        welch_satterthwaite(u, nu)


@pytest.mark.parametrize("side", ["two-sided", "upper", "lower"])
@pytest.mark.parametrize("instrument", [None, 0, 0.0, (0.0, 5), InstrumentUncertainty(0.0)])
def test_no_instrument_uncertainty_gives_the_plain_t_interval_exactly(side, instrument) -> None:
    # Equality of the whole Interval (bounds, df, k, sem), not approximate closeness.
    x = np.random.default_rng(11).normal(85.0, 0.2, 17)
    budget = uncertainty_budget(x, 0.99, side, instrument)
    assert budget.interval() == mean_interval(x, 0.99, side)
    assert budget.effective_df == 16.0
    assert not budget.has_instrument


def test_plain_budget_agrees_with_scipy_t_interval() -> None:
    from scipy import stats

    x = np.random.default_rng(5).normal(12.0, 0.03, 9)
    budget = uncertainty_budget(x, 0.95)
    # Reference library: scipy.stats.t.interval with scale s/sqrt(n) and n - 1 df.
    low, high = stats.t.interval(0.95, 8, loc=np.mean(x), scale=stats.sem(x))
    assert budget.interval().low == pytest.approx(low, rel=1e-12)
    assert budget.interval().high == pytest.approx(high, rel=1e-12)


def test_budget_with_an_instrument_matches_a_hand_computation() -> None:
    # By hand (JCGM 100:2008, 4.2.3, 5.1.2, G.4.1, 6.2.1): s^2 = 0.1/4 = 0.025, u_A^2 = 0.005
    # (df 4), u_B = 0.05 (df 8), u_c^2 = 0.0075; nu_eff = 0.0075^2 / (0.005^2/4 + 0.05^4/8)
    # = 8 exactly; k = t_0.975(8) = 2.306 (Student-t table, common practice); U = k u_c.
    x = [9.8, 9.9, 10.0, 10.1, 10.2]
    budget = uncertainty_budget(x, 0.95, "two-sided", (0.05, 8))
    assert budget.type_a == pytest.approx(math.sqrt(0.005), rel=1e-12)
    assert budget.combined == pytest.approx(math.sqrt(0.0075), rel=1e-12)
    assert budget.effective_df == pytest.approx(8.0, rel=1e-12)
    assert budget.coverage_factor == pytest.approx(2.306, abs=5e-4)
    assert budget.expanded == pytest.approx(budget.coverage_factor * math.sqrt(0.0075), rel=1e-12)
    interval = budget.interval()
    assert interval.method == COMBINED_METHOD
    assert (interval.low, interval.high) == (10.0 - budget.expanded, 10.0 + budget.expanded)
    assert interval.df == budget.effective_df and interval.sem == budget.combined


def test_one_sided_budget_uses_the_one_sided_quantile() -> None:
    x = [9.8, 9.9, 10.0, 10.1, 10.2]
    budget = uncertainty_budget(x, 0.95, "upper", (0.05, 8))
    # One-sided 95 %: t_0.95(8) = 1.860 (Student-t table, common practice).
    assert budget.coverage_factor == pytest.approx(1.860, abs=5e-4)
    assert budget.interval().low == -math.inf
    opposite = budget.interval("lower")
    assert opposite.low == pytest.approx(10.0 - budget.expanded)
    with pytest.raises(TrialError, match="needs its own budget"):
        budget.interval("two-sided")


def test_only_the_instrument_when_trials_do_not_scatter() -> None:
    # Zero spread: u_c = u_B, nu_eff = nu_B = inf, k = z_0.975 = 1.960 (JCGM 100, Table G.2).
    budget = uncertainty_budget([3.3] * 6, 0.95, "two-sided", 0.1)
    assert budget.type_a == 0.0
    assert budget.effective_df == math.inf
    assert budget.expanded == pytest.approx(0.196, abs=5e-4)


def test_instrument_part_never_narrows_the_interval() -> None:
    x = np.random.default_rng(2).normal(0.0, 1.0, 30)
    widths = [uncertainty_budget(x, 0.95, "two-sided", u).expanded for u in (0, 0.05, 0.2, 1.0)]
    assert widths == sorted(widths) and widths[0] < widths[-1]


def test_instrument_uncertainty_forms() -> None:
    assert as_instrument_uncertainty(None) is None
    assert as_instrument_uncertainty(0.05) == InstrumentUncertainty(0.05, math.inf)
    assert as_instrument_uncertainty((0.05, 12)) == InstrumentUncertainty(0.05, 12.0)
    spec = InstrumentUncertainty(0.05, 12)
    assert as_instrument_uncertainty(spec) is spec
    assert spec.to_dict() == {"standard": 0.05, "df": 12.0}
    assert InstrumentUncertainty(0.05).to_dict() == {"standard": 0.05, "df": None}


def test_instrument_uncertainty_from_datasheet_and_certificate() -> None:
    # JCGM 100:2008, 4.3.7: a rectangular distribution of half-width a has u = a / sqrt(3).
    assert InstrumentUncertainty.from_limits(0.3).standard == pytest.approx(0.3 / math.sqrt(3))
    # JCGM 100:2008, 4.3.3: a certificate's U with coverage factor k gives u = U / k.
    assert InstrumentUncertainty.from_certificate(0.08, 2).standard == pytest.approx(0.04)
    # JCGM 100:2008, G.4.2 (from memory): u judged reliable to 25 % gives nu = 0.5 / 0.25^2 = 8.
    assert InstrumentUncertainty.with_reliability(0.1, 0.25).df == pytest.approx(8.0)
    assert InstrumentUncertainty.with_reliability(0.1, 0.0).df == math.inf


@pytest.mark.parametrize(
    ("value", "match"),
    [
        (-0.1, ">= 0"),
        (math.nan, ">= 0"),
        (math.inf, ">= 0"),
        ((0.1, 0), "degrees of freedom"),
        ((0.1, -3), "degrees of freedom"),
        ((0.1, 2, 3), "got 3 items"),
        ("0.1", "must be a standard uncertainty"),
        (True, "must be a standard uncertainty"),
        ((0.1, "many"), "must be numbers"),
    ],
)
def test_bad_instrument_uncertainty_is_refused(value, match) -> None:
    with pytest.raises(TrialError, match=match):
        as_instrument_uncertainty(value)


def test_bad_certificate_and_limits_are_refused() -> None:
    with pytest.raises(TrialError, match="coverage_factor"):
        InstrumentUncertainty.from_certificate(0.1, 0)
    with pytest.raises(TrialError, match="half_width"):
        InstrumentUncertainty.from_limits(-1.0)


def test_budget_rows_are_builtin_types() -> None:
    import json

    row = uncertainty_budget([1.0, 1.2, 0.9, 1.1], 0.95, "upper", 0.05).to_dict()
    assert json.loads(json.dumps(row)) == row
    assert row["type_b_df"] is None and row["effective_df"] is not None
    assert all(type(v) in (float, int, str, type(None)) for v in row.values())


def test_trials_to_decide_is_none_when_the_instrument_alone_eats_the_margin() -> None:
    # U cannot fall below k_inf * u_B however many trials: 1.960 * 0.1 = 0.196 > 0.15.
    assert trials_to_decide(0.5, 0.15, 0.1, confidence=0.95) is None
    assert trials_to_decide(0.5, 0.25, 0.1, confidence=0.95) is not None


def test_trials_to_decide_is_the_smallest_n_meeting_its_criterion() -> None:
    from scipy.stats import norm
    from scipy.stats import t as student_t

    sd, margin, u_b, nu_b = 0.4, 0.3, 0.05, 20.0

    def meets(n: int) -> bool:  # the criterion written out again, by hand
        u_a = sd / math.sqrt(n)
        u_c2 = u_a**2 + u_b**2
        nu = u_c2**2 / (u_a**4 / (n - 1) + u_b**4 / nu_b)
        expanded = student_t.ppf(0.975, nu) * math.sqrt(u_c2)
        return margin - expanded >= norm.ppf(0.9) * u_a

    n = trials_to_decide(sd, margin, (u_b, nu_b), confidence=0.95, power=0.9)
    assert n is not None and meets(n) and not meets(n - 1)


def test_trials_to_decide_delivers_its_power_in_simulation() -> None:
    # The suggestion is a normal approximation of the power; a modest simulation checks
    # that n trials decide (PASS) about 90 % of the time when the true mean sits `margin` in.
    from scipy.stats import t as student_t

    sd, margin, u_b = 1.0, 0.8, 0.1
    n = trials_to_decide(sd, margin, u_b, confidence=0.95, power=0.9)
    assert n is not None
    rng = np.random.default_rng(20261201)
    x = rng.normal(0.0, sd, size=(4000, n))
    u_a = x.std(axis=1, ddof=1) / math.sqrt(n)
    u_c = np.hypot(u_a, u_b)
    nu = u_c**4 / (u_a**4 / (n - 1))  # u_B has infinite df
    expanded = student_t.ppf(0.975, nu) * u_c
    passed = x.mean(axis=1) + expanded <= margin  # the true mean sits `margin` below the edge
    assert 0.85 <= passed.mean() <= 0.97


def test_failure_message_shows_the_budget_in_the_trials_unit() -> None:
    x = np.random.default_rng(8).normal(12.0, 0.02, 12)
    with pytest.raises(BandViolation) as info:
        assert_mean_within(
            x, center=12.0, tolerance=0.01, unit="mA", instrument_uncertainty=(0.004, 12)
        )
    text = str(info.value)
    budget = info.value.decision.uncertainty
    assert budget is not None and budget.has_instrument
    assert "u_B 0.004000 mA (df 12)" in text
    assert "U " in text and "mA (k = " in text
    assert "t+instrument" in text


def test_instrument_uncertainty_can_turn_a_pass_into_undecided() -> None:
    x = np.random.default_rng(4).normal(85.0, 0.05, 40)
    assert assert_mean_within(x, center=85.0, tolerance=0.1).passed
    with pytest.raises(BandViolation) as info:
        assert_mean_within(x, center=85.0, tolerance=0.1, instrument_uncertainty=0.06)
    assert info.value.decision.verdict.value == "UNDECIDED"
    assert "more trials will not decide it" in str(info.value)


def _simulated_coverage(
    n: int, sd: float, u_b: float, nu_b: float, reps: int, seed: int, *, budgeted: bool = True
) -> float:
    """Share of replicates whose mean +/- U (95 %) covers the true mean when the instrument's
    calibration error is drawn from N(0, u_B) and its stated u_B carries nu_B df.
    ``budgeted=False`` leaves the instrument out of U (the plain t interval)."""
    from scipy.stats import t as student_t

    rng = np.random.default_rng(seed)
    bias = rng.normal(0.0, u_b, reps)
    x = rng.normal(0.0, sd, size=(reps, n)) + bias[:, None]
    if math.isinf(nu_b):
        stated = np.full(reps, u_b)
    else:  # the stated u_B is itself an estimate: u^2 ~ u_B^2 chi2(nu_B) / nu_B
        stated = u_b * np.sqrt(rng.chisquare(nu_b, reps) / nu_b)
    if not budgeted:
        stated, nu_b = np.zeros(reps), math.inf
    u_a = x.std(axis=1, ddof=1) / math.sqrt(n)
    u_c = np.hypot(u_a, stated)
    nu = u_c**4 / (u_a**4 / (n - 1) + (0.0 if math.isinf(nu_b) else stated**4 / nu_b))
    expanded = student_t.ppf(0.975, nu) * u_c
    return float(np.mean(np.abs(x.mean(axis=1)) <= expanded))


@pytest.mark.parametrize(
    ("n", "sd", "u_b", "nu_b"), [(10, 1.0, 0.5, math.inf), (6, 1.0, 0.8, 10.0), (30, 0.2, 0.01, 5.0)]
)
def test_combined_interval_covers_the_true_mean_about_as_stated(n, sd, u_b, nu_b) -> None:
    # The frequentist reading of JCGM 100:2008, G.4 and G.6: mean +/- t_p(nu_eff) u_c covers
    # the true mean about p of the time when the calibration error is random with sd u_B.
    # Welch-Satterthwaite is an approximation, so the check allows about +/-1.5 points; the
    # simulation's own standard error is about 0.15 points.
    coverage = _simulated_coverage(n, sd, u_b, nu_b, reps=20_000, seed=n)
    assert 0.935 <= coverage <= 0.965, coverage
    # Negative control: the same readings with the instrument left out of U cover far too
    # rarely when u_B is not small against s / sqrt(n), so the check above can fail.
    if u_b > sd / math.sqrt(n):
        plain = _simulated_coverage(n, sd, u_b, nu_b, reps=20_000, seed=n, budgeted=False)
        assert plain < 0.9, plain


@settings(max_examples=150, deadline=None)
@given(
    values=st.lists(st.floats(-1e6, 1e6, allow_nan=False), min_size=2, max_size=40),
    confidence=st.floats(0.5, 0.999),
    side=st.sampled_from(["two-sided", "upper", "lower"]),
)
def test_zero_instrument_equals_the_t_interval_for_any_data(values, confidence, side) -> None:
    # The zero-instrument budget is the plain t interval, bit for bit, whatever the data.
    assert uncertainty_budget(values, confidence, side, 0.0).interval() == mean_interval(
        values, confidence, side
    )
