"""The read path in one process (FastAPI TestClient over a SQLite archive): prepared bodies with a
strong ETag, 304 Not Modified for a matching If-None-Match, ETags that change with an ingest and a
review, and key checks kept in memory for at most the recheck time.

HTTP conditional requests follow RFC 9110 (section 8.8.3 ETag, 13.1.2 If-None-Match, 15.4.5 304).
"""

from __future__ import annotations

import json
import logging
import time
from collections.abc import Callable

import pandas as pd
import pytest
from fastapi.testclient import TestClient

from riskshape.caution import CAUTION
from riskshape.store import change_marker, open_store
from riskshape_service import create_app
from riskshape_service.keycache import KeyCache, token_digest
from riskshape_service.prepared import etag_matches
from tests.kit.service import cautioned, csv_body

Auth = Callable[[str], dict[str, str]]
N_FIRST = 45
LATEST = "/v1/portfolios/alpha/latest"
SERIES = "/v1/portfolios/alpha/series"


@pytest.fixture
def loaded(client: TestClient, auth: Auth, scenario_prices: pd.DataFrame) -> dict[str, object]:
    assert client.post("/v1/portfolios", json={"name": "alpha"}, headers=auth("admin")).status_code == 201
    response = client.post(
        "/v1/portfolios/alpha/prices",
        content=csv_body(scenario_prices.iloc[:N_FIRST]),
        headers={**auth("ingest"), "Content-Type": "text/csv"},
    )
    assert response.status_code == 200, response.text
    return cautioned(response)  # type: ignore[return-value]


def _ingest(client: TestClient, auth: Auth, prices: pd.DataFrame) -> dict[str, object]:
    response = client.post(
        "/v1/portfolios/alpha/prices", content=csv_body(prices), headers={**auth("ingest"), "Content-Type": "text/csv"}
    )
    assert response.status_code == 200, response.text
    return cautioned(response)  # type: ignore[return-value]


def test_latest_has_a_strong_etag_and_304_for_it(client: TestClient, auth: Auth, loaded: dict) -> None:
    first = client.get(LATEST, headers=auth("reader"))
    body = cautioned(first)
    etag = first.headers["ETag"]
    # RFC 9110 8.8.3: a strong entity tag is a quoted string without the W/ prefix
    assert first.status_code == 200 and etag.startswith('"') and etag.endswith('"') and not etag.startswith("W/")
    assert body["window_end"] is not None and body["caution"] == CAUTION
    assert "no-cache" in first.headers["Cache-Control"] and "private" in first.headers["Cache-Control"]
    again = client.get(LATEST, headers=auth("reader"))
    assert again.headers["ETag"] == etag and again.content == first.content  # the same prepared bytes
    unchanged = client.get(LATEST, headers={**auth("reader"), "If-None-Match": etag})
    # RFC 9110 15.4.5: 304 carries the ETag and no content
    assert unchanged.status_code == 304 and unchanged.content == b"" and unchanged.headers["ETag"] == etag
    assert unchanged.headers["X-Riskshape-Caution"] == "not investment advice"
    # RFC 9110 13.1.2: If-None-Match takes a list and compares weakly (W/ ignored)
    listed = client.get(LATEST, headers={**auth("reader"), "If-None-Match": f'"other", W/{etag}'})
    assert listed.status_code == 304
    other = client.get(LATEST, headers={**auth("reader"), "If-None-Match": '"not-the-tag"'})
    assert other.status_code == 200 and other.content == first.content


def test_a_304_still_needs_a_valid_key(client: TestClient, auth: Auth, loaded: dict) -> None:
    etag = client.get(LATEST, headers=auth("reader")).headers["ETag"]
    refused = client.get(LATEST, headers={"If-None-Match": etag})
    assert refused.status_code == 401 and "ETag" not in refused.headers


def test_prepared_latest_equals_the_model_rendering(client: TestClient, auth: Auth, loaded: dict) -> None:
    body = cautioned(client.get(LATEST, headers=auth("reader")))
    store = client.app.state.context.store  # type: ignore[attr-defined]
    fields = set(body)
    assert fields == {
        "portfolio",
        "config_hash",
        "n_windows",
        "window_end",
        "values",
        "rules",
        "active_alerts",
        "pending",
        "caution",
    }
    assert body["n_windows"] == loaded["windows_added"]
    assert body["config_hash"] == store.latest_run("alpha").config_hash


