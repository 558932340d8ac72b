"""The console's pages over a real archive, through FastAPI's test client."""

from __future__ import annotations

from fastapi.testclient import TestClient

from riskshape.caution import CAUTION
from tests.service.console.conftest import PORTFOLIO, sign_in


def test_every_page_renders_with_the_caution(client: TestClient, keys: dict[str, str], loaded: int) -> None:
    sign_in(client, keys["reviewer"])
    first = client.get("/v1/alerts", headers={"X-Riskshape-Key": keys["reader"]}).json()["items"][0]["id"]
    for path in (
        "/console/",
        f"/console/portfolios/{PORTFOLIO}",
        "/console/alerts",
        f"/console/alerts/{first}",
        "/console/audit",
    ):
        page = client.get(path)
        assert page.status_code == 200, (path, page.text[:500])
        assert CAUTION in page.text, path
        assert "Content-Security-Policy" in page.headers
