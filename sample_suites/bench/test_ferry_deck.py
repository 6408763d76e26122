"""Sensor checks on an invented ferry's pier, deck and engine room: readings, not timings.

Each test shows one thing the plugin does with measured values; `make demo` runs them. The
UNDECIDED check is marked xfail so that the demo exits 0 while its row still shows.
"""

import numpy as np
import pytest
from meanband import assert_mean_within


@pytest.mark.xfail(reason="demo: too few readings to decide", strict=True)
def test_pier_gauge_undecided(trials):
    """UNDECIDED: 6 readings of a pier water gauge whose mean sits near the band edge."""
    rng = np.random.default_rng(11)
    trials.extend(rng.normal(2.37, 0.08, 6), unit="m")
    trials.check(center=2.30, tolerance=0.10)


def test_deck_load_cells_skewed(trials):
    """PASS with a note: strongly skewed readings make the normality check doubtful."""
    rng = np.random.default_rng(5)
    trials.extend(40.0 + rng.lognormal(0.0, 0.9, 80), unit="kN")
    trials.check(high=45.0)


def test_engine_temperature_drifts(trials):
    """PASS with a note: a slowly warming engine gives autocorrelated readings."""
    rng = np.random.default_rng(8)
    warming = 82.0 + np.cumsum(rng.normal(0.0, 0.05, 50))
    trials.extend(warming, unit="degC")
    trials.check(low=75.0, high=90.0)


def test_ticket_counter_quantised(trials):
    """PASS with a note: a counter that reads the same whole number every time."""
    trials.extend([12.0] * 15, unit="tickets/min")
    trials.check(low=10, high=15)


def test_ballast_pumps_cold_and_warm(trials):
    """Named series: a cold-start series checked, a warm series recorded only."""
    rng = np.random.default_rng(3)
    trials.series("cold").extend(rng.normal(31.0, 0.6, 25), unit="L/s")
    trials.series("cold").check(low=29.5)
    trials.series("warm").extend(rng.normal(33.0, 0.4, 25), unit="L/s")


def test_logged_fuel_flow():
    """The stand-alone assertion, no fixture: values from a log."""
    rng = np.random.default_rng(21)
    readings = rng.normal(118.0, 1.5, 36)
    assert_mean_within(readings, low=116.0, high=120.0)
