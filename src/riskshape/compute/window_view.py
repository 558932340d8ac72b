"""One computed window opened up: its returns, admitted assets, correlations, distances and diagrams.

The engine keeps only what a window gives (admitted assets, diagrams, summaries); explanations,
plots and research tools also need what the diagrams came from. :func:`open_window` rebuilds it
with the engine's own steps and settings (:func:`riskshape.compute.windows.select_assets`,
:func:`riskshape.compute.estimators.estimate_correlation`, :func:`riskshape.compute.batch.embedding_distance`),
so it cannot drift from the engine. ``MonitorResult.window(end)`` is the way to get one.

The correlation is the plain estimator's. Where the monitor took a window's correlation from
running sums (:mod:`riskshape.compute.moments`) the two agree to rounding, and the diagrams
(float32) come out the same.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from riskshape.compute.batch import WindowResult, WindowSettings, embedding_distance
from riskshape.compute.estimators import estimate_correlation
from riskshape.compute.windows import select_assets
from riskshape.types import CorrelationMatrix, Diagrams, DistanceMatrix, ReturnsBlock, ReturnsFrame

__all__ = ["Window", "open_window"]


@dataclass(frozen=True, eq=False)
class Window:
    """One window of a monitoring run, as the engine computed it.

    Attributes
    ----------
    end : pandas.Timestamp
        The window's end date (its label: it uses nothing after it).
    assets : tuple of str
        Assets admitted to the window, in column order.
    left_out : tuple of (str, str)
        Assets left out of the window, with the reason.
    returns : pandas.DataFrame
        The window's exact returns: its days, the admitted assets, NaN kept where missing.
    block : numpy.ndarray
        (days, assets) the returns the engine used: missing ones set to the asset's window mean
        (the coverage policy of :mod:`riskshape.compute.windows`).
    correlation : numpy.ndarray
        (assets, assets) correlation matrix of ``block`` by the configured estimator; zeros below
        two assets (the engine computes none).
    distance : numpy.ndarray
        The distance matrix whose Vietoris-Rips filtration gave the diagrams: between assets,
        sqrt(2 (1 - rho)), for the ``correlation`` embedding; between the window's days for
        ``point_cloud``. Zeros (assets x assets) below two assets.
    diagrams : tuple of numpy.ndarray
        H0..Hmaxdim finite bars, as the monitor computed them.
    """

    end: pd.Timestamp
    assets: tuple[str, ...]
    left_out: tuple[tuple[str, str], ...]
    returns: ReturnsFrame
    block: ReturnsBlock
    correlation: CorrelationMatrix
    distance: DistanceMatrix
    diagrams: Diagrams

    @property
    def days(self) -> tuple[str, ...]:
        """The window's days as ``YYYY-MM-DD`` (the points of the ``point_cloud`` embedding)."""
        return tuple(d.date().isoformat() for d in pd.DatetimeIndex(self.returns.index))


def open_window(frame: ReturnsFrame, computed: WindowResult, settings: WindowSettings) -> Window:
    """Rebuild one window from its rows of the returns table and what the engine kept of it.

    Parameters
    ----------
    frame : pandas.DataFrame
        The window's rows of the returns table, every asset (NaN where missing); the last row is
        the window's end.
    computed : WindowResult
        What the engine computed for this window (its diagrams are handed on as they are).
    settings : WindowSettings
        The settings the engine computed it with.

    Returns
    -------
    Window

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> from riskshape.compute.batch import WindowSettings, compute_window
    >>> rng = np.random.default_rng(0)
    >>> frame = pd.DataFrame(
    ...     rng.normal(size=(30, 4)), columns=list("ABCD"), index=pd.bdate_range("2001-01-01", periods=30)
    ... )
    >>> frame.iloc[3, 1] = np.nan
    >>> settings = WindowSettings(30, 0.9, "pearson", 1, 1.0, "ripser", "correlation", False)
    >>> window = open_window(frame, compute_window(frame.to_numpy(), settings), settings)
    >>> window.assets, window.distance.shape, bool(np.isnan(window.block).any())
    (('A', 'B', 'C', 'D'), (4, 4), False)
    """
    selection = select_assets(frame.to_numpy(dtype=float), settings.min_coverage)
    names = [str(name) for name in frame.columns]
    assets = tuple(names[j] for j in selection.used)
    left_out = tuple((names[j], reason) for j, reason in selection.left_out)
    returns = frame.iloc[:, selection.used]
    n = len(assets)
    if n < 2:
        empty = np.zeros((n, n))
        return Window(frame.index[-1], assets, left_out, returns, selection.block, empty, empty, computed.diagrams)
    corr = estimate_correlation(selection.block, settings.correlation, settings.estimator)
    distance = embedding_distance(selection.block, corr, settings.embedding, settings.standardize_cloud)
    return Window(frame.index[-1], assets, left_out, returns, selection.block, corr, distance, computed.diagrams)
