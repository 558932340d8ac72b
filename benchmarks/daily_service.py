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
server's resident memory (``VmRSS``, and its peak ``VmHWM``, from ``/proc``) after start-up and
after each day, with the cache setting that bounds it (``RISKSHAPE_RESULT_CACHE_SIZE``,
``--result-cache-size``).

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
from service_load import free_port  # noqa: E402

from riskshape import Config  # noqa: E402
from riskshape.store import open_store  # noqa: E402

PG_CONNINFO = "host=127.0.0.1 port=5432 user=postgres dbname=test connect_timeout=3"
PG_URL = "postgresql+psycopg://postgres@127.0.0.1:5432/test"


def _uptime() -> str:
    return subprocess.run(["uptime"], capture_output=True, text=True, check=False).stdout.strip()


def _memory(pid: int) -> tuple[float, float]:
    """Resident and peak resident memory of a process, MiB (Linux ``/proc/PID/status``)."""
    fields = {}
    for line in Path(f"/proc/{pid}/status").read_text(encoding="utf-8").splitlines():
        name, _, value = line.partition(":")
        if name in ("VmRSS", "VmHWM"):
            fields[name] = int(value.split()[0]) / 1024  # kB
    return fields["VmRSS"], fields["VmHWM"]


def _serve(url: str, folder: Path, cache_size: int) -> tuple[subprocess.Popen[bytes], str]:
    """Start ``riskshape serve`` over ``url`` on a free loopback port; wait until it answers."""
    port = free_port()
    env = {
        **os.environ,
        "RISKSHAPE_RATE_LIMIT_PER_MINUTE": "100000000",
        "RISKSHAPE_RATE_LIMIT_BURST": "100000000",
        "RISKSHAPE_LOG_LEVEL": "warning",
        "RISKSHAPE_RESULT_CACHE_SIZE": str(cache_size),
        "RISKSHAPE_MAX_REQUEST_ROWS": "1000000",
        "RISKSHAPE_MAX_BODY_BYTES": str(200_000_000),
    }
    command = [sys.executable, "-m", "riskshape", "serve", "--store", url, "--host", "127.0.0.1", "--port", str(port)]
    log = (folder / "server.log").open("wb")
    process = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=log, env=env)
    base = f"http://127.0.0.1:{port}"
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline:
        try:
            if httpx.get(f"{base}/v1/health", timeout=2).status_code == 200:
                return process, base
        except httpx.TransportError:
            pass
        if process.poll() is not None:
            break
        time.sleep(0.2)
    process.terminate()
    raise SystemExit(f"the server did not start: {(folder / 'server.log').read_text(errors='replace')[-2000:]}")


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
    parser.add_argument("--result-cache-size", type=int, default=128, help="RISKSHAPE_RESULT_CACHE_SIZE")
    args = parser.parse_args(argv)
    if not (1 <= args.portfolios <= 1000 and 3 <= args.assets <= 500 and 1 <= args.days <= 10):
        raise SystemExit("keep it bounded: 1-1,000 portfolios of 3-500 assets, 1-10 days")
    print(f"uptime: {_uptime()}")
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
        with tempfile.TemporaryDirectory(prefix="riskshape-daily-service-") as tmp:
            process, base = _serve(url, Path(tmp), args.result_cache_size)
            rss, peak = _memory(process.pid)
            print(f"server started (result_cache_size {args.result_cache_size}): RSS {rss:.0f} MiB, peak {peak:.0f}")
            for k in range(args.days):
                body = _long(prices.iloc[[n_days + k]], names).to_csv(index=False).encode()
                wall = _post_day(base, token, body, len(names))
                rss, peak = _memory(process.pid)
                per = wall / len(names)
                print(
                    f"day {k + 1}: POST /v1/prices, {len(names)} portfolios x {args.assets} assets: {wall:.2f} s "
                    f"({per * 1000:.0f} ms each; 1,000 at that rate: {per * 1000:.0f} s); server RSS {rss:.0f} MiB, "
                    f"peak {peak:.0f} MiB"
                )
    finally:
        if process is not None:
            process.terminate()
            process.wait(timeout=30)
        with psycopg.connect(PG_CONNINFO, autocommit=True) as conn:
            conn.execute(f'DROP SCHEMA "{schema}" CASCADE')
    print(f"cores: {os.cpu_count()}")
    print(f"uptime: {_uptime()}")


if __name__ == "__main__":
    main()
