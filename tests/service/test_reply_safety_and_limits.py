"""Replies browsers and proxies treat safely, cross-origin refusal, the JSON depth limit, a corpus of
bad request bodies (each a 4xx naming what is wrong, nothing archived) and data-quality warnings in
the ingest reply.

Header meanings follow the standards they come from: ``X-Content-Type-Options: nosniff`` (WHATWG
Fetch), ``X-Frame-Options`` (RFC 7034) and CSP ``frame-ancestors`` (CSP Level 2),
``Cache-Control: no-store`` and ``private, no-cache`` (RFC 9111 5.2.2), CORS (WHATWG Fetch).
"""

from __future__ import annotations

import gzip
import json
import sqlite3
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from fastapi.testclient import TestClient

from riskshape_service import create_app
from riskshape_service.middleware import json_depth
from riskshape_service.settings import ServiceSettings
from tests.kit.assets import codes
from tests.kit.service import cautioned, csv_body

Auth = Callable[[str], dict[str, str]]
CSV = {"Content-Type": "text/csv"}
JSON = {"Content-Type": "application/json"}


def small_prices(n_dates: int = 30, seed: int = 3) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    dates = pd.bdate_range("2031-02-03", periods=n_dates)
    values = 50.0 * np.exp(np.cumsum(rng.normal(0.0, 0.01, (n_dates, 4)), axis=0))
    return pd.DataFrame(values, index=dates, columns=codes(4))


def archive_rows(store_url: str) -> dict[str, int]:
    """Row counts of every table but the API keys' (a key's last use may be noted)."""
    with sqlite3.connect(store_url.removeprefix("sqlite:///")) as db:
        tables = [r[0] for r in db.execute("select name from sqlite_master where type = 'table'")]
        return {t: db.execute(f'select count(*) from "{t}"').fetchone()[0] for t in tables if "key" not in t}


@pytest.fixture
def portfolio(client: TestClient, auth: Auth) -> str:
    assert client.post("/v1/portfolios", json={"name": "p"}, headers=auth("admin")).status_code == 201
    return "p"


# -- headers -------------------------------------------------------------------------------------
def test_every_reply_carries_the_safety_headers(client: TestClient, auth: Auth, portfolio: str) -> None:
    for response in (
        client.get("/v1/portfolios", headers=auth("reader")),  # a keyed read
        client.get("/v1/portfolios"),  # refused: no key
        client.get("/v1/nowhere", headers=auth("reader")),  # 404
    ):
        assert response.headers["X-Content-Type-Options"] == "nosniff"
        assert response.headers["X-Frame-Options"] == "DENY"
        assert "frame-ancestors 'none'" in response.headers["Content-Security-Policy"]
        assert response.headers["Cache-Control"] == "no-store"


def test_latest_keeps_its_revalidation_path(client: TestClient, auth: Auth, portfolio: str) -> None:
    posted = client.post("/v1/portfolios/p/prices", content=csv_body(small_prices()), headers={**auth("ingest"), **CSV})
    assert posted.status_code == 200, posted.text
    first = client.get("/v1/portfolios/p/latest", headers=auth("reader"))
    assert first.status_code == 200
    assert first.headers["Cache-Control"] == "private, no-cache"  # kept, so the 304 path below works
    assert first.headers["X-Content-Type-Options"] == "nosniff"
    again = client.get("/v1/portfolios/p/latest", headers={**auth("reader"), "If-None-Match": first.headers["ETag"]})
    assert again.status_code == 304


# -- cross-origin ----------------------------------------------------------------------------------
def test_cross_origin_requests_are_refused_unless_configured(
    make_settings: Callable[..., ServiceSettings], auth: Auth
) -> None:
    with TestClient(create_app(make_settings())) as client:
        foreign = client.get("/v1/portfolios", headers={**auth("reader"), "Origin": "https://elsewhere.invalid"})
        assert foreign.status_code == 403
        assert "RISKSHAPE_CORS_ORIGINS" in cautioned(foreign)["detail"]
        same = client.get("/v1/portfolios", headers={**auth("reader"), "Origin": "http://testserver"})
        assert same.status_code == 200
    allowed = "https://desk.invalid"
    with TestClient(create_app(make_settings(cors_origins=(allowed,)))) as client:
        read = client.get("/v1/portfolios", headers={**auth("reader"), "Origin": allowed})
        assert read.status_code == 200 and read.headers["Access-Control-Allow-Origin"] == allowed
        preflight = client.options(
            "/v1/portfolios", headers={"Origin": allowed, "Access-Control-Request-Method": "GET"}
        )
        assert preflight.status_code == 204
        assert "X-Riskshape-Key" in preflight.headers["Access-Control-Allow-Headers"]
        other = client.get("/v1/portfolios", headers={**auth("reader"), "Origin": "https://elsewhere.invalid"})
        assert other.status_code == 403


