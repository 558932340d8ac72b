"""Read-path benchmark: ``GET /v1/portfolios/{name}/latest`` against a bare FastAPI endpoint, under wrk.

Needs Debian's ``wrk`` (``apt-get update && apt-get install -y wrk``). On 127.0.0.1 only:

1. makes a fresh SQLite archive with one fictional portfolio (riskshape.demo.scenario, 24 assets,
   500 days, window 60) ingested through the service;
2. for each worker count asked (``--workers 1 2``), starts ``riskshape serve --workers N`` and, on
   the same uvicorn with the same options and worker count, a bare FastAPI app whose one endpoint
   returns a constant JSON object;
3. warms every worker of both servers up: short ``wrk`` runs (``--connections`` connections) against
   each target until every worker process has held some of the connections (the worker processes
   are the server's spawned children, or the server itself with one worker; a worker answers the
   requests of the connections it accepted), so no timed run pays a worker's first requests (its
   key check and its prepared body);
4. runs ``wrk`` (one thread, ``--connections`` keep-alive connections, ``--seconds`` each) against
   the bare endpoint and against ``latest``, alternating, ``--rounds`` times; with ``--etag`` also
   against ``latest`` sending the current ETag in ``If-None-Match`` (304 answers);
5. prints requests/s and p99 latency of each run, and per worker count the medians and the ratios
   (throughput of latest / bare; p99 of latest / bare).

    python benchmarks/read_path.py --workers 1 2 --rounds 3

The API key reaches wrk through a Lua script in the temporary folder (mode 0600), not the command
line. riskshape is a decision aid, not investment advice; these are figures of the software.
"""

from __future__ import annotations

import argparse
import os
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

import httpx
import psutil
from servers import free_port, start_process, start_riskshape, stop, uptime

from riskshape.caution import CAUTION
from riskshape.demo.scenario import generate_scenario
from riskshape.store import open_store

CONFIG = """
[monitor]
window = 60

[compute]
executor = "serial"
"""

BARE_APP = """
from fastapi import FastAPI

app = FastAPI()
BODY = {"portfolio": "load", "status": "ok", "caution": "a decision aid, not investment advice"}


@app.get("/bare")
async def bare() -> dict[str, str]:
    return BODY
"""

WRK_SCRIPT = """
wrk.headers["X-Riskshape-Key"] = "{token}"
{etag}
"""


@dataclass(frozen=True)
class Figure:
    """What one wrk run against one target measured."""

    target: str
    requests_per_second: float
    p99_ms: float
    non_2xx: int


def start_bare(folder: Path, workers: int) -> tuple[subprocess.Popen[bytes], str]:
    """The bare FastAPI app on the same uvicorn, with the same options and worker count."""
    (folder / "bare_app.py").write_text(BARE_APP, encoding="utf-8")
    port = free_port()
    command = [sys.executable, "-m", "uvicorn", "bare_app:app", "--host", "127.0.0.1", "--port", str(port)]
    command += ["--workers", str(workers), "--log-level", "warning", "--no-access-log"]
    base = f"http://127.0.0.1:{port}"
    return start_process(command, f"{base}/bare", folder / f"bare-{workers}.log", cwd=folder), base


def _ms(value: str, unit: str) -> float:
    return float(value) * {"us": 0.001, "ms": 1.0, "s": 1000.0}[unit]


def run_wrk(url: str, script: Path, connections: int, seconds: int, target: str) -> Figure:
    command = ["wrk", "-t1", f"-c{connections}", f"-d{seconds}s", "--latency", "-s", str(script), url]
    done = subprocess.run(command, capture_output=True, text=True, timeout=seconds + 60, check=True)
    out = done.stdout
    rate = re.search(r"Requests/sec:\s+([\d.]+)", out)
    p99 = re.search(r"^\s+99%\s+([\d.]+)(us|ms|s)\s*$", out, re.MULTILINE)
    non_2xx = re.search(r"Non-2xx or 3xx responses:\s+(\d+)", out)
    if rate is None or p99 is None:
        raise SystemExit(f"cannot read wrk's output:\n{out}\n{done.stderr}")
    return Figure(
        target, float(rate.group(1)), _ms(p99.group(1), p99.group(2)), int(non_2xx.group(1)) if non_2xx else 0
    )


