"""``riskshape backup``: a copy taken while another thread writes verifies and holds every record
committed before the backup began; a refused backup leaves nothing; restoring is the same command back.

What "consistent" means here is SQLite's own promise for its online backup API
(https://sqlite.org/backup.html): the copy is a snapshot of the database at one moment; and
PostgreSQL's for pg_dump (https://www.postgresql.org/docs/15/app-pgdump.html): "consistent backups even
if the database is being used concurrently".
"""

from __future__ import annotations

import shutil
import sqlite3
import subprocess
import threading
import uuid
from collections.abc import Iterator
from pathlib import Path

import psycopg
import pytest

from riskshape.cli import main
from riskshape.errors import StoreError
from riskshape.store import backup_store, chain_head, open_store, verify_chain
from tests.kit.postgres import PG_CONNINFO, fresh_schema_url


def _writer(url: str, stop: threading.Event, written: list[int]) -> None:
    with open_store(url) as store:
        while not stop.is_set():
            record = store.append_event("load_test", {"n": len(written)}, actor="writer")
            written.append(record.seq)


def test_backup_under_write_load_holds_every_record_committed_before_it(tmp_path: Path) -> None:
    url = f"sqlite:///{tmp_path / 'live.sqlite'}"
    open_store(url).close()
    stop, written = threading.Event(), []
    thread = threading.Thread(target=_writer, args=(url, stop, written), daemon=True)
    thread.start()
    try:
        while len(written) < 20:
            stop.wait(0.01)
        with open_store(url, create=False) as store:
            before = chain_head(store)  # every record committed before the backup began
            report = backup_store(store, tmp_path / "copy.sqlite")
        after_count = len(written)
    finally:
        stop.set()
        thread.join(timeout=30)
    assert before.count >= 20
    assert report.verified
    assert before.count <= report.head.count <= after_count + 1
    with sqlite3.connect(report.path) as db:  # one self-contained file, as written (before anything opens it)
        assert db.execute("PRAGMA journal_mode").fetchone()[0] == "delete"
    with open_store(f"sqlite:///{report.path}", create=False) as copy:
        checked = verify_chain(copy, expect_head=str(before))  # the earlier head is a prefix of the copy
        assert checked.ok, checked.first_bad
        assert checked.head == report.head


def test_backup_refuses_an_existing_target_and_leaves_nothing(tmp_path: Path) -> None:
    url = f"sqlite:///{tmp_path / 'live.sqlite'}"
    target = tmp_path / "copy.sqlite"
    target.write_bytes(b"keep me")
    with open_store(url) as store, pytest.raises(StoreError, match="already exists"):
        backup_store(store, target)
    assert target.read_bytes() == b"keep me"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["copy.sqlite", "live.sqlite"]


def test_backup_and_restore_from_the_command_line(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    url = f"sqlite:///{tmp_path / 'live.sqlite'}"
    with open_store(url) as store:
        for n in range(5):
            store.append_event("load_test", {"n": n}, actor="writer")
        head = chain_head(store)
    main(["backup", "--store", url, "--to", str(tmp_path / "copy.sqlite")])
    out = capsys.readouterr().out
    assert f"head:     {head}" in out and "verified" in out
    # restoring: the same command back, to the archive's path (the damaged file moved aside)
    (tmp_path / "live.sqlite").rename(tmp_path / "damaged.sqlite")
    main(["backup", "--store", f"sqlite:///{tmp_path / 'copy.sqlite'}", "--to", str(tmp_path / "live.sqlite")])
    with open_store(url, create=False) as restored:
        report = verify_chain(restored, expect_head=str(head))
    assert report.ok and report.head == head


# -- PostgreSQL: pg_dump of the archive's schema, verified by loading it into a scratch database -------------


@pytest.fixture
def pg_url() -> Iterator[str]:
    with fresh_schema_url("rs_backup") as url:
        yield url


def _server_and_client_majors(url: str) -> tuple[int, int]:
    with open_store(url, create=False) as store, store.engine.connect() as connection:
        server = int(connection.exec_driver_sql("SHOW server_version_num").scalar_one()) // 10_000
    out = subprocess.run(["pg_dump", "--version"], capture_output=True, text=True, check=True).stdout
    return server, int(out.split(")")[1].split(".")[0])


@pytest.mark.postgres
@pytest.mark.skipif(shutil.which("pg_dump") is None, reason="pg_dump is not installed")
@pytest.mark.timeout(300)
def test_postgresql_backup_under_write_load_verifies_and_restores_in_one_step(pg_url: str, tmp_path: Path) -> None:
    open_store(pg_url).close()
    server, client = _server_and_client_majors(pg_url)
    assert client == server == 15  # Debian 12's client tools and server (the machine's setup, not a requirement)
    stop, written = threading.Event(), []
    thread = threading.Thread(target=_writer, args=(pg_url, stop, written), daemon=True)
    thread.start()
    try:
        while len(written) < 20:
            stop.wait(0.01)
        with open_store(pg_url, create=False) as store:
            before = chain_head(store)  # every record committed before the backup began
            report = backup_store(store, tmp_path / "archive.dump")
        after_count = len(written)
    finally:
        stop.set()
        thread.join(timeout=30)
    assert report.verified and before.count >= 20
    assert before.count <= report.head.count <= after_count + 1
    assert sorted(p.name for p in tmp_path.iterdir()) == ["archive.dump"]  # nothing half-written beside it
    # restoring: one documented step into an empty database (here a fresh one, dropped afterwards)
    database = f"rs_restore_{uuid.uuid4().hex[:10]}"
    with psycopg.connect(PG_CONNINFO, autocommit=True) as conn:
        conn.execute(f'CREATE DATABASE "{database}"')
    try:
        subprocess.run(
            ["pg_restore", "--no-owner", f"--dbname=postgresql://postgres@127.0.0.1:5432/{database}", str(report.path)],
            check=True,
            capture_output=True,
        )
        schema = pg_url.rsplit("%3D", 1)[1]
        restored = f"postgresql+psycopg://postgres@127.0.0.1:5432/{database}?options=-csearch_path%3D{schema}"
        with open_store(restored, create=False) as store:
            checked = verify_chain(store, expect_head=str(before))
            assert checked.ok and checked.head == report.head, checked.first_bad
            assert len(store.list_events(kind="load_test")) == report.head.count
    finally:
        with psycopg.connect(PG_CONNINFO, autocommit=True) as conn:
            conn.execute(f'DROP DATABASE IF EXISTS "{database}" WITH (FORCE)')
    with psycopg.connect(PG_CONNINFO) as conn:  # the scratch database of the verification is gone
        left = conn.execute("SELECT count(*) FROM pg_database WHERE datname LIKE 'riskshape_verify_%'").fetchone()
    assert left is not None and left[0] == 0


@pytest.mark.postgres
@pytest.mark.skipif(shutil.which("pg_dump") is None, reason="pg_dump is not installed")
def test_postgresql_backup_from_the_command_line_prints_the_verified_head(
    pg_url: str, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    with open_store(pg_url) as store:
        for n in range(3):
            store.append_event("load_test", {"n": n}, actor="writer")
        head = chain_head(store)
    main(["backup", "--store", pg_url, "--to", str(tmp_path / "archive.dump")])
    out = capsys.readouterr().out
    assert f"head:     {head}" in out and "loaded and verified" in out
    with pytest.raises(SystemExit):  # a second backup to the same file is refused; the first is kept
        main(["backup", "--store", pg_url, "--to", str(tmp_path / "archive.dump")])
    assert "already exists" in capsys.readouterr().err
