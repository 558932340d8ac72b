"""The daily loop's figures: a day's feed for many portfolios, and one portfolio-day.

    python benchmarks/daily.py                       # N = 1,000 portfolios of 50 assets, five years held
    python benchmarks/daily.py --portfolios 10       # a smaller N (the per-portfolio figure is printed)

1. **Many portfolios through the command line.** N portfolios of ``--assets`` fictional assets
   hold ``--years`` of business days on an embedded SQLite archive (set up by archiving one
   computed run under every name: the set-up is not what is measured). A day file with a
   ``portfolio`` column carries the next day for all of them; ``riskshape ingest --prices DAYFILE
   --store URL`` runs it in a fresh process (so every portfolio starts cold, as after a restart).
2. **The same day in one process**, cold (a fresh ``Ingestor``) and then warm (the next days, the
   same ``Ingestor``, results kept in memory), one portfolio at a time and, warm, on two threads:
   what ``riskshape.daily.ingest_many`` would gain from threads, and what a cold portfolio costs.
3. **One portfolio-day at ``--one-assets`` assets** (100) and the same history: cold and warm.

Prints the figures, the command and ``uptime``. Not a test: figures vary with the machine's load.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parent))

from data import factor_prices  # noqa: E402

from riskshape import Config, archive_run, monitor  # noqa: E402
from riskshape.compute.executors import keep_blas_pinned  # noqa: E402
from riskshape.daily import Ingestor, ingest_many, split_feed  # noqa: E402
from riskshape.store import open_store  # noqa: E402

BUSINESS_DAYS_PER_YEAR = 252


def _names(n: int) -> list[str]:
    return [f"fund-{i:04d}" for i in range(n)]


def _long(day: pd.DataFrame, names: list[str]) -> pd.DataFrame:
    long = day.reset_index().melt(id_vars="date", var_name="asset", value_name="price")
    long["date"] = long["date"].dt.strftime("%Y-%m-%d")
    long["price"] = long["price"].map(repr)
    return pd.concat([long.assign(portfolio=n) for n in names], ignore_index=True)[
        ["portfolio", "date", "asset", "price"]
    ]


def _set_up(url: str, prices: pd.DataFrame, names: list[str], config: Config) -> float:
    start = time.perf_counter()
    result = monitor(prices, config)
    with open_store(url) as store:
        for name in names:
            archive_run(store, name, result, config, source="set-up", explain=False)
    return time.perf_counter() - start


def _cli_day(url: str, day_file: Path) -> tuple[float, str]:
    command = [sys.executable, "-m", "riskshape", "ingest", "--prices", str(day_file), "--store", url]
    start = time.perf_counter()
    done = subprocess.run(command, capture_output=True, text=True, check=False)
    wall = time.perf_counter() - start
    if done.returncode != 0:
        raise SystemExit(f"riskshape ingest failed ({done.returncode}):\n{done.stdout}\n{done.stderr}")
    return wall, " ".join(command[1:])


def _feed(url: str, day: pd.DataFrame, names: list[str], ingestor: Ingestor, workers: int) -> float:
    feed = split_feed(_long(day, names), "day file")
    with open_store(url) as store:
        start = time.perf_counter()
        outcomes = ingest_many(store, feed, ingestor, workers=workers)
        wall = time.perf_counter() - start
    bad = [o for o in outcomes if o.report is None or o.report.windows_added != 1]
    if bad:
        raise SystemExit(f"{bad[0].portfolio}: {bad[0].error or bad[0].report}")
    return wall


def _one(url: str, day: pd.DataFrame, ingestor: Ingestor) -> float:
    with open_store(url) as store:
        start = time.perf_counter()
        report = ingestor.ingest(store, "one", day, source="day")
        wall = time.perf_counter() - start
    assert report.windows_added == 1, report.note
    return wall


def main(argv: list[str] | None = None) -> None:
    """Run the daily benchmark and print its figures."""
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--portfolios", type=int, default=1000)
    parser.add_argument("--assets", type=int, default=50)
    parser.add_argument("--one-assets", type=int, default=100)
    parser.add_argument("--years", type=float, default=5.0)
    args = parser.parse_args(argv)
    keep_blas_pinned()
    config = Config()
    n_days = int(args.years * BUSINESS_DAYS_PER_YEAR)
    names = _names(args.portfolios)
    print(f"uptime: {subprocess.run(['uptime'], capture_output=True, text=True).stdout.strip()}")
    print(f"command: python benchmarks/daily.py {' '.join(argv if argv is not None else sys.argv[1:])}")
    with tempfile.TemporaryDirectory() as folder:
        prices = factor_prices(n_days + 3, args.assets, seed=1)  # the history and three new days
        held = prices.iloc[:-3]
        cli_url = f"sqlite:///{Path(folder) / 'cli.sqlite'}"
        setup = _set_up(cli_url, held, names, config)
        print(f"set-up: {len(names)} portfolios x {args.assets} assets x {len(held)} days in {setup:.1f} s")
        day_file = Path(folder) / "day.csv"
        _long(prices.iloc[[-3]], names).to_csv(day_file, index=False)
        wall, command = _cli_day(cli_url, day_file)
        per = wall / len(names)
        print(
            f"1. {command}: {wall:.2f} s wall for {len(names)} portfolios ({per * 1000:.0f} ms each; "
            f"1,000 portfolios at that rate: {per * 1000:.0f} s; target < 60 s)"
        )

        lib_url = f"sqlite:///{Path(folder) / 'lib.sqlite'}"
        _set_up(lib_url, held, names, config)
        ingestor = Ingestor(config, cache_size=max(128, len(names)))
        cold = _feed(lib_url, prices.iloc[[-3]], names, ingestor, workers=1)
        serial = _feed(lib_url, prices.iloc[[-2]], names, ingestor, workers=1)
        threads = _feed(lib_url, prices.iloc[[-1]], names, ingestor, workers=2)
        n = len(names)
        print(
            f"2. in one process: cold (fresh Ingestor) {cold / n * 1000:.0f} ms per portfolio; "
            f"warm one at a time {serial / n * 1000:.0f} ms; warm on 2 threads {threads / n * 1000:.0f} ms"
        )

        one = factor_prices(n_days + 2, args.one_assets, seed=2)  # the history and two new days
        one_url = f"sqlite:///{Path(folder) / 'one.sqlite'}"
        with open_store(one_url) as store:
            store.ensure_portfolio("one")
            Ingestor(config).ingest(store, "one", one.iloc[:-2], source="set-up")
        day_ingestor = Ingestor(config)  # fresh: as after a restart
        cold_one = _one(one_url, one.iloc[[-2]], day_ingestor)
        warm_one = _one(one_url, one.iloc[[-1]], day_ingestor)  # the next day: its result is in memory
        print(
            f"3. one portfolio-day, {args.one_assets} assets, {len(one) - 2} days held: cold {cold_one * 1000:.0f} ms, "
            f"warm {warm_one * 1000:.0f} ms (target < 30 ms, restart or not)"
        )
    print(f"cores: {os.cpu_count()}")


if __name__ == "__main__":
    main()
