"""The cap of a check that stops when decided, learned from where its runs stopped, and carried
by the plan file, the settings and ``meanband plan`` from the history store."""

from __future__ import annotations

import json
import math
import subprocess
import sys

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from meanband.record.settings import SettingError, Settings, resolve
from meanband.record.suggestion import stop_of_row, suggestion_for_row
from meanband.stats.sequential import anytime_multiplier, stop_or_go_on
from meanband.stats.stopping_caps import HEADROOM, Stop, advise_cap, trials_to_decide
from meanband.store.planfile import PlanEntry, PlanError, dumps_plan, loads_plan

CEILING = 1_000_000


def reach(n: int, confidence: float = 0.95, side: str = "upper") -> float:
    return float(anytime_multiplier(np.array([n]), confidence, side)[0]) / math.sqrt(n)


# -- the pure core --------------------------------------------------------------------------


@settings(max_examples=40, deadline=None)
@given(effect=st.floats(0.02, 3.0), confidence=st.sampled_from([0.9, 0.95, 0.99]),
       side=st.sampled_from(["upper", "lower", "two-sided"]))
def test_trials_to_decide_is_the_first_count_whose_reach_fits(effect, confidence, side):
    n = trials_to_decide(effect, confidence=confidence, side=side, ceiling=CEILING)
    assert n is not None
    assert reach(n, confidence, side) <= effect
    if n > 2:
        assert not reach(n - 1, confidence, side) <= effect


def test_trials_to_decide_is_at_least_the_fixed_n_count():
    # The fixed-n t bound is narrower than any anytime bound at the same n, so the t test's
    # plug-in count t(1 - alpha, n - 1) / sqrt(n) <= effect comes first (scipy.stats.t as the
    # reference for Student's quantile).
    from scipy.stats import t as student_t

    for effect in (0.1, 0.3, 1.0):
        anytime = trials_to_decide(effect, confidence=0.95, side="upper", ceiling=CEILING)
        fixed = next(n for n in range(2, 100_000)
                     if student_t.ppf(0.95, n - 1) / math.sqrt(n) <= effect)
        assert anytime is not None and anytime > fixed


def test_trials_to_decide_matches_where_the_sequence_decides():
    # Trials whose mean and sd are exactly the planned ones: the stream decides at the count.
    effect = 0.4
    n = trials_to_decide(effect, confidence=0.95, side="upper", ceiling=CEILING)
    assert n is not None
    def exact(count: int) -> np.ndarray:
        z = np.random.default_rng(count).normal(size=count)
        return 10.0 + (z - z.mean()) / z.std(ddof=1)  # mean 10, sd 1

    decision = stop_or_go_on(exact(n), high=10.0 + effect, confidence=0.95, first_look=n)
    assert decision.verdict == "PASS" and decision.n == n
    shorter = stop_or_go_on(exact(n - 1), high=10.0 + effect, confidence=0.95, first_look=n - 1)
    assert shorter.verdict == "UNDECIDED"


def test_no_count_decides_a_mean_on_the_edge():
    assert trials_to_decide(0.0, confidence=0.95, side="upper", ceiling=CEILING) is None
    assert trials_to_decide(math.nan, confidence=0.95, side="upper", ceiling=CEILING) is None
    assert trials_to_decide(1e-4, confidence=0.95, side="upper", ceiling=1000) is None


def test_a_capped_run_raises_the_cap_with_headroom():
    advice = advise_cap([Stop(60, False, 0.2)], cap=60, block=10, floor=20, confidence=0.95,
                        side="upper", ceiling=CEILING)
    needed = trials_to_decide(0.2, confidence=0.95, side="upper", ceiling=CEILING)
    assert advice.direction == "raise"
    assert needed is not None and advice.max_n >= HEADROOM * needed and advice.max_n % 10 == 0
    assert str(needed) in advice.reason


def test_a_capped_run_on_the_edge_keeps_the_cap():
    advice = advise_cap([Stop(200, False, 1e-5)], cap=200, block=10, floor=20, confidence=0.95,
                        side="upper", ceiling=CEILING)
    assert advice.direction == "keep" and advice.max_n == 200
    assert "too close to the edge" in advice.reason


def test_decided_runs_lower_the_cap_to_room_above_the_largest_stop():
    stops = [Stop(30, True), Stop(50, True), Stop(20, True)]
    advice = advise_cap(stops, cap=200, block=10, floor=20, confidence=0.95, side="upper",
                        ceiling=CEILING)
    assert advice.direction == "lower" and advice.max_n == 100  # 2 x 50
    assert "30, 50, 20" in advice.reason and "last 3 runs" in advice.reason


def test_a_cap_is_not_cut_below_the_floor_nor_by_a_sliver():
    low = advise_cap([Stop(10, True)], cap=200, block=10, floor=20, confidence=0.95,
                     side="upper", ceiling=CEILING)
    assert low.max_n == 20
    sliver = advise_cap([Stop(95, True)], cap=200, block=10, floor=20, confidence=0.95,
                        side="upper", ceiling=CEILING)
    assert sliver.direction == "keep" and sliver.max_n == 200  # 190 would cut only 5%


