"""Metrology options alongside other features: pooled reports, n="auto", suggested counts."""

from __future__ import annotations

import math

import numpy as np
import pytest
from meanband.errors import BandViolation
from meanband.record.recorder import Recorder
from meanband.record.settings import resolve
from meanband.report.merge import merge_reports
from meanband.stats.uncertainty import uncertainty_budget
from meanband.store import report_json
from meanband.store.report_json import ReportError

RNG = np.random.default_rng(417)


def _row(values, **check) -> dict:
    """A row exactly as the fixture records it."""
    recorder = Recorder(resolve([]), "t.py::test_loop")
    recorder.extend(values, unit="mA")
    try:
        recorder.check(center=12.0, tolerance=0.04, **check)
    except BandViolation:
        pass
    (row,) = recorder.all_rows()
    return row


def _report(rows) -> dict:
    built = report_json.build_report(
        rows, environment=report_json.environment(),
        configuration={"args": [], "options": {}}, include_trials=True,
    )
    return report_json.loads(report_json.dumps(built))


def test_pooling_recomputes_uncertainty_and_rule_with_the_instrument() -> None:
    first, second = RNG.normal(12.01, 0.01, 8), RNG.normal(12.01, 0.01, 12)
    check = {"instrument_uncertainty": (0.006, 10)}
    merged = merge_reports(
        [("a.json", _report([_row(first, **check)])), ("b.json", _report([_row(second, **check)]))],
        pool=True,
    )
    (row,) = merged["rows"]
    pooled = np.concatenate([first, second])
    budget = uncertainty_budget(pooled, 0.95, "two-sided", (0.006, 10))
    assert row["uncertainty"]["type_b"] == 0.006 and row["uncertainty"]["type_b_df"] == 10
    assert row["uncertainty"]["n"] == 20
    assert row["decision"]["interval"]["high"] == pytest.approx(budget.interval().high, rel=1e-12)
    assert row["decision"]["interval"]["method"] == "t+instrument"
    assert row["rule"]["rule"] == "guarded"
    assert "uncertainty" not in row["pooled"]["dropped"] and "rule" not in row["pooled"]["dropped"]


def test_pooling_keeps_simple_acceptance() -> None:
    first, second = RNG.normal(12.03, 0.02, 10), RNG.normal(12.03, 0.02, 10)
    merged = merge_reports(
        [("a.json", _report([_row(first, rule="simple")])),
         ("b.json", _report([_row(second, rule="simple")]))],
        pool=True,
    )
    (row,) = merged["rows"]
    assert row["rule"]["rule"] == "simple"
    assert row["uncertainty"]["type_b"] == 0.0
    assert math.isfinite(row["rule"]["conformance_probability"])


@pytest.mark.parametrize(
    ("check_a", "check_b", "what"),
    [({"instrument_uncertainty": 0.006}, {}, "instrument uncertainty"),
     ({"instrument_uncertainty": (0.006, 10)}, {"instrument_uncertainty": 0.006},
      "instrument uncertainty"),
     ({"rule": "simple"}, {}, "decision rule")],
)
def test_pooling_refuses_shards_that_checked_differently(check_a, check_b, what) -> None:
    values = RNG.normal(12.0, 0.01, 10)
    with pytest.raises(ReportError, match=f"its {what} is"):
        merge_reports(
            [("a.json", _report([_row(values, **check_a)])),
             ("b.json", _report([_row(values, **check_b)]))],
            pool=True,
        )


@pytest.mark.parametrize("check", [{"instrument_uncertainty": 0.003}, {"rule": "simple"}])
def test_adaptive_count_refuses_instrument_and_simple_rule_clearly(check) -> None:
    from meanband.errors import TrialError

    recorder = Recorder(resolve([]), "t.py::test_loop")
    rng = np.random.default_rng(1)
    recorder.sample(lambda: float(rng.normal(12.0, 0.005)), n="auto", unit="mA",
                    band={"center": 12.0, "tolerance": 0.04})
    with pytest.raises(TrialError, match="cannot be used with n='auto'"):
        recorder.check(**check)
    assert recorder.all_rows()[0]["kind"] == "unchecked"  # nothing recorded as a check


def test_simple_acceptance_keeps_its_count_instead_of_a_power_suggestion() -> None:
    from meanband.record.suggestion import suggestion_for_row

    values = RNG.normal(12.039, 0.01, 20)  # mean just inside the upper edge 12.04
    simple = suggestion_for_row(_row(values, rule="simple"))
    assert simple is not None and simple.direction == "keep" and simple.n == 20
    assert "simple acceptance" in simple.reason
    # The same trials under guarded acceptance get a count from the power of the interval.
    guarded = suggestion_for_row(_row(values))
    assert guarded is not None and guarded.direction == "more"
