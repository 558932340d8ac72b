"""``riskshape serve --workers 2`` over one archive (SQLite file, and PostgreSQL on 127.0.0.1:5432):
a key revoked is refused by every worker within the recheck time (1 s), and a write through one
worker is seen by the other at its next request.

Each test holds one keep-alive connection per worker process: which process serves a connection
is read from Linux's /proc (the worker holding the server end of the connection's socket).
"""

from __future__ import annotations

import http.client
import json
import os
import subprocess
import sys
import time
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import pandas as pd
import pytest

from riskshape.demo.scenario import generate_scenario
from riskshape.store import open_store
from tests.kit.postgres import fresh_schema_url
from tests.kit.service import csv_body, free_port, write_config

pytestmark = pytest.mark.skipif(not Path("/proc/net/tcp").exists(), reason="needs Linux /proc to tell workers apart")

STARTUP_SECONDS = 90  # bounds on waiting, not speed requirements
WORKERS = 2
RECHECK_SECONDS = 1.0  # the default of ServiceSettings.key_recheck_seconds


def _children(pid: int) -> list[int]:
    found: list[int] = []
    for task in Path(f"/proc/{pid}/task").iterdir():
        text = (task / "children").read_text().split()
        found.extend(int(p) for p in text)
    return found


def _socket_inode(server_port: int, client_port: int) -> str | None:
    """The inode of the server end of the loopback connection from ``client_port`` (from /proc/net/tcp)."""
    for line in Path("/proc/net/tcp").read_text().splitlines()[1:]:
        fields = line.split()
        local, remote, inode = fields[1], fields[2], fields[9]
        if int(local.split(":")[1], 16) == server_port and int(remote.split(":")[1], 16) == client_port:
            return inode
    return None


def _holder(pids: list[int], inode: str) -> int | None:
    target = f"socket:[{inode}]"
    for pid in pids:
        try:
            for fd in Path(f"/proc/{pid}/fd").iterdir():
                try:
                    if os.readlink(fd) == target:
                        return pid
                except OSError:
                    continue
        except OSError:
            continue
    return None


@dataclass
class Served:
    port: int
    process: subprocess.Popen[bytes]
    url: str
    log: Path

    def worker_connections(self) -> dict[int, http.client.HTTPConnection]:
        """One open keep-alive connection per worker process, by the worker's pid (bounded tries)."""
        workers = _children(self.process.pid)
        held: dict[int, http.client.HTTPConnection] = {}
        for _ in range(60):
            connection = http.client.HTTPConnection("127.0.0.1", self.port, timeout=30)
            status, _ = request(connection, "GET", "/v1/health")
            assert status == 200
            inode = _socket_inode(self.port, connection.sock.getsockname()[1])
            pid = None if inode is None else _holder(workers, inode)
            if pid is None or pid in held:
                connection.close()
            else:
                held[pid] = connection
            if len(held) == WORKERS:
                return held
        for connection in held.values():
            connection.close()
        pytest.fail(f"could not reach {WORKERS} distinct workers in 60 connections (reached {len(held)})")


def request(
    connection: http.client.HTTPConnection,
    method: str,
    path: str,
    headers: dict[str, str] | None = None,
    body: bytes | None = None,
) -> tuple[int, dict[str, object] | None]:
    connection.request(method, path, body=body, headers=headers or {})
    response = connection.getresponse()
    raw = response.read()
    assert response.getheader("X-Riskshape-Caution") == "not investment advice"
    payload = json.loads(raw) if raw and response.getheader("Content-Type", "").startswith("application/json") else None
    if payload is not None:
        payload["_etag"] = response.getheader("ETag")
    return response.status, payload


def start(url: str, folder: Path) -> Served:
    port = free_port()
    log = folder / "server.log"
    env = {**os.environ, "RISKSHAPE_RATE_LIMIT_PER_MINUTE": "100000", "RISKSHAPE_RATE_LIMIT_BURST": "100000"}
    env.pop("RISKSHAPE_KEY_RECHECK_SECONDS", None)  # the default, 1 s
    command = [sys.executable, "-m", "riskshape", "serve", "--store", url, "--host", "127.0.0.1"]
    command += ["--port", str(port), "--config", str(write_config(folder)), "--workers", str(WORKERS)]
    with log.open("wb") as sink:
        process = subprocess.Popen(command, stdout=sink, stderr=subprocess.STDOUT, env=env)
    served = Served(port, process, url, log)
    deadline = time.monotonic() + STARTUP_SECONDS
    while True:
        ready = process.poll() is None and len(_children(process.pid)) >= WORKERS
        if ready:
            try:
                connection = http.client.HTTPConnection("127.0.0.1", port, timeout=5)
                status, _ = request(connection, "GET", "/v1/health")
                connection.close()
                if status == 200 and log.read_text(errors="replace").count("Application startup complete") >= WORKERS:
                    return served
            except OSError:
                pass
        if process.poll() is not None or time.monotonic() > deadline:
            stop(served)
            pytest.fail(f"the server did not start: {log.read_text(errors='replace')[-3000:]}")
        time.sleep(0.2)


