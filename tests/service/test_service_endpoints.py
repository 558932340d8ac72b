"""Endpoint tests over a SQLite archive (FastAPI TestClient): what each endpoint returns, checked
against the library computing the same thing directly (riskshape.monitor on the same prices).
"""

from __future__ import annotations

import io
import json
import logging
from collections.abc import Callable

import numpy as np
import pandas as pd
import pytest
from fastapi.testclient import TestClient
from prometheus_client.parser import text_string_to_metric_families

from riskshape import monitor
from riskshape.alerts import rule_states
from riskshape.archive import reproduce_alert
from riskshape.caution import CAUTION
from riskshape.store import open_store
from riskshape_service.logs import JsonFormatter
from tests.kit.service import cautioned, csv_body, long_rows, wide_rows

Auth = Callable[[str], dict[str, str]]
N_FIRST = 45  # price dates ingested by the `loaded` fixture


@pytest.fixture
def loaded(client: TestClient, auth: Auth, scenario_prices: pd.DataFrame) -> dict[str, object]:
    """Portfolio 'alpha' with the first N_FIRST dates ingested as one CSV body."""
    assert client.post("/v1/portfolios", json={"name": "alpha"}, headers=auth("admin")).status_code == 201
    response = client.post(
        "/v1/portfolios/alpha/prices",
        content=csv_body(scenario_prices.iloc[:N_FIRST]),
        headers={**auth("ingest"), "Content-Type": "text/csv"},
    )
    assert response.status_code == 200, response.text
    return cautioned(response)  # type: ignore[return-value]


@pytest.fixture
def batch(client: TestClient, scenario_prices: pd.DataFrame):
    """The same dates through the library directly, with the service's configuration."""
    config = client.app.state.context.config  # type: ignore[attr-defined]
    return monitor(scenario_prices.iloc[:N_FIRST].sort_index(axis=1), config)  # a portfolio's assets are in name order


def test_health_names_the_archive_and_carries_the_caution(client: TestClient) -> None:
    response = client.get("/v1/health")
    body = cautioned(response)
    assert response.status_code == 200
    assert body["status"] == "ok" and body["store"]["ok"] is True and body["store"]["dialect"] == "sqlite"


def test_portfolios_create_list_and_conflict(client: TestClient, auth: Auth) -> None:
    made = client.post("/v1/portfolios", json={"name": "beta"}, headers=auth("admin"))
    assert made.status_code == 201 and cautioned(made)["portfolio"]["name"] == "beta"
    again = client.post("/v1/portfolios", json={"name": "beta"}, headers=auth("admin"))
    assert again.status_code == 409 and "already exists" in cautioned(again)["detail"]
    listed = cautioned(client.get("/v1/portfolios", headers=auth("reader")))
    assert [p["name"] for p in listed["items"]] == ["beta"]


def test_a_portfolio_without_windows_has_an_empty_series_and_state(client: TestClient, auth: Auth) -> None:
    assert client.post("/v1/portfolios", json={"name": "empty"}, headers=auth("admin")).status_code == 201
    page = cautioned(
        client.get(
            "/v1/portfolios/empty/series", params={"start": "2031-01-01", "end": "2031-12-31"}, headers=auth("reader")
        )
    )
    assert page["total"] == 0 and page["rows"] == [] and page["next_offset"] is None
    state = cautioned(client.get("/v1/portfolios/empty/latest", headers=auth("reader")))
    assert state["n_windows"] == 0 and state["window_end"] is None and state["active_alerts"] == []


def test_ingest_reports_the_windows_it_computed(loaded: dict, batch) -> None:
    assert loaded["windows_added"] == len(batch.window_ends)
    assert loaded["first_window"] == str(batch.window_ends[0].date())
    assert loaded["last_window"] == str(batch.window_ends[-1].date())
    assert loaded["prices_added"] == batch.prices.size  # cells, missing ones included (archived as missing)
    assert loaded["run_id"] is not None


