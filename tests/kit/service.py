"""Helpers of the service tests: a small configuration whose rules fire on a short history, and
price bodies in the layouts the API accepts.
"""

from __future__ import annotations

import socket
import subprocess
import time
from pathlib import Path

import httpx
import numpy as np
import pandas as pd
import pytest

ROLES = ("reader", "ingest", "reviewer", "admin")

CONFIG_TOML = """
[monitor]
window = 20
step = 1
maxdim = 1

[compute]
executor = "serial"

# Rules tuned to fire a few times on a few dozen windows (the shipped rules need 120 windows of history).
[[alerts.rules]]
name = "corr_high"
summary = "mean_correlation"
kind = "quantile"
threshold = 0.8
clear = 0.5
lookback = 20
min_history = 5
severity = "warning"

[[alerts.rules]]
name = "h0_jump"
summary = "h0_wasserstein"
kind = "zscore"
threshold = 1.5
clear = 0.5
lookback = 20
min_history = 5
severity = "critical"
"""


def write_config(folder: Path) -> Path:
    """The test configuration as a TOML file in ``folder``."""
    path = folder / "service.toml"
    path.write_text(CONFIG_TOML, encoding="utf-8")
    return path


def csv_body(prices: pd.DataFrame) -> bytes:
    """Wide CSV text of a price table (empty cells where missing)."""
    return prices.to_csv(index_label="date", date_format="%Y-%m-%d", float_format="%.17g").encode("utf-8")


def long_rows(prices: pd.DataFrame) -> dict[str, object]:
    """The long JSON body: one {date, asset, price} per cell, missing prices left out."""
    rows = [
        {"date": stamp.strftime("%Y-%m-%d"), "asset": str(asset), "price": float(value)}
        for stamp, row in prices.iterrows()
        for asset, value in row.items()
        if np.isfinite(value)
    ]
    return {"rows": rows}


def wide_rows(prices: pd.DataFrame) -> dict[str, object]:
    """The wide JSON body: one {date, prices} per date, missing prices as null."""
    return {
        "wide": [
            {
                "date": stamp.strftime("%Y-%m-%d"),
                "prices": {str(a): (float(v) if np.isfinite(v) else None) for a, v in row.items()},
            }
            for stamp, row in prices.iterrows()
        ]
    }


def cautioned(response: object) -> object:
    """Check the caution on a response (header always; ``caution`` field when the body is a JSON
    object) and return the decoded body (or the text when it is not JSON).
    """
    from riskshape.caution import CAUTION

    headers = response.headers  # type: ignore[attr-defined]
    assert headers["X-Riskshape-Caution"] == "not investment advice"
    if headers.get("content-type", "").startswith("application/json"):
        body = response.json()  # type: ignore[attr-defined]
        if isinstance(body, dict):
            assert body["caution"] == CAUTION
        return body
    return response.text  # type: ignore[attr-defined]


STARTUP_SECONDS = 60  # a bound on waiting for a server, not a speed requirement


def free_port() -> int:
    """A TCP port on the loopback that nothing listens on now."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


def wait_until_healthy(
    process: subprocess.Popen[bytes], base: str, log: Path, seconds: float = STARTUP_SECONDS
) -> None:
    """Wait until ``base``'s health endpoint answers 200; fail with the server's log if it exits or times out."""
    deadline = time.monotonic() + seconds
    while True:
        try:
            if httpx.get(f"{base}/v1/health", timeout=2).status_code == 200:
                return
        except httpx.TransportError:
            pass
        if process.poll() is not None or time.monotonic() > deadline:
            pytest.fail(f"the server did not start: {log.read_text(errors='replace')[-2000:]}")
        time.sleep(0.2)
