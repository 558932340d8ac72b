"""The per-key token bucket, driven by a hand-moved clock (no sleeping, no timing).

Token bucket as commonly described (common practice): capacity ``burst``, refill ``rate`` tokens a
second, one token per request; an empty bucket says how long until the next token.
"""

from __future__ import annotations

import pytest

from riskshape_service.ratelimit import RateLimiter


class Clock:
    def __init__(self) -> None:
        self.now = 1000.0

    def __call__(self) -> float:
        return self.now


def test_burst_then_refill_at_the_sustained_rate() -> None:
    clock = Clock()
    limiter = RateLimiter(per_minute=60, burst=3, clock=clock)  # one token a second
    assert [limiter.take("k").allowed for _ in range(4)] == [True, True, True, False]
    refused = limiter.take("k")
    assert not refused.allowed and refused.retry_after == 1
    clock.now += 0.5
    assert limiter.take("k").retry_after == 1  # half a token: still refused, due in 0.5 s, rounded up
    clock.now += 0.5
    assert limiter.take("k").allowed
    clock.now += 3600
    assert [limiter.take("k").allowed for _ in range(4)] == [True, True, True, False]  # refills up to burst only


def test_buckets_are_per_key_and_retry_after_follows_the_rate() -> None:
    clock = Clock()
    limiter = RateLimiter(per_minute=6, burst=1, clock=clock)  # one token every 10 s
    assert limiter.take("a").allowed and limiter.take("b").allowed
    assert limiter.take("a").retry_after == 10
    clock.now += 7.5
    assert limiter.take("a").retry_after == 3  # 2.5 s to go, rounded up (Retry-After is whole seconds)


@pytest.mark.parametrize("per_minute, burst", [(0, 1), (1, 0)])
def test_limits_must_be_positive(per_minute: int, burst: int) -> None:
    with pytest.raises(ValueError):
        RateLimiter(per_minute=per_minute, burst=burst)
