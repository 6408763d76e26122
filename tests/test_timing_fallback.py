"""Timings whose method nobody set fall back to batch means when lag-1 r is in doubt."""

from __future__ import annotations

import json
import math

import pytest
from meanband.stats.notes import FALLBACK_DOUBT_Z, FALLBACK_MIN_N, batch_means_fallback
from test_timing_plugin import CONFTEST

# Invented: a cache whose hit rate wanders slowly, so each call's cost follows an AR(1) series
# (phi 0.9) around 2 ms; or independent costs around 2 ms.
BODY = """
import numpy as np
import pytest


def costs(fake, phi, seed):
    rng = np.random.default_rng(seed)
    level = 0.0
    def call():
        nonlocal level
        level = phi * level + rng.normal(0.0, 1.0) * (1 - phi * phi) ** 0.5
        fake.now += int(2_000_000 + 200_000 * level)
    return call


@pytest.mark.meanband(n=60)
def test_wandering(trials, fake):
    trials.time(costs(fake, 0.9, 1))
    trials.check(high="10ms")


@pytest.mark.meanband(n=60, method="t")
def test_wandering_t_chosen(trials, fake):
    trials.time(costs(fake, 0.9, 1))
    trials.check(high="10ms")


@pytest.mark.meanband(n=60)
def test_wandering_t_at_the_call(trials, fake):
    trials.time(costs(fake, 0.9, 1))
    trials.check(high="10ms", method="t")


@pytest.mark.meanband(n=60)
def test_independent(trials, fake):
    trials.time(costs(fake, 0.0, 2))
    trials.check(high="10ms")


@pytest.mark.meanband(n=60)
def test_readings(trials):
    rng = np.random.default_rng(3)
    level = [0.0]
    def read():
        level[0] = 0.9 * level[0] + rng.normal(0.0, 0.44)
        return 85.0 + level[0]
    trials.sample(read, unit="degC")
    trials.check(center=85.0, tolerance=5.0)
"""


@pytest.fixture
def rows(pytester: pytest.Pytester, run_suite):
    pytester.makeconftest(CONFTEST)
    pytester.makepyfile(test_timed=BODY)
    result = run_suite("-p", "no:cacheprovider")
    by_test = {row["nodeid"].split("::")[-1]: row
               for row in json.loads((pytester.path / "rows.json").read_text())}
    return result, by_test


def method(row: dict) -> str:
    return str(row["decision"]["interval"]["method"])


def codes(row: dict) -> set[str]:
    return {note["code"] for note in row["notes"]}


def test_wandering_timings_fall_back_and_say_so(rows) -> None:
    result, by_test = rows
    assert result.ret == 0
    row = by_test["test_wandering"]
    assert method(row) == "batch-means" and row["settings"]["method"] == "batch-means"
    assert "batch-means-fallback" in codes(row)
    # Shown on every row, PASS or not: nothing about the method changes silently.
    result.stdout.fnmatch_lines(["*test_wandering: interval by batch means, not t: lag-1 r = *"])


def test_a_method_someone_chose_is_kept(rows) -> None:
    _, by_test = rows
    for name in ("test_wandering_t_chosen", "test_wandering_t_at_the_call"):
        row = by_test[name]
        assert method(row) == "t" and "batch-means-fallback" not in codes(row)
        assert "autocorrelated" in codes(row)  # the note still says what lag-1 r shows


def test_independent_timings_keep_t_unless_r_is_in_doubt(rows) -> None:
    _, by_test = rows
    row = by_test["test_independent"]
    d = row["decision"]["diagnostics"]
    n = row["decision"]["interval"]["n"]
    in_doubt = d["lag1"] > -1 / n + FALLBACK_DOUBT_Z / math.sqrt(n)
    assert (method(row) == "batch-means") == in_doubt
    assert by_test["test_readings"]["unit"] == "degC"
    assert method(by_test["test_readings"]) == "t"  # readings are not timings


def test_the_doubt_limit() -> None:
    # One-sided Box & Jenkins (1976) white-noise limit -1/n + z(0.90)/sqrt(n), z(0.90) =
    # 1.2816 (scipy.stats.norm.ppf(0.9)); below FALLBACK_MIN_N trials batch means has too few
    # batches to be worth it.
    n = 50
    limit = -1 / n + 1.2816 / math.sqrt(n)
    assert batch_means_fallback(limit + 1e-6, n) is not None
    assert batch_means_fallback(limit - 1e-6, n) is None
    assert batch_means_fallback(0.9, FALLBACK_MIN_N - 1) is None
    assert batch_means_fallback(float("nan"), n) is None
