"""The daily loop's figures: a day's feed for many portfolios, and one portfolio-day.

    python benchmarks/daily.py                       # N = 1,000 portfolios of 50 assets, five years held
    python benchmarks/daily.py --portfolios 10       # a smaller N (the per-portfolio figure is printed)

1. **Many portfolios through the command line.** N portfolios of ``--assets`` fictional assets
   hold ``--years`` of business days on an embedded SQLite archive. Set-up (not measured): one
   portfolio is ingested whole and its last day fed as a day (its run, features, diagrams, alerts,
   day state and day tail); its prices, run, features and diagrams are then copied in SQL under the
   other N - 1 names, each with its own day state appended to the ledger and its day tail (alerts
   are not copied: a day does not read them). A day file with a ``portfolio`` column carries the
   next day for all of them; ``riskshape ingest --prices DAYFILE --store URL`` runs it in a fresh
   process (as after a restart); its peak resident memory is reported.
2. **The next days in one process**, one portfolio at a time and on two threads.
3. **One portfolio-day at ``--one-assets`` assets** (100) and the same history: cold (the archive
   opened afresh and a new ``Ingestor`` for each day, as after a restart) and warm (the same
   ``Ingestor`` and store), ``--days`` days each, median and range.

Prints the figures, the command and ``uptime``. Not a test: figures vary with the machine's load.
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pandas as pd
import sqlalchemy as sa

sys.path.insert(0, str(Path(__file__).resolve().parent))

from data import factor_prices  # noqa: E402

from riskshape import Config  # noqa: E402
from riskshape.compute.executors import keep_blas_pinned  # noqa: E402
from riskshape.daily import Ingestor, ingest_many, split_feed  # noqa: E402
from riskshape.daily.tail_run import read_day_state, save_day_state  # noqa: E402
from riskshape.store import Store, open_store  # noqa: E402
from riskshape.store import schema as t  # noqa: E402
from riskshape.store.seals import seal_portfolio  # noqa: E402

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


def _copy_portfolio(store: Store, template: str, name: str) -> None:
    """Copy the template's prices, run, features and diagrams under ``name`` (SQL, sealed), then its day state."""
    source = store.get_portfolio(template).id
    target = store.ensure_portfolio(name).id
    run = store.latest_run(template)
    assert run is not None
    with store.engine.begin() as connection:
        for table in (t.prices,):
            columns = [c.name for c in table.columns if c.name not in ("id", "portfolio_id")]
            connection.execute(
                sa.insert(table).from_select(
                    ["portfolio_id", *columns],
                    sa.select(sa.literal(target), *[table.c[c] for c in columns]).where(table.c.portfolio_id == source),
                )
            )
        top = connection.execute(sa.select(sa.func.max(t.prices.c.id)).where(t.prices.c.portfolio_id == target))
        row = connection.execute(sa.select(t.runs).where(t.runs.c.id == run.id)).one()._asdict()
        row.update(portfolio_id=target, prices_through_id=int(top.scalar_one()))
        del row["id"]
        new_run = connection.execute(sa.insert(t.runs).values(**row)).inserted_primary_key
        assert new_run is not None
        for table in (t.features, t.diagrams):
            columns = [c.name for c in table.columns if c.name not in ("id", "portfolio_id", "run_id")]
            connection.execute(
                sa.insert(table).from_select(
                    ["portfolio_id", "run_id", *columns],
                    sa.select(sa.literal(target), sa.literal(int(new_run[0])), *[table.c[c] for c in columns]).where(
                        table.c.portfolio_id == source
                    ),
                )
            )
        seal_portfolio(connection, target)  # its commitment, as a portfolio archived by riskshape has
    state = read_day_state(store, template, run)
    assert state is not None
    copied = store.latest_run(name)
    assert copied is not None
    kept = store.day_tail(template)  # the day tail its last day kept: the same bytes, so the same digest
    if kept is not None:
        store.save_day_tail(name, copied.id, kept.payload)
    save_day_state(store, name, type(state)(**{**state.__dict__, "run_id": copied.id}))


def _held(store: Store, name: str, prices: pd.DataFrame, config: Config) -> None:
    """The history as a desk's archive holds it: ingested whole, its last day then fed as a day is.

    The last day leaves the state a day reads (with its day tail where this riskshape keeps one).
    """
    store.ensure_portfolio(name)
    Ingestor(config).ingest(store, name, prices.iloc[:-1], source="set-up")
    Ingestor(config).ingest(store, name, prices.iloc[[-1]], source="set-up")


def _set_up(url: str, prices: pd.DataFrame, names: list[str], config: Config) -> float:
    start = time.perf_counter()
    with open_store(url) as store:
        _held(store, names[0], prices, config)
        for name in names[1:]:
            _copy_portfolio(store, names[0], name)
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


def _one(store: Store, day: pd.DataFrame, ingestor: Ingestor) -> tuple[float, float]:
    """Wall and CPU seconds of one portfolio-day (CPU: this process, its threads included)."""
    start, cpu = time.perf_counter(), time.process_time()
    report = ingestor.ingest(store, "one", day, source="day")
    wall, cpu = time.perf_counter() - start, time.process_time() - cpu
    assert report.windows_added == 1, report.note
    return wall, cpu


