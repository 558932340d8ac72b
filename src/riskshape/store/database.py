"""Opening the archive database: URL checks, connection settings, the write lock and migrations.

SQLite: WAL journal, ``synchronous=FULL``, foreign keys on, a 30 s busy timeout. Transactions are
started by SQLAlchemy rather than by the sqlite3 driver (the recipe in SQLAlchemy's SQLite dialect
documentation, "Enabling Non-Legacy SQLite Transactional Modes": the driver's own BEGIN is turned
off with ``isolation_level = None`` and the ``begin`` event emits it), so a write transaction can
start with ``BEGIN IMMEDIATE`` and hold the write lock *before* it reads the ledger head.

PostgreSQL: a write transaction first takes a transaction-scoped advisory lock
(``pg_advisory_xact_lock``) keyed by the current schema; the ledger's UNIQUE ``seq`` and
``prev_hash`` are the second line of defence against a fork.

Write transactions nest: inside an open write transaction of an engine (in the same thread or
task), :func:`write_transaction` and :func:`read_transaction` on that engine join it instead of
opening another, so a whole run (its prices, summaries, diagrams, alerts and chained records)
commits at once or not at all (``Store.transaction``). Work registered with
:func:`before_commit` runs once, at the end of the outermost transaction, before it commits (the
commitments of :mod:`riskshape.store.seals`).
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from contextlib import contextmanager
from contextvars import ContextVar
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import sqlalchemy as sa
from sqlalchemy.engine import Connection, Engine, make_url
from sqlalchemy.exc import ArgumentError, NoSuchModuleError

from riskshape.errors import StoreError

if TYPE_CHECKING:  # Alembic loads only when a schema is created or migrated (it costs a command's start-up)
    from alembic.config import Config as AlembicConfig
    from alembic.script import ScriptDirectory

__all__ = [
    "create_archive_engine",
    "write_transaction",
    "known_id",
    "savepoint",
    "read_transaction",
    "upgrade",
    "schema_revision",
    "head_revision",
    "archive_exists",
    "before_commit",
    "fault_point",
    "set_fault_hook",
]

WRITE_OPTION = "riskshape_write"
BUSY_TIMEOUT_MS = 30_000
LOCK_KEY = 0x7273  # first key of the two-key advisory lock; the second is hashtext(current_schema())
MIGRATIONS = Path(__file__).resolve().parent / "migrations"
URL_HELP = "use sqlite:///path/to/archive.sqlite or postgresql+psycopg://user@host:5432/database"


def create_archive_engine(url: str) -> Engine:
    """A SQLAlchemy engine for the archive at ``url``, with the archive's connection settings.

    Parameters
    ----------
    url : str
        ``sqlite:///path`` (the folder must exist) or ``postgresql+psycopg://...``.

    Returns
    -------
    sqlalchemy.engine.Engine

    Raises
    ------
    StoreError
        If the URL is malformed or names another database or driver.
    """
    try:
        parsed = make_url(url)
    except ArgumentError:
        raise StoreError(f"store URL {url!r} cannot be read; {URL_HELP}") from None
    backend = parsed.get_backend_name()
    if backend not in ("sqlite", "postgresql"):
        raise StoreError(f"store URL {url!r}: {backend!r} is not a supported database; {URL_HELP}")
    driver = parsed.get_driver_name()
    if backend == "sqlite":
        if driver != "pysqlite":
            raise StoreError(f"store URL {url!r}: SQLite driver {driver!r} is not supported; {URL_HELP}")
        database = parsed.database or ""
        if database in ("", ":memory:") or database.startswith("file:"):
            raise StoreError(f"store URL {url!r}: the archive must be a file; {URL_HELP}")
        folder = Path(database).expanduser().resolve().parent
        if not folder.is_dir():
            raise StoreError(f"store URL {url!r}: folder {folder} does not exist; create it first")
        engine = sa.create_engine(parsed, connect_args={"timeout": BUSY_TIMEOUT_MS / 1000})
        _configure_sqlite(engine)
        return engine
    if backend == "postgresql":
        if driver != "psycopg":
            raise StoreError(f"store URL {url!r}: use the psycopg (3) driver, postgresql+psycopg://...")
        try:
            return sa.create_engine(parsed, pool_pre_ping=True)
        except NoSuchModuleError as err:  # pragma: no cover - psycopg is a dependency
            raise StoreError(f"store URL {url!r}: {err}") from None
    raise StoreError(f"store URL {url!r}: database {backend!r} is not supported; {URL_HELP}")


def _configure_sqlite(engine: Engine) -> None:
    @sa.event.listens_for(engine, "connect")
    def _on_connect(dbapi_connection: Any, _record: Any) -> None:
        dbapi_connection.isolation_level = None  # SQLAlchemy emits BEGIN itself (see _on_begin)
        cursor = dbapi_connection.cursor()
        try:
            cursor.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
            cursor.execute("PRAGMA journal_mode = WAL")
            cursor.execute("PRAGMA synchronous = FULL")
            cursor.execute("PRAGMA foreign_keys = ON")
        finally:
            cursor.close()

    @sa.event.listens_for(engine, "begin")
    def _on_begin(connection: Connection) -> None:
        write = connection.get_execution_options().get(WRITE_OPTION, False)
        connection.exec_driver_sql("BEGIN IMMEDIATE" if write else "BEGIN")


@dataclass
class _Unit:
    """The open write transaction of an engine in this thread or task, and its work before commit."""

    engine: Engine
    connection: Connection
    pending: dict[object, Callable[[Connection], None]] = field(default_factory=dict)
    ids: dict[str, int] = field(default_factory=dict)  # portfolio ids looked up in this transaction


def known_id(connection: Connection, name: str, found: int | None = None) -> int | None:
    """A portfolio's id as looked up earlier in the open write transaction on ``connection`` (or None).

    With ``found``, remember it for the rest of the transaction. Outside a write transaction nothing
    is kept: the lookups a day makes inside its one transaction (a dozen) become one statement.
    """
    unit = _UNIT.get()
    if unit is None or unit.connection is not connection:
        return None
    if found is not None:
        unit.ids[name] = found
    return unit.ids.get(name)


_UNIT: ContextVar[_Unit | None] = ContextVar("riskshape_write_unit", default=None)
_FAULT_HOOK: list[Callable[[str], None]] = []


def set_fault_hook(hook: Callable[[str], None] | None) -> None:
    """Install (or with None remove) a function called with the name of each :func:`fault_point`.

    For fault-injection tests only: a test's child process installs a hook that pauses or kills
    the process at a named point inside the archive's writes. Nothing installs one otherwise.
    """
    _FAULT_HOOK.clear()
    if hook is not None:
        _FAULT_HOOK.append(hook)


def fault_point(name: str) -> None:
    """A named point inside the archive's writes where a fault-injection test may stop the process."""
    for hook in _FAULT_HOOK:
        hook(name)


