"""Database errors inside the store's transactions come out as riskshape's errors, naming the operation.

``Store.transaction`` and ``Store.savepoint`` share one translation with the store's methods: an
integrity error (a refused write) is a ConflictError, any other SQLAlchemy error a StoreError, and
what was written inside is rolled back (SQL's transaction and SAVEPOINT semantics, as documented by
SQLite's "SAVEPOINT" page and PostgreSQL's "SAVEPOINT" / "ROLLBACK TO SAVEPOINT" reference pages).
"""

from __future__ import annotations

import pytest
import sqlalchemy as sa

from riskshape.errors import ConflictError, NotFoundError, StoreError
from riskshape.store import Store, catalog


def _refused() -> sa.exc.IntegrityError:
    return sa.exc.IntegrityError("INSERT ...", None, Exception("UNIQUE constraint failed:\n  portfolios.name"))


def _broken() -> sa.exc.OperationalError:
    return sa.exc.OperationalError("SELECT ...", None, Exception("disk I/O error"))


def _exists(store: Store, name: str) -> bool:
    try:
        store.get_portfolio(name)
    except NotFoundError:
        return False
    return True


def test_a_refused_write_in_a_transaction_is_a_conflict_and_nothing_of_it_is_kept(store: Store) -> None:
    with (
        pytest.raises(
            ConflictError,
            match=r"^transaction: the archive refused the write \(UNIQUE constraint failed: portfolios.name\)$",
        ),
        store.transaction(),
    ):
        store.create_portfolio("Fund North")
        raise _refused()
    assert not _exists(store, "Fund North")


def test_a_database_error_in_a_savepoint_undoes_that_part_alone(store: Store) -> None:
    with store.transaction():
        store.create_portfolio("Fund North")
        with pytest.raises(StoreError, match=r"^savepoint: database error \(disk I/O error\)$"), store.savepoint():
            store.create_portfolio("Fund South")
            raise _broken()
        store.create_portfolio("Fund East")
    assert [_exists(store, n) for n in ("Fund North", "Fund South", "Fund East")] == [True, False, True]


def test_a_refused_write_in_a_savepoint_is_a_conflict_naming_the_savepoint(store: Store) -> None:
    refused = pytest.raises(ConflictError, match=r"^savepoint: the archive refused the write")
    with store.transaction(), refused, store.savepoint():
        raise _refused()


def test_a_store_method_names_itself_in_the_same_translation(store: Store, monkeypatch: pytest.MonkeyPatch) -> None:
    def failing(engine: object, name: str) -> None:
        raise _broken()

    monkeypatch.setattr(catalog, "create_portfolio", failing)
    with pytest.raises(StoreError, match=r"^create_portfolio: database error \(disk I/O error\)$"):
        store.create_portfolio("Fund North")
