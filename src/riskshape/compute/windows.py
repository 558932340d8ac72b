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

__all__ = [
    "window_end_positions",
    "window_rows",
    "window_index",
    "is_on_grid",
    "window_end_row",
    "select_assets",
    "select_window",
    "Selection",
]


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


def window_rows(end_row: int, window: int) -> slice:
    """Rows (in the returns table) of the window ending at row ``end_row``, that row included.

    Examples
    --------
    >>> window_rows(9, 4)
    slice(6, 10, None)
    """
    return slice(end_row - window + 1, end_row + 1)


def window_index(end_row: int, window: int, step: int) -> int:
    """Index (0 = the first window) of the window ending at row ``end_row``, rounded down off the grid.

    The inverse of :func:`window_end_row` on the grid of :func:`window_end_positions`.

    Examples
    --------
    >>> window_index(9, 4, 3), window_index(10, 4, 3)
    (2, 2)
    """
    return (end_row - (window - 1)) // step


def is_on_grid(end_row: int, window: int, step: int) -> bool:
    """Whether row ``end_row`` lies on the step grid of :func:`window_end_positions` (rows from ``window - 1``).

    Examples
    --------
    >>> is_on_grid(9, 4, 3), is_on_grid(10, 4, 3)
    (True, False)
    """
    return (end_row - (window - 1)) % step == 0


def window_end_row(index: int, window: int, step: int) -> int:
    """Row at which the window with this index ends (0 = the first window).

    Examples
    --------
    >>> window_end_row(2, 4, 3)
    9
    >>> window_end_row(window_index(9, 4, 3), 4, 3)
    9
    """
    return index * step + window - 1


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


def select_window(values: np.ndarray, end_row: int, window: int, min_coverage: float) -> Selection:
    """Apply the coverage policy to the window ending at row ``end_row`` of a returns table.

    The one way a window's block is cut from the table (:func:`window_rows`) and admitted
    (:func:`select_assets`): the engine, the baselines and every other reader of a window use it.

    Parameters
    ----------
    values : numpy.ndarray
        (rows, n_assets) the returns table, NaN where missing.
    end_row : int
        Row of the window's last day.
    window : int
        Window length, in rows.
    min_coverage : float
        Fraction in (0, 1] of the window's returns an asset needs.

    Returns
    -------
    Selection

    Examples
    --------
    >>> import numpy as np
    >>> table = np.array([[0.01, 0.02], [0.02, np.nan], [-0.01, 0.01], [0.03, -0.02]])
    >>> s = select_window(table, 3, 3, 0.6)
    >>> s.used.tolist(), s.block[0].tolist()
    ([0, 1], [0.02, -0.005])
    """
    return select_assets(values[window_rows(end_row, window)], min_coverage)
