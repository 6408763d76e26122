"""Report files from a pytest run, and the merge/report commands on them."""

from __future__ import annotations

import json
import re

import jsonschema
import numpy as np
import pytest
from meanband.cli import main as console
from meanband.store import report_json

pytest.importorskip("matplotlib")
# Loaded once here: in-process inner runs would otherwise import matplotlib's C parts again.
import matplotlib.figure  # noqa: F401

RNG = np.random.default_rng(20261202)

# Invented scenario: a kiln controller's bench, thermocouple channels and a setpoint loop.
SUITE = """
import pytest

ZONE_A = {zone_a!r}
ZONE_B = {zone_b!r}
LOOP = {loop!r}

def test_zone_temperature(trials):
    trials.series("zone-a").extend(ZONE_A, unit="degC")
    trials.series("zone-a").check(center=640.0, tolerance=2.0)
    trials.series("zone-b").extend(ZONE_B, unit="degC")
    trials.series("zone-b").check(center=640.0, tolerance=2.0)

def test_loop_settle(trials):
    trials.extend(LOOP, unit="s")
    trials.check(high=0.8)

def test_fan_log(trials):
    trials.series("fan").extend([1480.0, 1510.0, 1495.0, 1502.0], unit="rpm")

def test_plain():
    assert True
"""


# Drawn once, so every test (and every xdist worker) runs the same suite: zone-a PASS,
# zone-b FAIL, the settle-time budget UNDECIDED.
KILN_SUITE = SUITE.format(
    zone_a=RNG.normal(640.2, 0.8, 30).round(3).tolist(),
    zone_b=RNG.normal(643.5, 0.8, 30).round(3).tolist(),
    loop=RNG.normal(0.79, 0.05, 12).round(4).tolist(),
)


def kiln_suite() -> str:
    return KILN_SUITE


def summary_block(lines: list[str]) -> list[str]:
    """The lines under the live summary's ``= meanband =`` separator, up to the next separator
    (the lines about written files come after it, each set off by a ``---`` separator)."""
    start = next(i for i, line in enumerate(lines) if line.strip("= ") == "meanband")
    block = []
    for line in lines[start + 1:]:
        if line.startswith(("===", "---")):
            break
        block.append(line)
    while block and not block[-1].strip():
        block.pop()
    return block


def strict_json(path):
    def refuse(token):
        raise AssertionError(f"non-standard JSON token {token}")
    return json.loads(path.read_text(), parse_constant=refuse)


@pytest.mark.parametrize("workers", [[], ["-n", "2"]], ids=["serial", "xdist"])
@pytest.mark.parametrize("verbosity", [[], ["-v"]], ids=["default", "verbose"])
def test_report_from_file_prints_the_live_summary(run_suite, pytester, capsys, workers,
                                                  verbosity):
    pytester.makepyfile(test_kiln=kiln_suite())
    result = run_suite("--meanband-report", "out/kiln.json", *workers, *verbosity)
    result.assert_outcomes(passed=2, failed=2)
    live = summary_block(result.outlines)
    assert any("zone-b" in line and "FAIL" in line for line in live)
    assert any("test_loop_settle" in line and "UNDECIDED" in line for line in live)
    capsys.readouterr()
    status = console(["report", str(pytester.path / "out" / "kiln.json"), *verbosity])
    assert capsys.readouterr().out.splitlines() == live
    assert status == 1  # some check did not pass


def test_report_matches_the_schema_and_holds_every_row(run_suite, pytester):
    pytester.makepyfile(test_kiln=kiln_suite())
    result = run_suite("--meanband-report", "kiln.json", "-n", "2")
    assert any("wrote JSON report kiln.json (4 rows)" in line for line in result.outlines)
    document = strict_json(pytester.path / "kiln.json")
    jsonschema.Draft202012Validator(report_json.schema()).validate(document)
    names = sorted((r["nodeid"], r["series"], r["kind"]) for r in document["rows"])
    assert names == [
        ("test_kiln.py::test_fan_log", "fan", "unchecked"),
        ("test_kiln.py::test_loop_settle", "", "check"),
        ("test_kiln.py::test_zone_temperature", "zone-a", "check"),
        ("test_kiln.py::test_zone_temperature", "zone-b", "check"),
    ]
    assert all(len(r["values"]) in (4, 12, 30) for r in document["rows"])
    run = document["runs"][0]
    assert run["configuration"]["workers"] == 2
    assert run["configuration"]["options"]["meanband_report"] == "kiln.json"
    assert "--meanband-report" in run["configuration"]["args"]


