"""Returns from prices."""

from __future__ import annotations

import numpy as np
import pandas as pd

from riskshape.types import PriceFrame, ReturnsFrame, ReturnsKind

__all__ = ["to_returns"]


def to_returns(prices: PriceFrame, kind: ReturnsKind = "log") -> ReturnsFrame:
    """Daily returns of each asset from consecutive rows of a validated price table.

    A return at row t needs prices at rows t - 1 and t; where either is missing the return is
    missing (NaN). The first row has no return and is dropped.

    Parameters
    ----------
    prices : pandas.DataFrame
        Wide, validated prices (positive, finite or NaN), sorted DatetimeIndex.
    kind : {"log", "simple"}
        ``log``: log(p_t / p_{t-1}); ``simple``: p_t / p_{t-1} - 1.

    Returns
    -------
    pandas.DataFrame
        Same columns, index ``prices.index[1:]``.

    Examples
    --------
    >>> import pandas as pd
    >>> p = pd.DataFrame({"A": [100.0, 110.0]}, index=pd.to_datetime(["2024-01-01", "2024-01-02"]))
    >>> round(float(to_returns(p, "simple").iloc[0, 0]), 6)
    0.1
    """
    values = prices.to_numpy(dtype=float)
    ratio = values[1:] / values[:-1]
    out = np.log(ratio) if kind == "log" else ratio - 1.0
    return pd.DataFrame(out, index=prices.index[1:], columns=prices.columns)
