"""A schemathesis run over the app's own OpenAPI schema: no 5xx, no response that breaks the schema,
and the caution on every response (a check of our own).

Bounded: a few examples per operation (hypothesis settings below), on an archive with one
portfolio already holding windows and alerts, as an admin (every endpoint allowed).
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import pytest
import schemathesis
from fastapi import FastAPI
from fastapi.testclient import TestClient
from hypothesis import HealthCheck, settings
from schemathesis.checks import not_a_server_error
from schemathesis.specs.openapi.checks import (
    content_type_conformance,
    response_headers_conformance,
    response_schema_conformance,
    status_code_conformance,
)

from riskshape.caution import CAUTION
from riskshape.demo.scenario import generate_scenario
from riskshape.store import open_store
from riskshape_service import create_app
from riskshape_service.settings import ServiceSettings
from tests.kit.service import csv_body, write_config


@schemathesis.check
def caution_everywhere(
    ctx: schemathesis.CheckContext, response: schemathesis.Response, case: schemathesis.Case
) -> None:
    """Every response carries the caution header, and every JSON object body the caution field."""
    assert response.headers.get("x-riskshape-caution") == ["not investment advice"], response.headers
    if case.path != "/openapi.json" and "application/json" in (response.headers.get("content-type") or [""])[0]:
        body = response.json()
        if isinstance(body, dict):
            assert body.get("caution") == CAUTION, body


CHECKS = [
    not_a_server_error,
    status_code_conformance,
    content_type_conformance,
    response_schema_conformance,
    response_headers_conformance,
    caution_everywhere,
]
ADMIN_TOKEN: dict[str, str] = {}


@pytest.fixture(scope="module")
def fuzzed_app(tmp_path_factory: pytest.TempPathFactory) -> Iterator[FastAPI]:
    folder: Path = tmp_path_factory.mktemp("fuzz")
    url = f"sqlite:///{folder / 'archive.sqlite'}"
    with open_store(url) as store:
        ADMIN_TOKEN["value"] = store.create_api_key("fuzzer", "admin").token
    settings_ = ServiceSettings(
        store_url=url,
        config_path=str(write_config(folder)),
        rate_limit_per_minute=1_000_000,
        rate_limit_burst=1_000_000,
        max_page_size=50,
    )
    app = create_app(settings_)
    prices = csv_body(generate_scenario(seed=5, n_days=30, assets_per_sector=4).prices)
    with TestClient(app) as client:  # seed the archive: a portfolio with windows and alerts
        headers = {"X-Riskshape-Key": ADMIN_TOKEN["value"]}
        assert client.post("/v1/portfolios", json={"name": "alpha"}, headers=headers).status_code == 201
        assert (
            client.post(
                "/v1/portfolios/alpha/prices", content=prices, headers={**headers, "Content-Type": "text/csv"}
            ).status_code
            == 200
        )
    yield app


@pytest.fixture(scope="module")
def api_schema(fuzzed_app: FastAPI):
    return schemathesis.openapi.from_asgi("/openapi.json", fuzzed_app)


schema = schemathesis.pytest.from_fixture("api_schema")


@schema.parametrize()
@settings(max_examples=12, deadline=None, suppress_health_check=list(HealthCheck), derandomize=True)
def test_no_server_errors_and_no_schema_violations(case: schemathesis.Case) -> None:
    case.call_and_validate(headers={"X-Riskshape-Key": ADMIN_TOKEN["value"]}, checks=CHECKS)