def before_commit(connection: Connection, key: object, work: Callable[[Connection], None]) -> None:
    """Run ``work(connection)`` once at the end of the outermost write transaction, before it commits.

    Work registered twice under the same ``key`` runs once. Raises StoreError outside a write
    transaction.
    """
    unit = _UNIT.get()
    if unit is None or unit.connection is not connection:
        raise StoreError("archive writes must run inside write_transaction (a riskshape defect: please report it)")
    unit.pending.setdefault(key, work)


@contextmanager
def write_transaction(engine: Engine) -> Iterator[Connection]:
    """A transaction that holds the archive's write lock from its first statement.

    SQLite: ``BEGIN IMMEDIATE``. PostgreSQL: ``pg_advisory_xact_lock``, released at commit or
    rollback. Commits on normal exit, rolls back on an exception. Inside another write
    transaction of the same engine it joins that one (which commits or rolls back everything).
    """
    outer = _UNIT.get()
    if outer is not None and outer.engine is engine:
        yield outer.connection
        return
    with engine.connect() as connection:
        connection.execution_options(**{WRITE_OPTION: True})
        with connection.begin():
            if connection.dialect.name == "postgresql":
                connection.execute(
                    sa.text("SELECT pg_advisory_xact_lock(:key, hashtext(current_schema()))"), {"key": LOCK_KEY}
                )
            unit = _Unit(engine, connection)
            token = _UNIT.set(unit)
            try:
                yield connection
                while unit.pending:
                    key = next(iter(unit.pending))
                    unit.pending.pop(key)(connection)
                fault_point("commit")
            finally:
                _UNIT.reset(token)


@contextmanager
def savepoint(engine: Engine) -> Iterator[Connection]:
    """A SAVEPOINT inside the open write transaction of ``engine``: an exception undoes only what was written since.

    On an exception the writes since the savepoint are rolled back, the work registered with
    :func:`before_commit` since then is dropped (a portfolio whose writes were undone gets no
    commitment for them), and the exception propagates; the transaction stays open for more work.
    Raises StoreError outside a write transaction of ``engine``.
    """
    unit = _UNIT.get()
    if unit is None or unit.engine is not engine:
        raise StoreError("a savepoint must run inside write_transaction (a riskshape defect: please report it)")
    registered = dict(unit.pending)
    nested = unit.connection.begin_nested()
    try:
        yield unit.connection
    except BaseException:
        nested.rollback()
        unit.pending.clear()
        unit.pending.update(registered)
        unit.ids.clear()  # a portfolio created inside is gone again
        raise
    nested.commit()


