"""The JSON report: strict JSON, a schema that holds, and rows that come back as they went in."""

from __future__ import annotations

import json
import math

import jsonschema
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from meanband.store import report_json
from meanband.store.report_json import ReportError
from report_rows import make_row, same, sample_rows

CORE_ROW_KEYS = ["nodeid", "series", "kind", "unit", "source", "values", "warmup", "decision",
                 "notes", "settings", "run"]
CONFIGURATION = {"args": ["-p", "meanband"], "options": {"meanband_confidence": 0.95}}


def build(rows, **kwargs):
    return report_json.build_report(
        rows, environment=report_json.environment(), configuration=CONFIGURATION, **kwargs
    )


def strict_parse(text):
    """Parse as strict JSON: Python's json otherwise accepts NaN and Infinity tokens."""
    def refuse(token):
        raise AssertionError(f"non-standard JSON token {token}")
    return json.loads(text, parse_constant=refuse)


def schema_errors(document):
    validator = jsonschema.Draft202012Validator(
        report_json.schema(), format_checker=jsonschema.Draft202012Validator.FORMAT_CHECKER
    )
    return list(validator.iter_errors(document))


def test_schema_is_a_valid_draft_2020_12_schema_with_a_version():
    schema = report_json.schema()
    jsonschema.Draft202012Validator.check_schema(schema)
    assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    assert schema["version"] == report_json.SCHEMA_VERSION
    assert schema["properties"]["schema_version"]["const"] == report_json.SCHEMA_VERSION


def test_report_is_strict_json_that_matches_the_schema_in_full():
    text = report_json.dumps(build(sample_rows()))
    document = strict_parse(text)
    assert schema_errors(document) == []
    # Open band edges and one-sided bounds are written as strings JavaScript's Number() reads.
    budget = document["rows"][0]["decision"]
    assert budget["band"]["low"] == "-Infinity"
    assert budget["interval"]["low"] == "-Infinity"
    assert document["totals"] == {"rows": 6, "checks": 5, "PASS": 3, "FAIL": 1,
                                  "UNDECIDED": 1, "unchecked": 1}


def test_rows_come_back_exactly_as_written(tmp_path):
    rows = sample_rows()
    path = report_json.write_report(build(rows), tmp_path / "out" / "report.json")
    loaded = report_json.load_report(path)
    for original, back in zip(rows, loaded["rows"], strict=True):
        back = dict(back)
        assert back.pop("run") == 0
        assert same(original, back)
    assert loaded["rows"][0]["decision"]["band"]["low"] == -math.inf


def test_nan_statistics_survive_the_round_trip():
    row = make_row("t.py::test_two", [1.0, 2.0], band={"high": 5.0}, unit="V")
    assert math.isnan(row["decision"]["diagnostics"]["skewness"])
    loaded = report_json.loads(report_json.dumps(build([row])))
    assert math.isnan(loaded["rows"][0]["decision"]["diagnostics"]["skewness"])


def test_text_that_spells_a_number_stays_text():
    row = make_row("t.py::test_x", [1.0, 2.0, 3.0], series="NaN", band={"high": 5.0})
    loaded = report_json.loads(report_json.dumps(build([row])))
    assert loaded["rows"][0]["series"] == "NaN"


@pytest.mark.parametrize("key", CORE_ROW_KEYS)
def test_schema_requires_every_core_row_key(key):
    document = strict_parse(report_json.dumps(build(sample_rows()[:1])))
    del document["rows"][0][key]
    errors = schema_errors(document)
    assert any(f"'{key}' is a required property" in e.message for e in errors)
    with pytest.raises(ReportError, match=key):
        report_json.loads(json.dumps(document))


def test_schema_allows_keys_of_other_plugins_and_checks_its_own():
    row = make_row("t.py::test_x", [1.0, 2.0, 3.0], band={"high": 5.0},
                   baseline={"run": 3, "label": "main", "status": "no baseline"},
                   dashboard={"panel": "latency"})
    document = strict_parse(report_json.dumps(build([row])))
    assert schema_errors(document) == []
    assert report_json.loads(json.dumps(document))["rows"][0]["baseline"]["label"] == "main"
    # A key the row contract declares is held to its shape (record/row.py, BaselineRecord).
    row["baseline"] = {"label": "main", "mean": 1.9}
    document = strict_parse(report_json.dumps(build([row])))
    assert any("'status' is a required property" in e.message for e in schema_errors(document))


