"""The baselines' cost beside the monitor's, on the demo scenario (seed 7, default configuration).

Run: ``python benchmarks/baselines_cost.py [repeats]``. Each repeat times, one after the other in
this process on the same prices and configuration (the process pool of ``[compute]``):
``monitor``; ``monitor(..., baselines=True)`` (the baselines computed with the windows, in the
workers); and ``compute_baselines`` on its own. It prints the times and the two costs as a share
of the monitor's time, on the wall clock and on the CPU clock (this process and its finished
workers): ``with`` is (monitor with baselines - monitor) / monitor, the figure issue 18 asks
under 10%; ``alone`` is compute_baselines / monitor. The median over the repeats is the figure
to quote, the CPU one on a busy machine (there whole-run wall times move by 20% or more), with
the load printed at the start and the end.
"""

from __future__ import annotations

import os
import resource
import statistics
import sys
import time
from collections.abc import Callable

from riskshape import Config, monitor
from riskshape.demo.scenario import generate_scenario
from riskshape.research.baselines import compute_baselines


def _load() -> str:
    return ", ".join(f"{x:.2f}" for x in os.getloadavg())


def _cpu() -> float:
    """CPU seconds of this process and of its finished children (the pool's workers, once shut down)."""
    own, children = resource.getrusage(resource.RUSAGE_SELF), resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime + children.ru_utime + children.ru_stime


def _timed(fn: Callable[[], object]) -> tuple[float, float, object]:
    """Wall and CPU seconds of ``fn()`` (each run closes its pool, so the workers' CPU is counted)."""
    wall, cpu = time.perf_counter(), _cpu()
    out = fn()
    return time.perf_counter() - wall, _cpu() - cpu, out


def main(repeats: int = 3) -> None:
    """Print the three times per repeat, the two shares, and their medians."""
    prices = generate_scenario(seed=7).prices
    config = Config()
    print(f"load average at the start: {_load()}")
    returns = monitor(prices, config).returns  # warm up: imports, the pool's first start
    shares: dict[str, list[float]] = {"with wall": [], "with cpu": [], "alone wall": [], "alone cpu": []}
    for _ in range(repeats):
        m_wall, m_cpu, _ = _timed(lambda: monitor(prices, config))
        j_wall, j_cpu, _ = _timed(lambda: monitor(prices, config, baselines=True))
        a_wall, a_cpu, _ = _timed(lambda: compute_baselines(returns, config, data_are_returns=True))
        shares["with wall"].append((j_wall - m_wall) / m_wall)
        shares["with cpu"].append((j_cpu - m_cpu) / m_cpu)
        shares["alone wall"].append(a_wall / m_wall)
        shares["alone cpu"].append(a_cpu / m_cpu)
        print(
            f"monitor {m_wall:.2f} s wall {m_cpu:.2f} CPU-s   with baselines {j_wall:.2f} s {j_cpu:.2f} CPU-s "
            f"({shares['with cpu'][-1]:+.1%} CPU)   compute_baselines alone {a_wall:.2f} s {a_cpu:.2f} CPU-s"
        )
    print(
        f"median over {repeats} repeats ({len(returns) - config.window + 1} windows), as a share of the monitor's time:"
    )
    for name, values in shares.items():
        print(f"  {name:<10} {statistics.median(values):+7.1%}   (spread {min(values):+.1%} to {max(values):+.1%})")
    print(f"load average at the end: {_load()}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 3)
