"""Interval methods and risk notes through the plugin, as a user runs them."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from meanband import mean_interval

# Invented request latencies (ms): log-normal, median 10, log-sd 1; seeded.
LATENCIES = np.random.default_rng(2).lognormal(math.log(10.0), 1.0, 30)

ROW_DUMP = """
import json

def pytest_meanband_result(config, row):
    with open("rows.jsonl", "a") as f:
        f.write(json.dumps(row) + "\\n")
"""

SUITE = f"""
import pytest

LATENCIES = {LATENCIES.tolist()!r}

def test_cox_by_call(trials):
    trials.extend(LATENCIES)
    trials.check(high=60.0, method="cox")

@pytest.mark.meanband(method="bootstrap")
def test_bootstrap_by_marker(trials):
    trials.extend(LATENCIES)
    trials.check(high=60.0)

@pytest.mark.meanband(method="log-t")
def test_geometric_mean(trials):
    trials.extend(LATENCIES)
    trials.check(low=1.0, high=60.0)

def test_plain_t(trials):
    trials.extend(LATENCIES)
    trials.check(high=25.0)  # passes, but not by so much that the data's shape cannot matter
"""


def _rows(pytester: pytest.Pytester) -> dict[str, dict]:
    lines = (pytester.path / "rows.jsonl").read_text().splitlines()
    return {json.loads(line)["nodeid"].split("::")[1]: json.loads(line) for line in lines}


@pytest.mark.parametrize("workers", [[], ["-n", "2"]])
def test_method_by_call_and_by_marker(run_suite, pytester, workers):
    pytester.makeconftest(ROW_DUMP)
    pytester.makepyfile(test_latency=SUITE)
    result = run_suite(*workers)
    result.assert_outcomes(passed=4)
    rows = _rows(pytester)
    expected = {
        "test_cox_by_call": ("cox", "upper", "mean"),
        "test_bootstrap_by_marker": ("bootstrap", "upper", "mean"),
        "test_geometric_mean": ("log-t", "two-sided", "geometric mean"),
        "test_plain_t": ("t", "upper", "mean"),
    }
    for name, (method, side, estimand) in expected.items():
        interval = rows[name]["decision"]["interval"]
        assert (interval["method"], interval["estimand"]) == (method, estimand)
        assert rows[name]["settings"]["method"] == method
        # The same interval computed directly from the core.
        direct = mean_interval(LATENCIES, 0.95, side, method)
        assert interval["high"] == pytest.approx(direct.high, rel=1e-12)
        assert interval["low"] == pytest.approx(direct.low, rel=1e-12)
    # The summary says which method and what it is about.
    result.stdout.fnmatch_lines(["*test_geometric_mean*log-t (geometric mean)*PASS*"])
    result.stdout.fnmatch_lines(["*test_cox_by_call*cox*PASS*"])


def test_notes_recommend_a_method_and_fall_silent_once_it_is_used(run_suite, pytester):
    pytester.makeconftest(ROW_DUMP)
    pytester.makepyfile(test_latency=SUITE)
    run_suite().assert_outcomes(passed=4)
    rows = _rows(pytester)
    plain = {note["code"]: note for note in rows["test_plain_t"]["notes"]}
    assert plain["not-normal"]["recommend"] == "cox"
    cox = {note["code"] for note in rows["test_cox_by_call"]["notes"]}
    assert "not-normal" not in cox


def test_failure_message_carries_the_recommendation(run_suite, pytester):
    pytester.makepyfile(test_budget=f"""
LATENCIES = {LATENCIES.tolist()!r}

def test_budget(trials):
    trials.extend(LATENCIES)
    trials.check(high=15.0)
""")
    result = run_suite()
    result.assert_outcomes(failed=1)
    result.stdout.fnmatch_lines(["*note*method='cox'*"])


def test_unknown_method_in_the_marker_is_a_clear_error(run_suite, pytester):
    pytester.makepyfile(test_bad="""
import pytest

@pytest.mark.meanband(method="median")
def test_x(trials):
    trials.extend([1.0, 2.0, 3.0])
    trials.check(high=10.0)
""")
    result = run_suite()
    assert result.ret != 0
    result.stdout.fnmatch_lines(["*batch-means, bootstrap, bootstrap-t, cox, hall, log-t, t*"])
