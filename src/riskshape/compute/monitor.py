"""The one orchestrator: prices -> returns -> windows -> diagrams -> summaries.

``monitor(prices, config)`` runs a batch; ``MonitorResult.update(more_prices)`` takes the next
day(s) and computes only the new windows, giving the same numbers as a batch over all days.
"""

from __future__ import annotations

import time
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field
from functools import cached_property, partial
from typing import Any

import numpy as np
import pandas as pd

from riskshape._version import __version__
from riskshape.compute.batch import (
    WindowResult,
    WindowSettings,
    compute_batch,
    compute_batch_profiled,
    diagram_distances,
    first_row_needed,
    preload,
)
from riskshape.compute.derived import DerivedColumns, derive_columns, extend_columns, window_volatility
from riskshape.compute.executors import Executor, make_executor
from riskshape.compute.returns import to_returns
from riskshape.compute.stages import StageTimes
from riskshape.compute.summaries import DISTANCE_NAMES, SUMMARY_NAMES
from riskshape.compute.window_view import Window, open_window
from riskshape.compute.windows import window_end_positions, window_rows
from riskshape.config import Config
from riskshape.errors import DataError
from riskshape.prices import ValidPrices, ensure_valid, hash_prices
from riskshape.types import Diagram, Diagrams, FloatArray, Positions

__all__ = ["monitor", "MonitorResult", "feature_columns"]

ProgressFn = Callable[[int, int], None]


def feature_columns(maxdim: int) -> list[str]:
    """Names of the feature columns for homology dimensions 0..``maxdim``, in table order.

    Parameters
    ----------
    maxdim : int
        The highest homology dimension computed.

    Returns
    -------
    list of str
        Column names, ``h0_...`` first.
    """
    columns = ["n_assets", "n_left_out", "mean_correlation"]
    for k in range(maxdim + 1):
        columns += [f"h{k}_{name}" for name in SUMMARY_NAMES + DISTANCE_NAMES]
    return columns


