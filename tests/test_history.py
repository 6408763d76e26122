"""The history store: round trip, schema upgrades, and every fault a store can meet."""

from __future__ import annotations

import contextlib
import hashlib
import os
import sqlite3
import subprocess
import sys
import textwrap
import threading
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from meanband.store import history
from meanband.store.database import Database
from meanband.store.environment import capture_environment as describe_environment
from meanband.store.history import HistoryStore, StoreError

RNG = np.random.default_rng(20261206)
ENV = {"commit": "0123456789abcdef", "branch": "main", "dirty": False, "hostname": "bench-7",
       "machine": "x86_64", "cpu_count": 2, "platform": "Linux", "implementation": "CPython",
       "python": "3.11",
       "meanband": "0.1.0"}
# Child processes import meanband from this checkout, not whatever else is installed.
PLUGIN_DIR = str(Path(__file__).resolve().parents[1] / "plugin")


def make_row(nodeid: str, series: str = "", n: int = 20, unit: str | None = "s") -> dict[str, Any]:
    values = RNG.lognormal(np.log(1e-4), 0.2, n)
    return {
        "nodeid": nodeid, "series": series, "kind": "check", "unit": unit, "source": "time",
        "values": values.tolist(), "warmup": [2e-4, 1.5e-4],
        "decision": {"verdict": "PASS", "interval": {"mean": float(values.mean()),
                                                     "low": float("-inf"), "high": 2e-4}},
        "notes": [{"code": "few", "text": "few trials"}], "settings": {"confidence": 0.95},
        "timing": None,
    }


def digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.fixture
def store_path(tmp_path: Path) -> Path:
    return tmp_path / ".meanband" / "history.sqlite"


@pytest.fixture(params=["sqlite", "postgresql"])
def store_at(request: pytest.FixtureRequest, store_path: Path) -> str | Path:
    """The same store tests on both backends: a new SQLite file, or a new PostgreSQL database
    on the throwaway test server (skipped, counted, where no server can be had)."""
    if request.param == "sqlite":
        return store_path
    return str(request.getfixturevalue("postgres_url"))


@contextlib.contextmanager
def raw_database(location: str | Path) -> Iterator[Database]:
    """A plain connection to a store's database, past HistoryStore, in autocommit."""
    if isinstance(location, str):
        db = Database.postgresql(location, timeout=10, read_only=False)
    else:
        location.parent.mkdir(parents=True, exist_ok=True)
        db = Database.sqlite(str(location), str(location), timeout=10)
    try:
        yield db
    finally:
        db.close()


# -- round trip ------------------------------------------------------------------------------------


def test_round_trip_keeps_trials_bit_for_bit_and_the_row(store_at: str | Path) -> None:
    rows = [make_row("t.py::test_a"), make_row("t.py::test_b", "cold", unit="V")]
    with HistoryStore(store_at) as store:
        run_id = store.record_run(rows, label="main", environment=ENV)
        run = store.find_run("main")
        checks = store.checks(run_id)
    assert run.id == run_id and run.label == "main" and run.checks == 2
    assert (run.commit, run.branch, run.dirty, run.host, run.cpus) == (
        "0123456789abcdef", "main", False, "bench-7", 2)
    for row, check in zip(rows, checks, strict=True):
        assert check.key == (row["nodeid"], row["series"])
        stored = np.asarray(row["values"], dtype=np.float64)
        assert check.values.tobytes() == stored.tobytes()  # exact, not approximately equal
        assert check.warmup.tolist() == row["warmup"]
        assert check.row["notes"] == row["notes"] and check.unit == row["unit"]
        assert "values" not in check.row  # trials are stored once, as float64 bytes
        assert check.n == len(row["values"]) and check.verdict == "PASS"
        assert check.high == 2e-4 and check.low is None  # open ends are stored as NULL


def test_row_without_trials_is_stored_with_an_empty_mean(store_at: str | Path) -> None:
    row = {"nodeid": "t.py::test_empty", "series": "", "kind": "unchecked", "values": []}
    with HistoryStore(store_at) as store:
        (check,) = store.checks(store.record_run([row], environment=ENV))
    assert check.n == 0 and check.values.size == 0 and np.isnan(check.mean)


