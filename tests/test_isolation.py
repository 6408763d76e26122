"""End-of-session steps are isolated: a failing step or third-party hook hides no test result."""

from __future__ import annotations

import pytest

SUITE = """
import pytest

def test_quote(trials):
    trials.extend([1.0, 1.1, 0.9, 1.05, 0.95], unit="s")
    trials.check(high=2.0)

def test_rail(trials):
    trials.extend([12.0, 12.1, 11.9, 12.05], unit="V")
    trials.check(high=13.0)

def test_fails():
    assert False, "a plain failure that must still be shown"

def test_plain():
    pass
"""


def test_numpy_value_added_by_a_hook_is_converted_and_the_run_recorded(
    pytester: pytest.Pytester, run_suite
) -> None:
    # A case that once hid every result: np.int64 in a row used to raise TypeError and hide every result.
    pytester.makeconftest("import numpy as np\n\ndef pytest_meanband_result(config, row):\n"
                          "    row['bench'] = np.int64(3)\n    row['where'] = __import__('pathlib')"
                          ".Path('rig')\n")
    pytester.makepyfile(test_fares=SUITE)
    result = run_suite("--meanband-record=main", "--meanband-report=out.json")
    result.stdout.fnmatch_lines(["*test_fails*a plain failure*", "*1 failed, 3 passed*"])
    result.stdout.fnmatch_lines(["meanband: recorded run 1 'main' in *"])
    assert result.ret == pytest.ExitCode.TESTS_FAILED
    import json
    rows = json.loads((pytester.path / "out.json").read_text())["rows"]
    assert {(r["bench"], r["where"]) for r in rows} == {(3, "rig")}


def test_unconvertible_value_is_refused_naming_the_key(pytester: pytest.Pytester, run_suite) -> None:
    pytester.makeconftest("def pytest_meanband_result(config, row):\n    row['probe'] = object()\n")
    pytester.makepyfile(test_fares=SUITE.replace("def test_fails", "def _unused"))
    result = run_suite("--meanband-report=out.json")
    result.stdout.fnmatch_lines(["meanband: ERROR: a key added to a result row: row key "
                                 "'probe' of test_fares.py::test_quote holds a object*", "*3 passed*"])
    assert result.stdout.str().count("row key 'probe'") == 2  # once per row, each named
    assert result.ret == pytest.ExitCode.TESTS_FAILED
    assert (pytester.path / "out.json").exists()


def test_raising_result_hook_is_reported_once_and_every_test_runs(
    pytester: pytest.Pytester, run_suite
) -> None:
    pytester.makeconftest("def pytest_meanband_result(config, row):\n    raise RuntimeError('bus down')\n")
    pytester.makepyfile(test_fares=SUITE)
    result = run_suite()
    result.stdout.fnmatch_lines(["*1 failed, 3 passed*"])
    assert "INTERNALERROR" not in result.stdout.str()
    errors = [line for line in result.outlines if "bus down" in line]
    assert len(errors) == 1 and "plugin " in errors[0] and "conftest.py" in errors[0], errors
    assert result.ret == pytest.ExitCode.TESTS_FAILED


@pytest.mark.parametrize("hook", ["pytest_meanband_session_finish", "pytest_meanband_summary_lines"])
def test_raising_third_party_session_hook_keeps_summary_and_other_steps(
    pytester: pytest.Pytester, run_suite, hook: str
) -> None:
    pytester.makeconftest(f"def {hook}(config, rows):\n    raise ValueError('exporter broke')\n")
    pytester.makepyfile(test_fares=SUITE.replace("def test_fails", "def _unused"))
    result = run_suite("--meanband-record=main", "--meanband-report=out.json")
    result.stdout.fnmatch_lines(["*3 passed*"])
    result.stdout.fnmatch_lines([f"meanband: ERROR: plugin *conftest.py*: {hook} raised ValueError: "
                                 "exporter broke; fix or disable that plugin*"])
    assert (pytester.path / "out.json").exists()
    assert (pytester.path / ".meanband" / "history.sqlite").exists()
    # A passing run whose requested output failed exits 1 (docs/reports.md).
    assert result.ret == pytest.ExitCode.TESTS_FAILED


def test_bad_unit_with_plots_fails_only_the_plots(pytester: pytest.Pytester, run_suite) -> None:
    pytest.importorskip("matplotlib")
    pytester.makepyfile(test_fares="def test_a(trials):\n    trials.extend([1.0, 1.1, 0.9], unit=3)\n    trials.check(high=2.0)\n")
    result = run_suite("--meanband-plots=plots", "--meanband-markdown=out.md")
    result.stdout.fnmatch_lines(["*meanband: could not write the plots: *", "*1 passed*"])
    assert (pytester.path / "out.md").exists()
    assert "Traceback" not in result.stdout.str()
    assert result.ret == pytest.ExitCode.TESTS_FAILED


