"""The derived columns' cost beside the monitor's, on the demo scenario (seed 7, default configuration).

Run: ``python benchmarks/derived_cost.py [repeats]``. Each repeat, in this process, one after the
other on the same prices:

1. ``monitor`` with the default configuration (the process pool of ``[compute]``) and its
   ``features``; then the derived columns of that result (``[derived] net_of_market = true,
   change_horizons = [20, 60, 100]``: the equal-weight volatility of every window and the columns),
   timed alone; their ratio to the monitor's time;
2. a one-day ``update`` of a result holding all but the last day, then its ``features``, with the
   derived columns and without (each on a result of its own configuration); their ratio.

The medians of the ratios are the figures to quote (the machines are shared: whole-run times move
by 20 % or more).
"""

from __future__ import annotations

import statistics
import sys
import time

import pandas as pd

from riskshape import Config, monitor
from riskshape.compute.derived import derive_columns, window_volatility
from riskshape.demo.scenario import generate_scenario

DERIVED = {"net_of_market": True, "change_horizons": [20, 60, 100]}


def _timed_update(prices: pd.DataFrame, config: Config) -> float:
    """Seconds of a one-day update and its features, on a result holding all but the last day."""
    held = monitor(prices.iloc[:-1], config)
    _ = held.features
    start = time.perf_counter()
    _ = held.update(prices.iloc[-1:]).features
    return time.perf_counter() - start


def main(repeats: int = 3) -> None:
    """Print, per repeat and as medians, the derived columns' time against the monitor's and the update's."""
    prices = generate_scenario(seed=7).prices
    plain = Config()
    derived = Config(derived=DERIVED)
    batch_ratios, update_ratios = [], []
    for _ in range(repeats):
        start = time.perf_counter()
        result = monitor(prices, plain)
        summaries = result.features
        monitor_s = time.perf_counter() - start
        start = time.perf_counter()
        volatility = window_volatility(result.returns, result.window_ends, plain)
        derive_columns(summaries, volatility, derived.derived, plain.step)
        derived_s = time.perf_counter() - start
        batch_ratios.append(derived_s / monitor_s)
        update_plain = _timed_update(prices, plain)
        update_derived = _timed_update(prices, derived)
        update_ratios.append(update_derived / update_plain)
        print(
            f"monitor {monitor_s:.2f} s   derived columns {derived_s:.3f} s   ratio {batch_ratios[-1]:.1%}   "
            f"one-day update + features: {update_plain:.3f} s plain, {update_derived:.3f} s with derived "
            f"(x{update_ratios[-1]:.1f})"
        )
    print(
        f"median ratios over {repeats} repeats ({len(result.window_ends)} windows, {prices.shape[1]} assets): "
        f"derived / monitor {statistics.median(batch_ratios):.1%}; "
        f"update with derived / plain update x{statistics.median(update_ratios):.1f}"
    )


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 3)