def test_trials_can_be_left_out_of_the_report(run_suite, pytester, capsys):
    pytester.makepyfile(test_kiln=kiln_suite())
    run_suite("--meanband-report", "slim.json", "--meanband-report-trials", "no")
    document = strict_json(pytester.path / "slim.json")
    assert document["trials_included"] is False
    assert {r["values"] is None for r in document["rows"]} == {True}
    console(["report", str(pytester.path / "slim.json")])
    out = capsys.readouterr().out
    assert "test_kiln.py::test_fan_log [fan]: trials not kept in the report" in out


def test_a_run_without_checks_still_writes_its_report(run_suite, pytester):
    pytester.makepyfile(test_other="def test_plain():\n    assert True\n")
    run_suite("--meanband-report", "empty.json")
    document = report_json.load_report(pytester.path / "empty.json")
    assert document["rows"] == [] and document["totals"]["rows"] == 0


def test_markdown_and_job_summary(run_suite, pytester, monkeypatch):
    pytester.makepyfile(test_kiln=kiln_suite())
    summary = pytester.path / "job-summary.md"
    summary.write_text("previous step\n")
    monkeypatch.setenv("KILN_CI_SUMMARY", str(summary))
    run_suite("--meanband-markdown", "kiln.md", "--meanband-job-summary",
              "--meanband-job-summary-var", "KILN_CI_SUMMARY")
    text = (pytester.path / "kiln.md").read_text()
    assert text.startswith("## meanband: 3 checks: 1 PASS, 1 FAIL, 1 UNDECIDED; "
                           "1 series without a check")
    assert "| `test_kiln.py::test_zone_temperature` | zone-b | **FAIL** | 30 |" in text
    assert summary.read_text() == "previous step\n" + text


def test_job_summary_without_its_variable_says_so(run_suite, pytester, monkeypatch):
    monkeypatch.delenv("GITHUB_STEP_SUMMARY", raising=False)
    pytester.makepyfile(test_kiln=kiln_suite())
    result = run_suite("--meanband-job-summary")
    result.stdout.fnmatch_lines(["*no job summary written: the environment variable "
                                 "GITHUB_STEP_SUMMARY is not set*"])


def test_ini_keys_place_files_beside_the_ini_file(run_suite, pytester):
    pytester.makeini("[pytest]\nmeanband_report = reports/kiln.json\n"
                     "meanband_markdown = reports/kiln.md\n")
    pytester.makepyfile(test_kiln=kiln_suite())
    run_suite()
    assert report_json.load_report(pytester.path / "reports" / "kiln.json")["totals"]["checks"] == 3
    assert (pytester.path / "reports" / "kiln.md").exists()


def test_plots_from_a_run(run_suite, pytester):
    pytester.makepyfile(test_kiln=kiln_suite())
    result = run_suite("--meanband-plots", "pictures", "--meanband-plot-format", "svg", "-n", "2")
    names = sorted(p.name for p in (pytester.path / "pictures").iterdir())
    assert "intervals-01.svg" in names
    assert "test_kiln--test_zone_temperature--zone-b.run.svg" in names
    assert len(names) == 1 + 3 * 4
    assert any("wrote 13 plot files to pictures" in line for line in result.outlines)


def test_bad_plot_format_is_a_usage_error(run_suite, pytester):
    pytester.makepyfile(test_kiln=kiln_suite())
    result = run_suite("--meanband-plots", "p", "--meanband-plot-format", "gif")
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines(["*--meanband-plot-format: unknown plot format gif*"])


def test_a_report_that_cannot_be_written_is_shown_and_the_rest_still_written(run_suite,
                                                                            pytester):
    pytester.makepyfile(test_kiln=kiln_suite())
    (pytester.path / "taken").mkdir()
    result = run_suite("--meanband-report", "taken", "--meanband-markdown", "kiln.md")
    result.stdout.fnmatch_lines(["*meanband: could not write the JSON report:*"])
    assert (pytester.path / "kiln.md").exists()


def test_merge_shards_then_report(run_suite, pytester, capsys):
    pytester.makepyfile(test_kiln=kiln_suite())
    run_suite("--meanband-report", "shard-1.json", "-k", "zone")
    run_suite("--meanband-report", "shard-2.json", "-k", "not zone")
    both = run_suite("--meanband-report", "single.json")
    shards = [str(pytester.path / f"shard-{i}.json") for i in (1, 2)]
    merged = str(pytester.path / "all.json")
    assert console(["merge", *shards, "-o", merged]) == 0
    assert "merged 2 reports" in capsys.readouterr().out
    # The merged report prints the summary of a single run over the whole suite.
    console(["report", merged])
    assert capsys.readouterr().out.splitlines() == summary_block(both.outlines)
    document = report_json.load_report(merged)
    assert [run["source"] for run in document["runs"]] == shards


