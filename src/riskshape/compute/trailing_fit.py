"""Causal trailing least-squares fits: the out-of-sample residual of each row, and its z-score.

Row ``t`` is predicted by an ordinary least-squares fit on the ``L`` rows before it (``t - L ..
t - 1``), over the rows of that slice where the response and every regressor are present; a fit
needs at least ``ceil(L / 2)`` of them. The fit leaves ``t`` out: an out-of-sample residual is the
usual causal choice, and an in-sample one is pulled towards the fit by the row's own leverage, so
a break at ``t`` would be damped by the very value that shows it. Where the design is
rank-deficient the fit is the minimum-norm solution, as ``numpy.linalg.lstsq`` gives (with its
cut-off for small singular values).

The z-score is the residual over its prediction standard error ``s * sqrt(1 + x_t' (X'X)^+ x_t)``
(``s^2``: residual sum of squares over complete rows minus rank), the studentized prediction error
of a regression textbook (``se_obs`` of a statsmodels prediction); NaN where the fit is exact up to
rounding (``s`` below 1e-9 times the response's root mean square over the slice).

Vectorised over rows: one batched SVD of the design's trailing slices serves every response
column complete on the same rows, and each column's numbers are computed with the same shapes
whatever else is fitted alongside and however many rows are computed at once, so a one-day update
gives the batch's numbers bit for bit.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

from riskshape.types import BoolArray, FloatArray, IntArray

__all__ = ["trailing_residuals", "trailing_fits", "describe_fit_codes"]

_EXACT_FIT = 1e-9
"""A fit is exact up to rounding when its residual standard error is below this share of the response's RMS."""


def trailing_residuals(
    y: FloatArray, design: FloatArray, window: int, min_rows: int | None = None
) -> tuple[FloatArray, FloatArray, IntArray]:
    """Out-of-sample residuals of ``y`` on ``design`` from trailing least-squares fits, and their z-scores.

    Row ``t`` is predicted by the fit on rows ``t - window .. t - 1`` (the rows of that slice where
    ``y`` and every column of ``design`` are finite); vectorised over rows with one batched SVD.

    Parameters
    ----------
    y : numpy.ndarray
        (n,) the response, NaN where missing.
    design : numpy.ndarray
        (n, p) the regressors, the intercept's column of ones included; NaN where missing.
    window : int
        Rows of each trailing fit.
    min_rows : int, optional
        Complete rows a fit needs; default ``ceil(window / 2)`` (and always more than ``p``).

    Returns
    -------
    residual : numpy.ndarray
        (n,) ``y_t - x_t' b_t``; NaN for the first ``window`` rows, where the fit has too few
        complete rows, or where ``y_t`` or ``x_t`` is missing.
    z : numpy.ndarray
        (n,) the residual over its prediction standard error ``s * sqrt(1 + x_t' (X'X)^+ x_t)``;
        NaN also where the fit is exact up to rounding.
    code : numpy.ndarray
        (n,) why each row is NaN: 0 not NaN, 1 short history, 2 too few complete rows in the
        slice, 3 ``y_t`` or ``x_t`` missing, 4 (z only) an exact fit.

    Examples
    --------
    >>> import numpy as np
    >>> x = np.arange(8.0)
    >>> y = 2.0 + 3.0 * x
    >>> y[7] += 1.0  # a break at the last row
    >>> res, z, code = trailing_residuals(y, np.column_stack([np.ones(8), x]), window=5)
    >>> np.round(res[5:], 9).tolist(), code.tolist()
    ([0.0, 0.0, 1.0], [1, 1, 1, 1, 1, 4, 4, 4])
    """
    y = np.asarray(y, dtype=float)
    design = np.asarray(design, dtype=float)
    complete = np.isfinite(y) & np.isfinite(design).all(axis=1)
    residual, z, code = trailing_fits(y[:, None], design, complete, window, min_rows)
    return residual[:, 0], z[:, 0], code[:, 0]