def test_a_correction_inside_the_windows_is_archived_and_used_from_then_on(
    client: TestClient, auth: Auth, loaded: dict, batch, scenario_prices: pd.DataFrame
) -> None:
    prices = scenario_prices.iloc[: N_FIRST + 1].sort_index(axis=1)
    revised = prices.copy()
    day, asset = prices.index[30], str(prices.columns[0])
    revised.loc[day, asset] *= 1.05
    body = wide_rows(revised.loc[[day]])
    refused = client.post("/v1/portfolios/alpha/prices", json=body, headers=auth("ingest"))
    assert refused.status_code == 409 and asset in cautioned(refused)["detail"]
    fixed = cautioned(
        client.post("/v1/portfolios/alpha/prices", json=body, params={"correction": True}, headers=auth("ingest"))
    )
    assert fixed["corrections"] == 1 and fixed["windows_added"] == 0
    # the windows holding that day's returns (day 30 and the next, up to the window length) would change
    assert fixed["windows_differing"] == sum(
        1 for end in batch.window_ends if prices.index[30] <= end <= prices.index[min(30 + 20, N_FIRST - 1)]
    )
    archived = cautioned(
        client.get("/v1/portfolios/alpha/series", params={"start": str(day.date()), "limit": 1}, headers=auth("reader"))
    )
    # superseded: the series answers with the new version, equal to a fresh run over the corrected history
    fresh = monitor(revised.iloc[:N_FIRST], batch.config).features
    assert archived["rows"][0]["values"][2] == fresh.loc[day, "mean_correlation"]
    assert fresh.loc[day, "mean_correlation"] != batch.features.loc[day, "mean_correlation"]
    following = cautioned(
        client.post("/v1/portfolios/alpha/prices", json=wide_rows(revised.iloc[[N_FIRST]]), headers=auth("ingest"))
    )
    assert following["windows_added"] == 1
    expected = monitor(revised, batch.config).features.iloc[-1]  # the new window sees the corrected history
    got = cautioned(client.get("/v1/portfolios/alpha/latest", headers=auth("reader")))["values"]
    assert got["mean_correlation"] == expected["mean_correlation"] and got["h1_entropy"] == expected["h1_entropy"]


def test_latest_state_is_the_last_window_of_the_batch(client: TestClient, auth: Auth, loaded: dict, batch) -> None:
    body = cautioned(client.get("/v1/portfolios/alpha/latest", headers=auth("reader")))
    last = batch.features.iloc[-1]
    assert body["window_end"] == str(batch.window_ends[-1].date())
    assert body["n_windows"] == len(batch.window_ends)
    for name, value in last.items():
        expected = None if not np.isfinite(value) else float(value)
        assert body["values"][name] == expected, name
    assert {r["rule"] for r in body["rules"]} == {"corr_high", "h0_jump"}
    for state in rule_states(batch.features, batch.config.alerts.rules):  # whether each rule can fire yet
        served = next(r for r in body["rules"] if r["rule"] == state.rule)
        assert (served["can_fire"], served["windows_to_go"]) == (state.can_fire, state.windows_to_go)
        assert (served["history"], served["history_needed"]) == (state.history, state.history_needed)
    for alert in body["active_alerts"]:  # an active alert is the firing that made its rule active
        state = next(r for r in body["rules"] if r["rule"] == alert["rule"])
        assert state["active"] and state["active_since"] == alert["window_end"]


def test_series_pages_join_up_to_the_batch_series(client: TestClient, auth: Auth, loaded: dict, batch) -> None:
    rows, offset = [], 0
    while offset is not None:
        page = cautioned(
            client.get("/v1/portfolios/alpha/series", params={"limit": 7, "offset": offset}, headers=auth("reader"))
        )
        assert page["total"] == len(batch.window_ends) and len(page["rows"]) <= 7
        rows += page["rows"]
        offset = page["next_offset"]
    assert [r["window_end"] for r in rows] == [str(d.date()) for d in batch.window_ends]
    got = np.array([[np.nan if v is None else v for v in r["values"]] for r in rows])
    assert page["columns"] == list(batch.features.columns)
    np.testing.assert_array_equal(got, batch.features.to_numpy(dtype=float))


