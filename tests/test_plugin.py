"""The pytest plugin as a user runs it: fixture, verdicts, summary, options, xdist, JUnit, hooks."""

from __future__ import annotations

import re
import sys
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from meanband import mean_interval

# Seeded data sets written into the inner suites; the verdicts are recomputed here by hand.
RNG = np.random.default_rng(20261201)


def _exact(mean: float, sd: float, n: int) -> np.ndarray:
    """Normal-looking data whose sample mean and sd are exactly ``mean`` and ``sd``."""
    z = RNG.normal(size=n)
    return mean + sd * (z - z.mean()) / z.std(ddof=1)


INSIDE = _exact(85.0, 0.1, 30)          # well inside 84.6..85.4
OUTSIDE = _exact(86.0, 0.1, 30)         # confidently above 85.4
STRADDLE = _exact(85.38, 0.3, 8)        # every interval reaches across the 85.4 edge


def _suite(values: dict[str, np.ndarray], body: str) -> str:
    lines = ["import pytest", "from meanband import assert_mean_within"]
    for name, data in values.items():
        lines.append(f"{name} = {data.tolist()!r}")
    return "\n".join(lines) + "\n" + body


def _hand_verdict(x: np.ndarray, low: float, high: float, confidence: float = 0.95) -> str:
    """The DESIGN.md rule, recomputed from mean_interval alone."""
    if np.isfinite(low) and np.isfinite(high):
        iv = mean_interval(x, confidence, "two-sided")
        if low <= iv.low and iv.high <= high:
            return "PASS"
        return "FAIL" if iv.high < low or iv.low > high else "UNDECIDED"
    if np.isfinite(high):
        up, down = mean_interval(x, confidence, "upper"), mean_interval(x, confidence, "lower")
        return "PASS" if up.high <= high else "FAIL" if down.low > high else "UNDECIDED"
    up, down = mean_interval(x, confidence, "lower"), mean_interval(x, confidence, "upper")
    return "PASS" if up.low >= low else "FAIL" if down.high < low else "UNDECIDED"


def _verdicts(result: pytest.RunResult) -> dict[str, str]:
    found = {}
    for line in result.outlines:
        m = re.match(r"^(test_\w+\.py::\w+(?: \[\w+\])?)\s+\d+\s.*\s(PASS|FAIL|UNDECIDED)\b", line)
        if m:
            found[m.group(1).split("::")[1]] = m.group(2)
    return found


CASES = {
    # name: (data, low, high)
    "two_inside": ("INSIDE", 84.6, 85.4),
    "two_outside": ("OUTSIDE", 84.6, 85.4),
    "two_straddle": ("STRADDLE", 84.6, 85.4),
    "upper_pass": ("INSIDE", None, 85.2),
    "upper_fail": ("OUTSIDE", None, 85.4),
    "upper_undecided": ("STRADDLE", None, 85.4),
    "lower_pass": ("OUTSIDE", 85.4, None),
    "lower_fail": ("INSIDE", 85.5, None),
    "lower_undecided": ("STRADDLE", 85.4, None),
}


def test_every_verdict_matches_the_hand_computation(run_suite, pytester):
    body = ""
    for name, (data, low, high) in CASES.items():
        body += f"\ndef test_{name}(trials):\n    trials.extend({data}, unit='degC')\n"
        body += f"    trials.check(low={low}, high={high})\n"
    pytester.makepyfile(test_verdicts=_suite(
        {"INSIDE": INSIDE, "OUTSIDE": OUTSIDE, "STRADDLE": STRADDLE}, body))
    result = run_suite()
    verdicts = _verdicts(result)
    data = {"INSIDE": INSIDE, "OUTSIDE": OUTSIDE, "STRADDLE": STRADDLE}
    for name, (key, low, high) in CASES.items():
        expected = _hand_verdict(data[key], -np.inf if low is None else low,
                                 np.inf if high is None else high)
        assert verdicts[f"test_{name}"] == expected, name
        assert expected in name.upper().replace("TWO_INSIDE", "PASS").replace(
            "TWO_OUTSIDE", "FAIL").replace("TWO_STRADDLE", "UNDECIDED")
    outcomes = result.parseoutcomes()
    assert outcomes["passed"] == 3 and outcomes["failed"] == 6


