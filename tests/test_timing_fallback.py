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


def test_pooling_a_run_that_fell_back_with_one_that_did_not_judges_the_pool_afresh() -> None:
    import numpy as np
    from meanband.report.merge import merge_reports
    from meanband.store import report_json
    from report_rows import make_row

    def report(rows: list[dict]) -> dict:
        built = report_json.build_report(
            rows, environment=report_json.environment(),
            configuration={"args": [], "options": {}}, include_trials=True,
        )
        return report_json.loads(report_json.dumps(built))

    # Invented: two CI runs of one latency check, 40 timings each; the first run's timings
    # wander (AR(1) phi 0.8), so it fell back; the second's are independent.
    rng = np.random.default_rng(5)
    wander = np.empty(40)
    level = 0.0
    for i in range(40):
        level = 0.8 * level + rng.normal(0.0, 0.6)
        wander[i] = 1.0e-3 + 1e-4 * level
    steady = rng.normal(1.0e-3, 1e-4, 40)
    fell = make_row("t.py::test_quote", wander, band={"high": "2ms"}, unit="s")
    note = batch_means_fallback(float(np.corrcoef(wander[:-1], wander[1:])[0, 1]), 40)
    assert note is not None
    fell["notes"].insert(0, note)
    fell["settings"]["method"] = "batch-means"
    kept = make_row("t.py::test_quote", steady, band={"high": "2ms"}, unit="s")
    merged = merge_reports([("a.json", report([fell])), ("b.json", report([kept]))], pool=True)
    [row] = merged["rows"]
    pooled = np.r_[wander, steady]
    expected = batch_means_fallback(
        float(np.sum((pooled[:-1] - pooled.mean()) * (pooled[1:] - pooled.mean()))
              / np.sum((pooled - pooled.mean()) ** 2)), 80)
    # The pool takes the fallback exactly when its own lag-1 r is in doubt (NIST StRD r(1)).
    assert ("batch-means-fallback" in codes(row)) == (expected is not None)
    # Not in doubt, 80 timings take the skew-corrected default (record/check.timing_method).
    assert method(row) == ("batch-means" if expected is not None else "bootstrap-t")
    assert sum(n["code"] == "batch-means-fallback" for n in row["notes"]) <= 1
