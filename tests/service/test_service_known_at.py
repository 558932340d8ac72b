"""Point-in-time reads through the service: ``as_known_at`` answers exactly what riskshape showed then.

Each read is captured before a correction, the correction is made (and a review after it), and the
same read asked ``as_known_at`` the moment of the capture must give the same bytes -- on SQLite and
on PostgreSQL -- while the current read has moved (so the comparison can fail). The reference is the
service's own earlier answer (DESIGN.md, "The daily loop": reads answer "as known at T" on request).
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from datetime import datetime, timezone
from pathlib import Path

import pandas as pd
import pytest
from fastapi.testclient import TestClient

from riskshape.store import open_store
from riskshape_service import create_app
from riskshape_service.settings import ServiceSettings
from tests.kit.corrected import PORTFOLIO, archive_portfolio, correct_day, corrected_prices, rules_config
from tests.kit.postgres import fresh_schema_url

BASE = f"/v1/portfolios/{PORTFOLIO.replace(' ', '%20')}"


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def store_url(request: pytest.FixtureRequest, tmp_path: Path) -> Iterator[str]:
    if request.param == "sqlite":
        yield f"sqlite:///{tmp_path / 'archive.sqlite'}"
        return
    with fresh_schema_url("rs_known") as url:
        yield url


def _reads(alert_id: int, window_end: str) -> dict[str, str]:
    return {
        "series": f"{BASE}/series?limit=500",
        "series page": f"{BASE}/series?limit=7&offset=3&summaries=mean_correlation",
        "latest": f"{BASE}/latest",
        "diagram h0": f"{BASE}/diagrams/{window_end}?dim=0",
        "diagram h1": f"{BASE}/diagrams/{window_end}?dim=1",
        "alerts": "/v1/alerts?limit=500",
        "alert": f"/v1/alerts/{alert_id}",
        "export": "/v1/export/alerts?format=csv",
        "export reviews": "/v1/export/alerts?format=jsonl&what=reviews",
    }


def _at(path: str, moment: str) -> str:
    return f"{path}{'&' if '?' in path else '?'}as_known_at={moment.replace('+', '%2B')}"


def test_reads_as_known_before_a_correction_equal_the_reads_made_then(
    store_url: str,
    make_settings: Callable[..., ServiceSettings],
    keys: dict[str, str],
    auth: Callable[[str], dict[str, str]],
) -> None:
    prices = corrected_prices()
    config = rules_config(prices)
    with open_store(store_url) as store:
        raised = archive_portfolio(store, prices, config)
    first = raised[0]
    day = pd.Timestamp(first.window_end)
    window_end = str(first.window_end)
    with TestClient(create_app(make_settings())) as client:
        headers = auth("reviewer")
        reviewed = client.post(f"/v1/alerts/{first.id}/reviews", json={"action": "acknowledge"}, headers=headers)
        assert reviewed.status_code in (200, 201), reviewed.text
        reads = _reads(first.id, window_end)
        then = {name: client.get(path, headers=headers) for name, path in reads.items()}
        assert all(r.status_code == 200 for r in then.values()), {n: r.text for n, r in then.items()}
        moment = datetime.now(timezone.utc).isoformat()
        exports_then = {
            n: client.get(_at(reads[n], moment), headers=headers).text for n in ("export", "export reviews")
        }

        with open_store(store_url) as store:  # a bad print on the alert's own day, corrected
            correct_day(store, prices, config, day, [1.3, 0.8, 1.1, 0.7, 1.2])
            store.append_review(first.id, "escalate", "second-owner", "after the correction")

        for name, path in reads.items():
            known = client.get(_at(path, moment), headers=headers)
            assert known.status_code == 200, (name, known.text)
            assert known.headers["X-Riskshape-Known-At"] == datetime.fromisoformat(moment).isoformat()
            if name.startswith("export"):
                assert known.content == exports_then[name].encode("utf-8"), name
                assert known.text.replace(moment, "current") == then[name].text, name
            else:
                assert known.content == then[name].content, name
        now = {name: client.get(path, headers=headers) for name, path in reads.items()}
    for name in ("series", "latest", "alerts", "alert", "export reviews"):
        assert now[name].content != then[name].content, f"{name} did not change: the comparison cannot fail"
    assert now["latest"].headers["X-Riskshape-Known-At"] == "current"


@pytest.mark.parametrize("value", ["yesterday", "2031-01-07T10:00:00", "2031-13-01T00:00:00Z"])
def test_a_bad_moment_is_a_422_naming_the_field_and_the_format(
    client: TestClient, auth: Callable[[str], dict[str, str]], value: str
) -> None:
    for path in ("/v1/portfolios/any/latest", "/v1/portfolios/any/series", "/v1/alerts", "/v1/alerts/1"):
        answer = client.get(path, params={"as_known_at": value}, headers=auth("reviewer"))
        assert answer.status_code == 422, (path, answer.text)
        assert "as_known_at" in answer.text and "ISO 8601 with a timezone" in answer.text, answer.text


def test_an_alert_raised_after_the_moment_is_absent(
    store_url: str, make_settings: Callable[..., ServiceSettings], keys: dict[str, str], auth
) -> None:
    prices = corrected_prices()
    config = rules_config(prices)
    before = datetime.now(timezone.utc).isoformat()
    with open_store(store_url) as store:
        raised = archive_portfolio(store, prices, config)
    with TestClient(create_app(make_settings())) as client:
        headers = auth("reader")
        listed = client.get("/v1/alerts", params={"as_known_at": before}, headers=headers).json()
        assert listed["total"] == 0 and len(raised) > 0
        assert (
            client.get(f"/v1/alerts/{raised[0].id}", params={"as_known_at": before}, headers=headers).status_code == 404
        )
        latest = client.get(f"{BASE}/latest", params={"as_known_at": before}, headers=headers).json()
        assert latest["n_windows"] == 0 and latest["active_alerts"] == []
        assert client.get("/v1/alerts", headers=headers).json()["total"] == len(raised)
