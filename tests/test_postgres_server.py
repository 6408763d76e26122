"""The throwaway PostgreSQL server that the store tests run against."""

from __future__ import annotations

import os

from postgres_server import PG_BIN, SERVER_USER


def test_server_answers_on_loopback_and_runs_as_its_own_user(postgres_server, postgres_url: str) -> None:
    import psycopg

    assert "@127.0.0.1:" in postgres_url
    with psycopg.connect(postgres_url) as conn:
        version = int(conn.execute("SHOW server_version_num").fetchone()[0])
        assert conn.execute("SELECT current_database()").fetchone()[0] == postgres_url.rsplit("/", 1)[1]
    assert version // 10000 == int(PG_BIN.parent.name)  # the server the binaries belong to
    if os.geteuid() == 0:  # initdb refuses root: the data folder belongs to the server's user
        import pwd

        owner = pwd.getpwuid((postgres_server.root / "data").stat().st_uid).pw_name
        assert owner == SERVER_USER


def test_each_database_is_fresh(postgres_server) -> None:
    import psycopg

    first, second = postgres_server.new_database(), postgres_server.new_database()
    assert first != second
    with psycopg.connect(first) as conn:
        tables = conn.execute(
            "SELECT count(*) FROM information_schema.tables WHERE table_schema = 'public'"
        ).fetchone()[0]
    assert tables == 0


def test_unavailable_reason_is_counted_by_ci() -> None:
    from pathlib import Path

    from postgres_server import UNAVAILABLE_PREFIX

    ci = (Path(__file__).resolve().parents[1] / ".ci" / "run").read_text()
    assert UNAVAILABLE_PREFIX in ci and "-rs" in ci
