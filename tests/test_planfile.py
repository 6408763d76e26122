"""Tests for planfile.py: the plan's TOML round trip and its errors."""

from __future__ import annotations

import sys

import pytest
from meanband.store.planfile import (
    FORMAT_VERSION,
    PlanEntry,
    PlanError,
    dumps_plan,
    entries_from_rows,
    loads_plan,
    read_plan,
    write_plan,
)

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

ENTRIES = [
    PlanEntry("suite/test_kiln.py::test_zone_mean", "", 24, "undecided at 6 trials", None),
    PlanEntry("suite/test_kiln.py::test_zone_mean", "cold start", 30, "more", 1.25),
    PlanEntry('suite/test_kiln.py::test_zone[door-"B"]', "", None, "the mean sits on the edge"),
    PlanEntry("suite/test_belt.py::test_dwell", "", 12, "wide margin", 3.5),
]


def test_round_trip_keeps_every_entry(tmp_path):
    path = write_plan(tmp_path / "sub" / "plan.toml", ENTRIES, power=0.9)
    plan = read_plan(path)
    assert plan.power == 0.9
    assert sorted(plan.entries.values(), key=lambda e: (e.nodeid, e.series)) == sorted(
        ENTRIES, key=lambda e: (e.nodeid, e.series))
    assert set(plan.for_test("suite/test_kiln.py::test_zone_mean")) == {"", "cold start"}
    assert plan.for_test("suite/test_none.py::test_gone") == {}
    assert plan.nodeids()[0] == "suite/test_belt.py::test_dwell"  # sorted for stable diffs
    assert not list((tmp_path / "sub").glob(".plan-*"))  # no temporary file left behind


def test_written_text_is_plain_toml_with_a_header():
    text = dumps_plan(ENTRIES, power=0.9)
    assert text.startswith("# meanband trial plan")
    data = tomllib.loads(text)
    assert data["plan"] == {"version": FORMAT_VERSION, "power": 0.9}
    table = data["tests"]["suite/test_kiln.py::test_zone_mean"]
    assert table["n"] == 24 and table["series"]["cold start"]["n"] == 30
    assert "n" not in data["tests"]['suite/test_kiln.py::test_zone[door-"B"]']


def _check_row(nodeid, series, verdict, n, suggestion):
    return {"nodeid": nodeid, "series": series, "kind": "check",
            "decision": {"verdict": verdict, "interval": {"n": n}},
            "suggestion": suggestion}


def test_entries_from_rows_take_the_largest_count_per_series():
    rows = [
        _check_row("t.py::a", "", "UNDECIDED", 6, {"n": 20, "reason": "first check"}),
        _check_row("t.py::a", "", "PASS", 6, {"n": 30, "reason": "second check"}),
        _check_row("t.py::a", "warm", "PASS", 40, {"n": 12, "reason": "wide",
                                                  "saves_seconds": 2.0}),
        _check_row("t.py::b", "", "FAIL", 15, None),
        {"nodeid": "t.py::c", "series": "", "kind": "unchecked", "decision": None},
        _check_row("t.py::d", "", "UNDECIDED", 15, {"n": None, "reason": "on the edge"}),
        _check_row("t.py::e", "", "PASS", 15, {"n": None, "reason": "x", "direction": "auto"}),
    ]
    entries = {(e.nodeid, e.series): e for e in entries_from_rows(rows)}
    assert entries[("t.py::a", "")].n == 30 and entries[("t.py::a", "")].reason == "second check"
    assert entries[("t.py::a", "warm")].saves_seconds == 2.0
    failed = entries[("t.py::b", "")]
    assert failed.n == 15 and "failed decisively" in failed.reason
    assert ("t.py::c", "") not in entries
    assert entries[("t.py::d", "")].n is None
    assert ("t.py::e", "") not in entries  # n="auto" picks its count at run time


def test_syntax_error_names_the_file_and_line():
    text = dumps_plan(ENTRIES).replace("n = 12", "n = = 12")
    line = text.splitlines().index("n = = 12") + 1
    with pytest.raises(PlanError, match=rf"plan\.toml is not valid TOML: .*line {line}"):
        loads_plan(text, source="plan.toml")


@pytest.mark.parametrize("bad", ["1", "true", "2.5", "\"ten\"", "-4"])
def test_a_bad_count_names_its_line(bad):
    text = dumps_plan(ENTRIES).replace("n = 30", f"n = {bad}")
    line = text.splitlines().index(f"n = {bad}") + 1
    with pytest.raises(PlanError, match=rf"plan\.toml, line {line}: .*cold start.*n must be"):
        loads_plan(text, source="plan.toml")


def test_unknown_keys_are_refused_with_the_known_ones():
    text = dumps_plan(ENTRIES).replace("n = 24", "n = 24\ntrials = 5")
    with pytest.raises(PlanError, match="unknown key 'trials'; known keys: n, max_n, reason"):
        loads_plan(text, source="plan.toml")
    with pytest.raises(PlanError, match="unknown top-level key 'extra'"):
        loads_plan("extra = 1\n", source="plan.toml")


def test_other_format_version_is_refused():
    with pytest.raises(PlanError, match="format version 7"):
        loads_plan("[plan]\nversion = 7\n", source="plan.toml")


def test_bad_power_and_bad_types_are_refused():
    with pytest.raises(PlanError, match=r"line 2: plan\.power"):
        loads_plan("[plan]\npower = 90\n", source="p")
    with pytest.raises(PlanError, match="must be a table"):
        loads_plan('[tests]\n"t.py::a" = 12\n', source="p")
    with pytest.raises(PlanError, match="reason must be a string"):
        loads_plan('[tests."t.py::a"]\nn = 4\nreason = 3\n', source="p")


def test_missing_file_says_how_to_make_one(tmp_path):
    with pytest.raises(PlanError, match="does not exist; write one with --meanband-write-plan"):
        read_plan(tmp_path / "absent.toml")


def test_hand_written_plan_is_read():
    plan = loads_plan('[tests."t.py::a"]\nn = 40\n[tests."t.py::a".series.hot]\nn = 8\n')
    assert plan.for_test("t.py::a")[""].n == 40
    assert plan.for_test("t.py::a")["hot"].n == 8
    assert plan.power is None


@pytest.mark.parametrize("text", [
    "a = " + "[" * 100_000 + "]" * 100_000,
    '[tests."t.py::test_a"]\nn = ' + "{x = " * 5000 + "1" + "}" * 5000,
])
def test_deeply_nested_toml_is_a_plan_error_naming_the_file(tmp_path, text):
    path = tmp_path / "deep.toml"
    path.write_text(text)
    with pytest.raises(PlanError, match=r"plan file .*deep\.toml: .*nested too deeply"):
        read_plan(path)