def stop(served: Served) -> None:
    served.process.terminate()
    try:
        served.process.wait(timeout=30)
    except subprocess.TimeoutExpired:
        served.process.kill()
        served.process.wait(timeout=30)


@pytest.fixture(scope="module", params=["sqlite", "postgresql"])
def archive_url(request: pytest.FixtureRequest, tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    if request.param == "sqlite":
        yield f"sqlite:///{tmp_path_factory.mktemp('workers') / 'archive.sqlite'}"
    else:
        with fresh_schema_url("rs_workers") as url:
            yield url


@pytest.fixture(scope="module")
def served(archive_url: str, tmp_path_factory: pytest.TempPathFactory) -> Iterator[Served]:
    """Two workers over the archive, shared by the module's tests (each test has its own portfolio)."""
    open_store(archive_url).close()  # the schema, made once before the workers start
    running = start(archive_url, tmp_path_factory.mktemp("served"))
    try:
        yield running
    finally:
        stop(running)


@pytest.fixture(scope="module")
def prices() -> pd.DataFrame:
    return generate_scenario(seed=5, n_days=40, assets_per_sector=4).prices


def test_a_revoked_key_is_refused_by_every_worker_within_a_second(served: Served) -> None:
    with open_store(served.url) as store:
        reader = store.create_api_key("reader-owner", "reader")
        store.create_portfolio("revoked")
    headers = {"X-Riskshape-Key": reader.token}
    connections = served.worker_connections()
    try:
        for pid, connection in connections.items():  # each worker now holds the key as valid
            status, _ = request(connection, "GET", "/v1/portfolios/revoked/latest", headers)
            assert status == 200, f"worker {pid}"
        with open_store(served.url) as store:
            store.revoke_api_key(reader.key.key_id)
        revoked_at = time.monotonic()  # after the revocation committed
        time.sleep(max(0.0, revoked_at + RECHECK_SECONDS - time.monotonic()))
        for pid, connection in connections.items():  # the first request of each worker past 1 s
            status, body = request(connection, "GET", "/v1/portfolios/revoked/latest", headers)
            assert status == 401 and body is not None and "revoked" in str(body["detail"]), f"worker {pid}: {body}"
    finally:
        for connection in connections.values():
            connection.close()
    assert reader.token not in served.log.read_text(errors="replace")


def test_a_write_through_one_worker_is_seen_by_the_other_at_once(served: Served, prices: pd.DataFrame) -> None:
    with open_store(served.url) as store:
        tokens = {role: store.create_api_key(f"{role}-owner", role).token for role in ("reader", "ingest", "admin")}
    key = {role: {"X-Riskshape-Key": token} for role, token in tokens.items()}
    connections = served.worker_connections()
    writer, reader = connections.values()
    try:
        status, _ = request(
            writer,
            "POST",
            "/v1/portfolios",
            {**key["admin"], "Content-Type": "application/json"},
            json.dumps({"name": "alpha"}).encode(),
        )
        assert status == 201
        status, empty = request(reader, "GET", "/v1/portfolios/alpha/latest", key["reader"])  # made by the other
        assert status == 200 and empty is not None and empty["n_windows"] == 0
        csv = {**key["ingest"], "Content-Type": "text/csv"}
        for upto in (30, 31, 35):
            status, done = request(writer, "POST", "/v1/portfolios/alpha/prices", csv, csv_body(prices.iloc[:upto]))
            assert status == 200 and done is not None, done
            status, latest = request(reader, "GET", "/v1/portfolios/alpha/latest", key["reader"])
            assert status == 200 and latest is not None
            assert latest["window_end"] == str(prices.index[upto - 1].date())
            assert latest["_etag"] != empty["_etag"]
            status, page = request(reader, "GET", "/v1/portfolios/alpha/series?limit=1000", key["reader"])
            assert status == 200 and page is not None and page["rows"][-1]["window_end"] == latest["window_end"]
            status, _ = request(
                reader, "GET", "/v1/portfolios/alpha/latest", {**key["reader"], "If-None-Match": str(latest["_etag"])}
            )
            assert status == 304  # and unchanged while nothing is written
            empty = latest
    finally:
        for connection in connections.values():
            connection.close()
