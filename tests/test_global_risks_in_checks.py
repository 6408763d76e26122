"""A check with a stated production process reports its rule's consumer's and producer's risk."""

from __future__ import annotations

import numpy as np
import pytest
from meanband import assert_mean_within
from meanband.errors import TrialError
from meanband.stats.bands import make_band
from meanband.stats.decision import decide
from meanband.stats.decision_rules import GuardedAcceptance, ProcessPrior, global_risks

# Invented scenario: a 10 V reference checked to 9..11 V; nearly all of the uncertainty of the mean
# comes from the meter (u_B = 0.25 V), the trials barely scatter.
READINGS = 10.0 + np.linspace(-1e-4, 1e-4, 30)
BAND = make_band(9.0, 11.0, unit="V")


def test_the_risks_are_those_of_the_rule_for_the_stated_process() -> None:
    decision = decide(READINGS, BAND, instrument_uncertainty=0.25, process=(10.0, 1 / 3))
    budget = decision.uncertainty
    # Reference: meanband.stats.decision_rules.global_risks, itself checked against the bivariate
    # normal CDF (scipy.stats.multivariate_normal) in tests/test_decision_rules.py.
    expected = global_risks(ProcessPrior(10.0, 1 / 3), budget.combined, 9.0, 11.0,
                            guard_band=GuardedAcceptance(), coverage_factor=budget.coverage_factor,
                            df=budget.effective_df)
    assert decision.risks == expected
    # Cp = (T_U - T_L) / (6 u_p) = 1 and Cm = (T_U - T_L) / (4 u) = 2: guarded acceptance at w = U
    # turns away about 23% of conforming units (the figure the bench users were shown; JCGM
    # 106:2012 clause 9 model, from memory). k here is 1.96, not 2, so a little fewer.
    assert 0.19 < decision.risks.conforming_rejected_share < 0.24


def test_the_message_and_row_carry_the_risks() -> None:
    x = 10.9 + np.linspace(-1e-4, 1e-4, 30)
    with pytest.raises(AssertionError) as info:
        assert_mean_within(x, 9.0, 11.0, unit="V", instrument_uncertainty=0.25,
                           process=ProcessPrior(10.0, 1 / 3))
    assert "for the stated process: consumer's risk" in str(info.value)
    assert "of good units turned away" in str(info.value)


def test_the_process_needs_the_t_interval() -> None:
    with pytest.raises(TrialError, match="process="):
        decide(READINGS + np.random.default_rng(2).normal(0, 0.1, 30), BAND, method="bootstrap",
               process=(10.0, 0.3))


def test_a_bad_process_is_a_clear_error() -> None:
    with pytest.raises(TrialError, match="process standard deviation"):
        decide(READINGS, BAND, instrument_uncertainty=0.25, process=(10.0, 0.0))