def test_cors_origins_read_from_the_environment() -> None:
    settings = ServiceSettings.from_env({"RISKSHAPE_CORS_ORIGINS": "https://a.invalid, https://b.invalid:8443"})
    assert settings.cors_origins == ("https://a.invalid", "https://b.invalid:8443")


# -- JSON depth ------------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("raw", "depth"),
    [
        (b"1", 0),
        (b"[]", 1),
        (b'{"a": [{"b": []}]}', 4),
        (b'{"a": "[[[[{{{{", "b": ["\\"]]"]}', 2),  # brackets inside strings do not count
    ],
)
def test_json_depth_matches_the_parsed_nesting(raw: bytes, depth: int) -> None:
    assert json_depth(raw) == depth

    def parsed_depth(value: object) -> int:  # the nesting as Python's json module builds it
        if isinstance(value, list):
            return 1 + max((parsed_depth(v) for v in value), default=0)
        if isinstance(value, dict):
            return 1 + max((parsed_depth(v) for v in value.values()), default=0)
        return 0

    assert parsed_depth(json.loads(raw)) == depth


@pytest.mark.parametrize("depth", [1_000, 5_000, 50_000])
def test_deep_json_is_refused_naming_the_limit(client: TestClient, auth: Auth, portfolio: str, depth: int) -> None:
    before = archive_rows(client.app.state.context.settings.store_url)  # type: ignore[attr-defined]
    for body in (b"[" * depth + b"]" * depth, b'{"rows": ' + b"[" * depth + b"]" * depth + b"}"):
        response = client.post("/v1/portfolios/p/prices", content=body, headers={**auth("ingest"), **JSON})
        assert response.status_code == 422
        assert (
            f"nested {depth + (body[:1] == b'{')} levels deep, beyond the limit of 32" in cautioned(response)["detail"]
        )
    response = client.post("/v1/portfolios", content=b"[" * depth + b"]" * depth, headers={**auth("admin"), **JSON})
    assert response.status_code == 422
    assert archive_rows(client.app.state.context.settings.store_url) == before  # type: ignore[attr-defined]


# -- the body corpus -------------------------------------------------------------------------------
def _bodies() -> list[tuple[str, bytes, dict[str, str], int, tuple[str, ...]]]:
    good = csv_body(small_prices())
    head = good.decode().splitlines()[0]
    a, b, c, d = codes(4)
    long = [{"date": "2031-02-03", "asset": name, "price": 1.0} for name in (a, b, c)]
    return [
        ("csv-empty", b"", CSV, 422, ("empty",)),
        ("csv-header-only", (head + "\n").encode(), CSV, 422, ("a header but no data lines",)),
        ("csv-gzip-cut", gzip.compress(good)[:50], CSV, 422, ("gzip data that is damaged",)),
        ("csv-latin1", good.replace(a.encode(), b"XQ\xe901", 1), CSV, 422, ("not UTF-8",)),
        ("csv-nul", good[:20] + b"\x00" + good[20:], CSV, 422, ("binary data",)),
        ("csv-zip", b"PK\x03\x04" + good, CSV, 422, ("ZIP archive",)),
        ("csv-ragged", (head + "\n2031-02-03,1,2\n").encode(), CSV, 422, ("fewer than the 5",)),
        ("csv-control-name", good.replace(a.encode(), b"XQ\x1b01", 1), CSV, 422, ("control character",)),
        ("csv-newline-name", good.replace(a.encode(), b'"XQ\n01"', 1), CSV, 422, ("line break",)),
        (
            "csv-too-many-assets",
            ("date," + ",".join(f"X{i}" for i in range(5001)) + "\n2031-02-03" + ",1" * 5001 + "\n").encode(),
            CSV,
            422,
            ("more than the limit of 5000",),
        ),
        (
            "csv-too-many-rows",
            (head + "\n" + "2031-02-03,1,2,3,4\n" * 200_001).encode(),
            CSV,
            422,
            ("more than the limit of 200000",),
        ),
        ("csv-negative", (head + "\n2031-02-03,-1,2,3,4\n").encode(), CSV, 422, ("is not positive",)),
        ("json-malformed", b'{"rows": [', JSON, 422, ("malformed JSON",)),
        ("json-not-utf8", b'{"rows": ["\xe9"]}', JSON, 422, ("not UTF-8",)),
        (
            "json-control-name",
            json.dumps({"rows": [{**long[0], "asset": "XQ\u000701"}, *long[1:]]}).encode(),
            JSON,
            422,
            ("control character",),
        ),
        (
            "json-zero-width-name",
            json.dumps({"rows": [{**long[0], "asset": "XQ\u200b01"}, *long[1:]]}).encode(),
            JSON,
            422,
            ("control character",),
        ),
        (
            "json-date-asset",
            json.dumps({"wide": [{"date": "2031-02-03", "prices": {"Date": 1.0, a: 1.0, b: 1.0}}]}).encode(),
            JSON,
            422,
            ("may not be called 'Date'",),
        ),
        ("json-depth-rows", b'{"rows": [' + b"[" * 40 + b"]" * 40 + b"]}", JSON, 422, ("beyond the limit of 32",)),
        ("xml", b"<prices/>", {"Content-Type": "application/xml"}, 415, ("is not accepted",)),
        ("no-content-type", good, {}, 415, ("is not accepted",)),
    ]


