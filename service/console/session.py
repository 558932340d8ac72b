"""The console's session: a signed, time-stamped cookie and the CSRF token of its forms.

Signing in posts an API key in a form body; the console checks it against the archive once and
keeps only the key's id, role and owner in the session (never the token). The cookie's value is
signed with HMAC-SHA1 over a time stamp by :mod:`itsdangerous` (the signer Starlette's own
sessions use); a value older than the session's lifetime, or whose signature does not verify,
is refused. Each session carries a random CSRF token; every form posts it back and the console
compares it with :func:`hmac.compare_digest`.
"""

from __future__ import annotations

import hmac
import secrets
from dataclasses import dataclass

from itsdangerous import BadSignature, SignatureExpired, URLSafeTimedSerializer

from riskshape_service.auth import Role

__all__ = ["COOKIE_NAME", "SESSION_SECONDS", "Session", "SessionSigner", "new_session", "csrf_matches", "tokens_match"]

COOKIE_NAME = "riskshape_console"
SESSION_SECONDS = 8 * 60 * 60
"""How long a session lasts after signing in (a working day); then the console asks to sign in again."""
_SALT = "riskshape.console.session"


@dataclass(frozen=True)
class Session:
    """Who is signed in: the key's id, role and owner, and the session's CSRF token."""

    key_id: str
    role: Role
    owner: str
    csrf: str


def new_session(key_id: str, role: Role, owner: str) -> Session:
    """A session for a key that was just checked, with a fresh CSRF token (256 random bits)."""
    return Session(key_id=key_id, role=role, owner=owner, csrf=secrets.token_urlsafe(32))


def tokens_match(expected: str, posted: str | None) -> bool:
    """Whether a posted token is the expected one (both non-empty; constant-time comparison)."""
    return bool(expected) and bool(posted) and hmac.compare_digest(expected.encode(), str(posted).encode())


def csrf_matches(session: Session, posted: str | None) -> bool:
    """Whether a form's CSRF token is the session's."""
    return tokens_match(session.csrf, posted)


class SessionSigner:
    """Signs sessions into cookie values and reads them back.

    Parameters
    ----------
    secret : str or bytes
        The signing key; several service processes over one archive share it
        (``RISKSHAPE_CONSOLE_SECRET``), otherwise each signs its own sessions.
    max_age : int
        Seconds a signed session stays valid.
    """

    def __init__(self, secret: str | bytes, max_age: int = SESSION_SECONDS) -> None:
        self._serializer = URLSafeTimedSerializer(secret, salt=_SALT)
        self.max_age = max_age

    def dumps(self, session: Session) -> str:
        """The cookie value of ``session`` (signed, time-stamped now)."""
        return self._serializer.dumps([session.key_id, session.role.value, session.owner, session.csrf])

    def loads(self, value: str | None) -> Session | None:
        """The session a cookie value carries, or None when it is absent, forged, altered or expired."""
        if not value:
            return None
        try:
            data = self._serializer.loads(value, max_age=self.max_age)
        except (SignatureExpired, BadSignature):
            return None
        if not (isinstance(data, list) and len(data) == 4 and all(isinstance(v, str) for v in data)):
            return None
        key_id, role, owner, csrf = data
        try:
            return Session(key_id=key_id, role=Role(role), owner=owner, csrf=csrf)
        except ValueError:
            return None
