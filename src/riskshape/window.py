"""One window, end to end: returns block -> admitted assets -> distance -> diagrams.

This is the unit of work the executors ship to workers; it is pure (no I/O, no globals).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
from scipy.spatial.distance import pdist, squareform

from riskshape.distance import correlation_matrix, correlation_to_distance, mean_offdiagonal
from riskshape.persistence import EMPTY_DIAGRAM, compute_diagrams
from riskshape.summaries import bottleneck_distance, wasserstein_distance
from riskshape.windows import select_assets

__all__ = ["WindowSettings", "WindowResult", "compute_window", "compute_batch", "diagram_distances"]


@dataclass(frozen=True)
class WindowSettings:
    """The part of :class:`riskshape.Config` a worker needs (small, picklable)."""

    window: int
    min_coverage: float
    correlation: Literal["pearson", "spearman"]
    maxdim: int
    order_p: float
    engine: Literal["auto", "ripser", "giotto"]
    embedding: Literal["correlation", "point_cloud"]
    standardize_cloud: bool


@dataclass(frozen=True)
class WindowResult:
    """What one window gives.

    Attributes
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
    """

    used: np.ndarray
    left_out: tuple[tuple[int, str], ...]
    mean_correlation: float
    diagrams: tuple[np.ndarray, ...]
    distances: np.ndarray


def compute_window(block: np.ndarray, settings: WindowSettings) -> WindowResult:
    """Diagrams and correlation level of one window of returns.

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
    selection = select_assets(block, settings.min_coverage)
    n_used = len(selection.used)
    nan_distances = np.full((settings.maxdim + 1, 2), np.nan)
    if n_used < 2:
        empty = tuple(EMPTY_DIAGRAM for _ in range(settings.maxdim + 1))
        return WindowResult(selection.used, selection.left_out, float("nan"), empty, nan_distances)
    corr = correlation_matrix(selection.block, settings.correlation)
    if settings.embedding == "point_cloud":
        points = selection.block
        if settings.standardize_cloud:
            points = (points - points.mean(axis=0)) / points.std(axis=0)
        distance = squareform(pdist(points))
    else:
        distance = correlation_to_distance(corr)
    diagrams = compute_diagrams(distance, settings.maxdim, settings.engine)
    return WindowResult(selection.used, selection.left_out, mean_offdiagonal(corr), diagrams, nan_distances)


def diagram_distances(previous: tuple[np.ndarray, ...], current: tuple[np.ndarray, ...], order_p: float) -> np.ndarray:
    """(maxdim + 1, 2) array of Wasserstein (order ``order_p``) and bottleneck distances per dimension."""
    return np.array(
        [[wasserstein_distance(a, b, order_p), bottleneck_distance(a, b)] for a, b in zip(previous, current)]
    )


def compute_batch(
    rows: np.ndarray,
    ends: np.ndarray,
    settings: WindowSettings,
    previous: tuple[np.ndarray, ...] | None = None,
) -> list[WindowResult]:
    """Compute consecutive windows over a slice of the returns table.

    Parameters
    ----------
    rows : numpy.ndarray
        Returns rows covering every window of the batch (row 0 = first row of the first window).
    ends : numpy.ndarray
        Window end positions relative to ``rows``, ascending.
    settings : WindowSettings
    previous : tuple of numpy.ndarray, optional
        Diagrams of the window before the batch, if any (for the first distance).

    Returns
    -------
    list of WindowResult
        One per end, with distances to the previous window filled in.
    """
    results: list[WindowResult] = []
    for end in ends:
        result = compute_window(rows[end - settings.window + 1 : end + 1], settings)
        if previous is not None:
            result = WindowResult(
                result.used,
                result.left_out,
                result.mean_correlation,
                result.diagrams,
                diagram_distances(previous, result.diagrams, settings.order_p),
            )
        results.append(result)
        previous = result.diagrams
    return results
