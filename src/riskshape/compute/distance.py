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

__all__ = ["correlation_matrix", "correlation_to_distance", "mean_offdiagonal"]


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
    corr = cast("CorrelationMatrix", np.corrcoef(data, rowvar=False))
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