def test_an_ingest_changes_the_etags_and_the_bodies(
    client: TestClient, auth: Auth, loaded: dict, scenario_prices: pd.DataFrame
) -> None:
    before = client.get(LATEST, headers=auth("reader"))
    page = client.get(SERIES, params={"limit": 1000}, headers=auth("reader"))
    added = _ingest(client, auth, scenario_prices.iloc[N_FIRST : N_FIRST + 2])
    assert added["windows_added"] == 2
    after = client.get(LATEST, headers={**auth("reader"), "If-None-Match": before.headers["ETag"]})
    assert after.status_code == 200 and after.headers["ETag"] != before.headers["ETag"]
    assert cautioned(after)["window_end"] == str(scenario_prices.index[N_FIRST + 1].date())
    grown = client.get(
        SERIES, params={"limit": 1000}, headers={**auth("reader"), "If-None-Match": page.headers["ETag"]}
    )
    assert grown.status_code == 200 and grown.headers["ETag"] != page.headers["ETag"]
    assert cautioned(grown)["total"] == cautioned(page)["total"] + 2


def test_a_review_changes_the_latest_etag_not_the_series(client: TestClient, auth: Auth, loaded: dict) -> None:
    assert loaded["alerts"], "the test configuration's rules fire on this history"
    latest = client.get(LATEST, headers=auth("reader")).headers["ETag"]
    page = client.get(SERIES, headers=auth("reader")).headers["ETag"]
    alert_id = loaded["alerts"][0]["id"]
    made = client.post(f"/v1/alerts/{alert_id}/reviews", json={"action": "acknowledge"}, headers=auth("reviewer"))
    assert made.status_code == 201
    assert client.get(LATEST, headers={**auth("reader"), "If-None-Match": latest}).status_code == 200
    assert client.get(SERIES, headers={**auth("reader"), "If-None-Match": page}).status_code == 304


def test_series_pages_have_their_own_etags(client: TestClient, auth: Auth, loaded: dict) -> None:
    one = client.get(SERIES, params={"limit": 5}, headers=auth("reader"))
    two = client.get(SERIES, params={"limit": 5, "offset": 5}, headers=auth("reader"))
    assert one.headers["ETag"] != two.headers["ETag"]
    assert (
        cautioned(two)["rows"][0]
        == cautioned(client.get(SERIES, params={"limit": 6}, headers=auth("reader")))["rows"][5]
    )
    bad = client.get(SERIES, params={"summaries": "no_such"}, headers=auth("reader"))
    assert bad.status_code == 422 and "no_such" in cautioned(bad)["detail"]


def test_unknown_portfolio_is_404_on_the_read_path(client: TestClient, auth: Auth) -> None:
    for path in ("/v1/portfolios/nowhere/latest", "/v1/portfolios/nowhere/series"):
        response = client.get(path, headers=auth("reader"))
        assert response.status_code == 404 and "nowhere" in cautioned(response)["detail"]


def test_the_change_marker_grows_with_each_write(
    client: TestClient, auth: Auth, loaded: dict, scenario_prices: pd.DataFrame
) -> None:
    store = client.app.state.context.store  # type: ignore[attr-defined]
    before = change_marker(store, "alpha")
    # the ledger: the run's alerts and the day state after it (riskshape.daily.tail_run.DAY_STATE)
    assert before.run_id == store.latest_run("alpha").id and before.ledger_count == len(loaded["alerts"]) + 1
    _ingest(client, auth, scenario_prices.iloc[N_FIRST : N_FIRST + 1])
    after = change_marker(store, "alpha")
    assert after.run_id is not None and after.run_id > before.run_id
    assert after.features_through is not None and after.features_through > (before.features_through or 0)


