"""One window, end to end: returns block -> admitted assets -> distance -> diagrams.

This is the unit of work the executors ship to workers; it is pure (no I/O, no globals).
:func:`compute_window` is the plain path for one window; :func:`compute_batch` computes
consecutive windows and takes the correlation from running sums where that changes nothing
beyond rounding (:mod:`riskshape.compute.moments`).
"""

from __future__ import annotations

from dataclasses import dataclass, fields
from typing import TYPE_CHECKING, cast

import numpy as np
from scipy.spatial.distance import pdist, squareform

from riskshape.compute.distance import correlation_to_distance, mean_offdiagonal
from riskshape.compute.estimators import estimate_correlation
from riskshape.compute.moments import RollingMoments, is_rebuild_point
from riskshape.compute.persistence import EMPTY_DIAGRAM, compute_diagrams
from riskshape.compute.stages import NO_CLOCK, StageClock, StageTimes
from riskshape.compute.summaries import SUMMARY_NAMES, diagram_pair_distances, summarize_diagram
from riskshape.compute.windows import (
    Selection,
    is_on_grid,
    select_assets,
    select_window,
    window_end_row,
    window_index,
    window_rows,
)
from riskshape.types import (
    CompactBars,
    CorrelationEstimator,
    CorrelationMatrix,
    Diagrams,
    DistanceMatrix,
    Embedding,
    FloatArray,
    MatrixEstimator,
    Positions,
    ReturnsBlock,
    RipsBackend,
)

if TYPE_CHECKING:
    from riskshape.config import Config

__all__ = [
    "WindowSettings",
    "WindowResult",
    "compute_window",
    "embedding_distance",
    "compute_batch",
    "compute_batch_profiled",
    "diagram_distances",
    "first_row_needed",
    "preload",
]


@dataclass(frozen=True)
class WindowSettings:
    """The part of :class:`riskshape.Config` a worker needs (small, picklable).

    Every field but ``rolling`` is the configuration key of the same name; :meth:`from_config`
    reads them by name. ``rolling`` (not a configuration key: it never changes a result beyond
    rounding) lets :func:`compute_batch` take correlations from running sums; ``False`` forces
    the plain path.
    """

    window: int
    min_coverage: float
    correlation: CorrelationEstimator
    maxdim: int
    order_p: float
    rips_backend: RipsBackend
    embedding: Embedding
    standardize_cloud: bool
    step: int = 1
    estimator: MatrixEstimator = "sample"
    rolling: bool = True
    baselines: bool = False

    @classmethod
    def from_config(cls, config: Config, *, rolling: bool = True, baselines: bool = False) -> WindowSettings:
        """The worker's share of a configuration: each field read from the key of the same name.

        Parameters
        ----------
        config : Config
            The configuration in force.
        rolling : bool
            Whether correlations may come from running sums (not a configuration key).
        baselines : bool
            Whether each window's baselines are computed with it (not a configuration key).

        Returns
        -------
        WindowSettings

        Examples
        --------
        >>> from riskshape.config import Config
        >>> WindowSettings.from_config(Config(window=90, maxdim=0)).window
        90
        """
        keys = {field.name: getattr(config, field.name) for field in fields(cls) if field.name not in _NOT_KEYS}
        return cls(**keys, rolling=rolling, baselines=baselines)


_NOT_KEYS = ("rolling", "baselines")


