"""A one-price correction in the middle of five years at 100 assets (target: under 1 s).

Builds an archive of five years (1,261 business days) of 100 fictional assets with the default
configuration (window 60, step 1, H0 and H1), through ``riskshape.archive_run``, with the day state
the daily loop keeps after a run (:mod:`riskshape.daily.tail_run`); then sends one
corrected price, for a date in the middle of the history, through :class:`riskshape.daily.Ingestor`
(``correction=True``) and times it, from the call to the archived versions, records and alerts.
Each repeat corrects another date (a fresh correction every time); the median is reported.

    python benchmarks/correction.py [--repeats 5] [--store sqlite:///path]
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from benchmarks.data import factor_prices  # noqa: E402
from riskshape import Config, archive_run, monitor  # noqa: E402
from riskshape.daily import Ingestor  # noqa: E402
from riskshape.daily.tail_run import save_day_state, state_after_full_run  # noqa: E402
from riskshape.store import open_store, verify_chain  # noqa: E402

PORTFOLIO = "Bench Meridian"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--store", default=None, help="archive URL (default: a SQLite file in a temporary folder)")
    args = parser.parse_args()
    print(f"uptime: {subprocess.run(['uptime'], capture_output=True, text=True).stdout.strip()}")
    prices = factor_prices(1261, 100, seed=0)
    config = Config()
    folder = tempfile.mkdtemp(prefix="rs-correction-")
    url = args.store or f"sqlite:///{folder}/archive.sqlite"
    started = time.perf_counter()
    with open_store(url) as store:
        store.create_portfolio(PORTFOLIO)
        result = monitor(prices, config)
        report = archive_run(store, PORTFOLIO, result, config, explain=False)
        save_day_state(store, PORTFOLIO, state_after_full_run(report.run, result, config))
        print(f"archive built in {time.perf_counter() - started:.1f} s ({url})")
        ingestor = Ingestor(config)
        times = []
        for k in range(args.repeats):
            row = len(prices) // 2 + 7 * k
            day, asset = prices.index[row], prices.columns[k]
            body = prices.loc[[day], [asset]] * 1.02
            tick = time.perf_counter()
            report = ingestor.ingest(store, PORTFOLIO, body, correction=True, source="benchmark")
            times.append(time.perf_counter() - tick)
            print(f"  {day.date()} {asset}: {times[-1]:.3f} s  {report.note}")
        print(f"one-price correction, median of {len(times)}: {statistics.median(times):.3f} s (target < 1 s)")
        print(f"chain verifies: {verify_chain(store).ok}")
    print(f"uptime: {subprocess.run(['uptime'], capture_output=True, text=True).stdout.strip()}")


if __name__ == "__main__":
    main()
