"""Recording runs and comparing with a baseline, as a user runs pytest."""

from __future__ import annotations

import hashlib
import math
import re
from xml.etree import ElementTree

import numpy as np
import pytest
from meanband.store.history import HistoryStore
from scipy import stats

SUITE = """
import numpy as np

QUOTE = {quote!r}
RAIL = {rail!r}

def test_quote(trials):
    trials.extend(np.array(QUOTE), unit="s")
    trials.check(high="5ms")

def test_rail(trials):
    trials.series("volts").extend(np.array(RAIL), unit="V")
"""


def data(seed: int, slowdown: float = 1.0, shift: float = 0.0) -> dict[str, list[float]]:
    """Invented noisy trials: fare-quote latency (30% log-scale noise) and a supply rail."""
    rng = np.random.default_rng(seed)
    return {
        "quote": rng.lognormal(math.log(400e-6 * slowdown), 0.3, 40).tolist(),
        "rail": rng.normal(12.0 + shift, 0.05, 30).tolist(),
    }


def write_suite(pytester: pytest.Pytester, values: dict[str, list[float]]) -> None:
    pytester.makepyfile(test_fares=SUITE.format(**values))


def baseline_line(result: pytest.RunResult, test: str) -> str:
    for line in result.outlines:
        if line.startswith(f"test_fares.py::{test} ") and re.search(r"\d\.\d{3}x \[", line):
            return line
    raise AssertionError(f"no baseline line for {test}:\n" + "\n".join(result.outlines))


def test_twenty_percent_slowdown_fails_its_test_with_the_baseline_block(
    pytester: pytest.Pytester, run_suite
) -> None:
    write_suite(pytester, data(1))
    first = run_suite("--meanband-record=main")
    first.assert_outcomes(passed=2)
    assert first.ret == 0
    first.stdout.fnmatch_lines(["meanband: recorded run 1 'main' in *history.sqlite"])
    assert (pytester.path / ".meanband" / "history.sqlite").exists()

    slower = data(2, slowdown=1.3)
    write_suite(pytester, slower)
    # No run-to-run allowance, so the interval is Welch's on the logs and can be checked.
    second = run_suite("--meanband-baseline=main", "--meanband-run-noise=0",
                       "--junitxml=junit.xml")
    second.assert_outcomes(failed=1, passed=1)  # the regression is the test's own failure
    assert second.ret == 1
    line = baseline_line(second, "test_quote")
    assert line.endswith("regressed")
    # Reference: scipy.stats.ttest_ind(equal_var=False) on the logs, CI exponentiated.
    ci = stats.ttest_ind(np.log(slower["quote"]), np.log(data(1)["quote"]),
                         equal_var=False).confidence_interval(0.95)
    interval = f"[{math.exp(ci.low):.3f}, {math.exp(ci.high):.3f}]"
    assert interval in line
    assert "<= 1.05x" in line
    second.stdout.fnmatch_lines([
        "*_ test_quote _*",
        "meanband baseline: test_fares.py::test_quote: REGRESSED against run 1 'main' of *",
        f"  ratio *x {interval.replace('[', '[[]')} at 95%; allowed <= 1.05x",
        "  mean * (n=40) against * (n=40 over 1 run)",
        "  p-value * that it is within the limit; threshold 0.0125 (Holm, family-wise over 2 "
        "comparisons)",
        "  run-to-run noise allowed for: 0.0% between runs (none measured)",
    ])
    second.stdout.fnmatch_lines([
        "meanband: REGRESSION: 1 check(s) slower or moved beyond the allowed change from run 1 "
        "'main'; their tests failed:",
        "  test_fares.py::test_quote",
    ])
    # The plugin's source never shows in the failure: the block is the whole message.
    failure = second.stdout.str().split("_ test_quote _", 1)[1].split("= meanband =", 1)[0]
    assert "def " not in failure and "Recorder" not in failure
    # JUnit carries the failure and the baseline figures.
    junit = ElementTree.parse(pytester.path / "junit.xml").getroot()
    case = next(c for c in junit.iter("testcase") if c.get("name") == "test_quote")
    assert case.find("failure") is not None
    props = {p.get("name"): p.get("value") for p in case.iter("property")}
    assert props["meanband.baseline.regression"] == "True"
    assert props["meanband.baseline.status"] == "regressed"
    assert float(props["meanband.baseline.ratio_low"]) == pytest.approx(math.exp(ci.low), rel=1e-6)
    assert float(props["meanband.baseline.ratio_high"]) == pytest.approx(math.exp(ci.high),
                                                                         rel=1e-6)
    rail = next(c for c in junit.iter("testcase") if c.get("name") == "test_rail")
    assert rail.find("failure") is None
    rail_props = {p.get("name"): p.get("value") for p in rail.iter("property")}
    assert rail_props["meanband[volts].baseline.regression"] == "False"


