"""Timing-engine features on the invented ferry-fare engine: setup, warm-up, CPU clock, limits.

Run with `-v` to see the clock's measured step and read cost, and k for each timed series.
"""

import random
import time

import pytest
from fares import quote_fare

# A day's bookings as (departure minute, fare), in the order the booking office took them.
_rng = random.Random(42)
BOOKINGS = [(_rng.randrange(300, 1380, 5), round(_rng.uniform(4, 90), 2)) for _ in range(400)]


def sort_manifest(bookings: list) -> None:
    """Order a manifest by departure, in place: each call needs an unsorted copy."""
    bookings.sort()


@pytest.mark.meanband(n=30, warmup="20ms")
def test_manifest_sort_with_fresh_input(trials):
    """Setup hands every call its own shuffled copy, made outside the timed region."""
    trials.time(sort_manifest, setup=lambda: list(BOOKINGS))
    trials.check(high="2ms")


def quote_over_radio_link(distance_nm: float) -> float:
    """A quote that waits for the harbour office's radio link before pricing."""
    time.sleep(0.0002)
    return quote_fare(distance_nm, "van", 2)


@pytest.mark.meanband(n=20, clock="cpu", min_trial_time="2ms")
def test_quote_cpu_cost_excludes_the_radio_wait(trials):
    """The CPU clock charges the quote for its own work, not for the wait on the link."""
    trials.time(quote_over_radio_link, 18.0)
    trials.check(high="150us")


def nightly_settlement() -> None:
    """A slow end-of-day job: about 5 ms a run."""
    time.sleep(0.005)


@pytest.mark.meanband(n=500, time_limit="250ms")
def test_settlement_capped_by_a_time_limit(trials):
    """500 trials would take 2.5 s; the limit stops at about 50 and says so in the notes."""
    trials.time(nightly_settlement)
    trials.check(high="50ms")