def test_failure_message_names_n_mean_interval_band_verdict_and_diagnostics(run_suite, pytester):
    pytester.makepyfile(test_msg=_suite({"STRADDLE": STRADDLE}, """
def test_it(trials):
    trials.extend(STRADDLE, unit="degC")
    trials.check(center=85.0, tolerance=0.4)
"""))
    result = run_suite()
    text = result.stdout.str()
    for piece in ["meanband UNDECIDED", "n          8", "mean ", "interval ", "band       [84.6 degC, 85.4 degC]",
                  "verdict    UNDECIDED", "normality  Shapiro-Wilk", "to decide  about",
                  "only 8 trials"]:
        assert piece in text, piece
    assert "BandViolation" in text


def test_undecided_suggestion_matches_trials_needed(run_suite, pytester):
    from meanband import trials_needed

    pytester.makepyfile(test_sug=_suite({"STRADDLE": STRADDLE}, """
def test_it(trials):
    trials.extend(STRADDLE)
    trials.check(high=85.4)
"""))
    from meanband.stats.planning import sd_upper_bound

    iv = mean_interval(STRADDLE, 0.95, "upper")
    # The sd's 80% upper confidence bound plans the count (Browne 1995).
    expected = trials_needed(sd_upper_bound(iv.sd, iv.n - 1), margin=85.4 - iv.mean,
                             confidence=0.95, side="upper", power=0.9)
    result = run_suite()
    result.stdout.fnmatch_lines([f"*about {expected} trials would likely decide it*"])


@pytest.mark.parametrize(
    ("edge", "seconds"), [("800ns", 8e-7), ("250us", 2.5e-4), ("250µs", 2.5e-4), ("3ms", 3e-3), ("1.5s", 1.5)]
)
def test_duration_strings_are_budgets_in_seconds(run_suite, pytester, edge, seconds):
    under = [seconds * f for f in (0.50, 0.52, 0.48, 0.50, 0.51)]
    over = [seconds * f for f in (1.50, 1.52, 1.48, 1.50, 1.51)]
    pytester.makepyfile(test_edge_units=f"""
import pytest
from meanband import BandViolation

def test_under(trials):
    trials.extend({under!r}, unit="s")
    d = trials.check(high="{edge}")
    assert d.band.high == pytest.approx({seconds!r}, rel=1e-12)

def test_over(trials):
    trials.extend({over!r}, unit="s")
    with pytest.raises(BandViolation, match="FAIL"):
        trials.check(high="{edge}")
""")
    run_suite().assert_outcomes(passed=2)


def test_time_records_seconds_per_call(run_suite, pytester):
    pytester.makepyfile(test_timed="""
import math

def test_timed(trials):
    values = trials.time(math.factorial, 50, n=12)
    assert values.shape == (12,) and (values > 0).all() and (values < 10).all()
    assert trials.unit == "s"
    trials.check(high="10s")
""")
    run_suite().assert_outcomes(passed=1)


def test_bad_unit_string_and_bad_bands_are_clear_errors(run_suite, pytester):
    pytester.makepyfile(test_bad="""
import pytest
from meanband import TrialError

def _timed(trials):
    trials.time(lambda: None, n=5)

def test_bad_unit(trials):
    _timed(trials)
    with pytest.raises(TrialError, match="cannot read '3 parsecs' as a duration"):
        trials.check(high="3 parsecs")

def test_low_above_high(trials):
    trials.extend([1.0, 2.0, 3.0])
    with pytest.raises(TrialError, match="low edge .* lies above its high edge"):
        trials.check(low=5, high=1)

def test_both_forms(trials):
    trials.extend([1.0, 2.0, 3.0])
    with pytest.raises(TrialError, match="not both"):
        trials.check(low=1, center=2, tolerance=1)

def test_string_edge_on_non_timing(trials):
    trials.extend([1.0, 2.0, 3.0], unit="V")
    with pytest.raises(TrialError, match="needs trials in a time unit"):
        trials.check(high="3ms")
""")
    run_suite().assert_outcomes(passed=4)


