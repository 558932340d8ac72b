"""The review workflow through the API: comments, four eyes, roles, status filters, periods, sign-off."""

from __future__ import annotations

import io

import numpy as np
import pandas as pd
import pytest
from fastapi.testclient import TestClient

from riskshape.store import open_store, verify_chain
from tests.kit.archive import make_alerts, manifest, walk_prices
from tests.kit.service import cautioned

N_ALERTS = 5


@pytest.fixture
def seeded(store_url: str, keys: dict[str, str], rng: np.random.Generator) -> dict[str, object]:
    """Portfolio 'Fund North' with N_ALERTS alerts from 2030-02-01, and a second reviewer's key."""
    with open_store(store_url) as store:
        store.create_portfolio("Fund North")
        run = store.create_run("Fund North", manifest(), walk_prices(rng))
        added = store.append_alerts(make_alerts(rng, N_ALERTS, start="2030-02-01"), run.id).added
        second = store.create_api_key("second-owner", "reviewer").token
    return {"ids": [a.id for a in added], "ends": [a.window_end.isoformat() for a in added], "second": second}


def _review(client: TestClient, headers: dict[str, str], alert_id: object, action: str, comment: str = ""):
    return client.post(f"/v1/alerts/{alert_id}/reviews", json={"action": action, "comment": comment}, headers=headers)


def test_empty_comments_are_refused(client: TestClient, auth, seeded: dict) -> None:
    first = seeded["ids"][0]
    for action in ("dismiss", "escalate"):
        for comment in ("", "  "):
            refused = _review(client, auth("reviewer"), first, action, comment)
            assert refused.status_code == 422 and "comment" in cautioned(refused)["detail"]
    assert cautioned(client.get(f"/v1/alerts/{first}", headers=auth("reader")))["reviews"] == []


def test_reader_and_ingest_cannot_review(client: TestClient, auth, seeded: dict) -> None:
    for role in ("reader", "ingest"):
        refused = _review(client, auth(role), seeded["ids"][0], "acknowledge")
        assert refused.status_code == 403
    signed = client.post(
        "/v1/audit/sign-offs", json={"start": "2030-01-01", "end": "2030-12-31"}, headers=auth("reader")
    )
    assert signed.status_code == 403


def test_four_eyes_and_status(client: TestClient, auth, seeded: dict, store_url: str) -> None:
    first = seeded["ids"][0]
    second_reviewer = {"X-Riskshape-Key": seeded["second"]}
    made = cautioned(_review(client, auth("reviewer"), first, "escalate", "looks real"))
    assert made["status"] == "escalated"
    same = _review(client, auth("reviewer"), first, "close", "done")
    assert same.status_code == 409 and "four eyes" in cautioned(same)["detail"]
    closed = _review(client, second_reviewer, first, "close", "agreed")
    assert closed.status_code == 201 and cautioned(closed)["status"] == "closed"
    again = _review(client, second_reviewer, first, "acknowledge")
    assert again.status_code == 409
    detail = cautioned(client.get(f"/v1/alerts/{first}", headers=auth("reader")))
    assert detail["status"] == "closed" and detail["alert"]["status"] == "closed"
    assert [(r["action"], r["reviewer"], r["comment"]) for r in detail["reviews"]] == [
        ("escalate", "reviewer-owner", "looks real"),
        ("close", "second-owner", "agreed"),
    ]
    with open_store(store_url) as store:
        assert verify_chain(store).ok