def test_regressed_test_is_reached_by_last_failed_and_stops_x(
    pytester: pytest.Pytester, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv("PYTEST_DISABLE_PLUGIN_AUTOLOAD", "1")
    write_suite(pytester, data(1))
    assert pytester.runpytest("-p", "meanband", "--meanband-record=main").ret == 0
    write_suite(pytester, data(2, slowdown=1.3))
    flags = ("-p", "meanband", "--meanband-baseline=main", "--meanband-run-noise=0")
    pytester.runpytest(*flags).assert_outcomes(failed=1, passed=1)
    again = pytester.runpytest(*flags, "--lf", "-v")
    again.assert_outcomes(failed=1)
    again.stdout.fnmatch_lines(["*test_fares.py::test_quote FAILED*"])
    assert "test_rail" not in again.stdout.str()
    stopped = pytester.runpytest(*flags, "-x")
    stopped.assert_outcomes(failed=1)  # test_rail never ran


def test_same_distribution_is_not_a_regression(pytester: pytest.Pytester, run_suite) -> None:
    write_suite(pytester, data(1))
    run_suite("--meanband-record=main")
    write_suite(pytester, data(3))
    result = run_suite("--meanband-baseline")
    assert result.ret == 0
    for test in ("test_quote", "test_rail [volts]"):
        verdict = baseline_line(result, test).rsplit("  ", 1)[-1]
        assert verdict in ("no regression", "cannot tell yet")
    assert "REGRESSION" not in result.stdout.str()


def test_moved_measurement_beyond_max_change_is_a_regression(
    pytester: pytest.Pytester, run_suite
) -> None:
    write_suite(pytester, data(1))
    run_suite("--meanband-record")
    write_suite(pytester, data(4, shift=0.6))  # 12.0 V -> 12.6 V: +5%, beyond 2%
    result = run_suite("--meanband-baseline", "--meanband-max-change=2%")
    assert result.ret == 1
    line = baseline_line(result, "test_rail [volts]")
    assert "0.98x..1.02x" in line and line.endswith("regressed")


def test_limits_from_the_ini_file(pytester: pytest.Pytester, run_suite) -> None:
    pytester.makeini("[pytest]\nmeanband_max_increase = 50%\nmeanband_store = stores/h.sqlite\n")
    write_suite(pytester, data(1))
    run_suite("--meanband-record=main")
    assert (pytester.path / "stores" / "h.sqlite").exists()
    write_suite(pytester, data(2, slowdown=1.2))
    result = run_suite("--meanband-baseline=main")
    assert result.ret == 0 and "<= 1.5x" in baseline_line(result, "test_quote")


def test_test_without_baseline_gets_a_note(pytester: pytest.Pytester, run_suite) -> None:
    write_suite(pytester, data(1))
    run_suite("--meanband-record=main")
    pytester.makepyfile(test_new="def test_fresh(trials):\n"
                        "    trials.extend([1.0, 1.1, 0.9, 1.05], unit='V')\n")
    result = run_suite("--meanband-baseline=main")
    assert result.ret == 0
    result.stdout.fnmatch_lines([
        "baseline notes:",
        "  test_new.py::test_fresh: no baseline in run 1; nothing to compare yet",
    ])


def test_record_and_baseline_under_xdist_write_once(pytester: pytest.Pytester, run_suite) -> None:
    write_suite(pytester, data(1))
    first = run_suite("-n", "2", "--meanband-record=main")
    assert first.ret == 0
    write_suite(pytester, data(2, slowdown=1.3))
    second = run_suite("-n", "2", "--meanband-baseline=main", "--meanband-record=feature",
                       "--meanband-run-noise=0")
    assert second.ret == 1
    second.assert_outcomes(failed=1, passed=1)  # workers judge each check while it runs
    second.stdout.fnmatch_lines(["meanband baseline: test_fares.py::test_quote: REGRESSED *"])
    assert baseline_line(second, "test_quote").endswith("regressed")
    with HistoryStore(pytester.path / ".meanband" / "history.sqlite", create=False) as store:
        runs = store.runs()
        assert [(r.label, r.checks) for r in runs] == [("feature", 2), ("main", 2)]
        stored = {c.nodeid: c for c in store.checks(runs[0].id)}
    # The trials that crossed from the workers are stored exactly.
    assert stored["test_fares.py::test_quote"].values.tolist() == data(2, slowdown=1.3)["quote"]


def test_baseline_key_reaches_other_plugins(pytester: pytest.Pytester, run_suite) -> None:
    pytester.makeconftest(
        """
        def pytest_meanband_session_finish(config, rows):
            statuses = sorted(r["baseline"]["status"] for r in rows)
            print("\\nSTATUSES", statuses)
        """
    )
    write_suite(pytester, data(1))
    run_suite("--meanband-record=main")
    write_suite(pytester, data(5, slowdown=2.0))
    result = run_suite("-s", "--meanband-baseline=main")
    result.stdout.fnmatch_lines(["STATUSES ['no regression', 'regressed']"])


# -- bad input and faults ------------------------------------------------------------------------


def test_missing_baseline_is_a_usage_error(pytester: pytest.Pytester, run_suite) -> None:
    write_suite(pytester, data(1))
    result = run_suite("--meanband-baseline=main")
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines(["*--meanband-baseline: no history store at *; record a run*"])
    run_suite("--meanband-record=nightly")
    result = run_suite("--meanband-baseline=main")
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines(["*no run labelled or numbered 'main'*labels present: nightly*"])


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["--meanband-record", "--meanband-max-increase=lots"],
         "*cannot read --meanband-max-increase='lots'*"),
        (["--meanband-record", "--meanband-max-change=-1%"], "*--meanband-max-change must be*>= 0*"),
        (["--meanband-record", "--meanband-store-timeout=soon"], "*--meanband-store-timeout*not a number*"),
        (["--meanband-record", "test_fares.py"], "*--meanband-record took 'test_fares.py' as its label*"),
    ],
)
def test_bad_options_are_usage_errors(
    pytester: pytest.Pytester, run_suite, args: list[str], message: str
) -> None:
    write_suite(pytester, data(1))
    result = run_suite(*args)
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines([message])