def test_bad_data_fails_its_test_only_and_other_rows_survive(run_suite, pytester):
    pytester.makepyfile(test_data=_suite({"INSIDE": INSIDE}, """
def test_nan(trials):
    trials.extend([1.0, 2.0])
    trials.extend([1.0, float("nan"), 3.0])

def test_one_value(trials):
    trials.add(1.0)
    trials.check(high=2.0)

def test_good(trials):
    trials.extend(INSIDE)
    trials.check(84.6, 85.4)

def test_confidence(trials):
    trials.extend(INSIDE)
    trials.check(84.6, 85.4, confidence=95)
"""))
    result = run_suite()
    result.assert_outcomes(passed=1, failed=3)
    text = result.stdout.str()
    assert "1 of 3 trials are NaN or infinite (0-based positions 1)" in text
    assert "needs at least 2 trials, got 1" in text
    assert "did you mean 0.95?" in text
    assert _verdicts(result) == {"test_good": "PASS"}
    # The NaN call recorded nothing: the earlier two values remain, unchecked.
    result.stdout.fnmatch_lines(["*test_nan: 2 trials, mean 1.500*"])


def test_precedence_call_over_marker_over_option_over_ini(run_suite, pytester):
    pytester.makeini("[pytest]\nmeanband_n = 7\nmeanband_confidence = 0.9\n")
    pytester.makepyfile(test_prec="""
import pytest

def test_ini(trials):
    assert trials.sample(lambda: 1.0).size == 7
    assert trials.interval().confidence == 0.9

def test_option(trials):
    assert trials.sample(lambda: 1.0).size == 6

@pytest.mark.meanband(n=5)
def test_marker(trials):
    assert trials.sample(lambda: 1.0).size == 5

@pytest.mark.meanband(n=5)
def test_call(trials):
    assert trials.sample(lambda: 1.0, n=4).size == 4
    assert trials.interval(confidence=0.8).confidence == 0.8
""")
    run_suite("-k", "ini").assert_outcomes(passed=1)
    run_suite("--meanband-n", "6", "-k", "option or marker or call").assert_outcomes(passed=3)


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["--meanband-confidence", "1.5"], "option --meanband-confidence: bad value '1.5' for confidence"),
        (["--meanband-n", "1"], "option --meanband-n: bad value '1' for n"),
        (["--meanband-min-n", "ten"], "option --meanband-min-n: bad value 'ten'"),
        (["--meanband-normality-alpha", "0"], "normality_alpha"),
        (["--meanband-method", "median"], "bad value 'median' for method"),
    ],
)
def test_bad_options_are_usage_errors(run_suite, pytester, args, message):
    pytester.makepyfile(test_x="def test_x(trials):\n    pass\n")
    result = run_suite(*args)
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    assert message in result.stderr.str()


def test_bad_ini_value_names_the_ini_key(run_suite, pytester):
    pytester.makeini("[pytest]\nmeanband_confidence = high\n")
    pytester.makepyfile(test_x="def test_x(trials):\n    pass\n")
    result = run_suite()
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    assert "ini key meanband_confidence: bad value 'high'" in result.stderr.str()


def test_bad_marker_is_a_clear_error_for_that_test(run_suite, pytester):
    pytester.makepyfile(test_m="""
import pytest

@pytest.mark.meanband(trials=5)
def test_typo(trials):
    pass

@pytest.mark.meanband(confidence=2)
def test_value(trials):
    pass

def test_fine(trials):
    pass
""")
    result = run_suite()
    result.assert_outcomes(passed=1, errors=2)
    text = result.stdout.str()
    assert "marker @pytest.mark.meanband on test_m.py::test_typo" in text
    assert "unknown meanband setting 'trials'" in text
    assert "the settings are n, confidence, warmup," in text
    assert "bad value 2 for confidence" in text


SUMMARY_SUITE = """
import pytest

def test_pass(trials):
    trials.extend(INSIDE, unit="degC")
    trials.check(84.6, 85.4)

@pytest.mark.xfail(raises=AssertionError, strict=True)
def test_fail(trials):
    trials.extend(OUTSIDE, unit="degC")
    trials.check(84.6, 85.4)

@pytest.mark.xfail(raises=AssertionError, strict=True)
def test_undecided(trials):
    trials.extend(STRADDLE, unit="degC")
    trials.check(84.6, 85.4)

def test_two_series(trials):
    trials.series("cold").extend(INSIDE, unit="degC")
    trials.series("cold").check(high=85.3)
    trials.series("warm").extend(INSIDE + 1.0, unit="degC")

def test_zero_spread(trials):
    trials.extend([5.0] * 12, unit="V")
    trials.check(4.0, 6.0)

def test_plain():
    pass
"""


def _summary_block(result: pytest.RunResult) -> list[str]:
    lines = result.outlines
    start = next(i for i, line in enumerate(lines) if re.match(r"^=+ meanband =+$", line))
    end = next(i for i in range(start + 1, len(lines)) if lines[i].startswith("===="))
    return lines[start + 1:end]


