"""Trial planning as a user runs it: suggestions, the plan file, precedence, n="auto"."""

from __future__ import annotations

import math
import re
import sys

import numpy as np
import pytest
from scipy import stats

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

RNG = np.random.default_rng(612)


def _kiln() -> list[float]:
    """A kiln zone 0.3 degC under a 300 degC limit, sd 0.5: the first 6 readings have exactly
    that mean and sd, so their 95% upper bound (300.11) straddles the limit."""
    z = RNG.standard_normal(400)
    z[:6] = (z[:6] - z[:6].mean()) / z[:6].std(ddof=1)
    return (299.7 + 0.5 * z).tolist()


KILN = _kiln()
# A sensor far inside its band: many more trials than it needs.
WIDE = (5.0 + 0.05 * RNG.standard_normal(400)).round(4).tolist()

SUITE = f"""
import itertools
import pytest

KILN = {KILN!r}
WIDE = {WIDE!r}

def test_kiln_zone(trials):
    reading = itertools.cycle(KILN).__next__
    trials.sample(reading, unit="degC")
    trials.check(high=300.0)

def test_wide_sensor(trials):
    reading = itertools.cycle(WIDE).__next__
    trials.sample(reading, n=60, unit="V")
    trials.check(4.0, 6.0)

def test_belt_series(trials):
    reading = itertools.cycle(KILN).__next__
    trials.series("cold").sample(reading, unit="degC")
    trials.series("cold").check(high=300.0)
"""


def _rows_by_test(result: pytest.RunResult) -> dict[str, int]:
    """Trial counts per test (and series) from the summary table."""
    found = {}
    for line in result.outlines:
        m = re.match(r"^test_\w+\.py::(\w+(?: \[\w+\])?)\s+(\d+)\s", line)
        if m:
            found[m.group(1)] = int(m.group(2))
    return found


def test_write_plan_then_run_with_it(run_suite, pytester):
    pytester.makepyfile(test_kiln=SUITE)
    first = run_suite("--meanband-n", "6", "--meanband-write-plan", "plan.toml")
    first.assert_outcomes(passed=1, failed=2)
    plan = tomllib.loads((pytester.path / "plan.toml").read_text())
    kiln = plan["tests"]["test_kiln.py::test_kiln_zone"]
    assert kiln["n"] > 6 and kiln["reason"].startswith("UNDECIDED at n=6; about")
    wide = plan["tests"]["test_kiln.py::test_wide_sensor"]
    assert wide["n"] < 60 and "wide margin" in wide["reason"]
    cold = plan["tests"]["test_kiln.py::test_belt_series"]["series"]["cold"]
    assert cold["n"] == kiln["n"]  # the same readings give the same count
    assert plan["plan"]["power"] == 0.9
    text = "\n".join(first.outlines)
    assert f"test_kiln.py::test_kiln_zone: UNDECIDED at n=6; about {kiln['n']} trials" in text
    assert "plan written to plan.toml" in text

    second = run_suite("--meanband-n", "6", "--meanband-plan", "plan.toml")
    counts = _rows_by_test(second)
    assert counts["test_kiln_zone"] == kiln["n"]  # plan beats the command line
    assert counts["test_belt_series [cold]"] == cold["n"]
    assert counts["test_wide_sensor"] == 60  # the call argument beats the plan
    assert "plan plan.toml: 3 of 3 planned tests recorded trials in this run" in second.outlines


@pytest.mark.parametrize("workers", [[], ["-n", "2"]])
def test_plan_written_under_xdist_matches(run_suite, pytester, workers):
    pytester.makepyfile(test_kiln=SUITE)
    run_suite("--meanband-n", "6", "--meanband-write-plan", "plan.toml", *workers)
    plan = tomllib.loads((pytester.path / "plan.toml").read_text())
    assert set(plan["tests"]) == {"test_kiln.py::test_kiln_zone", "test_kiln.py::test_wide_sensor",
                                  "test_kiln.py::test_belt_series"}
    assert plan["tests"]["test_kiln.py::test_kiln_zone"]["n"] > 6


