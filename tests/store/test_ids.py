"""A portfolio's id looked up once per write transaction, and forgotten with what a savepoint undoes.

Reference: SQL's ROLLBACK TO SAVEPOINT (SQLite's and PostgreSQL's "SAVEPOINT" pages) undoes the
rows written since the savepoint; an id remembered from inside it must not outlive them.
"""

from __future__ import annotations

import pytest
from sqlalchemy import event

from riskshape.errors import NotFoundError, StoreError
from riskshape.store import Store
from riskshape.store.catalog import portfolio_id
from riskshape.store.database import write_transaction


def test_a_transaction_looks_a_portfolio_up_once(store: Store) -> None:
    store.create_portfolio("Fund North")
    seen: list[str] = []

    def statement(conn: object, cursor: object, sql: str, *args: object) -> None:
        seen.append(sql)

    event.listen(store.engine, "before_cursor_execute", statement)
    try:
        with write_transaction(store.engine) as connection:
            ids = {portfolio_id(connection, "Fund North") for _ in range(5)}
    finally:
        event.remove(store.engine, "before_cursor_execute", statement)
    assert len(ids) == 1
    assert sum("FROM portfolios" in sql for sql in seen) == 1


def test_an_id_from_inside_an_undone_savepoint_is_forgotten(store: Store) -> None:
    with store.transaction():
        with pytest.raises(StoreError), store.savepoint():
            store.create_portfolio("Fund South")
            with write_transaction(store.engine) as connection:
                portfolio_id(connection, "Fund South")  # remembered inside the savepoint
            raise StoreError("undo")
        with write_transaction(store.engine) as connection, pytest.raises(NotFoundError, match="Fund South"):
            portfolio_id(connection, "Fund South")
