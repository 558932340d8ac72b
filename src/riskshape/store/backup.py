"""A consistent copy of a live archive, checked before it is kept.

SQLite: the online backup API (``sqlite3.Connection.backup``, https://sqlite.org/backup.html) copies
the database in one step under a read transaction, so the copy is the archive as of one commit,
write-ahead log included, while other processes go on writing (they wait for the step, no longer).
The copy is written beside the target under a temporary name, its hash chain verified
(:func:`~riskshape.store.verify_chain`), and only then renamed into place: a refused or failed
backup leaves nothing behind. Restoring is the same command in the other direction (a backup of the
backup to the archive's path, with the service stopped and the old file moved aside).

PostgreSQL: ``pg_dump --format=custom --schema=SCHEMA`` of the archive's schema only (PostgreSQL's
documented route, https://www.postgresql.org/docs/15/app-pgdump.html: the dump runs in one
transaction, so it is consistent while others write). The dump is verified by loading it:
``pg_restore`` into a scratch database created for the purpose (the user needs the CREATEDB
privilege), the chain verified there (and checked to hold every record committed before the dump
began), the scratch database dropped. Only a verified dump is renamed into place. ``pg_dump`` must
be of the server's major version or newer (it refuses an older one itself; we say so first).
Restoring is one step into an empty database: ``pg_restore --no-owner --dbname=URL FILE``.
"""

from __future__ import annotations

import os
import re
import shutil
import sqlite3
import subprocess
import tempfile
import uuid
from dataclasses import dataclass
from pathlib import Path

import sqlalchemy as sa

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
        The chain head of the copy, verified in the copy (PostgreSQL: in the dump loaded into a scratch
        database).
    verified : bool
        Whether the copy's chain was verified here (always, since a copy that does not verify is not kept).
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
        If the target exists or cannot be written, or (PostgreSQL) ``pg_dump`` or ``pg_restore`` is missing,
        too old for the server or fails, or no scratch database can be created to verify the dump.
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
    dump, restore = (_client_program(name) for name in ("pg_dump", "pg_restore"))
    url = store.engine.url
    with store.engine.connect() as connection:
        schema = str(connection.execute(sa.text("SELECT current_schema()")).scalar_one())
        server_major = int(connection.execute(sa.text("SHOW server_version_num")).scalar_one()) // 10_000
    client_major = _major_version(dump)
    if client_major < server_major:
        raise StoreError(
            f"pg_dump {client_major} cannot dump a PostgreSQL {server_major} server; install the PostgreSQL "
            f"client tools of version {server_major} or later"
        )
    env = {**os.environ, **({"PGPASSWORD": url.password} if url.password else {})}
    before = chain_head(store)  # every record committed before the dump began is in it
    staging = path.with_name(f".{path.name}.partial")
    try:
        _client(
            [
                dump,
                "--format=custom",
                "--no-owner",
                f"--schema={schema}",
                f"--file={staging}",
                f"--dbname={_libpq(url)}",
            ],
            env,
        )
        head = _verify_dump(store, staging, schema, restore, env, str(before))
        os.replace(staging, path)
    finally:
        staging.unlink(missing_ok=True)
    return BackupReport(path=path, head=head, verified=True)


def _verify_dump(store: Store, dump: Path, schema: str, restore: str, env: dict[str, str], before: str) -> Head:
    """Load the dump into a scratch database, verify its chain against ``before``, drop the database."""
    scratch = f"riskshape_verify_{uuid.uuid4().hex[:12]}"
    admin = store.engine.execution_options(isolation_level="AUTOCOMMIT")
    try:
        with admin.connect() as connection:
            connection.execute(sa.text(f'CREATE DATABASE "{scratch}"'))
    except sa.exc.SQLAlchemyError as err:
        said = " ".join(str(getattr(err, "orig", err)).split())
        raise StoreError(
            f"cannot verify the dump: creating a scratch database was refused ({said}); "
            "grant the archive's user CREATEDB, or back up as a user who has it (nothing was kept)"
        ) from None
    try:
        target = store.engine.url.set(database=scratch)
        _client([restore, "--no-owner", "--exit-on-error", f"--dbname={_libpq(target)}", str(dump)], env)
        with open_store(target.render_as_string(hide_password=False), create=False) as copied:
            report = verify_chain(copied, expect_head=before)
        if not report.ok:
            raise AuditError(f"the dump does not verify ({report.first_bad}); the backup was not kept")
        return report.head
    finally:
        with admin.connect() as connection:
            connection.execute(sa.text(f'DROP DATABASE IF EXISTS "{scratch}" WITH (FORCE)'))


def _client_program(name: str) -> str:
    program = shutil.which(name)
    if program is None:
        raise StoreError(
            f"{name} is not installed; install the PostgreSQL client tools to back up a PostgreSQL archive"
        )
    return program


def _major_version(program: str) -> int:
    """The major version of a PostgreSQL client program (``pg_dump (PostgreSQL) 15.20 (Debian ...)`` -> 15)."""
    done = subprocess.run([program, "--version"], capture_output=True, text=True, check=False)
    found = re.search(r"\)\s*(\d+)", done.stdout)
    if done.returncode != 0 or found is None:
        raise StoreError(f"{program} --version did not say its version ({done.stdout.strip()[:80]!r})")
    return int(found.group(1))


def _libpq(url: sa.engine.URL) -> str:
    """A libpq connection URI of a SQLAlchemy URL, without its password (given in PGPASSWORD instead)."""
    return url.set(drivername="postgresql", password=None).render_as_string(hide_password=False)


def _client(command: list[str], env: dict[str, str]) -> None:
    done = subprocess.run(command, capture_output=True, text=True, check=False, env=env)
    if done.returncode != 0:
        name = Path(command[0]).name
        raise StoreError(f"{name} failed: {' '.join(done.stderr.split())[:300]}")