def test_schema_version_and_no_pickle(store_at: str | Path) -> None:
    with HistoryStore(store_at) as store:
        store.record_run([make_row("t.py::test_a")], environment=ENV)
    with raw_database(store_at) as db:
        assert db.version() == history.SCHEMA_VERSION
        blob = bytes(db.execute("SELECT trials FROM checks").fetchone()[0])
    assert len(blob) == 20 * 8 and not blob.startswith(b"\x80")  # raw float64, no pickle header


def test_sqlite_store_uses_wal(store_path: Path) -> None:
    with HistoryStore(store_path) as store:
        store.record_run([make_row("t.py::test_a")], environment=ENV)
    with contextlib.closing(sqlite3.connect(store_path)) as conn:
        assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        assert conn.execute("PRAGMA user_version").fetchone()[0] == history.SCHEMA_VERSION


def test_find_run_by_latest_label_and_id(store_at: str | Path) -> None:
    with HistoryStore(store_at) as store:
        first = store.record_run([make_row("a")], label="main", environment=ENV)
        second = store.record_run([make_row("a")], label="feature", environment=ENV)
        third = store.record_run([make_row("a")], label="main", environment=ENV)
        assert store.find_run().id == third
        assert store.find_run("latest").id == third
        assert store.find_run("main").id == third
        assert store.find_run("feature").id == second
        assert store.find_run(first).id == first
        assert store.find_run(f"#{first}").id == first
        with pytest.raises(StoreError, match=r"no run labelled or numbered 'nightly'.*main"):
            store.find_run("nightly")


def test_baseline_runs_are_the_newest_runs_of_a_label(store_at: str | Path) -> None:
    with HistoryStore(store_at) as store:
        ids = [store.record_run([make_row("a")], label=label, environment=ENV)
               for label in ("main", "main", "feature", "main", "main")]
        assert [r.id for r in store.baseline_runs("main", 3)] == [ids[4], ids[3], ids[1]]
        assert [r.id for r in store.baseline_runs("main", 10)] == [ids[4], ids[3], ids[1], ids[0]]
        assert [r.id for r in store.baseline_runs("feature", 3)] == [ids[2]]
        # A run number or "latest" names one run, whatever its label.
        assert [r.id for r in store.baseline_runs(ids[1], 3)] == [ids[1]]
        assert [r.id for r in store.baseline_runs("latest", 3)] == [ids[4]]
        with pytest.raises(StoreError, match="at least 1 run"):
            store.baseline_runs("main", 0)


def test_fingerprint_and_noise_floors_round_trip(store_at: str | Path) -> None:
    fingerprint = {"cpu_model": "Invented CPU 9", "cpu_count": 2, "governor": "performance"}
    with HistoryStore(store_at) as store:
        run_id = store.record_run([make_row("a")], label="main",
                                  environment={**ENV, "fingerprint": fingerprint})
        bare = store.record_run([make_row("a")], label="main", environment=ENV)
        assert store.find_run(run_id).fingerprint == fingerprint
        assert store.find_run(bare).fingerprint is None
        floors = [history.NoiseFloor("a", "", 0.04, 2, 3, 0.01, 0.5),
                  history.NoiseFloor("b", "volts", 0.002, 4, 5)]
        assert store.save_noise_floors("main", floors) == 2
        newer = history.NoiseFloor("a", "", 0.03, 3, 4)
        store.save_noise_floors("main", [newer])
        read = store.noise_floors("main")
        assert read[("a", "")].between_sd == 0.03 and read[("a", "")].runs == 4
        assert read[("b", "volts")].df == 4 and read[("b", "volts")].position_p is None
        assert read[("a", "")].measured  # stamped when saved
        assert store.noise_floors("feature") == {}


def test_version_1_store_is_upgraded_keeping_its_runs(store_at: str | Path) -> None:
    with raw_database(store_at) as db:
        history.MIGRATIONS[0](db)
        db.set_version(1)
        db.execute("INSERT INTO runs (label, started, host, machine, system, python, meanband) "
                   "VALUES ('main', '2026-11-30T10:00:00+00:00', 'bench-7', 'x86_64', 'Linux', "
                   "'CPython 3.11', '0.1.0')")
    with HistoryStore(store_at) as store:
        (run,) = store.runs()
        assert run.label == "main" and run.fingerprint is None
        assert store.noise_floors("main") == {}
    with raw_database(store_at) as db:
        assert db.version() == history.SCHEMA_VERSION == 2


