"""``riskshape keys``: API keys of the HTTP service (only a hash of each key is archived)."""

from __future__ import annotations

import click

from riskshape import CAUTION
from riskshape.cli.audit import STORE_OPTION
from riskshape.store import open_store

__all__ = ["keys", "ROLES"]

ROLES = ("reader", "ingest", "reviewer", "admin")
"""reader reads; ingest also posts prices; reviewer also reviews, verifies and exports; admin does everything."""


@click.group()
def keys() -> None:
    """Create, list and revoke API keys of the HTTP service."""


@keys.command()
@click.option(
    "--role",
    type=click.Choice(ROLES),
    required=True,
    help="reader reads; ingest also posts prices; reviewer also reviews, verifies and exports; admin all.",
)
@click.option("--owner", required=True, help="Who holds the key (recorded as the reviewer of their reviews).")
@STORE_OPTION
def create(role: str, owner: str, store_url: str) -> None:
    """Create a key and print it once: it cannot be shown again (only its hash is kept)."""
    with open_store(store_url) as store:
        made = store.create_api_key(owner, role)
    click.echo(made.token)
    click.echo(CAUTION, err=True)
    click.echo(
        f"key {made.key.key_id} ({made.key.role}, owner {made.key.owner}): shown once, store it now; "
        "send it in the X-Riskshape-Key header",
        err=True,
    )


@keys.command("list")
@STORE_OPTION
def list_keys(store_url: str) -> None:
    """List keys (ids, roles, owners; never the secrets)."""
    click.echo(CAUTION)
    with open_store(store_url) as store:
        found = store.list_api_keys()
    click.echo(f"{'key_id':<16}  {'role':<8}  {'created_at':<25}  {'state':<7}  owner")
    for key in found:
        state = "revoked" if key.revoked else "active"
        click.echo(
            f"{key.key_id:<16}  {key.role:<8}  {key.created_at.isoformat(timespec='seconds'):<25}  "
            f"{state:<7}  {key.owner}"
        )
    click.echo(f"{len(found)} key(s)")


@keys.command()
@click.argument("key_id")
@STORE_OPTION
def revoke(key_id: str, store_url: str) -> None:
    """Revoke a key (it stays listed, marked revoked)."""
    with open_store(store_url) as store:
        key = store.revoke_api_key(key_id)
    click.echo(CAUTION)
    click.echo(f"key {key.key_id} ({key.role}, owner {key.owner}) revoked")
