"""Causal rolling windows and the coverage policy that decides which assets enter each window.

A window is the ``window`` returns ending at row ``e`` (inclusive) and is labelled by that row's
date: it uses nothing after it. Window ends are anchored at the first possible window, so adding
days later never moves the windows already computed.

Coverage policy: an asset enters a window only if at least ``ceil(min_coverage * window)`` of
its returns in the window are present and its returns there are not all equal (zero variance:
its correlation is undefined). Its missing returns are then set to its own mean over the
window, which leaves its mean unchanged and keeps the correlation matrix positive semidefinite
(so the correlation distance stays a metric). Every asset left out is recorded with its reason.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from riskshape.types import Positions, ReturnsBlock

__all__ = ["window_end_positions", "select_assets", "Selection"]


def window_end_positions(n_returns: int, window: int, step: int) -> Positions:
    """Row positions (in the returns table) at which windows end.

    Parameters
    ----------
    n_returns : int
        Rows of the returns table.
    window, step : int
        Window length and step, in rows.

    Returns
    -------
    numpy.ndarray
        ``window - 1, window - 1 + step, ...`` up to ``n_returns - 1``.

    Examples
    --------
    >>> window_end_positions(10, 4, 3).tolist()
    [3, 6, 9]
    """
    return np.arange(window - 1, n_returns, step, dtype=np.int64)


@dataclass(frozen=True)
class Selection:
    """Assets admitted to one window and the block of returns they bring.

    Attributes
    ----------
    used : numpy.ndarray
        Column positions of the admitted assets, in column order.
    block : numpy.ndarray
        (window, len(used)) returns, missing values set to the asset's window mean.
    left_out : tuple of (int, str)
        Column position and reason of each asset left out.
    """

    used: Positions
    block: ReturnsBlock
    left_out: tuple[tuple[int, str], ...]


def select_assets(block: ReturnsBlock, min_coverage: float) -> Selection:
    """Apply the coverage policy to one window of returns.

    Parameters
    ----------
    block : numpy.ndarray
        (window, n_assets) returns, NaN where missing.
    min_coverage : float
        Fraction in (0, 1] of the window's returns an asset needs.

    Returns
    -------
    Selection

    Examples
    --------
    >>> import numpy as np
    >>> b = np.array([[0.01, 0.0, np.nan], [0.02, 0.0, np.nan], [-0.01, 0.0, 0.01]])
    >>> s = select_assets(b, 0.6)
    >>> s.used.tolist(), [reason for _, reason in s.left_out]
    ([0], ['zero variance', 'coverage 1/3 < 2'])
    """
    window = block.shape[0]
    needed = math.ceil(min_coverage * window - 1e-9)
    present = ~np.isnan(block)
    if present.all():  # the common case: no gaps, so only the variance test can leave an asset out
        flat = (block == block[0]).all(axis=0)
        if not flat.any():
            return Selection(
                used=np.arange(block.shape[1]), block=np.ascontiguousarray(block, dtype=float), left_out=()
            )
    counts = present.sum(axis=0)
    with np.errstate(invalid="ignore"):
        spread = np.max(np.where(present, block, -np.inf), axis=0) - np.min(np.where(present, block, np.inf), axis=0)
    short = counts < needed
    flat = ~short & ~(spread > 0.0)
    left_out = tuple(
        (int(j), f"coverage {counts[j]}/{window} < {needed}" if short[j] else "zero variance")
        for j in np.flatnonzero(short | flat)
    )
    used_arr = np.flatnonzero(~(short | flat)).astype(np.int64)
    sub = block[:, used_arr]
    if not present[:, used_arr].all():
        means = np.nanmean(sub, axis=0)
        sub = np.where(np.isnan(sub), means, sub)
    return Selection(used=used_arr, block=np.ascontiguousarray(sub, dtype=float), left_out=left_out)