@dataclass(frozen=True)
class MonitorResult:
    """Per-window summaries, diagrams and provenance of one monitoring run.

    Use :func:`monitor` to make one. ``features`` is indexed by window end; ``diagram``,
    ``assets`` and ``window_inputs_hash`` look up one window, and ``window`` opens it up (its
    returns, correlations, distances and diagrams).
    """

    config: Config
    prices: pd.DataFrame
    returns: pd.DataFrame
    window_ends: pd.DatetimeIndex
    windows: tuple[WindowResult, ...] = field(repr=False)
    package_version: str = __version__
    stage_times: StageTimes | None = field(default=None, repr=False, compare=False)
    """Seconds by stage of the run that made this result, with ``monitor(..., profile=True)``; else None."""
    derived_held: DerivedColumns | None = field(default=None, repr=False, compare=False)
    """The derived columns of the windows held before an update (so only the new ones are computed); else None."""
    with_baselines: bool = False
    """Whether each window's baselines were computed with it (``monitor(..., baselines=True)``);
    :meth:`update` keeps doing so."""

    @cached_property
    def baselines(self) -> pd.DataFrame:
        """The baselines of every window, columns prefixed ``base_`` so they never clash with a feature.

        ``base_n_assets``, ``base_ew_volatility``, ``base_mean_correlation``,
        ``base_absorption_ratio`` and ``base_turbulence``, indexed like :attr:`features`, bit for
        bit what :func:`riskshape.research.compute_baselines` gives on the same returns and
        configuration. Computed by the workers with the windows where the run asked for them
        (``monitor(..., baselines=True)``: a few per cent of the run); otherwise computed now,
        by :func:`riskshape.research.compute_baselines` (as long again as a quarter of the run).
        """
        from riskshape.research.baselines import BASELINE_COLUMNS, BASELINE_PREFIX, compute_baselines

        if not self.with_baselines:
            return compute_baselines(self.returns, self.config, data_are_returns=True, prefix=BASELINE_PREFIX)
        values = np.array([r.baselines for r in self.windows], dtype=float).reshape(-1, len(BASELINE_COLUMNS))
        frame = pd.DataFrame(values, index=self.window_ends, columns=list(BASELINE_COLUMNS))
        frame.insert(0, "n_assets", np.array([len(r.used) for r in self.windows], dtype=np.int64))
        return frame.add_prefix(BASELINE_PREFIX)

    @cached_property
    def features(self) -> pd.DataFrame:
        """One row per window end: ``n_assets``, ``n_left_out``, ``mean_correlation``, ``h{k}_*``.

        With ``[derived]`` settings, the derived columns follow (:attr:`derived`).
        """
        if not self.config.derived.active:
            return self._summaries
        return self._summaries.join(self.derived.frame)

    @cached_property
    def derived(self) -> DerivedColumns:
        """The columns ``[derived]`` asks for, and why any value is NaN (:mod:`riskshape.compute.derived`)."""
        settings = self.config.derived
        if not settings.active:
            return derive_columns(self._summaries, pd.Series(dtype=float), settings)
        if self.derived_held is not None:  # after an update: only the new windows are computed
            return extend_columns(self.derived_held, self._summaries, self._volatility, settings, self.config.step)
        return derive_columns(self._summaries, self._volatility(self.window_ends), settings, self.config.step)

    def _volatility(self, ends: pd.DatetimeIndex) -> pd.Series:
        """The equal-weight volatility of the windows ending at ``ends``: the workers' baselines where
        the run computed them with the windows, else the same function on the same blocks.
        """
        if self.with_baselines:
            return self.baselines["base_ew_volatility"].reindex(ends)
        return window_volatility(self.returns, ends, self.config)

    @cached_property
    def _summaries(self) -> pd.DataFrame:
        """The features computed window by window (the columns of :func:`feature_columns`)."""
        held = self.__dict__.pop("_held_summaries", None)
        if held is not None:
            # an update of a result whose features were read: only the new windows' rows are made
            # (the same values and types as a table made over every window; tests/compute checks it)
            start = len(held)
            new_rows = _features_table(self.windows[start:], self.window_ends[start:], self.config.maxdim)
            return pd.concat([held, new_rows])
        return _features_table(self.windows, self.window_ends, self.config.maxdim)

    @cached_property
    def left_out(self) -> pd.DataFrame:
        """Assets left out of each window: columns ``window_end``, ``asset``, ``reason``."""
        names = self.prices.columns
        records = [
            (end, names[j], reason)
            for end, result in zip(self.window_ends, self.windows)
            for j, reason in result.left_out
        ]
        return pd.DataFrame(records, columns=["window_end", "asset", "reason"])

    @cached_property
    def input_hash(self) -> str:
        """SHA-256 of the validated prices (see :func:`riskshape.prices.hash_prices`)."""
        return hash_prices(self.prices)

    def _position(self, window_end: object) -> int:
        stamp = pd.Timestamp(window_end)
        pos = self.window_ends.get_indexer([stamp])[0]
        if pos < 0:
            raise DataError(
                f"no window ends on {stamp.date()}; windows end from {self.window_ends[0].date()} "
                f"to {self.window_ends[-1].date()} (every {self.config.step} trading day(s))"
            )
        return int(pos)

    def diagram(self, window_end: object, dim: int) -> Diagram:
        """Finite bars (birth, death) of the window ending at ``window_end`` in dimension ``dim``.

        Raises
        ------
        DataError
            If no window ends on that date or ``dim`` exceeds ``maxdim``.
        """
        if not 0 <= dim <= self.config.maxdim:
            raise DataError(f"dim must be between 0 and maxdim={self.config.maxdim}, got {dim}")
        return self.windows[self._position(window_end)].diagrams[dim].copy()

    def assets(self, window_end: object) -> tuple[str, ...]:
        """Assets admitted to the window ending at ``window_end``, in column order."""
        used = self.windows[self._position(window_end)].used
        return tuple(self.prices.columns[used])

    def _window_frame(self, pos: int) -> pd.DataFrame:
        """Rows of the returns table (every asset) of the window at position ``pos``."""
        end = self.returns.index.get_loc(self.window_ends[pos])
        return self.returns.iloc[window_rows(end, self.config.window)]

    def window(self, window_end: object) -> Window:
        """The window ending at ``window_end``, as the engine computed it.

        Its end, admitted and left-out assets, exact returns, the returns block the engine used,
        the correlation and distance matrices (rebuilt with the engine's own functions and this
        run's settings) and the diagrams (see :class:`riskshape.compute.window_view.Window`).

        Raises
        ------
        DataError
            If no window ends on that date.
        """
        pos = self._position(window_end)
        return open_window(self._window_frame(pos), self.windows[pos], settings_of(self.config))

    def window_returns(self, window_end: object) -> pd.DataFrame:
        """The exact returns (admitted assets, NaN kept) of the window ending at ``window_end``."""
        pos = self._position(window_end)
        return self._window_frame(pos)[list(self.assets(window_end))]

    def window_inputs_hash(self, window_end: object) -> str:
        """SHA-256 of the window's exact inputs: asset names, dates and returns (float64, NaN kept)."""
        return hash_prices(self.window_returns(window_end))

    def update(self, more_prices: pd.DataFrame, progress: ProgressFn | None = None) -> MonitorResult:
        """Add the next day(s) of prices and compute only the windows they complete.

        Parameters
        ----------
        more_prices : pandas.DataFrame
            Wide prices with the same asset columns; dates already held must carry the same prices.
        progress : callable, optional
            Called as ``progress(done, total)`` after each batch.

        Returns
        -------
        MonitorResult
            Equal to ``monitor`` over all the days.

        Raises
        ------
        DataError
            If assets differ, or a date already held comes with a different price.
        """
        new = ensure_valid(more_prices, source="new prices", min_rows=1)
        if list(new.columns) != list(self.prices.columns):
            raise DataError(
                f"new prices: assets {list(new.columns)} differ from the monitored assets "
                f"{list(self.prices.columns)}; give the same columns in the same order, or run monitor again"
            )
        held = new.index.intersection(self.prices.index)
        if len(held):
            same = np.array_equal(new.loc[held].to_numpy(), self.prices.loc[held].to_numpy(), equal_nan=True)
            if not same:
                raise DataError(
                    f"new prices: dates already held ({held[0].date()} ...) carry different prices; "
                    "revised prices are corrections: run monitor again on the corrected history"
                )
        fresh = new.loc[new.index.difference(self.prices.index)]
        if len(fresh) and fresh.index[0] <= self.prices.index[-1]:
            raise DataError(
                f"new prices: date {fresh.index[0].date()} falls inside the history already held; "
                "only days after the last one can be added"
            )
        prices = ValidPrices.of_validated_parts(pd.concat([self.prices, fresh]))
        returns = to_returns(prices, self.config.returns)
        ends = window_end_positions(len(returns), self.config.window, self.config.step)
        new_ends = ends[len(self.windows) :]
        previous = self.windows[-1].diagrams if self.windows else None
        added, _ = _run_windows(
            returns.to_numpy(), new_ends, self.config, previous, progress, None, False, self.with_baselines
        )
        grown = MonitorResult(
            config=self.config,
            prices=prices,
            returns=returns,
            window_ends=pd.DatetimeIndex(returns.index[ends], name="window_end"),
            windows=self.windows + tuple(added),
            derived_held=self.derived if self.config.derived.active else None,
            with_baselines=self.with_baselines,
        )
        if "_summaries" in self.__dict__ and added:
            grown.__dict__["_held_summaries"] = self._summaries  # the rows held, for grown.features
        return grown


