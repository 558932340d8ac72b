"""Bad input gets a 4xx that says what is wrong, never a 500: malformed JSON and CSV, unknown
portfolios, dates out of order, prices that fail validation, oversize bodies (declared and
chunked), page sizes over the cap, conflicting revisions, keys in the URL, rate limits.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator

import pandas as pd
import pytest
from fastapi.testclient import TestClient

from riskshape.store import open_store
from riskshape_service import create_app
from riskshape_service.settings import ServiceSettings
from tests.kit.service import cautioned, csv_body, long_rows, wide_rows

Auth = Callable[[str], dict[str, str]]
CSV = {"Content-Type": "text/csv"}


@pytest.fixture
def portfolio(client: TestClient, auth: Auth) -> str:
    assert client.post("/v1/portfolios", json={"name": "p"}, headers=auth("admin")).status_code == 201
    return "p"


def post_prices(
    client: TestClient, auth: Auth, body: object, *, csv: bool = False, correction: bool = False, name: str = "p"
):
    params = {"correction": "true"} if correction else None
    if csv:
        return client.post(
            f"/v1/portfolios/{name}/prices", content=body, params=params, headers={**auth("ingest"), **CSV}
        )
    return client.post(f"/v1/portfolios/{name}/prices", json=body, params=params, headers=auth("ingest"))


def refused(response, status: int, *words: str) -> str:
    """Assert the status and that the message names what is wrong; return the message."""
    body = cautioned(response)
    assert response.status_code == status, response.text
    assert body["request_id"] == response.headers["X-Request-Id"]
    for word in words:
        assert word in body["detail"], (word, body["detail"])
    return body["detail"]


def test_malformed_json(client: TestClient, auth: Auth, portfolio: str) -> None:
    response = client.post(
        "/v1/portfolios/p/prices", content=b'{"rows": [', headers={**auth("ingest"), "Content-Type": "application/json"}
    )
    refused(response, 422, "malformed JSON")
    response = client.post(
        "/v1/portfolios", content=b"{name: 1}", headers={**auth("admin"), "Content-Type": "application/json"}
    )
    refused(response, 422, "malformed JSON")


def test_json_that_does_not_fit_the_schema(client: TestClient, auth: Auth, portfolio: str) -> None:
    refused(
        post_prices(client, auth, {"rows": [{"date": "2031-01-02", "asset": "XQ01", "price": "abc"}]}),
        422,
        "body.rows.0.price",
        "'abc'",
    )
    refused(post_prices(client, auth, {"rows": [], "wide": []}), 422, "rows")
    refused(
        post_prices(client, auth, {"wide": [{"date": "31/01/2031", "prices": {"XQ01": 1.0}}]}), 422, "body.wide.0.date"
    )


@pytest.mark.parametrize(
    "text, words",
    [
        (b"date,A,B,C\n2031-01-02,1,2\n2031-01-03,1,2,3,4\n", ("line 2 has 3 fields",)),
        (b"date,A\xe9,B,C\n2031-01-02,1,2,3\n", ("line 1: byte 0xe9", "not UTF-8")),
        (b"", ("empty",)),
        (b"date,A,B,C\n", ("no data lines",)),
        (b"day,A,B,C\n2031-01-02,1,2,3\n", ("no 'date' column",)),
        (b"date,A,B,C\n2031-01-02,1,two,3\n", ("line 2", "column 'B'", "'two'")),
        (b"date,A,B,C\n2031-01-02,1,-2,3\n", ("column 'B'", "not positive")),
        (b"date,A,B,C\n2031-13-02,1,2,3\n", ("line 2", "2031-13-02")),
        (b"date,A,B\n2031-01-02,1,2\n", ("at least 3",)),
        (b"date,A,A,B\n2031-01-02,1,2,3\n", ("'A' appears twice",)),
        (b"date,A,,B\n2031-01-02,1,2,3\n", ("no name",)),
    ],
)
def test_malformed_or_invalid_csv(client: TestClient, auth: Auth, portfolio: str, text: bytes, words: tuple) -> None:
    refused(post_prices(client, auth, text, csv=True), 422, *words)


def test_dates_out_of_order_are_refused(client: TestClient, auth: Auth, portfolio: str) -> None:
    text = b"date,A,B,C\n2031-01-03,1,2,3\n2031-01-02,1,2,3\n"
    refused(post_prices(client, auth, text, csv=True), 422, "line 3", "out of order")
    body = {
        "wide": [
            {"date": "2031-01-03", "prices": {"A": 1, "B": 2, "C": 3}},
            {"date": "2031-01-02", "prices": {"A": 1, "B": 2, "C": 3}},
        ]
    }
    refused(post_prices(client, auth, body), 422, "wide 1", "out of order")


def test_unknown_portfolio_and_unsupported_media(client: TestClient, auth: Auth, scenario_prices: pd.DataFrame) -> None:
    refused(post_prices(client, auth, wide_rows(scenario_prices.iloc[:2]), name="nowhere"), 404, "'nowhere'")
    refused(client.get("/v1/portfolios/nowhere/latest", headers=auth("reader")), 404, "'nowhere'")
    refused(client.get("/v1/portfolios/nowhere/series", headers=auth("reader")), 404, "'nowhere'")
    response = client.post(
        "/v1/portfolios/nowhere/prices", content=b"x", headers={**auth("ingest"), "Content-Type": "text/plain"}
    )
    refused(response, 415, "text/plain")


def test_conflicting_revision_is_409_unless_a_correction(
    client: TestClient, auth: Auth, portfolio: str, scenario_prices: pd.DataFrame, store_url: str
) -> None:
    first = scenario_prices.iloc[:3]
    assert post_prices(client, auth, csv_body(first), csv=True).status_code == 200
    same = cautioned(post_prices(client, auth, long_rows(first)))
    assert (
        same["prices_added"] == 0 and same["corrections"] == 0 and same["unchanged"] == int(first.notna().sum().sum())
    )
    revised = first.copy()
    revised.iloc[1, 2] *= 1.01
    asset = str(revised.columns[2])
    refused(post_prices(client, auth, wide_rows(revised)), 409, "1 price(s) differ", asset, "correction=true")
    fixed = cautioned(post_prices(client, auth, wide_rows(revised), correction=True))
    assert fixed["corrections"] == 1 and fixed["prices_added"] == 0
    with open_store(store_url) as store:
        corrections = store.list_corrections("p")
        archived = store.read_prices("p", assets=list(first.columns))
    assert [(c.asset, c.old_price, c.new_price) for c in corrections] == [(asset, first.iloc[1, 2], revised.iloc[1, 2])]
    assert archived.iloc[1, 2] == revised.iloc[1, 2]
    again = cautioned(post_prices(client, auth, wide_rows(revised), correction=True))
    assert again["corrections"] == 0  # idempotent too


def test_a_date_inside_the_history_and_an_unknown_asset(
    client: TestClient, auth: Auth, portfolio: str, scenario_prices: pd.DataFrame
) -> None:
    assert post_prices(client, auth, csv_body(scenario_prices.iloc[[0, 2]]), csv=True).status_code == 200
    refused(post_prices(client, auth, wide_rows(scenario_prices.iloc[[1]])), 422, "inside the archived history")
    extra = scenario_prices.iloc[[3]].assign(XQ99=10.0)
    refused(post_prices(client, auth, wide_rows(extra)), 422, "'XQ99'", "not one of")


def test_page_size_over_the_cap_is_422(client: TestClient, auth: Auth, portfolio: str) -> None:
    cap = client.app.state.context.settings.max_page_size  # type: ignore[attr-defined]
    for path in ("/v1/portfolios/p/series", "/v1/alerts"):
        refused(client.get(path, params={"limit": cap + 1}, headers=auth("reader")), 422, "query.limit")
        assert client.get(path, params={"limit": cap}, headers=auth("reader")).status_code == 200


@pytest.fixture
def small_body_client(make_settings: Callable[..., ServiceSettings], keys: dict[str, str]) -> Iterator[TestClient]:
    with TestClient(create_app(make_settings(max_body_bytes=2048))) as test_client:
        yield test_client


def test_oversize_body_declared_is_413(small_body_client: TestClient, auth: Auth) -> None:
    response = small_body_client.post("/v1/portfolios/p/prices", content=b"x" * 4096, headers={**auth("ingest"), **CSV})
    refused(response, 413, "4096 bytes", "2048")


def test_oversize_body_chunked_is_413_counted_as_it_streams(small_body_client: TestClient, auth: Auth) -> None:
    def chunks() -> Iterator[bytes]:  # no Content-Length: the client sends Transfer-Encoding: chunked
        for _ in range(8):
            yield b"2031-01-02,1,2,3\n" * 60

    response = small_body_client.post("/v1/portfolios/p/prices", content=chunks(), headers={**auth("ingest"), **CSV})
    # the streamed count's message (a declared length gets "request body of N bytes ..." before any read)
    refused(response, 413, "request body exceeds the limit of 2048 bytes")
    body = {"name": "q" * 3000}  # a JSON body parsed by FastAPI itself is limited the same way
    assert small_body_client.post("/v1/portfolios", json=body, headers=auth("admin")).status_code == 413


def test_keys_are_never_accepted_in_the_url(client: TestClient, keys: dict[str, str]) -> None:
    for name in ("X-Riskshape-Key", "key", "api_key", "token"):
        response = client.get("/v1/portfolios", params={name: keys["admin"]})
        refused(response, 401, "header")
    response = client.get(f"/v1/portfolios?x-riskshape-key={keys['admin']}")
    refused(response, 401, "never in a URL")


def test_missing_invalid_and_revoked_keys_are_401(client: TestClient, keys: dict[str, str], store_url: str) -> None:
    refused(client.get("/v1/portfolios"), 401, "missing API key")
    assert client.get("/v1/portfolios").headers["WWW-Authenticate"] == "X-Riskshape-Key"
    key_id = keys["reader"].split(".")[0]
    refused(client.get("/v1/portfolios", headers={"X-Riskshape-Key": key_id + ".wrong-secret"}), 401, "not valid")
    with open_store(store_url) as store:
        store.revoke_api_key(key_id)
    refused(client.get("/v1/portfolios", headers={"X-Riskshape-Key": keys["reader"]}), 401, "revoked")


def test_rate_limit_answers_429_with_retry_after(
    make_settings: Callable[..., ServiceSettings], keys: dict[str, str]
) -> None:
    app = create_app(make_settings(rate_limit_per_minute=1, rate_limit_burst=2))
    with TestClient(app) as client:
        reader = {"X-Riskshape-Key": keys["reader"]}
        assert [client.get("/v1/portfolios", headers=reader).status_code for _ in range(2)] == [200, 200]
        response = client.get("/v1/portfolios", headers=reader)
        refused(response, 429, "rate limit")
        # one token a minute: the next one is due in (at most) 60 s (RFC 6585: Retry-After on 429)
        assert 1 <= int(response.headers["Retry-After"]) <= 60
        other = client.get("/v1/portfolios", headers={"X-Riskshape-Key": keys["admin"]})
        assert other.status_code == 200  # the limit is per key


def test_unknown_route_and_method(client: TestClient, auth: Auth) -> None:
    refused(client.get("/v1/nothing-here", headers=auth("reader")), 404, "/v1/nothing-here")
    refused(client.delete("/v1/portfolios", headers=auth("admin")), 405, "DELETE")


def test_an_archive_that_cannot_be_opened_is_reported_not_hidden(tmp_path, keys: dict[str, str]) -> None:
    settings = ServiceSettings(store_url=f"sqlite:///{tmp_path / 'missing-folder' / 'a.sqlite'}")
    with TestClient(create_app(settings)) as client:
        health = client.get("/v1/health")
        body = cautioned(health)
        assert (
            health.status_code == 503 and body["status"] == "degraded" and "missing-folder" in body["store"]["detail"]
        )
        refused(client.get("/v1/portfolios", headers={"X-Riskshape-Key": keys["reader"]}), 503, "not open")
