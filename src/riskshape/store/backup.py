"""A consistent copy of a live archive, checked before it is kept.

SQLite: the online backup API (``sqlite3.Connection.backup``, https://sqlite.org/backup.html) copies
the database in one step under a read transaction, so the copy is the archive as of one commit,
write-ahead log included, while other processes go on writing (they wait for the step, no longer).
The copy is written beside the target under a temporary name, its hash chain verified
(:func:`~riskshape.store.verify_chain`), and only then renamed into place: a refused or failed
backup leaves nothing behind. Restoring is the same command in the other direction (a backup of the
backup to the archive's path, with the service stopped and the old file moved aside).

PostgreSQL: ``pg_dump --format=custom`` (PostgreSQL's documented route; one transaction, so the dump
is consistent), when ``pg_dump`` is installed. The dump is not a database, so it is not verified
here: the head read just before the dump began is reported (the dump holds at least the records up
to it), to check after restoring with ``pg_restore`` and ``riskshape audit verify --expect-head``.
"""

from __future__ import annotations

import os
import shutil
import sqlite3
import subprocess
import tempfile
from dataclasses import dataclass
from pathlib import Path

from riskshape.errors import AuditError, StoreError
from riskshape.store.records import Head
from riskshape.store.store import Store, chain_head, open_store, verify_chain

__all__ = ["BackupReport", "backup_store"]


@dataclass(frozen=True)
class BackupReport:
    """What a backup wrote and what was checked.

    Attributes
    ----------
    path : pathlib.Path
        The backup file.
    head : Head
        The chain head of the copy (SQLite: verified in the copy; PostgreSQL: read before the dump began).
    verified : bool
        Whether the copy's chain was verified here (SQLite: always; PostgreSQL dump: never).
    """

    path: Path
    head: Head
    verified: bool


def backup_store(store: Store, target: str | os.PathLike[str]) -> BackupReport:
    """Copy a live archive to ``target`` consistently, verify the copy, and keep it only if it verifies.

    Parameters
    ----------
    store : Store
        The open archive (others may be writing to it).
    target : path-like
        The backup file; it must not exist yet (nothing is overwritten).

    Returns
    -------
    BackupReport

    Raises
    ------
    StoreError
        If the target exists or cannot be written, or (PostgreSQL) ``pg_dump`` is missing or fails.
    AuditError
        If the copy does not verify (nothing is kept).
    """
    path = Path(target).expanduser()
    if path.exists():
        raise StoreError(f"--to {path}: already exists; give a new file name (a backup never overwrites)")
    if not path.parent.is_dir():
        raise StoreError(f"--to {path}: the folder {path.parent} does not exist; create it first")
    if store.engine.dialect.name == "sqlite":
        return _backup_sqlite(store, path)
    return _backup_postgresql(store, path)


def _backup_sqlite(store: Store, path: Path) -> BackupReport:
    handle, name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".partial", dir=path.parent)
    os.close(handle)
    staging = Path(name)
    try:
        copy = sqlite3.connect(staging)
        try:
            with store.engine.connect() as connection:
                source = connection.connection.driver_connection
                assert isinstance(source, sqlite3.Connection)
                source.backup(copy)  # pages=-1: the whole database in one step, one consistent snapshot
        finally:
            copy.close()
        with open_store(f"sqlite:///{staging}", create=False) as copied:
            report = verify_chain(copied)
        if not report.ok:
            raise AuditError(f"the copy does not verify ({report.first_bad}); the backup was not kept")
        copy = sqlite3.connect(staging)
        try:
            copy.execute("PRAGMA journal_mode=DELETE")  # one self-contained file, no write-ahead log beside it
        finally:
            copy.close()
        os.replace(staging, path)
    except sqlite3.Error as err:
        raise StoreError(f"--to {path}: cannot write the backup ({err})") from None
    finally:
        for leftover in (staging, Path(f"{staging}-wal"), Path(f"{staging}-shm"), Path(f"{staging}-journal")):
            leftover.unlink(missing_ok=True)
    return BackupReport(path=path, head=report.head, verified=True)


def _backup_postgresql(store: Store, path: Path) -> BackupReport:
    program = shutil.which("pg_dump")
    if program is None:
        raise StoreError(
            "pg_dump is not installed; install the PostgreSQL client tools to back up a PostgreSQL archive"
        )
    head = chain_head(store)
    url = store.engine.url.set(drivername="postgresql").render_as_string(hide_password=False)
    staging = path.with_name(f".{path.name}.partial")
    done = subprocess.run(
        [program, "--format=custom", "--no-owner", f"--file={staging}", f"--dbname={url}"],
        capture_output=True,
        text=True,
        check=False,
    )
    if done.returncode != 0:
        staging.unlink(missing_ok=True)
        raise StoreError(f"pg_dump failed: {' '.join(done.stderr.split())[:300]}")
    os.replace(staging, path)
    return BackupReport(path=path, head=head, verified=False)