def test_merge_conflict_names_the_check_and_files(run_suite, pytester, capsys):
    pytester.makepyfile(test_kiln=kiln_suite())
    run_suite("--meanband-report", "a.json", "-k", "loop")
    run_suite("--meanband-report", "b.json", "-k", "loop")
    a, b = str(pytester.path / "a.json"), str(pytester.path / "b.json")
    out = str(pytester.path / "all.json")
    assert console(["merge", a, b, "-o", out]) == 2
    err = capsys.readouterr().err
    assert f"test_kiln.py::test_loop_settle: in {a}, {b}" in err
    assert not (pytester.path / "all.json").exists()
    assert console(["merge", a, b, "-o", out, "--pool"]) == 0
    (row,) = report_json.load_report(out)["rows"]
    assert row["decision"]["interval"]["n"] == 24


def test_report_command_on_a_broken_file(tmp_path, capsys):
    broken = tmp_path / "broken.json"
    broken.write_text('{"format": "meanband-report", "schema_version": 1, "rows": 3}')
    assert console(["report", str(broken)]) == 2
    assert "does not match the report schema" in capsys.readouterr().err


def test_report_command_writes_markdown_and_plots(tmp_path, capsys):
    from report_rows import sample_rows

    report = report_json.build_report(sample_rows()[:2], environment=report_json.environment(),
                                      configuration={"args": [], "options": {}})
    path = report_json.write_report(report, tmp_path / "r.json")
    status = console(["report", str(path), "--markdown", str(tmp_path / "r.md"),
                      "--plots", str(tmp_path / "img")])
    assert status == 1  # one of the two checks is UNDECIDED
    assert (tmp_path / "r.md").read_text().startswith("## meanband: 2 checks")
    assert len(list((tmp_path / "img").glob("*.png"))) == 1 + 3 * 2


def test_console_entry_runs_as_a_module(pytester, tmp_path):
    from report_rows import sample_rows

    report = report_json.build_report(sample_rows()[:1], environment=report_json.environment(),
                                      configuration={"args": [], "options": {}})
    path = report_json.write_report(report, tmp_path / "r.json")
    result = pytester.run(__import__("sys").executable, "-m", "meanband", "report", str(path),
                          "-q")
    assert result.ret == 0
    assert result.outlines == ["meanband: 1 check: 1 PASS"]


def test_per_check_plots_only_for_failed_checks(run_suite, pytester):
    pytester.makepyfile(test_kiln=kiln_suite())
    run_suite("--meanband-plots", "pictures", "--meanband-plot-checks", "failed")
    names = sorted(p.name for p in (pytester.path / "pictures").iterdir())
    assert names == ["intervals-01.png",
                     "test_kiln--test_loop_settle.hist.png",
                     "test_kiln--test_loop_settle.qq.png",
                     "test_kiln--test_loop_settle.run.png",
                     "test_kiln--test_zone_temperature--zone-b.hist.png",
                     "test_kiln--test_zone_temperature--zone-b.qq.png",
                     "test_kiln--test_zone_temperature--zone-b.run.png"]


def test_bad_plot_checks_in_the_ini_file_is_a_usage_error(run_suite, pytester):
    pytester.makeini("[pytest]\nmeanband_plot_checks = some\n")
    pytester.makepyfile(test_kiln=kiln_suite())
    result = run_suite()
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines(["*ini key meanband_plot_checks: 'some'; choose all, failed or "
                                 "none*"])


def test_bad_boolean_in_the_ini_file_names_the_key(run_suite, pytester):
    pytester.makeini("[pytest]\nmeanband_report_trials = maybe\n")
    pytester.makepyfile(test_kiln=kiln_suite())
    result = run_suite("--meanband-report", "r.json")
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines(["*ini key meanband_report_trials: invalid truth value 'maybe'*"])


# Invented scenario: a kiln controller's setpoint parser, timed, and a thermocouple log with an
# instrument uncertainty: the timing and metrology sections both appear at -v.
TIMED_SUITE = """
def parse_setpoint():
    return float("640.25")

def test_parse_setpoint(trials):
    trials.time(parse_setpoint, n=12)
    trials.check(high="5ms")

def test_zone(trials):
    trials.extend([640.1, 640.3, 639.9, 640.2, 640.0, 640.4], unit="degC")
    trials.check(center=640.0, tolerance=2.0, instrument_uncertainty=0.05)
"""


