"""The console's keys page: an admin lists, creates and revokes keys; other roles are refused; a new
key's token is shown once (on the page answering the creation form) and never in a URL, a header,
a later page or a log.
"""

from __future__ import annotations

import html
import logging
import re

import pytest
from fastapi.testclient import TestClient

from riskshape.store import open_store
from tests.service.console.conftest import sign_in

NEW_TOKEN = re.compile(r'id="new-token"[^>]*value="([^"]+)"')


def _key_rows(html: str) -> list[str]:
    return re.findall(r'<td class="hash">([0-9a-f]{16})</td>', html)


def test_an_admin_creates_and_revokes_a_key(
    client: TestClient, keys: dict[str, str], store_url: str, caplog: pytest.LogCaptureFixture
) -> None:
    caplog.set_level(logging.DEBUG)
    csrf = sign_in(client, keys["admin"])
    listing = client.get("/console/keys")
    assert listing.status_code == 200
    with open_store(store_url) as store:
        before = store.list_api_keys()
    assert sorted(_key_rows(listing.text)) == sorted(k.key_id for k in before)
    assert all(token not in listing.text for token in keys.values())  # secrets never listed

    made = client.post("/console/keys", data={"owner": "Analyst Vey", "role": "reviewer", "csrf": csrf})
    assert made.status_code == 200 and "only time it is shown" in made.text
    found = NEW_TOKEN.search(made.text)
    assert found is not None
    token = found.group(1)
    assert made.text.count(token) == 1  # once on the page
    assert token not in str(made.url) and all(token not in v for v in made.headers.values())
    with open_store(store_url) as store:
        key = store.lookup_api_key(token)  # the token shown is a working key of the chosen role and owner
        assert key is not None and (key.role, key.owner, key.revoked) == ("reviewer", "Analyst Vey", False)
    later = [client.get("/console/keys"), client.get("/console/"), client.get("/console/audit")]
    assert all(token not in page.text for page in later)  # never again
    assert key.key_id in later[0].text

    other = TestClient(client.app)  # the new holder signs in with it
    sign_in(other, token)
    assert other.get("/console/alerts", follow_redirects=False).status_code == 200

    revoked = client.post(f"/console/keys/{key.key_id}/revoke", data={"csrf": csrf})
    assert revoked.status_code == 200 and f"Key {key.key_id}" in revoked.text and "revoked" in revoked.text
    with open_store(store_url) as store:
        assert store.lookup_api_key(token).revoked  # type: ignore[union-attr]
    assert other.get("/console/alerts", follow_redirects=False).status_code == 303  # its session ended
    assert token not in caplog.text and all(token not in str(r.__dict__) for r in caplog.records)


def test_forms_of_the_keys_page_need_their_csrf_token(client: TestClient, keys: dict[str, str], store_url: str) -> None:
    csrf = sign_in(client, keys["admin"])
    with open_store(store_url) as store:
        before = store.list_api_keys()
    reviewer_id = next(k.key_id for k in before if k.owner == "reviewer-owner")
    for posted in ({}, {"csrf": ""}, {"csrf": csrf[:-2] + "xx"}):
        made = client.post("/console/keys", data={"owner": "Analyst Vey", "role": "admin", **posted})
        assert made.status_code == 403 and "security token" in made.text
        gone = client.post(f"/console/keys/{reviewer_id}/revoke", data={"key_id": reviewer_id, **posted})
        assert gone.status_code == 403
    with open_store(store_url) as store:
        assert store.list_api_keys() == before  # nothing created, nothing revoked


@pytest.mark.parametrize("role", ["reader", "ingest", "reviewer"])
def test_only_an_admin_manages_keys(client: TestClient, keys: dict[str, str], store_url: str, role: str) -> None:
    csrf = sign_in(client, keys[role])
    assert 'href="/console/keys"' not in client.get("/console/").text  # not offered
    page = client.get("/console/keys")
    assert page.status_code == 403 and "admin" in page.text
    with open_store(store_url) as store:
        before = store.list_api_keys()
    admin_id = next(k.key_id for k in before if k.role == "admin")
    assert client.post("/console/keys", data={"owner": "Someone", "role": "admin", "csrf": csrf}).status_code == 403
    assert client.post(f"/console/keys/{admin_id}/revoke", data={"csrf": csrf}).status_code == 403
    with open_store(store_url) as store:
        assert store.list_api_keys() == before


def test_a_refused_creation_keeps_what_was_typed(client: TestClient, keys: dict[str, str], store_url: str) -> None:
    csrf = sign_in(client, keys["admin"])
    assert 'href="/console/keys"' in client.get("/console/").text
    wrong_role = client.post("/console/keys", data={"owner": "Analyst Vey", "role": "owner", "csrf": csrf})
    assert wrong_role.status_code == 422 and "role: 'owner' is not one of" in html.unescape(wrong_role.text)
    assert 'value="Analyst Vey"' in wrong_role.text
    no_owner = client.post("/console/keys", data={"owner": "  ", "role": "reader", "csrf": csrf})
    assert no_owner.status_code == 422 and "owner: write who will hold the key" in no_owner.text
    unknown = client.post("/console/keys/0123456789abcdef/revoke", data={"csrf": csrf})
    assert unknown.status_code == 404 and "does not exist" in unknown.text
    with open_store(store_url) as store:
        assert len(store.list_api_keys()) == len(keys)