def _spread(times: list[tuple[float, float]]) -> str:
    ms = [x[0] * 1000 for x in times]
    cpu = [x[1] * 1000 for x in times]
    return (
        f"median {statistics.median(ms):.1f} ms ({min(ms):.1f} to {max(ms):.1f}), "
        f"CPU median {statistics.median(cpu):.1f} ms ({min(cpu):.1f} to {max(cpu):.1f})"
    )


def main(argv: list[str] | None = None) -> None:
    """Run the daily benchmark and print its figures."""
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--portfolios", type=int, default=1000)
    parser.add_argument("--assets", type=int, default=50)
    parser.add_argument("--one-assets", type=int, default=100)
    parser.add_argument("--years", type=float, default=5.0)
    parser.add_argument("--only-cli", action="store_true", help="section 1 only (the command line)")
    parser.add_argument("--only-one", action="store_true", help="section 3 only (one portfolio-day)")
    parser.add_argument("--days", type=int, default=5, help="portfolio-days timed in section 3, cold and warm each")
    args = parser.parse_args(argv)
    keep_blas_pinned()
    config = Config()
    n_days = int(args.years * BUSINESS_DAYS_PER_YEAR)
    names = _names(args.portfolios)
    print(f"uptime: {subprocess.run(['uptime'], capture_output=True, text=True).stdout.strip()}")
    print(f"command: python benchmarks/daily.py {' '.join(argv if argv is not None else sys.argv[1:])}")
    with tempfile.TemporaryDirectory() as folder:
        if not args.only_one:
            _many(folder, args, names, n_days, config)
        if args.only_cli:
            return
        _one_day(folder, args, n_days, config)
    print(f"cores: {os.cpu_count()}")
    print(f"uptime: {subprocess.run(['uptime'], capture_output=True, text=True).stdout.strip()}")


def _many(folder: str, args: argparse.Namespace, names: list[str], n_days: int, config: Config) -> None:
    """Sections 1 and 2: a day for many portfolios, through the command line and in one process."""
    prices = factor_prices(n_days + 3, args.assets, seed=1)  # the history and three new days
    held = prices.iloc[:-3]
    url = f"sqlite:///{Path(folder) / 'many.sqlite'}"
    setup = _set_up(url, held, names, config)
    size = (Path(folder) / "many.sqlite").stat().st_size / 2**30
    print(
        f"set-up: {len(names)} portfolios x {args.assets} assets x {len(held)} days in {setup:.1f} s ({size:.1f} GiB)"
    )
    day_file = Path(folder) / "day.csv"
    _long(prices.iloc[[-3]], names).to_csv(day_file, index=False)
    wall, command = _cli_day(url, day_file)
    rss = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024
    per = wall / len(names)
    print(
        f"1. {command}: {wall:.2f} s wall for {len(names)} portfolios ({per * 1000:.0f} ms each; "
        f"1,000 portfolios at that rate: {per * 1000:.0f} s; target < 60 s); peak RSS {rss:.0f} MiB"
    )
    if args.only_cli:
        print(f"uptime: {subprocess.run(['uptime'], capture_output=True, text=True).stdout.strip()}")
        return
    ingestor = Ingestor(config, cache_size=max(128, len(names)))
    serial = _feed(url, prices.iloc[[-2]], names, ingestor, workers=1)
    threads = _feed(url, prices.iloc[[-1]], names, ingestor, workers=2)
    n = len(names)
    print(
        f"2. in one process, the next days: one at a time {serial / n * 1000:.0f} ms per portfolio; "
        f"on 2 threads {threads / n * 1000:.0f} ms"
    )


def _one_day(folder: str, args: argparse.Namespace, n_days: int, config: Config) -> None:
    """Section 3: one portfolio-day, cold and warm."""
    one = factor_prices(n_days + 2 * args.days, args.one_assets, seed=2)  # the history and the days timed
    one_url = f"sqlite:///{Path(folder) / 'one.sqlite'}"
    with open_store(one_url) as store:
        _held(store, "one", one.iloc[:n_days], config)
    cold: list[tuple[float, float]] = []
    for k in range(args.days):  # a restart before each day: the archive opened afresh, nothing in memory
        with open_store(one_url) as store:
            cold.append(_one(store, one.iloc[[n_days + k]], Ingestor(config)))
    warm: list[tuple[float, float]] = []
    with open_store(one_url) as store:
        day_ingestor = Ingestor(config)
        for k in range(args.days, 2 * args.days):
            warm.append(_one(store, one.iloc[[n_days + k]], day_ingestor))
    print(
        f"3. one portfolio-day, {args.one_assets} assets, {n_days} days held: cold {_spread(cold)}, "
        f"warm {_spread(warm)} (target < 30 ms, restart or not)"
    )


if __name__ == "__main__":
    main()
