"""The console's gate: CSRF tokens on every form, signed and expiring sessions, roles as in the API,
four eyes, and no API key in a page, a URL, a cookie or a log.
"""

from __future__ import annotations

import logging
from collections.abc import Callable
from unittest import mock

import pytest
from fastapi.testclient import TestClient

from riskshape.store import open_store
from riskshape_service import create_app
from riskshape_service.auth import Role
from riskshape_service.console.session import COOKIE_NAME, SESSION_SECONDS, SessionSigner, new_session
from riskshape_service.settings import ServiceSettings
from tests.service.console.conftest import csrf_of, sign_in

SECRET = "console-test-secret-of-more-than-32-characters"


@pytest.fixture
def app(make_settings: Callable[..., ServiceSettings], keys: dict[str, str]):  # type: ignore[no-untyped-def]
    return create_app(make_settings(console_secret=SECRET))


def _alerts(client: TestClient, keys: dict[str, str]) -> list[int]:
    found = client.get("/v1/alerts", headers={"X-Riskshape-Key": keys["reader"]}).json()["items"]
    return [int(a["id"]) for a in found]


def _first_alert(client: TestClient, keys: dict[str, str]) -> int:
    return _alerts(client, keys)[0]


def _reviews(client: TestClient, keys: dict[str, str], alert_id: int) -> list[dict[str, object]]:
    answer = client.get(f"/v1/alerts/{alert_id}", headers={"X-Riskshape-Key": keys["reader"]})
    assert answer.status_code == 200, answer.text
    detail = answer.json()
    return list(detail["reviews"])


def _key_id(store_url: str, owner: str) -> str:
    with open_store(store_url) as store:
        return next(k.key_id for k in store.list_api_keys() if k.owner == owner)


def test_a_form_without_its_csrf_token_is_refused(client: TestClient, keys: dict[str, str], loaded: int) -> None:
    token = sign_in(client, keys["reviewer"])
    alert_id = _first_alert(client, keys)
    form = {"action": "acknowledge", "comment": ""}
    for posted in (form, {**form, "csrf": ""}, {**form, "csrf": token[:-2] + "xx"}):
        refused = client.post(f"/console/alerts/{alert_id}/review", data=posted, follow_redirects=False)
        assert refused.status_code == 403 and "security token" in refused.text
    assert _reviews(client, keys, alert_id) == []  # nothing written
    done = client.post(f"/console/alerts/{alert_id}/review", data={**form, "csrf": token}, follow_redirects=False)
    assert done.status_code == 303  # the same form with its token goes through
    assert [r["action"] for r in _reviews(client, keys, alert_id)] == ["acknowledge"]
    # sign-off and sign-out forms are guarded the same way
    assert client.post("/console/audit/sign-off", data={"start": "2031-01-01", "end": "2031-12-31"}).status_code == 403
    assert client.post("/console/sign-out", data={"next": ""}, follow_redirects=False).status_code == 403


def test_sign_in_needs_the_forms_own_token(client: TestClient, keys: dict[str, str]) -> None:
    client.get("/console/sign-in")
    refused = client.post("/console/sign-in", data={"key": keys["reviewer"], "csrf": "made-up"}, follow_redirects=False)
    assert refused.status_code == 403
    assert COOKIE_NAME not in refused.cookies


def test_forged_altered_and_expired_sessions_are_refused(
    client: TestClient, keys: dict[str, str], store_url: str, loaded: int
) -> None:
    alert_id = _first_alert(client, keys)
    session = new_session(_key_id(store_url, "reviewer-owner"), Role.reviewer, "reviewer-owner")
    genuine = SessionSigner(SECRET).dumps(session)
    forged = SessionSigner("another-secret-of-more-than-32-characters!").dumps(session)
    altered = genuine.replace(".", ".A", 1)
    with mock.patch("itsdangerous.timed.time.time", return_value=1_000_000_000.0):
        expired = SessionSigner(SECRET).dumps(session)  # signed long before SESSION_SECONDS ago
    review = {"action": "acknowledge", "csrf": session.csrf}
    for value in (forged, altered, expired, "not-a-session"):
        client.cookies.set(COOKIE_NAME, value, path="/console")
        page = client.get("/console/alerts", follow_redirects=False)
        assert page.status_code == 303 and page.headers["location"].startswith("/console/sign-in")
        posted = client.post(f"/console/alerts/{alert_id}/review", data=review, follow_redirects=False)
        assert posted.status_code == 401
    assert _reviews(client, keys, alert_id) == []
    client.cookies.set(COOKIE_NAME, genuine, path="/console")  # the genuine one is let in (the check can fail)
    assert client.get("/console/alerts", follow_redirects=False).status_code == 200
    assert SESSION_SECONDS <= 12 * 3600


