"""The real PostgreSQL server the archive and service tests use (127.0.0.1:5432, database ``test``).

Each test gets a fresh schema, dropped afterwards; tests skip with the reason when no server answers.
"""

from __future__ import annotations

import uuid
from collections.abc import Iterator
from contextlib import contextmanager

import psycopg
import pytest

__all__ = ["PG_CONNINFO", "PG_URL", "postgres_unreachable", "fresh_schema_url"]

PG_CONNINFO = "host=127.0.0.1 port=5432 user=postgres dbname=test connect_timeout=3"
PG_URL = "postgresql+psycopg://postgres@127.0.0.1:5432/test"
_pg_reason: list[str] = []


def postgres_unreachable() -> str | None:
    """Why PostgreSQL cannot be used (None when it can); asked once per session."""
    if not _pg_reason:
        try:
            with psycopg.connect(PG_CONNINFO) as conn:
                conn.execute("SELECT 1")
            _pg_reason.append("")
        except psycopg.Error as err:
            _pg_reason.append(f"PostgreSQL at 127.0.0.1:5432 (database 'test') is unreachable: {err}".strip())
    return _pg_reason[0] or None


@contextmanager
def fresh_schema_url(prefix: str) -> Iterator[str]:
    """A store URL on a new schema of the test database (skips the test when the server is unreachable)."""
    reason = postgres_unreachable()
    if reason:
        pytest.skip(reason)
    schema = f"{prefix}_{uuid.uuid4().hex[:12]}"
    with psycopg.connect(PG_CONNINFO, autocommit=True) as conn:
        conn.execute(f'CREATE SCHEMA "{schema}"')
    try:
        yield f"{PG_URL}?options=-csearch_path%3D{schema}"
    finally:
        with psycopg.connect(PG_CONNINFO, autocommit=True) as conn:
            conn.execute(f'DROP SCHEMA "{schema}" CASCADE')
