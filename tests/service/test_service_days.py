"""The daily loop through the service: pending days in the ingest reply, ``latest`` and the series;
closing a day and delisting an asset (ingest role, the key's owner archived as who did it); one
request carrying a day for many portfolios, each answering alone.

The reference for "the same numbers" is the library alone: the portfolio fed whole through
``riskshape.daily.Ingestor`` in a second archive, or one portfolio at a time through the service.
HTTP conditional requests follow RFC 9110 (8.8.3 ETag, 13.1.2 If-None-Match).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pandas as pd
import pytest
from fastapi.testclient import TestClient

from riskshape.store import open_store
from tests.kit.service import cautioned, csv_body, long_rows

Auth = Callable[[str], dict[str, str]]
N_FIRST = 30  # price dates archived before the day under test (window 20: 10 windows)
LATEST = "/v1/portfolios/alpha/latest"
SERIES = "/v1/portfolios/alpha/series"


def _post(client: TestClient, auth: Auth, name: str, prices: pd.DataFrame) -> dict:
    response = client.post(
        f"/v1/portfolios/{name}/prices",
        content=csv_body(prices),
        headers={**auth("ingest"), "Content-Type": "text/csv"},
    )
    assert response.status_code == 200, response.text
    return cautioned(response)  # type: ignore[return-value]


@pytest.fixture
def prices(scenario_prices: pd.DataFrame) -> pd.DataFrame:
    table = scenario_prices.sort_index(axis=1)
    return table.ffill().bfill()  # every cell priced: a day is complete only when all its assets are sent


@pytest.fixture
def loaded(client: TestClient, auth: Auth, prices: pd.DataFrame) -> dict:
    assert client.post("/v1/portfolios", json={"name": "alpha"}, headers=auth("admin")).status_code == 201
    return _post(client, auth, "alpha", prices.iloc[:N_FIRST])


def test_a_partial_day_is_pending_in_the_reply_latest_and_series(
    client: TestClient, auth: Auth, loaded: dict, prices: pd.DataFrame
) -> None:
    before = client.get(LATEST, headers=auth("reader"))
    page = client.get(SERIES, headers=auth("reader"))
    assert cautioned(before)["pending"] == [] and cautioned(page)["pending"] == []
    day = prices.iloc[[N_FIRST]]
    reply = _post(client, auth, "alpha", day.iloc[:, :3])
    assert reply["windows_added"] == 0 and reply["run_id"] is None
    day_text = str(day.index[0].date())
    assert [p["date"] for p in reply["pending"]] == [day_text]
    assert reply["pending"][0]["missing"] == list(day.columns[3:])
    assert reply["pending"][0]["priced"] == 3 and reply["pending"][0]["listed"] == day.shape[1]
    # the pending prices wrote no run: the ETag must change all the same (RFC 9110 13.1.2: no 304)
    after = client.get(LATEST, headers={**auth("reader"), "If-None-Match": before.headers["ETag"]})
    assert after.status_code == 200 and after.headers["ETag"] != before.headers["ETag"]
    assert [p["date"] for p in cautioned(after)["pending"]] == [day_text]
    assert cautioned(after)["n_windows"] == cautioned(before)["n_windows"]
    grown = client.get(SERIES, headers={**auth("reader"), "If-None-Match": page.headers["ETag"]})
    assert grown.status_code == 200 and [p["date"] for p in cautioned(grown)["pending"]] == [day_text]
    listed = cautioned(client.get("/v1/portfolios/alpha/days/pending", headers=auth("reader")))
    assert listed["count"] == 1 and listed["items"][0]["date"] == day_text
    # the rest of the day: an ordinary ingest, the day counts and its window is computed
    rest = _post(client, auth, "alpha", day.iloc[:, 3:])
    assert rest["pending"] == [] and rest["windows_added"] == 1 and rest["last_window"] == day_text
    assert cautioned(client.get(LATEST, headers=auth("reader")))["pending"] == []


def test_closing_a_day_takes_the_ingest_role_and_records_the_keys_owner(
    client: TestClient, auth: Auth, loaded: dict, prices: pd.DataFrame, store_url: str
) -> None:
    day = prices.iloc[[N_FIRST]]
    text = str(day.index[0].date())
    _post(client, auth, "alpha", day.iloc[:, :5])
    path = f"/v1/portfolios/alpha/days/{text}/close"
    assert client.post(path, headers=auth("reviewer")).status_code == 403
    assert client.post(path, headers=auth("reader")).status_code == 403
    closed = client.post(path, headers=auth("ingest"))
    assert closed.status_code == 200, closed.text
    body = cautioned(closed)
    assert body["closed"] == [text] and body["windows_added"] == 1 and body["pending"] == []
    again = client.post(path, headers=auth("ingest"))
    assert again.status_code == 409 and text in again.json()["detail"]
    unknown = client.post("/v1/portfolios/alpha/days/2099-01-05/close", headers=auth("ingest"))
    assert unknown.status_code == 404 and "2099-01-05" in unknown.json()["detail"]
    with open_store(store_url) as store:
        (event,) = store.list_events(kind="day_closed", portfolio="alpha")
        assert event.subject == text and event.actor == "ingest-owner"
        assert event.data["who"] == "ingest-owner" and event.data["how"] == "by hand"
        assert event.data["missing"] == list(day.columns[5:])


def test_delisting_an_asset_releases_the_days_waiting_for_it(
    client: TestClient, auth: Auth, loaded: dict, prices: pd.DataFrame, store_url: str
) -> None:
    gone = str(prices.columns[-1])
    last = prices.index[N_FIRST - 1].date()
    _post(client, auth, "alpha", prices.iloc[[N_FIRST]].drop(columns=gone))
    path = f"/v1/portfolios/alpha/assets/{gone}/delist"
    assert client.post(path, json={"last_trading_day": str(last)}, headers=auth("reviewer")).status_code == 403
    done = client.post(path, json={"last_trading_day": str(last)}, headers=auth("ingest"))
    assert done.status_code == 200, done.text
    assert cautioned(done)["windows_added"] == 1 and cautioned(done)["pending"] == []
    twice = client.post(path, json={"last_trading_day": str(last)}, headers=auth("ingest"))
    assert twice.status_code == 409 and gone in twice.json()["detail"]
    stranger = client.post(
        "/v1/portfolios/alpha/assets/XZ99/delist", json={"last_trading_day": str(last)}, headers=auth("ingest")
    )
    assert stranger.status_code == 422 and "XZ99" in stranger.json()["detail"]
    with open_store(store_url) as store:
        (event,) = store.list_events(kind="asset_delisted", portfolio="alpha")
        assert event.subject == gone and event.data == {"last_trading_day": str(last), "who": "ingest-owner"}


def _feed_rows(parts: dict[str, pd.DataFrame]) -> list[dict]:
    return [{"portfolio": name, **row} for name, table in parts.items() for row in long_rows(table)["rows"]]


def test_one_request_for_many_portfolios_equals_them_one_by_one(
    client: TestClient, auth: Auth, prices: pd.DataFrame
) -> None:
    names = ("beta", "gamma", "delta")
    for name in (*names, *(f"{n}-alone" for n in names)):
        assert client.post("/v1/portfolios", json={"name": name}, headers=auth("admin")).status_code == 201
    # each portfolio its own columns and its own scale: they must not mix
    parts = {n: prices.iloc[:, 6 * i : 6 * i + 6] * (1 + i) for i, n in enumerate(names)}
    for name, table in parts.items():
        _post(client, auth, f"{name}-alone", table.iloc[: N_FIRST + 2])
    first = client.post(
        "/v1/prices", json={"rows": _feed_rows({n: t.iloc[:N_FIRST] for n, t in parts.items()})}, headers=auth("ingest")
    )
    assert first.status_code == 200, first.text
    assert [i["portfolio"] for i in cautioned(first)["items"]] == list(names)
    # the next two days as CSV with a portfolio column; gamma's rows carry an asset it does not hold
    day = pd.DataFrame(_feed_rows({n: t.iloc[N_FIRST : N_FIRST + 2] for n, t in parts.items()}))
    bad = day["portfolio"] == "gamma"
    day.loc[bad & (day["asset"] == day.loc[bad, "asset"].iloc[0]), "asset"] = "XZ99"
    text = day[["portfolio", "date", "asset", "price"]].to_csv(index=False, float_format="%.17g")
    second = client.post("/v1/prices", content=text.encode(), headers={**auth("ingest"), "Content-Type": "text/csv"})
    assert second.status_code == 200, second.text
    body = cautioned(second)
    items = {i["portfolio"]: i for i in body["items"]}
    assert body["count"] == 3 and body["refused"] == 1
    assert not items["gamma"]["archived"] and "XZ99" in items["gamma"]["error"]
    assert items["gamma"]["result"] is None
    for name in ("beta", "delta"):
        assert items[name]["archived"] and items[name]["result"]["windows_added"] == 2
        many = cautioned(client.get(f"/v1/portfolios/{name}/series", headers=auth("reader")))
        alone = cautioned(client.get(f"/v1/portfolios/{name}-alone/series", headers=auth("reader")))
        assert many["columns"] == alone["columns"]
        assert [r["window_end"] for r in many["rows"]] == [r["window_end"] for r in alone["rows"]]
        np.testing.assert_array_equal(
            np.array([r["values"] for r in many["rows"]], dtype=float),
            np.array([r["values"] for r in alone["rows"]], dtype=float),
        )
    # gamma archived nothing of the refused request: its series stops where the first request left it
    gamma = cautioned(client.get("/v1/portfolios/gamma/series", headers=auth("reader")))
    assert gamma["rows"][-1]["window_end"] == str(prices.index[N_FIRST - 1].date())
    unknown = client.post(
        "/v1/prices",
        json={"rows": [{"portfolio": "nowhere", "date": "2031-01-02", "asset": "XA01", "price": 1.0}]},
        headers=auth("ingest"),
    )
    assert unknown.status_code == 200 and "nowhere" in cautioned(unknown)["items"][0]["error"]
    assert client.post("/v1/prices", json={"rows": []}, headers=auth("ingest")).status_code == 422
    assert client.post("/v1/prices", json={"rows": []}, headers=auth("reader")).status_code == 403


def test_a_many_portfolio_csv_checks_date_order_within_each_portfolio(client: TestClient, auth: Auth) -> None:
    text = (
        "portfolio,date,asset,price\n"
        "beta,2031-03-04,XA01,1.0\n"
        "gamma,2031-03-03,XA01,1.0\n"  # earlier than beta's line above: another portfolio, in order
        "beta,2031-03-03,XA01,1.0\n"  # out of order within beta: line 4
    )
    refused = client.post("/v1/prices", content=text.encode(), headers={**auth("ingest"), "Content-Type": "text/csv"})
    assert refused.status_code == 422
    detail = refused.json()["detail"]
    assert "line 4" in detail and "2031-03-03" in detail and "sorted by date" in detail
