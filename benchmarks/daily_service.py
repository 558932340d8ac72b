"""The daily loop through the service on PostgreSQL: a day's feed for many portfolios, and the service's memory.

    python benchmarks/daily_service.py                     # N = 1,000 portfolios of 50 assets, five years held
    python benchmarks/daily_service.py --portfolios 50     # a smaller N (the per-portfolio figure is printed)

The PostgreSQL server of the tests (127.0.0.1:5432, user ``postgres``, database ``test``): the
benchmark makes a fresh schema and drops it at the end. Set-up (not measured) as in
``benchmarks/daily.py``: one portfolio of ``--assets`` fictional assets is ingested whole, then
copied in SQL under the other N - 1 names, each with its commitment and day state. Then
``riskshape serve`` (one worker process) runs over that schema, and each of ``--days`` new days is
posted for all N portfolios in one ``POST /v1/prices`` request (CSV, a ``portfolio`` column), the
way a desk's day file arrives. Printed: the wall time of each request (and per portfolio), and the
server's resident memory (``VmRSS``, and its peak ``VmHWM``, from ``/proc``) after start-up, after
each day, and after every portfolio's latest state and whole series have been read, twice (which
fills the read caches beyond their bounds when N is larger than they are; ``--reread-with S P K``
then restarts the server with other read-cache sizes and reads again), with the settings that bound
it (``--result-cache-size``, ``--snapshot-cache-size``, ``--prepared-cache-size``,
``--key-cache-size``: the service's ``RISKSHAPE_*_CACHE_SIZE``) and the read caches' bound in MiB
estimated from the largest entries seen.

Not a test: figures vary with the machine's load; the command and ``uptime`` are printed with them.
riskshape is a decision aid, not investment advice; these are figures of the software, not of any market.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
import uuid
from pathlib import Path

import httpx
import psycopg

sys.path.insert(0, str(Path(__file__).resolve().parent))

from daily import BUSINESS_DAYS_PER_YEAR, _long, _names, _set_up  # noqa: E402
from data import factor_prices  # noqa: E402
from servers import memory_mib, start_riskshape, stop, uptime  # noqa: E402

from riskshape import Config  # noqa: E402
from riskshape.store import open_store  # noqa: E402

PG_CONNINFO = "host=127.0.0.1 port=5432 user=postgres dbname=test connect_timeout=3"
PG_URL = "postgresql+psycopg://postgres@127.0.0.1:5432/test"


CACHES = (
    ("result_cache_size", 128, "whole-history results (only the full path, a portfolio without a day state, fills it)"),
    ("snapshot_cache_size", 32, "series snapshots and latest states"),
    ("prepared_cache_size", 512, "prepared bodies (latest states and series pages) and their ETags"),
    ("key_cache_size", 4096, "key checks"),
)
"""The settings that bound what the service keeps in memory: name, default, what it holds."""


def _read_all(base: str, token: str, names: list[str]) -> tuple[int, int]:
    """Read every portfolio's latest state and its whole series (fills the read caches beyond their bounds).

    Returns the largest latest body and the largest series page, in bytes.
    """
    headers = {"X-Riskshape-Key": token}
    latest_bytes = series_bytes = 0
    with httpx.Client(base_url=base, headers=headers, timeout=600) as client:
        for name in names:
            latest = client.get(f"/v1/portfolios/{name}/latest")
            latest.raise_for_status()
            series = client.get(f"/v1/portfolios/{name}/series", params={"limit": 1000})
            series.raise_for_status()
            latest_bytes = max(latest_bytes, len(latest.content))
            series_bytes = max(series_bytes, len(series.content))
    return latest_bytes, series_bytes


def _snapshot_bytes(url: str, portfolio: str) -> int:
    """Memory of the series frame a snapshot of ``portfolio`` holds (pandas ``memory_usage(deep=True)``)."""
    with open_store(url) as store:
        run = store.latest_run(portfolio)
        if run is None:
            return 0
        frame = store.read_features(portfolio, config_hash=run.config_hash).frame
        return int(frame.memory_usage(deep=True).sum() + frame.index.memory_usage(deep=True))


def _bound(sizes: dict[str, int], snapshot: int, latest_bytes: int, series_bytes: int) -> str:
    """The read caches' bound in MiB, estimated from the largest entries seen (results not included)."""
    snapshot += latest_bytes  # the latest state it keeps, about the size of its JSON body
    body = max(latest_bytes, series_bytes)
    keys = 1024  # a key check: the digest and the key record, 0.6 kB measured with tracemalloc; 1 kB an upper estimate
    total = (
        sizes["snapshot_cache_size"] * snapshot + sizes["prepared_cache_size"] * body + sizes["key_cache_size"] * keys
    )
    return (
        f"read caches at most about {total / 2**20:.1f} MiB: {sizes['snapshot_cache_size']} snapshots x "
        f"{snapshot / 1024:.0f} kB + {sizes['prepared_cache_size']} bodies x {body / 1024:.0f} kB (largest seen) + "
        f"{sizes['key_cache_size']} key checks x 1 kB"
    )


def _post_day(base: str, token: str, body: bytes, n: int) -> float:
    """Post one day file for ``n`` portfolios; seconds from request to answer (every portfolio must add a window)."""
    started = time.perf_counter()
    response = httpx.post(
        f"{base}/v1/prices",
        content=body,
        headers={"X-Riskshape-Key": token, "Content-Type": "text/csv"},
        timeout=3600,
    )
    wall = time.perf_counter() - started
    response.raise_for_status()
    answer = response.json()
    added = [item for item in answer["items"] if item["archived"] and item["result"]["windows_added"] == 1]
    if answer["count"] != n or len(added) != n:
        bad = next(item for item in answer["items"] if item not in added)
        raise SystemExit(f"the feed did not add one window to every portfolio: {bad}")
    return wall