def test_empty_database_is_a_clear_error_when_read(postgres_url: str) -> None:
    with pytest.raises(StoreError, match="holds no meanband history yet"):
        HistoryStore(postgres_url, create=False, read_only=True)
    with HistoryStore(postgres_url) as store, pytest.raises(StoreError, match="holds no runs"):
        store.find_run()


def test_empty_store_and_missing_store_are_clear_errors(store_path: Path) -> None:
    with pytest.raises(StoreError, match=r"no history store at .*--meanband-record"):
        HistoryStore(store_path, create=False)
    assert not store_path.exists()
    with HistoryStore(store_path) as store, pytest.raises(StoreError, match="holds no runs"):
        store.find_run()


def test_prune_keeps_the_newest_runs(store_at: str | Path) -> None:
    with HistoryStore(store_at) as store:
        ids = [store.record_run([make_row("a"), make_row("b")], environment=ENV) for _ in range(5)]
        assert store.prune(2) == 3
        assert [r.id for r in store.runs()] == ids[:1:-1][:2]
        assert store.checks(ids[0]) == []  # checks go with their run
        with pytest.raises(StoreError, match="0 or more"):
            store.prune(-1)


# -- schema upgrades ----------------------------------------------------------------------------


def test_store_upgrades_itself_to_a_newer_schema(store_at: str | Path, monkeypatch: pytest.MonkeyPatch) -> None:
    with HistoryStore(store_at) as store:
        run_id = store.record_run([make_row("a")], label="old", environment=ENV)

    def add_note_column(conn: Database) -> None:
        conn.execute("ALTER TABLE runs ADD COLUMN note TEXT")

    monkeypatch.setattr(history, "MIGRATIONS", [*history.MIGRATIONS, add_note_column])
    monkeypatch.setattr(history, "SCHEMA_VERSION", len(history.MIGRATIONS))
    with HistoryStore(store_at) as store:
        assert store.find_run("old").id == run_id  # earlier runs survive the upgrade
    with raw_database(store_at) as db:
        assert db.version() == history.SCHEMA_VERSION
        assert db.execute("SELECT note FROM runs").fetchall() == [(None,)]  # the new column


def test_failed_upgrade_changes_nothing(store_at: str | Path, monkeypatch: pytest.MonkeyPatch) -> None:
    with HistoryStore(store_at) as store:
        store.record_run([make_row("a")], label="old", environment=ENV)

    def half_done(conn: Database) -> None:
        conn.execute("ALTER TABLE runs ADD COLUMN note TEXT")
        conn.execute("SELECT no_such_column FROM runs")  # the step fails part way

    monkeypatch.setattr(history, "MIGRATIONS", [*history.MIGRATIONS, half_done])
    monkeypatch.setattr(history, "SCHEMA_VERSION", len(history.MIGRATIONS))
    with pytest.raises(StoreError):
        HistoryStore(store_at)
    monkeypatch.undo()
    with raw_database(store_at) as db:
        assert db.version() == history.SCHEMA_VERSION
    with HistoryStore(store_at) as store:  # the old schema is whole: no note column, one run
        assert [r.label for r in store.runs()] == ["old"]


def test_store_from_a_newer_meanband_is_refused(store_at: str | Path) -> None:
    with HistoryStore(store_at) as store:
        store.record_run([make_row("a")], environment=ENV)
    with raw_database(store_at) as db:
        db.set_version(99)
    with pytest.raises(StoreError, match="schema version 99, newer"):
        HistoryStore(store_at)


# -- faults ------------------------------------------------------------------------------------------


def test_non_sqlite_file_is_refused_and_left_untouched(store_path: Path) -> None:
    store_path.parent.mkdir(parents=True)
    store_path.write_text("label,mean\nmain,1.0\n")
    before = digest(store_path)
    with pytest.raises(StoreError, match=rf"{store_path}.*not an SQLite file.*Move it aside"):
        HistoryStore(store_path)
    assert digest(store_path) == before


