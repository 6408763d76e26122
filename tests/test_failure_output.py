"""What a pytest user reads when a check fails: the test's own line, then the meanband block."""

from __future__ import annotations

import re
from pathlib import Path

import meanband

PACKAGE = Path(meanband.__file__).parent

FAILING_SUITE = '''
import pytest
from meanband import assert_mean_within

INSIDE = [1.0, 1.1, 1.2, 1.05, 0.98, 1.02, 1.07, 1.01, 0.99, 1.04]


def slow():
    return sum(range(3000))


def quick():
    return None


def broken():
    return 1 / 0


def test_fail(trials):
    trials.extend(INSIDE, unit="V")
    trials.check(high=0.5)


def test_undecided(trials):
    trials.extend(INSIDE, unit="V")
    trials.check(high=1.04)


def test_standalone():
    assert_mean_within(INSIDE, high=0.5)


def test_nan(trials):
    trials.extend([1.0, float("nan")])


def test_band_upside_down(trials):
    trials.extend(INSIDE)
    trials.check(low=2.0, high=1.0)


def test_bad_unit(trials):
    trials.extend(INSIDE, unit="s")
    trials.check(high="3 parsecs")


def test_bad_setting(trials):
    trials.extend(INSIDE)
    trials.check(high=2.0, confidence=3)


def test_bad_count(trials):
    trials.time(quick, n=1)


def test_bad_sample(trials):
    trials.sample(lambda: float("nan"), n=3)


def test_bench_log(trials, tmp_path):
    log = tmp_path / "log.csv"
    log.write_text("volts\\n3.30\\n3.31\\nthree\\n", encoding="utf-8")
    trials.extend_from(log, "volts")


def test_compare(trials):
    trials.compare(slow, quick, at_most=1.05, n=4, repeats=2, warmup=1, seed=1)


def test_user_code_raises(trials):
    trials.time(broken, n=3)


def test_auto(trials):
    trials.time(quick, n="auto", band={"high": "1ns"}, pilot=3, max_n=6)
    trials.check(high="1ns")
'''

# Lines of the plugin's own source long enough to be recognised in a traceback.
_SOURCE_LINES = {
    line.strip()
    for path in PACKAGE.rglob("*.py")
    for line in path.read_text(encoding="utf-8").splitlines()
    if len(line.strip()) >= 25
}


def test_failures_show_the_test_line_and_no_plugin_source(run_suite, pytester) -> None:
    pytester.makepyfile(test_failing=FAILING_SUITE)
    result = run_suite("--tb=long", "-p", "no:randomly")
    outcomes = result.parseoutcomes()
    assert outcomes.get("failed") == 13, result.stdout.str()
    text = result.stdout.str()
    shown_files = set(re.findall(r"^(\S+\.py):\d+: ", text, flags=re.M))
    assert all(Path(f).name == "test_failing.py" for f in shown_files), shown_files
    leaked = [
        line for line in result.outlines
        if line.lstrip("> ").strip() in _SOURCE_LINES
        and line.lstrip("> ").strip() not in FAILING_SUITE
    ]
    assert not leaked, "\n".join(leaked)
    # Each failure still points at the user's own line.
    for call in ("trials.check(high=0.5)", "assert_mean_within(INSIDE, high=0.5)",
                 'trials.extend([1.0, float("nan")])', 'trials.extend_from(log, "volts")',
                 "trials.compare(slow, quick", "return 1 / 0"):
        assert any(line.startswith(">") and call in line for line in result.outlines), call


def test_full_trace_still_shows_the_plugin_frames(run_suite, pytester) -> None:
    pytester.makepyfile(test_failing=FAILING_SUITE)
    result = run_suite("--full-trace", "-k", "test_fail")
    assert re.search(r"meanband[/\\]record[/\\]recorder\.py:\d+", result.stdout.str())
