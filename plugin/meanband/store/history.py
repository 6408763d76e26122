"""The history store: past runs and their trials, for baselines and trends; an SQLite file by
default, or a PostgreSQL database that many CI machines share."""

from __future__ import annotations

import contextlib
import dataclasses
import json
import math
import os
import sqlite3
import stat
import time
import urllib.parse
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

import numpy as np

from meanband import defaults
from meanband.errors import StoreError
from meanband.stats.sample import ArrayEquality
from meanband.store.database import (
    POSTGRESQL,
    SQLITE,
    Database,
    connect_error_text,
    is_database_url,
    mask_url,
)
from meanband.store.environment import capture_environment, python_words

__all__ = [
    "DEFAULT_STORE",
    "MIGRATIONS",
    "SCHEMA_VERSION",
    "HistoryStore",
    "NoHistoryYet",
    "NoiseFloor",
    "RunInfo",
    "StoreError",
    "StoredCheck",
]

#: Where the store lives, relative to pytest's rootdir, when no path is given.
DEFAULT_STORE = Path(".meanband") / "history.sqlite"
#: Seconds to wait for another process that holds the store's write lock.
DEFAULT_TIMEOUT = defaults.STORE_TIMEOUT

_ELSEWHERE = "choose another store path (--meanband-store, or --store for the meanband command)"
_SQLITE_MAGIC = b"SQLite format 3\x00"
# Trials are stored as little-endian float64 bytes (numpy tobytes/frombuffer): exact and portable.
_TRIAL_DTYPE = np.dtype("<f8")


class NoHistoryYet(StoreError):
    """A database that holds no meanband tables yet: no run was ever recorded into it."""


