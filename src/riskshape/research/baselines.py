"""What a risk analyst already watches, computed on exactly the windows the monitor uses.

Each function takes one window's returns block (days x assets, complete: no NaN), the block
:func:`riskshape.compute.windows.select_assets` hands out, and returns one number:

* :func:`portfolio_volatility` - realized volatility of the equal-weight (daily rebalanced)
  portfolio, the sample standard deviation (ddof = 1) of the cross-sectional mean return,
  annualised with sqrt(252) trading days (common practice). With log returns the mean of the
  assets' log returns stands in for the portfolio's log return (a first-order approximation).
* :func:`mean_pairwise_correlation` - mean of the off-diagonal entries of the correlation matrix.
* :func:`absorption_ratio` - Kritzman, Li, Page and Rigobon (2011, J. Portfolio Management
  37(4):112): the share of total variance absorbed by the top ``k`` eigenvectors of the
  covariance matrix, ``k = ceil(n / 5)`` by default (the paper uses one fifth of the assets).
  The paper estimates the covariance with exponential weights over 500 days; here it is the
  plain sample covariance of the window, so that it sits on the monitor's windows.
* :func:`turbulence` - Kritzman and Li (2010, Financial Analysts Journal 66(5):30):
  ``(r_t - mu)' Sigma^-1 (r_t - mu)`` of the window's last day ``r_t`` against the sample mean
  and covariance (ddof = 1) of the window's preceding days. ``Sigma^-1`` is the Moore-Penrose
  pseudo-inverse (numpy.linalg.pinv), which is the inverse when Sigma is invertible and stays
  defined when it is singular (fewer days than assets, or collinear assets).

:func:`compute_baselines` runs them over a whole price (or returns) table on the windows of
:func:`riskshape.compute.windows.window_end_positions` and :func:`riskshape.compute.windows.select_window`, so
its index is the ``window_end`` index of ``monitor(...).features``.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from riskshape.compute.distance import correlation_matrix, mean_offdiagonal
from riskshape.compute.returns import to_returns
from riskshape.compute.windows import select_window, window_end_positions
from riskshape.config import Config
from riskshape.errors import DataError
from riskshape.types import CorrelationEstimator, ReturnsBlock

__all__ = [
    "TRADING_DAYS_PER_YEAR",
    "BASELINE_COLUMNS",
    "portfolio_volatility",
    "mean_pairwise_correlation",
    "absorption_ratio",
    "turbulence",
    "compute_baselines",
]

TRADING_DAYS_PER_YEAR = 252
BASELINE_COLUMNS: tuple[str, ...] = ("ew_volatility", "mean_correlation", "absorption_ratio", "turbulence")


def portfolio_volatility(block: ReturnsBlock, periods_per_year: int = TRADING_DAYS_PER_YEAR) -> float:
    """Annualised realized volatility of the equal-weight portfolio over the window.

    Parameters
    ----------
    block : numpy.ndarray
        (days, assets) complete returns.
    periods_per_year : int
        Annualisation factor; the volatility is multiplied by ``sqrt(periods_per_year)``.

    Returns
    -------
    float
        NaN with fewer than two days or no asset.

    Examples
    --------
    >>> import numpy as np
    >>> b = np.array([[0.01, 0.03], [-0.01, -0.03]])  # portfolio returns 0.02, -0.02
    >>> round(portfolio_volatility(b, periods_per_year=1), 6)  # std of (0.02, -0.02), ddof=1
    0.028284
    """
    if block.shape[0] < 2 or block.shape[1] == 0:
        return float("nan")
    portfolio = block.mean(axis=1)
    return float(portfolio.std(ddof=1) * math.sqrt(periods_per_year))


def mean_pairwise_correlation(block: ReturnsBlock, method: CorrelationEstimator = "pearson") -> float:
    """Mean off-diagonal correlation of the window's assets (NaN with fewer than two assets).

    Parameters
    ----------
    block : numpy.ndarray
        The window's returns, days x assets.
    method : {"pearson", "spearman"}
        The correlation estimator.

    Returns
    -------
    float
        The mean correlation.

    Examples
    --------
    >>> import numpy as np
    >>> b = np.array([[1.0, 2.0, -1.0], [2.0, 4.0, -2.0], [4.0, 7.0, -4.0]])
    >>> round(mean_pairwise_correlation(b), 3)
    -0.333
    """
    if block.shape[1] < 2:
        return float("nan")
    return mean_offdiagonal(correlation_matrix(block, method))


def absorption_ratio(block: ReturnsBlock, k: int | None = None) -> float:
    """Absorption ratio: top-``k`` eigenvalues of the sample covariance over their total.

    Parameters
    ----------
    block : numpy.ndarray
        (days, assets) complete returns.
    k : int, optional
        Number of eigenvectors; default ``ceil(n_assets / 5)`` (Kritzman et al. 2011).

    Returns
    -------
    float
        In (0, 1] whenever the covariance is not zero; NaN for no asset or a zero covariance.

    Examples
    --------
    >>> import numpy as np
    >>> b = np.array([[1.0, 1.0], [-1.0, -1.0], [2.0, 2.0]])  # one factor: rank-one covariance
    >>> round(absorption_ratio(b), 12)
    1.0
    """
    n = block.shape[1]
    if n == 0 or block.shape[0] < 2:
        return float("nan")
    top = math.ceil(n / 5) if k is None else int(k)
    if not 1 <= top <= n:
        raise DataError(f"absorption_ratio: k must be between 1 and the {n} assets, got {k}")
    cov = np.atleast_2d(np.cov(block, rowvar=False))
    eig = np.clip(np.linalg.eigvalsh(cov), 0.0, None)  # ascending; clip rounding below zero
    total = eig.sum()
    if not total > 0:
        return float("nan")
    return float(eig[-top:].sum() / total)


def turbulence(block: ReturnsBlock) -> float:
    """Turbulence of the window's last day against the window's preceding days.

    Parameters
    ----------
    block : numpy.ndarray
        (days, assets) complete returns; the last row is the day scored, the rows before it
        give the mean and the (ddof = 1) covariance.

    Returns
    -------
    float
        The squared Mahalanobis distance (pseudo-inverse covariance); NaN with fewer than three
        days or no asset.

    Examples
    --------
    >>> import numpy as np
    >>> b = np.array([[1.0], [-1.0], [3.0]])  # mean 0, variance 2: 3**2 / 2
    >>> turbulence(b)
    4.5
    """
    if block.shape[0] < 3 or block.shape[1] == 0:
        return float("nan")
    history, today = block[:-1], block[-1]
    deviation = today - history.mean(axis=0)
    cov = np.atleast_2d(np.cov(history, rowvar=False))
    precision = np.linalg.pinv(cov, hermitian=True)
    return float(deviation @ precision @ deviation)


def compute_baselines(
    data: pd.DataFrame,
    config: Config | None = None,
    *,
    data_are_returns: bool = False,
) -> pd.DataFrame:
    """Baselines on every window of a price (or returns) table, on the monitor's windows.

    Parameters
    ----------
    data : pandas.DataFrame
        Wide validated prices (DatetimeIndex, one column per asset, NaN = missing), as
        ``MonitorResult.prices``; or returns, as ``MonitorResult.returns``, with
        ``data_are_returns=True``.
    config : Config, optional
        Uses ``window``, ``step``, ``min_coverage``, ``returns`` and ``correlation``.
    data_are_returns : bool
        Whether ``data`` already holds returns (first row dropped, as :func:`to_returns` gives).

    Returns
    -------
    pandas.DataFrame
        Indexed by ``window_end`` (the same labels as the monitor's features), columns
        ``n_assets`` and :data:`BASELINE_COLUMNS`.
    """
    cfg = config or Config()
    returns = data if data_are_returns else to_returns(data, cfg.returns)
    values = returns.to_numpy(dtype=float)
    ends = window_end_positions(len(returns), cfg.window, cfg.step)
    rows = []
    for end in ends:
        block = select_window(values, int(end), cfg.window, cfg.min_coverage).block
        rows.append(
            (
                block.shape[1],
                portfolio_volatility(block),
                mean_pairwise_correlation(block, cfg.correlation),
                absorption_ratio(block) if block.shape[1] else float("nan"),
                turbulence(block),
            )
        )
    index = pd.DatetimeIndex(returns.index[ends], name="window_end")
    frame = pd.DataFrame(rows, index=index, columns=("n_assets", *BASELINE_COLUMNS))
    return frame.astype({"n_assets": "int64"})
