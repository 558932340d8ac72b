"""Load benchmark of the HTTP service: concurrent pollers of the latest state and the series.

Starts ``riskshape serve`` (uvicorn, one worker) on 127.0.0.1 at a free port over a fresh SQLite
archive, ingests a fictional portfolio (riskshape.demo.scenario), then runs N pollers (httpx async
clients) that alternate ``GET /v1/portfolios/{name}/latest`` and ``GET .../series?limit=100``
for a bounded time and a bounded number of requests. Prints requests/s and p50/p99 latency per
endpoint and overall. With ``--feed N`` it also measures a daily feed: N more portfolios (each
its own fictional scenario), each given its history, then one new day posted to every one of
them in turn; it prints the time per portfolio and for the whole feed. Loopback only; nothing
leaves the machine.

    python benchmarks/service_load.py --pollers 8 --seconds 10
    python benchmarks/service_load.py --pollers 8 --seconds 10 --feed 20

riskshape is a decision aid, not investment advice; these are figures of the software, not of any market.
"""

from __future__ import annotations

import argparse
import asyncio
import os
import subprocess
import tempfile
import time
from pathlib import Path

import httpx
import numpy as np
import pandas as pd
from servers import start_riskshape, stop

from riskshape.caution import CAUTION
from riskshape.demo.scenario import generate_scenario
from riskshape.store import open_store

CONFIG = """
[monitor]
window = {window}

[compute]
executor = "serial"
"""


def start_server(folder: Path, url: str, window: int) -> tuple[subprocess.Popen[bytes], str]:
    """``riskshape serve`` (one worker) over ``url`` with a configuration of window ``window``."""
    config = folder / "bench.toml"
    config.write_text(CONFIG.format(window=window), encoding="utf-8")
    return start_riskshape(url, folder, config=config, timeout=60)


async def poller(
    client: httpx.AsyncClient,
    paths: list[str],
    stop_at: float,
    budget: list[int],
    samples: dict[str, list[float]],
    errors: list[str],
) -> None:
    i = 0
    while time.perf_counter() < stop_at and budget[0] > 0:
        budget[0] -= 1
        path = paths[i % len(paths)]
        i += 1
        started = time.perf_counter()
        try:
            response = await client.get(path)
        except httpx.TransportError as err:  # counted, not fatal: the figures say how many
            errors.append(type(err).__name__)
            continue
        elapsed = time.perf_counter() - started
        if response.status_code != 200:
            errors.append(str(response.status_code))
        samples[path].append(elapsed)


async def run_load(
    base: str, token: str, portfolio: str, pollers: int, seconds: float, max_requests: int
) -> tuple[dict[str, list[float]], float, list[str]]:
    paths = [f"/v1/portfolios/{portfolio}/latest", f"/v1/portfolios/{portfolio}/series?limit=100"]
    samples: dict[str, list[float]] = {p: [] for p in paths}
    errors: list[str] = []
    budget = [max_requests]
    limits = httpx.Limits(max_connections=pollers, max_keepalive_connections=pollers)
    headers = {"X-Riskshape-Key": token}
    async with httpx.AsyncClient(base_url=base, headers=headers, limits=limits, timeout=60) as client:
        for path in paths:  # warm up (the first latest state reads the series once)
            (await client.get(path)).raise_for_status()
        started = time.perf_counter()
        stop_at = started + seconds
        await asyncio.gather(*(poller(client, paths, stop_at, budget, samples, errors) for _ in range(pollers)))
        wall = time.perf_counter() - started
    return samples, wall, errors


def _csv(frame: pd.DataFrame) -> bytes:
    """A wide price table as the CSV body the prices endpoint takes."""
    return frame.to_csv(index_label="date", date_format="%Y-%m-%d").encode()


def daily_feed(base: str, headers: dict[str, str], portfolios: int, days: int, assets_per_sector: int) -> list[float]:
    """Seconds to post one new day to each of ``portfolios`` portfolios that hold ``days`` days."""
    csv_headers = {**headers, "Content-Type": "text/csv"}
    names, next_days = [], []
    for k in range(portfolios):
        prices = generate_scenario(seed=100 + k, n_days=days + 1, assets_per_sector=assets_per_sector).prices
        name = f"feed-{k:03d}"
        httpx.post(f"{base}/v1/portfolios", json={"name": name}, headers=headers, timeout=60).raise_for_status()
        httpx.post(
            f"{base}/v1/portfolios/{name}/prices", headers=csv_headers, content=_csv(prices.iloc[:-1]), timeout=600
        ).raise_for_status()
        names.append(name)
        next_days.append(prices.iloc[[-1]])
    seconds = []
    for name, day in zip(names, next_days):
        started = time.perf_counter()
        response = httpx.post(
            f"{base}/v1/portfolios/{name}/prices", headers=csv_headers, content=_csv(day), timeout=600
        )
        response.raise_for_status()
        seconds.append(time.perf_counter() - started)
        if response.json()["windows_added"] != 1:
            raise SystemExit(f"daily feed: {name} added {response.json()['windows_added']} windows, expected 1")
    return seconds