def test_a_revoked_key_ends_its_session(client: TestClient, keys: dict[str, str], store_url: str) -> None:
    sign_in(client, keys["reviewer"])
    assert client.get("/console/", follow_redirects=False).status_code == 200
    with open_store(store_url) as store:
        store.revoke_api_key(_key_id(store_url, "reviewer-owner"))
    assert client.get("/console/", follow_redirects=False).status_code == 303


def test_a_reader_sees_but_cannot_review(client: TestClient, keys: dict[str, str], loaded: int) -> None:
    token = sign_in(client, keys["reader"])
    alert_id = _first_alert(client, keys)
    page = client.get(f"/console/alerts/{alert_id}")
    assert page.status_code == 200 and 'action="/console/alerts/' in page.text
    assert "may read this alert but not review it" in page.text
    posted = client.post(f"/console/alerts/{alert_id}/review", data={"action": "acknowledge", "csrf": token})
    assert posted.status_code == 403
    assert _reviews(client, keys, alert_id) == []
    assert client.get("/console/audit").status_code == 403  # as GET /v1/audit/verify is for reviewers
    signed = client.post("/console/audit/sign-off", data={"start": "2031-01-01", "end": "2031-12-31", "csrf": token})
    assert signed.status_code == 403


def test_the_reviewer_who_escalated_cannot_close(
    client: TestClient, keys: dict[str, str], second_reviewer: str, loaded: int
) -> None:
    token = sign_in(client, keys["reviewer"])
    alert_id, other_id = _alerts(client, keys)[:2]
    escalate = {"action": "escalate", "comment": "needs a second look", "csrf": token}
    assert client.post(f"/console/alerts/{alert_id}/review", data=escalate, follow_redirects=False).status_code == 303
    refused = client.post(f"/console/alerts/{alert_id}/review", data={"action": "close", "csrf": token})
    assert refused.status_code == 409 and "four eyes" in refused.text
    no_comment = client.post(f"/console/alerts/{other_id}/review", data={"action": "dismiss", "csrf": token})
    assert no_comment.status_code == 422 and "comment" in no_comment.text
    other = TestClient(client.app)  # type: ignore[arg-type]  # a second browser on the same running app
    second = sign_in(other, second_reviewer)
    closed = other.post(
        f"/console/alerts/{alert_id}/review", data={"action": "close", "csrf": second}, follow_redirects=False
    )
    assert closed.status_code == 303
    assert [(r["action"], r["reviewer"]) for r in _reviews(client, keys, alert_id)] == [
        ("escalate", "reviewer-owner"),
        ("close", "second-reviewer"),
    ]


def test_no_key_in_a_page_a_url_a_cookie_or_a_log(
    client: TestClient, keys: dict[str, str], loaded: int, caplog: pytest.LogCaptureFixture
) -> None:
    token = keys["reviewer"]
    caplog.set_level(logging.DEBUG)
    answers = []
    page = client.get("/console/sign-in")
    answers.append(page)
    signed = client.post(
        "/console/sign-in",
        data={"key": token, "csrf": csrf_of(page.text), "next": "/console/alerts"},
        follow_redirects=False,
    )
    answers.append(signed)
    wrong = client.get("/console/sign-in")
    answers.append(client.post("/console/sign-in", data={"key": token + "x", "csrf": csrf_of(wrong.text)}))
    alert_id = _first_alert(client, keys)
    for path in ("/console/", "/console/alerts", f"/console/alerts/{alert_id}", "/console/audit"):
        answers.append(client.get(path))
    for answer in answers:
        assert token not in answer.text and token not in str(answer.url)
        assert all(token not in value for value in answer.headers.values())
    assert signed.headers["location"] == "/console/alerts"
    assert token not in caplog.text
    assert all(token not in str(record.__dict__) for record in caplog.records)


def test_the_session_cookie_is_httponly_strict_expiring_and_secure_over_tls(app: object, keys: dict[str, str]) -> None:
    for base, secure in (("http://testserver", False), ("https://testserver", True)):
        with TestClient(app, base_url=base) as client:  # type: ignore[arg-type]
            page = client.get("/console/sign-in")
            answer = client.post(
                "/console/sign-in", data={"key": keys["reader"], "csrf": csrf_of(page.text)}, follow_redirects=False
            )
            cookie = next(v for k, v in answer.headers.multi_items() if k == "set-cookie" and COOKIE_NAME in v)
            flags = {part.strip().split("=")[0].lower() for part in cookie.split(";")}
            assert {"httponly", "max-age", "path"} <= flags and "samesite=strict" in cookie.lower()
            assert ("secure" in flags) is secure
            out = client.post("/console/sign-out", data={"csrf": csrf_of(client.get("/console/").text)})
            assert out.url.path == "/console/sign-in"
            assert client.get("/console/", follow_redirects=False).status_code == 303  # signed out