def _write_summary_suite(pytester):
    pytester.makepyfile(test_rows=_suite(
        {"INSIDE": INSIDE, "OUTSIDE": OUTSIDE, "STRADDLE": STRADDLE},
        SUMMARY_SUITE.replace("INSIDE + 1.0", "[v + 1.0 for v in INSIDE]")))


def test_summary_rows_notes_suggestions_and_unchecked(run_suite, pytester):
    _write_summary_suite(pytester)
    result = run_suite()
    assert result.ret == 0
    block = "\n".join(_summary_block(result))
    assert "meanband: 5 checks: 3 PASS, 1 FAIL, 1 UNDECIDED; 1 recorded but never checked; 2 notes" in block
    assert re.search(r"test_rows.py::test_pass\s+30\s+85\.0\d* degC\s+\[.*\] degC\s+95%\s+\[84.6, 85.4\] degC\s+PASS", block)
    assert re.search(r"test_rows.py::test_two_series \[cold\]\s+30 .*<= 85.3 degC\s+PASS", block)
    assert "notes:" in block
    assert "test_rows.py::test_undecided: only 8 trials (fewer than 10)" in block
    assert "test_rows.py::test_zero_spread: all trials are equal" in block
    assert "suggested trial counts (90% power):" in block
    assert re.search(r"test_rows.py::test_undecided: UNDECIDED at n=8; about \d+ trials", block)
    assert "recorded but never checked:" in block
    assert "test_rows.py::test_two_series [warm]: 30 trials, mean 86.0" in block
    assert "sd" not in block.split("\n")[2].split()  # no verbose columns by default


def test_summary_quiet_is_one_line_and_verbose_adds_columns(run_suite, pytester):
    _write_summary_suite(pytester)
    quiet = run_suite("-q")
    totals = [line for line in quiet.outlines if line.startswith("meanband:")]
    assert totals == ["meanband: 5 checks: 3 PASS, 1 FAIL, 1 UNDECIDED; 1 recorded but never checked; 2 notes"]
    assert not any("suggested trial counts" in line for line in quiet.outlines)
    verbose = run_suite("-v")
    header = next(line for line in _summary_block(verbose) if line.startswith("test "))
    assert header.split()[-3:] == ["sd", "df", "t"]


def test_autocorrelation_and_normality_notes(run_suite, pytester):
    rng = np.random.default_rng(7)
    trend = np.cumsum(rng.normal(0, 1, 60)) + 100.0     # a random walk: strongly autocorrelated
    skewed = rng.lognormal(0.0, 1.2, 60)                 # far from normal
    pytester.makepyfile(test_notes=_suite({"TREND": trend, "SKEWED": skewed}, """
def test_trend(trials):
    trials.extend(TREND)
    trials.check(high=1e6)

def test_skewed(trials):
    trials.extend(SKEWED)
    trials.check(high=2.5)  # passes, but not by so much that the data's shape cannot matter
"""))
    result = run_suite("-v")  # the trend passes far inside its budget: its note shows at -v
    result.stdout.fnmatch_lines([
        "*test_notes.py::test_skewed: normality matters here: skewness G1 = *",
        "*test_notes.py::test_trend: trials autocorrelated: lag-1 r = 0.*, effective n about *",
    ])


def test_nothing_printed_when_no_test_uses_trials(run_suite, pytester):
    pytester.makepyfile(test_plain="def test_a():\n    pass\n")
    result = run_suite()
    assert "meanband:" not in result.stdout.str()
    assert "= meanband =" not in result.stdout.str()


def test_summary_is_identical_under_xdist(run_suite, pytester):
    _write_summary_suite(pytester)
    serial = _summary_block(run_suite(subprocess=True))
    parallel = _summary_block(run_suite("-n", "2", subprocess=True))
    assert serial and serial == parallel


