"""``meanband plan``: suggestions from stored rows, without running the tests."""

from __future__ import annotations

import json
import re
import sys

import numpy as np
import pytest
from meanband.cli import main
from meanband.store.planfile import read_plan

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

RNG = np.random.default_rng(77)


def _straddle() -> list[float]:
    z = RNG.standard_normal(6)
    return (299.7 + 0.5 * (z - z.mean()) / z.std(ddof=1)).tolist()  # upper bound 300.11


SUITE = f"""
import json

def test_kiln(trials):
    trials.extend({_straddle()!r}, unit="degC")
    trials.check(high=300.0)

def test_wide(trials):
    trials.extend({(5.0 + 0.05 * RNG.standard_normal(60)).tolist()!r}, unit="V")
    trials.check(4.0, 6.0)

def test_hot(trials):
    trials.extend([310.0, 311.0, 309.5, 310.5, 310.2, 309.8], unit="degC")
    trials.check(high=300.0)
"""

DUMP_ROWS = """
import json

def pytest_meanband_session_finish(config, rows):
    with open("rows.json", "w") as stream:
        json.dump(rows, stream)
"""


@pytest.fixture
def rows_file(run_suite, pytester):
    pytester.makepyfile(test_bench=SUITE)
    pytester.makeconftest(DUMP_ROWS)
    run_suite("--meanband-write-plan", "from-run.toml")
    return pytester.path / "rows.json"


def test_plan_from_a_rows_file_matches_the_run(rows_file, capsys):
    status = main(["plan", "--rows", str(rows_file), "--write", str(rows_file.with_name("cli.toml"))])
    out = capsys.readouterr().out
    assert status == 0
    assert out.splitlines()[0].startswith("suggested trial counts (90% power) from ")
    assert "test_bench.py::test_kiln" in out and "UNDECIDED at n=6; about" in out
    assert "test_bench.py::test_wide" in out and "wide margin" in out
    assert "test_bench.py::test_hot" in out and "FAIL at n=6; more trials would not change" in out
    # The command and the run agree on every count and reason.
    assert read_plan(rows_file.with_name("cli.toml")).entries == read_plan(
        rows_file.with_name("from-run.toml")).entries


def test_power_option_changes_the_counts(rows_file, capsys):
    main(["plan", "--rows", str(rows_file), "--power", "0.8", "--write", "p80.toml"])
    main(["plan", "--rows", str(rows_file), "--power", "0.95", "--write", "p95.toml"])
    out = capsys.readouterr().out
    assert "(80% power)" in out and "(95% power)" in out
    low = tomllib.loads(open("p80.toml").read())["tests"]["test_bench.py::test_kiln"]["n"]
    high = tomllib.loads(open("p95.toml").read())["tests"]["test_bench.py::test_kiln"]["n"]
    assert low < high


def test_plan_from_a_json_report(run_suite, pytester, capsys):
    pytester.makepyfile(test_bench=SUITE)
    run_suite("--meanband-report", "report.json", "--meanband-write-plan", "from-run.toml")
    assert main(["plan", "--rows", "report.json", "--write", "cli.toml"]) == 0
    assert "UNDECIDED at n=6; about" in capsys.readouterr().out
    assert read_plan("cli.toml").entries == read_plan("from-run.toml").entries
    broken = json.loads(open("report.json").read())
    broken["rows"][0]["decision"]["verdict"] = "MAYBE"
    open("broken.json", "w").write(json.dumps(broken))
    assert main(["plan", "--rows", "broken.json"]) == 2
    assert "broken.json" in capsys.readouterr().err


def test_rows_of_several_runs(tmp_path, rows_file, capsys):
    rows = json.loads(rows_file.read_text())
    tagged = [dict(r, run=0) for r in rows[:1]] + [dict(r, run=1) for r in rows]
    path = tmp_path / "rows.json"
    path.write_text(json.dumps(tagged))
    assert main(["plan", "--rows", str(path)]) == 0
    assert "from run 1 of" in capsys.readouterr().out
    assert main(["plan", "0", "--rows", str(path)]) == 0
    out = capsys.readouterr().out
    assert "from run 0 of" in out and "test_wide" not in out
    assert main(["plan", "5", "--rows", str(path)]) == 2
    assert "no run '5'" in capsys.readouterr().err


@pytest.mark.parametrize("content, message", [
    ("{not json", "is not JSON"),
    ('{"rows": 3}', "holds no result rows"),
])
def test_bad_rows_file_is_a_clear_error(tmp_path, capsys, content, message):
    path = tmp_path / "rows.json"
    path.write_text(content)
    assert main(["plan", "--rows", str(path)]) == 2
    assert message in capsys.readouterr().err


def test_missing_store_says_what_to_do(tmp_path, capsys):
    assert main(["plan", "--store", str(tmp_path / "none.sqlite")]) == 2
    assert "no history store at" in capsys.readouterr().err


def test_plan_from_the_history_store(run_suite, pytester, capsys):
    pytester.makepyfile(test_bench=SUITE)
    run_suite("--meanband-record=nightly", "--meanband-write-plan", "from-run.toml")
    run_suite("--meanband-record=other", "--meanband-n", "40")
    store = pytester.path / ".meanband" / "history.sqlite"
    assert main(["plan", "nightly", "--store", str(store), "--write", "cli.toml"]) == 0
    out = capsys.readouterr().out
    assert re.search(r"from run #1 'nightly' of \S+ in ", out)
    assert "UNDECIDED at n=6; about" in out
    # The stored run gives the same plan as the run itself wrote.
    assert read_plan("cli.toml").entries == read_plan("from-run.toml").entries
    assert main(["plan", "older", "--store", str(store)]) == 2
    assert "no run labelled or numbered 'older'" in capsys.readouterr().err