def test_foreign_sqlite_database_is_refused_and_left_untouched(store_path: Path) -> None:
    store_path.parent.mkdir(parents=True)
    conn = sqlite3.connect(store_path)
    conn.execute("CREATE TABLE invoices (id INTEGER)")
    conn.commit()
    conn.close()
    before = digest(store_path)
    with pytest.raises(StoreError, match=r"not a meanband history store.*invoices"):
        HistoryStore(store_path)
    assert digest(store_path) == before


def test_damaged_store_is_a_clear_error_and_left_untouched(store_path: Path) -> None:
    with HistoryStore(store_path) as store:
        for _ in range(3):
            store.record_run([make_row(f"t{i}", n=400) for i in range(10)], environment=ENV)
    data = bytearray(store_path.read_bytes())
    # Keep the 100-byte header (so it still looks like SQLite) and scramble the pages after it.
    data[100:] = RNG.integers(0, 256, len(data) - 100, dtype=np.uint8).tobytes()
    store_path.write_bytes(bytes(data))
    before = digest(store_path)
    with pytest.raises(StoreError, match=rf"{store_path} is damaged.*left untouched"):
        with HistoryStore(store_path) as store:
            store.record_run([make_row("x")], environment=ENV)
    assert digest(store_path) == before


def test_directory_and_unwritable_locations_are_clear_errors(tmp_path: Path) -> None:
    with pytest.raises(StoreError, match="is a directory"):
        HistoryStore(tmp_path)
    blocker = tmp_path / "not-a-dir"
    blocker.write_text("x")
    with pytest.raises(StoreError, match=r"cannot open the history store .*not-a-dir"):
        HistoryStore(blocker / "history.sqlite")


@pytest.mark.skipif(hasattr(os, "geteuid") and os.geteuid() == 0,
                    reason="file permissions do not bind the root user")
def test_read_only_directory_is_a_clear_error(tmp_path: Path) -> None:
    locked = tmp_path / "ro"
    locked.mkdir()
    locked.chmod(0o555)
    try:
        with pytest.raises(StoreError, match="cannot"):
            with HistoryStore(locked / "history.sqlite") as store:
                store.record_run([make_row("a")], environment=ENV)
    finally:
        locked.chmod(0o755)


def test_locked_store_waits_then_fails_clearly(store_path: Path) -> None:
    with HistoryStore(store_path) as store:
        store.record_run([make_row("a")], environment=ENV)
    holder = sqlite3.connect(store_path, isolation_level=None)
    holder.execute("BEGIN IMMEDIATE")  # another process is writing
    try:
        with HistoryStore(store_path, timeout=0.2) as store:
            with pytest.raises(StoreError, match=r"stayed locked .* 0.2 s"):
                store.record_run([make_row("b")], environment=ENV)
            assert len(store.runs()) == 1  # readers are not blocked by the writer (WAL)
    finally:
        holder.execute("ROLLBACK")
        holder.close()


def test_locked_store_waits_for_the_lock_to_clear(store_path: Path) -> None:
    with HistoryStore(store_path) as store:
        store.record_run([make_row("a")], environment=ENV)
    holder = sqlite3.connect(store_path, isolation_level=None, check_same_thread=False)
    holder.execute("BEGIN IMMEDIATE")
    release = threading.Timer(0.3, lambda: holder.execute("COMMIT"))
    release.start()
    try:
        with HistoryStore(store_path, timeout=30) as store:
            store.record_run([make_row("b")], environment=ENV)
            assert len(store.runs()) == 2
    finally:
        release.join()
        holder.close()


_SLOW_SAVER = textwrap.dedent(
    """
    import sys, time
    sys.path.insert(0, {plugin!r})
    from meanband.store.history import HistoryStore

    path, label, pause, go = sys.argv[1], sys.argv[2], float(sys.argv[3]), sys.argv[4]
    env = {{"hostname": "child", "machine": "m", "platform": "s", "python": "p", "meanband": "0"}}

    def rows():
        for i in range(5):
            yield {{"nodeid": f"t.py::test_{{i}}", "series": "", "values": [1.0, 2.0, 3.0]}}
            print("saving", flush=True)
            time.sleep(pause)

    with HistoryStore(path, timeout=60) as store:
        print("open", flush=True)
        while go and not __import__("os").path.exists(go):
            time.sleep(0.01)
        store.record_run(rows(), label=label, environment=env)
    print("done", flush=True)
    """
)


