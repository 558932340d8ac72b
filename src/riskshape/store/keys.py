"""API keys of the service: only a SHA-256 of each key's secret is stored.

A token is ``KEY_ID.SECRET``: ``KEY_ID`` (16 hex digits) names the row, ``SECRET`` is 32 random
bytes (URL-safe base64). The secret has 256 bits of entropy, so a plain SHA-256 of it is enough to
store (common practice for random API tokens; slow password hashes are for low-entropy secrets).
Lookups compare digests in constant time.

Creating and revoking a key append chained events (``key_created`` with the key id, role, owner,
creation time and the token's digest, never the token; ``key_revoked``) in the same transaction,
and ``audit verify`` checks the keys table against them, so a role raised in the file is caught.
"""

from __future__ import annotations

import hashlib
import hmac
import re
import secrets
from datetime import datetime, timezone
from typing import Any

import sqlalchemy as sa
from sqlalchemy.engine import Engine

from riskshape.errors import NotFoundError, StoreError
from riskshape.store import schema as t
from riskshape.store.database import read_transaction, write_transaction
from riskshape.store.events import append_event_on, event_payload
from riskshape.store.records import ApiKey, NewApiKey

__all__ = ["KEY_CREATED", "KEY_REVOKED", "create_api_key", "lookup_api_key", "revoke_api_key", "list_api_keys"]

KEY_CREATED = "key_created"
KEY_REVOKED = "key_revoked"

_ROLE = re.compile(r"^[a-z][a-z_]{0,31}$")


def _digest(secret: str) -> str:
    return hashlib.sha256(secret.encode("utf-8")).hexdigest()


def _key(row: Any) -> ApiKey:
    return ApiKey(
        key_id=row.key_id, role=row.role, owner=row.owner, created_at=row.created_at, revoked=bool(row.revoked)
    )


def create_api_key(engine: Engine, owner: str, role: str) -> NewApiKey:
    """Create a key; the returned token is the only time the secret is visible."""
    if not isinstance(role, str) or not _ROLE.match(role):
        raise StoreError(f"API key role must be 1-32 lowercase letters or '_', got {role!r}")
    if not isinstance(owner, str) or not owner.strip() or len(owner) > 200:
        raise StoreError(f"API key owner must be a non-empty name of at most 200 characters, got {owner!r}")
    key_id, secret = secrets.token_hex(8), secrets.token_urlsafe(32)
    now = datetime.now(timezone.utc)
    digest = _digest(secret)
    with write_transaction(engine) as connection:
        connection.execute(
            sa.insert(t.api_keys).values(
                key_id=key_id, key_hash=digest, role=role, owner=owner, created_at=now, revoked=False
            )
        )
        facts = {"key_id": key_id, "role": role, "owner": owner, "created_at": now, "token_digest": digest}
        append_event_on(connection, KEY_CREATED, event_payload(facts), subject=key_id, actor=owner, now=now)
    return NewApiKey(
        key=ApiKey(key_id=key_id, role=role, owner=owner, created_at=now, revoked=False), token=f"{key_id}.{secret}"
    )


def lookup_api_key(engine: Engine, token: str) -> ApiKey | None:
    """The key a token belongs to, or None if the token is malformed, unknown or its secret is wrong.

    A revoked key is returned with ``revoked=True``: the caller must refuse it.
    """
    if not isinstance(token, str) or token.count(".") < 1 or len(token) > 200:
        return None
    key_id, secret = token.split(".", 1)
    with read_transaction(engine) as connection:
        row = connection.execute(sa.select(t.api_keys).where(t.api_keys.c.key_id == key_id)).first()
    if row is None or not hmac.compare_digest(row.key_hash, _digest(secret)):
        return None
    return _key(row)


def revoke_api_key(engine: Engine, key_id: str) -> ApiKey:
    """Mark a key revoked (it stays listed)."""
    with write_transaction(engine) as connection:
        before = connection.execute(sa.select(t.api_keys).where(t.api_keys.c.key_id == key_id)).first()
        if before is None:
            raise NotFoundError(f"API key {key_id!r} does not exist; list the keys to find its id")
        if not before.revoked:
            connection.execute(sa.update(t.api_keys).where(t.api_keys.c.key_id == key_id).values(revoked=True))
            append_event_on(connection, KEY_REVOKED, event_payload({"key_id": key_id}), subject=key_id)
        row = connection.execute(sa.select(t.api_keys).where(t.api_keys.c.key_id == key_id)).one()
    return _key(row)


def list_api_keys(engine: Engine) -> tuple[ApiKey, ...]:
    """Every key (without secrets), oldest first."""
    with read_transaction(engine) as connection:
        rows = connection.execute(sa.select(t.api_keys).order_by(t.api_keys.c.created_at, t.api_keys.c.key_id))
        return tuple(_key(r) for r in rows)