def test_bad_power_is_a_usage_error(rows_file, capsys):
    assert main(["plan", "--rows", str(rows_file), "--power", "90"]) == 2
    assert "--power must lie strictly between 0 and 1, got 90.0; did you mean 0.9?" in (
        capsys.readouterr().err)


def test_all_lists_counts_that_are_about_right(tmp_path, capsys):
    from meanband.stats.bands import make_band
    from meanband.stats.decision import decide

    z = np.random.default_rng(4).standard_normal(12)
    values = (1.0 + 0.1 * (z - z.mean()) / z.std(ddof=1)).tolist()  # mean 1, sd 0.1 exactly
    # Effect 1.2: 12 trials are about right once the estimates' own uncertainty is planned for.
    decision = decide(values, make_band(high=1.12)).to_dict()
    row = {"nodeid": "t.py::test_fine", "series": "", "kind": "check", "decision": decision,
           "values": values, "settings": {"power": 0.9, "min_n": 2}}
    path = tmp_path / "rows.json"
    path.write_text(json.dumps([row]))
    main(["plan", "--rows", str(path)])
    quiet = capsys.readouterr().out
    main(["plan", "--rows", str(path), "--all"])
    everything = capsys.readouterr().out
    assert "t.py::test_fine" not in quiet and "every check's count is about right" in quiet
    assert "t.py::test_fine" in everything and "the count is about right" in everything


def _check_row(**changes):
    from meanband.stats.bands import make_band
    from meanband.stats.decision import decide

    values = [1.0, 1.1, 0.9, 1.05, 0.95, 1.0]
    row = {"nodeid": "t.py::test_row", "series": "", "kind": "check", "values": values,
           "decision": decide(values, make_band(high=2.0)).to_dict(), "settings": {}}
    row.update(changes)
    return row


@pytest.mark.parametrize("rows, message", [
    ([_check_row(), {"kind": "check"}], "row 1 is not a result row: 'nodeid' is a required"),
    ([_check_row(nodeid=7)], "row 0 at key nodeid is not a result row: 7 is not of type"),
    ([_check_row(), _check_row(decision={"verdict": "PASS"})], "row 1 at key decision is not"),
    ([_check_row(decision=dict(_check_row()["decision"], interval={"n": 6}))],
     "row 0 at key decision/interval is not a result row: 'mean' is a required property"),
    ([_check_row(decision=dict(_check_row()["decision"], verdict=3))],
     "row 0 at key decision/verdict is not a result row"),
    ([_check_row(settings=[])], "row 0 at key settings is not a result row"),
    ([_check_row(values="1,2")], "row 0 at key values is not a result row"),
    ([_check_row(), 3], "row 1 is int, not an object"),
])
def test_malformed_rows_name_the_row_and_the_key(tmp_path, capsys, rows, message):
    path = tmp_path / "rows.json"
    path.write_text(json.dumps(rows))
    assert main(["plan", "--rows", str(path)]) == 2
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err and str(path) in err


def test_a_well_formed_hand_written_row_is_planned(tmp_path, capsys):
    path = tmp_path / "rows.json"
    path.write_text(json.dumps([_check_row()]))
    assert main(["plan", "--rows", str(path), "--all"]) == 0
    assert "t.py::test_row" in capsys.readouterr().out


@pytest.mark.parametrize("depth", [100, 100_000])
def test_deeply_nested_rows_are_a_one_line_error(tmp_path, capsys, depth):
    path = tmp_path / "deep.json"
    path.write_text("[" * depth + "]" * depth)
    assert main(["plan", "--rows", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "nested too deeply" in err and str(path) in err


def test_a_deep_value_inside_a_row_is_refused_before_any_recursion(tmp_path, capsys):
    path = tmp_path / "deep.json"
    path.write_text(json.dumps([_check_row(extra="DEEP")]).replace('"DEEP"', "[" * 900 + "]" * 900))
    assert main(["plan", "--rows", str(path)]) == 2
    assert "nested too deeply" in capsys.readouterr().err


def test_max_bytes_refuses_a_larger_rows_file(tmp_path, capsys):
    path = tmp_path / "rows.json"
    path.write_text(json.dumps([_check_row()]))
    assert main(["plan", "--rows", str(path), "--max-bytes", "100"]) == 2
    assert "is larger than the read limit of 100 bytes" in capsys.readouterr().err
    assert main(["plan", "--rows", str(path), "--max-bytes", "1MiB"]) == 0


def test_a_device_given_as_rows_is_refused_at_once(capsys):
    import os

    if not os.path.exists("/dev/zero"):
        pytest.skip("no /dev/zero here")
    assert main(["plan", "--rows", "/dev/zero"]) == 2
    assert "/dev/zero is a device, not a regular file" in capsys.readouterr().err


def test_a_plan_that_cannot_be_written_fails_in_words(tmp_path, capsys):
    path = tmp_path / "rows.json"
    path.write_text(json.dumps([_check_row()]))
    blocker = tmp_path / "taken"
    blocker.write_text("a file where a folder is wanted")
    assert main(["plan", "--rows", str(path), "--write", str(blocker / "plan.toml")]) == 2
    err = capsys.readouterr().err
    assert "meanband plan: error: " in err and "[Errno" not in err, err