def test_non_sqlite_store_is_reported_and_never_overwritten(
    pytester: pytest.Pytester, run_suite
) -> None:
    write_suite(pytester, data(1))
    store = pytester.path / "fares.sqlite"
    store.write_text("route,fare\nA,1.20\n")
    before = hashlib.sha256(store.read_bytes()).hexdigest()
    result = run_suite(f"--meanband-store={store}", "--meanband-record=main")
    result.assert_outcomes(passed=2)
    result.stdout.fnmatch_lines([
        "test_fares.py::test_quote * PASS",  # the results are still shown
        f"meanband: ERROR: this run was not recorded: {store} is not an SQLite file*Move it aside*",
    ])
    assert result.ret == 1
    assert hashlib.sha256(store.read_bytes()).hexdigest() == before


def test_unwritable_store_location_keeps_the_results(pytester: pytest.Pytester, run_suite) -> None:
    write_suite(pytester, data(1))
    (pytester.path / "blocked").write_text("a file where a directory should be")
    result = run_suite("--meanband-store=blocked/history.sqlite", "--meanband-record")
    result.assert_outcomes(passed=2)
    result.stdout.fnmatch_lines([
        "meanband: 1 check: 1 PASS*",
        "test_fares.py::test_quote * PASS",
        "*meanband: ERROR: this run was not recorded: cannot open the history store *blocked*",
    ])
    assert result.ret == 1


def test_failing_tests_keep_their_exit_status_when_recording_fails(
    pytester: pytest.Pytester, run_suite
) -> None:
    pytester.makepyfile("def test_broken(trials):\n    trials.extend([1.0, 2.0])\n    assert False\n")
    (pytester.path / "blocked").write_text("x")
    result = run_suite("--meanband-store=blocked/h.sqlite", "--meanband-record")
    result.assert_outcomes(failed=1)
    assert result.ret == pytest.ExitCode.TESTS_FAILED
    result.stdout.fnmatch_lines(["*this run was not recorded*"])


def test_no_store_is_touched_without_the_options(pytester: pytest.Pytester, run_suite) -> None:
    write_suite(pytester, data(1))
    result = run_suite()
    assert result.ret == 0
    assert not (pytester.path / ".meanband").exists()
    assert "baseline" not in result.stdout.str()


def test_recording_a_run_without_trials_says_so(pytester: pytest.Pytester, run_suite) -> None:
    pytester.makepyfile("def test_plain():\n    assert True\n")
    result = run_suite("--meanband-record=main")
    assert result.ret == 0
    result.stdout.fnmatch_lines(["meanband: no test recorded trials, so there was nothing to record"])
    assert not (pytester.path / ".meanband").exists()


