"""Timings whose method nobody set take bootstrap-t from 20 timings: right-skewed timings make
the t bound pass a mean on the budget more often than it states."""

from __future__ import annotations

import json
import math

import numpy as np
from meanband.record.check import SKEW_CORRECTION_MAX_N, timing_method
from meanband.stats.notes import MIN_BOOTSTRAP_TRIALS, TIMING_METHOD_CODE
from meanband.stats.skewed_intervals import bootstrap_t_bounds
from scipy.stats import t as student_t
from test_timing_plugin import CONFTEST


def test_which_trials_take_the_timing_default() -> None:
    rng = np.random.default_rng(4)

    def steady(n: int) -> np.ndarray:
        # Alternating around 1 ms: lag-1 r near -1, never in doubt, so no batch-means fallback.
        return 1e-3 + 1e-5 * (-1.0) ** np.arange(n) * (1.0 + 0.1 * rng.random(n))

    def method(n: int, source: str | None = "time", unit: str | None = "s") -> str | None:
        chosen = timing_method(steady(n), source=source, unit=unit)
        return None if chosen is None else chosen[0]

    assert method(MIN_BOOTSTRAP_TRIALS - 1) is None  # below 20 no method does better than t
    assert method(MIN_BOOTSTRAP_TRIALS) == "bootstrap-t"
    assert method(SKEW_CORRECTION_MAX_N) == "bootstrap-t"
    assert method(SKEW_CORRECTION_MAX_N + 1) is None
    assert method(40, source="sample", unit="s") is None  # a reading in seconds is no timing
    assert method(40, unit="degC") is None
    chosen = timing_method(steady(40), source="time", unit="s")
    assert chosen is not None and chosen[1]["code"] == TIMING_METHOD_CODE
    assert "set method='t'" in chosen[1]["text"]


def _upper_t(x: np.ndarray) -> np.ndarray:
    n = x.shape[1]
    return x.mean(1) + student_t.ppf(0.95, n - 1) * x.std(1, ddof=1) / math.sqrt(n)


def test_the_default_passes_a_skewed_mean_on_the_budget_less_often_than_t() -> None:
    # Log-normal sigma 0.5 timings, n = 30, the true mean exactly on a 95% budget: t passes
    # falsely 8.7% of the time, bootstrap-t 6.6% (studies/skewed_budgets.py, 10,000 samples).
    # Here 3000 samples (MC SE about 0.5 points), 999 resamples each.
    rng = np.random.default_rng(20_261_203)
    x = rng.lognormal(0.0, 0.5, (3000, 30))
    true_mean = math.exp(0.5**2 / 2)
    _, upper = bootstrap_t_bounds(x, 0.95, "upper", n_resamples=999,
                                  rng=np.random.default_rng(1))
    t_rate = float(np.mean(_upper_t(x) < true_mean))
    default_rate = float(np.mean(upper < true_mean))
    assert t_rate > 0.075
    assert default_rate < t_rate - 0.012
    # Normal timings: no harm (5.1% against t's 4.9% in the study).
    y = rng.normal(1.0, 0.1, (3000, 30))
    _, upper_normal = bootstrap_t_bounds(y, 0.95, "upper", n_resamples=999,
                                         rng=np.random.default_rng(2))
    assert abs(float(np.mean(upper_normal < 1.0)) - 0.05) < 0.015


# Invented: a quote service whose call cost is a floor plus an exponential wait.
BODY = """
import numpy as np
import pytest


def costs(fake, seed):
    rng = np.random.default_rng(seed)
    def call():
        fake.now += int(1_000_000 + rng.exponential(300_000))
    return call


@pytest.mark.meanband(n=40)
def test_quote(trials, fake):
    trials.time(costs(fake, 7))
    trials.check(high="10ms")


@pytest.mark.meanband(n=40, method="t")
def test_quote_t_chosen(trials, fake):
    trials.time(costs(fake, 7))
    trials.check(high="10ms")


@pytest.mark.meanband(n=12)
def test_quote_few(trials, fake):
    trials.time(costs(fake, 8))
    trials.check(high="10ms")
"""


def test_in_a_suite_the_default_is_recorded_and_a_chosen_method_kept(pytester, run_suite):
    pytester.makeconftest(CONFTEST)
    pytester.makepyfile(test_quotes=BODY)
    result = run_suite("-p", "no:cacheprovider", "-v")
    assert result.ret == 0
    rows = {row["nodeid"].split("::")[-1]: row
            for row in json.loads((pytester.path / "rows.json").read_text())}

    def codes(name: str) -> set[str]:
        return {note["code"] for note in rows[name]["notes"]}

    quote = rows["test_quote"]
    lag1 = quote["decision"]["diagnostics"]["lag1"]
    expected = "batch-means" if lag1 > -1 / 40 + 1.2816 / math.sqrt(40) else "bootstrap-t"
    assert quote["decision"]["interval"]["method"] == expected
    assert quote["settings"]["method"] == expected
    assert TIMING_METHOD_CODE in codes("test_quote") or expected == "batch-means"
    assert rows["test_quote_t_chosen"]["decision"]["interval"]["method"] == "t"
    assert TIMING_METHOD_CODE not in codes("test_quote_t_chosen")
    assert rows["test_quote_few"]["decision"]["interval"]["method"] == "t"
    result.stdout.fnmatch_lines(["*test_quote: interval by *"])
