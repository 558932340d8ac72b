"""The geometry of one window of a run, recomputed exactly as the engine computed it.

The engine keeps only diagrams; explanations need the assets, their correlations and the
distance matrix the diagrams came from. :func:`window_geometry` takes them from
``MonitorResult.window`` (:class:`riskshape.compute.window_view.Window`), which rebuilds them with
the engine's own building blocks and settings.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date
from typing import cast

import numpy as np
import pandas as pd

from riskshape.compute.distance import correlation_to_distance
from riskshape.compute.monitor import MonitorResult
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
    """A window end (date, Timestamp, ISO string) as a :class:`datetime.date`.

    Examples
    --------
    >>> as_date("2031-03-03")
    datetime.date(2031, 3, 3)
    >>> as_date("someday")
    Traceback (most recent call last):
    ...
    riskshape.errors.DataError: window end: cannot read 'someday' as a date; give YYYY-MM-DD
    """
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

    Examples
    --------
    >>> import numpy as np
    >>> from riskshape import Config, monitor
    >>> from riskshape.demo import generate_scenario
    >>> scenario = generate_scenario(seed=1, n_days=90, assets_per_sector=3)
    >>> run = monitor(scenario.prices, Config(window=20, compute={"executor": "serial"}))
    >>> end = run.window_ends[-1]
    >>> geometry = window_geometry(run, end)
    >>> len(geometry.assets), geometry.distance.shape, geometry.points == geometry.assets
    (17, (17, 17), True)

    Pearson correlation of the window's block, and d = sqrt(2 (1 - rho)) (Mantegna 1999):

    >>> np.allclose(geometry.correlation, np.corrcoef(run.window(end).block, rowvar=False))
    True
    >>> np.allclose(geometry.distance, np.sqrt(2 * (1 - geometry.correlation)))
    True
    """
    window = result.window(window_end)
    used = window.assets
    end = as_date(window_end)
    if len(used) < 2:
        empty = np.zeros((len(used), len(used)))
        return WindowGeometry(end, used, empty, empty, used, empty)
    if result.config.embedding != "point_cloud":
        return WindowGeometry(end, used, window.correlation, window.distance, used, window.distance)
    asset_distance = correlation_to_distance(window.correlation)
    return WindowGeometry(end, used, window.correlation, asset_distance, window.days, window.distance)
