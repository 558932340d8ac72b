"""The geometry of one window of a run, recomputed exactly as the engine computed it.

The engine keeps only diagrams; explanations need the assets, their correlations and the
distance matrix the diagrams came from. :func:`window_geometry` rebuilds them from
``MonitorResult.window_returns`` with the engine's own building blocks and settings
(:func:`riskshape.compute.windows.select_assets`, :func:`riskshape.compute.distance.correlation_matrix`,
:func:`riskshape.compute.batch.embedding_distance`).
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date
from typing import cast

import numpy as np
import pandas as pd

from riskshape.compute.batch import embedding_distance
from riskshape.compute.distance import correlation_matrix, correlation_to_distance
from riskshape.compute.monitor import MonitorResult
from riskshape.compute.windows import select_assets
from riskshape.errors import DataError
from riskshape.types import CorrelationMatrix, DistanceMatrix

__all__ = ["WindowGeometry", "window_geometry", "as_date"]


@dataclass(frozen=True)
class WindowGeometry:
    """Assets, correlations and distances of one window.

    Attributes
    ----------
    window_end : datetime.date
    assets : tuple of str
        Admitted assets, in column order.
    correlation : numpy.ndarray
        (n, n) correlation matrix of the admitted assets.
    asset_distance : numpy.ndarray
        (n, n) correlation distance sqrt(2 (1 - rho)) between the assets.
    points : tuple of str
        Labels of the points whose Rips filtration gave the window's diagrams: the assets for the
        ``correlation`` embedding, the window's days (``YYYY-MM-DD``) for ``point_cloud``.
    distance : numpy.ndarray
        Distance matrix between ``points`` (the engine's input).
    """

    window_end: date
    assets: tuple[str, ...]
    correlation: CorrelationMatrix
    asset_distance: DistanceMatrix
    points: tuple[str, ...]
    distance: DistanceMatrix


def as_date(value: object) -> date:
    """A window end (date, Timestamp, ISO string) as a :class:`datetime.date`."""
    try:
        return cast(date, pd.Timestamp(value).date())
    except (ValueError, TypeError):
        raise DataError(f"window end: cannot read {value!r} as a date; give YYYY-MM-DD") from None


def window_geometry(result: MonitorResult, window_end: object) -> WindowGeometry:
    """Rebuild the correlation and distance matrices of the window ending at ``window_end``.

    Parameters
    ----------
    result : MonitorResult
    window_end : date-like
        A window end of ``result``.

    Returns
    -------
    WindowGeometry

    Raises
    ------
    DataError
        If no window ends on that date.
    """
    config = result.config
    frame = result.window_returns(window_end)
    assets = tuple(str(a) for a in frame.columns)
    selection = select_assets(frame.to_numpy(dtype=float), config.min_coverage)
    block = selection.block
    used = tuple(assets[j] for j in selection.used)
    end = as_date(window_end)
    if len(used) < 2:
        empty = np.zeros((len(used), len(used)))
        return WindowGeometry(end, used, empty, empty, used, empty)
    corr = correlation_matrix(block, config.correlation)
    asset_distance = correlation_to_distance(corr)
    if config.embedding != "point_cloud":
        return WindowGeometry(end, used, corr, asset_distance, used, asset_distance)
    days = tuple(d.date().isoformat() for d in pd.DatetimeIndex(frame.index))
    distance = embedding_distance(block, corr, config.embedding, config.standardize_cloud)
    return WindowGeometry(end, used, corr, asset_distance, days, distance)
