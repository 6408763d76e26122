"""``meanband history copy``: runs move between an SQLite file and PostgreSQL, trials exact."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from meanband.cli import main
from meanband.store.history import HistoryStore
from test_history import ENV, make_row, raw_database

FINGERPRINT = {"cpu_model": "Invented CPU 9", "cpu_count": 2}


def _fill(path: Path) -> None:
    # Edge values as well as ordinary trials: the smallest subnormal, -0.0, huge and tiny.
    edges = make_row("t.py::test_edges", "probe")
    edges["values"] = [5e-324, -0.0, 1.7976931348623157e308, 1e-300, 0.1, 1 / 3]
    with HistoryStore(path) as store:
        store.record_run([make_row("t.py::test_a"), edges], label="main",
                         environment={**ENV, "fingerprint": FINGERPRINT})
        store.record_run([make_row("t.py::test_a"), {"nodeid": "t.py::test_empty", "values": []}],
                         label="feature", environment={**ENV, "dirty": True, "commit": None},
                         started="2026-12-01T09:30:00+00:00")


def _blobs(location: str | Path) -> list[tuple]:
    with raw_database(location) as db:
        rows = db.execute(
            "SELECT r.label, r.started, c.nodeid, c.series, c.row_json, c.trials, c.warmup "
            "FROM checks c JOIN runs r ON r.id = c.run_id ORDER BY r.started, r.label, c.id"
        ).fetchall()
    return [(*r[:5], bytes(r[5]), bytes(r[6])) for r in rows]


def test_sqlite_to_postgresql_and_back_is_byte_identical(tmp_path: Path, postgres_url: str, capsys: pytest.CaptureFixture[str]) -> None:
    original, back = tmp_path / "history.sqlite", tmp_path / "back" / "history.sqlite"
    _fill(original)
    assert main(["history", "copy", str(original), postgres_url]) == 0
    assert "copied 2 run(s)" in capsys.readouterr().out
    assert main(["history", "copy", postgres_url, str(back)]) == 0
    capsys.readouterr()
    assert _blobs(original) == _blobs(postgres_url) == _blobs(back)  # trials byte for byte
    with HistoryStore(original, create=False) as a, HistoryStore(back, create=False) as b:
        runs_a, runs_b = a.runs(), b.runs()
        strip = [{**r.to_dict(), "id": None} for r in runs_a]
        assert strip == [{**r.to_dict(), "id": None} for r in runs_b]  # every run detail kept
        assert runs_a[1].fingerprint == FINGERPRINT and runs_a[0].dirty is True
        for run_a, run_b in zip(runs_a, runs_b, strict=True):
            for check_a, check_b in zip(a.checks(run_a.id), b.checks(run_b.id), strict=True):
                assert check_a.values.tobytes() == check_b.values.tobytes()
                assert np.signbit(check_a.values).tolist() == np.signbit(check_b.values).tolist()
                assert check_a.warmup.tobytes() == check_b.warmup.tobytes()
                same = ("nodeid", "series", "kind", "unit", "source", "n", "low", "high", "verdict", "row")
                assert [getattr(check_a, f) for f in same] == [getattr(check_b, f) for f in same]
                assert np.array_equal(check_a.mean, check_b.mean, equal_nan=True)


def test_copying_again_skips_runs_already_there(tmp_path: Path, postgres_url: str, capsys: pytest.CaptureFixture[str]) -> None:
    original = tmp_path / "history.sqlite"
    _fill(original)
    assert main(["history", "copy", str(original), postgres_url, "--run", "feature"]) == 0
    assert "copied 1 run(s)" in capsys.readouterr().out
    assert main(["history", "copy", str(original), postgres_url]) == 0
    out = capsys.readouterr().out
    assert "copied 1 run(s)" in out and "1 run(s) were already there" in out
    with HistoryStore(postgres_url, create=False) as store:
        assert sorted(r.label for r in store.runs()) == ["feature", "main"]


def test_file_to_file_copy_and_errors(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    original, other = tmp_path / "a.sqlite", tmp_path / "b.sqlite"
    _fill(original)
    assert main(["history", "copy", str(original), str(other)]) == 0
    assert _blobs(original) == _blobs(other)
    capsys.readouterr()
    assert main(["history", "copy", str(tmp_path / "missing.sqlite"), str(other)]) == 2
    assert "no history store at" in capsys.readouterr().err
    assert main(["history", "copy", str(original), str(other), "--run", "nightly"]) == 2
    assert "no run labelled or numbered 'nightly'" in capsys.readouterr().err


def test_noise_floors_travel_with_a_whole_store_copy(tmp_path: Path, postgres_url: str, capsys: pytest.CaptureFixture[str]) -> None:
    from meanband.store.history import NoiseFloor

    original = tmp_path / "history.sqlite"
    _fill(original)
    floors = [NoiseFloor("t.py::test_a", "", 0.04, 2, 3, 0.01, 0.5, "2026-11-30T08:00:00+00:00"),
              NoiseFloor("t.py::test_edges", "probe", 0.002, 4, 5, None, None,
                         "2026-11-30T08:00:00+00:00")]
    with HistoryStore(original) as store:
        store.save_noise_floors("main", floors)
    assert main(["history", "copy", str(original), postgres_url, "--run", "main"]) == 0
    assert "noise floor" not in capsys.readouterr().out  # one run: its floors stay behind
    assert main(["history", "copy", str(original), postgres_url]) == 0
    assert "copied 2 measured noise floor(s)" in capsys.readouterr().out
    assert main(["history", "copy", str(original), postgres_url]) == 0
    assert "noise floor" not in capsys.readouterr().out  # not copied twice
    with HistoryStore(postgres_url, create=False) as store:
        assert store.noise_floors("main") == {(f.nodeid, f.series): f for f in floors}
