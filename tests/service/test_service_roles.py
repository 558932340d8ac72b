"""Every role against every endpoint: the roles allowed succeed, the others get 403, no key gets 401.

Allowed, by design (service.auth): every role reads; ingest also posts prices; reviewer also
reviews, verifies the audit chain and exports; admin does everything (and alone creates
portfolios). Health and the API docs need no key.
"""

from __future__ import annotations

import itertools
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest
from fastapi.testclient import TestClient

from riskshape.demo.scenario import generate_scenario
from riskshape.store import open_store
from riskshape_service import create_app
from riskshape_service.auth import Permission, Role, may
from riskshape_service.settings import ServiceSettings
from tests.kit.archive import make_alerts, manifest, walk_prices
from tests.kit.service import ROLES, cautioned, csv_body, write_config


@dataclass(frozen=True)
class World:
    client: TestClient
    keys: dict[str, str]
    alert_id: int
    window_end: str
    prices_csv: bytes
    review_targets: dict[str, int]
    """One alert per role to review (a review changes the alert's status, so each role takes its own)."""


@pytest.fixture(scope="module")
def world(tmp_path_factory: pytest.TempPathFactory) -> Iterator[World]:
    folder: Path = tmp_path_factory.mktemp("roles")
    url = f"sqlite:///{folder / 'archive.sqlite'}"
    with open_store(url) as store:
        keys = {role: store.create_api_key(f"{role}-owner", role).token for role in ROLES}
        store.create_portfolio("Fund Roles")
        run = store.create_run("Fund Roles", manifest(), walk_prices(np.random.default_rng(3)))
        seeded = store.append_alerts(make_alerts(np.random.default_rng(4), len(ROLES), portfolio="Fund Roles"), run.id)
        targets = {role: a.id for role, a in zip(ROLES, seeded.added, strict=True)}
    settings = ServiceSettings(
        store_url=url, config_path=str(write_config(folder)), rate_limit_per_minute=100_000, rate_limit_burst=100_000
    )
    prices = csv_body(generate_scenario(seed=5, n_days=40, assets_per_sector=4).prices)
    with TestClient(create_app(settings)) as client:
        admin = {"X-Riskshape-Key": keys["admin"]}
        assert client.post("/v1/portfolios", json={"name": "alpha"}, headers=admin).status_code == 201
        ingested = client.post(
            "/v1/portfolios/alpha/prices", content=prices, headers={**admin, "Content-Type": "text/csv"}
        )
        assert ingested.status_code == 200 and ingested.json()["alerts"], ingested.text
        alert = ingested.json()["alerts"][0]
        yield World(client, keys, alert["id"], alert["window_end"], prices, targets)


@dataclass(frozen=True)
class Endpoint:
    method: str
    path: str
    permission: Permission
    success: int = 200

    def call(self, world: World, headers: dict[str, str], case: str):
        path = self.path.format(alert=world.alert_id, end=world.window_end)
        if self.method == "POST" and path == "/v1/portfolios":
            return world.client.post(path, json={"name": f"made-by-{case}"}, headers=headers)
        if self.method == "POST" and path.endswith("/prices"):
            return world.client.post(path, content=world.prices_csv, headers={**headers, "Content-Type": "text/csv"})
        if self.method == "POST" and path.endswith("/sign-offs"):
            period = {"start": "2001-01-01", "end": "2001-01-31"}  # no alerts: nothing to settle first
            return world.client.post(path, json=period, headers=headers)
        if self.method == "POST":
            target = world.review_targets.get(case.split("-")[0], world.alert_id)
            path = self.path.format(alert=target)
            return world.client.post(path, json={"action": "acknowledge", "comment": case}, headers=headers)
        return world.client.get(path, headers=headers)


ENDPOINTS = (
    Endpoint("GET", "/v1/portfolios", Permission.read),
    Endpoint("POST", "/v1/portfolios", Permission.admin, 201),
    Endpoint("GET", "/v1/portfolios/alpha/latest", Permission.read),
    Endpoint("GET", "/v1/portfolios/alpha/series", Permission.read),
    Endpoint("GET", "/v1/portfolios/alpha/diagrams/{end}", Permission.read),
    Endpoint("POST", "/v1/portfolios/alpha/prices", Permission.ingest),
    Endpoint("GET", "/v1/alerts", Permission.read),
    Endpoint("GET", "/v1/alerts/{alert}", Permission.read),
    Endpoint("POST", "/v1/alerts/{alert}/reviews", Permission.review, 201),
    Endpoint("GET", "/v1/audit/verify", Permission.review),
    Endpoint("GET", "/v1/audit/head", Permission.review),
    Endpoint("POST", "/v1/audit/sign-offs", Permission.review, 201),
    Endpoint("GET", "/v1/audit/sign-offs", Permission.read),
    Endpoint("GET", "/v1/export/alerts", Permission.review),
    Endpoint("GET", "/metrics", Permission.read),
)


@pytest.mark.parametrize(
    "endpoint, role",
    list(itertools.product(ENDPOINTS, (*ROLES, None))),
    ids=lambda v: f"{v.method} {v.path}" if isinstance(v, Endpoint) else str(v),
)
def test_role_matrix(world: World, endpoint: Endpoint, role: str | None) -> None:
    headers = {} if role is None else {"X-Riskshape-Key": world.keys[role]}
    response = endpoint.call(world, headers, f"{role}-{endpoint.path.count('/')}")
    cautioned(response)
    if role is None:
        assert response.status_code == 401, response.text
    elif may(Role(role), endpoint.permission):
        assert response.status_code == endpoint.success, response.text
    else:
        assert response.status_code == 403, response.text
        assert role in response.json()["detail"]


def test_the_matrix_matches_the_documented_roles() -> None:
    # reader < ingest, reviewer < admin (the brief's lattice), spelled out
    allowed = {role: {p.value for p in Permission if may(role, p)} for role in Role}
    assert allowed == {
        Role.reader: {"read"},
        Role.ingest: {"read", "ingest"},
        Role.reviewer: {"read", "review"},
        Role.admin: {"read", "ingest", "review", "admin"},
    }


@pytest.mark.parametrize("path", ["/v1/health", "/openapi.json", "/docs"])
def test_public_endpoints_need_no_key(world: World, path: str) -> None:
    response = world.client.get(path)
    assert response.status_code == 200 and response.headers["X-Riskshape-Caution"] == "not investment advice"


def test_docs_load_their_scripts_from_the_service_itself(world: World) -> None:
    # Offline use: the docs page must not depend on a CDN; every script and style it names is served here.
    page = world.client.get("/docs").text
    assert "https://" not in page and "http://" not in page
    for asset in ("/docs-assets/swagger-ui-bundle.js", "/docs-assets/swagger-ui.css"):
        assert asset in page
        response = world.client.get(asset)
        assert response.status_code == 200 and len(response.content) > 10_000
