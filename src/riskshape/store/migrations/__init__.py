"""Alembic migrations of the archive, run programmatically by :func:`riskshape.store.open_store`."""
