"""n="until-decided": collection that stops once the anytime-valid interval decides the band."""

from __future__ import annotations

import json

import numpy as np
import pytest
from meanband.errors import TrialError
from meanband.record.recorder import Recorder
from meanband.record.settings import Settings
from meanband.stats.sequential import anytime_interval

# Invented scenario: a pump controller's pressure sensor, read one value at a time.
CONFTEST = """
import json

import pytest

import meanband.collect.clock as clock_module


class FakeClock:
    \"\"\"A wall clock that moves only when the timed call says so: the time limit is then
    reached after the same trials however busy the machine is.\"\"\"

    def __init__(self):
        self.now = 0

    def read(self):
        self.now += 50
        return self.now

    def varying(self, durations):
        def call(*args):
            self.now += next(durations)
        return call


@pytest.fixture
def fake(monkeypatch):
    clock = FakeClock()
    monkeypatch.setitem(clock_module.CLOCKS, "wall",
                        clock_module.Clock("wall", clock.read, "fake clock",
                                           stated_resolution_ns=1.0))
    return clock


def pytest_meanband_session_finish(config, rows):
    (config.rootpath / "rows.json").write_text(json.dumps(rows))
"""

SUITE = """
import itertools

import numpy as np
import pytest

def reader(mean, sd, seed):
    stream = iter(np.random.default_rng(seed).normal(mean, sd, 100_000))
    return lambda: float(next(stream))

def test_clear_pass_stops_early(trials):
    trials.sample(reader(2.0, 0.1, 1), n="until-decided", band=dict(high=3.0), unit="bar")
    trials.check()

def test_mean_on_the_edge_runs_to_the_cap(trials):
    trials.sample(reader(3.0, 0.1, 2), n="until-decided", band=dict(high=3.0), unit="bar",
                  max_n=60)
    trials.check()

WAITS = itertools.cycle(
    np.random.default_rng(3).uniform(200_000, 800_000, 997).astype(int).tolist())

@pytest.mark.meanband(time_limit="150ms", min_trial_time="1ms")
def test_the_time_limit_ends_it(trials, fake):
    # Calls of 0.2-0.8 ms on a fake clock (mean 0.5 ms, 0.01 ms above the low edge): deciding
    # takes far longer than the limit allows, on an idle machine or a busy one.
    trials.time(fake.varying(WAITS), n="until-decided",
                band=dict(low="0.49ms", high="0.9ms"), max_n=100_000)
    trials.check()
"""


def _rows(pytester) -> dict[str, dict]:
    rows = json.loads((pytester.path / "rows.json").read_text())
    return {row["nodeid"].split("::")[-1]: row for row in rows}


@pytest.mark.parametrize("workers", [[], ["-n", "2"]], ids=["serial", "xdist"])
def test_until_decided_stops_early_runs_to_the_cap_and_honours_the_time_limit(
        run_suite, pytester, workers) -> None:
    pytester.makeconftest(CONFTEST)
    pytester.makepyfile(test_pump=SUITE)
    result = run_suite(*workers, "-v")  # a wide-margin PASS: its notes show at -v
    result.assert_outcomes(passed=1, failed=2)
    rows = _rows(pytester)
    clear = rows["test_clear_pass_stops_early"]
    assert clear["decision"]["verdict"] == "PASS"
    assert clear["sequential"]["reason"] == "decided" and clear["sequential"]["stopped_at"] <= 12
    assert clear["decision"]["interval"]["method"] == "anytime-t"
    assert clear["settings"]["n"] == "until-decided"
    edge = rows["test_mean_on_the_edge_runs_to_the_cap"]
    assert edge["decision"]["verdict"] == "UNDECIDED" and len(edge["values"]) == 60
    assert edge["sequential"]["reason"] == "max_n"
    limited = rows["test_the_time_limit_ends_it"]
    assert limited["sequential"]["reason"] == "time limit"
    assert limited["decision"]["verdict"] == "UNDECIDED" and len(limited["values"]) < 1000
    result.stdout.fnmatch_lines(["*until decided: stopped at * trials after * look(s), PASS*"])


def _recorder() -> Recorder:
    return Recorder(Settings(), "t.py::test_x")


def test_the_verdict_uses_the_anytime_interval_of_all_trials_taken() -> None:
    # Reference: stats.sequential.anytime_interval on the same trials (its own tests check it
    # against the mixture integral, Lai 1976 / Wang & Ramdas 2023, from memory).
    rng = np.random.default_rng(5)
    trials = _recorder()
    values = trials.sample(lambda: float(rng.normal(10.0, 1.0)), n="until-decided",
                           band=dict(low=5.0), block=4)
    decision = trials.check()
    reference = anytime_interval(values, 0.95, "lower")
    assert decision.interval.low == pytest.approx(reference.low, rel=1e-12)
    assert values.size % 4 == 0 and values.size >= 12  # looks fall at block ends, from 10 on


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({}, "needs the band before collecting"),
        ({"band": dict(high=1.0), "pilot": 5}, "pilot= goes with n='auto' only"),
        ({"band": dict(high=1.0), "block": 0}, "block=0"),
        ({"band": dict(high=1.0), "max_n": 1}, "max_n=1"),
    ],
)
def test_bad_arguments_are_clear_errors(kwargs, message) -> None:
    with pytest.raises(TrialError, match=message):
        _recorder().sample(lambda: 1.0, n="until-decided", **kwargs)


def test_block_without_until_decided_is_refused() -> None:
    with pytest.raises(TrialError, match="block= goes with n='until-decided'"):
        _recorder().sample(lambda: 1.0, n=5, block=2)


def test_a_different_band_or_added_trials_void_the_verdict() -> None:
    trials = _recorder()
    trials.sample(lambda: 1.0 + np.random.default_rng().normal(0, 0.01), n="until-decided",
                  band=dict(high=2.0))
    with pytest.raises(TrialError, match="band differs"):
        trials.check(high=3.0)
    trials.add(1.0)
    with pytest.raises(TrialError, match="trials were added"):
        trials.check()