def test_changed_unit_is_not_compared(pytester: pytest.Pytester, run_suite) -> None:
    write_suite(pytester, data(1))
    run_suite("--meanband-record=main")
    pytester.makepyfile(test_fares=SUITE.format(**data(1)).replace('unit="V"', 'unit="mV"'))
    result = run_suite("--meanband-baseline=main")
    assert result.ret == 0
    result.stdout.fnmatch_lines([
        "  test_fares.py::test_rail [[]volts[]]: not compared: the unit changed from V to mV since run 1",
    ])


def test_zero_timings_fall_back_to_fieller_with_a_note(pytester: pytest.Pytester, run_suite) -> None:
    pytester.makepyfile(test_fares="def test_quote(trials):\n"
                        "    trials.extend([0.0, 2e-6, 1e-6, 3e-6, 2e-6, 1e-6], unit='s')\n")
    run_suite("--meanband-record=main")
    result = run_suite("--meanband-baseline=main")
    result.stdout.fnmatch_lines(["  test_fares.py::test_quote: *some timings are zero or negative, "
                                 "so they were compared on the relative scale*"])


def test_cannot_tell_yet_says_how_many_trials_would_decide(
    pytester: pytest.Pytester, run_suite
) -> None:
    write_suite(pytester, data(1))
    run_suite("--meanband-record=main")
    write_suite(pytester, data(6, slowdown=1.05))  # right on the limit, 30% noise, 40 trials
    # No run-to-run allowance: the trials alone leave it undecided, and more of them can decide.
    result = run_suite("--meanband-baseline=main", "--meanband-run-noise=0")
    assert result.ret == 0  # undecided does not fail the session
    assert baseline_line(result, "test_quote").endswith("cannot tell yet")
    result.stdout.re_match_lines([
        r"  test_fares.py::test_quote: cannot tell yet at n=40 \(baseline n=40\); "
        r"(about \d+ trials in both runs would likely decide it|the ratio sits on the limit.*)",
    ])


def test_locked_store_fails_clearly_after_the_timeout(pytester: pytest.Pytester, run_suite) -> None:
    import sqlite3

    write_suite(pytester, data(1))
    run_suite("--meanband-record=main")
    store = pytester.path / ".meanband" / "history.sqlite"
    holder = sqlite3.connect(store, isolation_level=None)
    holder.execute("BEGIN IMMEDIATE")  # another run is saving and does not finish
    try:
        result = run_suite("--meanband-record=second", "--meanband-store-timeout=0.2")
    finally:
        holder.execute("ROLLBACK")
        holder.close()
    result.assert_outcomes(passed=2)
    result.stdout.fnmatch_lines([
        "test_fares.py::test_quote * PASS",
        "meanband: ERROR: this run was not recorded: the history store * stayed locked by another "
        "process for 0.2 s*",
    ])
    assert result.ret == 1
    with HistoryStore(store, create=False) as s:
        assert [r.label for r in s.runs()] == ["main"]


def test_label_with_equals_may_match_a_directory_name(pytester: pytest.Pytester, run_suite) -> None:
    write_suite(pytester, data(1))
    (pytester.path / "main").mkdir()
    result = run_suite("--meanband-record=main")
    assert result.ret == 0
    result.stdout.fnmatch_lines(["meanband: recorded run 1 'main' in *"])


def test_interrupted_session_is_not_recorded(pytester: pytest.Pytester, run_suite) -> None:
    pytester.makepyfile(test_fares="def test_a(trials):\n    trials.extend([1.0, 1.1, 0.9])\n\n"
                        "import pytest\n\ndef test_b():\n    pytest.exit('bench power lost')\n")
    result = run_suite("--meanband-record=main")
    assert result.ret == pytest.ExitCode.INTERRUPTED
    result.stdout.fnmatch_lines(["*meanband: the session ended early (exit status 2), so this run "
                                 "was not recorded"])
    assert not (pytester.path / ".meanband").exists()


def test_baseline_from_another_machine_gets_a_warning(pytester: pytest.Pytester, run_suite) -> None:
    """A run stored before fingerprints existed: the machine words, as a note."""
    import sqlite3

    write_suite(pytester, data(1))
    run_suite("--meanband-record=main")
    store = pytester.path / ".meanband" / "history.sqlite"
    conn = sqlite3.connect(store)  # pretend it was recorded on a CI runner, without fingerprint
    try:
        conn.execute("UPDATE runs SET host = 'ci-runner-3', cpus = 64, fingerprint_json = NULL")
        conn.commit()
    finally:
        conn.close()
    result = run_suite("--meanband-baseline=main")
    result.stdout.fnmatch_lines(["note: the baseline ran on ci-runner-3 (*, 64 CPUs, *), this run "
                                 "on *; timing ratios compare the machines as well as the code"])
    write_suite(pytester, data(1))
    same = run_suite("--meanband-record=again", "--meanband-baseline=main")
    assert "timing ratios compare the machines" in same.stdout.str()
    again = run_suite("--meanband-baseline=again")
    assert "timing ratios compare the machines" not in again.stdout.str()


