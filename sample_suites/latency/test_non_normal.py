"""Trials that are not normal: the notes say when it matters and which method holds.

Invented scenario: logs of the ferry booking service, replayed as trials. Run with `make demo`.
"""

import numpy as np
import pytest


def test_booking_page_log_normal_with_t(trials):
    """PASS with a note: long-tailed page times; the note recommends method='cox'."""
    rng = np.random.default_rng(21)
    trials.extend(rng.lognormal(np.log(0.012), 0.9, 30), unit="s")
    trials.check(high="60ms")


def test_booking_page_log_normal_with_cox(trials):
    """PASS, no note: the same times, bounded with the modified Cox interval."""
    rng = np.random.default_rng(21)
    trials.extend(rng.lognormal(np.log(0.012), 0.9, 30), unit="s")
    trials.check(high="60ms", method="cox")


@pytest.mark.meanband(method="log-t")
def test_booking_page_typical_time(trials):
    """PASS: log-t bounds the geometric mean, the typical page time (the summary says so)."""
    rng = np.random.default_rng(21)
    trials.extend(rng.lognormal(np.log(0.012), 0.9, 30), unit="s")
    trials.check(high="20ms")


@pytest.mark.meanband(method="batch-means")
def test_gate_reader_under_background_load(trials):
    """PASS: a boarding-gate reader whose times follow a wandering background load (AR(1))."""
    rng = np.random.default_rng(22)
    load = np.zeros(120)
    for i in range(1, 120):
        load[i] = 0.6 * load[i - 1] + rng.normal(0.0, 0.4)
    trials.extend(0.004 + 0.0005 * load, unit="s")
    trials.check(high="5ms")


@pytest.mark.meanband(method="bootstrap")
def test_fare_lookup_cache_hits_and_misses(trials):
    """PASS: fast cache hits and, one time in four, slow misses; BCa assumes no shape."""
    rng = np.random.default_rng(23)
    miss = rng.random(60) < 0.25
    trials.extend(np.where(miss, rng.normal(0.0031, 0.0002, 60), rng.normal(0.0009, 0.0001, 60)),
                  unit="s")
    trials.check(high="2ms")