def test_a_check_without_its_decision_is_refused():
    document = strict_parse(report_json.dumps(build(sample_rows()[:1])))
    document["rows"][0]["decision"] = None
    assert schema_errors(document)
    with pytest.raises(ReportError, match="rows/0/decision"):
        report_json.loads(json.dumps(document))


def test_trials_can_be_left_out():
    rows = sample_rows()
    full = report_json.dumps(build(rows))
    slim_text = report_json.dumps(build(rows, include_trials=False))
    slim = strict_parse(slim_text)
    assert schema_errors(slim) == []
    assert slim["trials_included"] is False
    assert all(r["values"] is None and r["warmup"] is None for r in slim["rows"])
    assert all(r["decision"] == f["decision"]
               for r, f in zip(slim["rows"], strict_parse(full)["rows"], strict=True))
    assert len(slim_text) < len(full)


def test_environment_and_configuration_are_recorded():
    document = strict_parse(report_json.dumps(build(sample_rows()[:1])))
    run = document["runs"][0]
    assert run["configuration"] == CONFIGURATION
    assert run["environment"]["packages"]["pytest-meanband"] == report_json.environment()[
        "packages"]["pytest-meanband"]
    assert run["environment"]["python"].count(".") == 2


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("{not json", "not a JSON report"),
        ('{"format": "something-else"}', "not a meanband report"),
        ('{"format": "meanband-report", "schema_version": 99}', "schema version 99"),
        ("[1, 2]", "a report is a JSON object"),
    ],
)
def test_unreadable_reports_are_refused_with_the_reason(text, message):
    with pytest.raises(ReportError, match=message):
        report_json.loads(text, source="shard.json")


def test_bad_trials_are_refused_naming_the_row():
    document = strict_parse(report_json.dumps(build(sample_rows())))
    document["rows"][2]["values"][3] = "12.5"
    with pytest.raises(ReportError, match=r"rows/2/values must hold numbers only, found str"):
        report_json.loads(json.dumps(document))
    assert schema_errors(document)  # the full schema says the same


def test_nan_tokens_are_refused():
    text = report_json.dumps(build(sample_rows()[:1])).replace('"-Infinity"', "-Infinity", 1)
    with pytest.raises(ReportError, match="not JSON"):
        report_json.loads(text)


def test_non_finite_trials_cannot_be_written():
    row = make_row("t.py::test_x", [1.0, 2.0, 3.0], band={"high": 5.0})
    row["values"][1] = math.nan
    with pytest.raises(ReportError, match="raw trials must be finite"):
        report_json.dumps(build([row]))


def test_a_row_naming_a_missing_run_is_refused():
    document = strict_parse(report_json.dumps(build(sample_rows()[:2])))
    document["rows"][1]["run"] = 3
    with pytest.raises(ReportError, match="rows/1 names run 3"):
        report_json.loads(json.dumps(document))


def test_missing_file_is_named(tmp_path):
    with pytest.raises(ReportError, match=r"no-such\.json: no such report file"):
        report_json.load_report(tmp_path / "no-such.json")


finite = st.floats(min_value=-1e6, max_value=1e6, allow_nan=False, allow_infinity=False)


@settings(max_examples=40, deadline=None,
          suppress_health_check=[HealthCheck.too_slow])
@given(
    values=st.lists(finite, min_size=2, max_size=40),
    warmup=st.lists(finite, max_size=5),
    band=st.sampled_from(["upper", "lower", "two-sided", "none"]),
    series=st.text(max_size=12),
)
def test_any_row_survives_the_round_trip(values, warmup, band, series):
    middle = sum(values) / len(values)
    edges = {"upper": {"high": middle + 1.0}, "lower": {"low": middle - 1.0},
             "two-sided": {"low": middle - 1.0, "high": middle + 1.0}, "none": None}[band]
    row = make_row("t.py::test_any", values, band=edges, series=series, warmup=warmup,
                   unit="V")
    text = report_json.dumps(build([row]))
    strict_parse(text)
    (back,) = report_json.loads(text)["rows"]
    back.pop("run")
    assert same(row, back)


def test_deeply_nested_json_is_a_report_error_not_a_recursion_error() -> None:
    from meanband.store.report_json import ReportError, loads

    with pytest.raises(ReportError, match="nested too deeply"):
        loads("[" * 100_000 + "]" * 100_000, source="deep.json")
