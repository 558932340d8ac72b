"""Pending days point in time: every read that shows them, asked ``as_known_at``, gives the bytes it gave then.

A day is fed in part (pending), the reads are captured, then the day is completed, the next day is
fed in part and closed by hand, and a third day is fed in part. The same reads asked ``as_known_at``
each moment of capture must give the same bytes -- on SQLite and on PostgreSQL -- while the current
reads have moved (so the comparison can fail): a day pending then but complete or closed since is
still listed, a day whose first price came later is not. The reference is the service's own earlier
answer, the pattern of tests/service/test_service_known_at.py (DESIGN.md, "The daily loop": reads
answer "as known at T" on request).
"""

from __future__ import annotations

import json
from collections.abc import Callable, Iterator
from datetime import datetime, timezone
from pathlib import Path

import pandas as pd
import pytest
from fastapi.testclient import TestClient

from riskshape_service import create_app
from riskshape_service.settings import ServiceSettings
from tests.kit.cli import run_cli
from tests.kit.postgres import fresh_schema_url
from tests.kit.service import cautioned, csv_body

Auth = Callable[[str], dict[str, str]]
N_FIRST = 30  # complete price dates before the days under test (window 20: 10 windows)
BASE = "/v1/portfolios/alpha"
READS = {
    "latest": f"{BASE}/latest",
    "series": f"{BASE}/series?limit=500",
    "series page": f"{BASE}/series?limit=3&offset=2&summaries=mean_correlation",
    "pending": f"{BASE}/days/pending",
}


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def store_url(request: pytest.FixtureRequest, tmp_path: Path) -> Iterator[str]:
    if request.param == "sqlite":
        yield f"sqlite:///{tmp_path / 'archive.sqlite'}"
        return
    with fresh_schema_url("rs_pending_known") as url:
        yield url


@pytest.fixture
def prices(scenario_prices: pd.DataFrame) -> pd.DataFrame:
    return scenario_prices.sort_index(axis=1).ffill().bfill()  # every cell priced: complete only when all sent


def _post(client: TestClient, auth: Auth, prices: pd.DataFrame) -> dict:
    response = client.post(
        f"{BASE}/prices", content=csv_body(prices), headers={**auth("ingest"), "Content-Type": "text/csv"}
    )
    assert response.status_code == 200, response.text
    return cautioned(response)  # type: ignore[return-value]


def _at(path: str, moment: str) -> str:
    return f"{path}{'&' if '?' in path else '?'}as_known_at={moment.replace('+', '%2B')}"


def _capture(client: TestClient, auth: Auth) -> tuple[dict[str, bytes], str]:
    then = {name: client.get(path, headers=auth("reader")) for name, path in READS.items()}
    assert all(r.status_code == 200 for r in then.values()), {n: r.text for n, r in then.items()}
    return {name: r.content for name, r in then.items()}, datetime.now(timezone.utc).isoformat()


def _pending_dates(body: bytes) -> list[str]:
    found = json.loads(body)
    return [p["date"] for p in found.get("pending", found.get("items", []))]


def test_pending_days_as_known_then_equal_the_reads_made_then(
    make_settings: Callable[..., ServiceSettings], keys: dict[str, str], auth: Auth, prices: pd.DataFrame
) -> None:
    first, second, third = (prices.iloc[[N_FIRST + i]] for i in range(3))
    day1, day2, day3 = (str(d.index[0].date()) for d in (first, second, third))
    with TestClient(create_app(make_settings())) as client:
        assert client.post("/v1/portfolios", json={"name": "alpha"}, headers=auth("admin")).status_code == 201
        _post(client, auth, prices.iloc[:N_FIRST])
        _post(client, auth, first.iloc[:, :3])
        reads_a, moment_a = _capture(client, auth)  # day 1 pending, days 2 and 3 not started
        assert all(_pending_dates(body) == [day1] for body in reads_a.values()), reads_a

        _post(client, auth, first.iloc[:, 3:])  # day 1 complete: it counts
        _post(client, auth, second.iloc[:, :4])
        reads_b, moment_b = _capture(client, auth)  # day 2 pending
        assert all(_pending_dates(body) == [day2] for body in reads_b.values()), reads_b

        closed = client.post(f"{BASE}/days/{day2}/close", headers=auth("ingest"))
        assert closed.status_code == 200, closed.text
        _post(client, auth, third.iloc[:, :2])  # day 3 pending now

        for reads, moment in ((reads_a, moment_a), (reads_b, moment_b)):
            for name, path in READS.items():
                known = client.get(_at(path, moment), headers=auth("reader"))
                assert known.status_code == 200, (name, known.text)
                assert known.headers["X-Riskshape-Known-At"] == datetime.fromisoformat(moment).isoformat()
                assert known.content == reads[name], (name, moment)
        now = {name: client.get(path, headers=auth("reader")).content for name, path in READS.items()}
    for name in READS:
        assert _pending_dates(now[name]) == [day3], name
        assert now[name] != reads_a[name] and now[name] != reads_b[name], f"{name}: the comparison cannot fail"


def test_before_the_first_price_no_day_is_pending(
    make_settings: Callable[..., ServiceSettings], keys: dict[str, str], auth: Auth, prices: pd.DataFrame
) -> None:
    with TestClient(create_app(make_settings())) as client:
        assert client.post("/v1/portfolios", json={"name": "alpha"}, headers=auth("admin")).status_code == 201
        before = datetime.now(timezone.utc).isoformat()
        _post(client, auth, prices.iloc[:5].iloc[:, :6])  # too short for a window: every day waits
        listed = client.get(f"{BASE}/days/pending", headers=auth("reader")).json()
        assert listed["count"] == 0  # complete days before the first run are not pending: they count
        then = client.get(_at(f"{BASE}/days/pending", before), headers=auth("reader"))
        assert then.status_code == 200 and then.json()["count"] == 0
        partial = prices.iloc[[5]].iloc[:, :3]
        _post(client, auth, partial)
        assert client.get(f"{BASE}/days/pending", headers=auth("reader")).json()["count"] == 1
        assert client.get(_at(f"{BASE}/days/pending", before), headers=auth("reader")).json()["count"] == 0


def test_days_list_as_known_at_prints_what_it_printed_then(
    store_url: str,
    make_settings: Callable[..., ServiceSettings],
    keys: dict[str, str],
    auth: Auth,
    prices: pd.DataFrame,
    capsys: pytest.CaptureFixture[str],
) -> None:
    first, second = prices.iloc[[N_FIRST]], prices.iloc[[N_FIRST + 1]]
    command = ["days", "list", "--portfolio", "alpha", "--store", store_url]
    with TestClient(create_app(make_settings())) as client:
        assert client.post("/v1/portfolios", json={"name": "alpha"}, headers=auth("admin")).status_code == 201
        _post(client, auth, prices.iloc[:N_FIRST])
        _post(client, auth, first.iloc[:, :3])
        status, then, err = run_cli(capsys, *command)
        assert status in (None, 0), err
        moment = datetime.now(timezone.utc).isoformat()
        assert str(first.index[0].date()) in then
        _post(client, auth, first.iloc[:, 3:])
        _post(client, auth, second.iloc[:, :5])
    status, known, err = run_cli(capsys, *command, "--as-known-at", moment)
    assert status in (None, 0), err
    note = f"as known at {datetime.fromisoformat(moment).isoformat()} (later prices, closings and delistings left out)"
    assert known.replace(note, "current") == then
    now = run_cli(capsys, *command)[1]
    assert now != then and str(second.index[0].date()) in now and str(first.index[0].date()) not in now
