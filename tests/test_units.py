"""Tests for meanband.units: duration strings and numbers with units."""

from __future__ import annotations

import math

import pytest
from meanband import TrialError
from meanband.units import SECONDS, format_number, format_value, parse_duration, time_scale


class TestParseDuration:
    @pytest.mark.parametrize(
        ("text", "seconds"),
        [
            ("800ns", 800e-9),
            ("250us", 250e-6),
            ("250µs", 250e-6),  # micro sign U+00B5
            ("250μs", 250e-6),  # Greek small mu U+03BC
            ("3ms", 3e-3),
            ("1.5s", 1.5),
            (" 2 ms ", 2e-3),
            ("0.25ms", 0.25e-3),
            (".5ms", 0.5e-3),
            ("7.s", 7.0),
            ("1e-3s", 1e-3),
            ("2.5E2us", 250e-6),
            ("+4ms", 4e-3),
            ("0s", 0.0),
        ],
    )
    def test_reads_durations(self, text: str, seconds: float) -> None:
        assert parse_duration(text) == pytest.approx(seconds, rel=1e-15, abs=0)

    @pytest.mark.parametrize(
        "text",
        ["3", "ms", "", "3 sec", "3 MS", "3msec", "3 m s", "three ms", "1,5ms", "3ms3", "3h"],
    )
    def test_refuses_what_it_cannot_read(self, text: str) -> None:
        with pytest.raises(TrialError, match=r"cannot read .* ns, us \(or µs\), ms, s"):
            parse_duration(text)

    def test_error_quotes_the_input(self) -> None:
        with pytest.raises(TrialError, match="'5 minutes'"):
            parse_duration("5 minutes")


class TestFormatNumber:
    @pytest.mark.parametrize(
        ("value", "digits", "text"),
        [
            (1.0, 4, "1.000"),
            (2.5e-3, 4, "0.002500"),
            (123.456, 4, "123.5"),
            (-0.5, 4, "-0.5000"),
            (12345.678, 4, "12346"),
            (123456789.0, 4, "123456789"),
            (1e9, 4, "1.000e+09"),
            (1e-5, 4, "1.000e-05"),
            (3.14159, 2, "3.1"),
            (3.14159, 6, "3.14159"),
            (0.0, 4, "0"),
        ],
    )
    def test_significant_digits(self, value: float, digits: int, text: str) -> None:
        assert format_number(value, digits) == text

    @pytest.mark.parametrize(
        ("value", "text"),
        [(999.96, "1000"), (-999.96, "-1000"), (9.99951, "10.00"), (0.0999996, "0.1000")],
    )
    def test_rounding_up_to_a_power_of_ten_keeps_the_digits(self, value: float, text: str) -> None:
        assert format_number(value, 4) == text

    def test_rounding_up_past_the_plain_range_uses_an_exponent(self) -> None:
        assert format_number(999_999_999.6, 4) == "1.000e+09"

    def test_non_finite(self) -> None:
        assert format_number(math.nan) == "nan"
        assert format_number(math.inf) == "inf"
        assert format_number(-math.inf) == "-inf"


class TestFormatValue:
    @pytest.mark.parametrize(
        ("seconds", "text"),
        [
            (2.5e-3, "2.500 ms"),
            (2.5e-7, "250.0 ns"),
            (4.2e-5, "42.00 µs"),
            (1.25, "1.250 s"),
            (3600.0, "3600 s"),
        ],
    )
    def test_seconds_pick_a_readable_unit(self, seconds: float, text: str) -> None:
        assert format_value(seconds, SECONDS) == text

    def test_shared_scale(self) -> None:
        scale = time_scale(2.5e-3)
        assert format_value(2.5e-3, "s", scale=scale) == "2.500 ms"
        assert format_value(4.0e-4, "s", scale=scale) == "0.4000 ms"
        assert format_value(2.5e-3, "s", scale=1e-6) == "2500 µs"

    def test_other_units_are_appended(self) -> None:
        assert format_value(85.123, "degC") == "85.12 degC"
        assert format_value(85.123, None) == "85.12"
        assert format_value(85.123, "") == "85.12"

    def test_seconds_label(self) -> None:
        assert SECONDS == "s"


class TestTimeScale:
    @pytest.mark.parametrize(
        ("seconds", "scale"),
        [
            (2.0, 1.0),
            (1.0, 1.0),
            (0.999, 1e-3),
            (1e-3, 1e-3),
            (5e-5, 1e-6),
            (1e-6, 1e-6),
            (9e-7, 1e-9),
            (0.0, 1e-9),
            (-2e-3, 1e-3),
            (math.nan, 1e-9),
            (math.inf, 1e-9),
        ],
    )
    def test_largest_unit_showing_at_least_one(self, seconds: float, scale: float) -> None:
        assert time_scale(seconds) == scale


def test_a_probability_that_rounds_to_one_is_not_written_as_certainty() -> None:
    from meanband.units import format_probability

    assert format_probability(1.0) == "1 - <1e-16"
    assert format_probability(1 - 2e-6) == "1 - 2e-06"
    assert format_probability(0.0) == "0" and format_probability(0.333) == "0.333"