def main(argv: list[str] | None = None) -> None:
    """Run the service feed benchmark on PostgreSQL and print its figures."""
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--portfolios", type=int, default=1000)
    parser.add_argument("--assets", type=int, default=50)
    parser.add_argument("--years", type=float, default=5.0)
    parser.add_argument("--days", type=int, default=2, help="days posted, one request each")
    for name, default, holds in CACHES:
        parser.add_argument(
            f"--{name.replace('_', '-')}", type=int, default=default, help=f"{holds} (default {default})"
        )
    parser.add_argument(
        "--reread-with",
        type=int,
        nargs=3,
        metavar=("SNAPSHOTS", "PREPARED", "KEYS"),
        help="then restart the server with these read-cache sizes and read every portfolio again, twice",
    )
    args = parser.parse_args(argv)
    if not (1 <= args.portfolios <= 1000 and 3 <= args.assets <= 500 and 1 <= args.days <= 10):
        raise SystemExit("keep it bounded: 1-1,000 portfolios of 3-500 assets, 1-10 days")
    print(f"uptime: {uptime()}")
    print(f"command: python benchmarks/daily_service.py {' '.join(argv if argv is not None else sys.argv[1:])}")
    schema = f"daily_bench_{uuid.uuid4().hex[:12]}"
    with psycopg.connect(PG_CONNINFO, autocommit=True) as conn:
        conn.execute(f'CREATE SCHEMA "{schema}"')
    process: subprocess.Popen[bytes] | None = None
    try:
        url = f"{PG_URL}?options=-csearch_path%3D{schema}"
        n_days = int(args.years * BUSINESS_DAYS_PER_YEAR)
        names = _names(args.portfolios)
        prices = factor_prices(n_days + args.days, args.assets, seed=1)
        setup = _set_up(url, prices.iloc[:n_days], names, Config())
        with open_store(url) as store:
            token = store.create_api_key("daily-benchmark", "admin").token
        print(f"set-up: {len(names)} portfolios x {args.assets} assets x {n_days} days on PostgreSQL in {setup:.1f} s")
        sizes = {name: getattr(args, name) for name, _, _ in CACHES}
        settings = {
            **{f"RISKSHAPE_{name.upper()}": str(size) for name, size in sizes.items()},
            "RISKSHAPE_MAX_REQUEST_ROWS": "1000000",
            "RISKSHAPE_MAX_BODY_BYTES": str(200_000_000),
        }
        print("memory bound (settings): " + ", ".join(f"{name} {size}" for name, size in sizes.items()))
        with tempfile.TemporaryDirectory(prefix="riskshape-daily-service-") as tmp:
            process, base = start_riskshape(url, Path(tmp), settings=settings)
            rss, peak = memory_mib(process.pid)
            print(f"server started: RSS {rss:.0f} MiB, peak {peak:.0f}")
            for k in range(args.days):
                body = _long(prices.iloc[[n_days + k]], names).to_csv(index=False).encode()
                wall = _post_day(base, token, body, len(names))
                rss, peak = memory_mib(process.pid)
                per = wall / len(names)
                print(
                    f"day {k + 1}: POST /v1/prices, {len(names)} portfolios x {args.assets} assets: {wall:.2f} s "
                    f"({per * 1000:.0f} ms each; 1,000 at that rate: {per * 1000:.0f} s); server RSS {rss:.0f} MiB, "
                    f"peak {peak:.0f} MiB"
                )
            for read in (1, 2):  # the second pass: RSS stays put once the caches are full
                started = time.perf_counter()
                latest_bytes, series_bytes = _read_all(base, token, names)
                rss, peak = memory_mib(process.pid)
                print(
                    f"read pass {read}, every portfolio's latest and series ({time.perf_counter() - started:.1f} s):"
                    f" server RSS {rss:.0f} MiB, peak {peak:.0f} MiB, with {len(names)} portfolios fed"
                )
            snapshot = _snapshot_bytes(url, names[0])
            print(_bound(sizes, snapshot, latest_bytes, series_bytes))
            if args.reread_with:
                stop(process)
                smaller = dict(zip(("snapshot_cache_size", "prepared_cache_size", "key_cache_size"), args.reread_with))
                sizes.update(smaller)
                settings.update({f"RISKSHAPE_{name.upper()}": str(size) for name, size in smaller.items()})
                process, base = start_riskshape(url, Path(tmp), settings=settings, log_name="server-2.log")
                rss, peak = memory_mib(process.pid)
                print("restarted with " + ", ".join(f"{n} {v}" for n, v in smaller.items()) + f": RSS {rss:.0f} MiB")
                for read in (1, 2):
                    _read_all(base, token, names)
                    rss, peak = memory_mib(process.pid)
                    print(f"read pass {read}: server RSS {rss:.0f} MiB, peak {peak:.0f} MiB")
                print(_bound(sizes, snapshot, latest_bytes, series_bytes))
    finally:
        if process is not None:
            stop(process)
        with psycopg.connect(PG_CONNINFO, autocommit=True) as conn:
            conn.execute(f'DROP SCHEMA "{schema}" CASCADE')
    print(f"cores: {os.cpu_count()}")
    print(f"uptime: {uptime()}")


if __name__ == "__main__":
    main()