def trailing_fits(
    ys: FloatArray, design: FloatArray, complete: BoolArray, window: int, min_rows: int | None = None
) -> tuple[FloatArray, FloatArray, IntArray]:
    """:func:`trailing_residuals` of the k columns of ``ys`` (n, k) that are complete on the same rows.

    One batched SVD of the trailing slices of the design serves every column.

    Parameters
    ----------
    ys : numpy.ndarray
        (n, k) responses.
    design : numpy.ndarray
        (n, p) regressors, the intercept's column included.
    complete : numpy.ndarray
        (n,) bool: rows where every column of ``ys`` and of ``design`` is finite.
    window : int
        Rows of each trailing fit.
    min_rows : int, optional
        Complete rows a fit needs; default ``ceil(window / 2)`` (and always more than ``p``).

    Returns
    -------
    residual, z, code : numpy.ndarray
        (n, k) each, as :func:`trailing_residuals` gives them per column.
    """
    n, p = design.shape
    k = ys.shape[1]
    need = max(p + 1, math.ceil(window / 2) if min_rows is None else min_rows)
    residual: FloatArray = np.full((n, k), np.nan)
    z: FloatArray = np.full((n, k), np.nan)
    code: IntArray = np.ones((n, k), dtype=np.int64)
    if n <= window:
        return residual, z, code
    m = n - window
    # rows left out of a fit are zero rows: they add nothing to X'X, X'y or the residual sum of squares
    xs = np.where(complete[:, None], design, 0.0)
    slices = sliding_window_view(xs, window, axis=0)[:m].transpose(0, 2, 1)  # (m, window, p)
    counts = sliding_window_view(complete, window)[:m].sum(axis=1)
    u, sv, vt = np.linalg.svd(slices, full_matrices=False)  # slices = u diag(sv) vt
    # numpy.linalg.lstsq's default cut-off: singular values below eps * max(rows, cols) * the largest
    kept = sv > np.finfo(float).eps * window * sv[:, :1]
    inv_sv = np.where(kept, 1.0 / np.where(kept, sv, 1.0), 0.0)
    dof = counts - kept.sum(axis=1)
    now = design[window:]
    leverage = ((np.einsum("mrp,mp->mr", vt, now) * inv_sv) ** 2).sum(axis=1)
    enough = counts >= need
    later = np.where(~enough, 2, np.where(~complete[window:], 3, 0))
    # column by column, each with the same shapes and strides whatever the group or the span: a column's
    # numbers do not depend on which columns share its fit, nor on how many windows are computed at once
    for j in range(k):
        y = np.ascontiguousarray(np.where(complete, ys[:, j], 0.0))
        y_slices = sliding_window_view(y, window)[:m, None, :]  # (m, 1, window)
        coef = (inv_sv[:, None, :] * (y_slices @ u)) @ vt  # (m, 1, p): the minimum-norm least-squares solution
        fitted = coef @ slices.transpose(0, 2, 1)  # (m, 1, window); rows left out are zero rows, fitted 0
        rss = ((y_slices - fitted) ** 2).sum(axis=2)[:, 0]
        residual_now = ys[window:, j] - (now[:, None, :] @ coef.transpose(0, 2, 1))[:, 0, 0]
        scale = np.sqrt(np.where(dof > 0, rss, np.nan) / np.where(dof > 0, dof, 1))
        rms = np.sqrt((y_slices[:, 0, :] ** 2).sum(axis=1) / np.maximum(counts, 1))
        exact = scale <= _EXACT_FIT * rms
        ok_z = (later == 0) & ~exact
        spread = scale * np.sqrt(1.0 + leverage)
        residual[window:, j] = np.where(later == 0, residual_now, np.nan)
        z[window:, j] = np.divide(residual_now, spread, out=np.full_like(residual_now, np.nan), where=ok_z)
        code[window:, j] = np.where((later == 0) & exact, 4, later)
    return residual, z, code


def describe_fit_codes(code: IntArray, window: int) -> str:
    """One sentence per NaN cause of :func:`trailing_residuals`, with how many windows each covers.

    Parameters
    ----------
    code : numpy.ndarray
        The codes of one column (0 to 4).
    window : int
        The trailing fit's windows (``net_of_market_window``).

    Returns
    -------
    str
        The causes, ``"; "``-joined ("" when none).
    """
    parts = []
    counts = np.bincount(np.asarray(code, dtype=np.int64), minlength=5)
    if counts[1]:
        parts.append(f"{counts[1]} window(s) before the trailing fit has net_of_market_window = {window} earlier ones")
    if counts[2]:
        parts.append(
            f"{counts[2]} window(s) whose trailing {window} windows hold fewer than {math.ceil(window / 2)} "
            "with the summary, mean_correlation and ew_volatility all present"
        )
    if counts[3]:
        parts.append(f"{counts[3]} window(s) where the summary, mean_correlation or ew_volatility is missing")
    if counts[4]:
        parts.append(f"{counts[4]} window(s) where the trailing fit is exact (no residual spread to scale by)")
    return "; ".join(parts)
