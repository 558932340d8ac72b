"""Alembic environment: migrations run on the connection handed over by ``riskshape.store.database``.

There is no ``alembic.ini``: :func:`riskshape.store.database.upgrade` builds the Alembic ``Config`` in
code and passes an open connection (already inside a write transaction holding the archive's
write lock) as ``config.attributes["connection"]``.
"""

from __future__ import annotations

from alembic import context

connection = context.config.attributes.get("connection")
if connection is None:  # pragma: no cover - only reachable through the alembic command line
    raise RuntimeError("riskshape migrations run through riskshape.store.open_store(url), not the alembic CLI")

context.configure(connection=connection, target_metadata=None, transaction_per_migration=False)
with context.begin_transaction():
    context.run_migrations()
