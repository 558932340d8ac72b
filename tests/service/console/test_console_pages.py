"""The console's pages over a real archive, through FastAPI's test client."""

from __future__ import annotations

import csv
import io
import json

import pandas as pd
from fastapi.testclient import TestClient

from riskshape import reproduce_alert_now
from riskshape.caution import CAUTION
from riskshape.outputs import palette
from riskshape.store import open_store
from tests.kit.service import csv_body
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


def test_the_queue_filters_and_counts(client: TestClient, keys: dict[str, str], loaded: int) -> None:
    sign_in(client, keys["reviewer"])
    every = client.get("/console/alerts", params={"portfolio": PORTFOLIO})
    assert f"{loaded} alerts match" in every.text
    critical = client.get("/console/alerts", params={"portfolio": PORTFOLIO, "severity": "critical"})
    api = client.get(
        "/v1/alerts",
        params={"portfolio": PORTFOLIO, "severity": "critical"},
        headers={"X-Riskshape-Key": keys["reader"]},
    ).json()["total"]
    assert f"{api} alerts match" in critical.text  # the same count as the API's filter
    assert critical.text.count('class="shape shape-warning"') == 0
    backwards = client.get("/console/alerts", params={"start": "2031-03-01", "end": "2031-02-01"})
    assert backwards.status_code == 422 and "after" in backwards.text


def test_downloads_of_the_period_read_back(client: TestClient, keys: dict[str, str], loaded: int) -> None:
    sign_in(client, keys["reviewer"])
    period = {"start": "2000-01-01", "end": "2100-12-31", "portfolio": PORTFOLIO}
    csv_file = client.get("/console/audit/download", params={**period, "what": "csv"})
    assert csv_file.status_code == 200 and csv_file.headers["content-type"].startswith("text/csv")
    assert "attachment" in csv_file.headers["content-disposition"]
    rows = list(csv.reader(io.StringIO(csv_file.text)))
    assert sum(1 for r in rows if PORTFOLIO in r) == loaded  # one row per alert
    table = pd.read_csv(io.StringIO(client.get("/console/audit/download", params={**period, "what": "csv"}).text))
    assert len(table) == loaded  # pandas reads it with no options: a header row, one row per alert
    reviews_file = client.get("/console/audit/download", params={**period, "what": "reviews"})
    assert reviews_file.status_code == 200 and "reviews" in reviews_file.headers["content-disposition"]
    jsonl = client.get("/console/audit/download", params={**period, "what": "jsonl"})
    records = [json.loads(line) for line in jsonl.text.splitlines() if line.strip()]
    assert sum(1 for r in records if r.get("portfolio") == PORTFOLIO) == loaded
    report = client.get("/console/audit/download", params={**period, "what": "report"})
    assert report.status_code == 200 and CAUTION in report.text and PORTFOLIO in report.text
    wrong = client.get("/console/audit/download", params={"start": "2031-03-01", "end": "2031-01-01", "what": "csv"})
    assert wrong.status_code == 422 and "after" in wrong.text


def test_unknown_pages_and_the_style_sheets(client: TestClient, keys: dict[str, str]) -> None:
    sign_in(client, keys["reader"])
    assert client.get("/console/portfolios/Nowhere").status_code == 404
    assert client.get("/console/alerts/999999").status_code == 404
    css = client.get("/console/static/console.css")
    assert css.status_code == 200 and "text/css" in css.headers["content-type"]
    palette_css = client.get("/console/palette.css").text
    assert palette.SEVERITIES["critical"].color in palette_css  # the console's colours are the palette's


def test_counts_read_in_the_right_number(client: TestClient, keys: dict[str, str], loaded: int) -> None:
    from riskshape_service.console.pages import counted

    assert [counted(n, "review") for n in (0, 1, 2)] == ["0 reviews", "1 review", "2 reviews"]
    assert counted([1], "entry", "entries") == "1 entry" and counted(3, "entry", "entries") == "3 entries"
    csrf = sign_in(client, keys["reviewer"])
    first = client.get("/v1/alerts", headers={"X-Riskshape-Key": keys["reader"]}).json()["items"][0]["id"]
    assert "0 reviews, oldest first" in client.get(f"/console/alerts/{first}").text
    client.post(f"/console/alerts/{first}/review", data={"action": "acknowledge", "csrf": csrf})
    page = client.get(f"/console/alerts/{first}").text
    assert "1 review, oldest first" in page and "1 reviews" not in page
    one = client.get("/console/alerts", params={"portfolio": PORTFOLIO, "status": "acknowledged"}).text
    assert "1 alert matches" in one
    assert "0 periods signed off" in client.get("/console/audit").text