def test_ctrl_c_during_the_store_write_still_prints_the_summary(
    pytester: pytest.Pytester, run_suite
) -> None:
    pytester.makeconftest(
        "from meanband.store import history\n\n"
        "def pytest_configure(config):\n"
        "    def interrupted(self, *args, **kwargs):\n        raise KeyboardInterrupt\n"
        "    history.HistoryStore.record_run = interrupted\n"
    )
    pytester.makepyfile(test_fares=SUITE.replace("def test_fails", "def _unused"))
    result = run_suite("--meanband-record=main", subprocess=True)
    result.stdout.fnmatch_lines(["meanband: ERROR: recording the run in the history store: "
                                 "interrupted (Ctrl-C)*", "*3 passed*"])
    assert "Traceback" not in result.stdout.str() + result.stderr.str()
    assert result.ret == pytest.ExitCode.INTERRUPTED


REPORT_OPTIONS = ("--meanband-report=out.json", "--meanband-markdown=out.md")


@pytest.mark.parametrize("how", ["--co", "-k nothing_matches", "collection error", "pytest.exit"])
def test_session_that_ran_nothing_keeps_the_earlier_reports(
    pytester: pytest.Pytester, run_suite, how: str
) -> None:
    pytester.makepyfile(test_fares=SUITE.replace("def test_fails", "def _unused"))
    first = run_suite(*REPORT_OPTIONS)
    assert first.ret == 0
    before = {name: (pytester.path / name).read_bytes() for name in ("out.json", "out.md")}
    args: list[str] = []
    if how.startswith("-"):
        args = how.split(" ", 1)
    elif how == "collection error":
        pytester.makepyfile(test_broken="import no_such_module_here\n")
    else:
        pytester.makepyfile(test_early="import pytest\n\ndef test_a():\n    pytest.exit('rig off')\n")
        args = ["test_early.py", "test_fares.py"]
    second = run_suite(*REPORT_OPTIONS, *args)
    second.stdout.fnmatch_lines(["*meanband: no report files written: *earlier files were left*"])
    after = {name: (pytester.path / name).read_bytes() for name in ("out.json", "out.md")}
    assert after == before


SIX = "\n".join(f"def test_{i}(trials):\n    trials.extend([1.0, 1.1, 0.9, 1.05])\n"
                f"    trials.check(high={'0.5' if i == 2 else '2.0'})\n" for i in range(6))


@pytest.mark.parametrize("args", [["-x"], ["-k", "test_1 or test_3"], ["--deselect",
                                                                       "test_bench.py::test_4"]])
def test_partial_run_is_not_recorded_and_says_why(pytester: pytest.Pytester, run_suite, args) -> None:
    pytester.makepyfile(test_bench=SIX)
    result = run_suite("--meanband-record=main", *args)
    result.stdout.fnmatch_lines(["*so this run was not recorded*--meanband-record-partial*"])
    assert not (pytester.path / ".meanband").exists()
    again = run_suite("--meanband-record=main", "--meanband-record-partial", *args)
    again.stdout.fnmatch_lines(["meanband: recorded run 1 'main' in *"])


def test_whole_run_with_a_failure_is_recorded(pytester: pytest.Pytester, run_suite) -> None:
    pytester.makepyfile(test_bench=SIX)
    result = run_suite("--meanband-record=main")
    assert result.ret == pytest.ExitCode.TESTS_FAILED
    result.stdout.fnmatch_lines(["meanband: recorded run 1 'main' in *"])


def test_report_write_never_follows_a_planted_link(pytester: pytest.Pytester, run_suite) -> None:
    # The old writer used a fixed ".out.json.partial" name and wrote through a link planted there.
    victim = pytester.path / "precious.txt"
    victim.write_text("keep me")
    (pytester.path / ".out.json.partial").symlink_to(victim)
    (pytester.path / "out.md").symlink_to(victim)
    pytester.makepyfile(test_fares=SUITE.replace("def test_fails", "def _unused"))
    result = run_suite(*REPORT_OPTIONS)
    assert result.ret == 0
    assert victim.read_text() == "keep me"
    assert not (pytester.path / "out.md").is_symlink()
    assert [p.name for p in pytester.path.glob(".out.*.partial") if not p.is_symlink()] == []


def test_failed_requested_report_exits_non_zero(pytester: pytest.Pytester, run_suite) -> None:
    (pytester.path / "taken").write_text("a file where a folder is needed")
    pytester.makepyfile(test_fares=SUITE.replace("def test_fails", "def _unused"))
    result = run_suite("--meanband-report=taken/out.json")
    # The errno in words, not "[Errno 20]".
    result.stdout.fnmatch_lines(["*meanband: could not write the JSON report: File exists: *taken; *"])
    assert result.ret == pytest.ExitCode.TESTS_FAILED
