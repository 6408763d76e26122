"""``meanband history trend``: run means over time, change points with run, commit and verdict."""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from meanband.cli import main
from meanband.report.trend import build_trends
from meanband.store.history import HistoryStore

RUNS, SHIFT_AT = 30, 18


def _env(i: int) -> dict[str, Any]:
    return {"commit": f"{i:04d}" + "c0ffee" * 6, "branch": "main", "dirty": False,
            "hostname": "ci-runner", "machine": "x86_64", "cpu_count": 2, "platform": "Linux",
            "implementation": "CPython", "python": "3.11", "meanband": "0.1.0"}


def _rows(rng: np.random.Generator, slowdown: float) -> list[dict[str, Any]]:
    """Invented suite: a tariff lookup timing, and a rail voltage on a bench that never moves."""
    lookup = rng.lognormal(math.log(400e-6 * slowdown), 0.1, 30)
    rail = rng.normal(3.3, 0.01, 20)
    return [
        {"nodeid": "test_tariffs.py::test_lookup", "series": "", "kind": "check", "unit": "s",
         "source": "time", "values": lookup.tolist(), "warmup": []},
        {"nodeid": "test_bench.py::test_rail", "series": "volts", "kind": "unchecked",
         "unit": "V", "source": "sample", "values": rail.tolist(), "warmup": []},
    ]


@pytest.fixture(params=["sqlite", "postgresql"])
def store(request: pytest.FixtureRequest, tmp_path: Path) -> Any:
    path: Any = tmp_path / "history.sqlite"
    if request.param == "postgresql":
        path = request.getfixturevalue("postgres_url")
    rng = np.random.default_rng(20261203)
    with HistoryStore(path) as s:
        for i in range(RUNS):
            s.record_run(_rows(rng, 1.15 if i >= SHIFT_AT else 1.0), label="main",
                         environment=_env(i))
        s.record_run(_rows(rng, 1.0), label="feature", environment=_env(99))
    return path


def test_trend_names_the_run_and_commit_of_the_slowdown(store: Any, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["history", "trend", "--store", str(store), "--label", "main"]) == 0
    out = capsys.readouterr().out
    lookup, rail = out.split("test_bench.py")
    first_slow = SHIFT_AT + 1  # run ids count from 1
    assert f"change at run {first_slow} (commit {_env(SHIFT_AT)['commit'][:10]}" in lookup
    assert lookup.count("change at run") == 1 and ": shift" in lookup
    assert "(+1" in lookup  # a rise of about 15%
    assert "30 runs" in lookup and "no change point" in rail


def test_trend_filters_runs_and_checks(store: Any, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["history", "trend", "--store", str(store), "--last", "5", "--check", "rail"]) == 0
    out = capsys.readouterr().out
    assert "test_lookup" not in out and "5 runs" in out and "at least 6" in out


def test_trend_draws_a_picture_per_check(store: Any, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    pytest.importorskip("matplotlib")
    plots = tmp_path / "plots"
    assert main(["history", "trend", "--store", str(store), "--label", "main", "--plots", str(plots)]) == 0
    assert "wrote 2 picture(s)" in capsys.readouterr().out
    pictures = sorted(p.name for p in plots.iterdir())
    assert pictures == ["trend-test_bench.py_test_rail_volts.png", "trend-test_tariffs.py_test_lookup.png"]
    assert all((plots / p).read_bytes().startswith(b"\x89PNG") for p in pictures)


@pytest.mark.parametrize(("argv", "message"), [
    (["--alpha", "2"], "--alpha must lie between 0 and 1"),
    (["--last", "0"], "--last must be 1 or more"),
])
def test_trend_bad_arguments_exit_2(store: Any, argv: list[str], message: str, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["history", "trend", "--store", str(store), *argv]) == 2
    assert message in capsys.readouterr().err


def test_unknown_label_says_so(store: Any, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["history", "trend", "--store", str(store), "--label", "nightly"]) == 0
    assert "no runs labelled 'nightly'" in capsys.readouterr().out


def test_run_intervals_are_student_t_and_short_runs_are_left_out(store: Any) -> None:
    # Reference: scipy.stats.t.interval for the mean with n - 1 degrees of freedom.
    from scipy import stats

    with HistoryStore(store, create=False, read_only=True) as s:
        runs = list(reversed(s.runs()))
        history = [(run, s.checks(run.id)) for run in runs]
    first = history[0][1][0]
    short = history[1][1][0]
    history[1] = (history[1][0], [type(short)(**{**{f: getattr(short, f) for f in short.__slots__},
                                                 "values": short.values[:1]}), *history[1][1][1:]])
    (lookup, rail) = build_trends(history)
    assert len(lookup.points) == RUNS  # 31 runs, one of them with a single trial
    x = first.values
    low, high = stats.t.interval(0.95, x.size - 1, loc=x.mean(), scale=stats.sem(x))
    assert (lookup.points[0].low, lookup.points[0].high) == pytest.approx((low, high), rel=1e-12)
    assert len(rail.points) == RUNS + 1


def test_plots_of_a_session_with_a_store_include_trends(pytester: pytest.Pytester, run_suite) -> None:
    pytest.importorskip("matplotlib")
    pytester.makepyfile(test_rates="""
        import numpy as np
        rng = np.random.default_rng()

        def test_rate_table(trials):
            trials.extend(rng.lognormal(np.log(2e-3), 0.05, 12), unit="s")
            trials.check(high="10ms")
    """)
    # matplotlib is drawn in a child process: in-process runs drop modules they imported first.
    first = run_suite("--meanband-record=main", "--meanband-plots=plots", subprocess=True)
    first.stdout.fnmatch_lines(["*no trend pictures: *holds fewer than two runs*labelled 'main'*"])
    for _ in range(2):
        run_suite("--meanband-record=main").assert_outcomes(passed=1)
    result = run_suite("--meanband-baseline=main", "--meanband-plots=plots", subprocess=True)
    result.stdout.fnmatch_lines(["*wrote 1 trend picture(s) of the newest 60 stored runs to plots*"])
    assert (pytester.path / "plots" / "trend-test_rates.py_test_rate_table.png").exists()


def test_report_command_draws_trends_from_a_store(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    pytest.importorskip("matplotlib")
    from meanband.store import report_json
    from report_rows import sample_rows

    rows = sample_rows()[:2]
    history = tmp_path / "history.sqlite"
    with HistoryStore(history) as s:
        for i in range(3):
            s.record_run(rows, label="main", environment=_env(i))
    report = report_json.build_report(rows, environment=report_json.environment(),
                                      configuration={"args": [], "options": {}})
    path = report_json.write_report(report, tmp_path / "r.json")
    img = tmp_path / "img"
    main(["report", str(path), "--plots", str(img), "--plot-checks", "none",
          "--trend-store", str(history), "--trend-label", "main"])
    assert "wrote 2 trend picture(s) from the newest 60 runs of" in capsys.readouterr().out
    assert len(list(img.glob("trend-*.png"))) == 2
    assert main(["report", str(path), "--trend-store", str(history)]) == 2
    assert "give --plots DIR" in capsys.readouterr().err
    assert main(["report", str(path), "--plots", str(img), "--trend-store", str(tmp_path / "none.sqlite")]) == 2
    assert "no history store at" in capsys.readouterr().err