PRECEDENCE = """
import pytest

def test_plain(trials):
    assert trials.sample(float, 1, unit="V").size == EXPECT_PLAIN

@pytest.mark.meanband(n=8)
def test_marked(trials):
    assert trials.sample(float, 1).size == 8

def test_call(trials):
    assert trials.sample(float, 1, n=5).size == 5

def test_unplanned(trials):
    assert trials.sample(float, 1).size == EXPECT_UNPLANNED

def test_series(trials):
    assert trials.series("hot").sample(float, 1).size == 9
    assert trials.series("other").sample(float, 1).size == EXPECT_UNPLANNED
    assert trials.sample(float, 1).size == EXPECT_UNPLANNED
"""

PLAN = """
[tests."test_order.py::test_plain"]
n = 12
[tests."test_order.py::test_marked"]
n = 13
[tests."test_order.py::test_call"]
n = 14
[tests."test_order.py::test_series".series.hot]
n = 9
"""


@pytest.mark.parametrize("source", ["option", "ini"])
def test_precedence_call_marker_plan_command_line_ini(run_suite, pytester, source):
    pytester.makepyfile(test_order=PRECEDENCE.replace("EXPECT_PLAIN", "12")
                        .replace("EXPECT_UNPLANNED", "7"))
    pytester.path.joinpath("plan.toml").write_text(PLAN)
    if source == "option":
        pytester.makeini("[pytest]\nmeanband_n = 4\n")
        result = run_suite("--meanband-plan", "plan.toml", "--meanband-n", "7")
    else:
        pytester.makeini("[pytest]\nmeanband_n = 7\nmeanband_plan = plan.toml\n")
        result = run_suite()
    result.assert_outcomes(passed=5)


def test_stale_ids_are_reported(run_suite, pytester):
    pytester.makepyfile(test_order=PRECEDENCE.replace("EXPECT_PLAIN", "12")
                        .replace("EXPECT_UNPLANNED", "30"))
    pytester.makepyfile(test_elsewhere="def test_other():\n    pass\n")
    pytester.path.joinpath("plan.toml").write_text(PLAN + """
[tests."test_order.py::test_renamed_long_ago"]
n = 20
[tests."test_gone.py::test_whatever"]
n = 20
[tests."test_elsewhere.py::test_other"]
n = 20
[tests."test_order.py::test_series".series.gone]
n = 5
""")
    for workers in ([], ["-n", "2"]):
        result = run_suite("--meanband-plan", "plan.toml", "test_order.py", *workers)
        result.assert_outcomes(passed=5)
        text = "\n".join(result.outlines)
        assert "plan plan.toml: 2 planned test id(s) no longer in the suite" in text
        assert "  test_order.py::test_renamed_long_ago" in result.outlines
        assert "  test_gone.py::test_whatever" in result.outlines
        # A file this run did not collect is not judged.
        assert "  test_elsewhere.py::test_other" not in result.outlines
        assert ("plan plan.toml: planned series no longer recorded: test_order.py::test_series "
                "[gone]") in text


def test_stale_ids_survive_deselection(run_suite, pytester):
    pytester.makepyfile(test_order=PRECEDENCE.replace("EXPECT_PLAIN", "12")
                        .replace("EXPECT_UNPLANNED", "30"))
    pytester.path.joinpath("plan.toml").write_text(PLAN)
    result = run_suite("--meanband-plan", "plan.toml", "-k", "plain")
    result.assert_outcomes(passed=1, deselected=4)
    assert not any("no longer in the suite" in line for line in result.outlines)


