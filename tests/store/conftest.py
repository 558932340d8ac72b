"""Fixtures of the archive tests: one store per test on SQLite (a temporary file) and on the real
PostgreSQL server (a fresh schema per test, dropped afterwards; skipped when unreachable)."""

from __future__ import annotations

import uuid
from collections.abc import Iterator

import numpy as np
import psycopg
import pytest
from archive_kit import PG_CONNINFO, PG_URL, manifest, postgres_unreachable, walk_prices

from riskshape.store import Run, Store, open_store


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def store_url(request: pytest.FixtureRequest, tmp_path) -> Iterator[str]:
    """URL of an empty archive: a SQLite file, or a fresh PostgreSQL schema."""
    if request.param == "sqlite":
        yield f"sqlite:///{tmp_path / 'archive.sqlite'}"
        return
    reason = postgres_unreachable()
    if reason:
        pytest.skip(reason)
    schema = f"rs_test_{uuid.uuid4().hex[:12]}"
    with psycopg.connect(PG_CONNINFO, autocommit=True) as conn:
        conn.execute(f'CREATE SCHEMA "{schema}"')
    try:
        yield f"{PG_URL}?options=-csearch_path%3D{schema}"
    finally:
        with psycopg.connect(PG_CONNINFO, autocommit=True) as conn:
            conn.execute(f'DROP SCHEMA "{schema}" CASCADE')


@pytest.fixture
def store(store_url: str) -> Iterator[Store]:
    with open_store(store_url) as opened:
        yield opened


@pytest.fixture
def run(store: Store, rng: np.random.Generator) -> Run:
    """A portfolio 'Fund North' with one run of small prices."""
    store.create_portfolio("Fund North")
    return store.create_run("Fund North", manifest(), walk_prices(rng))