def _features_table(windows: Sequence[WindowResult], ends: pd.DatetimeIndex, maxdim: int) -> pd.DataFrame:
    """The features of ``windows`` (ending at ``ends``), one row each (see ``MonitorResult.features``)."""
    columns = feature_columns(maxdim)
    head = np.array([(len(r.used), len(r.left_out), r.mean_correlation) for r in windows], dtype=float)
    # per window, dimension by dimension: the summaries, then the distances (the column order)
    per_dim = [np.hstack([r.summaries, r.distances]).ravel() for r in windows]
    values = np.column_stack([head.reshape(-1, 3), np.array(per_dim, dtype=float).reshape(len(head), len(columns) - 3)])
    frame = pd.DataFrame(values, index=ends, columns=columns)
    int_columns = ["n_assets", "n_left_out"] + [f"h{k}_n_bars" for k in range(maxdim + 1)]
    return frame.astype({c: "int64" for c in int_columns})


def monitor(
    prices: pd.DataFrame,
    config: Config | None = None,
    *,
    progress: ProgressFn | None = None,
    profile: bool = False,
    baselines: bool = False,
) -> MonitorResult:
    """Rolling persistent homology of a portfolio's correlation structure.

    Parameters
    ----------
    prices : pandas.DataFrame
        Wide prices: ``DatetimeIndex`` of trading days, one column per asset, NaN where missing.
        (A table with a ``date`` column, wide or long, is accepted too.)
    config : Config, optional
        Defaults to ``Config()``.
    progress : callable, optional
        Called as ``progress(done, total)`` as windows complete.
    profile : bool
        Measure the time of each stage where the windows are computed and sum it into
        ``MonitorResult.stage_times`` (:mod:`riskshape.compute.stages`); the results are the same.
    baselines : bool
        Compute each window's baselines (equal-weight volatility, mean correlation, absorption
        ratio, turbulence: :mod:`riskshape.research.baselines`) with it, in the workers, on the
        same admitted returns; read them from ``MonitorResult.baselines``. The features are the
        same either way.

    Returns
    -------
    MonitorResult

    Raises
    ------
    DataError
        If the prices fail validation (see :mod:`riskshape.prices`).

    Examples
    --------
    >>> from riskshape.demo.scenario import generate_scenario
    >>> scenario = generate_scenario(seed=1, n_days=90)
    >>> result = monitor(scenario.prices, Config(window=60, step=10, compute={"executor": "serial"}))
    >>> list(result.features.columns[:3])
    ['n_assets', 'n_left_out', 'mean_correlation']
    """
    config = config or Config()
    valid = ensure_valid(prices, source="prices", min_rows=config.window + 1)
    returns = to_returns(valid, config.returns)
    ends = window_end_positions(len(returns), config.window, config.step)
    windows, stage_times = _run_windows(returns.to_numpy(), ends, config, None, progress, None, profile, baselines)
    return MonitorResult(
        config=config,
        prices=valid,
        returns=returns,
        window_ends=pd.DatetimeIndex(returns.index[ends], name="window_end"),
        windows=tuple(windows),
        stage_times=stage_times,
        with_baselines=baselines,
    )


