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
  and covariance (ddof = 1) of the window's preceding days. ``Sigma^-1`` is the inverse when
  Sigma is positive definite (by a Cholesky solve) and the Moore-Penrose pseudo-inverse
  (numpy.linalg.pinv) when it is singular (fewer days than assets, or collinear assets).

:func:`compute_baselines` runs them over a whole price (or returns) table on the windows of
:func:`riskshape.compute.windows.window_end_positions` and :func:`riskshape.compute.windows.select_window`, so
its index is the ``window_end`` index of ``monitor(...).features``.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd
from scipy.linalg import cho_factor, cho_solve

from riskshape.compute.distance import correlation_matrix, covariance_to_correlation, mean_offdiagonal
from riskshape.compute.executors import make_executor
from riskshape.compute.returns import to_returns
from riskshape.compute.windows import select_window, window_end_positions
from riskshape.config import Config
from riskshape.errors import DataError
from riskshape.types import CorrelationEstimator, FloatArray, Positions, ReturnsBlock

if TYPE_CHECKING:
    from riskshape.compute.monitor import MonitorResult

__all__ = [
    "TRADING_DAYS_PER_YEAR",
    "BASELINE_COLUMNS",
    "portfolio_volatility",
    "mean_pairwise_correlation",
    "absorption_ratio",
    "turbulence",
    "BASELINE_PREFIX",
    "window_baselines",
    "compute_baselines",
    "features_with_baselines",
]

TRADING_DAYS_PER_YEAR = 252
BASELINE_COLUMNS: tuple[str, ...] = ("ew_volatility", "mean_correlation", "absorption_ratio", "turbulence")
BASELINE_PREFIX = "base_"
"""The prefix :func:`features_with_baselines` gives the baselines' columns."""


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
    return _absorption_of(np.atleast_2d(np.cov(block, rowvar=False)), top)


def _absorption_of(cov: FloatArray, top: int) -> float:
    """Top-``top`` eigenvalues of the covariance ``cov`` over their total (NaN for a zero covariance)."""
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
    >>> round(turbulence(b), 12)
    4.5
    """
    if block.shape[0] < 3 or block.shape[1] == 0:
        return float("nan")
    history, today = block[:-1], block[-1]
    deviation = today - history.mean(axis=0)
    cov = np.atleast_2d(np.cov(history, rowvar=False))
    try:
        # positive definite (the usual case): a Cholesky solve, the inverse at a tenth of the cost
        factor = cho_factor(cov, lower=True, check_finite=False)
        return float(deviation @ cho_solve(factor, deviation, check_finite=False))
    except np.linalg.LinAlgError:
        precision = np.linalg.pinv(cov, hermitian=True)
        return float(deviation @ precision @ deviation)


def window_baselines(
    block: ReturnsBlock, method: CorrelationEstimator = "pearson"
) -> tuple[int, float, float, float, float]:
    """Every baseline of one window's admitted returns: ``n_assets`` and :data:`BASELINE_COLUMNS`.

    Parameters
    ----------
    block : numpy.ndarray
        (days, assets) complete returns (:func:`riskshape.compute.windows.select_window`).
    method : {"pearson", "spearman"}
        The correlation estimator of the mean correlation.

    Returns
    -------
    tuple
        ``(n_assets, ew_volatility, mean_correlation, absorption_ratio, turbulence)``, each
        bit for bit what its own function gives. With Pearson correlation the window's sample
        covariance is computed once for the mean correlation and the absorption ratio
        (:func:`riskshape.compute.distance.covariance_to_correlation` makes the same bits as
        :func:`riskshape.compute.distance.correlation_matrix`): a third less time per window.

    Examples
    --------
    >>> import numpy as np
    >>> n, vol, corr, ar, turb = window_baselines(np.random.default_rng(0).normal(size=(30, 4)))
    >>> n, 0.0 < ar <= 1.0
    (4, True)
    """
    days, n = block.shape
    if method == "pearson" and days >= 2 and n >= 2:
        cov = np.cov(block, rowvar=False)
        return (
            n,
            portfolio_volatility(block),
            mean_offdiagonal(covariance_to_correlation(cov)),
            _absorption_of(cov, math.ceil(n / 5)),
            turbulence(block),
        )
    return (
        n,
        portfolio_volatility(block),
        mean_pairwise_correlation(block, method),
        absorption_ratio(block) if n else float("nan"),
        turbulence(block),
    )


def _baseline_batch(
    values: FloatArray, ends: Positions, window: int, min_coverage: float, method: CorrelationEstimator
) -> list[tuple[int, float, float, float, float]]:
    """The baselines of the windows ending at ``ends`` (rows of ``values``): one worker's job."""
    return [window_baselines(select_window(values, int(end), window, min_coverage).block, method) for end in ends]


