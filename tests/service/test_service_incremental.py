"""Ingesting prices day by day gives the same summaries and alerts as one batch over the same data.

The batch side is the library alone: riskshape.monitor over all the days, and the rules
evaluated by riskshape.alerts.evaluate_rules over its features.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pandas as pd
from fastapi.testclient import TestClient

from riskshape import monitor
from riskshape.alerts import evaluate_rules
from riskshape_service.settings import ServiceSettings
from tests.kit.service import cautioned, wide_rows

Auth = Callable[[str], dict[str, str]]
N_DAYS = 48  # price dates: 28 windows of 20 returns


def _all_pages(client: TestClient, auth: Auth, path: str, key: str) -> tuple[dict, list]:
    items, offset, page = [], 0, {}
    while offset is not None:
        page = cautioned(client.get(path, params={"limit": 10, "offset": offset}, headers=auth("reader")))
        items += page[key]
        offset = page["next_offset"]
    return page, items


def test_day_by_day_equals_one_batch(client: TestClient, auth: Auth, scenario_prices: pd.DataFrame) -> None:
    prices = scenario_prices.iloc[:N_DAYS].sort_index(axis=1)  # a portfolio's assets are in name order
    config = client.app.state.context.config  # type: ignore[attr-defined]
    batch = monitor(prices, config)
    firings = evaluate_rules(batch.features, config.alerts.rules)
    assert firings, "the test configuration must raise alerts on this data for the comparison to mean something"

    assert client.post("/v1/portfolios", json={"name": "daily"}, headers=auth("admin")).status_code == 201
    windows_added = 0
    for day in range(N_DAYS):
        # wide rows with nulls: an asset not yet priced (the scenario's late listing) is still one of the
        # portfolio's assets from the first day, as in the batch
        response = client.post(
            "/v1/portfolios/daily/prices", json=wide_rows(prices.iloc[[day]]), headers=auth("ingest")
        )
        body = cautioned(response)
        assert response.status_code == 200, response.text
        expected_new = 1 if day >= config.window else 0  # one new window a day once the first is complete
        assert body["windows_added"] == expected_new, (day, body)
        windows_added += body["windows_added"]
        if day % 5 == 0:  # pollers in between see every window archived so far (no stale snapshot)
            latest = cautioned(client.get("/v1/portfolios/daily/latest", headers=auth("reader")))
            assert latest["n_windows"] == windows_added
            if windows_added:
                assert latest["window_end"] == str(prices.index[day].date())
    assert windows_added == len(batch.window_ends)

    page, rows = _all_pages(client, auth, "/v1/portfolios/daily/series", "rows")
    assert [r["window_end"] for r in rows] == [str(d.date()) for d in batch.window_ends]
    assert page["columns"] == list(batch.features.columns)
    daily = np.array([[np.nan if v is None else v for v in r["values"]] for r in rows], dtype=float)
    np.testing.assert_array_equal(daily, batch.features.to_numpy(dtype=float))

    _, alerts = _all_pages(client, auth, "/v1/alerts", "items")
    got = sorted((a["rule"], a["window_end"], a["value"], a["threshold"], a["severity"]) for a in alerts)
    want = sorted((f.rule, str(f.window_end.date()), f.value, f.threshold, f.severity) for f in firings)
    assert got == want


def test_a_portfolio_archived_elsewhere_is_continued_one_day_at_a_time(
    client: TestClient, auth: Auth, scenario_prices: pd.DataFrame, store_url: str
) -> None:
    """A portfolio archived by the library directly (as ``riskshape run --store`` does), in its file's
    asset order, then fed by the service: the service rebuilds its result once from the archive and
    adds only the new windows, equal to a batch over all the days.
    """
    from riskshape.archive import archive_run
    from riskshape.store import open_store

    config = client.app.state.context.config  # type: ignore[attr-defined]
    prices = scenario_prices.iloc[:40]  # the scenario's own (unsorted) asset order
    with open_store(store_url) as store:
        archive_run(store, "elsewhere", monitor(prices.iloc[:35], config), source="a file")
    for day in range(35, 40):
        body = cautioned(
            client.post("/v1/portfolios/elsewhere/prices", json=wide_rows(prices.iloc[[day]]), headers=auth("ingest"))
        )
        assert body["windows_added"] == 1 and body["prices_added"] == prices.shape[1]
    batch = monitor(prices, config)
    page, rows = _all_pages(client, auth, "/v1/portfolios/elsewhere/series", "rows")
    assert [r["window_end"] for r in rows] == [str(d.date()) for d in batch.window_ends]
    got = np.array([[np.nan if v is None else v for v in r["values"]] for r in rows], dtype=float)
    np.testing.assert_array_equal(got, batch.features.to_numpy(dtype=float))


def test_without_cached_results_each_day_is_recomputed_from_the_archive_alike(
    make_settings: Callable[..., object], auth: Auth, scenario_prices: pd.DataFrame
) -> None:
    """RISKSHAPE_RESULT_CACHE_SIZE=0: no result stays in memory, every new day rebuilds the result from
    the archive; two portfolios fed in turn get the batch's summaries all the same.
    """
    from riskshape_service import create_app

    env = {f"RISKSHAPE_{k.upper()}": str(v) for k, v in make_settings().model_dump().items() if v is not None}
    settings = ServiceSettings.from_env({**env, "RISKSHAPE_RESULT_CACHE_SIZE": "0"})
    assert settings.result_cache_size == 0
    prices = scenario_prices.iloc[:32].sort_index(axis=1)
    with TestClient(create_app(settings)) as client:
        config = client.app.state.context.config  # type: ignore[attr-defined]
        ingestor = client.app.state.context.ingestor  # type: ignore[attr-defined]
        for name in ("first", "second"):
            assert client.post("/v1/portfolios", json={"name": name}, headers=auth("admin")).status_code == 201
            cautioned(
                client.post(f"/v1/portfolios/{name}/prices", json=wide_rows(prices.iloc[:28]), headers=auth("ingest"))
            )
        for day in range(28, 32):
            for name in ("first", "second"):
                body = cautioned(
                    client.post(
                        f"/v1/portfolios/{name}/prices", json=wide_rows(prices.iloc[[day]]), headers=auth("ingest")
                    )
                )
                assert body["windows_added"] == 1
                assert ingestor._cached(name) is None  # nothing kept: the next day recomputes
        batch = monitor(prices, config)
        for name in ("first", "second"):
            _, rows = _all_pages(client, auth, f"/v1/portfolios/{name}/series", "rows")
            got = np.array([[np.nan if v is None else v for v in r["values"]] for r in rows], dtype=float)
            np.testing.assert_array_equal(got, batch.features.to_numpy(dtype=float))
