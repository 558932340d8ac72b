"""``riskshape backup``: a consistent, verified copy of a live archive."""

from __future__ import annotations

from pathlib import Path

import click

from riskshape import CAUTION
from riskshape.cli.audit import STORE_OPTION
from riskshape.store import backup_store, open_store

__all__ = ["backup"]


@click.command()
@STORE_OPTION
@click.option(
    "--to",
    "target",
    type=click.Path(path_type=Path, dir_okay=False),
    required=True,
    help="The backup file (must not exist). SQLite: an archive file; PostgreSQL: a pg_dump custom-format file "
    "of the archive's schema.",
)
def backup(store_url: str, target: Path) -> None:
    """Copy the archive consistently while others write to it, verify the copy, print its head.

    The copy is verified before it is kept (PostgreSQL: the dump is loaded into a scratch database,
    which needs the CREATEDB privilege, and dropped afterwards). To restore a SQLite archive: stop the
    service, move the damaged file (and its -wal and -shm files) aside, then run `riskshape backup
    --store sqlite:///BACKUP --to ARCHIVE` (the copy is verified again on the way back). PostgreSQL:
    `pg_restore --no-owner --dbname=postgresql://USER@HOST:5432/EMPTY_DATABASE BACKUP`, then `riskshape
    audit verify --expect-head HEAD` with the head printed here.
    """
    with open_store(store_url, create=False) as store:
        report = backup_store(store, target)
    kind = "" if store_url.startswith("sqlite") else "a pg_dump file, loaded and "
    click.echo(f"backup:   {report.path} ({kind}verified: the chain holds)")
    click.echo(f"head:     {report.head}")
    click.echo(CAUTION)