@pytest.mark.parametrize(
    ("header", "matches"),
    [
        ('"abc"', True),
        ('W/"abc"', True),  # RFC 9110 13.1.2: If-None-Match uses the weak comparison
        ('"x", "abc"', True),
        ("*", True),  # RFC 9110 13.1.2: "*" matches any current representation
        ('"abcd"', False),
        ("", False),
        (None, False),
    ],
    ids=["same", "weak", "list", "star", "other", "empty", "absent"],
)
def test_if_none_match_comparison(header: str | None, matches: bool) -> None:
    assert etag_matches(header, '"abc"') is matches


class _Clock:
    def __init__(self) -> None:
        self.now = 100.0

    def __call__(self) -> float:
        return self.now


def test_key_cache_rechecks_after_its_time_and_keeps_only_digests(store_url: str, keys: dict[str, str]) -> None:
    clock = _Clock()
    cache = KeyCache(recheck_seconds=1.0, clock=clock)
    token = keys["reader"]
    with open_store(store_url) as store:
        assert cache.fresh(token) is None  # never checked
        key = cache.check(store, token)
        assert key is not None and not key.revoked
        assert cache.fresh(token) == key
        store.revoke_api_key(key.key_id)
        clock.now += 0.999
        assert cache.fresh(token) == key  # within the recheck time the held answer stands
        clock.now += 0.001
        assert cache.fresh(token) is None  # at the recheck time it must be read again
        rechecked = cache.check(store, token)
        assert rechecked is not None and rechecked.revoked
        assert cache.check(store, token + "x") is None and len(cache) == 1  # unknown tokens are not kept
    held = list(cache._held)  # the cache's own storage: digests, never tokens
    assert held == [token_digest(token)] and token not in held


def test_a_revoked_key_is_refused_within_the_recheck_time(
    make_settings: Callable[..., object], keys: dict[str, str], store_url: str
) -> None:
    app = create_app(make_settings(key_recheck_seconds=0.3))  # type: ignore[arg-type]
    headers = {"X-Riskshape-Key": keys["reader"]}
    with TestClient(app) as client:
        assert client.get("/v1/portfolios", headers=headers).status_code == 200
        with open_store(store_url) as store:
            store.revoke_api_key(keys["reader"].split(".", 1)[0])
        revoked_at = time.monotonic()
        time.sleep(max(0.0, revoked_at + 0.3 - time.monotonic()))
        refused = client.get("/v1/portfolios", headers=headers)  # the first request past the recheck time
        assert refused.status_code == 401 and "revoked" in cautioned(refused)["detail"]


def test_keys_stay_out_of_logs_on_the_read_path(
    client: TestClient, auth: Auth, keys: dict[str, str], loaded: dict, caplog: pytest.LogCaptureFixture
) -> None:
    with caplog.at_level(logging.INFO, logger="riskshape.service"):
        client.get(LATEST, headers=auth("reader"))
        client.get(LATEST, headers={**auth("reader"), "If-None-Match": "*"})
    text = caplog.text + json.dumps([r.__dict__ for r in caplog.records], default=str)
    assert caplog.records and all(token not in text for token in keys.values())


def test_the_fast_path_answers_as_the_endpoint_does(client: TestClient, auth: Auth, loaded: dict) -> None:
    first = client.get(LATEST, headers=auth("reader"))  # the endpoint prepares the body
    context = client.app.state.context  # type: ignore[attr-defined]
    reads = context.markers.reads
    second = client.get(LATEST, headers=auth("reader"))  # answered from the prepared bytes
    assert context.markers.reads == reads + 1  # still one change-marker read for the request
    assert second.content == first.content and second.headers["ETag"] == first.headers["ETag"]
    for header in ("Content-Type", "Cache-Control", "Vary", "X-Riskshape-Caution"):
        assert second.headers[header] == first.headers[header]
    with_query = client.get(LATEST, params={"x": "1"}, headers=auth("reader"))
    assert with_query.status_code == 200 and with_query.content == first.content
    metrics = client.get("/metrics", headers=auth("admin")).text
    assert 'route="/v1/portfolios/{name}/latest",status="200"} 3.0' in metrics.replace("_total", "")
    for headers in ({}, {"X-Riskshape-Key": "nope.nope"}, auth("reader") | {"X-Riskshape-Key": "x" * 300}):
        refused = client.get(LATEST, headers=headers)
        assert refused.status_code == 401 and "ETag" not in refused.headers
