"""Bench logs with a time column: reading times travel with the trials, the run chart plots
against them, and readings out of order or gaps in the log are notes."""

from __future__ import annotations

import json

import numpy as np
import pytest
from meanband.collect.benchlog import log_time_notes, read_timed_column
from meanband.errors import TrialError
from meanband.report import plots

# Invented scenario: a soak log of a heater plate, one reading every 10 s.
SOAK = "t,plate_degC\n" + "".join(f"{10 * i},{85.0 + 0.01 * (i % 5):.2f}\n" for i in range(12))


def test_times_are_seconds_since_the_first_reading(tmp_path) -> None:
    log = tmp_path / "soak.csv"
    log.write_text("when,volts\n2026-12-02T09:00:00,5.01\n2026-12-02T09:00:30,5.02\n"
                   "2026-12-02T09:01:00,5.00\n")
    values, times = read_timed_column(log, "volts", "when")
    assert values.tolist() == [5.01, 5.02, 5.00] and times.tolist() == [0.0, 30.0, 60.0]


def test_a_bad_time_names_its_line(tmp_path) -> None:
    log = tmp_path / "soak.csv"
    log.write_text("t,volts\n0,5.01\nsoon,5.02\n")
    with pytest.raises(TrialError, match=r"soak.csv, line 3: 'soon' is not a time"):
        read_timed_column(log, "volts", "t")


def test_gaps_and_out_of_order_readings_are_noted() -> None:
    steady = np.arange(0.0, 120.0, 10.0)
    assert log_time_notes(steady) == []
    gapped = np.concatenate([steady, [400.0, 410.0]])
    (gap,) = log_time_notes(gapped)
    assert gap["code"] == "log-gaps" and "longest 290 s against a usual step of 10 s" in gap["text"]
    shuffled = np.array([0.0, 10.0, 30.0, 20.0, 40.0, 50.0])
    codes = {note["code"] for note in log_time_notes(shuffled)}
    assert "log-out-of-order" in codes


def test_the_fixture_records_times_and_the_run_chart_uses_them(run_suite, pytester) -> None:
    (pytester.path / "soak.csv").write_text(SOAK.replace("110,", "410,"))  # the last reading late
    pytester.makeconftest("""
import json

def pytest_meanband_session_finish(config, rows):
    (config.rootpath / "rows.json").write_text(json.dumps(rows))
""")
    pytester.makepyfile(test_soak="""
def test_soak(trials):
    trials.extend_from("soak.csv", "plate_degC", unit="degC", time="t")
    trials.check(center=85.0, tolerance=0.3)
""")
    result = run_suite()
    result.assert_outcomes(passed=1)
    (row,) = json.loads((pytester.path / "rows.json").read_text())
    assert row["times"][:3] == [0.0, 10.0, 20.0] and row["times"][-1] == 410.0
    assert "log-gaps" in {note["code"] for note in row["notes"]}
    figure = plots._draw_run(row, "soak")
    assert figure.axes[0].get_xlabel() == "time since the first reading (s)"
