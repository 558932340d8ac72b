"""The baselines' cost beside the monitor's, on the demo scenario (seed 7, default configuration).

Run: ``python benchmarks/baselines_cost.py [repeats]``. Each repeat times ``monitor`` and then
``compute_baselines`` on the same returns and configuration (the process pool of ``[compute]``),
one after the other in this process, and prints both and their ratio; the median ratio is the
figure to quote (the machines are shared: whole-run times move by 20 % or more).
"""

from __future__ import annotations

import statistics
import sys
import time

from riskshape import Config, monitor
from riskshape.demo.scenario import generate_scenario
from riskshape.research.baselines import compute_baselines


def main(repeats: int = 3) -> None:
    """Print the monitor's time, the baselines' time and their ratio, per repeat and the median."""
    prices = generate_scenario(seed=7).prices
    config = Config()
    ratios = []
    for _ in range(repeats):
        start = time.perf_counter()
        result = monitor(prices, config)
        monitor_s = time.perf_counter() - start
        start = time.perf_counter()
        compute_baselines(result.returns, config, data_are_returns=True)
        baselines_s = time.perf_counter() - start
        ratios.append(baselines_s / monitor_s)
        print(f"monitor {monitor_s:.2f} s   baselines {baselines_s:.2f} s   ratio {ratios[-1]:.0%}")
    print(f"median ratio {statistics.median(ratios):.0%} over {repeats} repeats ({len(result.window_ends)} windows)")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 3)
