"""Traceability of a bench gate: the instrument's calibration record travels with the check, an
overdue calibration is loud, and a low test uncertainty ratio is noted."""

from __future__ import annotations

import datetime
import json

import numpy as np
import pytest
from meanband import Calibration, InstrumentUncertainty
from meanband.errors import TrialError
from meanband.record.check import decide_with_notes
from meanband.stats.bands import make_band

RNG = np.random.default_rng(41)
LOOP = RNG.normal(12.0, 0.004, 30)  # invented: a current-loop output, mA
CALIBRATED = Calibration("DMM-0417", "CAL-2026-118", calibrated="2026-03-01", due="2027-03-01")


def _check(uncertainty, center=12.0, tolerance=0.04, today=datetime.date(2026, 12, 2)):
    return decide_with_notes(LOOP, make_band(center=center, tolerance=tolerance, unit="mA"),
                             {"confidence": 0.95, "method": "t"},
                             instrument_uncertainty=uncertainty, today=today)


def test_the_calibration_record_travels_in_the_uncertainty_budget() -> None:
    decision, notes = _check(InstrumentUncertainty.from_certificate(0.006, 2.0, calibration=CALIBRATED))
    record = decision.to_dict()["uncertainty"]["calibration"]
    assert record == {"instrument": "DMM-0417", "certificate": "CAL-2026-118",
                      "calibrated": "2026-03-01", "due": "2027-03-01"}
    assert json.loads(json.dumps(record)) == record
    assert "calibration-overdue" not in {n["code"] for n in notes}


def test_a_check_after_the_due_date_gets_a_loud_note() -> None:
    _, notes = _check(InstrumentUncertainty.from_certificate(0.006, 2.0, calibration=CALIBRATED),
                      today=datetime.date(2027, 3, 2))
    (note,) = [n for n in notes if n["code"] == "calibration-overdue"]
    assert "DMM-0417 (certificate CAL-2026-118) was due for calibration on 2027-03-01" in note["text"]


def test_a_low_test_uncertainty_ratio_is_noted() -> None:
    # TUR = (T_U - T_L) / (2U), 4:1 common practice (no source). Here U is about 2 x 0.006 = 0.012
    # of a 0.08 wide tolerance: about 3.3:1.
    decision, notes = _check(InstrumentUncertainty.from_certificate(0.012, 2.0))
    ratio = 0.08 / (2 * decision.uncertainty.expanded)
    assert decision.uncertainty_ratio == pytest.approx(ratio)
    assert decision.to_dict()["rule"]["uncertainty_ratio"] == pytest.approx(ratio)
    (note,) = [n for n in notes if n["code"] == "low-uncertainty-ratio"]
    assert f"test uncertainty ratio {ratio:.2g}:1" in note["text"] and ratio < 4
    _, fine = _check(InstrumentUncertainty.from_certificate(0.002, 2.0))
    assert "low-uncertainty-ratio" not in {n["code"] for n in fine}


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"instrument": ""}, "names its instrument"),
        ({"instrument": "DMM-1", "due": "next spring"}, "not a date"),
        ({"instrument": "DMM-1", "calibrated": "2026-05-01", "due": "2026-01-01"}, "swap the dates"),
    ],
)
def test_bad_calibration_records_are_clear_errors(kwargs, message) -> None:
    with pytest.raises(TrialError, match=message):
        Calibration(**kwargs)


SUITE = """
import numpy as np
import pytest
from meanband import Calibration, InstrumentUncertainty

LOOP = np.random.default_rng(41).normal(12.0, 0.004, 30)
OLD = InstrumentUncertainty.from_certificate(
    0.002, 2.0, calibration=Calibration("DMM-0388", "CAL-2024-007", due="2025-01-31"))

def test_noted(trials):
    trials.extend(LOOP, unit="mA")
    trials.check(center=12.0, tolerance=0.04, instrument_uncertainty=OLD)

@pytest.mark.meanband(overdue_calibration="fail")
def test_refused(trials):
    trials.extend(LOOP, unit="mA")
    trials.check(center=12.0, tolerance=0.04, instrument_uncertainty=OLD)
"""


def test_overdue_calibration_notes_by_default_and_fails_when_asked(run_suite, pytester) -> None:
    pytester.makepyfile(test_loop=SUITE)
    result = run_suite("--meanband-report", "out/loop.json")
    result.assert_outcomes(passed=1, failed=1)
    result.stdout.fnmatch_lines([
        "*instrument DMM-0388 (certificate CAL-2024-007) was due for calibration on 2025-01-31*"
        "overdue_calibration='fail'; the check is recorded*",
    ])
    rows = json.loads((pytester.path / "out" / "loop.json").read_text())["rows"]
    assert len(rows) == 2 and all(r["uncertainty"]["calibration"]["instrument"] == "DMM-0388"
                                  for r in rows)
    assert "instrument DMM-0388 (certificate CAL-2024-007), due 2025-01-31" in result.stdout.str()


def test_the_ratio_threshold_is_a_setting(run_suite, pytester) -> None:
    pytester.makepyfile(test_loop="""
import numpy as np
import pytest

LOOP = np.random.default_rng(41).normal(12.0, 0.004, 30)

@pytest.mark.meanband(min_uncertainty_ratio=2)
def test_loose(trials):
    trials.extend(LOOP, unit="mA")
    trials.check(center=12.0, tolerance=0.04, instrument_uncertainty=0.012 / 2)

def test_default(trials):
    trials.extend(LOOP, unit="mA")
    trials.check(center=12.0, tolerance=0.04, instrument_uncertainty=0.012 / 2)
""")
    result = run_suite("-rA")
    result.assert_outcomes(passed=2)
    text = result.stdout.str()
    assert "test_default: test uncertainty ratio" in text and "below 4:1" in text
    assert "test_loose: test uncertainty ratio" not in text
    bad = run_suite("--meanband-min-uncertainty-ratio", "-3")
    assert bad.ret == 4 and "option --meanband-min-uncertainty-ratio" in bad.stderr.str()
