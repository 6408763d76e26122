"""The caution that a passing gate is not a certificate reaches every output filed with a unit's
record: the terminal summary, the Markdown and the JSON report; simple acceptance is marked."""

from __future__ import annotations

import json

from meanband.record.message import CAUTION
from meanband.report.markdown import format_markdown
from report_rows import make_row

# Invented scenario: a kiln controller's thermocouple (a measurement) and its parser (a timing).
SUITE = """
import numpy as np

ZONE = np.random.default_rng(8).normal(640.1, 0.3, 30).tolist()

def test_zone(trials):
    trials.extend(ZONE, unit="degC")
    trials.check(center=640.0, tolerance=2.0, instrument_uncertainty=0.1)

def test_zone_simple(trials):
    trials.series("simple").extend(ZONE, unit="degC")
    trials.series("simple").check(center=640.0, tolerance=2.0, rule="simple")
"""

TIMING_ONLY = """
def test_parse(trials):
    trials.time(lambda: float("640.25"), n=8)
    trials.check(high="5ms")
"""


def test_summary_markdown_and_json_carry_the_caution(run_suite, pytester) -> None:
    pytester.makepyfile(test_kiln=SUITE)
    result = run_suite("--meanband-report", "out/kiln.json", "--meanband-markdown", "out/kiln.md")
    result.assert_outcomes(passed=2)
    text = result.stdout.str()
    assert text.count("note on measurement gates: A passing gate is a statistical statement") == 1
    assert "licensed professional practice" in text
    assert any("95% simple" in line and "[simple]" in line for line in result.outlines)
    markdown = (pytester.path / "out" / "kiln.md").read_text()
    assert f"> {CAUTION}" in markdown
    assert "Measurement uncertainty and decision rule:" in markdown and "U = " in markdown
    assert "PASS (simple acceptance)" in markdown
    report = json.loads((pytester.path / "out" / "kiln.json").read_text())
    assert report["caution"] == CAUTION


def test_timing_budgets_alone_get_no_caution(run_suite, pytester) -> None:
    pytester.makepyfile(test_parse=TIMING_ONLY)
    result = run_suite("--meanband-report", "out/parse.json")
    result.assert_outcomes(passed=1)
    assert "note on measurement gates" not in result.stdout.str()
    assert json.loads((pytester.path / "out" / "parse.json").read_text())["caution"] is None


def test_markdown_without_measurements_has_no_caution() -> None:
    row = make_row("t.py::test_fast", [1e-3, 1.1e-3, 0.9e-3], band={"high": "2ms"}, unit="s")
    assert CAUTION not in format_markdown([row])
