"""Correlation estimators and the correlation-distance transform.

d_ij = sqrt(2 (1 - rho_ij)) (Mantegna 1999, Eur. Phys. J. B 11:193) is the Euclidean distance
between the standardised return vectors of assets i and j, so it is a metric whenever the
correlation matrix is positive semidefinite; it is clipped to [0, 2] against rounding. It does
not change when an asset's volatility does.
"""

from __future__ import annotations

from typing import cast

import numpy as np
from scipy.stats import rankdata

from riskshape.types import CorrelationEstimator, CorrelationMatrix, DistanceMatrix, FloatArray, ReturnsBlock

__all__ = ["correlation_matrix", "covariance_to_correlation", "correlation_to_distance", "mean_offdiagonal"]


def correlation_matrix(block: ReturnsBlock, method: CorrelationEstimator = "pearson") -> CorrelationMatrix:
    """Correlation matrix of the columns of a complete (no NaN) block of returns.

    Parameters
    ----------
    block : numpy.ndarray
        (days, assets) returns, every column with non-zero variance.
    method : {"pearson", "spearman"}
        Spearman is Pearson on the per-column ranks (ties get average ranks).

    Returns
    -------
    numpy.ndarray
        (assets, assets) symmetric, unit diagonal, entries in [-1, 1].
    """
    data = rankdata(block, axis=0) if method == "spearman" else block
    if data.shape[1] < 2:
        corr = cast("CorrelationMatrix", np.corrcoef(data, rowvar=False))
        corr = np.clip((corr + corr.T) / 2.0, -1.0, 1.0)
        np.fill_diagonal(corr, 1.0)
        return corr
    return covariance_to_correlation(np.cov(data, rowvar=False))


def covariance_to_correlation(cov: FloatArray) -> CorrelationMatrix:
    """The correlation matrix of a sample covariance matrix, as :func:`correlation_matrix` makes it.

    ``numpy.corrcoef``'s own steps on ``numpy.cov``'s result (each entry divided by the two
    standard deviations, clipped to [-1, 1]), then made exactly symmetric with a unit diagonal:
    :func:`correlation_matrix` is ``covariance_to_correlation(numpy.cov(block, rowvar=False))``,
    so a caller holding the covariance already (the baselines) gets the same bits for free.

    Parameters
    ----------
    cov : numpy.ndarray
        (assets, assets) sample covariance, at least 2 assets, positive variances; not modified.

    Returns
    -------
    numpy.ndarray
        (assets, assets) symmetric, unit diagonal, entries in [-1, 1].

    Examples
    --------
    >>> import numpy as np
    >>> covariance_to_correlation(np.array([[4.0, 2.0], [2.0, 4.0]])).tolist()
    [[1.0, 0.5], [0.5, 1.0]]
    """
    stddev = np.sqrt(np.diag(cov))
    corr = cov / stddev[:, None]
    corr /= stddev[None, :]
    np.clip(corr, -1.0, 1.0, out=corr)
    corr = np.clip((corr + corr.T) / 2.0, -1.0, 1.0)
    np.fill_diagonal(corr, 1.0)
    return corr


def correlation_to_distance(corr: CorrelationMatrix) -> DistanceMatrix:
    """Mantegna's correlation distance sqrt(2 (1 - rho)), clipped to [0, 2], zero diagonal.

    Parameters
    ----------
    corr : numpy.ndarray
        A square correlation matrix.

    Returns
    -------
    numpy.ndarray
        The distance matrix, same shape.

    Examples
    --------
    >>> import numpy as np
    >>> correlation_to_distance(np.array([[1.0, -1.0], [-1.0, 1.0]])).tolist()
    [[0.0, 2.0], [2.0, 0.0]]
    """
    dist = 1.0 - corr
    dist *= 2.0
    np.clip(dist, 0.0, 4.0, out=dist)
    np.sqrt(dist, out=dist)
    np.fill_diagonal(dist, 0.0)
    return dist


def mean_offdiagonal(matrix: FloatArray) -> float:
    """Mean of the off-diagonal entries of a square matrix (NaN below 2 rows)."""
    n = matrix.shape[0]
    if n < 2:
        return float("nan")
    return float((matrix.sum() - np.trace(matrix)) / (n * (n - 1)))