def compute_windows_at(
    returns: FloatArray, ends: Positions, config: Config, previous: Diagrams | None = None
) -> list[WindowResult]:
    """The windows ending at ``ends`` (rows of ``returns``), as :func:`monitor` computes them.

    Parameters
    ----------
    returns : numpy.ndarray
        The returns table's values; only the rows the windows need must be filled (from
        :func:`riskshape.compute.batch.first_row_needed` of the first end to the last end).
    ends : numpy.ndarray
        Window end rows, ascending, on the grid of :func:`riskshape.compute.window_end_positions`.
    config : Config
    previous : tuple of numpy.ndarray, optional
        Diagrams of the window before the first one (for its distances; NaN without).

    Returns
    -------
    list of WindowResult
        Equal to the same windows of a :func:`monitor` over the whole history.
    """
    return _compute_windows(returns, ends, config, previous, None)


def settings_of(config: Config) -> WindowSettings:
    """The worker's share of a configuration (:meth:`WindowSettings.from_config`)."""
    return WindowSettings.from_config(config)


def _compute_windows(
    values: FloatArray,
    ends: Positions,
    config: Config,
    previous: Diagrams | None,
    progress: ProgressFn | None,
    executor: Executor | None = None,
) -> list[WindowResult]:
    """Windows ending at ``ends``, computed in batches by the configured executor (see :func:`_run_windows`)."""
    return _run_windows(values, ends, config, previous, progress, executor, False)[0]


