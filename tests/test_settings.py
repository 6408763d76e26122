"""Settings: validation names the source, and layers resolve from the highest precedence down."""

from __future__ import annotations

import pytest
from meanband.errors import TrialError
from meanband.record.settings import (
    DEFAULTS,
    SettingError,
    marker_settings,
    resolve,
    unknown_setting_names,
    validate,
)
from meanband.stats.ratio import parse_fraction


def test_defaults_are_the_documented_ones():
    assert (DEFAULTS.n, DEFAULTS.confidence, DEFAULTS.min_n, DEFAULTS.normality_alpha) == (30, 0.95, 10, 0.05)
    assert (DEFAULTS.method, DEFAULTS.power, DEFAULTS.warmup) == ("t", 0.9, 0)


def test_first_layer_that_sets_a_value_wins():
    settings = resolve([
        ("marker", {"n": 12}),
        ("plan", {"n": 48, "confidence": 0.99}),
        ("command line", {"confidence": 0.9, "min_n": 5}),
        ("ini file", {"min_n": 8, "power": 0.8}),
    ])
    assert (settings.n, settings.confidence, settings.min_n, settings.power) == (12, 0.99, 5, 0.8)
    assert settings.normality_alpha == DEFAULTS.normality_alpha


def test_call_arguments_override_everything_and_none_means_not_given():
    settings = resolve([("marker", {"n": 12, "confidence": 0.99})])
    merged = settings.merged(n=5, confidence=None)
    assert (merged.n, merged.confidence) == (5, 0.99)


def test_strings_from_option_and_ini_are_converted():
    settings = resolve([("command line", {"n": "40", "confidence": "0.975", "warmup": "200ms"})])
    assert (settings.n, settings.confidence, settings.warmup) == (40, 0.975, "200ms")
    assert resolve([("ini", {"warmup": "3"})]).warmup == 3


@pytest.mark.parametrize(
    ("name", "value", "fragment"),
    [
        ("n", 1, "whole number >= 2"),
        ("n", 2.5, "whole number >= 2"),
        ("n", True, "not a boolean"),
        ("confidence", 0.0, "strictly between 0 and 1"),
        ("confidence", 95, "did you mean 0.95?"),
        ("confidence", "abc", "a number between 0 and 1"),
        ("power", 1.0, "strictly between 0 and 1"),
        ("warmup", -1, "whole number >= 0"),
        ("warmup", "5 fortnights", "cannot read '5 fortnights' as a duration"),
        ("method", "median", "choose one of"),
        ("colour", "red", "unknown meanband setting 'colour'"),
    ],
)
def test_bad_values_name_their_source(name, value, fragment):
    with pytest.raises(SettingError) as info:
        validate(name, value, "option --meanband-x")
    assert str(info.value).startswith("option --meanband-x:")
    assert fragment in str(info.value)


def test_marker_signature_rejects_unknown_keywords_and_positional_args():
    assert marker_settings(n=40, confidence=None) == {"n": 40}
    with pytest.raises(TypeError, match="unexpected keyword argument 'trials'"):
        marker_settings(trials=5)  # type: ignore[call-arg]
    with pytest.raises(TypeError):
        marker_settings(40)  # type: ignore[misc]


def test_the_trial_ceiling_defaults_to_a_million():
    from meanband import defaults

    assert DEFAULTS.max_trials == defaults.MAX_TRIALS == 1_000_000


@pytest.mark.parametrize("layers, fragment", [
    ([("plan file p.toml: entry for t.py::test_a", {"n": 100_000_000_000})],
     "plan file p.toml: entry for t.py::test_a: 100,000,000,000 trials is above the ceiling of "
     "1,000,000 trials (max_trials)"),
    ([("marker", {"n": 50}), ("ini key meanband_max_trials", {"max_trials": 40})],
     "marker: 50 trials is above the ceiling of 40 trials (max_trials, from ini key "
     "meanband_max_trials)"),
])
def test_a_count_above_the_ceiling_names_its_source_and_the_setting(layers, fragment):
    with pytest.raises(SettingError) as raised:
        resolve(layers)
    assert fragment in str(raised.value)
    assert "--meanband-max-trials, ini meanband_max_trials or @pytest.mark.meanband(max_trials" in (
        str(raised.value))


