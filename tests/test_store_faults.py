"""The history store under faults: racing creators, read-only media, damaged rows, special files."""

from __future__ import annotations

import os
import sqlite3
import subprocess
import sys
import textwrap
from pathlib import Path
from typing import Any

import pytest
from meanband.cli import main as cli_main
from meanband.errors import StoreError
from meanband.store.history import HistoryStore
from test_history import ENV, PLUGIN_DIR, make_row, raw_database

# Many processes create one new store at the same instant; a barrier (a file each child waits
# for) lines them up, so the schema check and creation really overlap.
_CREATOR = textwrap.dedent(
    """
    import os, sys, time
    sys.path.insert(0, {plugin!r})
    from meanband.store.history import HistoryStore
    path, go, me = sys.argv[1], sys.argv[2], sys.argv[3]
    env = {{"hostname": "child", "machine": "m", "platform": "s", "python": "p", "meanband": "0"}}
    row = {{"nodeid": "t::" + me, "series": "", "kind": "unchecked", "unit": None,
            "source": "values", "values": [1.0, 2.0], "warmup": [], "decision": None,
            "notes": [], "settings": {{}}, "timing": None}}
    while not os.path.exists(go):
        time.sleep(0.001)
    with HistoryStore(path, timeout=30) as store:
        store.record_run([row], label=me, environment=env)
    """
)


@pytest.mark.parametrize("backend", ["sqlite", "postgresql"])
def test_concurrent_creators_of_a_new_store_lose_no_run(
    tmp_path: Path, request: pytest.FixtureRequest, backend: str
) -> None:
    script = tmp_path / "creator.py"
    script.write_text(_CREATOR.format(plugin=PLUGIN_DIR))
    lost = 0
    for attempt in range(4 if backend == "sqlite" else 2):  # PostgreSQL serialises creation
        store: Any = tmp_path / f"s{attempt}" / "h.sqlite"
        if backend == "postgresql":
            store = request.getfixturevalue("postgres_server").new_database()
        go = tmp_path / f"go{attempt}"
        children = [subprocess.Popen([sys.executable, str(script), str(store), str(go), str(i)],
                                     stderr=subprocess.PIPE, text=True) for i in range(6)]
        go.touch()  # the barrier opens: all six create the store at once
        errors = [child.communicate(timeout=120)[1] for child in children]
        assert all(child.returncode == 0 for child in children), errors
        with HistoryStore(store, create=False, read_only=True) as s:
            lost += 6 - len(s.runs())
    assert lost == 0


@pytest.fixture
def recorded(tmp_path: Path) -> Path:
    path = tmp_path / "cache" / "history.sqlite"
    with HistoryStore(path) as store:
        store.record_run([make_row("t::a")], label="main", environment=ENV)
    return path


@pytest.fixture(params=["sqlite", "postgresql"])
def recorded_anywhere(request: pytest.FixtureRequest, tmp_path: Path) -> Any:
    """One recorded run in a new SQLite file, or in a new PostgreSQL database."""
    path: Any = tmp_path / "cache" / "history.sqlite"
    if request.param == "postgresql":
        path = request.getfixturevalue("postgres_url")
    with HistoryStore(path) as store:
        store.record_run([make_row("t::a")], label="main", environment=ENV)
    return path


@pytest.mark.skipif(os.geteuid() == 0, reason="root writes through read-only permissions")
def test_read_only_store_can_be_read(recorded: Path) -> None:
    folder = recorded.parent
    recorded.chmod(0o444)
    folder.chmod(0o555)  # a baseline restored read-only from a CI cache
    try:
        with HistoryStore(recorded, create=False, read_only=True) as store:
            assert [r.label for r in store.runs()] == ["main"]
        assert cli_main(["history", "list", "--store", str(recorded)]) == 0
    finally:
        folder.chmod(0o755)
        recorded.chmod(0o644)


def test_read_only_open_writes_nothing(recorded_anywhere: Any) -> None:
    recorded = recorded_anywhere
    before = recorded.read_bytes() if isinstance(recorded, Path) else None
    with HistoryStore(recorded, create=False, read_only=True) as store:
        assert len(store.checks(store.find_run().id)) == 1
        with pytest.raises(StoreError, match="cannot write"):
            store.record_run([make_row("t::b")], environment=ENV)
        with pytest.raises(StoreError, match="cannot write"):
            store.prune(0)
    if before is not None:
        assert recorded.read_bytes() == before
    with HistoryStore(recorded, create=False, read_only=True) as store:
        assert [r.label for r in store.runs()] == ["main"]


@pytest.mark.parametrize("column, value, says", [
    ("row_json", "{not json", "damaged data for run 1, check t::a"),
    ("row_json", "[1, 2]", "not an object"),
    ("trials", b"\x00" * 5, "5 bytes"),
])
def test_damaged_content_is_a_store_error_naming_run_and_check(
    recorded_anywhere: Any, column: str, value: object, says: str
) -> None:
    with raw_database(recorded_anywhere) as db:
        db.execute(f"UPDATE checks SET {column} = ?", (value,))
    with HistoryStore(recorded_anywhere, create=False, read_only=True) as store:
        with pytest.raises(StoreError, match=says):
            store.checks(1)


def test_damaged_baseline_is_a_usage_error_not_internalerror(
    pytester: pytest.Pytester, run_suite, recorded: Path
) -> None:
    with sqlite3.connect(recorded) as conn:
        conn.execute("UPDATE checks SET trials = ?", (b"\x00" * 5,))
    pytester.makepyfile(test_a="def test_a(trials):\n    trials.extend([1.0, 1.1, 0.9])\n")
    result = run_suite(f"--meanband-store={recorded}", "--meanband-baseline=main")
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    assert "INTERNALERROR" not in result.stdout.str() + result.stderr.str()
    result.stderr.fnmatch_lines(["*--meanband-baseline: *damaged data for run 1, check t::a*"])


def test_fifo_at_the_store_path_is_refused_at_once(tmp_path: Path) -> None:
    fifo = tmp_path / "history.sqlite"
    os.mkfifo(fifo)
    for create in (True, False):
        with pytest.raises(StoreError, match="not a regular file"):
            HistoryStore(fifo, create=create)


def test_missing_store_names_the_pytest_option(tmp_path: Path) -> None:
    with pytest.raises(StoreError, match="--meanband-store PATH"):
        HistoryStore(tmp_path / "none.sqlite", create=False)


def test_unwritable_medium_is_opened_immutable(
    recorded: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # Root may write through permissions, so the medium's answer is substituted here.
    from meanband.store import history

    opened: list[str] = []
    real_connect = sqlite3.connect

    def connect(target: str, *args: object, **kwargs: object) -> sqlite3.Connection:
        opened.append(str(target))
        return real_connect(target, *args, **kwargs)  # type: ignore[arg-type]

    monkeypatch.setattr(history.os, "access", lambda *a, **k: False)
    monkeypatch.setattr(history.sqlite3, "connect", connect)
    with HistoryStore(recorded, create=False, read_only=True) as store:
        assert [r.label for r in store.runs()] == ["main"]
    assert opened and opened[0].startswith("file:") and opened[0].endswith("?mode=ro&immutable=1")
