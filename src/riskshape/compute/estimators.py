"""Correlation estimators for one window: the sample estimate and four ways to take noise out of it.

With ``N`` assets and a window of ``T`` days the sample correlation matrix has rank at most
``T - 1``; with ``N`` close to ``T`` much of its structure is estimation noise. Each estimator
below takes one window's complete returns block (or its per-column ranks, for Spearman) and
returns a correlation matrix (symmetric, unit diagonal, entries in [-1, 1]), so the distance
sqrt(2 (1 - rho)), the diagrams and every summary follow it. Each uses the window's own returns
only, so a window never sees a day after its end, and a one-day update gives the batch's numbers.

* ``sample``: Pearson's sample correlation (:func:`riskshape.compute.distance.correlation_matrix`).
* ``ledoit_wolf``: Ledoit and Wolf (2004, J. Multivariate Analysis 88(2):365), the optimal convex
  combination of the sample covariance of the standardised returns and the scaled identity
  (:func:`ledoit_wolf_shrinkage`). On standardised returns the target is the identity and the
  diagonal stays one, so the result is a correlation matrix.
* ``clipped``: eigenvalue clipping at the Marchenko-Pastur edge lambda+ = (1 + sqrt(N/T))^2
  (Laloux, Cizeau, Bouchaud and Potters 1999, Phys. Rev. Lett. 83(7):1467): eigenvalues at or
  below lambda+ are replaced by their mean, which keeps the trace; those above are kept
  (:func:`clip_eigenvalues`); the rebuilt matrix is rescaled to a unit diagonal.
* ``market_removed``: the correlations of the residuals after the first principal component
  (the market mode) is taken out of the standardised returns.
* ``ewma``: exponentially weighted correlation with decay 0.94 (RiskMetrics 1996, common
  practice for daily returns), the weights restricted to the window (the last day weighs 1,
  the day before 0.94, ...), the mean weighted alike.
"""

from __future__ import annotations

from typing import cast, get_args

import numpy as np
from scipy.stats import rankdata

from riskshape.compute.distance import correlation_matrix
from riskshape.types import CorrelationEstimator, CorrelationMatrix, FloatArray, MatrixEstimator, ReturnsBlock

__all__ = [
    "MATRIX_ESTIMATORS",
    "EWMA_DECAY",
    "estimate_correlation",
    "standardize_columns",
    "ledoit_wolf_shrinkage",
    "ledoit_wolf_correlation",
    "marchenko_pastur_edge",
    "clip_eigenvalues",
    "clipped_correlation",
    "market_removed_correlation",
    "ewma_correlation",
]

MATRIX_ESTIMATORS: tuple[str, ...] = get_args(MatrixEstimator)
EWMA_DECAY = 0.94
"""Daily decay of the exponentially weighted estimator (RiskMetrics 1996, common practice)."""


def estimate_correlation(
    block: ReturnsBlock,
    method: CorrelationEstimator = "pearson",
    estimator: MatrixEstimator = "sample",
) -> CorrelationMatrix:
    """One window's correlation matrix by the configured estimator.

    Parameters
    ----------
    block : numpy.ndarray
        (days, assets) complete returns, every column with non-zero variance.
    method : {"pearson", "spearman"}
        With ``spearman`` the estimator works on the per-column ranks.
    estimator : {"sample", "ledoit_wolf", "clipped", "market_removed", "ewma"}
        ``sample`` is :func:`riskshape.compute.distance.correlation_matrix` itself, bit for bit.

    Returns
    -------
    numpy.ndarray
        (assets, assets) symmetric, unit diagonal, entries in [-1, 1].

    Examples
    --------
    >>> import numpy as np
    >>> block = np.random.default_rng(0).normal(size=(40, 5))
    >>> corr = estimate_correlation(block, estimator="ledoit_wolf")
    >>> corr.shape, bool(np.allclose(np.diag(corr), 1.0))
    ((5, 5), True)
    """
    if estimator == "sample":
        return correlation_matrix(block, method)
    data = cast("FloatArray", rankdata(block, axis=0)) if method == "spearman" else block
    if estimator == "ledoit_wolf":
        corr = ledoit_wolf_correlation(data)
    elif estimator == "clipped":
        corr = clipped_correlation(data)
    elif estimator == "market_removed":
        corr = market_removed_correlation(data)
    else:
        corr = ewma_correlation(data)
    return _tidy(corr)


