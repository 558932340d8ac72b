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
  Sigma is positive definite and the Moore-Penrose pseudo-inverse (numpy.linalg.pinv) when it
  is singular (fewer days than assets, or collinear assets).

One window's baselines share one computation (exact linear algebra, the same values as the
definitions above up to floating-point rounding): the block is centred once, the smaller of its
two Gram matrices (``X'X``, assets x assets, or ``XX'``, days x days, with the same nonzero
eigenvalues) formed once and its eigenvalues found once (LAPACK ``dsyevr``); the turbulence
comes from the whole window's Cholesky factor by the Sherman-Morrison formula (the last day's
leverage), or from a pseudo-inverse on the history's smaller Gram matrix where the preceding
days' covariance is singular (see the comment above ``_centred``). Each public function calls
the same code, so :func:`window_baselines` gives each one's bits.

:func:`compute_baselines` runs them over a whole price (or returns) table on the windows of
:func:`riskshape.compute.windows.window_end_positions` and :func:`riskshape.compute.windows.select_window`, so
its index is the ``window_end`` index of ``monitor(...).features``.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, cast

import numpy as np
import pandas as pd
from scipy.linalg.lapack import dpotrf as potrf
from scipy.linalg.lapack import dsyevr as syevr
from scipy.linalg.lapack import dtrtrs as trtrs
from scipy.stats import rankdata

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
_EPS = float(np.finfo(float).eps)


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
    return _volatility_of(_centred(block), periods_per_year)


def mean_pairwise_correlation(block: ReturnsBlock, method: CorrelationEstimator = "pearson") -> float:
    """Mean off-diagonal correlation of the window's assets (NaN with fewer than two assets).

    Parameters
    ----------
    block : numpy.ndarray
        The window's returns, days x assets.
    method : {"pearson", "spearman"}
        The correlation estimator (Spearman: Pearson on each asset's ranks, ties averaged).

    Returns
    -------
    float
        The mean correlation; NaN where an asset's returns do not vary.

    Examples
    --------
    >>> import numpy as np
    >>> b = np.array([[1.0, 2.0, -1.0], [2.0, 4.0, -2.0], [4.0, 7.0, -4.0]])
    >>> round(mean_pairwise_correlation(b), 3)
    -0.333
    """
    if block.shape[1] < 2:
        return float("nan")
    return _mean_correlation_of(_centred(_ranked(block, method)))


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
    gram = _gram(_centred(block))
    return _absorption_of(_eigenvalues(gram), gram, top)


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
        The squared Mahalanobis distance (pseudo-inverse covariance where it is singular); NaN
        with fewer than three days or no asset.

    Examples
    --------
    >>> import numpy as np
    >>> b = np.array([[1.0], [-1.0], [3.0]])  # mean 0, variance 2: 3**2 / 2
    >>> round(turbulence(b), 12)
    4.5
    """
    days, n = block.shape
    if days < 3 or n == 0:
        return float("nan")
    centred = _centred(block)
    gram = _gram(centred)
    return _turbulence_of(centred, gram, _eigenvalues(gram) if n <= days - 2 else None)


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
        bit for bit what its own function gives: the window is centred once, its smaller Gram
        matrix formed once and its eigenvalues found once, and every baseline reads them.

    Examples
    --------
    >>> import numpy as np
    >>> n, vol, corr, ar, turb = window_baselines(np.random.default_rng(0).normal(size=(30, 4)))
    >>> n, 0.0 < ar <= 1.0
    (4, True)
    """
    days, n = block.shape
    nan = float("nan")
    if n == 0 or days < 2:
        return (n, nan, nan, nan, nan)
    centred = _centred(block)
    gram = _gram(centred)
    eigenvalues = _eigenvalues(gram)
    correlation = centred if method == "pearson" else _centred(_ranked(block, method))
    return (
        n,
        _volatility_of(centred, TRADING_DAYS_PER_YEAR),
        _mean_correlation_of(correlation) if n >= 2 else nan,
        _absorption_of(eigenvalues, gram, math.ceil(n / 5)),
        _turbulence_of(centred, gram, eigenvalues if n <= days - 2 else None) if days >= 3 else nan,
    )


# The shared arithmetic. A window of T days and N assets is centred once (``X``, each asset less
# its mean); every baseline is read from ``X``, its Gram matrix and that matrix's eigenvalues:
#
# * volatility: the equal-weight portfolio's centred returns are ``X 1 / N``;
# * mean correlation: with ``u_i = 1 / ||X_i||`` the correlation matrix is ``D X'X D``
#   (``D = diag(u)``), so the sum of all its entries is ``||X u||^2`` and the off-diagonal mean
#   ``(||X u||^2 - N) / (N (N - 1))``: no N x N matrix;
# * absorption ratio: the covariance is ``X'X / (T - 1)``; ``X'X`` (N x N) and ``X X'`` (T x T)
#   have the same nonzero eigenvalues and the same trace, so the smaller of the two serves (the
#   ratio does not see the 1 / (T - 1));
# * turbulence: the history's scatter ``S_h`` and the window's ``S = X'X`` differ by one rank-one
#   term, ``S = S_h + a d d'`` with ``a = (T - 1) / T`` and ``d`` the last day less the history's
#   mean (the one-observation update of a scatter matrix); the last row of ``X`` is ``a d``. With
#   the last day's leverage ``h = (a d)' S^-1 (a d)`` (one Cholesky factor and one triangular
#   solve), Sherman and Morrison's formula gives ``d' S_h^-1 d = h / (a (a - h))``, and the
#   turbulence is ``(T - 2)`` times that. Where ``S_h`` is singular (``T - 2 < N`` days, collinear
#   assets) the pseudo-inverse form is taken on the history's smaller Gram matrix instead.