@pytest.mark.parametrize("workers", [[], ["-n", "2"]], ids=["serial", "xdist"])
def test_report_verbose_prints_every_section_the_live_verbose_summary_printed(
        run_suite, pytester, capsys, workers):
    # Before: `meanband report -v` dropped the timing section that the live -v summary printed.
    pytester.makepyfile(test_kiln_timing=TIMED_SUITE)
    result = run_suite("--meanband-report", "out/timed.json", "-v", *workers)
    result.assert_outcomes(passed=2)
    live = summary_block(result.outlines)
    assert "timed series:" in live and "measurement uncertainty and decision rule:" in live
    capsys.readouterr()
    assert console(["report", str(pytester.path / "out" / "timed.json"), "-v"]) == 0
    assert capsys.readouterr().out.splitlines() == live


@pytest.mark.parametrize("command", ["report", "merge"])
@pytest.mark.parametrize("depth", [900, 100_000])
def test_a_deeply_nested_report_is_a_one_line_error(tmp_path, capsys, command, depth):
    from report_rows import sample_rows

    report = report_json.build_report(sample_rows()[:1], environment=report_json.environment(),
                                      configuration={"args": [], "options": {}})
    report["rows"][0]["extra"] = "DEEP"
    deep = tmp_path / "deep.json"
    deep.write_text(report_json.dumps(report).replace('"DEEP"', "[" * depth + "]" * depth))
    args = [command, str(deep)] + ([str(deep), "-o", str(tmp_path / "m.json")]
                                   if command == "merge" else [])
    assert console(args) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "nested too deeply" in err and str(deep) in err


def _small_report(tmp_path):
    from report_rows import sample_rows

    report = report_json.build_report(sample_rows()[:1], environment=report_json.environment(),
                                      configuration={"args": [], "options": {}})
    return str(report_json.write_report(report, tmp_path / "r.json"))


@pytest.mark.parametrize("command", ["report", "merge"])
def test_max_bytes_refuses_a_larger_report(tmp_path, capsys, command):
    import shutil

    path = _small_report(tmp_path)
    other = str(tmp_path / "r2.json")  # merge refuses one report given twice
    shutil.copy(path, other)
    extra = [other, "-o", str(tmp_path / "m.json"), "--pool"] if command == "merge" else []
    assert console([command, path, *extra, "--max-bytes", "1KiB"]) == 2
    err = capsys.readouterr().err
    assert "r.json is larger than the read limit of 1,024 bytes" in err and "--max-bytes" in err
    assert console([command, path, *extra, "--max-bytes", "64MiB"]) in (0, 1)


@pytest.mark.skipif(not hasattr(__import__("os"), "mkfifo"), reason="needs FIFOs")
@pytest.mark.parametrize("command", ["report", "merge"])
def test_a_fifo_given_as_a_report_is_refused_at_once(tmp_path, capsys, command):
    import os

    fifo = tmp_path / "r.json"
    os.mkfifo(fifo)
    extra = [str(fifo), "-o", str(tmp_path / "m.json")] if command == "merge" else []
    assert console([command, str(fifo), *extra]) == 2
    assert "is a FIFO (named pipe), not a regular file" in capsys.readouterr().err


def test_a_bad_max_bytes_is_a_usage_error(tmp_path, capsys):
    with pytest.raises(SystemExit) as stop:
        console(["report", _small_report(tmp_path), "--max-bytes", "lots"])
    assert stop.value.code == 2
    assert "argument --max-bytes: a byte count is a whole number" in capsys.readouterr().err


@pytest.mark.parametrize("output", ["--markdown", "--plots"])
def test_report_outputs_that_cannot_be_written_fail_in_words(tmp_path, capsys, output):
    path = _small_report(tmp_path)
    blocker = tmp_path / "taken"
    blocker.write_text("a file where a folder is wanted")
    target = blocker / ("out.md" if output == "--markdown" else "img")
    assert console(["report", path, output, str(target)]) == 2
    err = capsys.readouterr().err
    # The OS's words and the path in the way (mkdir says "File exists", open "Not a directory").
    assert re.search(rf"meanband report: error: (File exists|Not a directory): {re.escape(str(blocker))}", err), err
    assert "[Errno" not in err and "choose a writable location" in err


def test_a_merge_that_cannot_be_written_fails_in_words(tmp_path, capsys):
    path = _small_report(tmp_path)
    blocker = tmp_path / "taken"
    blocker.write_text("a file where a folder is wanted")
    assert console(["merge", path, "-o", str(blocker / "all.json")]) == 2
    err = capsys.readouterr().err
    assert re.search(r"meanband merge: error: (File exists|Not a directory): ", err), err
    assert "[Errno" not in err and str(blocker) in err