def _tidy(corr: FloatArray) -> CorrelationMatrix:
    """Symmetrised, clipped to [-1, 1], unit diagonal (as the sample estimate is)."""
    corr = np.clip((corr + corr.T) / 2.0, -1.0, 1.0)
    np.fill_diagonal(corr, 1.0)
    return corr


def _to_correlation(cov: FloatArray) -> FloatArray:
    """Scale a covariance matrix to unit diagonal; a zero variance gives zero correlations."""
    variance = np.diag(cov)
    scale = np.divide(1.0, np.sqrt(variance), out=np.zeros_like(variance), where=variance > 0.0)
    return cast("FloatArray", cov * np.outer(scale, scale))


def standardize_columns(block: ReturnsBlock) -> FloatArray:
    """Each column less its mean, divided by its standard deviation (ddof = 0).

    Parameters
    ----------
    block : numpy.ndarray
        (days, assets), every column with non-zero variance.

    Returns
    -------
    numpy.ndarray
        Same shape; ``z.T @ z / days`` is the sample correlation matrix.

    Examples
    --------
    >>> import numpy as np
    >>> standardize_columns(np.array([[1.0], [3.0]])).ravel().tolist()
    [-1.0, 1.0]
    """
    centred = block - block.mean(axis=0)
    return cast("FloatArray", centred / centred.std(axis=0))


def ledoit_wolf_shrinkage(centred: FloatArray) -> float:
    """Ledoit and Wolf's (2004) shrinkage intensity towards the scaled identity.

    With ``S = X'X / T`` (``X`` the centred returns, ``T`` days, ``N`` assets), ``mu = tr(S) / N``,
    and the norm ``||A||^2 = tr(A A') / N``: ``d^2 = ||S - mu I||^2``,
    ``b^2 = min(d^2, sum_t ||x_t x_t' - S||^2 / T^2)``; the intensity is ``b^2 / d^2``
    (Lemma 3.2 to 3.4 and Theorem 3.1 of the paper), zero when ``d^2`` is zero.

    Parameters
    ----------
    centred : numpy.ndarray
        (days, assets) returns with column means zero.

    Returns
    -------
    float
        In [0, 1].

    Examples
    --------
    >>> import numpy as np
    >>> x = standardize_columns(np.random.default_rng(1).normal(size=(500, 3)))
    >>> 0.0 <= ledoit_wolf_shrinkage(x) <= 1.0
    True
    """
    days, assets = centred.shape
    sample = centred.T @ centred / days
    mu = np.trace(sample) / assets
    target_gap = sample.copy()
    target_gap[np.diag_indices(assets)] -= mu
    d2 = float(np.sum(target_gap**2)) / assets
    if d2 <= 0.0:
        return 0.0
    # sum_t ||x_t x_t'||_F^2 = sum_t (x_t' x_t)^2, and sum_t x_t x_t' = T S, so
    # sum_t ||x_t x_t' - S||_F^2 = sum_t (x_t' x_t)^2 - T ||S||_F^2
    row_norms = np.sum(centred**2, axis=1)
    spread = (float(np.sum(row_norms**2)) - days * float(np.sum(sample**2))) / days**2 / assets
    b2 = min(max(spread, 0.0), d2)
    return float(b2 / d2)


def ledoit_wolf_correlation(block: ReturnsBlock) -> FloatArray:
    """Ledoit-Wolf shrunk covariance of the standardised returns (a correlation matrix).

    Parameters
    ----------
    block : numpy.ndarray
        (days, assets), every column with non-zero variance.

    Returns
    -------
    numpy.ndarray
        ``(1 - s) C + s I``, ``C`` the sample correlation and ``s`` :func:`ledoit_wolf_shrinkage`.

    Examples
    --------
    >>> import numpy as np
    >>> corr = ledoit_wolf_correlation(np.random.default_rng(2).normal(size=(30, 20)))
    >>> bool(np.allclose(np.diag(corr), 1.0))
    True
    """
    z = standardize_columns(block)
    days, assets = z.shape
    shrinkage = ledoit_wolf_shrinkage(z)
    sample = z.T @ z / days
    shrunk = (1.0 - shrinkage) * sample
    shrunk[np.diag_indices(assets)] += shrinkage * np.trace(sample) / assets
    return cast("FloatArray", shrunk)