def test_series_date_range_and_chosen_summaries(client: TestClient, auth: Auth, loaded: dict, batch) -> None:
    start, end = batch.window_ends[3].date(), batch.window_ends[9].date()
    page = cautioned(
        client.get(
            "/v1/portfolios/alpha/series",
            headers=auth("reader"),
            params={"start": str(start), "end": str(end), "summaries": ["h1_entropy", "mean_correlation"]},
        )
    )
    assert page["columns"] == ["h1_entropy", "mean_correlation"] and page["total"] == 7
    expected = batch.features.loc[str(start) : str(end), ["h1_entropy", "mean_correlation"]].to_numpy()
    np.testing.assert_array_equal(np.array([r["values"] for r in page["rows"]], dtype=float), expected)


def test_unknown_summary_is_422_naming_the_known_ones(client: TestClient, auth: Auth, loaded: dict) -> None:
    response = client.get("/v1/portfolios/alpha/series", params={"summaries": "h9_magic"}, headers=auth("reader"))
    body = cautioned(response)
    assert response.status_code == 422 and "'h9_magic'" in body["detail"] and "h1_entropy" in body["detail"]


def test_diagram_is_the_windows_float32_bars(client: TestClient, auth: Auth, loaded: dict, batch) -> None:
    end = batch.window_ends[5]
    for dim in (0, 1):
        body = cautioned(
            client.get(f"/v1/portfolios/alpha/diagrams/{end.date()}", params={"dim": dim}, headers=auth("reader"))
        )
        expected = batch.diagram(end, dim)
        assert body["n_bars"] == len(expected)
        # the archive keeps float32 bars; ripser computes in float32, so the values are equal
        np.testing.assert_array_equal(
            np.array(body["bars"], dtype=float).reshape(-1, 2), expected.astype(np.float32).astype(float)
        )
    missing = client.get("/v1/portfolios/alpha/diagrams/2030-01-01", headers=auth("reader"))
    assert missing.status_code == 404 and "no diagram" in cautioned(missing)["detail"]


def test_alerts_filters_detail_and_provenance(client: TestClient, auth: Auth, loaded: dict, batch) -> None:
    everything = cautioned(client.get("/v1/alerts", headers=auth("reader")))
    assert everything["total"] == len(loaded["alerts"]) >= 1
    critical = cautioned(client.get("/v1/alerts", params={"severity": "critical"}, headers=auth("reader")))
    assert all(a["severity"] == "critical" for a in critical["items"])
    assert critical["total"] == sum(a["severity"] == "critical" for a in everything["items"])
    first = everything["items"][0]
    ranged = cautioned(
        client.get(
            "/v1/alerts",
            headers=auth("reader"),
            params={"start": first["window_end"], "end": first["window_end"], "rule": first["rule"]},
        )
    )
    assert [a["id"] for a in ranged["items"]] == [first["id"]]
    aliased = client.get(
        "/v1/alerts",
        headers=auth("reader"),
        params={"since": first["window_end"], "until": first["window_end"], "rule": first["rule"]},
    )
    assert [a["id"] for a in cautioned(aliased)["items"]] == [first["id"]] and aliased.headers["Deprecation"] == "true"
    detail = cautioned(client.get(f"/v1/alerts/{first['id']}", headers=auth("reader")))
    assert detail["alert"] == first and detail["reviews"] == []
    provenance = detail["provenance"]
    assert provenance["inputs_hash"] == batch.window_inputs_hash(first["window_end"])
    assert provenance["config_hash"] == batch.config.hash()
    # the explanation archived with the alert is the library's explanation of that window
    from riskshape.explain import explain_alert, render_text

    expected = explain_alert(batch, first["window_end"], first["summary"])
    assert detail["explanation"] == json.loads(expected.to_json())
    assert detail["explanation_text"] == render_text(expected)
    assert client.get("/v1/alerts/999999", headers=auth("reader")).status_code == 404


