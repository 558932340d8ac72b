"""The service over the real PostgreSQL server (127.0.0.1:5432, database 'test', a fresh schema):
ingest, poll, review and verify, as on SQLite. Skipped with the reason when the server is unreachable.
"""

from __future__ import annotations

from collections.abc import Iterator

import pytest
from fastapi.testclient import TestClient

from riskshape.demo.scenario import generate_scenario
from riskshape.store import open_store
from riskshape_service import create_app
from riskshape_service.settings import ServiceSettings
from tests.kit.postgres import fresh_schema_url
from tests.kit.service import cautioned, csv_body, write_config

pytestmark = pytest.mark.postgres


@pytest.fixture
def pg_url() -> Iterator[str]:
    with fresh_schema_url("rs_service") as url:
        yield url


def test_ingest_poll_review_verify_on_postgresql(pg_url: str, tmp_path) -> None:
    with open_store(pg_url) as store:
        admin = {"X-Riskshape-Key": store.create_api_key("pg-admin", "admin").token}
    settings = ServiceSettings(store_url=pg_url, config_path=str(write_config(tmp_path)))
    prices = generate_scenario(seed=5, n_days=40, assets_per_sector=4).prices
    with TestClient(create_app(settings)) as client:
        health = cautioned(client.get("/v1/health"))
        assert health["store"]["dialect"] == "postgresql"
        assert client.post("/v1/portfolios", json={"name": "pg"}, headers=admin).status_code == 201
        ingested = cautioned(
            client.post(
                "/v1/portfolios/pg/prices", content=csv_body(prices), headers={**admin, "Content-Type": "text/csv"}
            )
        )
        assert ingested["windows_added"] == len(prices) - 20 and ingested["alerts"]  # returns - window + 1
        again = cautioned(
            client.post(
                "/v1/portfolios/pg/prices", content=csv_body(prices), headers={**admin, "Content-Type": "text/csv"}
            )
        )
        assert again["windows_added"] == 0 and again["alerts"] == []
        latest = cautioned(client.get("/v1/portfolios/pg/latest", headers=admin))
        assert latest["window_end"] == str(prices.index[-1].date())
        alert_id = ingested["alerts"][0]["id"]
        review = client.post(
            f"/v1/alerts/{alert_id}/reviews", json={"action": "dismiss", "comment": "noise"}, headers=admin
        )
        assert review.status_code == 201 and review.json()["review"]["reviewer"] == "pg-admin"
        verified = cautioned(client.get("/v1/audit/verify", headers=admin))
        # the alerts, the review, and the day state after the run (riskshape.daily.tail_run.DAY_STATE)
        assert verified["ok"] and verified["checked"] == len(ingested["alerts"]) + 2