def test_junit_properties_carry_each_check(run_suite, pytester):
    _write_summary_suite(pytester)
    run_suite("--junitxml=out.xml")
    tree = ET.parse(pytester.path / "out.xml")
    props = {}
    for case in tree.iter("testcase"):
        for prop in case.iter("property"):
            props[(case.get("name"), prop.get("name"))] = prop.get("value")
    iv = mean_interval(INSIDE, 0.95)
    assert props[("test_pass", "meanband.n")] == "30"
    assert float(props[("test_pass", "meanband.mean")]) == pytest.approx(iv.mean, rel=1e-12)
    assert float(props[("test_pass", "meanband.low")]) == pytest.approx(iv.low, rel=1e-12)
    assert float(props[("test_pass", "meanband.high")]) == pytest.approx(iv.high, rel=1e-12)
    assert props[("test_pass", "meanband.verdict")] == "PASS"
    assert props[("test_fail", "meanband.verdict")] == "FAIL"
    assert props[("test_two_series", "meanband[cold].verdict")] == "PASS"
    # Before: raw numbers with no unit and no band.
    assert props[("test_pass", "meanband.unit")] == "degC"
    assert props[("test_pass", "meanband.band")] == "[84.6 degC, 85.4 degC]"
    assert float(props[("test_pass", "meanband.band_low")]) == pytest.approx(84.6)
    assert float(props[("test_pass", "meanband.band_high")]) == pytest.approx(85.4)


def test_junit_properties_under_xdist(run_suite, pytester):
    _write_summary_suite(pytester)
    run_suite("-n", "2", "--junitxml=out.xml", subprocess=True)
    text = (pytester.path / "out.xml").read_text()
    assert 'name="meanband.verdict" value="UNDECIDED"' in text


def test_disabled_plugin_has_no_fixture(pytester, monkeypatch):
    # Autoload on, as a user installs the plugin: -p no:meanband switches it off entirely.
    monkeypatch.delenv("PYTEST_DISABLE_PLUGIN_AUTOLOAD", raising=False)
    pytester.makepyfile(test_x="def test_x(trials):\n    pass\n")
    result = pytester.runpytest_subprocess("-p", "no:meanband")
    result.assert_outcomes(errors=1)
    result.stdout.fnmatch_lines(["*fixture 'trials' not found*"])


def test_no_scipy_import_when_trials_unused(pytester, monkeypatch):
    monkeypatch.setenv("PYTEST_DISABLE_PLUGIN_AUTOLOAD", "1")
    pytester.makeconftest("""
import sys
def pytest_sessionfinish(session):
    print("SCIPY-LOADED" if "scipy" in sys.modules else "SCIPY-ABSENT")
    print("NUMPY-LOADED" if "numpy" in sys.modules else "NUMPY-ABSENT")
""")
    pytester.makepyfile(test_plain="def test_a():\n    pass\n")
    result = pytester.runpytest_subprocess("-p", "meanband", "-s")
    result.stdout.fnmatch_lines(["*SCIPY-ABSENT*", "*NUMPY-ABSENT*"])
    # The same probe does see scipy once a test uses trials: the probe can fail.
    pytester.makepyfile(test_plain="def test_a(trials):\n    trials.extend([1.0, 2.0, 3.0])\n"
                        "    trials.check(high=10)\n")
    result = pytester.runpytest_subprocess("-p", "meanband", "-s")
    result.stdout.fnmatch_lines(["*SCIPY-LOADED*"])


def test_hooks_receive_every_result_and_add_summary_lines(run_suite, pytester):
    _write_summary_suite(pytester)
    pytester.makeconftest("""
SEEN = []

def pytest_meanband_result(config, row):
    SEEN.append((row["nodeid"], row["series"], row["kind"]))

def pytest_meanband_summary_lines(config, rows):
    return [f"exporter saw {len(SEEN)} rows, summary has {len(rows)}"]

def pytest_meanband_session_finish(config, rows):
    print(f"FINISH {len(rows)}")
""")
    result = run_suite("-s")
    result.stdout.fnmatch_lines(["*FINISH 6", "*exporter saw 6 rows, summary has 6*"])


def test_assert_mean_within_passes_and_raises(run_suite, pytester):
    pytester.makepyfile(test_standalone=_suite({"INSIDE": INSIDE, "STRADDLE": STRADDLE}, """
from meanband import BandViolation, Verdict

def test_pass():
    d = assert_mean_within(INSIDE, low=84.6, high=85.4)
    assert d.verdict is Verdict.PASS

def test_raises():
    with pytest.raises(BandViolation) as info:
        assert_mean_within(STRADDLE, center=85.0, tolerance=0.4)
    assert info.value.decision.verdict is Verdict.UNDECIDED
    assert isinstance(info.value, AssertionError)
"""))
    run_suite().assert_outcomes(passed=2)