def test_the_newest_run_decides_the_direction():
    # Capped long ago, decided now: the cap is judged on the decided runs.
    advice = advise_cap([Stop(60, False, 0.3), Stop(40, True)], cap=400, block=10, floor=20,
                        confidence=0.95, side="upper", ceiling=CEILING)
    assert advice.direction == "lower" and advice.max_n == 80


def test_bad_input_is_refused():
    from meanband.errors import TrialError

    with pytest.raises(TrialError, match="at least one run"):
        advise_cap([], cap=200, block=10, floor=20, confidence=0.95, side="upper",
                   ceiling=CEILING)
    with pytest.raises(TrialError, match="positive counts"):
        advise_cap([Stop(5, True)], cap=200, block=0, floor=20, confidence=0.95, side="upper",
                   ceiling=CEILING)
    with pytest.raises(TrialError, match="ceiling"):
        trials_to_decide(0.5, confidence=0.95, side="upper", ceiling=1)


def test_a_lower_cap_keeps_the_false_pass_rate():
    # The confidence sequence holds at every n, so any cap keeps a true mean on the budget from
    # passing more than 1 - C of the time (Wang & Ramdas 2023); 20,000 streams, looks after
    # every 10 trials from 10 to the cap 40. MC SE at 5% is 0.15 points.
    rng = np.random.default_rng(11)
    streams = rng.normal(10.0, 1.0, (20_000, 40))
    looks = np.array([10, 20, 30, 40])
    w = anytime_multiplier(looks, 0.95, "upper")
    passed = np.zeros(streams.shape[0], dtype=bool)
    for n, multiplier in zip(looks, w, strict=True):
        head = streams[:, :n]
        bound = head.mean(axis=1) + multiplier * head.std(axis=1, ddof=1) / math.sqrt(n)
        passed |= bound <= 10.0
    assert passed.mean() <= 0.05 + 3 * 0.0015


# -- rows, the plan file and the settings ------------------------------------------------------


def sequential_row(*, reason: str, stopped: int, cap: int, mean: float = 10.0, sd: float = 1.0,
                   high: float = 12.0, verdict: str = "PASS") -> dict:
    return {
        "kind": "check", "nodeid": "test_pump.py::test_pressure", "series": "",
        "settings": {"power": 0.9},
        "decision": {
            "verdict": verdict,
            "interval": {"n": stopped, "mean": mean, "sd": sd, "sem": sd / math.sqrt(stopped),
                         "confidence": 0.95, "method": "anytime-t"},
            "band": {"low": -math.inf, "high": high},
        },
        "sequential": {"stopped_at": stopped, "looks": stopped // 10, "block": 10,
                       "max_n": cap, "first_look": 10, "reason": reason},
    }


def test_a_decided_row_suggests_a_lower_cap_and_a_default_cap_kept_is_not_written():
    suggestion = suggestion_for_row(sequential_row(reason="decided", stopped=10, cap=200))
    assert suggestion is not None and suggestion.max_n == 20 and suggestion.direction == "auto"
    kept = suggestion_for_row(sequential_row(reason="decided", stopped=95, cap=200))
    assert kept is not None and kept.max_n is None
    learned = suggestion_for_row(sequential_row(reason="decided", stopped=19, cap=40))
    assert learned is not None and learned.max_n == 40  # kept, but written: the plan set it


def test_a_capped_row_and_history_stops():
    row = sequential_row(reason="max_n", stopped=60, cap=60, mean=9.8, high=10.0,
                         verdict="UNDECIDED")
    stop = stop_of_row(row)
    assert not stop.decided and stop.effect == pytest.approx(0.2)
    suggestion = suggestion_for_row(row)
    assert suggestion is not None and suggestion.max_n is not None and suggestion.max_n > 60
    decided = sequential_row(reason="decided", stopped=30, cap=200)
    earlier = [Stop(50, True), Stop(40, True)]
    suggestion = suggestion_for_row(decided, earlier=earlier)
    assert suggestion is not None and suggestion.max_n == 100 and "50, 40, 30" in suggestion.reason


def test_plan_file_round_trips_a_cap_and_names_a_bad_one():
    text = dumps_plan([PlanEntry("t.py::test_a", "", None, "learned", max_n=120),
                       PlanEntry("t.py::test_b", "cold", 30, "count", max_n=80)])
    plan = loads_plan(text)
    assert plan.entries[("t.py::test_a", "")].max_n == 120
    assert plan.entries[("t.py::test_a", "")].n is None
    assert plan.entries[("t.py::test_b", "cold")].max_n == 80
    bad = '[plan]\nversion = 1\n\n[tests."t.py::test_a"]\nreason = "x"\nmax_n = 1\n'
    with pytest.raises(PlanError, match=r"line 6: tests.'t.py::test_a'.max_n must be a whole"):
        loads_plan(bad)


