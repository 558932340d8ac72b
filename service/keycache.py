"""Key checks kept in memory for a short time, so that a request does not read the archive for its key.

An entry maps the SHA-256 digest of a token (never the token itself) to the key the archive
answered with and when (a monotonic clock) it answered. An entry older than ``recheck_seconds``
is read again from the archive before it is trusted, so a key revoked through any process is
refused by every process within ``recheck_seconds`` (1 s by default). Only tokens the archive
knows are kept (revoked ones included, so that they are refused without a query until the next
check); an unknown or malformed token is looked up every time, so made-up tokens cannot fill the
cache. At most ``size`` entries are kept, the least recently used dropped first.

Checked ahead of expiry: past half of ``recheck_seconds``, :meth:`KeyCache.fresh_and_due` tells
one caller (once per entry, until the check is done) to check the key again while the entry is
still trusted. The read path does that in the background, so a key polled without pause never
expires: without it, every request arriving between the expiry and the next check took the
endpoint's slow path (dozens a second under 64 concurrent pollers: the read path's tail latency).
The bound is unchanged: an entry is trusted only while younger than ``recheck_seconds``.
"""

from __future__ import annotations

import hashlib
import threading
import time
from collections import OrderedDict
from collections.abc import Callable
from dataclasses import dataclass

from riskshape.store import ApiKey, Store

__all__ = ["KeyCache", "token_digest"]


def token_digest(token: str) -> str:
    """The SHA-256 hex digest a token is kept under (the token is never kept)."""
    return hashlib.sha256(token.encode("utf-8", "surrogatepass")).hexdigest()


@dataclass(frozen=True)
class _Entry:
    key: ApiKey
    checked_at: float


class KeyCache:
    """See the module notes.

    Parameters
    ----------
    recheck_seconds : float
        Age past which a key is read again from the archive (0: every request reads it).
    size : int
        Keys kept at most.
    clock : callable, optional
        Monotonic seconds (``time.monotonic``); tests may pass their own.
    """

    def __init__(self, recheck_seconds: float, size: int = 4096, clock: Callable[[], float] = time.monotonic) -> None:
        self.recheck_seconds = recheck_seconds
        self.size = size
        self._clock = clock
        self._held: OrderedDict[str, _Entry] = OrderedDict()
        self._due: set[str] = set()  # digests whose check ahead of expiry was handed out, not yet done
        self._lock = threading.Lock()

    def fresh(self, token: str) -> ApiKey | None:
        """The key of ``token`` if it was checked against the archive less than ``recheck_seconds`` ago."""
        digest = token_digest(token)
        with self._lock:
            entry = self._held.get(digest)
            if entry is None or self._clock() - entry.checked_at >= self.recheck_seconds:
                return None
            self._held.move_to_end(digest)
            return entry.key

    def fresh_and_due(self, token: str) -> tuple[ApiKey | None, bool]:
        """:meth:`fresh`, and whether the caller should now :meth:`check` the key ahead of expiry.

        ``True`` goes to one caller per entry, once it is older than half of ``recheck_seconds``
        and until :meth:`check` of that token returns; everyone else gets ``False``.
        """
        digest = token_digest(token)
        with self._lock:
            entry = self._held.get(digest)
            age = None if entry is None else self._clock() - entry.checked_at
            if entry is None or age is None or age >= self.recheck_seconds:
                return None, False
            self._held.move_to_end(digest)
            due = age >= self.recheck_seconds / 2 and digest not in self._due
            if due:
                self._due.add(digest)
            return entry.key, due

    def check(self, store: Store, token: str) -> ApiKey | None:
        """Read the key of ``token`` from the archive and keep it (None for a token the archive does not know).

        The clock is read before the archive, so an entry is never younger than what it holds.
        """
        digest = token_digest(token)
        try:
            started = self._clock()
            key = store.lookup_api_key(token)
            with self._lock:
                if key is None:
                    self._held.pop(digest, None)
                    return None
                self._held[digest] = _Entry(key, started)
                self._held.move_to_end(digest)
                while len(self._held) > self.size:
                    self._held.popitem(last=False)
            return key
        finally:
            with self._lock:
                self._due.discard(digest)

    def __len__(self) -> int:
        with self._lock:
            return len(self._held)