def compute_baselines(
    data: pd.DataFrame,
    config: Config | None = None,
    *,
    data_are_returns: bool = False,
    prefix: str = "",
) -> pd.DataFrame:
    """Baselines on every window of a price (or returns) table, on the monitor's windows.

    The windows are computed in batches on the executor of ``config.compute`` (serial, a local
    process pool or Dask, BLAS on one thread), like the monitor's; the executor never changes a
    number.

    Parameters
    ----------
    data : pandas.DataFrame
        Wide validated prices (DatetimeIndex, one column per asset, NaN = missing), as
        ``MonitorResult.prices``; or returns, as ``MonitorResult.returns``, with
        ``data_are_returns=True``.
    config : Config, optional
        Uses ``window``, ``step``, ``min_coverage``, ``returns``, ``correlation`` and ``compute``.
    data_are_returns : bool
        Whether ``data`` already holds returns (first row dropped, as :func:`to_returns` gives).
    prefix : str
        Put before every column name (:data:`BASELINE_PREFIX` keeps them apart from the
        monitor's features, which also hold ``n_assets`` and ``mean_correlation``).

    Returns
    -------
    pandas.DataFrame
        Indexed by ``window_end`` (the same labels as the monitor's features), columns
        ``n_assets`` and :data:`BASELINE_COLUMNS` (each with ``prefix``).

    Examples
    --------
    >>> from riskshape.demo import generate_scenario
    >>> prices = generate_scenario(seed=1, n_days=90, assets_per_sector=3).prices
    >>> base = compute_baselines(prices, Config(window=20, compute={"executor": "serial"}), prefix="base_")
    >>> list(base.columns)
    ['base_n_assets', 'base_ew_volatility', 'base_mean_correlation', 'base_absorption_ratio', 'base_turbulence']
    """
    cfg = config or Config()
    returns = data if data_are_returns else to_returns(data, cfg.returns)
    values = returns.to_numpy(dtype=float)
    ends = window_end_positions(len(returns), cfg.window, cfg.step)
    size = cfg.compute.batch_windows
    jobs = []
    for start in range(0, len(ends), size):
        batch = ends[start : start + size]
        first = max(0, int(batch[0]) - cfg.window + 1)
        jobs.append((values[first : int(batch[-1]) + 1], batch - first, cfg.window, cfg.min_coverage, cfg.correlation))
    runner = make_executor(cfg.compute, len(jobs))
    try:
        rows = [row for batch_rows in runner.map(_baseline_batch, jobs) for row in batch_rows]
    finally:
        runner.close()
    index = pd.DatetimeIndex(returns.index[ends], name="window_end")
    frame = pd.DataFrame(rows, index=index, columns=("n_assets", *BASELINE_COLUMNS))
    return frame.astype({"n_assets": "int64"}).add_prefix(prefix)


def features_with_baselines(result: MonitorResult, prefix: str = BASELINE_PREFIX) -> pd.DataFrame:
    """A monitor result's features joined with the baselines of the same windows.

    Parameters
    ----------
    result : MonitorResult
        From :func:`riskshape.monitor`; its returns and configuration give the windows.
    prefix : str
        Put before each baseline column so no name clashes with a feature.

    Returns
    -------
    pandas.DataFrame
        ``result.features`` and, after them, the baselines of the same windows with ``prefix``:
        those the workers computed with the windows where the run asked for them
        (``monitor(..., baselines=True)``), else :func:`compute_baselines` of ``result.returns``;
        bit for bit the same either way.

    Examples
    --------
    >>> from riskshape import monitor
    >>> from riskshape.demo import generate_scenario
    >>> prices = generate_scenario(seed=1, n_days=90, assets_per_sector=3).prices
    >>> result = monitor(prices, Config(window=20, maxdim=0, compute={"executor": "serial"}))
    >>> joined = features_with_baselines(result)
    >>> "mean_correlation" in joined and "base_mean_correlation" in joined, len(joined) == len(result.features)
    (True, True)
    """
    if result.with_baselines:
        held = result.baselines
        baselines = held.set_axis([prefix + name[len(BASELINE_PREFIX) :] for name in held.columns], axis=1)
    else:
        baselines = compute_baselines(result.returns, result.config, data_are_returns=True, prefix=prefix)
    return result.features.join(baselines)