@dataclass(frozen=True, init=False)
class WindowResult:
    """What one window gives.

    Diagrams are stored compactly, all dimensions in one float32 array (lossless: their values
    are float32 rounded already; a diagram that is not is kept in float64).

    Parameters
    ----------
    used : numpy.ndarray
        Column positions of the admitted assets.
    left_out : tuple of (int, str)
        Column positions left out, with the reason.
    mean_correlation : float
        Mean off-diagonal correlation of the admitted assets (NaN below 2 assets).
    diagrams : tuple of numpy.ndarray
        H0..Hmaxdim finite bars.
    distances : numpy.ndarray
        (maxdim + 1, 2) Wasserstein and bottleneck distance of each dimension's diagram to the
        previous window's; NaN where there is no previous window.
    baselines : tuple of float, optional
        The window's baselines in :data:`riskshape.research.baselines.BASELINE_COLUMNS` order,
        where they were asked for (``WindowSettings.baselines``).

    Attributes
    ----------
    summaries : numpy.ndarray
        (maxdim + 1, len(SUMMARY_NAMES)) per-diagram summaries
        (:func:`riskshape.compute.summaries.summarize_diagram`), computed with the diagrams (in the worker).
    """

    used: Positions
    left_out: tuple[tuple[int, str], ...]
    mean_correlation: float
    bars: CompactBars
    sizes: tuple[int, ...]
    summaries: FloatArray
    distances: FloatArray
    baselines: tuple[float, ...] | None

    def __init__(
        self,
        used: Positions,
        left_out: tuple[tuple[int, str], ...],
        mean_correlation: float,
        diagrams: Diagrams,
        distances: FloatArray,
        baselines: tuple[float, ...] | None = None,
    ) -> None:
        bars = (
            np.concatenate([np.asarray(d, dtype=float).reshape(-1, 2) for d in diagrams]) if diagrams else EMPTY_DIAGRAM
        )
        compact = bars.astype(np.float32)
        if np.array_equal(compact, bars):
            bars = compact
        summaries = np.array([summarize_diagram(d).as_tuple() for d in diagrams], dtype=float)
        for name, value in (
            ("used", used),
            ("left_out", left_out),
            ("mean_correlation", mean_correlation),
            ("bars", bars),
            ("sizes", tuple(len(d) for d in diagrams)),
            ("summaries", summaries.reshape(len(diagrams), len(SUMMARY_NAMES))),
            ("distances", distances),
            ("baselines", baselines),
        ):
            object.__setattr__(self, name, value)

    @property
    def diagrams(self) -> Diagrams:
        """H0..Hmaxdim finite bars, each an (n, 2) float64 array."""
        bounds = np.cumsum((0,) + self.sizes)
        return tuple(self.bars[lo:hi].astype(float) for lo, hi in zip(bounds[:-1], bounds[1:]))

    def with_distances(self, distances: FloatArray) -> WindowResult:
        """A copy with ``distances`` set."""
        copy = object.__new__(WindowResult)
        copy.__dict__.update(self.__dict__)
        object.__setattr__(copy, "distances", distances)
        return copy


def compute_window(block: ReturnsBlock, settings: WindowSettings) -> WindowResult:
    """Diagrams and correlation level of one window of returns (the plain path).

    Parameters
    ----------
    block : numpy.ndarray
        (window, n_assets) returns, NaN where missing.
    settings : WindowSettings

    Returns
    -------
    WindowResult
        With ``distances`` all NaN (see :func:`compute_batch`).
    """
    return _from_selection(select_assets(block, settings.min_coverage), settings, None)


def _from_selection(
    selection: Selection, settings: WindowSettings, corr: CorrelationMatrix | None, clock: StageClock = NO_CLOCK
) -> WindowResult:
    """A window's result from its admitted assets; ``corr`` is their correlation if known already."""
    nan_distances = np.full((settings.maxdim + 1, 2), np.nan)
    baselines = _window_baselines(selection, settings, clock)
    if len(selection.used) < 2:
        empty = tuple(EMPTY_DIAGRAM for _ in range(settings.maxdim + 1))
        return WindowResult(selection.used, selection.left_out, float("nan"), empty, nan_distances, baselines)
    if corr is None:
        corr = estimate_correlation(selection.block, settings.correlation, settings.estimator)
    mean_correlation = mean_offdiagonal(corr)
    clock.mark("correlation")
    distance = embedding_distance(selection.block, corr, settings.embedding, settings.standardize_cloud)
    clock.mark("distance_matrix")
    diagrams = compute_diagrams(distance, settings.maxdim, settings.rips_backend)
    clock.mark("persistence")
    result = WindowResult(selection.used, selection.left_out, mean_correlation, diagrams, nan_distances, baselines)
    clock.mark("summaries")
    return result


