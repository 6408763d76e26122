"""Notes ranked by whether they threaten the verdict: the summary shows those, counts the rest."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from meanband import make_band, mean_interval
from meanband.record.check import decide_with_notes
from meanband.report.attention import threatens_verdict
from meanband.stats.decision import WIDE_MARGIN, headroom

RNG = np.random.default_rng(20261204)
SKEWED = RNG.lognormal(0.0, 1.0, 40)


def _ar1(n: int, phi: float) -> np.ndarray:
    e = RNG.standard_normal(n)
    x = np.empty(n)
    x[0] = e[0]
    for i in range(1, n):
        x[i] = phi * x[i - 1] + e[i]
    return 10.0 + x


CORRELATED = _ar1(60, 0.8)


def test_headroom_by_hand() -> None:
    # Worked by hand: mean 10, upper bound 11 (reach 1), budget 13: room 3, headroom 3.
    assert headroom(10.0, -math.inf, 11.0, -math.inf, 13.0) == pytest.approx(3.0)
    # Two-sided: the nearer edge decides; reach 0.5 each side, rooms 2 and 1 -> 2.
    assert headroom(10.0, 9.5, 10.5, 9.0, 12.0) == pytest.approx(2.0)
    # Across the edge: below 1.
    assert headroom(10.0, -math.inf, 11.0, -math.inf, 10.5) == pytest.approx(0.5)
    assert headroom(10.0, 10.0, 10.0, 9.0, 11.0) == math.inf  # a point interval inside


def _bound(x: np.ndarray) -> tuple[float, float]:
    iv = mean_interval(x, 0.95, "upper")
    return iv.mean, iv.high


def test_a_wide_margin_pass_gets_no_normality_note() -> None:
    # Before: "normality matters here" fired on checks that passed 3-10x inside the budget.
    mean, high = _bound(SKEWED)
    reach = high - mean
    settings = {"confidence": 0.95}
    _, tight = decide_with_notes(SKEWED, make_band(high=mean + 1.5 * reach), settings)
    _, wide = decide_with_notes(SKEWED, make_band(high=mean + 10 * reach), settings)
    assert "not-normal" in {n["code"] for n in tight}
    assert not {"not-normal", "outliers"} & {n["code"] for n in wide}


def _row(verdict: str, mean: float, high: float, budget: float, code: str) -> dict:
    return {"decision": {"verdict": verdict,
                         "interval": {"mean": mean, "low": -math.inf, "high": high},
                         "band": {"low": -math.inf, "high": budget}},
            "notes": [{"code": code, "text": "x"}]}


@pytest.mark.parametrize(
    ("verdict", "budget", "code", "shown"),
    [("PASS", 10.0 + 1.0 * (WIDE_MARGIN + 1), "autocorrelated", False),
     ("PASS", 10.0 + 1.0 * (WIDE_MARGIN - 1), "autocorrelated", True),
     ("PASS", 100.0, "calibration-overdue", True),
     ("UNDECIDED", 10.5, "xdist-worker", True),
     ("FAIL", 9.0, "drift", True)],
)
def test_which_notes_threaten(verdict, budget, code, shown) -> None:
    row = _row(verdict, 10.0, 11.0, budget, code)
    assert threatens_verdict(row, row["notes"][0]) is shown
    unchecked = {"kind": "unchecked", "notes": row["notes"]}
    assert threatens_verdict(unchecked, row["notes"][0]) is (code == "calibration-overdue")


SUITE = """
CORRELATED = {data!r}


def test_wide(trials):
    trials.extend(CORRELATED, unit="V")
    trials.check(high=100.0)


def test_tight(trials):
    trials.extend(CORRELATED, unit="V")
    trials.check(high={tight!r})
"""


def test_summary_shows_threatening_notes_and_counts_the_rest(run_suite, pytester, tmp_path) -> None:
    # Before: every note of every check was printed, drowning the verdicts.
    mean, high = _bound(CORRELATED)
    pytester.makepyfile(test_notes=SUITE.format(data=CORRELATED.tolist(),
                                                tight=mean + 1.5 * (high - mean)))
    report = tmp_path / "all.json"
    result = run_suite(f"--meanband-report={report}")
    result.assert_outcomes(passed=2)
    text = result.stdout.str()
    assert "test_notes.py::test_tight: trials autocorrelated" in text
    assert "test_notes.py::test_wide: trials autocorrelated" not in text
    result.stdout.fnmatch_lines(["*(1 more note on checks that pass with room to spare*-v shows them*"])
    rows = {r["nodeid"].split("::")[1]: r for r in json.loads(report.read_text())["rows"]}
    assert "autocorrelated" in {n["code"] for n in rows["test_wide"]["notes"]}  # JSON: all
    verbose = run_suite("-v").stdout.str()
    assert "test_notes.py::test_wide: trials autocorrelated" in verbose
    assert "more note" not in verbose


def test_verbose_metrology_lines_leave_plain_timing_checks_alone(run_suite, pytester) -> None:
    # Before: -v printed U, k and a probability of false acceptance like 9.17e-55 for plain
    # timing checks, where "k" also meant calls per trial.
    pytester.makepyfile(test_mixed="""
def test_timing(trials):
    trials.extend([1.0e-3, 1.1e-3, 0.9e-3, 1.05e-3, 0.95e-3], unit="s")
    trials.check(high="5ms")

def test_probe(trials):
    trials.extend([85.0, 85.1, 84.9, 85.05, 84.95], unit="degC")
    trials.check(center=85.0, tolerance=0.4)
""")
    text = run_suite("-v").stdout.str()
    section = text.split("measurement uncertainty and decision rule:")[1]
    assert "test_mixed.py::test_probe: U = " in section
    assert "test_mixed.py::test_timing: U = " not in section


def test_a_repeated_check_says_so(run_suite, pytester) -> None:
    # Before: check() twice on the same trials and band gave two identical rows silently.
    pytester.makepyfile(test_twice="""
def test_twice(trials):
    trials.extend([1.0, 1.1, 0.9, 1.05, 0.95, 1.02, 0.98, 1.01, 0.99, 1.0], unit="V")
    trials.check(high=2.0)
    trials.check(high=2.0)
    trials.check(high=3.0)  # another band: no repeat
""")
    result = run_suite()
    result.assert_outcomes(passed=1)
    text = result.stdout.str()
    assert text.count("were already checked against this band") == 1
    assert "(check 1 of this series): this row repeats it" in text