def test_malformed_plan_is_a_usage_error_with_the_line(run_suite, pytester):
    pytester.makepyfile(test_order="def test_x():\n    pass\n")
    pytester.path.joinpath("plan.toml").write_text('[tests."a::b"]\nn = 12\nn == 3\n')
    result = run_suite("--meanband-plan", "plan.toml")
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines(["*option --meanband-plan: plan file plan.toml is not valid TOML*"
                                 "line 3*"])
    pytester.path.joinpath("plan.toml").write_text('[tests."a::b"]\nreason = "x"\nn = 1\n')
    result = run_suite("--meanband-plan", "plan.toml")
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines(["*plan.toml, line 3: *n must be a whole number of trials >= 2*"])


def test_missing_plan_from_ini_is_a_usage_error(run_suite, pytester):
    pytester.makepyfile(test_order="def test_x():\n    pass\n")
    pytester.makeini("[pytest]\nmeanband_plan = plans/absent.toml\n")
    result = run_suite()
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines(["*ini key meanband_plan: plan file *absent.toml does not exist*"])


def test_partial_run_keeps_the_rest_of_the_plan(run_suite, pytester):
    pytester.makepyfile(test_kiln=SUITE)
    run_suite("--meanband-n", "6", "--meanband-write-plan", "plan.toml")
    before = tomllib.loads((pytester.path / "plan.toml").read_text())["tests"]
    run_suite("--meanband-n", "40", "--meanband-write-plan", "plan.toml", "-k", "kiln_zone")
    after = tomllib.loads((pytester.path / "plan.toml").read_text())["tests"]
    assert after["test_kiln.py::test_wide_sensor"] == before["test_kiln.py::test_wide_sensor"]
    assert after["test_kiln.py::test_belt_series"] == before["test_kiln.py::test_belt_series"]
    assert "n=40" in after["test_kiln.py::test_kiln_zone"]["reason"]


def test_decisive_fail_has_no_suggestion_but_keeps_its_count(run_suite, pytester):
    pytester.makepyfile(test_fail="""
def test_hot(trials):
    trials.extend([310.0, 311.0, 309.5, 310.5, 310.2, 309.8], unit="degC")
    trials.check(high=300.0)
""")
    result = run_suite("--meanband-write-plan", "plan.toml")
    assert not any("suggested trial counts" in line for line in result.outlines)
    entry = tomllib.loads((pytester.path / "plan.toml").read_text())["tests"]["test_fail.py::test_hot"]
    assert entry["n"] == 6 and "failed decisively" in entry["reason"]


def test_power_setting_reaches_the_suggestion(run_suite, pytester):
    pytester.makepyfile(test_kiln=SUITE)
    low = run_suite("--meanband-n", "6", "--meanband-power", "0.8", "--meanband-write-plan", "a.toml")
    high = run_suite("--meanband-n", "6", "--meanband-power", "0.95", "--meanband-write-plan", "b.toml")
    assert "suggested trial counts (80% power):" in low.outlines
    assert "suggested trial counts (95% power):" in high.outlines
    n_low = tomllib.loads((pytester.path / "a.toml").read_text())["tests"]
    n_high = tomllib.loads((pytester.path / "b.toml").read_text())["tests"]
    key = "test_kiln.py::test_kiln_zone"
    assert n_low[key]["n"] < n_high[key]["n"]


# -- n="auto" ---------------------------------------------------------------------------------

AUTO = (9.5 + 0.5 * np.random.default_rng(5).standard_normal(600)).round(4).tolist()


def _stein_total(values: list[float], edge: float, pilot: int = 10, cap: int | None = None) -> int:
    # Stein (1945): N2 = ceil(((t[n0-1](0.95) + t[n0-1](0.9)) * s0 / d0)^2), at least 2, from
    # scipy.stats.t; the total adds the pilot and is cut at the cap.
    x = np.array(values[:pilot])
    reach = stats.t.ppf(0.95, pilot - 1) + stats.t.ppf(0.9, pilot - 1)
    second = max(math.ceil((reach * x.std(ddof=1) / (edge - x.mean())) ** 2), 2)
    total = pilot + second
    return total if cap is None else min(total, cap)


