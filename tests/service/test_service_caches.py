"""The service's in-memory caches are bounded by settings: snapshots (``RISKSHAPE_SNAPSHOT_CACHE_SIZE``),
prepared bodies and their ETags (``RISKSHAPE_PREPARED_CACHE_SIZE``) and key checks
(``RISKSHAPE_KEY_CACHE_SIZE``). Each is filled beyond its setting and its entries counted; the
order in which entries are dropped is checked against the standard library's least-recently-used
cache (:func:`functools.lru_cache`, Python documentation: "Decorator to wrap a function with a
memoizing callable that saves up to the maxsize most recent calls"), replayed on the same accesses.
"""

from __future__ import annotations

import functools
import random
from collections.abc import Callable
from datetime import datetime, timezone

import pandas as pd
import pytest
from fastapi.testclient import TestClient

from riskshape import Config
from riskshape.errors import ConfigError
from riskshape.store import ApiKey, ChangeMarker
from riskshape_service import create_app
from riskshape_service.keycache import KeyCache, token_digest
from riskshape_service.prepared import PreparedBodies
from riskshape_service.settings import ServiceSettings
from riskshape_service.snapshots import Snapshots
from tests.kit.service import ROLES, cautioned, csv_body

CACHES = {
    "snapshot_cache_size": ("RISKSHAPE_SNAPSHOT_CACHE_SIZE", 32),
    "prepared_cache_size": ("RISKSHAPE_PREPARED_CACHE_SIZE", 512),
    "key_cache_size": ("RISKSHAPE_KEY_CACHE_SIZE", 4096),
}


@pytest.mark.parametrize("field", sorted(CACHES))
def test_cache_sizes_are_settings_read_from_the_environment(field: str) -> None:
    variable, default = CACHES[field]
    assert getattr(ServiceSettings(), field) == default
    assert getattr(ServiceSettings.from_env({variable: "7"}), field) == 7


@pytest.mark.parametrize("field", sorted(CACHES))
@pytest.mark.parametrize(
    ("value", "says"),
    [("0", "greater than or equal to 1"), ("-3", "greater than or equal to 1"), ("many", "'many'")],
)
def test_a_bad_cache_size_is_refused_naming_the_setting(field: str, value: str, says: str) -> None:
    variable, _ = CACHES[field]
    with pytest.raises(ConfigError, match=rf"environment \(RISKSHAPE_\*\): '{field}'.*{says}"):
        ServiceSettings.from_env({variable: value})


def _replay_misses(accesses: list[str], size: int, lookup: Callable[[str], bool]) -> tuple[list[bool], list[bool]]:
    """Misses of ``lookup`` (True when it had to fetch) and of functools.lru_cache(size) on the same accesses."""
    fetched: list[str] = []

    @functools.lru_cache(maxsize=size)
    def reference(what: str) -> str:
        fetched.append(what)
        return what

    ours, theirs = [], []
    for what in accesses:
        before = len(fetched)
        reference(what)
        theirs.append(len(fetched) > before)
        ours.append(lookup(what))
    return ours, theirs


def _accesses(seed: int, names: int, n: int) -> list[str]:
    rng = random.Random(seed)
    return [f"p{rng.randrange(names)}" for _ in range(n)]


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_prepared_bodies_drop_as_a_standard_lru_cache(seed: int) -> None:
    bodies = PreparedBodies(size=4)

    def lookup(what: str) -> bool:
        if bodies.get(what, '"tag"') is not None:
            return False
        bodies.put(what, '"tag"', what.encode())
        return True

    ours, theirs = _replay_misses(_accesses(seed, 9, 300), 4, lookup)
    assert ours == theirs and any(ours[20:]) and not all(ours[20:])  # both hits and evictions happened
    assert len(bodies) == 4


@pytest.mark.parametrize("seed", [4, 5])
def test_snapshots_drop_as_a_standard_lru_cache(seed: int) -> None:
    snapshots = Snapshots(Config(), size=3)
    made: dict[str, object] = {}

    def lookup(name: str) -> bool:
        marker = ChangeMarker(portfolio=name, run_id=None, features_through=None, ledger_count=0, ledger_hash="0")
        snapshot = snapshots.get(None, name, marker)  # type: ignore[arg-type]  # no run: the archive is not read
        fetched = made.get(name) is not snapshot
        made[name] = snapshot
        return fetched

    ours, theirs = _replay_misses(_accesses(seed, 7, 300), 3, lookup)
    assert ours == theirs and any(ours[20:]) and not all(ours[20:])
    assert len(snapshots._held) == 3


class _Keys:
    """An archive that knows every token (a key per token), counting its reads."""

    def __init__(self) -> None:
        self.reads = 0

    def lookup_api_key(self, token: str) -> ApiKey:
        self.reads += 1
        return ApiKey(
            key_id=token, role="reader", owner="o", created_at=datetime(2026, 1, 1, tzinfo=timezone.utc), revoked=False
        )


@pytest.mark.parametrize("seed", [6, 7])
def test_key_checks_drop_as_a_standard_lru_cache(seed: int) -> None:
    cache, archive = KeyCache(recheck_seconds=60.0, size=5, clock=lambda: 0.0), _Keys()

    def lookup(token: str) -> bool:
        if cache.fresh(token) is not None:
            return False
        cache.check(archive, token)  # type: ignore[arg-type]
        return True

    ours, theirs = _replay_misses(_accesses(seed, 11, 300), 5, lookup)
    assert ours == theirs and any(ours[20:]) and not all(ours[20:])
    assert len(cache) == 5 and archive.reads == sum(ours)


def test_the_app_holds_no_more_than_its_settings(
    make_settings: Callable[..., ServiceSettings], keys: dict[str, str], scenario_prices: pd.DataFrame
) -> None:
    settings = make_settings(snapshot_cache_size=2, prepared_cache_size=3, key_cache_size=2)
    names = [f"book-{k}" for k in range(5)]
    admin = {"X-Riskshape-Key": keys["admin"]}
    with TestClient(create_app(settings)) as client:
        context = client.app.state.context  # type: ignore[attr-defined]
        for name in names:
            assert client.post("/v1/portfolios", json={"name": name}, headers=admin).status_code == 201
        for name in names[:2]:  # two with windows, three without a run
            response = client.post(
                f"/v1/portfolios/{name}/prices",
                content=csv_body(scenario_prices.iloc[:30]),
                headers={**admin, "Content-Type": "text/csv"},
            )
            assert response.status_code == 200, response.text
        first: dict[str, tuple[str, object]] = {}
        for name in names:
            for path in (f"/v1/portfolios/{name}/latest", f"/v1/portfolios/{name}/series?limit=5"):
                response = client.get(path, headers=admin)
                first[path] = (response.headers["ETag"], cautioned(response))
        assert list(context.snapshots._held) == names[-2:]  # the two read last
        assert len(context.prepared) == 3
        assert context.prepared.latest_etag.cache_info().currsize <= 3
        assert context.prepared.latest_etag.cache_info().maxsize == 3
        for role in ROLES:  # four keys, two kept: the last two used
            assert (
                client.get(f"/v1/portfolios/{names[0]}/latest", headers={"X-Riskshape-Key": keys[role]}).status_code
                == 200
            )
        assert list(context.keys._held) == [token_digest(keys[r]) for r in ROLES[-2:]]
        # a dropped entry is read again from the archive and answers the same
        for path, (etag, body) in first.items():
            again = client.get(path, headers=admin)
            assert again.headers["ETag"] == etag and cautioned(again) == body
        assert len(context.snapshots._held) == 2 and len(context.prepared) == 3 and len(context.keys) == 2