def marchenko_pastur_edge(n_assets: int, n_days: int) -> float:
    """Upper edge lambda+ = (1 + sqrt(N / T))^2 of the Marchenko-Pastur law (unit variance).

    Parameters
    ----------
    n_assets, n_days : int
        ``N`` and ``T``.

    Returns
    -------
    float

    Examples
    --------
    >>> marchenko_pastur_edge(100, 400)
    2.25
    """
    return float((1.0 + np.sqrt(n_assets / n_days)) ** 2)


def clip_eigenvalues(eigenvalues: FloatArray, n_days: int) -> FloatArray:
    """Eigenvalues at or below lambda+ replaced by their mean; those above kept (trace kept).

    Parameters
    ----------
    eigenvalues : numpy.ndarray
        The sample correlation matrix's eigenvalues (any order).
    n_days : int
        Days in the window (``T``).

    Returns
    -------
    numpy.ndarray
        Same order; same sum.

    Examples
    --------
    >>> import numpy as np
    >>> clip_eigenvalues(np.array([5.0, 1.5, 0.5]), n_days=12).tolist()  # lambda+ = 2.25
    [5.0, 1.0, 1.0]
    """
    edge = marchenko_pastur_edge(len(eigenvalues), n_days)
    noise = eigenvalues <= edge
    cleaned = eigenvalues.astype(float, copy=True)
    if np.any(noise):
        cleaned[noise] = eigenvalues[noise].mean()
    return cleaned


def clipped_correlation(block: ReturnsBlock) -> FloatArray:
    """Correlation matrix cleaned by eigenvalue clipping (Laloux et al. 1999), unit diagonal.

    Parameters
    ----------
    block : numpy.ndarray
        (days, assets), every column with non-zero variance.

    Returns
    -------
    numpy.ndarray
        ``V diag(clip(lambda)) V'`` rescaled to a unit diagonal.

    Examples
    --------
    >>> import numpy as np
    >>> corr = clipped_correlation(np.random.default_rng(3).normal(size=(250, 10)))
    >>> bool(np.allclose(corr, np.eye(10), atol=0.05))  # pure noise: close to the identity
    True
    """
    z = standardize_columns(block)
    sample = z.T @ z / z.shape[0]
    eigenvalues, vectors = np.linalg.eigh(sample)
    cleaned = clip_eigenvalues(eigenvalues, z.shape[0])
    return _to_correlation((vectors * cleaned) @ vectors.T)


def market_removed_correlation(block: ReturnsBlock) -> FloatArray:
    """Correlations of the residuals once the first principal component is taken out.

    The standardised returns ``Z`` are projected off the leading eigenvector ``v`` of their
    correlation matrix, ``E = Z (I - v v')``; the result is the correlation matrix of ``E``
    (an asset whose residual is zero gets zero correlations).

    Parameters
    ----------
    block : numpy.ndarray
        (days, assets), every column with non-zero variance.

    Returns
    -------
    numpy.ndarray

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(4)
    >>> block = rng.normal(size=(200, 1)) + 0.5 * rng.normal(size=(200, 8))  # one common factor
    >>> corr = market_removed_correlation(block)
    >>> abs(float(corr[np.triu_indices(8, 1)].mean())) < 0.2
    True
    """
    z = standardize_columns(block)
    sample = z.T @ z / z.shape[0]
    eigenvalues, vectors = np.linalg.eigh(sample)
    leading = vectors[:, -1]
    residual_cov = sample - eigenvalues[-1] * np.outer(leading, leading)
    return _to_correlation(residual_cov)


def ewma_correlation(block: ReturnsBlock, decay: float = EWMA_DECAY) -> FloatArray:
    """Exponentially weighted correlation over the window (the last day weighs most).

    Weights ``w_t`` proportional to ``decay ** (T - 1 - t)``, normalised to sum one; the mean
    and the covariance are weighted alike.

    Parameters
    ----------
    block : numpy.ndarray
        (days, assets), every column with non-zero variance.
    decay : float
        In (0, 1]; 1 gives the sample correlation.

    Returns
    -------
    numpy.ndarray

    Examples
    --------
    >>> import numpy as np
    >>> block = np.random.default_rng(5).normal(size=(60, 4))
    >>> bool(np.allclose(ewma_correlation(block, decay=1.0), np.corrcoef(block, rowvar=False)))
    True
    """
    days = block.shape[0]
    weights = decay ** np.arange(days - 1, -1, -1, dtype=float)
    weights /= weights.sum()
    centred = block - weights @ block
    cov = (centred * weights[:, None]).T @ centred
    return _to_correlation(cov)