def test_status_filters_lists_and_counts(client: TestClient, auth, seeded: dict) -> None:
    ids = seeded["ids"]
    _review(client, auth("reviewer"), ids[0], "escalate", "why")
    _review(client, auth("reviewer"), ids[1], "dismiss", "noise")
    everything = cautioned(client.get("/v1/alerts", headers=auth("reader")))
    assert [a["status"] for a in everything["items"]][:3] == ["open"] * 3  # open first
    assert everything["counts"] == {"open": 3, "acknowledged": 0, "escalated": 1, "dismissed": 1, "closed": 0}
    for params in ({"status": "escalated,dismissed"}, [("status", "escalated"), ("status", "dismissed")]):
        page = cautioned(client.get("/v1/alerts", params=params, headers=auth("reader")))
        assert sorted(a["id"] for a in page["items"]) == sorted(ids[:2])
    mixed = [("status", "open,escalated"), ("status", "dismissed")]
    assert cautioned(client.get("/v1/alerts", params=mixed, headers=auth("reader")))["total"] == N_ALERTS
    unknown = client.get("/v1/alerts", params={"status": "pending"}, headers=auth("reader"))
    assert unknown.status_code == 422 and "pending" in cautioned(unknown)["detail"]
    bad_severity = client.get("/v1/alerts", params={"severity": "warning,loud"}, headers=auth("reader"))
    assert bad_severity.status_code == 422
    ok_severity = client.get("/v1/alerts", params={"severity": "info,warning"}, headers=auth("reader"))
    assert cautioned(ok_severity)["total"] == N_ALERTS


def test_start_after_end_is_a_422_that_says_so(client: TestClient, auth, seeded: dict) -> None:
    ends = seeded["ends"]
    backwards = {"start": ends[-1], "end": ends[0]}
    for path, headers in (("/v1/alerts", auth("reader")), ("/v1/export/alerts", auth("reviewer"))):
        refused = client.get(path, params=backwards, headers=headers)
        assert refused.status_code == 422 and f"start {ends[-1]} is after end {ends[0]}" in cautioned(refused)["detail"]
    old = client.get("/v1/export/alerts", params={"from": ends[1], "to": ends[2]}, headers=auth("reviewer"))
    assert old.headers["Deprecation"] == "true"
    table = pd.read_csv(io.StringIO(cautioned(old)))
    assert list(table["window_end"]) == ends[1:3]
    both = client.get("/v1/alerts", params={"start": ends[0], "since": ends[0]}, headers=auth("reader"))
    assert both.status_code == 422


def test_sign_off_refused_with_the_open_alerts_then_recorded(client: TestClient, auth, seeded: dict) -> None:
    ids, ends = seeded["ids"], seeded["ends"]
    period = {"start": ends[0], "end": ends[-1], "portfolios": ["Fund North"]}
    _review(client, auth("reviewer"), ids[0], "escalate", "why")
    refused = client.post("/v1/audit/sign-offs", json=period, headers=auth("reviewer"))
    detail = cautioned(refused)["detail"]
    assert refused.status_code == 409 and f"{N_ALERTS} alert(s) still open or escalated" in detail
    assert all(f"{i} (Fund North" in detail for i in ids)
    _review(client, {"X-Riskshape-Key": seeded["second"]}, ids[0], "close", "fine")
    for alert_id in ids[1:]:
        _review(client, auth("reviewer"), alert_id, "acknowledge")
    head = cautioned(client.get("/v1/audit/head", headers=auth("reviewer")))["head"]
    made = client.post("/v1/audit/sign-offs", json=period, headers=auth("reviewer"))
    signed = cautioned(made)
    assert made.status_code == 201 and signed["chain_head"] == head and signed["signer"] == "reviewer-owner"
    assert signed["counts"] == {"open": 0, "acknowledged": N_ALERTS - 1, "escalated": 0, "dismissed": 0, "closed": 1}
    listed = cautioned(client.get("/v1/audit/sign-offs", headers=auth("reader")))
    assert listed["total"] == 1 and listed["items"][0] == signed | {"caution": listed["items"][0]["caution"]}
    backwards = client.post("/v1/audit/sign-offs", json={"start": ends[-1], "end": ends[0]}, headers=auth("reviewer"))
    assert backwards.status_code == 422 and "is after end" in cautioned(backwards)["detail"]
    verified = cautioned(client.get("/v1/audit/verify", headers=auth("reviewer")))
    assert verified["ok"] is True