def _window_baselines(selection: Selection, settings: WindowSettings, clock: StageClock) -> tuple[float, ...] | None:
    """The window's baselines on its admitted returns, where asked for (charged to ``baselines``)."""
    if not settings.baselines:
        return None
    clock.mark("correlation")  # the selection of the admitted assets, before
    from riskshape.research.baselines import window_baselines

    values = window_baselines(selection.block, settings.correlation)[1:]
    clock.mark("baselines")
    return values


def embedding_distance(
    block: ReturnsBlock,
    corr: CorrelationMatrix,
    embedding: Embedding,
    standardize_cloud: bool,
) -> DistanceMatrix:
    """The distance matrix whose Vietoris-Rips filtration gives a window's diagrams.

    Parameters
    ----------
    block : numpy.ndarray
        (days, assets) returns of the admitted assets, complete.
    corr : numpy.ndarray
        Their correlation matrix.
    embedding : {"correlation", "point_cloud"}
        ``correlation``: between assets, sqrt(2 (1 - rho)); ``point_cloud``: Euclidean between days.
    standardize_cloud : bool
        For ``point_cloud``: each asset's returns scaled to zero mean and unit variance first.

    Returns
    -------
    numpy.ndarray
    """
    if embedding == "point_cloud":
        points = block
        if standardize_cloud:
            points = (points - points.mean(axis=0)) / points.std(axis=0)
        return cast("DistanceMatrix", squareform(pdist(points)))
    return correlation_to_distance(corr)


def diagram_distances(previous: Diagrams, current: Diagrams, order_p: float) -> FloatArray:
    """(maxdim + 1, 2) array of Wasserstein (order ``order_p``) and bottleneck distances per dimension."""
    return np.array([diagram_pair_distances(a, b, order_p) for a, b in zip(previous, current)])


def compute_batch(
    rows: FloatArray,
    ends: Positions,
    settings: WindowSettings,
    previous: Diagrams | None = None,
    row_offset: int = 0,
) -> list[WindowResult]:
    """Compute consecutive windows over a slice of the returns table.

    Parameters
    ----------
    rows : numpy.ndarray
        Returns rows covering every window of the batch (row 0 = first row of the first window,
        or earlier).
    ends : numpy.ndarray
        Window end positions relative to ``rows``, ascending.
    settings : WindowSettings
    previous : tuple of numpy.ndarray, optional
        Diagrams of the window before the batch, if any (for the first distance).
    row_offset : int
        Position of ``rows[0]`` in the returns table. With ``settings.rolling`` the running sums
        are rebuilt at fixed positions of that table (:mod:`riskshape.compute.moments`), so results do
        not depend on how windows are split into batches provided ``rows`` reaches back to the
        last rebuild point (as :func:`riskshape.compute.monitor.monitor` arranges).

    Returns
    -------
    list of WindowResult
        One per end, with distances to the previous window filled in.
    """
    return _compute_batch(rows, ends, settings, previous, row_offset, NO_CLOCK)


def compute_batch_profiled(
    rows: FloatArray,
    ends: Positions,
    settings: WindowSettings,
    previous: Diagrams | None = None,
    row_offset: int = 0,
) -> tuple[list[WindowResult], StageTimes]:
    """:func:`compute_batch`, with the seconds it spent in each stage (:mod:`riskshape.compute.stages`).

    Parameters
    ----------
    rows, ends, settings, previous, row_offset
        As for :func:`compute_batch`.

    Returns
    -------
    tuple of (list of WindowResult, StageTimes)
        The same results as :func:`compute_batch`, and the batch's time by stage.
    """
    clock = StageClock()
    results = _compute_batch(rows, ends, settings, previous, row_offset, clock)
    return results, clock.times()


