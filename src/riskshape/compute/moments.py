"""Pearson correlation over sliding windows from running sums (incremental rolling correlation).

Sliding a window by one day changes two rows of its returns, so the column sums and the
cross-product matrix X'X can be updated in O(n^2) (a rank-two update) instead of rebuilt in
O(window n^2); the correlation of any set of columns follows from them:
cov_ij = (X'X_ij - s_i s_j / T) / (T - 1), rho_ij = cov_ij / sqrt(cov_ii cov_jj).

Accuracy: the sums are kept about a per-column shift (the column means of the window where they
were last rebuilt), which avoids cancellation, and they are rebuilt from scratch at fixed window
positions (every :data:`RECOMPUTE_EVERY` windows), which bounds drift. Where they are rebuilt
depends only on a window's position in the returns table, never on how windows are batched, so
a batch, an update and any executor give the same bits.

Missing returns enter the sums as zeros and are counted per column; a column's sums are exact
for a window exactly when it has no missing return there (zeros leave as they came in). The
correlation is taken from the sums only for windows whose admitted assets are all complete;
where the coverage policy imputed a missing return, the plain estimator runs on the imputed
block.
"""

from __future__ import annotations

from typing import cast

import numpy as np

from riskshape.types import CorrelationMatrix, FloatArray, Positions

__all__ = ["RollingMoments", "RECOMPUTE_EVERY", "is_rebuild_point"]

RECOMPUTE_EVERY = 64


def is_rebuild_point(index: int) -> bool:
    """Whether the window with this index (0 = first window of the table) rebuilds the sums.

    The first window and every window whose index is ``RECOMPUTE_EVERY - 1`` modulo
    ``RECOMPUTE_EVERY``. The batch size is decided elsewhere and does not move these points:
    ``[compute] batch_windows`` (:class:`riskshape.config.ComputeConfig`, 64 by default), which
    the monitor shrinks to keep every worker of a pool busy (``_balanced_batch_size`` in
    :mod:`riskshape.compute.monitor`).

    Examples
    --------
    >>> [i for i in range(200) if is_rebuild_point(i)]
    [0, 63, 127, 191]
    """
    return index == 0 or index % RECOMPUTE_EVERY == RECOMPUTE_EVERY - 1


class RollingMoments:
    """Running column sums and cross-products of one window of returns (NaN = missing).

    Parameters
    ----------
    rows : numpy.ndarray
        (window, n_assets) returns of the first window, NaN where missing.

    Examples
    --------
    Slid by five days, the sums give numpy's correlation of the new window:

    >>> import numpy as np
    >>> x = np.random.default_rng(0).normal(size=(30, 3))
    >>> moments = RollingMoments(x[:20])
    >>> moments.slide(x[:5], x[20:25])
    >>> np.allclose(moments.correlation(np.arange(3)), np.corrcoef(x[5:25], rowvar=False), rtol=0, atol=1e-12)
    True

    A missing return makes its column incomplete until it leaves the window:

    >>> x[26, 1] = np.nan
    >>> moments.slide(x[5:7], x[25:27])
    >>> moments.complete(np.array([0, 2])), moments.complete(np.array([0, 1]))
    (True, False)
    """

    def __init__(self, rows: FloatArray) -> None:
        present = ~np.isnan(rows)
        counts = present.sum(axis=0)
        totals = np.where(present, rows, 0.0).sum(axis=0)
        self.shift = np.divide(totals, counts, out=np.zeros_like(totals), where=counts > 0)
        centred = self._centre(rows)
        self.length = rows.shape[0]
        self.sums = centred.sum(axis=0)
        self.cross = centred.T @ centred
        self.missing = (~present).sum(axis=0)

    def _centre(self, rows: FloatArray) -> FloatArray:
        centred = rows - self.shift
        centred[np.isnan(centred)] = 0.0
        return cast("FloatArray", centred)

    def slide(self, leaving: FloatArray, entering: FloatArray) -> None:
        """Drop the rows ``leaving`` from the window and add the rows ``entering`` (same count)."""
        old, new = self._centre(leaving), self._centre(entering)
        self.sums += new.sum(axis=0) - old.sum(axis=0)
        self.cross += np.vstack([new, old]).T @ np.vstack([new, -old])
        self.missing += np.isnan(entering).sum(axis=0) - np.isnan(leaving).sum(axis=0)

    def complete(self, columns: Positions) -> bool:
        """Whether every one of ``columns`` has all its returns in the current window."""
        return bool(np.all(self.missing[columns] == 0))

    def correlation(self, columns: Positions) -> CorrelationMatrix | None:
        """Pearson correlation matrix of ``columns`` (complete ones), or None if a variance is not positive.

        Symmetrised, clipped to [-1, 1], unit diagonal, as
        :func:`riskshape.compute.distance.correlation_matrix` gives it.
        """
        if len(columns) == self.cross.shape[0]:
            cross, sums = self.cross, self.sums
        else:
            cross, sums = self.cross[np.ix_(columns, columns)], self.sums[columns]
        root = sums / np.sqrt(self.length)
        corr = cross - np.outer(root, root)
        variance = np.diag(corr).copy()
        if not np.all(variance > 0.0):
            return None
        scale = 1.0 / np.sqrt(variance)
        corr *= np.outer(scale, scale)
        corr += corr.T
        corr *= 0.5
        np.clip(corr, -1.0, 1.0, out=corr)
        np.fill_diagonal(corr, 1.0)
        return corr