def test_baseline_with_another_fingerprint_cannot_be_compared(
    pytester: pytest.Pytester, run_suite
) -> None:
    import json
    import sqlite3

    write_suite(pytester, data(1))
    run_suite("--meanband-record=main")
    store = pytester.path / ".meanband" / "history.sqlite"
    conn = sqlite3.connect(store)
    try:
        (text,) = conn.execute("SELECT fingerprint_json FROM runs").fetchone()
        fingerprint = json.loads(text)
        assert {"cpu_model", "cpu_count", "python", "clock_source", "load"} <= set(fingerprint)
        fingerprint.update(cpu_count=64, governor="performance")
        conn.execute("UPDATE runs SET fingerprint_json = ?", (json.dumps(fingerprint),))
        conn.commit()
    finally:
        conn.close()
    write_suite(pytester, data(2, slowdown=2.0))
    result = run_suite("--meanband-baseline=main")
    result.assert_outcomes(passed=2)  # no verdict across machines
    assert result.ret == 0
    result.stdout.fnmatch_lines([
        "*test_fares.py::test_quote: cannot compare: the baseline ran on a machine that times "
        "differently (cpu count 64 -> *",
        "meanband: WARNING: the baseline ran on a machine that times differently (cpu count 64 "
        "-> *); no timing was compared. *--meanband-compare-anywhere",
    ])
    # A sensor reading does not depend on the CPU: it is still compared.
    assert baseline_line(result, "test_rail [volts]").endswith("no regression")
    forced = run_suite("--meanband-baseline=main", "--meanband-compare-anywhere")
    forced.assert_outcomes(failed=1, passed=1)
    forced.stdout.fnmatch_lines(["meanband: WARNING: compared with a baseline from a machine that "
                                 "times differently (cpu count 64 -> *), as "
                                 "--meanband-compare-anywhere asked"])


def test_stale_baseline_is_a_loud_warning(pytester: pytest.Pytester, run_suite) -> None:
    import sqlite3

    write_suite(pytester, data(1))
    run_suite("--meanband-record=main")
    conn = sqlite3.connect(pytester.path / ".meanband" / "history.sqlite")
    try:
        conn.execute("UPDATE runs SET started = '2026-01-02T08:00:00+00:00'")
        conn.commit()
    finally:
        conn.close()
    result = run_suite("--meanband-baseline=main")
    result.stdout.fnmatch_lines(["meanband: WARNING: the baseline's newest run (run 1, "
                                 "2026-01-02T08:00:00+00:00) is * days old, older than 30 days; "
                                 "record a fresh one with --meanband-record"])
    fresh = run_suite("--meanband-baseline=main", "--meanband-baseline-max-age=3650")
    assert "days old" not in fresh.stdout.str()


@pytest.mark.parametrize("workers", [[], ["-n", "2"]])
def test_record_and_baseline_through_a_postgresql_store(
    pytester: pytest.Pytester, run_suite, postgres_url: str, workers: list[str]
) -> None:
    # Two CI jobs on different machines share one database: the first records main, the
    # second (here slower by 30%) compares with it. Under xdist the workers read the baseline.
    write_suite(pytester, data(1))
    first = run_suite(f"--meanband-store={postgres_url}", "--meanband-record=main", *workers)
    first.assert_outcomes(passed=2)
    first.stdout.fnmatch_lines(["meanband: recorded run 1 'main' in postgresql://*"])
    assert not (pytester.path / ".meanband").exists()  # nothing written on the runner
    write_suite(pytester, data(2, slowdown=1.3))
    pytester.makeini(f"[pytest]\nmeanband_store = {postgres_url}\n")  # the ini key works too
    second = run_suite("--meanband-baseline=main", "--meanband-run-noise=0",
                       "--meanband-record=feature", *workers)
    second.assert_outcomes(failed=1, passed=1)
    assert baseline_line(second, "test_quote").endswith("regressed")
    with HistoryStore(postgres_url, create=False, read_only=True) as store:
        assert [r.label for r in store.runs()] == ["feature", "main"]