def test_alerts_raised_through_the_service_reproduce_from_the_archive(loaded: dict, store_url: str) -> None:
    with open_store(store_url) as store:
        reports = [reproduce_alert(store, a["id"]) for a in loaded["alerts"]]
    assert reports and all(r.ok for r in reports), [r.failed for r in reports]


def test_review_records_the_keys_owner(client: TestClient, auth: Auth, loaded: dict) -> None:
    alert_id = loaded["alerts"][0]["id"]
    made = client.post(
        f"/v1/alerts/{alert_id}/reviews", json={"action": "escalate", "comment": "looks real"}, headers=auth("reviewer")
    )
    assert made.status_code == 201
    review = cautioned(made)["review"]
    assert review["reviewer"] == "reviewer-owner" and review["action"] == "escalate"
    forged = client.post(
        f"/v1/alerts/{alert_id}/reviews",
        headers=auth("reviewer"),
        json={"action": "dismiss", "reviewer": "someone-else"},
    )
    assert forged.status_code == 422 and "reviewer" in cautioned(forged)["detail"]
    detail = cautioned(client.get(f"/v1/alerts/{alert_id}", headers=auth("reader")))
    assert [r["reviewer"] for r in detail["reviews"]] == ["reviewer-owner"]
    escalated = cautioned(client.get("/v1/alerts", params={"status": "escalated"}, headers=auth("reader")))
    assert [(a["id"], a["status"], a["last_reviewer"]) for a in escalated["items"]] == [
        (alert_id, "escalated", "reviewer-owner")
    ]
    unreviewed = cautioned(client.get("/v1/alerts", params={"status": "open"}, headers=auth("reader")))
    assert alert_id not in [a["id"] for a in unreviewed["items"]]
    assert unreviewed["counts"]["escalated"] == 1 and unreviewed["counts"]["open"] == unreviewed["total"]
    old = client.get("/v1/alerts", params={"reviewed": True}, headers=auth("reader"))  # deprecated filter
    assert [a["id"] for a in cautioned(old)["items"]] == [alert_id] and old.headers["Deprecation"] == "true"


def test_audit_head_and_verify(client: TestClient, auth: Auth, loaded: dict) -> None:
    head = cautioned(client.get("/v1/audit/head", headers=auth("reviewer")))
    # the run's alerts and the portfolio's day state after it (riskshape.daily.tail_run.DAY_STATE)
    assert head["count"] == len(loaded["alerts"]) + 1 and head["head"] == f"{head['count']}:{head['head_hash']}"
    verified = cautioned(client.get("/v1/audit/verify", params={"expect_head": head["head"]}, headers=auth("reviewer")))
    assert verified["ok"] is True and verified["checked"] == head["count"] and verified["first_bad"] is None
    wrong = f"{head['count'] + 1}:{head['head_hash']}"
    mismatch = cautioned(client.get("/v1/audit/verify", params={"expect_head": wrong}, headers=auth("reviewer")))
    assert mismatch["ok"] is False
    malformed = client.get("/v1/audit/verify", params={"expect_head": "not-a-head"}, headers=auth("reviewer"))
    assert malformed.status_code == 422


def test_export_csv_and_jsonl_carry_the_caution(client: TestClient, auth: Auth, loaded: dict) -> None:
    csv_text = cautioned(client.get("/v1/export/alerts", params={"format": "csv"}, headers=auth("reviewer")))
    table = pd.read_csv(io.StringIO(csv_text))  # no options: the header row comes first
    assert sorted(table["id"]) == sorted(a["id"] for a in loaded["alerts"])
    assert (table["caution"] == CAUTION).all() and (table["status"] == "open").all()
    jsonl = client.get("/v1/export/alerts", params={"format": "jsonl"}, headers=auth("reviewer"))
    assert jsonl.headers["content-type"].startswith("application/x-ndjson")
    records = [json.loads(line) for line in jsonl.text.splitlines()]
    assert len(records) == len(loaded["alerts"]) and all(r["caution"] == CAUTION for r in records)
    assert {r["id"] for r in records} == {a["id"] for a in loaded["alerts"]}


