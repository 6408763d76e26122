"""The Markdown summary and the job-summary file."""

from __future__ import annotations

import re

import numpy as np
import pytest
from meanband.report.markdown import append_job_summary, format_markdown, write_markdown
from meanband.store.report_json import ReportError
from report_rows import make_row, sample_rows


def table_lines(text):
    return [line for line in text.splitlines() if line.startswith("|")]


def cells(line):
    return [c.strip() for c in re.split(r"(?<!\\)\|", line)[1:-1]]


def test_one_table_row_per_result_under_a_headline():
    rows = sample_rows()
    text = format_markdown(rows)
    assert text.startswith("## meanband: 5 checks: 3 PASS, 1 FAIL, 1 UNDECIDED; "
                           "1 series without a check\n")
    lines = table_lines(text)
    assert len(lines) == 2 + len(rows)
    assert all(len(cells(line)) == 8 for line in lines)
    body = {(c[0], c[1]): c for c in (cells(line) for line in lines[2:])}
    # The terminal summary's order: node id, then series.
    assert [key[0].strip("`") for key in body] == sorted(r["nodeid"] for r in rows)
    verdicts = {key[0].strip("`").split("::")[1] + key[1]: c[2] for key, c in body.items()}
    assert verdicts == {
        "test_quote_latency": "PASS", "test_batch_latency": "**UNDECIDED**",
        "test_probe_meanprobe-a": "PASS", "test_probe_meanprobe-b": "**FAIL**",
        "test_supply_rail": "PASS", "test_fan_speed": "no check",
    }
    probe = body[("`tests/test_chamber.py::test_probe_mean`", "probe-a")]
    assert probe[3] == "25"
    assert probe[6] == "[84.6 degC, 85.4 degC]"
    budget = body[("`tests/test_quote.py::test_quote_latency`", "")]
    assert budget[6] == "<= 2 ms"
    assert budget[5].endswith("(95% upper bound)") and budget[5].startswith("<= ")


def test_numbers_match_the_rows():
    rng = np.random.default_rng(2)
    row = make_row("t.py::test_rail", rng.normal(12.0, 0.3, 30), band={"low": 11.0}, unit="V")
    interval = row["decision"]["interval"]
    (line,) = table_lines(format_markdown([row]))[2:]
    mean, bound = cells(line)[4:6]
    assert mean == f"{interval['mean']:.2f} V"  # 4 significant digits
    assert bound.startswith(f">= {interval['low']:.2f} V")


def test_notes_are_numbered_and_referenced():
    rng = np.random.default_rng(4)
    few = make_row("t.py::test_few", rng.normal(5.0, 0.5, 6), band={"high": 9.0})
    assert few["notes"], "six trials should raise the few-trials note"
    undecided = sample_rows()[1]
    text = format_markdown([few, undecided])
    body = [cells(line) for line in table_lines(text)[2:]]
    assert [(c[0], c[7]) for c in body] == [("`t.py::test_few`", "1"),
                                            ("`tests/test_quote.py::test_batch_latency`", "2")]
    assert "1. `t.py::test_few`: only 6 trials" in text
    suggested = undecided["decision"]["suggested_n"]
    assert f"2. `tests/test_quote.py::test_batch_latency`: about {suggested} trials would " \
        "likely decide it" in text


def test_a_suggestion_of_the_planning_feature_is_shown():
    row = dict(sample_rows()[1], suggestion={"text": "run 48 trials", "n": 48})
    text = format_markdown([row])
    assert "1. `tests/test_quote.py::test_batch_latency`: run 48 trials" in text
    assert "would likely decide it" not in text


def test_pipes_in_ids_do_not_break_the_table():
    row = make_row("t.py::test_x[a|b]", [1.0, 2.0, 3.0], band={"high": 5.0})
    (line,) = table_lines(format_markdown([row]))[2:]
    assert cells(line)[0] == "`t.py::test_x[a\\|b]`"
    assert len(cells(line)) == 8


def test_no_rows():
    assert "No checks were recorded." in format_markdown([])


def test_job_summary_appends_to_the_file_the_variable_names(tmp_path):
    target = tmp_path / "summary.md"
    target.write_text("# earlier step\n")
    path = append_job_summary("## meanband\n", "CI_JOB_SUMMARY", {"CI_JOB_SUMMARY": str(target)})
    assert path == target
    assert target.read_text() == "# earlier step\n## meanband\n"


def test_job_summary_without_the_variable_says_which_variable():
    with pytest.raises(ReportError, match="GITHUB_STEP_SUMMARY is not set"):
        append_job_summary("x", environ={})


def test_write_markdown_creates_the_directory(tmp_path):
    path = write_markdown("hello\n", tmp_path / "ci" / "meanband.md")
    assert path.read_text() == "hello\n"


def test_markdown_writes_bounds_and_bands_alike():
    # Before: bounds were written "≤ 2.1 ms" beside bands written "<= 3 ms" in the same table.
    text = format_markdown(sample_rows())
    assert "≤" not in text and "≥" not in text
    assert "<= " in text
