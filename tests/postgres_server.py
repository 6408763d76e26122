"""A throwaway PostgreSQL server for the store tests: started on a free port of 127.0.0.1, data in
a temporary folder owned by the server's user, stopped and removed at the end of the session.

initdb and pg_ctl refuse to run as root, so as root they run as the ``postgres`` user through
runuser; as anyone else they run as that user. Where the server binaries are missing and we are
root, the Debian ``postgresql`` package is installed. When no server can be had, tests that need
one are skipped with a reason that starts with ``UNAVAILABLE_PREFIX``, which ``.ci/run`` counts
and prints, so a missing server is never silent.
"""

from __future__ import annotations

import fcntl
import os
import shutil
import socket
import subprocess
import tempfile
import uuid
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

#: Every skip for want of a server starts with this, so CI can count them.
UNAVAILABLE_PREFIX = "POSTGRESQL UNAVAILABLE"
#: Where Debian's PostgreSQL 15 keeps its server binaries.
PG_BIN = Path(os.environ.get("MEANBAND_TEST_PG_BIN", "/usr/lib/postgresql/15/bin"))
SERVER_USER = "postgres"
_INSTALL_LOCK = Path(tempfile.gettempdir()) / "meanband-postgresql-install.lock"


class ServerUnavailable(RuntimeError):
    """No PostgreSQL server can be started here; the message says why."""


@dataclass
class PostgresServer:
    """A running test server; ``url(db)`` is a connection URL for one of its databases."""

    root: Path
    port: int
    as_root: bool

    def url(self, database: str = "postgres") -> str:
        return f"postgresql://{SERVER_USER}@127.0.0.1:{self.port}/{database}"

    def new_database(self) -> str:
        """A fresh, empty database; returns its URL."""
        import psycopg

        name = f"t_{uuid.uuid4().hex[:16]}"
        with psycopg.connect(self.url(), autocommit=True) as conn:
            conn.execute(f'CREATE DATABASE "{name}"')
        return self.url(name)

    def stop(self) -> None:
        _run(self._as_server([str(PG_BIN / "pg_ctl"), "-D", str(self.root / "data"), "-m",
                              "immediate", "-w", "stop"]), check=False)
        shutil.rmtree(self.root, ignore_errors=True)

    def _as_server(self, command: list[str]) -> list[str]:
        return _as_server_user(command, self.as_root)


def _as_server_user(command: list[str], as_root: bool) -> list[str]:
    return ["runuser", "-u", SERVER_USER, "--", *command] if as_root else command


def _run(command: list[str], *, check: bool = True, timeout: float = 120) -> str:
    done = subprocess.run(command, capture_output=True, text=True, timeout=timeout)
    if check and done.returncode != 0:
        raise ServerUnavailable(
            f"{' '.join(command)} exited {done.returncode}: {(done.stderr or done.stdout).strip()}"
        )
    return done.stdout


def _free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


def _ensure_binaries(as_root: bool) -> None:
    """Install Debian's postgresql package where the server binaries are missing (root only)."""
    if (PG_BIN / "initdb").exists():
        return
    if not as_root:
        raise ServerUnavailable(f"no {PG_BIN / 'initdb'}, and only root may install postgresql")
    if shutil.which("apt-get") is None:
        raise ServerUnavailable(f"no {PG_BIN / 'initdb'} and no apt-get to install postgresql")
    # Two xdist workers may both get here: one installs, the other waits for it.
    with _INSTALL_LOCK.open("w") as lock:
        fcntl.flock(lock, fcntl.LOCK_EX)
        if (PG_BIN / "initdb").exists():
            return
        env = {**os.environ, "DEBIAN_FRONTEND": "noninteractive"}
        install = ["apt-get", "install", "-y", "-q", "postgresql"]
        done = subprocess.run(install, capture_output=True, text=True, env=env, timeout=900)
        if done.returncode != 0:  # the package lists may be missing or stale
            subprocess.run(["apt-get", "update", "-q"], capture_output=True, env=env, timeout=900)
            done = subprocess.run(install, capture_output=True, text=True, env=env, timeout=900)
        if done.returncode != 0:
            raise ServerUnavailable(f"apt-get install postgresql failed: {done.stderr.strip()[-400:]}")
        if not (PG_BIN / "initdb").exists():
            raise ServerUnavailable(f"postgresql is installed but there is no {PG_BIN / 'initdb'}")


def start_server(*, durable: bool = False) -> PostgresServer:
    """Start a server, or raise ServerUnavailable saying why it cannot be had.

    Tests need no durability across a crash of the machine, so by default the server skips
    fsync; ``durable=True`` keeps PostgreSQL's defaults (for benchmarks)."""
    try:
        import psycopg  # noqa: F401
    except ImportError as exc:
        raise ServerUnavailable(f"psycopg is not installed ({exc}); pip install 'psycopg[binary]'") from exc
    as_root = hasattr(os, "geteuid") and os.geteuid() == 0
    _ensure_binaries(as_root)
    # Not under pytest's basetemp: that is private to its owner, and the server runs as postgres.
    root = Path(tempfile.mkdtemp(prefix="meanband-pg-"))
    if as_root:
        try:
            shutil.chown(root, SERVER_USER, SERVER_USER)
        except (LookupError, OSError) as exc:
            shutil.rmtree(root, ignore_errors=True)
            raise ServerUnavailable(f"cannot hand {root} to the {SERVER_USER} user: {exc}") from exc
    server = PostgresServer(root, _free_port(), as_root)
    try:
        _run(server._as_server([str(PG_BIN / "initdb"), "-D", str(root / "data"), "-U", SERVER_USER,
                                "-A", "trust", "-E", "UTF8", "--no-sync", "--no-instructions"]))
        options = f"-h 127.0.0.1 -p {server.port} -k {root} -c max_connections=60"
        if not durable:
            options += " -c fsync=off"
        _run(server._as_server([str(PG_BIN / "pg_ctl"), "-D", str(root / "data"), "-l",
                                str(root / "server.log"), "-o", options, "-w", "-t", "60", "start"]))
    except (ServerUnavailable, OSError, subprocess.TimeoutExpired) as exc:
        log = root / "server.log"
        tail = log.read_text(errors="replace")[-400:] if log.exists() else ""
        server.stop()
        raise ServerUnavailable(f"{exc} {tail}".strip()) from exc
    return server


@contextmanager
def running_server(*, durable: bool = False) -> Iterator[PostgresServer]:
    server = start_server(durable=durable)
    try:
        yield server
    finally:
        server.stop()