def test_a_raised_ceiling_lets_a_large_count_through():
    settings = resolve([("marker", {"n": 2_000_000, "max_trials": 5_000_000})])
    assert (settings.n, settings.max_trials) == (2_000_000, 5_000_000)


def test_a_call_argument_above_the_ceiling_is_refused():
    with pytest.raises(SettingError, match=r"the call's argument n: 100,000,000,000 trials is "
                       r"above the ceiling of 1,000,000"):
        DEFAULTS.merged(n=100_000_000_000)
    assert DEFAULTS.merged(n=1_000_000).n == 1_000_000


def test_the_ceiling_is_not_part_of_a_rows_settings():
    assert "max_trials" not in DEFAULTS.to_dict()


@pytest.mark.parametrize(
    ("name", "value", "expected"),
    [("confidence", "95%", 0.95), ("confidence", " 99.5 % ", 0.995), ("confidence", "0.9", 0.9),
     ("power", "80%", 0.8), ("normality_alpha", "5%", 0.05)],
)
def test_levels_accept_a_percentage_or_a_fraction(name, value, expected):
    # Before: --meanband-confidence=95% was refused while --meanband-max-increase took 5%.
    assert validate(name, value, "option --meanband-x") == pytest.approx(expected)


def test_a_level_written_as_a_bare_percentage_suggests_both_spellings():
    with pytest.raises(SettingError, match=r"did you mean 0\.95\? \(or write '95%'\)"):
        validate("confidence", 95, "marker")
    with pytest.raises(SettingError, match="strictly between 0 and 1, got '150%'"):
        validate("confidence", "150%", "marker")


def test_an_unknown_setting_lists_the_valid_ones_and_the_closest():
    # Before: "marker_settings() got an unexpected keyword argument" and nothing more.
    with pytest.raises(SettingError) as info:
        validate("confidance", 0.99, "plan entry")
    text = str(info.value)
    assert "unknown meanband setting 'confidance' (did you mean 'confidence'?)" in text
    assert "the settings are n, confidence, warmup, min_n," in text
    assert unknown_setting_names(["n", "power"]) == ""
    assert "'colour';" in unknown_setting_names(["colour"])  # nothing close: no guess


@pytest.mark.parametrize(("text", "hint"), [(5, "did you mean '5%'?"), ("1.5", "did you mean '1.5%'?")])
def test_a_relative_amount_above_one_without_a_percent_sign_is_refused(text, hint):
    # Before: --meanband-max-increase=5 silently meant +500%.
    with pytest.raises(TrialError, match="would mean") as info:
        parse_fraction(text, "--meanband-max-increase")
    assert hint in str(info.value)
    assert parse_fraction("150%", "--meanband-max-increase") == pytest.approx(1.5)
    assert parse_fraction(1, "--meanband-max-increase") == 1.0


def test_marker_typo_option_percentages_and_max_increase_in_a_run(run_suite, pytester):
    pytester.makepyfile(test_s="""
import pytest

@pytest.mark.meanband(confidance=0.99)
def test_typo(trials):
    pass

def test_level(trials):
    trials.extend([1.0, 1.1, 0.9, 1.05, 0.95, 1.02, 0.98, 1.01, 0.99, 1.0], unit="ms")
    assert trials.settings.confidence == 0.99
    trials.check(high="1.5ms")
""")
    result = run_suite("--meanband-confidence=99%")
    result.assert_outcomes(passed=1, errors=1)
    result.stdout.fnmatch_lines(["*unknown meanband setting 'confidance' (did you mean 'confidence'?)*"])
    store = pytester.path / "h.sqlite"
    result = run_suite(f"--meanband-store={store}", "--meanband-record=x", "--meanband-max-increase=5")
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines(["*--meanband-max-increase*did you mean '5%'?*"])
