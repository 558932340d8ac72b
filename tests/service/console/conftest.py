"""Fixtures of the console tests: an archive with one fictional portfolio whose rules fired, a second
reviewer's key, and signing in through the console's own form.
"""

from __future__ import annotations

import re
from collections.abc import Callable

import pandas as pd
import pytest
from fastapi.testclient import TestClient

from riskshape.store import open_store
from tests.kit.service import csv_body

CSRF = re.compile(r'name="csrf" value="([^"]+)"')
PORTFOLIO = "Fund Aster"


def csrf_of(html: str) -> str:
    """The CSRF token of the first form of a page."""
    found = CSRF.search(html)
    assert found is not None, "no CSRF token in the page"
    return found.group(1)


def sign_in(client: TestClient, token: str) -> str:
    """Sign in through the console's form; the session's CSRF token (read from the overview)."""
    page = client.get("/console/sign-in")
    answer = client.post(
        "/console/sign-in",
        data={"key": token, "csrf": csrf_of(page.text), "next": "/console/"},
        follow_redirects=False,
    )
    assert answer.status_code == 303, answer.text
    return csrf_of(client.get("/console/").text)


@pytest.fixture
def second_reviewer(store_url: str, keys: dict[str, str]) -> str:
    """A reviewer key of another person (for the four-eyes close)."""
    with open_store(store_url) as store:
        return store.create_api_key("second-reviewer", "reviewer").token


@pytest.fixture
def loaded(client: TestClient, auth: Callable[[str], dict[str, str]], scenario_prices: pd.DataFrame) -> int:
    """The fictional portfolio with every scenario date ingested; the number of alerts it raised."""
    assert client.post("/v1/portfolios", json={"name": PORTFOLIO}, headers=auth("admin")).status_code == 201
    answer = client.post(
        f"/v1/portfolios/{PORTFOLIO}/prices",
        content=csv_body(scenario_prices),
        headers={**auth("ingest"), "Content-Type": "text/csv"},
    )
    assert answer.status_code == 200, answer.text
    raised = client.get("/v1/alerts", params={"portfolio": PORTFOLIO}, headers=auth("reader")).json()["total"]
    assert raised >= 2, "the test configuration's rules should fire on the scenario"
    return int(raised)
