"""The drift note: a change between the first and the last third, with the unit, only when it
matters against the band."""

from __future__ import annotations

import re

import numpy as np
import pytest
from meanband import make_band
from meanband.record.check import decide_with_notes
from meanband.stats.diagnostics import drift_test
from meanband.stats.notes import drift_words

RNG = np.random.default_rng(20261205)


def test_a_falling_timing_is_a_change_above_minus_100_percent_with_its_unit() -> None:
    # Before: a trend from 13 ms down to 2 ms read "first to last trial -315.0%", as the
    # slope extrapolated over a curved fall overshoots the level.
    trials = 2e-3 + 11e-3 * np.exp(-np.arange(60) / 6.0) + RNG.normal(0, 1e-4, 60)
    drift = drift_test(trials)
    assert drift.rejects(0.01)
    assert drift.change / np.median(trials) < -1.0  # what the old note printed, below -100%
    text = drift_words(drift, "s")
    # Means of the thirds, recomputed by hand with numpy.
    first, last = trials[:20].mean(), trials[-20:].mean()
    assert drift.relative_change == pytest.approx(last / first - 1.0)
    [percent] = re.findall(r"([-+]\d+\.\d)%", text)
    assert -100.0 <= float(percent) < 0.0
    assert len(re.findall(r"\d (?:ms|µs) \((?:first|last) third\)", text)) == 2, text


def test_a_drift_of_a_measured_value_is_written_in_its_unit() -> None:
    plate = 85.0 + np.linspace(0.0, -0.4, 50) + RNG.normal(0, 0.02, 50)
    _, notes = decide_with_notes(plate, make_band(low=84.7, high=85.3, unit="degC"), {})
    [note] = [n for n in notes if n["code"] == "drift"]
    # Before: "the level moved by about -0.2028 from first to last trial", with no unit.
    assert re.search(r"from 8\d\.\d+ degC \(first third\) to 8\d\.\d+ degC \(last third\), "
                     r"by -0\.\d+ degC", note["text"]), note["text"]
    assert "%" not in note["text"].split("(Mann-Kendall")[0]  # no percentage of degC


def test_the_drift_note_shows_only_when_it_matters_against_the_band() -> None:
    # Before: "-0.0%" fired for a 0.4 s sleep whose drift was nothing beside its budget.
    trials = 0.4 + np.linspace(0.0, 4e-4, 40) + RNG.normal(0, 2e-5, 40)
    assert drift_test(trials).rejects(0.01)
    _, far = decide_with_notes(trials, make_band(high=1.0, unit="s"), {})
    _, near = decide_with_notes(trials, make_band(high=0.4011, unit="s"), {})
    assert "drift" not in {n["code"] for n in far}
    assert "drift" in {n["code"] for n in near}