_LOWER = 1


def _centred(block: ReturnsBlock) -> FloatArray:
    """Each column less its mean."""
    return cast("FloatArray", block - block.mean(axis=0))


def _ranked(block: ReturnsBlock, method: CorrelationEstimator) -> FloatArray:
    """The returns themselves (Pearson) or each column's ranks, ties averaged (Spearman)."""
    return rankdata(block, axis=0) if method == "spearman" else block


def _gram(centred: FloatArray) -> FloatArray:
    """The smaller Gram matrix of a centred block: ``X'X`` (N x N) when N <= T, else ``X X'``."""
    days, n = centred.shape
    return centred.T @ centred if n <= days else centred @ centred.T


def _eigenvalues(gram: FloatArray) -> FloatArray:
    """Eigenvalues of a symmetric matrix, ascending (LAPACK ``dsyevr``, values only, lower triangle)."""
    values, _, found, _, info = syevr(gram, compute_v=0, lower=_LOWER)  # w, z, m, isuppz, info
    if info != 0 or found != gram.shape[0]:  # not converged, or not all found: numpy's driver, or its error
        return cast("FloatArray", np.linalg.eigvalsh(gram))
    return cast("FloatArray", values[:found])


def _volatility_of(centred: FloatArray, periods_per_year: int) -> float:
    """Annualised sample (ddof = 1) standard deviation of the equal-weight portfolio."""
    portfolio = centred.mean(axis=1)
    return math.sqrt(float(portfolio @ portfolio) / (centred.shape[0] - 1) * periods_per_year)


def _mean_correlation_of(centred: FloatArray) -> float:
    """Mean off-diagonal Pearson correlation of the columns (NaN where a column does not vary)."""
    n = centred.shape[1]
    norms = np.sqrt(np.einsum("ij,ij->j", centred, centred))
    if not norms.all():
        return float("nan")
    combined = centred @ (1.0 / norms)
    return float((combined @ combined - n) / (n * (n - 1)))


def _absorption_of(eigenvalues: FloatArray, gram: FloatArray, top: int) -> float:
    """The ``top`` largest eigenvalues (rounding below zero clipped) over the trace."""
    total = float(np.trace(gram))
    if not total > 0:
        return float("nan")
    return float(np.clip(eigenvalues[-top:], 0.0, None).sum() / total)


def _is_rank_deficient(smallest: float, largest: float, shape: tuple[int, int]) -> bool:
    """numpy.linalg.matrix_rank's tolerance: singular below ``largest * max(shape) * eps``."""
    return not smallest > largest * max(shape) * _EPS


def _turbulence_of(centred: FloatArray, gram: FloatArray, eigenvalues: FloatArray | None) -> float:
    """Turbulence of the last row; ``eigenvalues`` of ``gram = X'X`` where ``N <= T - 2``, else None."""
    days, n = centred.shape
    if eigenvalues is not None and not _is_rank_deficient(eigenvalues[0], eigenvalues[-1], centred.shape):
        factor, info = potrf(gram, lower=_LOWER, clean=0)
        if info == 0:
            solved, info = trtrs(factor, centred[-1], lower=_LOWER)
            leverage = float(solved @ solved)
            a = (days - 1) / days
            # S_h's determinant is S's times (1 - h / a): singular where that factor vanishes
            if info == 0 and not _is_rank_deficient(
                eigenvalues[0] * (1.0 - leverage / a), eigenvalues[-1], centred.shape
            ):
                return float((days - 2) * leverage / (a * (a - leverage)))
    history = centred[:-1]
    mean = history.mean(axis=0)
    return float((days - 2) * _pseudo_inverse_form(history - mean, centred[-1] - mean))


def _pseudo_inverse_form(history: FloatArray, deviation: FloatArray) -> float:
    """``d' pinv(H'H) d`` for a centred history ``H`` (m x N), by the smaller Gram matrix's eigenpairs.

    With ``H = U s V'``: ``pinv(H'H) = V s^-2 V'``, and ``V'd = s^-1 U'H d``; eigenvalues under
    numpy.linalg.matrix_rank's tolerance count as zero.
    """
    m, n = history.shape
    small = m <= n
    values, vectors = np.linalg.eigh(history @ history.T if small else history.T @ history)
    kept = values > values[-1] * max(m, n) * _EPS
    if not kept.any():
        return 0.0
    if small:
        weights = (vectors[:, kept].T @ (history @ deviation)) / values[kept]
    else:
        weights = (vectors[:, kept].T @ deviation) / np.sqrt(values[kept])
    return float(weights @ weights)


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