def test_metrics_in_the_prometheus_text_format(client: TestClient, auth: Auth, loaded: dict) -> None:
    client.get("/v1/portfolios/alpha/latest", headers=auth("reader"))
    text = cautioned(client.get("/metrics", headers=auth("reader")))
    # parsed by the Prometheus project's own parser (prometheus_client.parser)
    families = {f.name: f for f in text_string_to_metric_families(text)}
    windows = [s.value for s in families["riskshape_windows_computed"].samples if s.name.endswith("_total")]
    assert windows == [loaded["windows_added"]]
    raised = sum(s.value for s in families["riskshape_alerts_raised"].samples if s.name.endswith("_total"))
    assert raised == len(loaded["alerts"])
    served = [
        s
        for s in families["riskshape_http_requests"].samples
        if s.name.endswith("_total") and s.labels["route"] == "/v1/portfolios/{name}/latest"
    ]
    assert served and served[0].labels["status"] == "200" and served[0].value == 1
    assert "riskshape_http_request_duration_seconds" in families


@pytest.mark.parametrize("layout", ["csv", "long", "wide"])
def test_the_three_body_layouts_archive_the_same_prices(
    layout: str, client: TestClient, auth: Auth, scenario_prices: pd.DataFrame, store_url: str
) -> None:
    part = scenario_prices.iloc[:5]
    client.post("/v1/portfolios", json={"name": "p"}, headers=auth("admin"))
    headers = auth("ingest")
    if layout == "csv":
        response = client.post(
            "/v1/portfolios/p/prices", content=csv_body(part), headers={**headers, "Content-Type": "text/csv"}
        )
    else:
        response = client.post(
            "/v1/portfolios/p/prices", json=(long_rows if layout == "long" else wide_rows)(part), headers=headers
        )
    body = cautioned(response)
    assert response.status_code == 200 and body["windows_added"] == 0 and "first window needs 21" in body["note"]
    with open_store(store_url) as store:
        archived = store.read_prices("p", assets=list(part.columns))
    # long rows leave missing cells out; every layout archives the same known prices
    pd.testing.assert_frame_equal(archived, part, check_names=False, check_freq=False, check_index_type=False)


def test_logs_are_json_lines_with_the_request_id(
    client: TestClient, auth: Auth, caplog: pytest.LogCaptureFixture
) -> None:
    with caplog.at_level(logging.INFO, logger="riskshape.service"):
        response = client.get("/v1/portfolios", headers={**auth("reader"), "X-Request-Id": "trace-42"})
    assert response.headers["X-Request-Id"] == "trace-42"
    lines = [json.loads(JsonFormatter().format(r)) for r in caplog.records if r.getMessage() == "request"]
    assert lines and lines[-1]["request_id"] == "trace-42" and lines[-1]["status"] == 200
    assert lines[-1]["route"] == "/v1/portfolios" and lines[-1]["key_id"] is not None


def test_an_unexpected_error_is_a_500_without_a_trace(client: TestClient, caplog: pytest.LogCaptureFixture) -> None:
    @client.app.get("/v1/boom")  # type: ignore[attr-defined]
    def boom() -> None:
        raise RuntimeError("secret internals")

    with caplog.at_level(logging.ERROR, logger="riskshape.service"):
        response = client.get("/v1/boom")
    body = cautioned(response)
    assert response.status_code == 500
    assert body["request_id"] == response.headers["X-Request-Id"] and body["request_id"] in body["detail"]
    assert "secret internals" not in response.text and "Traceback" not in response.text
    logged = [json.loads(JsonFormatter().format(r)) for r in caplog.records if r.exc_info]
    assert logged and "secret internals" in logged[-1]["traceback"] and logged[-1]["request_id"] == body["request_id"]
