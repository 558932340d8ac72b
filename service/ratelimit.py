"""Per-key rate limits: a token bucket for each key, held in memory (one per process).

A bucket holds up to ``burst`` tokens and refills at ``per_minute / 60`` tokens a second; each
request takes one. An empty bucket answers how long until the next token (the ``Retry-After``
of the 429). This is the classic token-bucket algorithm (common practice); the clock is
injectable so tests drive it by hand instead of sleeping.
"""

from __future__ import annotations

import math
import threading
import time
from collections.abc import Callable
from dataclasses import dataclass

__all__ = ["RateLimiter", "Decision"]


@dataclass(frozen=True)
class Decision:
    """Outcome of one request against a bucket: allowed, or the seconds to wait (rounded up)."""

    allowed: bool
    retry_after: int
    remaining: int


class RateLimiter:
    """Token buckets keyed by API key id.

    Parameters
    ----------
    per_minute : int
        Sustained requests a minute per key.
    burst : int
        Bucket size: requests a key may make at once after being idle.
    clock : callable, optional
        Monotonic seconds; defaults to :func:`time.monotonic`.
    """

    def __init__(self, per_minute: int, burst: int, clock: Callable[[], float] = time.monotonic) -> None:
        if per_minute < 1 or burst < 1:
            raise ValueError(f"per_minute and burst must be >= 1, got {per_minute} and {burst}")
        self.rate = per_minute / 60.0
        self.burst = float(burst)
        self._clock = clock
        self._buckets: dict[str, tuple[float, float]] = {}  # key -> (tokens, last refill time)
        self._lock = threading.Lock()

    def take(self, key: str) -> Decision:
        """Spend one token of ``key``'s bucket if there is one."""
        with self._lock:
            now = self._clock()
            tokens, last = self._buckets.get(key, (self.burst, now))
            tokens = min(self.burst, tokens + (now - last) * self.rate)
            if tokens >= 1.0:
                self._buckets[key] = (tokens - 1.0, now)
                return Decision(allowed=True, retry_after=0, remaining=int(tokens - 1.0))
            self._buckets[key] = (tokens, now)
            wait = (1.0 - tokens) / self.rate
            return Decision(allowed=False, retry_after=max(1, math.ceil(wait)), remaining=0)