BODIES = _bodies()


@pytest.mark.parametrize(("body", "headers", "status", "words"), [c[1:] for c in BODIES], ids=[c[0] for c in BODIES])
def test_bad_body_is_a_4xx_and_writes_nothing(
    client: TestClient,
    auth: Auth,
    portfolio: str,
    body: bytes,
    headers: dict[str, str],
    status: int,
    words: tuple[str, ...],
) -> None:
    store_url = client.app.state.context.settings.store_url  # type: ignore[attr-defined]
    before = archive_rows(store_url)
    response = client.post("/v1/portfolios/p/prices", content=body, headers={**auth("ingest"), **headers})
    assert response.status_code == status, response.text
    detail = cautioned(response)["detail"]
    text = detail if isinstance(detail, str) else json.dumps(detail)
    for word in words:
        assert word in text, (word, text)
    assert "Traceback" not in response.text
    assert archive_rows(store_url) == before


# -- data quality in the ingest reply --------------------------------------------------------------
def test_ingest_reply_names_a_likely_bad_print(client: TestClient, auth: Auth, portfolio: str) -> None:
    prices = small_prices()
    day = prices.index[10]
    prices.loc[day, codes(4)[1]] = 1e308
    response = client.post("/v1/portfolios/p/prices", content=csv_body(prices), headers={**auth("ingest"), **CSV})
    assert response.status_code == 200, response.text
    warnings = cautioned(response)["warnings"]
    assert any(f"asset '{codes(4)[1]}' on {day.date()}" in w and "likely bad print" in w for w in warnings)


def test_ingest_compares_the_first_new_price_with_the_last_archived_one(
    client: TestClient, auth: Auth, portfolio: str
) -> None:
    prices = small_prices(31)
    archived, new = prices.iloc[:30], prices.iloc[30:].copy()
    asset, last_day = codes(4)[2], archived.index[-1]
    new.loc[:, asset] = archived[asset].iloc[-1] * 10  # a misplaced decimal point on the first new day
    first = client.post("/v1/portfolios/p/prices", content=csv_body(archived), headers={**auth("ingest"), **CSV})
    assert first.status_code == 200 and cautioned(first)["warnings"] == []
    response = client.post("/v1/portfolios/p/prices", content=csv_body(new), headers={**auth("ingest"), **CSV})
    assert response.status_code == 200, response.text
    warnings = cautioned(response)["warnings"]
    assert len(warnings) == 1, warnings  # only the new day's move, nothing of the archived days
    assert f"asset '{asset}' on {new.index[0].date()}" in warnings[0] and f"on {last_day.date()}" in warnings[0]


def test_ingest_refuses_findings_when_configured(
    make_settings: Callable[..., ServiceSettings], auth: Auth, tmp_path: Path
) -> None:
    config = tmp_path / "strict.toml"
    config.write_text('[monitor]\nwindow = 20\n[compute]\nexecutor = "serial"\n[checks]\nquality = "refuse"\n')
    settings = make_settings(config_path=str(config))
    with TestClient(create_app(settings)) as client:
        assert client.post("/v1/portfolios", json={"name": "p"}, headers=auth("admin")).status_code == 201
        before = archive_rows(settings.store_url)
        prices = small_prices().assign(**{codes(4)[0]: 50.0})
        response = client.post("/v1/portfolios/p/prices", content=csv_body(prices), headers={**auth("ingest"), **CSV})
        assert response.status_code == 422
        assert "has the same price" in cautioned(response)["detail"]
        assert archive_rows(settings.store_url) == before