def _run_windows(
    values: FloatArray,
    ends: Positions,
    config: Config,
    previous: Diagrams | None,
    progress: ProgressFn | None,
    executor: Executor | None,
    profile: bool,
    baselines: bool = False,
) -> tuple[list[WindowResult], StageTimes | None]:
    """Windows ending at ``ends``, computed in batches by the configured executor; their stage times if profiled.

    Each batch computes its windows' diagrams and the distances between them; the distance
    from a batch's first window to the window before it is computed here, from the previous
    batch's last diagrams, as results arrive (no window is computed twice). Batches are made
    small enough to keep every worker of a pool busy (at least four per worker, at least 16
    windows each); results do not depend on the batching.

    Profiled, each batch measures its stages where it runs and the parent sums them; the
    workers' time (wall time of the batches times the workers used) not spent in a stage is
    charged to the hand-off.
    """
    if len(ends) == 0:
        return [], StageTimes() if profile else None
    settings = WindowSettings.from_config(config, baselines=baselines)
    all_ends = np.asarray(ends)
    size = config.compute.batch_windows
    own = executor is None
    runner = executor or make_executor(config.compute, -(-len(all_ends) // size), preload=partial(preload, settings))
    size = _balanced_batch_size(len(all_ends), size, getattr(runner, "workers", 1))
    jobs = []
    for start in range(0, len(all_ends), size):
        batch_ends = all_ends[start : start + size]
        first_row = first_row_needed(int(batch_ends[0]), settings)
        rows = values[first_row : int(batch_ends[-1]) + 1]
        jobs.append((rows, batch_ends - first_row, settings, previous if start == 0 else None, first_row))
    results: list[WindowResult] = []
    times = StageTimes()
    started = time.perf_counter()
    try:
        for b, (batch_results, batch_times) in enumerate(_batches(runner, jobs, profile)):
            times = times + batch_times
            if b > 0:
                link_start = time.perf_counter()
                first = batch_results[0]
                link = diagram_distances(results[-1].diagrams, first.diagrams, settings.order_p)
                batch_results = [first.with_distances(link), *batch_results[1:]]
                times = times.with_stage("distances", time.perf_counter() - link_start)
            results.extend(batch_results)
            if progress is not None:
                progress(len(results), len(ends))
        elapsed = time.perf_counter() - started
    finally:
        if own:
            runner.close()
    if not profile:
        return results, None
    capacity = elapsed * min(getattr(runner, "workers", 1), len(jobs))
    return results, times.with_stage("handoff", max(0.0, capacity - times.total))


def _batches(
    runner: Executor, jobs: list[tuple[Any, ...]], profile: bool
) -> Iterator[tuple[list[WindowResult], StageTimes]]:
    """Each batch's results and its stage times (zero unless profiled), in job order."""
    if profile:
        yield from runner.map(compute_batch_profiled, jobs)
        return
    nothing = StageTimes()
    for batch_results in runner.map(compute_batch, jobs):
        yield batch_results, nothing


def _balanced_batch_size(n_windows: int, size: int, workers: int) -> int:
    """``size``, made smaller when that leaves fewer than four batches per worker (not below 16)."""
    if workers <= 1:
        return size
    return max(1, min(size, max(16, -(-n_windows // (4 * workers)))))