@contextmanager
def _migration_transaction(engine: Engine) -> Iterator[Connection]:
    """A write transaction for schema migrations.

    SQLite changes some schema (a CHECK constraint, say) only by rebuilding a table, which its
    documentation says to do with foreign keys off (https://sqlite.org/lang_altertable.html,
    section 7): they are turned off before the transaction begins, checked with
    ``PRAGMA foreign_key_check`` before it commits (a violation rolls the migration back), and
    turned on again afterwards. PostgreSQL changes constraints in place: a plain write transaction.
    """
    if engine.dialect.name != "sqlite":
        with write_transaction(engine) as connection:
            yield connection
        return
    with engine.connect() as connection:
        driver: Any = connection.connection.driver_connection
        driver.execute("PRAGMA foreign_keys = OFF")  # at the driver, outside any transaction, where it takes effect
        try:
            connection.execution_options(**{WRITE_OPTION: True})
            with connection.begin():
                yield connection
                broken = connection.exec_driver_sql("PRAGMA foreign_key_check").first()
                if broken is not None:
                    raise StoreError(
                        f"schema migration left a broken reference in table {broken[0]!r} (row {broken[1]}); "
                        "nothing was changed"
                    )
        finally:
            driver.execute("PRAGMA foreign_keys = ON")


@contextmanager
def read_transaction(engine: Engine) -> Iterator[Connection]:
    """A read transaction (one consistent snapshot on SQLite; statement snapshots on PostgreSQL).

    Inside a write transaction of the same engine it reads through that one (seeing its writes).
    """
    outer = _UNIT.get()
    if outer is not None and outer.engine is engine:
        yield outer.connection
        return
    with engine.connect() as connection, connection.begin():
        yield connection


def archive_exists(engine: Engine) -> bool:
    """Whether the database already holds an archive (a SQLite file with the schema, or a PostgreSQL
    schema with the archive's migration table), without creating anything.
    """
    if engine.dialect.name == "sqlite":
        database = engine.url.database or ""
        if not Path(database).expanduser().is_file():
            return False
    with read_transaction(engine) as connection:
        return schema_revision(connection) is not None


def _alembic_config() -> AlembicConfig:
    from alembic.config import Config as AlembicConfig

    config = AlembicConfig()
    config.set_main_option("script_location", str(MIGRATIONS).replace("%", "%%"))
    return config


def schema_revision(connection: Connection) -> str | None:
    """The Alembic revision the archive's schema is at (None for an empty database).

    Read from Alembic's own ``alembic_version`` table (one row: riskshape's migrations have one head).
    """
    if not sa.inspect(connection).has_table("alembic_version"):
        return None
    found = connection.execute(sa.text("SELECT version_num FROM alembic_version")).scalars().first()
    return None if found is None else str(found)


def head_revision() -> str | None:
    """The newest schema revision this package ships, without loading Alembic.

    Revisions are numbered and each file's name starts with its number (``0002_chained_events.py``
    holds revision ``0002``); the conformance tests check this against Alembic's own head.
    """
    numbers = sorted(path.name.split("_", 1)[0] for path in (MIGRATIONS / "versions").glob("[0-9][0-9][0-9][0-9]_*.py"))
    return numbers[-1] if numbers else None


def _known(script: ScriptDirectory, revision: str) -> bool:
    from alembic.util import CommandError

    try:
        return script.get_revision(revision) is not None
    except CommandError:
        return False


def upgrade(engine: Engine) -> str:
    """Create or upgrade the archive's schema to the newest revision this package knows.

    Runs under the write lock, so two processes opening a new archive at once do not both
    create it. Returns the revision the schema is at.

    Raises
    ------
    StoreError
        If the archive was written by a newer riskshape (its revision is unknown here).
    """
    with read_transaction(engine) as connection:
        current = schema_revision(connection)
    if current is not None and current == head_revision():
        return current  # the usual case: nothing to migrate, and Alembic never loaded
    from alembic import command
    from alembic.script import ScriptDirectory

    config = _alembic_config()
    script = ScriptDirectory.from_config(config)
    head = script.get_current_head()
    if head is None:
        raise StoreError(
            f"riskshape's schema migrations have no head revision (looked in {script.dir}); reinstall riskshape"
        )
    if current == head:
        return current
    if current is not None and not _known(script, current):
        raise StoreError(
            f"archive schema revision {current!r} is newer than this riskshape knows ({head!r}); "
            "upgrade riskshape to open it"
        )
    with _migration_transaction(engine) as connection:
        config.attributes["connection"] = connection
        command.upgrade(config, "head")
    return head
