"""Alembic revision scripts of the archive schema."""