WARM_UP_SECONDS = 3
WARM_UP_TRIES = 5


def worker_processes(server: subprocess.Popen[bytes], workers: int) -> list[psutil.Process]:
    """The processes that answer requests: the server itself with one worker, else its spawned workers."""
    main = psutil.Process(server.pid)
    if workers == 1:
        return [main]
    found: list[psutil.Process] = []
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline:
        found = [c for c in main.children() if any("spawn_main" in part for part in c.cmdline())]
        if len(found) == workers:
            return found
        time.sleep(0.2)
    raise SystemExit(f"expected {workers} worker processes under pid {server.pid}, found {len(found)}")


def held_connections(process: psutil.Process, port: int) -> int:
    """Established connections to ``port`` that ``process`` accepted (it answers their requests)."""
    return sum(
        1 for c in process.net_connections(kind="tcp") if c.status == psutil.CONN_ESTABLISHED and c.laddr.port == port
    )


def warm_up(processes: list[psutil.Process], runs: list[tuple[str, Path]], connections: int) -> list[int]:
    """Run ``wrk`` against every target until each worker process has held some of its connections.

    Returns the most connections each worker held at once. A worker still starting holds none (it
    accepts only once its event loop runs), so this waits for it too.
    """
    most = [0] * len(processes)
    for _ in range(WARM_UP_TRIES):
        for target, script in runs:
            port = int(target.split(":")[2].split("/")[0])
            command = ["wrk", "-t1", f"-c{connections}", f"-d{WARM_UP_SECONDS}s", "-s", str(script), target]
            load = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
            while load.poll() is None:
                time.sleep(0.25)
                for i, process in enumerate(processes):
                    most[i] = max(most[i], held_connections(process, port))
            if load.returncode != 0:
                raise SystemExit(f"wrk failed during the warm-up against {target} (exit status {load.returncode})")
        if min(most) > 0:
            return most
    raise SystemExit(f"the warm-up did not reach every worker (most connections held per worker: {most})")


def load_portfolio(base: str, token: str) -> None:
    prices = generate_scenario(seed=7, n_days=500, assets_per_sector=4).prices
    headers = {"X-Riskshape-Key": token}
    httpx.post(f"{base}/v1/portfolios", json={"name": "load"}, headers=headers, timeout=60).raise_for_status()
    body = prices.to_csv(index_label="date", date_format="%Y-%m-%d").encode()
    httpx.post(
        f"{base}/v1/portfolios/load/prices",
        headers={**headers, "Content-Type": "text/csv"},
        content=body,
        timeout=600,
    ).raise_for_status()


