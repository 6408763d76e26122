"""n="looks:K": K planned looks with Lan-DeMets boundaries, in the fixture and in pytest."""

from __future__ import annotations

import math

import numpy as np
import pytest
from meanband.errors import BandViolation, TrialError
from meanband.record.recorder import Recorder
from meanband.record.settings import Settings
from meanband.stats.sequential import group_sequential_design
from scipy import stats


def _recorder() -> Recorder:
    return Recorder(Settings(), "t.py::test_x")


def verdict(trials: Recorder) -> str:
    """The check's verdict, whether it passed or raised."""
    try:
        return trials.check().verdict.value
    except BandViolation as exc:
        return exc.decision.verdict.value


def test_a_clear_pass_stops_at_the_first_look() -> None:
    rng = np.random.default_rng(1)
    trials = _recorder()
    values = trials.sample(lambda: float(rng.normal(1.0, 0.1)), n="looks:5", max_n=100,
                           band=dict(high=3.0))
    assert values.size == 20  # the first of the looks at 20, 40, 60, 80, 100
    decision = trials.check()
    assert decision.verdict.value == "PASS"
    # Reference: the O'Brien-Fleming-type boundary at the first of five looks, one-sided 0.05,
    # converted to t with 19 df at the same nominal probability (Jennison & Turnbull 2000,
    # section 11.4); the boundary itself is checked against published values in test_sequential.
    z = group_sequential_design(5, confidence=0.95).bounds[0]
    critical = stats.t.isf(stats.norm.sf(z), 19)
    sem = np.std(values, ddof=1) / math.sqrt(20)
    assert decision.interval.high == pytest.approx(np.mean(values) + critical * sem, rel=1e-12)
    assert decision.interval.method == "group-sequential"


def test_a_mean_on_the_edge_runs_to_the_last_look() -> None:
    rng = np.random.default_rng(2)
    trials = _recorder()
    values = trials.sample(lambda: float(rng.normal(2.0, 0.5)), n="looks:4:pocock", max_n=40,
                           band=dict(low=1.98, high=2.02))
    assert values.size == 40
    assert verdict(trials) == "UNDECIDED"


def test_false_pass_at_the_edge_stays_within_alpha_over_the_looks() -> None:
    # Monte Carlo (common practice): with the true mean on a budget, the chance of a PASS at any
    # of 5 looks is at most 1 - C = 0.05; 600 seeded repetitions give a binomial 99.9% upper
    # limit of about 0.08 at 0.05, and peeking with the fixed interval at every look would pass
    # about 0.14 of the time.
    rng = np.random.default_rng(20261203)
    passed = 0
    for _ in range(600):
        trials = _recorder()
        trials.sample(lambda: float(rng.normal(1.0, 1.0)), n="looks:5", max_n=50,
                      band=dict(high=1.0))
        passed += verdict(trials) == "PASS"
    assert passed / 600 <= 0.08


def test_the_row_says_where_it_stopped() -> None:
    rng = np.random.default_rng(3)
    trials = _recorder()
    trials.sample(lambda: float(rng.normal(1.0, 0.1)), n="looks:3", max_n=30, band=dict(high=2.0))
    trials.check()
    (row,) = trials.all_rows()
    record = row["sequential"]
    assert record["mode"] == "looks:3:obrien-fleming"
    assert record["planned"] == [10, 20, 30] and record["stopped_at"] == 10
    assert record["looks"] == 1 and record["reason"] == "decided"
    assert row["settings"]["n"] == "looks:3:obrien-fleming"
    assert any("planned looks: stopped at look 1 of 3 (10 trials), PASS" in note["text"]
               for note in row["notes"])


@pytest.mark.parametrize(
    ("n", "kwargs", "message"),
    [
        ("looks:x", {"band": dict(high=1.0)}, "write n='looks:K'"),
        ("looks:0", {"band": dict(high=1.0)}, "write n='looks:K'"),
        ("looks:3:linear", {"band": dict(high=1.0)}, "unknown spending shape 'linear'"),
        ("looks:5", {"band": dict(high=1.0), "max_n": 6}, "too small for 5 looks"),
        ("looks:5", {"band": dict(high=1.0), "block": 2}, "block= goes with n='until-decided'"),
        ("looks:5", {}, "needs the band before collecting"),
    ],
)
def test_bad_arguments_are_clear_errors(n, kwargs, message) -> None:
    with pytest.raises(TrialError, match=message):
        _recorder().sample(lambda: 1.0, n=n, **kwargs)


def test_planned_looks_in_pytest(pytester: pytest.Pytester, run_suite) -> None:
    pytester.makepyfile(
        """
        import numpy as np

        def test_pressure(trials):
            rng = np.random.default_rng(4)
            trials.sample(lambda: float(rng.normal(101.3, 0.2)), n="looks:4", max_n=80,
                          unit="kPa", band=dict(low=100.0, high=103.0))
            trials.check()
        """
    )
    result = run_suite("-v", "-n", "2")
    result.assert_outcomes(passed=1)
    result.stdout.fnmatch_lines(["*planned looks: stopped at look 1 of 4 (20 trials), PASS*"])
