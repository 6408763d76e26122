"""Tests for bands.py in hardware terms: asymmetric tolerances and one-sided limits with units."""

from __future__ import annotations

import math

import numpy as np
import pytest
from meanband import BandViolation, TrialError, Verdict, assert_mean_within, decide, make_band


def test_asymmetric_tolerance_is_below_then_above() -> None:
    band = make_band(center=85, tolerance=(0.3, 0.5), unit="degC")
    assert (band.low, band.high) == pytest.approx((84.7, 85.5))
    assert band.unit == "degC" and band.side == "two-sided"


def test_symmetric_tolerance_still_works() -> None:
    band = make_band(center=85.0, tolerance=0.4)
    assert (band.low, band.high) == pytest.approx((84.6, 85.4))


def test_one_sided_limits() -> None:
    assert make_band(high=3.3, unit="V").side == "upper"
    assert make_band(low=11.5, unit="V").side == "lower"
    assert make_band(center=1.0, tolerance=(0.0, 0.2)).low == 1.0


@pytest.mark.parametrize(
    ("tolerance", "match"),
    [((0.3,), "pair"), ((0.1, 0.2, 0.3), "pair"), ((-0.3, 0.5), ">= 0"),
     ((0.3, math.nan), "finite"), ((0.3, "wide"), "number"), ((0.3, math.inf), "finite")],
)
def test_bad_asymmetric_tolerance_is_refused(tolerance, match) -> None:
    with pytest.raises(TrialError, match=match):
        make_band(center=85, tolerance=tolerance)


def test_duration_strings_work_in_a_tolerance_pair_for_timings() -> None:
    band = make_band(center="2ms", tolerance=("100us", "300us"), unit="s")
    assert (band.low, band.high) == pytest.approx((1.9e-3, 2.3e-3))


def test_asymmetric_band_decides_on_the_nearer_edge() -> None:
    x = np.random.default_rng(3).normal(85.35, 0.05, 30)
    # Inside 84.7..85.5 (+0.5 above), but outside a symmetric +/-0.3 band.
    assert decide(x, make_band(center=85, tolerance=(0.3, 0.5))).verdict is Verdict.PASS
    assert decide(x, make_band(center=85, tolerance=0.3)).verdict is Verdict.FAIL


def test_the_unit_is_in_every_number_of_the_failure_message() -> None:
    x = np.random.default_rng(3).normal(85.52, 0.05, 30)
    with pytest.raises(BandViolation) as info:
        assert_mean_within(x, center=85, tolerance=(0.3, 0.5), unit="degC")
    for line in str(info.value).splitlines():
        if line.lstrip().startswith(("mean ", "interval ", "band ", "sd ")):
            assert "degC" in line, line