# -- data quality in the many-portfolio reply (POST /v1/prices) --------------------------------------
def _feed_csv(parts: dict[str, pd.DataFrame]) -> bytes:
    """A long many-portfolio CSV body: portfolio, date, asset, price."""
    rows = []
    for name, table in parts.items():
        long = table.rename_axis("date").reset_index().melt(id_vars="date", var_name="asset", value_name="price")
        long.insert(0, "portfolio", name)
        rows.append(long)
    body = pd.concat(rows, ignore_index=True).sort_values(["date", "portfolio"], kind="stable")
    return body.to_csv(index=False, date_format="%Y-%m-%d", float_format="%.17g").encode("utf-8")


def _two_portfolios(client: TestClient, auth: Auth) -> dict[str, pd.DataFrame]:
    parts = {"p": small_prices(31), "q": small_prices(31, seed=4)}
    for name in parts:
        assert client.post("/v1/portfolios", json={"name": name}, headers=auth("admin")).status_code == 201
    first = client.post(
        "/v1/prices", content=_feed_csv({n: t.iloc[:30] for n, t in parts.items()}), headers={**auth("ingest"), **CSV}
    )
    assert first.status_code == 200, first.text
    assert [item["result"]["warnings"] for item in cautioned(first)["items"]] == [[], []]
    return parts


def test_many_portfolio_reply_names_each_portfolios_bad_print(client: TestClient, auth: Auth) -> None:
    parts = _two_portfolios(client, auth)
    asset, day, last_day = codes(4)[2], parts["q"].index[30], parts["q"].index[29]
    parts["q"].loc[day, asset] = parts["q"].loc[last_day, asset] * 10  # a misplaced decimal point
    response = client.post(
        "/v1/prices", content=_feed_csv({n: t.iloc[30:] for n, t in parts.items()}), headers={**auth("ingest"), **CSV}
    )
    assert response.status_code == 200, response.text
    items = {item["portfolio"]: item for item in cautioned(response)["items"]}
    assert items["p"]["result"]["warnings"] == [] and items["p"]["archived"]
    assert items["q"]["archived"] and items["q"]["result"]["prices_added"] == 4  # warn (the default): taken
    (warning,) = items["q"]["result"]["warnings"]  # the move from the last archived price, nothing older
    assert f"asset '{asset}' on {day.date()}" in warning and f"on {last_day.date()}" in warning
    assert "portfolio q" in warning and "likely bad print" in warning


def test_many_portfolio_quality_refusal_refuses_that_portfolio_alone(
    make_settings: Callable[..., ServiceSettings], keys: dict[str, str], auth: Auth, tmp_path: Path
) -> None:
    config = tmp_path / "strict.toml"
    config.write_text('[monitor]\nwindow = 20\n[compute]\nexecutor = "serial"\n[checks]\nquality = "refuse"\n')
    settings = make_settings(config_path=str(config))
    with TestClient(create_app(settings)) as client:
        parts = _two_portfolios(client, auth)
        asset, day = codes(4)[0], parts["p"].index[30]
        parts["p"].loc[day, asset] = parts["p"].loc[parts["p"].index[29], asset] / 10
        before = archive_rows(settings.store_url)
        response = client.post(
            "/v1/prices",
            content=_feed_csv({n: t.iloc[30:] for n, t in parts.items()}),
            headers={**auth("ingest"), **CSV},
        )
        assert response.status_code == 200, response.text
        body = cautioned(response)
        items = {item["portfolio"]: item for item in body["items"]}
        assert body["refused"] == 1 and not items["p"]["archived"] and items["p"]["result"] is None
        assert f"asset '{asset}' on {day.date()}" in items["p"]["error"] and "refused because" in items["p"]["error"]
        assert items["q"]["archived"] and items["q"]["result"]["prices_added"] == 4
        after = archive_rows(settings.store_url)
        assert after["prices"] == before["prices"] + 4  # q's day only: nothing of p
        p_prices = client.get("/v1/portfolios/p/series?limit=500", headers=auth("reader")).json()
        assert p_prices["total"] == 10  # p's windows unchanged (30 dates, window 20)