def test_a_refused_form_keeps_what_was_typed(client: TestClient, keys: dict[str, str], loaded: int) -> None:
    csrf = sign_in(client, keys["reviewer"])
    first = client.get("/v1/alerts", headers={"X-Riskshape-Key": keys["reader"]}).json()["items"][0]["id"]
    period = {"start": "2000-01-01", "end": "2100-12-31", "portfolio": PORTFOLIO, "csrf": csrf}
    refused = client.post("/console/audit/sign-off", data=period)  # its alerts are open
    assert refused.status_code == 409 and "still open or escalated" in refused.text
    assert 'name="start" type="date" required value="2000-01-01"' in refused.text
    assert 'name="end" type="date" required value="2100-12-31"' in refused.text
    assert f'name="portfolio" value="{PORTFOLIO}" checked' in refused.text
    listed = client.get("/v1/alerts", params={"portfolio": PORTFOLIO}, headers={"X-Riskshape-Key": keys["reader"]})
    for alert in listed.json()["items"]:  # each open item links to its review form
        assert f'<a href="/console/alerts/{alert["id"]}">Alert {alert["id"]}</a>' in refused.text
    typed = "Spread widening in two sectors"
    no_comment = client.post(
        f"/console/alerts/{first}/review", data={"action": "dismiss", "comment": " ", "csrf": csrf}
    )
    assert no_comment.status_code == 422 and '<option value="dismiss" selected>' in no_comment.text
    kept = client.post(f"/console/alerts/{first}/review", data={"action": "close", "comment": typed, "csrf": csrf})
    assert kept.status_code == 409 and f">{typed}</textarea>" in kept.text  # close does not apply to an open alert


def _reproduced(client: TestClient, csrf: str, alert_id: int) -> str:
    page = client.post(f"/console/alerts/{alert_id}/reproduce", data={"csrf": csrf})
    assert page.status_code == 200, page.text[:500]
    assert CAUTION in page.text
    return page.text


def test_reproduce_shows_the_alert_as_known_then_and_now(
    client: TestClient, keys: dict[str, str], loaded: int, store_url: str, scenario_prices: pd.DataFrame
) -> None:
    # The reference for "now" is riskshape.reproduce_alert_now on the same archive (itself checked
    # against a fresh monitor run in tests/test_hindsight.py); the page must say what it says.
    csrf = sign_in(client, keys["reviewer"])
    reader = {"X-Riskshape-Key": keys["reader"]}
    alert = client.get("/v1/alerts", params={"portfolio": PORTFOLIO}, headers=reader).json()["items"][0]
    with open_store(store_url) as store:
        before = reproduce_alert_now(store, alert["id"])
    shown = _reproduced(client, csrf, alert["id"])
    assert "As known when it was raised" in shown and "Matches: every check passed" in shown
    assert "As known now" in shown and "0 price correction(s) since it was raised" in shown
    assert before.verdict in shown and "(unchanged)" in before.verdict
    assert "agrees with the recomputation" in shown

    # One price of the alert's day corrected through the API: then still confirms, now follows it.
    day = pd.Timestamp(alert["window_end"])
    asset = scenario_prices.loc[day].dropna().index[0]
    fixed = scenario_prices.loc[[day], [asset]] * 1.25
    answer = client.post(
        f"/v1/portfolios/{PORTFOLIO}/prices",
        params={"correction": "true"},
        content=csv_body(fixed),
        headers={"X-Riskshape-Key": keys["ingest"], "Content-Type": "text/csv"},
    )
    assert answer.status_code == 200 and answer.json()["corrections"] == 1, answer.text
    with open_store(store_url) as store:
        after = reproduce_alert_now(store, alert["id"])
    assert after.corrections == 1 and after.changed  # the correction moved the window's value
    shown = _reproduced(client, csrf, alert["id"])
    assert "Matches: every check passed" in shown  # as known then: the prices its run saw
    assert "1 price correction(s) since it was raised" in shown and after.verdict in shown
    assert before.verdict not in shown
