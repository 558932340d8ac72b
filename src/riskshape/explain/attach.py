"""Explaining one alert of a run: which parts, from which windows."""

from __future__ import annotations

import math
import re
from collections.abc import Sequence
from typing import Literal, overload

import pandas as pd

from riskshape.compute.monitor import MonitorResult
from riskshape.errors import DataError
from riskshape.explain.clusters import ScaleRule, explain_clusters
from riskshape.explain.geometry import WindowGeometry, as_date, window_geometry
from riskshape.explain.loops import explain_loops
from riskshape.explain.model import Explanation

__all__ = ["explain_alert", "summary_dimension"]

_DIMENSION = re.compile(r"^h(\d+)_")


def summary_dimension(summary: str) -> int | None:
    """Homology dimension a summary column belongs to (``h1_entropy`` -> 1), None for the others.

    Parameters
    ----------
    summary : str
        A feature column name.

    Returns
    -------
    int or None
        The homology dimension, or None for a column of no dimension.

    Examples
    --------
    >>> summary_dimension("h0_total_persistence"), summary_dimension("mean_correlation")
    (0, None)
    """
    match = _DIMENSION.match(summary)
    return int(match.group(1)) if match else None


class _EarlierWindows(Sequence[WindowGeometry]):
    """Windows before position ``end`` of a run, newest first, rebuilt only when first read."""

    def __init__(self, result: MonitorResult, end: int, count: int) -> None:
        self._result = result
        self._end = end
        self._count = count
        self._cache: dict[int, WindowGeometry] = {}

    def __len__(self) -> int:
        return self._count

    @overload
    def __getitem__(self, k: int) -> WindowGeometry: ...
    @overload
    def __getitem__(self, k: slice) -> Sequence[WindowGeometry]: ...
    def __getitem__(self, k: int | slice) -> WindowGeometry | Sequence[WindowGeometry]:
        if isinstance(k, slice):
            return [self[i] for i in range(*k.indices(self._count))]
        if not -self._count <= k < self._count:
            raise IndexError(k)
        k %= self._count
        if k not in self._cache:
            self._cache[k] = window_geometry(self._result, self._result.window_ends[self._end - 1 - k])
        return self._cache[k]


def explain_alert(
    result: MonitorResult,
    window_end: object,
    summary: str,
    *,
    scale: ScaleRule = "persistent",
    compare: Literal["disjoint", "adjacent"] = "disjoint",
    n_pairs: int = 10,
    n_loops: int = 3,
    lookback: int = 60,
    min_overlap: float = 0.5,
) -> Explanation:
    """Explain an alert on ``summary`` at the window ending ``window_end``.

    H0 summaries (``h0_*``) get the cluster explanation, H1 summaries (``h1_*``) the loop
    explanation, every other summary both (the loops only if the run computed H1).

    The clusters are compared with "the window before": by default the latest window that
    shares no day with the alert window (with ``step < window`` consecutive windows share all
    but ``step`` days, and would differ too little to show what changed); ``compare="adjacent"``
    takes the window just before. Early in a run, when no disjoint window exists, the first
    window is used. ``ClusterExplanation.previous_end`` names the window compared.

    Parameters
    ----------
    result : MonitorResult
        The run the alert came from.
    window_end : date-like
        The alert's window.
    summary : str
        The summary column the alert's rule watches.
    scale : {"persistent", "median"} or float
        Cut distance of the clusters (see :mod:`riskshape.explain.clusters`).
    compare : {"disjoint", "adjacent"}
        Which earlier window the clusters are compared with (see above).
    n_pairs : int
        Asset pairs with the largest correlation change to list.
    n_loops : int
        Most persistent loops to describe.
    lookback : int
        Earlier windows searched for each loop's lifetime.
    min_overlap : float
        Least Jaccard overlap of members for a loop to continue from one window to the next.

    Returns
    -------
    Explanation

    Raises
    ------
    DataError
        If no window ends on ``window_end``, or an argument is out of range.

    Examples
    --------
    >>> from riskshape import Config, monitor
    >>> from riskshape.demo.scenario import generate_scenario
    >>> config = Config(window=60, step=10, compute={"executor": "serial"})
    >>> run = monitor(generate_scenario(seed=1, n_days=80).prices, config)
    >>> e = explain_alert(run, run.window_ends[-1], "h0_total_persistence")
    >>> e.clusters is not None, e.loops is None
    (True, True)
    """
    if n_pairs < 0 or n_loops < 0 or lookback < 0:
        raise DataError(f"n_pairs, n_loops and lookback must not be negative, got {n_pairs}, {n_loops}, {lookback}")
    if compare not in ("disjoint", "adjacent"):
        raise DataError(f"compare must be 'disjoint' or 'adjacent', got {compare!r}")
    if not 0.0 < min_overlap <= 1.0:
        raise DataError(f"min_overlap must lie in (0, 1], got {min_overlap}")
    position = _position(result, window_end)
    current = window_geometry(result, result.window_ends[position])
    dim = summary_dimension(summary)
    want_clusters = dim != 1
    want_loops = dim != 0 and result.config.maxdim >= 1
    clusters = loops = None
    if want_clusters:
        compared = _compared_position(result, position, compare)
        previous = window_geometry(result, result.window_ends[compared]) if compared is not None else None
        clusters = explain_clusters(current, previous, scale, n_pairs)
    if want_loops:
        count = min(lookback, position)
        history = _EarlierWindows(result, position, count)
        loops = explain_loops(
            current, history, n_loops=n_loops, min_overlap=min_overlap, reaches_first_window=count == position
        )
    return Explanation(summary=summary, window_end=current.window_end, clusters=clusters, loops=loops)


def _compared_position(result: MonitorResult, position: int, compare: str) -> int | None:
    """Position of the window the clusters are compared with (None for the run's first window)."""
    if position == 0:
        return None
    if compare == "adjacent":
        return position - 1
    return max(0, position - math.ceil(result.config.window / result.config.step))


def _position(result: MonitorResult, window_end: object) -> int:
    """Position of ``window_end`` among the run's windows (DataError naming the run's range if absent)."""
    stamp = pd.Timestamp(as_date(window_end))
    result.assets(stamp)  # raises DataError naming the run's range
    return int(result.window_ends.get_indexer([stamp])[0])
