"""Latency budgets on an invented ferry-fare engine (its sensor checks are in
sample_suites/bench/test_ferry_deck.py).

Each test shows one thing the plugin does; `make demo` runs them. The FAIL and UNDECIDED
checks are marked xfail so that the demo exits 0 while their rows still show in the summary.
"""

import numpy as np
import pytest
from fares import quote_fare, timetable_search

DEPARTURES = list(range(300, 1380, 5))


@pytest.mark.meanband(n=40, confidence=0.99)
def test_quote_is_within_budget(trials):
    """PASS: the one-sided 99% upper bound of the mean time per quote is under 2 ms."""
    trials.time(quote_fare, 11.5, "car", 3)
    trials.check(high="2ms")


@pytest.mark.xfail(reason="demo: a budget the timetable scan misses by far", strict=True)
def test_timetable_scan_budget_too_tight(trials):
    """FAIL: scanning ~200 departures takes microseconds; the budget is 50 ns."""
    trials.time(timetable_search, DEPARTURES, 1300, n=30)
    trials.check(high="50ns")


@pytest.mark.xfail(reason="demo: too few timings to decide", strict=True)
def test_refund_quote_undecided(trials):
    """UNDECIDED: 6 timings of a refund quote whose mean sits near its 2 ms budget."""
    rng = np.random.default_rng(11)
    trials.extend(rng.lognormal(np.log(1.95e-3), 0.08, 6), unit="s")
    trials.check(high="2ms")
