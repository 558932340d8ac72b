"""The same event study over a grid of window lengths and steps, in parallel.

Each grid point runs the monitor (in its worker, serially), the baselines on the same windows
and :func:`riskshape.research.study.study_table` against one fixed set of events; the grid
points go to the executor the configuration's ``compute`` section names
(:func:`riskshape.compute.executors.make_executor`: a local process pool by default, or Dask).
"""

from __future__ import annotations

import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from itertools import product

import pandas as pd

from riskshape.compute.executors import make_executor
from riskshape.compute.monitor import monitor
from riskshape.config import Config
from riskshape.errors import ConfigError, ResearchWarning
from riskshape.research.baselines import compute_baselines
from riskshape.research.events import DrawdownEvents
from riskshape.research.study import study_table
from riskshape.types import Direction, PriceFrame

__all__ = ["SweepResult", "sweep"]


@dataclass(frozen=True)
class SweepResult:
    """Event-study rows for every (window, step, signal).

    Attributes
    ----------
    table : pandas.DataFrame
        Indexed by ``window``, ``step``, ``signal``; the columns of
        :func:`riskshape.research.study.study_table`.
    """

    table: pd.DataFrame

    def pivot(self, metric: str = "auc") -> pd.DataFrame:
        """One metric as a (signal) x (window, step) table."""
        if metric not in self.table.columns:
            raise ConfigError(f"unknown metric {metric!r}; choose one of {list(self.table.columns)}")
        return self.table[metric].astype(float).unstack(["window", "step"])

    def best(self, metric: str = "auc") -> pd.DataFrame:
        """For each signal, the grid point with the highest ``metric`` (NaN rows skipped)."""
        values = self.table[metric].astype(float).dropna()
        if values.empty:
            return self.table.iloc[0:0]
        return self.table.loc[values.groupby(level="signal").idxmax().to_list()]


def _one_point(
    prices: PriceFrame,
    config: Config,
    events: DrawdownEvents,
    columns: Sequence[str] | None,
    directions: Mapping[str, Direction] | None,
    horizon: int,
    lookback: int,
    post_event_days: int | None,
) -> pd.DataFrame:
    result = monitor(prices, config)
    baselines = compute_baselines(result.returns, config, data_are_returns=True)
    features = result.features.join(baselines.drop(columns=[c for c in baselines.columns if c in result.features]))
    with warnings.catch_warnings():
        # one warning per grid point (raised in a worker) would drown the sweep's table, whose
        # nan_reasons column says why each NaN is NaN
        warnings.simplefilter("ignore", ResearchWarning)
        table = study_table(
            features,
            events,
            columns=columns,
            directions=directions,
            horizon=horizon,
            lookback=lookback,
            post_event_days=config.window if post_event_days is None else post_event_days,
        )
    return table.assign(window=config.window, step=config.step).reset_index()


def sweep(
    prices: PriceFrame,
    events: DrawdownEvents,
    *,
    windows: Sequence[int],
    steps: Sequence[int] = (1,),
    config: Config | None = None,
    columns: Sequence[str] | None = None,
    directions: Mapping[str, Direction] | None = None,
    horizon: int = 20,
    lookback: int = 120,
    post_event_days: int | None = None,
) -> SweepResult:
    """Event study of the summaries (and baselines) for every window length and step.

    Parameters
    ----------
    prices : pandas.DataFrame
        Wide prices, as for :func:`riskshape.monitor`.
    events : DrawdownEvents
        The events, fixed across the grid (e.g. from
        :func:`riskshape.research.events.portfolio_drawdown_events` on the same prices).
    windows, steps : sequence of int
        The grid.
    config : Config, optional
        Everything else (embedding, correlation, ...); its ``compute`` section decides where the
        grid points run. Each point runs its monitor serially.
    columns, directions, horizon, lookback
        See :func:`riskshape.research.study.study_table`.
    post_event_days : int, optional
        Default: the window length of each grid point (drops every window holding a crisis day).

    Returns
    -------
    SweepResult

    Examples
    --------
    Two window lengths on the small demo market, against one invented episode starting on day
    60. By hand, with ends every 5 days from day ``w``, ``H = 10`` and ``post_event_days = w``:
    the ends 50 and 55 precede the start (positive); the calm ends known by the last day are
    20 to 45 for ``w = 20`` and 30 to 45 for ``w = 30``:

    >>> import pandas as pd
    >>> from riskshape import Config
    >>> from riskshape.demo import generate_scenario
    >>> from riskshape.research.events import equal_weight_wealth, events_from_periods
    >>> scenario = generate_scenario(seed=1, n_days=90, assets_per_sector=3)
    >>> wealth = equal_weight_wealth(scenario.prices)
    >>> episode = pd.DataFrame({"start": [wealth.index[60]], "end": [wealth.index[70]]})
    >>> events = events_from_periods(episode, wealth)
    >>> result = sweep(
    ...     scenario.prices,
    ...     events,
    ...     windows=[20, 30],
    ...     steps=[5],
    ...     config=Config(compute={"executor": "serial"}),
    ...     columns=["mean_correlation", "h0_total_persistence"],
    ...     horizon=10,
    ...     lookback=20,
    ... )
    >>> result.table[["n_positive", "n_negative"]]
                                      n_positive  n_negative
    window step signal
    20     5    h0_total_persistence         2.0         6.0
                mean_correlation             2.0         6.0
    30     5    h0_total_persistence         2.0         4.0
                mean_correlation             2.0         4.0
    """
    base = config or Config()
    if not windows or not steps:
        raise ConfigError("sweep: give at least one window length and one step")
    points = [base.replace(window=w, step=s, compute={"executor": "serial"}) for w, s in product(windows, steps)]
    jobs = [(prices, cfg, events, columns, directions, horizon, lookback, post_event_days) for cfg in points]
    executor = make_executor(base.compute, len(jobs))
    try:
        parts = list(executor.map(_one_point, jobs))
    finally:
        executor.close()
    table = pd.concat(parts, ignore_index=True).set_index(["window", "step", "signal"]).sort_index()
    return SweepResult(table=table)
