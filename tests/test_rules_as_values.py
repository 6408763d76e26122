"""Decision rules as values in a check: guarded with w = r U, a guard band from a target specific
risk, and ILAC-G8's four statements mapped onto the three verdicts."""

from __future__ import annotations

import numpy as np
import pytest
from meanband import assert_mean_within
from meanband.errors import BandViolation, TrialError
from meanband.stats.bands import make_band
from meanband.stats.decision import decide
from meanband.stats.decision_rules import GuardedAcceptance, SpecificRiskAcceptance
from meanband.stats.verdict import Verdict

RNG = np.random.default_rng(18)
BAND = make_band(center=5.0, tolerance=0.05, unit="V")  # invented: a 5 V rail, +/- 50 mV


@pytest.mark.parametrize("mean", [4.96, 4.97, 4.98, 5.0, 5.02, 5.035, 5.045, 5.06, 5.08])
def test_guarded_with_r_1_is_the_default_rule_exactly(mean) -> None:
    # Reference: the default guarded rule (ILAC-G8:2019 4.2.2, JCGM 106:2012 8.3.2; from memory),
    # itself tested in tests/test_rules.py.
    x = mean + RNG.normal(0, 0.01, 12)
    plain = decide(x, BAND, instrument_uncertainty=0.004)
    valued = decide(x, BAND, instrument_uncertainty=0.004, rule=GuardedAcceptance(1.0))
    assert valued.verdict is plain.verdict
    assert valued.rule.acceptance_low == pytest.approx(plain.rule.acceptance_low, rel=1e-12)
    assert valued.rule.conformance_probability == pytest.approx(plain.rule.conformance_probability)


def test_a_narrower_guard_band_passes_what_w_equals_u_leaves_undecided() -> None:
    x = 5.035 + np.linspace(-0.004, 0.004, 12)
    assert decide(x, BAND, instrument_uncertainty=0.008).verdict is Verdict.UNDECIDED
    half = decide(x, BAND, instrument_uncertainty=0.008, rule="guarded:0.5")
    assert half.verdict is Verdict.PASS and half.rule.rule == "guarded:0.5"
    assert half.rule.statement == "pass"


def test_a_conditional_pass_is_undecided_and_says_so() -> None:
    # ILAC-G8:2019 4.2.3 (from memory): inside the tolerance but within the guard band.
    x = 5.045 + np.linspace(-0.002, 0.002, 12)
    outcome = decide(x, BAND, instrument_uncertainty=0.006, rule=GuardedAcceptance(1.0))
    assert outcome.verdict is Verdict.UNDECIDED and outcome.rule.statement == "conditional pass"
    with pytest.raises(BandViolation, match="ILAC-G8 statement: conditional pass"):
        assert_mean_within(x, center=5.0, tolerance=0.05, unit="V", instrument_uncertainty=0.006,
                           rule="guarded:1")


def test_a_target_specific_risk_bounds_the_false_accept_probability() -> None:
    # JCGM 106:2012 9.3 (from memory): after a PASS the specific risk is 1 - p_c.
    x = 5.03 + np.linspace(-0.003, 0.003, 20)
    outcome = decide(x, BAND, instrument_uncertainty=0.005, rule=SpecificRiskAcceptance(0.01))
    assert outcome.rule.rule == "specific-risk:0.01"
    if outcome.verdict is Verdict.PASS:
        assert outcome.rule.false_accept_probability <= 0.01 + 1e-12


def test_a_valued_rule_needs_the_t_interval() -> None:
    with pytest.raises(TrialError, match="method='t'"):
        decide(RNG.normal(5.0, 0.01, 30), BAND, method="bootstrap", rule="guarded:0.5")


def test_an_unknown_rule_spec_is_a_clear_error() -> None:
    with pytest.raises(TrialError, match="unknown decision rule 'lenient'"):
        decide(RNG.normal(5.0, 0.01, 12), BAND, rule="lenient")


def test_the_check_records_the_rule_and_its_statement(run_suite, pytester) -> None:
    pytester.makepyfile(test_rail="""
import json
import numpy as np

RAIL = (5.035 + np.linspace(-0.004, 0.004, 12)).tolist()

def test_rail(trials):
    trials.extend(RAIL, unit="V")
    trials.check(center=5.0, tolerance=0.05, instrument_uncertainty=0.008, rule="guarded:0.5")
""")
    result = run_suite("-v")
    result.assert_outcomes(passed=1)
    result.stdout.fnmatch_lines(["*guarded acceptance (guard band w = 0.5 U = *ILAC-G8 statement: pass*"])