def _compute_batch(
    rows: FloatArray,
    ends: Positions,
    settings: WindowSettings,
    previous: Diagrams | None,
    row_offset: int,
    clock: StageClock,
) -> list[WindowResult]:
    # one memory layout whatever the caller passes (a view of a Fortran-ordered table, or the
    # C-ordered copy a worker unpickles), so the floating-point reductions run in one order
    rows = np.ascontiguousarray(rows, dtype=float)
    rolling = _Rolling(rows, settings, row_offset) if _rolling_applies(settings) else None
    results: list[WindowResult] = []
    last_used: Positions | None = None
    for end in ends:
        end = int(end)
        selection = select_window(rows, end, settings.window, settings.min_coverage)
        if last_used is not None and np.array_equal(selection.used, last_used):
            # share one array between windows with the same assets (pickled once per batch)
            selection = Selection(last_used, selection.block, selection.left_out)
        last_used = selection.used
        corr = rolling.correlation(end, selection.used) if rolling is not None else None
        result = _from_selection(selection, settings, corr, clock)
        if previous is not None:
            result = result.with_distances(diagram_distances(previous, result.diagrams, settings.order_p))
            clock.mark("distances")
        results.append(result)
        previous = result.diagrams
    return results


def first_row_needed(end: int, settings: WindowSettings) -> int:
    """First returns row :func:`compute_batch` needs for a batch whose first window ends at row ``end``.

    The window's first row, or with running sums the first row of the rebuild point before it
    (:func:`riskshape.compute.moments.is_rebuild_point`), whichever is earlier.
    """
    start = int(window_rows(end, settings.window).start)
    if not _rolling_applies(settings) or not is_on_grid(end, settings.window, settings.step):
        return start
    index = window_index(end, settings.window, settings.step)
    while not is_rebuild_point(index):
        index -= 1
    return min(start, int(window_rows(window_end_row(index, settings.window, settings.step), settings.window).start))


def preload(settings: WindowSettings) -> None:
    """Import the libraries the windows of these settings will need (before forking workers).

    giotto-ph where it is the Rips backend (it imports scikit-learn: about a second); the
    baselines' module where they are asked for.
    """
    from riskshape.compute.persistence import resolve_backend

    if settings.maxdim >= 1 and resolve_backend(settings.rips_backend) == "giotto":
        import gph  # noqa: F401
    if settings.baselines:
        import riskshape.research.baselines  # noqa: F401


def _rolling_applies(settings: WindowSettings) -> bool:
    """Running sums pay when a slide changes few rows and the estimator is Pearson's sample one."""
    return (
        settings.rolling
        and settings.correlation == "pearson"
        and settings.estimator == "sample"
        and 2 * settings.step < settings.window
    )


class _Rolling:
    """Running sums for the windows of one batch, rebuilt at fixed positions of the returns table."""

    def __init__(self, rows: FloatArray, settings: WindowSettings, row_offset: int) -> None:
        self.rows = rows
        self.window = settings.window
        self.step = settings.step
        self.offset = row_offset
        self.moments: RollingMoments | None = None
        self.end = -1  # relative end of the window the moments describe

    def _rebuild_end(self, end: int) -> int:
        """Relative end of the rebuild point at or before the window ending at ``end``."""
        index = window_index(end + self.offset, self.window, self.step)
        while not is_rebuild_point(index):
            index -= 1
        return window_end_row(index, self.window, self.step) - self.offset

    def correlation(self, end: int, used: Positions) -> CorrelationMatrix | None:
        """Correlation of ``used`` in the window ending at ``end`` from running sums, or None.

        None when the window is off the step grid, when the rebuild point lies before ``rows``,
        or when an admitted asset misses a return there (the coverage policy imputed it).
        """
        if not is_on_grid(end + self.offset, self.window, self.step):
            return None
        rebuild = self._rebuild_end(end)
        rebuild_rows = window_rows(rebuild, self.window)
        if rebuild_rows.start < 0:
            self.moments = None
            return None
        if self.moments is None or not rebuild <= self.end <= end:
            self.moments = RollingMoments(self.rows[rebuild_rows])
            self.end = rebuild
        while self.end < end:
            first = window_rows(self.end, self.window).start
            self.moments.slide(self.rows[first : first + self.step], self.rows[self.end + 1 : self.end + 1 + self.step])
            self.end += self.step
        if not self.moments.complete(used):
            return None
        return self.moments.correlation(used)
