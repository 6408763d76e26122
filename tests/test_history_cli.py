"""``meanband history ...`` end to end: list, show, compare, export, prune, and its errors."""

from __future__ import annotations

import csv
import io
import json
import math
import os
import re
import subprocess
import sys
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from meanband.cli import main
from meanband.store.history import HistoryStore
from scipy import stats

ENV = {"commit": "feedfacecafe0123", "branch": "main", "dirty": True, "hostname": "bench-7",
       "machine": "x86_64", "cpu_count": 2, "platform": "Linux", "implementation": "CPython",
       "python": "3.11",
       "meanband": "0.1.0"}
PLUGIN_DIR = str(Path(__file__).resolve().parents[1] / "plugin")


def _rows(seed: int, slowdown: float = 1.0, shift: float = 0.0) -> list[dict[str, Any]]:
    rng = np.random.default_rng(seed)
    quote = rng.lognormal(np.log(300e-6 * slowdown), 0.2, 30)
    volts = rng.normal(5.0 + shift, 0.02, 25)
    return [
        {"nodeid": "test_fares.py::test_quote", "series": "", "kind": "check", "unit": "s",
         "source": "time", "values": quote.tolist(), "warmup": [],
         "decision": {"verdict": "PASS", "interval": {"mean": float(quote.mean()),
                                                      "low": -math.inf, "high": 1e-3}},
         "notes": [], "settings": {"confidence": 0.95}},
        {"nodeid": "test_bench.py::test_rail", "series": "volts", "kind": "unchecked",
         "unit": "V", "source": "sample", "values": volts.tolist(), "warmup": [],
         "decision": None, "notes": [], "settings": {"confidence": 0.95}},
    ]


@pytest.fixture(params=["sqlite", "postgresql"])
def store(request: pytest.FixtureRequest, tmp_path: Path) -> Any:
    """Three runs in a new SQLite file, or in a new database on the PostgreSQL test server."""
    path: Any = tmp_path / "history.sqlite"
    if request.param == "postgresql":
        path = request.getfixturevalue("postgres_url")
    with HistoryStore(path) as s:
        s.record_run(_rows(1), label="main", environment=ENV)
        s.record_run(_rows(2), label="same", environment=ENV)
        s.record_run(_rows(3, slowdown=1.25, shift=0.5), label="slower", environment=ENV)
    return path