AUTO_SUITE = f"""
import itertools
import pytest
from meanband import TrialError

AUTO = {AUTO!r}

def test_auto(trials):
    values = trials.sample(itertools.cycle(AUTO).__next__, n="auto", band=dict(high=10.0),
                           unit="V")
    assert values.size == EXPECT_FREE
    trials.check()

def test_auto_capped(trials):
    values = trials.sample(itertools.cycle(AUTO).__next__, n="auto", band=dict(high=10.0),
                           max_n=EXPECT_CAP)
    assert values.size == EXPECT_CAP
    trials.check(high=10.0)

def test_auto_timed(trials):
    values = trials.time(sum, range(50), n="auto", band=dict(high="1s"), max_n=40)
    assert 12 <= values.size <= 40
    trials.check()

def test_auto_needs_a_band(trials):
    with pytest.raises(TrialError, match="needs the band before collecting"):
        trials.sample(float, 1, n="auto")
    with pytest.raises(TrialError, match="go with n='auto' only"):
        trials.sample(float, 1, n=5, max_n=50)
    with pytest.raises(TrialError, match="max_n=5 leaves no room"):
        trials.sample(float, 1, n="auto", band=dict(high=2.0), max_n=5)

@pytest.mark.xfail(raises=AssertionError, strict=True)
def test_auto_capped_undecided(trials):
    trials.sample(itertools.cycle(AUTO).__next__, n="auto", band=dict(high=9.55), max_n=14)
    trials.check()

def test_auto_other_band_is_refused(trials):
    trials.sample(itertools.cycle(AUTO).__next__, n="auto", band=dict(high=10.0))
    with pytest.raises(TrialError, match="differs from the band"):
        trials.check(high=11.0)
"""


def test_auto_with_and_without_a_cap(run_suite, pytester):
    free = _stein_total(AUTO, 10.0)
    cap = free - 5
    assert cap >= 14
    pytester.makepyfile(test_auto=AUTO_SUITE.replace("EXPECT_FREE", str(free))
                        .replace("EXPECT_CAP", str(cap)))
    result = run_suite("--meanband-write-plan", "plan.toml")
    result.assert_outcomes(passed=5, xfailed=1)
    text = "\n".join(result.outlines)
    assert ("test_auto.py::test_auto_capped_undecided: UNDECIDED at n=4 after a pilot of 10: the "
            "two-stage rule was capped at max_n=14; raise max_n") in text
    assert "count chosen at run time" not in text  # decided n="auto" checks need no advice
    assert "[tests." not in (pytester.path / "plan.toml").read_text()  # nor a plan entry
    assert f"test_auto.py::test_auto: two-stage: pilot of 10 trials, then {free - 10} more" in text
    assert re.search(rf"test_auto.py::test_auto_capped: two-stage: the pilot of 10 trials asked "
                     rf"for {free - 10} more; capped at max_n={cap} \({cap - 10} more\)", text)
    # The table's n is the second stage's count: the mean the verdict rests on.
    assert re.search(rf"test_auto.py::test_auto\s+{free - 10}\s.*95% two-stage\s+<= 10 V\s+PASS",
                     text)


def test_plan_write_problems_are_reported_not_lost(run_suite, pytester):
    pytester.makepyfile(test_kiln=SUITE)
    (pytester.path / "plan.toml").write_text("this is not [toml\n")
    result = run_suite("--meanband-n", "6", "--meanband-write-plan", "plan.toml")
    text = "\n".join(result.outlines)
    assert "plan: plan file plan.toml is not valid TOML" in text and "it was replaced" in text
    assert "test_kiln.py::test_kiln_zone" in (pytester.path / "plan.toml").read_text()
    (pytester.path / "a-directory").mkdir()
    result = run_suite("--meanband-n", "6", "--meanband-write-plan", "a-directory")
    assert any(line.startswith("plan: could not write the plan file a-directory")
               for line in result.outlines)
    result.assert_outcomes(passed=1, failed=2)  # the run's own outcome is untouched