def test_import_meanband_does_not_import_pytest_or_scipy():
    import subprocess

    code = "import sys, meanband; meanband.Verdict; print('pytest' in sys.modules, 'scipy' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.split() == ["False", "False"]


def test_session_finish_hook_fires_even_without_rows(run_suite, pytester):
    # Exporters rely on it: a shard that ran no checks still writes its (empty) files.
    pytester.makeconftest("""
def pytest_meanband_session_finish(config, rows):
    print(f"FINISH {len(rows)}")
""")
    pytester.makepyfile(test_plain="def test_a():\n    pass\n")
    result = run_suite("-s")
    result.stdout.fnmatch_lines(["*FINISH 0*"])
    assert "= meanband =" not in result.stdout.str()


def test_the_failure_message_states_the_power_in_use(run_suite, pytester):
    # Before: the message always said "90% power", whatever --meanband-power was.
    pytester.makepyfile(test_msg=_suite({"STRADDLE": STRADDLE}, """
def test_it(trials):
    trials.extend(STRADDLE, unit="degC")
    trials.check(center=85.0, tolerance=0.4)
"""))
    result = run_suite("--meanband-power", "0.8")
    result.stdout.fnmatch_lines(["*to decide  about * trials would likely decide it (80% power,*"])
    assert "90% power" not in result.stdout.str()


def test_pytest_help_works_with_the_plugin(run_suite):
    # Before: a bare % in an option's help broke argparse's help formatting.
    result = run_suite("--help")
    assert result.ret == 0
    result.stdout.fnmatch_lines(["*--meanband-max-increase*"])


CEILING_SUITE = """
import pytest

def test_call(trials):
    trials.sample(lambda: 1.0, n=100_000_000_000)

@pytest.mark.meanband(n=100_000_000_000)
def test_marked(trials):
    trials.sample(lambda: 1.0)

def test_until_decided(trials):
    trials.sample(lambda: 1.0, n="until-decided", max_n=100_000_000_000, band=dict(high=2.0))

def test_auto(trials):
    trials.sample(lambda: 1.0, n="auto", max_n=100_000_000_000, band=dict(high=2.0))

@pytest.mark.meanband(max_trials=2_000_000)
def test_raised(trials):
    trials.sample(lambda: 1.0, n=3)
    trials.extend([1.0, 1.1, 0.9])
    trials.check(high=2.0)
"""


def test_counts_above_the_trial_ceiling_fail_fast_naming_their_source(run_suite, pytester):
    pytester.makepyfile(test_ceiling=CEILING_SUITE)
    result = run_suite("-p", "no:randomly")
    text = result.stdout.str()
    assert "the call's argument n: 100,000,000,000 trials is above the ceiling of 1,000,000" in text
    assert ("marker @pytest.mark.meanband on test_ceiling.py::test_marked: 100,000,000,000 "
            "trials is above the ceiling") in text
    # One error line per test (the short summary repeats each message once more).
    assert sum(line.startswith("E ") and "the call's argument max_n: 100,000,000,000 trials is "
               "above" in line for line in result.outlines) == 2
    result.assert_outcomes(passed=1, failed=3, errors=1)


@pytest.mark.parametrize("args, ini, source", [
    (("--meanband-n", "100000000000"), "", "option --meanband-n: 100,000,000,000 trials"),
    ((), "meanband_n = 100000000000", "ini key meanband_n: 100,000,000,000 trials"),
    (("--meanband-n", "50", "--meanband-max-trials", "40"), "",
     "option --meanband-n: 50 trials is above the ceiling of 40 trials (max_trials, from option "
     "--meanband-max-trials)"),
])
def test_a_count_above_the_ceiling_from_options_is_a_usage_error(run_suite, pytester, args, ini,
                                                                  source):
    pytester.makepyfile(test_ceiling="def test_x(trials):\n    trials.sample(lambda: 1.0)\n")
    if ini:
        pytester.makeini(f"[pytest]\n{ini}\n")
    result = run_suite(*args)
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    assert source in result.stderr.str()


def test_pytest_markers_lists_the_marker_with_every_setting(run_suite):
    import inspect

    from meanband.record.settings import marker_settings

    result = run_suite("--markers")
    assert result.ret == 0
    line = next(x for x in result.outlines if x.startswith("@pytest.mark.meanband("))
    for name in inspect.signature(marker_settings).parameters:
        assert f"{name}=" in line, name