def _saver(tmp_path: Path, store_path: Path, label: str, pause: float, go: str = "") -> subprocess.Popen[str]:
    script = tmp_path / "saver.py"
    script.write_text(_SLOW_SAVER.format(plugin=PLUGIN_DIR))
    return subprocess.Popen(
        [sys.executable, str(script), str(store_path), label, str(pause), go],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
    )


def test_two_runs_saving_at_once_both_land(tmp_path: Path, store_at: str | Path) -> None:
    with HistoryStore(store_at) as store:
        store.record_run([make_row("a")], label="earlier", environment=ENV)
    go = tmp_path / "go"
    children = [_saver(tmp_path, store_at, label, 0.05, str(go)) for label in ("one", "two")]
    for child in children:
        assert child.stdout is not None and child.stdout.readline().strip() == "open"
    go.write_text("")  # both start their transaction together
    for child in children:
        _out, err = child.communicate(timeout=120)
        assert child.returncode == 0, err
    with HistoryStore(store_at) as store:
        runs = {r.label: r for r in store.runs()}
        assert set(runs) == {"earlier", "one", "two"}
        assert runs["one"].checks == runs["two"].checks == 5


def test_run_killed_while_saving_leaves_earlier_runs_intact(tmp_path: Path, store_at: str | Path) -> None:
    with HistoryStore(store_at) as store:
        earlier = store.record_run([make_row("a"), make_row("b")], label="earlier", environment=ENV)
        kept = [c.values.tobytes() for c in store.checks(earlier)]
    child = _saver(tmp_path, store_at, "killed", 60.0)
    try:
        assert child.stdout is not None
        assert child.stdout.readline().strip() == "open"
        assert child.stdout.readline().strip() == "saving"  # inside the transaction, one row in
        child.kill()  # SIGKILL on POSIX: no cleanup, no rollback by the child
    finally:
        child.wait(timeout=30)
    with HistoryStore(store_at) as store:
        runs = store.runs()
        assert [r.label for r in runs] == ["earlier"]
        assert [c.values.tobytes() for c in store.checks(earlier)] == kept
        store.record_run([make_row("c")], label="after", environment=ENV)  # and still writable
        assert [r.label for r in store.runs()] == ["after", "earlier"]


# -- run details ----------------------------------------------------------------------------------


def test_environment_inside_a_git_checkout(tmp_path: Path) -> None:
    git = ["git", "-c", "user.name=bench", "-c", "user.email=bench@example.invalid"]
    try:
        subprocess.run([*git, "init", "-q", "-b", "trunk", str(tmp_path)], check=True)
    except (OSError, subprocess.CalledProcessError):
        pytest.skip("git is not usable here")
    (tmp_path / "f.txt").write_text("x")
    subprocess.run([*git, "add", "f.txt"], cwd=tmp_path, check=True)
    subprocess.run([*git, "commit", "-q", "-m", "first"], cwd=tmp_path, check=True)
    head = subprocess.run(["git", "rev-parse", "HEAD"], cwd=tmp_path, capture_output=True,
                          text=True, check=True).stdout.strip()
    env = describe_environment(tmp_path)
    assert (env["commit"], env["branch"], env["dirty"]) == (head, "trunk", False)
    (tmp_path / "f.txt").write_text("changed")
    assert describe_environment(tmp_path)["dirty"] is True
    assert env["python"] == ".".join(map(str, sys.version_info[:3]))


def test_environment_without_git(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("PATH", str(tmp_path))  # no git on the path
    env = describe_environment(tmp_path)
    assert env["commit"] is None and env["branch"] is None and env["dirty"] is None
    assert env["cpu_count"] == os.cpu_count() and env["hostname"]


def test_stored_checks_compare_with_equals(store_at: str | Path) -> None:
    # Before: == on a StoredCheck raised "the truth value of an array is ambiguous".
    with HistoryStore(store_at) as store:
        run_id = store.record_run([make_row("t.py::a"), make_row("t.py::b")], environment=ENV)
        first, second = store.checks(run_id)
        again = store.checks(run_id)[0]
    assert first == again and first != second