def test_max_n_setting_is_validated_and_held_to_the_ceiling():
    assert resolve([("marker", {"max_n": 50})]).max_n == 50
    assert Settings().max_n is None
    with pytest.raises(SettingError, match="bad value 1 for max_n"):
        resolve([("marker", {"max_n": 1})])
    with pytest.raises(SettingError, match=r"plan entry: 5,000 trials is above the ceiling"):
        resolve([("plan entry", {"max_n": 5000}), ("marker", {"max_trials": 1000})])


# -- in pytest -------------------------------------------------------------------------------

# Invented scenario: a kiln controller's thermocouple, read one value at a time.
SUITE = """
import numpy as np
import pytest

def reader(mean, seed):
    stream = iter(np.random.default_rng(seed).normal(mean, 1.0, 100_000))
    return lambda: next(stream)

def test_clear(trials):
    trials.sample(reader(10.0, 1), n="until-decided", band=dict(high=50.0))
    trials.check(high=50.0)

@pytest.mark.meanband(max_n=30)
def test_marked(trials):
    trials.sample(reader(10.0, 2), n="until-decided", band=dict(high=10.02))
    trials.check(high=10.02)

def test_own_cap(trials):
    trials.sample(reader(10.0, 3), n="until-decided", band=dict(high=10.02), max_n=20)
    trials.check(high=10.02)
"""

CONFTEST = """
import json

def pytest_meanband_session_finish(config, rows):
    (config.rootpath / "rows.json").write_text(json.dumps(rows))
"""


def caps(pytester: pytest.Pytester) -> dict[str, int]:
    rows = json.loads((pytester.path / "rows.json").read_text())
    return {r["nodeid"].split("::")[1]: r["sequential"]["max_n"] for r in rows}


def test_plan_marker_and_call_set_the_cap_in_that_order(pytester, run_suite):
    pytester.makeconftest(CONFTEST)
    pytester.makepyfile(test_kiln=SUITE)
    first = run_suite("--meanband-write-plan", "plan.toml")
    assert caps(pytester) == {"test_clear": 200, "test_marked": 30, "test_own_cap": 20}
    plan = loads_plan((pytester.path / "plan.toml").read_text())
    learned = plan.entries[("test_kiln.py::test_clear", "")]
    assert learned.n is None and learned.max_n == 20  # stopped at its first look, 10 trials
    assert "max_n=20" in first.stdout.str()  # the summary says the cap moved
    # The plan ranks below the marker and the call, above the default.
    (pytester.path / "plan.toml").write_text(dumps_plan([
        learned,
        PlanEntry("test_kiln.py::test_marked", "", None, "by hand", max_n=40),
        PlanEntry("test_kiln.py::test_own_cap", "", None, "by hand", max_n=40),
    ]))
    run_suite("--meanband-plan", "plan.toml", "--meanband-write-plan", "plan2.toml")
    assert caps(pytester) == {"test_clear": 20, "test_marked": 30, "test_own_cap": 20}
    rewritten = loads_plan((pytester.path / "plan2.toml").read_text())
    assert rewritten.entries[("test_kiln.py::test_clear", "")].max_n == 20  # kept, not lost


def test_max_n_option_and_a_bad_plan_cap(pytester, run_suite):
    pytester.makeconftest(CONFTEST)
    pytester.makepyfile(test_kiln=SUITE)
    run_suite("--meanband-max-n", "50", "-k", "clear")
    assert caps(pytester) == {"test_clear": 50}
    (pytester.path / "plan.toml").write_text(
        '[plan]\nversion = 1\n[tests."test_kiln.py::test_clear"]\nmax_n = "lots"\n')
    result = run_suite("--meanband-plan", "plan.toml", "-k", "clear")
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines(["*line 4: tests.'test_kiln.py::test_clear'.max_n must be a "
                                 "whole number*"])


def test_meanband_plan_learns_the_cap_from_stored_runs(pytester, run_suite):
    pytester.makeconftest(CONFTEST)
    pytester.makepyfile(test_kiln=SUITE)
    for _ in range(3):
        run_suite("--meanband-record", "--meanband-record-partial", "-k", "clear")
    store = str(pytester.path / ".meanband" / "history.sqlite")

    def plan(*args: str) -> str:
        done = subprocess.run([sys.executable, "-m", "meanband", "plan", "--store", store, *args],
                              capture_output=True, text=True, check=False)
        assert done.returncode == 0, done.stderr
        return done.stdout

    learned = plan("--write", str(pytester.path / "learned.toml"))
    assert "max_n=20" in learned and "the last 3 runs decided at 10, 10, 10 trials" in learned
    assert "this run decided" in plan("--learn-runs", "1")
    entries = loads_plan((pytester.path / "learned.toml").read_text()).entries
    assert entries[("test_kiln.py::test_clear", "")].max_n == 20
