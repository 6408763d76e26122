"""Merging shard reports: disjoint shards concatenate, repeats conflict or pool."""

from __future__ import annotations

import numpy as np
import pytest
from meanband.report.merge import MergeConflict, merge_reports
from meanband.store import report_json
from meanband.store.report_json import ReportError
from report_rows import make_row, sample_rows


def report(rows, include_trials=True):
    built = report_json.build_report(
        rows, environment=report_json.environment(),
        configuration={"args": [], "options": {}}, include_trials=include_trials,
    )
    return report_json.loads(report_json.dumps(built))  # as the merge command sees them


def test_disjoint_shards_concatenate_with_their_runs():
    rows = sample_rows()
    merged = merge_reports([("shard-1.json", report(rows[:2])), ("shard-2.json", report(rows[2:]))])
    assert [r["nodeid"] for r in merged["rows"]] == [r["nodeid"] for r in rows]
    assert [run["source"] for run in merged["runs"]] == ["shard-1.json", "shard-2.json"]
    assert [r["run"] for r in merged["rows"]] == [0, 0, 1, 1, 1, 1]
    assert merged["totals"] == report_json.totals(rows)
    # The merged report is itself a valid report.
    assert report_json.loads(report_json.dumps(merged))["totals"]["rows"] == 6


def test_the_same_check_in_two_shards_is_an_error_naming_both():
    rows = sample_rows()
    with pytest.raises(MergeConflict) as caught:
        merge_reports([("ci-a.json", report(rows[:3])), ("ci-b.json", report(rows[2:]))])
    message = str(caught.value)
    assert "1 check(s) appear in more than one report" in message
    assert "tests/test_chamber.py::test_probe_mean [series 'probe-a']: in ci-a.json, ci-b.json" \
        in message
    assert "--pool" in message


def test_two_checks_of_one_series_in_one_report_are_not_a_conflict():
    rng = np.random.default_rng(3)
    values = rng.normal(5.0, 0.1, 20)
    rows = [make_row("t.py::test_rail", values, band={"low": 4.0}, unit="V"),
            make_row("t.py::test_rail", values, band={"high": 6.0}, unit="V")]
    merged = merge_reports([("one.json", report(rows))])
    assert len(merged["rows"]) == 2


def test_pooling_recomputes_the_decision_from_all_trials():
    from scipy import stats

    rng = np.random.default_rng(11)
    first, second = rng.normal(1.0e-3, 2e-4, 10), rng.normal(1.1e-3, 2e-4, 14)
    rows_a = [make_row("t.py::test_lookup", first, band={"high": "1.2ms"}, unit="s",
                       baseline={"run": 1, "label": "main", "status": "no baseline"})]
    rows_b = [make_row("t.py::test_lookup", second, band={"high": "1.2ms"}, unit="s")]
    merged = merge_reports([("a.json", report(rows_a)), ("b.json", report(rows_b))], pool=True)
    (row,) = merged["rows"]
    pooled = np.concatenate([first, second])
    assert row["values"] == pooled.tolist()
    assert row["pooled"] == {"runs": [0, 1], "counts": [10, 14], "dropped": ["baseline"]}
    assert "baseline" not in row
    interval = row["decision"]["interval"]
    assert interval["n"] == 24
    # Reference: scipy.stats.t.interval; the one-sided 95% upper bound is the upper end of the
    # two-sided 90% interval.
    _, upper = stats.t.interval(0.90, df=23, loc=pooled.mean(), scale=stats.sem(pooled))
    assert interval["high"] == pytest.approx(upper, rel=1e-12)
    note = row["notes"][-1]
    assert note["code"] == "pooled"
    assert "10 + 14 = 24" in note["text"] and "baseline" in note["text"]


def test_pooling_a_pooled_report_again_keeps_every_run():
    rng = np.random.default_rng(5)
    shards = [report([make_row("t.py::test_probe", rng.normal(20.0, 0.5, 8), band={"high": 25.0},
                               unit="degC")]) for _ in range(3)]
    first = merge_reports([("a.json", shards[0]), ("b.json", shards[1])], pool=True)
    again = merge_reports([("ab.json", first), ("c.json", shards[2])], pool=True)
    (row,) = again["rows"]
    assert row["pooled"]["runs"] == [0, 1, 2]
    assert row["pooled"]["counts"] == [8, 8, 8]
    assert [run["source"] for run in again["runs"]] == ["a.json", "b.json", "c.json"]


def test_pooling_refuses_checks_with_different_bands():
    values = np.linspace(1.0, 2.0, 10)
    a = report([make_row("t.py::test_x", values, band={"high": 3.0})])
    b = report([make_row("t.py::test_x", values, band={"high": 4.0})])
    with pytest.raises(ReportError, match=r"its band is .* in a\.json but .* in b\.json"):
        merge_reports([("a.json", a), ("b.json", b)], pool=True)


def test_pooling_needs_the_trials():
    rows = sample_rows()[:1]
    with pytest.raises(ReportError, match=r"slim\.json was written without its trials"):
        merge_reports([("full.json", report(rows)), ("slim.json", report(rows, False))], pool=True)


def test_merging_nothing_is_an_error():
    with pytest.raises(ReportError, match="at least one report"):
        merge_reports([])


def test_a_report_given_twice_is_refused(tmp_path):
    # Before: `meanband merge --pool a.json a.json` pooled a report with itself, counting its
    # trials twice and narrowing every interval for nothing.
    rows = sample_rows()
    path = str(tmp_path / "a.json")
    for pool in (False, True):
        with pytest.raises(ReportError, match=r"a\.json is given twice"):
            merge_reports([(path, report(rows)), (path, report(rows))], pool=pool)