def test_a_deeply_nested_plan_file_is_a_usage_error_naming_it(run_suite, pytester):
    pytester.makepyfile(test_kiln=SUITE)
    (pytester.path / "deep.toml").write_text("a = " + "[" * 100_000 + "]" * 100_000)
    result = run_suite("--meanband-plan", "deep.toml")
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines(["ERROR: option --meanband-plan: plan file deep.toml: *nested too deeply*"])
    assert "RecursionError" not in result.stderr.str()


@pytest.mark.parametrize("how", ["option", "ini"])
def test_a_plan_file_over_the_read_limit_is_a_usage_error(run_suite, pytester, how):
    pytester.makepyfile(test_kiln=SUITE)
    first = run_suite("--meanband-n", "6", "--meanband-write-plan", "plan.toml")
    assert first.ret == 1
    if how == "ini":
        pytester.makeini("[pytest]\nmeanband_max_read_bytes = 16\n")
        args: tuple[str, ...] = ("--meanband-plan", "plan.toml")
    else:
        args = ("--meanband-plan", "plan.toml", "--meanband-max-read-bytes", "16")
    result = run_suite(*args)
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines(["*plan file plan.toml is larger than the read limit of 16 bytes*"
                                 "--meanband-max-read-bytes or ini meanband_max_read_bytes*"])
    within = run_suite("--meanband-plan", "plan.toml", "--meanband-max-read-bytes", "1MiB")
    assert within.ret == pytest.ExitCode.OK  # the plan's larger counts decide every check
    assert "plan plan.toml: 3 of 3 planned tests recorded trials in this run" in within.outlines


def test_a_bad_read_limit_is_a_usage_error_naming_the_option(run_suite, pytester):
    pytester.makepyfile(test_kiln=SUITE)
    result = run_suite("--meanband-max-read-bytes", "huge")
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines(["*option --meanband-max-read-bytes: a byte count is a whole*"])


def test_a_fifo_given_as_the_plan_file_is_refused_at_once(run_suite, pytester):
    import os

    if not hasattr(os, "mkfifo"):
        pytest.skip("needs FIFOs")
    pytester.makepyfile(test_kiln=SUITE)
    os.mkfifo(pytester.path / "plan.toml")
    result = run_suite("--meanband-plan", "plan.toml")
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines(["*plan file plan.toml is a FIFO (named pipe), not a regular file*"])


def test_a_plan_count_above_the_ceiling_names_the_plan_file(run_suite, pytester):
    pytester.makepyfile(test_kiln="def test_zone(trials):\n    trials.sample(lambda: 1.0)\n")
    (pytester.path / "plan.toml").write_text(
        '[plan]\nversion = 1\n\n[tests."test_kiln.py::test_zone"]\nn = 100000000000\n')
    result = run_suite("--meanband-plan", "plan.toml")
    result.assert_outcomes(errors=1)
    assert ("plan file plan.toml: entry for test_kiln.py::test_zone: 100,000,000,000 trials is "
            "above the ceiling of 1,000,000 trials") in result.stdout.str()


def test_the_ceiling_can_be_raised_for_a_planned_count(run_suite, pytester):
    pytester.makepyfile(test_kiln="def test_zone(trials):\n    trials.sample(lambda: 1.0)\n")
    (pytester.path / "plan.toml").write_text(
        '[plan]\nversion = 1\n\n[tests."test_kiln.py::test_zone"]\nn = 12\n')
    low = run_suite("--meanband-plan", "plan.toml", "--meanband-max-trials", "10")
    low.assert_outcomes(errors=1)
    assert "12 trials is above the ceiling of 10 trials (max_trials, from option " in (
        low.stdout.str())
    run_suite("--meanband-plan", "plan.toml", "--meanband-max-trials", "12").assert_outcomes(
        passed=1)