def describe(figure: Figure) -> str:
    bad = f"  ({figure.non_2xx} non-2xx/3xx)" if figure.non_2xx else ""
    return f"  {figure.target:<14} {figure.requests_per_second:>9.1f} req/s  p99 {figure.p99_ms:>8.2f} ms{bad}"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--workers", type=int, nargs="+", default=[1, 2], help="worker counts (default 1 2)")
    parser.add_argument("--rounds", type=int, default=3, help="alternating rounds per worker count (default 3)")
    parser.add_argument("--seconds", type=int, default=8, help="seconds of each wrk run (default 8)")
    parser.add_argument("--connections", type=int, default=64, help="keep-alive connections (default 64)")
    parser.add_argument("--etag", action="store_true", help="also measure latest with If-None-Match (304s)")
    args = parser.parse_args()
    if not (all(1 <= w <= 8 for w in args.workers) and 1 <= args.rounds <= 10 and 1 <= args.seconds <= 60) or not (
        1 <= args.connections <= 1024
    ):
        raise SystemExit("keep it bounded: 1-8 workers, 1-10 rounds, 1-60 s a run, 1-1024 connections")
    if shutil.which("wrk") is None:
        raise SystemExit("wrk is not installed; on Debian: apt-get update && apt-get install -y wrk")

    print(CAUTION)
    print(f"machine: {os.cpu_count()} CPU(s); uptime before: {uptime()}")
    with tempfile.TemporaryDirectory(prefix="riskshape-readpath-") as tmp:
        folder = Path(tmp)
        url = f"sqlite:///{folder / 'archive.sqlite'}"
        with open_store(url) as store:
            token = store.create_api_key("read-path-benchmark", "admin").token
        plain = folder / "key.lua"
        plain.touch(mode=0o600)
        plain.write_text(WRK_SCRIPT.format(token=token, etag=""), encoding="utf-8")
        loaded = False
        for workers in args.workers:
            config = folder / "bench.toml"
            config.write_text(CONFIG, encoding="utf-8")
            server, base = start_riskshape(
                url, folder, config=config, workers=workers, log_name=f"riskshape-{workers}.log"
            )
            bare, bare_base = start_bare(folder, workers)
            try:
                if not loaded:
                    load_portfolio(base, token)
                    loaded = True
                latest_url = f"{base}/v1/portfolios/load/latest"
                first = httpx.get(latest_url, headers={"X-Riskshape-Key": token}, timeout=60)
                first.raise_for_status()
                conditional = folder / "etag.lua"
                conditional.touch(mode=0o600)
                etag = first.headers["ETag"].replace('"', '\\"')
                conditional.write_text(
                    WRK_SCRIPT.format(token=token, etag=f'wrk.headers["If-None-Match"] = "{etag}"'), encoding="utf-8"
                )
                figures: dict[str, list[Figure]] = {"bare": [], "latest": [], "latest 304": []}
                print(f"\n--workers {workers}: {args.connections} connections, 1 wrk thread, {args.seconds} s a run")
                reads = [(latest_url, plain), (latest_url, conditional)]
                warmed = warm_up(worker_processes(server, workers), reads, args.connections)
                warmed_bare = warm_up(worker_processes(bare, workers), [(f"{bare_base}/bare", plain)], args.connections)
                held = f"latest {warmed}, bare {warmed_bare}"
                print(f"  warm-up: every worker answered (most connections held at once per worker: {held})")
                for _ in range(args.rounds):
                    runs = [("bare", f"{bare_base}/bare", plain), ("latest", latest_url, plain)]
                    if args.etag:
                        runs.append(("latest 304", latest_url, conditional))
                    for name, target, script in runs:
                        time.sleep(1.0)  # let the previous run's connections close
                        figure = run_wrk(target, script, args.connections, args.seconds, name)
                        figures[name].append(figure)
                        print(describe(figure))
            finally:
                stop(server)
                stop(bare)
            rate = {k: statistics.median(f.requests_per_second for f in v) for k, v in figures.items() if v}
            p99 = {k: statistics.median(f.p99_ms for f in v) for k, v in figures.items() if v}
            print(f"  medians of {args.rounds} rounds:")
            for name in rate:
                print(f"    {name:<12} {rate[name]:>9.1f} req/s  p99 {p99[name]:>8.2f} ms")
            print(
                f"  latest / bare: throughput {rate['latest'] / rate['bare']:.0%} (target >= 60%), "
                f"p99 {p99['latest'] / p99['bare']:.2f}x (target <= 2x); per round: "
                + ", ".join(
                    f"{a.requests_per_second / b.requests_per_second:.0%}/{a.p99_ms / b.p99_ms:.2f}x"
                    for a, b in zip(figures["latest"], figures["bare"])
                )
            )
    print(f"uptime after: {uptime()}")


if __name__ == "__main__":
    main()