@dataclass(frozen=True, slots=True)
class RunInfo:
    """One recorded run: when, where, on which commit."""

    id: int
    label: str
    started: str
    commit: str | None
    branch: str | None
    dirty: bool | None
    host: str
    machine: str
    cpus: int | None
    system: str
    python: str
    meanband: str
    checks: int
    fingerprint: dict[str, Any] | None = None

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only."""
        return {field.name: getattr(self, field.name) for field in dataclasses.fields(self)}


@dataclass(frozen=True, slots=True)
class NoiseFloor:
    """The run-to-run spread of one check's run means, measured from runs of the same code.

    ``between_sd`` is on the log scale (a relative spread: 0.03 is about 3% between runs) for
    positive trials, and relative to the mean otherwise; ``df`` is its degrees of freedom.
    ``position_shift`` is the mean log change from the first to the second half of a run's
    trials, and ``position_p`` the two-sided p-value of that shift across the runs.
    """

    nodeid: str
    series: str
    between_sd: float
    df: int
    runs: int
    position_shift: float | None = None
    position_p: float | None = None
    measured: str = ""

    @property
    def key(self) -> tuple[str, str]:
        return (self.nodeid, self.series)


@dataclass(frozen=True, slots=True, eq=False)
class StoredCheck(ArrayEquality):
    """One check (or unchecked series) of a recorded run, with its raw trials."""

    run_id: int
    nodeid: str
    series: str
    kind: str
    unit: str | None
    source: str | None
    n: int
    mean: float
    low: float | None
    high: float | None
    verdict: str | None
    row: dict[str, Any]
    values: np.ndarray = field(repr=False)
    warmup: np.ndarray = field(repr=False)

    @property
    def key(self) -> tuple[str, str]:
        """What a check is matched on across runs: test node id and series name."""
        return (self.nodeid, self.series)


# Each step upgrades the schema by one version: MIGRATIONS[i] takes version i to i + 1. A store
# opened by a newer meanband is upgraded in place, inside one transaction.
def _schema_1(conn: Database) -> None:
    conn.execute(
        """CREATE TABLE runs (
            id INTEGER PRIMARY KEY,
            label TEXT NOT NULL,
            started TEXT NOT NULL,
            git_commit TEXT,
            git_branch TEXT,
            git_dirty INTEGER,
            host TEXT NOT NULL,
            machine TEXT NOT NULL,
            cpus INTEGER,
            system TEXT NOT NULL,
            python TEXT NOT NULL,
            meanband TEXT NOT NULL
        )"""
    )
    conn.execute(
        """CREATE TABLE checks (
            id INTEGER PRIMARY KEY,
            run_id INTEGER NOT NULL REFERENCES runs(id) ON DELETE CASCADE,
            nodeid TEXT NOT NULL,
            series TEXT NOT NULL,
            kind TEXT NOT NULL,
            unit TEXT,
            source TEXT,
            n INTEGER NOT NULL,
            mean REAL,
            low REAL,
            high REAL,
            verdict TEXT,
            row_json TEXT NOT NULL,
            trials BLOB NOT NULL,
            warmup BLOB NOT NULL
        )"""
    )
    conn.execute("CREATE INDEX checks_by_run ON checks(run_id)")
    conn.execute("CREATE INDEX checks_by_test ON checks(nodeid, series)")
    conn.execute("CREATE INDEX runs_by_label ON runs(label, id)")


def _schema_2(conn: Database) -> None:
    """Runs keep the machine fingerprint they ran on; a label keeps its run-to-run noise floors."""
    conn.execute("ALTER TABLE runs ADD COLUMN fingerprint_json TEXT")
    conn.execute(
        """CREATE TABLE noise_floors (
            id INTEGER PRIMARY KEY,
            label TEXT NOT NULL,
            nodeid TEXT NOT NULL,
            series TEXT NOT NULL,
            between_sd REAL NOT NULL,
            df INTEGER NOT NULL,
            runs INTEGER NOT NULL,
            position_shift REAL,
            position_p REAL,
            measured TEXT NOT NULL
        )"""
    )
    conn.execute("CREATE INDEX floors_by_label ON noise_floors(label, nodeid, series, id)")


# The SQL is the common subset of SQLite and PostgreSQL; the database layer spells the column
# types for PostgreSQL (store/database.py).
MIGRATIONS: list[Callable[[Database], None]] = [_schema_1, _schema_2]
#: Tables of the store: on PostgreSQL, these names in a database without meanband's version
#: table belong to something else.
_OUR_TABLES = frozenset({"runs", "checks", "noise_floors"})
SCHEMA_VERSION = len(MIGRATIONS)


class HistoryStore:
    """A meanband history store. Use as a context manager; every write is one transaction.

    ``path`` is a file (SQLite) or a PostgreSQL URL (``postgresql://...``), whose credentials
    come from the URL, the PG* environment variables or a service file. ``create=False``
    opens an existing store only (for reading and the command line); ``read_only=True`` opens
    it for reading only (SQLite ``mode=ro``, and ``immutable=1`` when the file or its folder
    cannot be written, e.g. a baseline restored read-only from a CI cache; a read-only session
    on PostgreSQL); ``timeout`` is how long to wait for another process's lock (or for the
    server to answer) before giving up.
    """

    def __init__(
        self, path: str | os.PathLike[str], *, create: bool = True, timeout: float = DEFAULT_TIMEOUT,
        read_only: bool = False,
    ) -> None:
        self.timeout = float(timeout)
        self.read_only = read_only and not create
        given = os.fspath(path)
        self._db: Database
        if is_database_url(given):
            #: The file of an SQLite store; None for a PostgreSQL store.
            self.path: Path | None = None
            #: Where the store is, fit to print (a URL's password masked).
            self.location = mask_url(given)
            self.backend = POSTGRESQL
            self._db = self._connect_postgresql(given)
        else:
            self.path = Path(given)
            self.location = str(self.path)
            self.backend = SQLITE
            self._db = self._connect_sqlite(self.path, create)
        try:
            with self._translate_errors():
                self._prepare()
        except BaseException:
            self._db.close()
            raise

    def _connect_sqlite(self, path: Path, create: bool) -> Database:
        _check_file(path, create)
        try:
            if create:
                path.parent.mkdir(parents=True, exist_ok=True)
            if self.read_only:
                return Database.sqlite(_read_only_uri(path), str(path), timeout=self.timeout,
                                       uri=True)
            return Database.sqlite(str(path), str(path), timeout=self.timeout)
        except (OSError, sqlite3.Error) as exc:
            raise StoreError(
                f"cannot open the history store {path}: {exc}; check that the location "
                f"exists and is writable, or {_ELSEWHERE}"
            ) from exc

    def _connect_postgresql(self, url: str) -> Database:
        try:
            import psycopg
        except ImportError as exc:
            raise StoreError(
                f"the history store {self.location} is a PostgreSQL database, which needs the "
                "psycopg driver: pip install 'pytest-meanband[postgresql]'"
            ) from exc
        try:
            return Database.postgresql(url, timeout=self.timeout, read_only=self.read_only)
        except psycopg.Error as exc:
            raise StoreError(
                f"cannot connect to the history store {self.location}: "
                f"{connect_error_text(url, exc)}; check the URL, the PG* environment variables "
                "or the service file, and that the server is up"
            ) from exc

    # -- opening ---------------------------------------------------------------------------

    def _prepare(self) -> None:
        if self.backend == POSTGRESQL:
            self._prepare_postgresql()
            return
        db = self._db
        db.execute("PRAGMA foreign_keys = ON")
        if self.read_only:
            self._check_schema(upgrade=False)
            return
        # Check and create the schema in one write transaction, so two processes starting a new
        # store at once cannot see each other's half-made schema; a busy store is retried.
        deadline = time.monotonic() + self.timeout
        for attempt in range(1000):
            try:
                db.begin(write=False)  # a consistent read: is the schema there and current?
                try:
                    current = db.version() == SCHEMA_VERSION
                    if current:
                        self._check_schema(upgrade=False)
                finally:
                    db.commit()
                if current:
                    self._use_wal()
                    return
                db.begin(write=True)
                try:
                    self._check_schema(upgrade=True)
                    db.commit()
                except BaseException:
                    self._abort()
                    raise
                self._use_wal()
                return
            except sqlite3.OperationalError as exc:
                busy = "locked" in str(exc) or "busy" in str(exc)
                if not busy or time.monotonic() >= deadline:
                    raise
                time.sleep(min(0.05, 0.001 * 2 ** min(attempt, 6)))

    def _prepare_postgresql(self) -> None:
        db = self._db
        if self.read_only or db.version() == SCHEMA_VERSION:
            self._check_schema(upgrade=False)
            return
        # Jobs that meet a new or older database at once take turns under an advisory lock;
        # PostgreSQL's DDL is transactional, so an upgrade is all or nothing.
        db.begin(write=True)
        try:
            db.lock_schema()
            self._check_schema(upgrade=True)
            db.commit()
        except BaseException:
            self._abort()
            raise

    def _use_wal(self) -> None:
        mode = self._db.execute("PRAGMA journal_mode = WAL").fetchone()[0]
        if str(mode).lower() != "wal":
            # Some file systems cannot share memory for WAL; the rollback journal is still safe.
            self._db.execute("PRAGMA journal_mode = DELETE")

    def _check_schema(self, *, upgrade: bool) -> None:
        """Refuse a newer, foreign or damaged store; bring an older meanband store up to date."""
        db = self._db
        version = db.version()
        if version > SCHEMA_VERSION:
            raise StoreError(
                f"the history store {self.location} has schema version {version}, newer than "
                f"this meanband understands ({SCHEMA_VERSION}); upgrade meanband to use it"
            )
        if version == 0:
            tables = db.tables()
            foreign = tables if self.backend == SQLITE else sorted(_OUR_TABLES & set(tables))
            if foreign:
                kind = "an SQLite database" if self.backend == SQLITE else "a PostgreSQL database"
                raise StoreError(
                    f"{self.location} is {kind} but not a meanband history store "
                    f"(it holds tables {', '.join(sorted(foreign))}); it was left untouched. "
                    f"Move it aside, or {_ELSEWHERE}"
                )
        if version > 0 and self.backend == SQLITE:
            # Find damage before anything is written, so a damaged file is never made worse.
            problems = [r[0] for r in db.execute("PRAGMA quick_check").fetchall()]
            if problems != ["ok"]:
                raise StoreError(
                    f"the history store {self.location} is damaged ({'; '.join(problems[:3])}); "
                    "it was left untouched. Move it aside (earlier runs may be rescued with the "
                    "sqlite3 shell's .recover) and a new store will be started"
                )
        if version < SCHEMA_VERSION:
            if not upgrade:
                if version == 0 and self.backend == SQLITE:
                    return  # an empty file: it holds no runs yet
                if version == 0:
                    raise NoHistoryYet(
                        f"the database {self.location} holds no meanband history yet; record a "
                        "run into it first with --meanband-record"
                    )
                raise StoreError(
                    f"the history store {self.location} has schema version {version}, older "
                    f"than this meanband's ({SCHEMA_VERSION}), and was opened read-only; record "
                    "a run into it once (which upgrades it) or read it with the meanband that "
                    "wrote it"
                )
            for step in MIGRATIONS[version:]:
                step(db)
            db.set_version(len(MIGRATIONS))

    def _abort(self) -> None:
        """Roll back after a failure; a connection that is already gone has nothing to undo."""
        with contextlib.suppress(Exception):
            self._db.rollback()

    # -- context and errors ----------------------------------------------------------------

    def close(self) -> None:
        """Close the connection; the store stays as it is."""
        self._db.close()

    def __enter__(self) -> HistoryStore:
        return self

    def __exit__(self, *exc_info: object) -> None:
        self.close()

    def _translate_errors(self) -> _ErrorTranslator:
        return _ErrorTranslator(self.location, self.timeout, self._db)

    # -- writing ---------------------------------------------------------------------------

    def record_run(
        self,
        rows: Iterable[Mapping[str, Any]],
        *,
        label: str = "",
        environment: Mapping[str, Any] | None = None,
        started: str | None = None,
    ) -> int:
        """Store one run and all its rows in a single transaction; return the run's id.

        If the process dies part way, the transaction is never committed and the store keeps
        exactly the runs it had before.
        """
        env = dict(environment) if environment is not None else capture_environment(None)
        when = started or datetime.now(timezone.utc).isoformat(timespec="seconds")
        db = self._db
        with self._translate_errors():
            db.begin(write=True)
            try:
                run_id = db.insert_id(
                    _INSERT_RUN,
                    (
                        str(label), when, env.get("commit"), env.get("branch"),
                        None if env.get("dirty") is None else int(bool(env["dirty"])),
                        str(env.get("hostname", "")), str(env.get("machine", "")),
                        env.get("cpu_count"), str(env.get("platform", "")), python_words(env),
                        str(env.get("meanband", "")),
                        None if env.get("fingerprint") is None
                        else json.dumps(env["fingerprint"], sort_keys=True),
                    ),
                )
                db.executemany(_INSERT_CHECK, ((run_id, *_check_columns(row)) for row in rows))
                db.commit()
            except BaseException:
                self._abort()
                raise
        return run_id

    def copy_run(self, run: RunInfo, checks: Sequence[StoredCheck]) -> int:
        """Store a run read from another store, keeping its label, time, commit and machine
        and its trials byte for byte; return its id here (ids are this store's own)."""
        db = self._db
        with self._translate_errors():
            db.begin(write=True)
            try:
                run_id = db.insert_id(
                    _INSERT_RUN,
                    (
                        run.label, run.started, run.commit, run.branch,
                        None if run.dirty is None else int(run.dirty), run.host, run.machine,
                        run.cpus, run.system, run.python, run.meanband,
                        None if run.fingerprint is None
                        else json.dumps(run.fingerprint, sort_keys=True),
                    ),
                )
                db.executemany(_INSERT_CHECK, (
                    (run_id, c.nodeid, c.series, c.kind, c.unit, c.source, c.n,
                     _finite_or_none(c.mean), c.low, c.high, c.verdict,
                     json.dumps(c.row, sort_keys=True),
                     np.asarray(c.values, dtype=_TRIAL_DTYPE).tobytes(),
                     np.asarray(c.warmup, dtype=_TRIAL_DTYPE).tobytes())
                    for c in checks
                ))
                db.commit()
            except BaseException:
                self._abort()
                raise
        return run_id

    def prune(self, keep: int) -> int:
        """Delete all but the ``keep`` newest runs; return how many were deleted."""
        if keep < 0:
            raise StoreError(f"--keep must be 0 or more, got {keep}")
        db = self._db
        with self._translate_errors():
            db.begin(write=True)
            try:
                cursor = db.execute(
                    "DELETE FROM runs WHERE id NOT IN "
                    "(SELECT id FROM runs ORDER BY id DESC LIMIT ?)",
                    (keep,),
                )
                deleted = int(cursor.rowcount)
                db.commit()
            except BaseException:
                self._abort()
                raise
            if deleted and self.backend == SQLITE:
                db.execute("VACUUM")  # PostgreSQL's autovacuum reclaims the space itself
        return deleted

    # -- reading ---------------------------------------------------------------------------

    def runs(self) -> list[RunInfo]:
        """All runs, newest first."""
        with self._translate_errors():
            rows = self._db.execute(
                f"SELECT {_RUN_COLUMNS}, (SELECT COUNT(*) FROM checks WHERE run_id = runs.id) "
                "FROM runs ORDER BY id DESC"
            ).fetchall()
        return [_run_info(r) for r in rows]

    def find_run(self, ref: str | int | None = None) -> RunInfo:
        """The run a user means: the newest run (``None`` or ``"latest"``), the newest run with
        that label, or the run with that id (``7`` or ``"#7"``)."""
        return self._pick(self.runs(), ref)

    def _pick(self, runs: list[RunInfo], ref: str | int | None) -> RunInfo:
        """:meth:`find_run` among ``runs`` (newest first), read once by the caller."""
        if not runs:
            raise StoreError(
                f"the history store {self.location} holds no runs yet; record one with "
                "--meanband-record[=LABEL]"
            )
        if ref is None or ref == "" or ref == "latest":
            return runs[0]
        text = str(ref)
        for run in runs:
            if run.label == text:
                return run
        digits = text[1:] if text.startswith("#") else text
        if digits.isdigit():
            for run in runs:
                if run.id == int(digits):
                    return run
        labels = sorted({r.label for r in runs if r.label})
        known = f"labels present: {', '.join(labels)}" if labels else "no run has a label"
        raise StoreError(
            f"no run labelled or numbered {text!r} in {self.location} ({known}; run ids "
            f"{runs[-1].id}..{runs[0].id}); record one with --meanband-record={text}"
        )

    def baseline_runs(self, ref: str | int | None, keep: int) -> list[RunInfo]:
        """The runs a baseline is made of, newest first: the ``keep`` newest runs with label
        ``ref``, or the single run a number or ``"latest"`` names."""
        if keep < 1:
            raise StoreError(f"a baseline needs at least 1 run, got {keep}")
        runs = self.runs()
        first = self._pick(runs, ref)
        if ref is None or str(ref) in ("", "latest") or first.label != str(ref):
            return [first]
        return [run for run in runs if run.label == first.label][:keep]

    def save_noise_floors(self, label: str, floors: Iterable[NoiseFloor]) -> int:
        """Store measured noise floors for ``label`` in one transaction; return how many.

        Earlier floors stay (the newest one of a check is the one read), so a calibration can
        be traced afterwards.
        """
        when = datetime.now(timezone.utc).isoformat(timespec="seconds")
        db = self._db
        count = 0
        with self._translate_errors():
            db.begin(write=True)
            try:
                for floor in floors:
                    db.execute(
                        "INSERT INTO noise_floors (label, nodeid, series, between_sd, df, runs, "
                        "position_shift, position_p, measured) VALUES (?,?,?,?,?,?,?,?,?)",
                        (str(label), floor.nodeid, floor.series, float(floor.between_sd),
                         int(floor.df), int(floor.runs), _finite_or_none(floor.position_shift),
                         _finite_or_none(floor.position_p), floor.measured or when),
                    )
                    count += 1
                db.commit()
            except BaseException:
                self._abort()
                raise
        return count

    def noise_floors(self, label: str) -> dict[tuple[str, str], NoiseFloor]:
        """The newest measured floor of each check under ``label``."""
        with self._translate_errors():
            rows = self._db.execute(
                "SELECT nodeid, series, between_sd, df, runs, position_shift, position_p, "
                "measured FROM noise_floors WHERE label = ? ORDER BY id",
                (str(label),),
            ).fetchall()
        floors: dict[tuple[str, str], NoiseFloor] = {}
        for r in rows:
            floors[(r[0], r[1])] = NoiseFloor(r[0], r[1], float(r[2]), int(r[3]), int(r[4]),
                                              r[5], r[6], r[7])
        return floors

    def all_noise_floors(self) -> list[tuple[str, NoiseFloor]]:
        """Every stored floor with its label, oldest first (for a copy to another store)."""
        with self._translate_errors():
            rows = self._db.execute(
                "SELECT label, nodeid, series, between_sd, df, runs, position_shift, position_p, "
                "measured FROM noise_floors ORDER BY id"
            ).fetchall()
        return [(str(r[0]), NoiseFloor(r[1], r[2], float(r[3]), int(r[4]), int(r[5]), r[6], r[7],
                                       r[8])) for r in rows]

    def checks(self, run_id: int) -> list[StoredCheck]:
        """Every check of run ``run_id``, in the order they were recorded."""
        with self._translate_errors():
            rows = self._db.execute(
                "SELECT run_id, nodeid, series, kind, unit, source, n, mean, low, high, verdict, "
                "row_json, trials, warmup FROM checks WHERE run_id = ? ORDER BY id",
                (run_id,),
            ).fetchall()
        return [_stored_check(r) for r in rows]


class _ErrorTranslator:
    """Turn driver errors into StoreError messages that name the store and the remedy (and
    never show a password)."""

    def __init__(self, location: str, timeout: float, db: Database) -> None:
        self.location, self.timeout, self.db = location, timeout, db

    def __enter__(self) -> None:
        return None

    def __exit__(
        self, exc_type: type[BaseException] | None, exc: BaseException | None, tb: Any
    ) -> None:
        if exc is None or isinstance(exc, StoreError):
            return
        if isinstance(exc, sqlite3.Error):
            self._sqlite(exc)
        if self.db.backend == POSTGRESQL:
            self._postgresql(exc)

    def _sqlite(self, exc: sqlite3.Error) -> None:
        text = str(exc)
        if "locked" in text or "busy" in text:
            raise StoreError(
                f"the history store {self.location} stayed locked by another process for "
                f"{self.timeout:g} s; let that run finish and try again, or raise the wait with "
                "--meanband-store-timeout"
            ) from exc
        if "readonly" in text or "read-only" in text or "unable to open" in text:
            raise StoreError(
                f"cannot write the history store {self.location} ({text}); make the location "
                f"writable or {_ELSEWHERE}"
            ) from exc
        if isinstance(exc, sqlite3.DatabaseError) and not isinstance(exc, sqlite3.OperationalError):
            raise StoreError(
                f"the history store {self.location} is damaged ({text}); it was left untouched. "
                "Move it aside (earlier runs may be rescued with the sqlite3 shell's .recover) "
                "and a new store will be started"
            ) from exc
        raise StoreError(f"the history store {self.location} could not be used: {text}") from exc

    def _postgresql(self, exc: BaseException) -> None:
        import psycopg
        from psycopg import errors

        if not isinstance(exc, psycopg.Error):
            return
        text = self.db.scrub(str(exc).strip())
        if isinstance(exc, errors.LockNotAvailable):
            raise StoreError(
                f"the history store {self.location} stayed locked by another session for "
                f"{self.timeout:g} s; let that job finish and try again, or raise the wait with "
                "--meanband-store-timeout"
            ) from exc
        if isinstance(exc, errors.ReadOnlySqlTransaction | errors.InsufficientPrivilege):
            raise StoreError(
                f"cannot write the history store {self.location} ({text}); grant the role "
                f"INSERT on its tables, or {_ELSEWHERE}"
            ) from exc
        if isinstance(exc, psycopg.OperationalError):
            raise StoreError(
                f"lost the connection to the history store {self.location} ({text}); nothing "
                "of the unfinished transaction was kept. Try again when the server is back"
            ) from exc
        raise StoreError(f"the history store {self.location} could not be used: {text}") from exc


def _read_only_uri(path: Path) -> str:
    """An SQLite URI that opens ``path`` for reading only; immutable where nothing can be written
    beside it (no lock or WAL index can be made there, and no writer can be at work)."""
    absolute = path.resolve()
    query = "mode=ro"
    if not os.access(absolute, os.W_OK) or not os.access(absolute.parent, os.W_OK):
        query += "&immutable=1"
    return f"file:{urllib.parse.quote(str(absolute))}?{query}"


def _check_file(path: Path, create: bool) -> None:
    """Refuse anything at ``path`` that is not an SQLite file, before SQLite touches it."""
    if path.is_dir():
        raise StoreError(
            f"the history store path {path} is a directory; give a file path, e.g. "
            f"{path / 'history.sqlite'}"
        )
    try:
        mode = path.stat().st_mode
    except (FileNotFoundError, NotADirectoryError):
        if not create:
            raise StoreError(
                f"no history store at {path}; record a run first with --meanband-record, or "
                "give the right file (--meanband-store PATH, or --store PATH for the meanband "
                "command)"
            ) from None
        return
    except OSError as exc:
        raise StoreError(f"cannot read the history store {path}: {os.strerror(exc.errno or 0)}"
                         ) from exc
    if not stat.S_ISREG(mode):
        # Opening a FIFO or a device would wait for a writer that never comes.
        raise StoreError(
            f"the history store path {path} is not a regular file (it is a FIFO, socket or "
            f"device); it was left untouched. {_ELSEWHERE[0].upper()}{_ELSEWHERE[1:]}"
        )
    try:
        with path.open("rb") as handle:
            head = handle.read(len(_SQLITE_MAGIC))
    except OSError as exc:
        raise StoreError(f"cannot read the history store {path}: {exc}") from exc
    if head and head != _SQLITE_MAGIC:
        raise StoreError(
            f"{path} is not an SQLite file, so it is not a meanband history store; it was left "
            f"untouched. Move it aside, or {_ELSEWHERE}"
        )


_INSERT_RUN = (
    "INSERT INTO runs (label, started, git_commit, git_branch, git_dirty, host, machine, cpus, "
    "system, python, meanband, fingerprint_json) VALUES (?,?,?,?,?,?,?,?,?,?,?,?)"
)
_INSERT_CHECK = (
    "INSERT INTO checks (run_id, nodeid, series, kind, unit, source, n, mean, low, high, "
    "verdict, row_json, trials, warmup) VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?,?)"
)
_RUN_COLUMNS = (
    "id, label, started, git_commit, git_branch, git_dirty, host, machine, cpus, system, python, "
    "meanband, fingerprint_json"
)


def _run_info(r: tuple[Any, ...]) -> RunInfo:
    dirty = None if r[5] is None else bool(r[5])
    try:
        fingerprint = None if r[12] is None else json.loads(r[12])
    except (ValueError, RecursionError):
        fingerprint = None  # a damaged fingerprint only loses the like-for-like check
    if not isinstance(fingerprint, dict):
        fingerprint = None
    return RunInfo(r[0], r[1], r[2], r[3], r[4], dirty, r[6], r[7], r[8], r[9], r[10], r[11],
                   r[13], fingerprint)


def _check_columns(row: Mapping[str, Any]) -> tuple[Any, ...]:
    """The stored columns of one row; raw trials go to float64 bytes, the rest to JSON."""
    values = np.asarray(row.get("values", []), dtype=_TRIAL_DTYPE)
    warmup = np.asarray(row.get("warmup", []) or [], dtype=_TRIAL_DTYPE)
    rest = {k: v for k, v in row.items() if k not in ("values", "warmup")}
    decision = row.get("decision") or {}
    interval = decision.get("interval") or {}
    mean = interval.get("mean")
    if mean is None and values.size:
        mean = float(np.mean(values))
    return (
        str(row.get("nodeid", "")),
        str(row.get("series", "")),
        str(row.get("kind", "check")),
        row.get("unit"),
        row.get("source"),
        int(values.size),
        _finite_or_none(mean),
        _finite_or_none(interval.get("low")),
        _finite_or_none(interval.get("high")),
        decision.get("verdict"),
        json.dumps(rest, sort_keys=True),
        values.tobytes(),
        warmup.tobytes(),
    )


def _finite_or_none(value: Any) -> float | None:
    if value is None:
        return None
    number = float(value)
    return number if math.isfinite(number) else None


def _stored_check(r: tuple[Any, ...]) -> StoredCheck:
    where = f"run {r[0]}, check {r[1]}" + (f" [{r[2]}]" if r[2] else "")
    try:
        row = json.loads(r[11])
        if not isinstance(row, dict):
            raise ValueError(f"its row is a JSON {type(row).__name__}, not an object")
        values = _trials(r[12], "trials")
        warmup = _trials(r[13], "warm-up trials")
    except (ValueError, TypeError, RecursionError) as exc:
        raise StoreError(
            f"the history store holds damaged data for {where}: {exc}; the store was left "
            "untouched. Record a new baseline, or remove that run with 'meanband history prune'"
        ) from exc
    r = (*r[:7], math.nan if r[7] is None else r[7], *r[8:])
    return StoredCheck(
        r[0], r[1], r[2], r[3], r[4], r[5], r[6], r[7], r[8], r[9], r[10], row, values, warmup
    )


def _trials(blob: Any, what: str) -> np.ndarray:
    """Stored float64 bytes back to an array; anything else is damage."""
    if not isinstance(blob, bytes):
        raise TypeError(f"its {what} are a {type(blob).__name__}, not float64 bytes")
    if len(blob) % _TRIAL_DTYPE.itemsize:
        raise ValueError(f"its {what} are {len(blob)} bytes, not a whole number of float64 values")
    return np.frombuffer(blob, dtype=_TRIAL_DTYPE).astype(np.float64)
