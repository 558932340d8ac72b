"""What a run will cost, estimated before any window is computed, and refused above the budget.

The model is a rough upper guide measured on this project's development machine (one core of a
shared 2-core server, 60-day windows of independent random returns, the ``auto`` backend), which is
close to the worst case for Vietoris-Rips: correlated markets give fewer, shorter bars and run
faster. Per window, H0 alone (single linkage) costs about ``3e-8 n^2`` seconds; H1 about
``0.75 (n / 200)^4`` seconds (0.28 s at 100 assets, 0.75 s at 200, 25 s at 400 measured); H2 about
``n / 20`` times H1. Peak memory is about 200 MB for the process, ``24 n^2`` bytes for H0 and
``4.5 n^3`` bytes for H1 (x ``n / 20`` for H2) per worker. Windows are shared among the workers.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

from riskshape.compute.windows import window_end_positions
from riskshape.config import Config
from riskshape.errors import DataError

__all__ = ["CostEstimate", "estimate_cost", "check_cost"]

_BASE_MB = 200.0


@dataclass(frozen=True)
class CostEstimate:
    """The estimated wall time and peak memory of a run.

    Attributes
    ----------
    seconds : float
        Wall time of the windows, shared among the workers.
    memory_mb : float
        Peak resident memory of all the workers together.
    """

    seconds: float
    memory_mb: float


def _per_window(n_assets: int, maxdim: int) -> tuple[float, float]:
    """Seconds and megabytes of one window's persistence at ``n_assets`` points."""
    n = float(n_assets)
    seconds = 3e-8 * n**2
    memory = 24.0 * n**2 / 1e6
    if maxdim >= 1:
        seconds += 0.75 * (n / 200.0) ** 4
        memory += 4.5 * n**3 / 1e6
    if maxdim >= 2:
        seconds *= max(1.0, n / 20.0)
        memory *= max(1.0, n / 20.0)
    return seconds, memory


def _workers(config: Config) -> int:
    if config.compute.executor == "serial":
        return 1
    return config.compute.workers or os.cpu_count() or 1


def estimate_cost(n_assets: int, n_windows: int, config: Config) -> CostEstimate:
    """Estimate a run's wall time and peak memory from its size and ``maxdim`` (see the module notes).

    Parameters
    ----------
    n_assets : int
        Assets in the table.
    n_windows : int
        Windows to compute.
    config : Config
        ``maxdim`` and the executor's workers are used.

    Returns
    -------
    CostEstimate

    Examples
    --------
    >>> estimate_cost(3000, 20, Config(maxdim=1)).seconds > estimate_cost(3000, 20, Config(maxdim=0)).seconds
    True
    """
    workers = _workers(config)
    seconds, memory = _per_window(n_assets, config.maxdim)
    parallel = min(workers, max(n_windows, 1))
    return CostEstimate(seconds=seconds * n_windows / parallel, memory_mb=_BASE_MB + memory * parallel)


def check_cost(n_assets: int, n_dates: int, config: Config, source: str = "prices") -> CostEstimate:
    """The estimate of :func:`estimate_cost`, or a refusal naming the options that fit the budget.

    Parameters
    ----------
    n_assets, n_dates : int
        Assets and dates (price rows) of the table; the windows follow from ``window`` and ``step``.
    config : Config
        ``[checks] budget_seconds`` and ``budget_memory_mb`` are the budget.
    source : str
        Name used in messages.

    Returns
    -------
    CostEstimate

    Raises
    ------
    DataError
        If the estimate exceeds either budget: the message gives the estimate and the options that
        fit (H0 only, at most so many assets, the budget that would be needed).
    """
    n_windows = len(window_end_positions(max(n_dates - 1, 0), config.window, config.step))
    cost = estimate_cost(n_assets, n_windows, config)
    budget = config.checks
    if cost.seconds <= budget.budget_seconds and cost.memory_mb <= budget.budget_memory_mb:
        return cost
    options = []
    if config.maxdim > 0:
        h0 = estimate_cost(n_assets, n_windows, config.replace(maxdim=0))
        if h0.seconds <= budget.budget_seconds and h0.memory_mb <= budget.budget_memory_mb:
            options.append(f"H0 only (maxdim = 0: about {h0.seconds:.3g} s, {h0.memory_mb:.0f} MB)")
    fits = _most_assets(n_windows, config)
    if fits >= 3:
        options.append(f"at most {fits} assets")
    options.append(
        f"a bigger budget ([checks] budget_seconds >= {cost.seconds:.3g}, budget_memory_mb >= {cost.memory_mb:.0f})"
    )
    raise DataError(
        f"{source}: {n_assets} assets x {n_windows} windows with maxdim = {config.maxdim} would take about "
        f"{cost.seconds:.3g} s and {cost.memory_mb:.0f} MB, beyond the budget of {budget.budget_seconds:g} s and "
        f"{budget.budget_memory_mb:g} MB ([checks]); options that fit: " + "; ".join(options)
    )


def _most_assets(n_windows: int, config: Config) -> int:
    """The largest number of assets whose estimate fits the budget (bisection; the cost grows with n)."""
    low, high = 0, 100_000
    while low < high:
        mid = (low + high + 1) // 2
        cost = estimate_cost(mid, n_windows, config)
        if cost.seconds <= config.checks.budget_seconds and cost.memory_mb <= config.checks.budget_memory_mb:
            low = mid
        else:
            high = mid - 1
    return low