def run(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_list_shows_runs_newest_first(store: Any, capsys: pytest.CaptureFixture[str]) -> None:
    code, out, err = run(capsys, "history", "list", "--store", str(store))
    assert code == 0 and err == ""
    lines = out.splitlines()
    assert lines[0].split()[:3] == ["run", "label", "started"]
    assert [line.split()[1] for line in lines[2:]] == ["slower", "same", "main"]
    assert "feedfaceca " in out and "bench-7" in out


def test_show_lists_each_check(store: Any, capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = run(capsys, "history", "show", "main", "--store", str(store))
    assert code == 0
    assert "run 1 'main'" in out and "uncommitted changes" in out
    assert "machine x86_64, 2 CPUs, Linux, meanband 0.1.0" in out
    assert "test_fares.py::test_quote" in out and "µs" in out and "PASS" in out
    assert re.search(r"^test_bench.py::test_rail +volts +25 +5.0\d* V .* unchecked$", out, re.M)
    # A budget's bound reads as in the summary, not as an interval to minus infinity.
    assert re.search(r"^test_fares.py::test_quote .*<= [0-9.]+ ms", out, re.M), out
    assert "-inf" not in out


def test_compare_flags_the_slowdown_and_the_moved_value(
    store: Any, capsys: pytest.CaptureFixture[str]
) -> None:
    code, out, _ = run(capsys, "history", "compare", "main", "slower", "--store", str(store))
    assert code == 1  # a regression is a finding
    quote = next(line for line in out.splitlines() if line.startswith("test_fares.py"))
    rail = next(line for line in out.splitlines() if line.startswith("test_bench.py"))
    assert quote.endswith("regressed") and rail.endswith("regressed")
    # Reference: scipy.stats.ttest_ind(equal_var=False) on the logs, interval exponentiated.
    a, b = np.array(_rows(1)[0]["values"]), np.array(_rows(3, 1.25, 0.5)[0]["values"])
    ci = stats.ttest_ind(np.log(b), np.log(a), equal_var=False).confidence_interval(0.95)
    assert f"[{math.exp(ci.low):.3f}, {math.exp(ci.high):.3f}]" in quote
    assert "2 check(s) regressed from run 1 to run 3" in out


def test_compare_of_like_runs_finds_no_regression(store: Any, capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = run(capsys, "history", "compare", "main", "same", "--store", str(store))
    assert code == 0
    verdicts = [line.rsplit("  ", 1)[-1] for line in out.splitlines() if line.startswith("test_")]
    assert len(verdicts) == 2
    assert set(verdicts) <= {"no regression", "cannot tell yet"}


def test_compare_limits_are_options(store: Any, capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = run(capsys, "history", "compare", "main", "slower", "--store", str(store),
                       "--max-increase", "60%", "--max-change", "20%")
    assert code == 0 and "<= 1.6x" in out and "0.8x..1.2x" in out


def test_export_json_holds_trials_and_is_strict(store: Any, capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = run(capsys, "history", "export", "main", "--format", "json", "--store", str(store))
    assert code == 0

    def refuse(name: str) -> None:
        raise AssertionError(f"non-standard JSON constant {name}")

    document = json.loads(out, parse_constant=refuse)
    assert document["run"]["label"] == "main" and document["run"]["commit"] == ENV["commit"]
    assert document["checks"][0]["values"] == _rows(1)[0]["values"]
    assert document["checks"][0]["decision"]["interval"]["low"] == "-inf"


def test_export_csv_to_a_file(store: Any, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    target = tmp_path / "run.csv"
    code, out, _ = run(capsys, "history", "export", "#3", "--format", "csv", "--store", str(store),
                       "--output", str(target))
    assert code == 0 and "wrote run 3 (2 checks)" in out
    rows = list(csv.DictReader(io.StringIO(target.read_text())))
    assert [r["nodeid"] for r in rows] == ["test_fares.py::test_quote", "test_bench.py::test_rail"]
    assert float(rows[1]["mean"]) == pytest.approx(np.mean(_rows(3, 1.25, 0.5)[1]["values"]))
    assert rows[0]["low"] == "" and float(rows[0]["high"]) == 1e-3


def test_prune_keeps_newest(store: Any, capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = run(capsys, "history", "prune", "--keep", "1", "--store", str(store))
    assert code == 0 and "deleted 2 run(s)" in out and "1 kept" in out
    _, out, _ = run(capsys, "history", "list", "--store", str(store))
    assert [line.split()[1] for line in out.splitlines()[2:]] == ["slower"]


@pytest.mark.parametrize(
    ("argv", "message"),
    [
        (["history", "show", "nightly"], "no run labelled or numbered 'nightly'"),
        (["history", "compare", "main", "slower", "--max-increase", "lots"], "cannot read"),
        (["history", "compare", "main", "slower", "--confidence", "95"], "did you mean 0.95"),
        (["history", "prune", "--keep", "-1"], "0 or more"),
    ],
)
def test_bad_arguments_exit_2_with_message(
    store: Any, capsys: pytest.CaptureFixture[str], argv: list[str], message: str
) -> None:
    code, out, err = run(capsys, *argv, "--store", str(store))
    assert code == 2 and out == ""
    assert err.startswith("meanband history: error:") and message in err


def test_store_errors_exit_2(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    missing = tmp_path / "none.sqlite"
    code, _, err = run(capsys, "history", "list", "--store", str(missing))
    assert code == 2 and "no history store at" in err and not missing.exists()
    junk = tmp_path / "notes.sqlite"
    junk.write_text("not a database")
    code, _, err = run(capsys, "history", "list", "--store", str(junk))
    assert code == 2 and f"{junk} is not an SQLite file" in err
    assert junk.read_text() == "not a database"


def test_usage_errors_exit_2(capsys: pytest.CaptureFixture[str]) -> None:
    code, _, err = run(capsys, "history")
    assert code == 2 and "SUBCOMMAND" in err
    with pytest.raises(SystemExit) as exit_info:
        main(["history", "prune"])  # --keep is required
    assert exit_info.value.code == 2
    assert "--keep" in capsys.readouterr().err


def test_python_dash_m_meanband_runs_the_command(store: Any, tmp_path: Path) -> None:
    env = {**os.environ, "PYTHONPATH": PLUGIN_DIR}
    done = subprocess.run(
        [sys.executable, "-m", "meanband", "history", "show", "slower", "--store", str(store)],
        capture_output=True, text=True, env=env, timeout=60, check=False,
    )
    assert done.returncode == 0, done.stderr
    assert "run 3 'slower'" in done.stdout
    failed = subprocess.run(
        [sys.executable, "-m", "meanband", "history", "list", "--store", str(tmp_path / "x")],
        capture_output=True, text=True, env=env, timeout=60, check=False,
    )
    assert failed.returncode == 2 and "no history store" in failed.stderr


def test_compare_leaves_in_run_comparisons_alone(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "h.sqlite"
    row = {"nodeid": "test_p.py::test_v2", "series": "v2 / v1", "kind": "check", "unit": "x",
           "source": "compare", "values": [1.1, 1.12, 1.09], "decision": None}
    with HistoryStore(path) as s:
        s.record_run([row], label="a", environment=ENV)
        s.record_run([{**row, "values": [1.5, 1.6, 1.55]}], label="b", environment=ENV)
    code, out, _ = run(capsys, "history", "compare", "a", "b", "--store", str(path))
    assert code == 0 and out.rstrip().endswith("not compared: an in-run comparison is its own gate")
