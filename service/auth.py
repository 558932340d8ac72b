"""API keys and roles.

A key travels in the ``X-Riskshape-Key`` request header, never in a URL. The archive
(:mod:`riskshape.store.keys`) makes the keys and keeps only a SHA-256 hash of each secret: the
secrets are long random tokens (``secrets.token_urlsafe(32)``, 256 bits of entropy), so a fast
hash is enough -- there is no password to guess, so no slow, salted password hash is needed
(common practice for API tokens). The archive compares digests with :func:`hmac.compare_digest`.

Roles form a small lattice: ``reader`` < ``ingest``, ``reviewer`` < ``admin``. Every role may
read; ``ingest`` may also post prices; ``reviewer`` may also review alerts, verify the audit
chain and export; ``admin`` may do everything, including creating portfolios.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import Enum

__all__ = ["KEY_HEADER", "Role", "Permission", "ROLE_PERMISSIONS", "Caller", "may", "URL_KEY_NAMES"]

KEY_HEADER = "X-Riskshape-Key"
URL_KEY_NAMES = frozenset({"x-riskshape-key", "x_riskshape_key", "key", "api_key", "apikey", "api-key", "token"})
"""Query parameters that look like a key sent in the URL: such a request is refused with advice."""


class Role(str, Enum):
    """What a key's holder may do (see the module notes)."""

    reader = "reader"
    ingest = "ingest"
    reviewer = "reviewer"
    admin = "admin"


class Permission(str, Enum):
    """What an endpoint needs."""

    read = "read"
    ingest = "ingest"
    review = "review"
    admin = "admin"


ROLE_PERMISSIONS: dict[Role, frozenset[Permission]] = {
    Role.reader: frozenset({Permission.read}),
    Role.ingest: frozenset({Permission.read, Permission.ingest}),
    Role.reviewer: frozenset({Permission.read, Permission.review}),
    Role.admin: frozenset(Permission),
}


@dataclass(frozen=True)
class Caller:
    """The holder of a valid key: who they are (``owner``) and what they may do (``role``)."""

    key_id: str
    role: Role
    owner: str


def may(role: Role, permission: Permission) -> bool:
    """Whether a key of ``role`` may use an endpoint that needs ``permission``."""
    return permission in ROLE_PERMISSIONS[role]
