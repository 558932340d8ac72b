"""The service as it runs for real: ``riskshape serve`` (uvicorn) on 127.0.0.1 at a free port, spoken
to with a real HTTP client (httpx) over a socket; keys made with ``riskshape keys create``.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import time
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import httpx
import pytest
from click.testing import CliRunner

from riskshape.cli import cli
from riskshape.demo.scenario import generate_scenario
from tests.kit.service import cautioned, csv_body, free_port, wait_until_healthy, write_config


@dataclass(frozen=True)
class Server:
    base: str
    keys: dict[str, str]
    log: Path


def make_key(url: str, role: str) -> str:
    result = CliRunner().invoke(cli, ["keys", "create", "--role", role, "--owner", f"{role}-owner", "--store", url])
    assert result.exit_code == 0, result.output
    return result.stdout.strip().splitlines()[0]


@pytest.fixture(scope="module")
def server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Server]:
    folder = tmp_path_factory.mktemp("uvicorn")
    url = f"sqlite:///{folder / 'archive.sqlite'}"
    keys = {role: make_key(url, role) for role in ("reader", "ingest", "admin")}
    port = free_port()
    log = folder / "server.log"
    env = {**os.environ, "RISKSHAPE_MAX_BODY_BYTES": "65536"}
    command = [
        sys.executable,
        "-m",
        "riskshape",
        "serve",
        "--store",
        url,
        "--host",
        "127.0.0.1",
        "--port",
        str(port),
        "--config",
        str(write_config(folder)),
    ]
    with log.open("wb") as sink:
        process = subprocess.Popen(command, stdout=sink, stderr=subprocess.STDOUT, env=env)
    base = f"http://127.0.0.1:{port}"
    try:
        wait_until_healthy(process, base, log)
        yield Server(base, keys, log)
    finally:
        process.terminate()
        try:
            process.wait(timeout=20)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait(timeout=20)


def test_ingest_then_poll_over_http(server: Server) -> None:
    prices = generate_scenario(seed=5, n_days=30, assets_per_sector=4).prices
    with httpx.Client(base_url=server.base, timeout=60) as client:
        admin, ingest, reader = ({"X-Riskshape-Key": server.keys[r]} for r in ("admin", "ingest", "reader"))
        assert client.post("/v1/portfolios", json={"name": "live"}, headers=admin).status_code == 201
        response = client.post(
            "/v1/portfolios/live/prices", content=csv_body(prices), headers={**ingest, "Content-Type": "text/csv"}
        )
        body = cautioned(response)
        assert response.status_code == 200 and body["windows_added"] == len(prices) - 1 - 20 + 1
        latest = cautioned(client.get("/v1/portfolios/live/latest", headers=reader))
        assert latest["window_end"] == str(prices.index[-1].date())
        series = cautioned(client.get("/v1/portfolios/live/series", params={"limit": 5}, headers=reader))
        assert series["total"] == body["windows_added"] and len(series["rows"]) == 5
        again = cautioned(
            client.post(
                "/v1/portfolios/live/prices", content=csv_body(prices), headers={**ingest, "Content-Type": "text/csv"}
            )
        )
        assert again["windows_added"] == 0 and again["prices_added"] == 0  # idempotent


def test_chunked_upload_over_the_limit_is_413(server: Server) -> None:
    def chunks() -> Iterator[bytes]:  # a generator body: httpx sends Transfer-Encoding: chunked
        line = b"2031-01-02," + b"100.0," * 23 + b"100.0\n"
        for _ in range(200):
            yield line * 20

    with httpx.Client(base_url=server.base, timeout=60) as client:
        response = client.post(
            "/v1/portfolios/live/prices",
            content=chunks(),
            headers={"X-Riskshape-Key": server.keys["ingest"], "Content-Type": "text/csv"},
        )
    assert response.status_code == 413
    assert "65536 bytes" in cautioned(response)["detail"]


def test_keys_in_the_url_are_refused_over_http(server: Server) -> None:
    response = httpx.get(f"{server.base}/v1/portfolios", params={"key": server.keys["admin"]}, timeout=30)
    assert response.status_code == 401 and "never in a URL" in cautioned(response)["detail"]


def test_server_logs_are_json_lines_with_request_ids(server: Server) -> None:
    response = httpx.get(
        f"{server.base}/v1/portfolios",
        headers={"X-Riskshape-Key": server.keys["reader"], "X-Request-Id": "uvicorn-check-1"},
        timeout=30,
    )
    assert response.status_code == 200
    deadline = time.monotonic() + 10
    while True:  # the access line is written as the response completes
        entries = [json.loads(line) for line in server.log.read_text().splitlines() if line.startswith("{")]
        mine = [e for e in entries if e.get("request_id") == "uvicorn-check-1"]
        if mine or time.monotonic() > deadline:
            break
        time.sleep(0.1)
    assert mine and mine[0]["status"] == 200 and mine[0]["route"] == "/v1/portfolios"
    assert all({"time", "level", "logger", "message"} <= e.keys() for e in entries)
    text = server.log.read_text()
    assert server.keys["reader"] not in text and server.keys["admin"] not in text  # keys never reach the logs