def describe(name: str, values: list[float], wall: float) -> str:
    ms = np.asarray(values) * 1000
    return (
        f"{name:<44} {len(ms):>7} req  {len(ms) / wall:>8.1f} req/s  p50 {np.percentile(ms, 50):>7.2f} ms  "
        f"p99 {np.percentile(ms, 99):>7.2f} ms"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--pollers", type=int, default=8, help="concurrent pollers (default 8)")
    parser.add_argument("--seconds", type=float, default=10.0, help="polling time, at most (default 10)")
    parser.add_argument("--max-requests", type=int, default=50_000, help="requests, at most (default 50000)")
    parser.add_argument("--days", type=int, default=500, help="return days of the portfolio (default 500)")
    parser.add_argument("--assets-per-sector", type=int, default=4, help="assets per sector, 6 sectors (default 4)")
    parser.add_argument("--window", type=int, default=60, help="window length (default 60)")
    parser.add_argument(
        "--feed", type=int, default=0, help="portfolios of the daily-feed measurement (default 0: none)"
    )
    args = parser.parse_args()
    if not (
        1 <= args.pollers <= 256
        and 0 < args.seconds <= 300
        and 1 <= args.max_requests <= 1_000_000
        and 0 <= args.feed <= 1000
    ):
        raise SystemExit("keep it bounded: 1-256 pollers, at most 300 s, 1,000,000 requests and 1,000 feed portfolios")

    with tempfile.TemporaryDirectory(prefix="riskshape-load-") as tmp:
        folder = Path(tmp)
        url = f"sqlite:///{folder / 'archive.sqlite'}"
        with open_store(url) as store:
            token = store.create_api_key("load-benchmark", "admin").token
        process, base = start_server(folder, url, args.window)
        try:
            prices = generate_scenario(seed=7, n_days=args.days, assets_per_sector=args.assets_per_sector).prices
            headers = {"X-Riskshape-Key": token}
            httpx.post(f"{base}/v1/portfolios", json={"name": "load"}, headers=headers, timeout=60).raise_for_status()
            started = time.perf_counter()
            ingest = httpx.post(
                f"{base}/v1/portfolios/load/prices",
                headers={**headers, "Content-Type": "text/csv"},
                content=_csv(prices),
                timeout=600,
            )
            ingest.raise_for_status()
            ingest_seconds = time.perf_counter() - started
            windows = ingest.json()["windows_added"]
            next_day = prices.index[-1] + np.timedelta64(1, "D")
            last = prices.iloc[[-1]].set_axis([next_day]) * 1.001
            started = time.perf_counter()
            one_day = httpx.post(
                f"{base}/v1/portfolios/load/prices",
                headers={**headers, "Content-Type": "text/csv"},
                content=_csv(last),
                timeout=600,
            )
            one_day.raise_for_status()
            day_seconds = time.perf_counter() - started

            samples, wall, errors = asyncio.run(
                run_load(base, token, "load", args.pollers, args.seconds, args.max_requests)
            )
            feed = daily_feed(base, headers, args.feed, args.days, args.assets_per_sector) if args.feed else []
            server_log = (folder / "server.log").read_text(errors="replace")
        finally:
            stop(process)

    print(CAUTION)
    print(f"portfolio: {prices.shape[1]} assets, {len(prices)} dates, window {args.window}: {windows} windows")
    print(
        f"ingest of the whole history in one CSV body: {ingest_seconds:.2f} s; of one more day: {day_seconds:.3f} s "
        f"({one_day.json()['windows_added']} window computed)"
    )
    print(f"{args.pollers} pollers for {wall:.1f} s on 127.0.0.1 (uvicorn, 1 worker, SQLite), {os.cpu_count()} CPU(s)")
    everything = [v for values in samples.values() for v in values]
    for path, values in samples.items():
        print(describe("GET " + path, values, wall))
    print(describe("all", everything, wall))
    if feed:
        ms = np.asarray(feed) * 1000
        print(
            f"daily feed: one new day posted to each of {len(feed)} portfolios ({prices.shape[1]} assets, "
            f"{len(prices)} dates held each) in {sum(feed):.2f} s: p50 {np.percentile(ms, 50):.0f} ms, "
            f"max {ms.max():.0f} ms per portfolio (1 window computed and archived each)"
        )
    if errors:
        print(f"failed requests: {len(errors)} ({', '.join(sorted(set(errors)))}); server log tail:")
        print(server_log[-2000:])


if __name__ == "__main__":
    main()
