"""Block-bootstrap confidence intervals over time, with ``arch.bootstrap``.

Consecutive windows overlap, so their measures are dependent; resampling single windows would
understate the spread. The rows (one per window end, in time order) are resampled in blocks of
consecutive rows: the stationary bootstrap (Politis and Romano 1994, J. Amer. Statist. Assoc.
89:1303; blocks of random length, geometric with the stated mean) or the moving block bootstrap
(Kuensch 1989, Ann. Statist. 17:1217; blocks of the stated length). Both come from
``arch.bootstrap`` (``StationaryBootstrap``, ``MovingBlockBootstrap``); nothing here resamples by
hand. The interval is the percentile interval of the replicates (Efron and Tibshirani 1993, ch.
13, from memory); the one-sided p-value of "the measure exceeds ``null``" is the share of
replicates at or below ``null``, ``(1 + #{theta*_b <= null}) / (B + 1)``, the test whose
inversion is that interval (common practice).

Block lengths are stated in trading days and turned into rows with the spacing of the window
ends (``step``): a block of 126 trading days is about 25 rows at ``step = 5``.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Literal

import numpy as np
from arch.bootstrap import MovingBlockBootstrap, StationaryBootstrap

from riskshape.errors import ConfigError
from riskshape.types import FloatArray

__all__ = ["BlockBootstrap", "block_bootstrap", "block_rows", "BOOTSTRAP_KINDS"]

BootstrapKind = Literal["stationary", "moving"]
BOOTSTRAP_KINDS: tuple[str, ...] = ("stationary", "moving")


@dataclass(frozen=True)
class BlockBootstrap:
    """A statistic's estimate and its block-bootstrap replicates.

    Attributes
    ----------
    estimate : numpy.ndarray
        The statistic on the rows as they are (k values).
    replicates : numpy.ndarray
        (B, k): the statistic on each resample (NaN where it cannot be computed there).
    block_rows : int
        Block length (mean length for the stationary bootstrap) in rows.
    kind : str
        ``stationary`` or ``moving``.
    """

    estimate: FloatArray
    replicates: FloatArray
    block_rows: int
    kind: str

    def interval(self, confidence: float = 0.95) -> tuple[FloatArray, FloatArray]:
        """Percentile interval of each value at ``confidence`` (NaN replicates left out).

        Parameters
        ----------
        confidence : float
            Two-sided coverage, in (0, 1).

        Returns
        -------
        tuple of numpy.ndarray
            Lower and upper ends (NaN for a value with no finite replicate).
        """
        if not 0.0 < confidence < 1.0:
            raise ConfigError(f"confidence must lie in (0, 1), got {confidence}")
        tail = 100.0 * (1.0 - confidence) / 2.0
        finite = np.isfinite(self.replicates)
        low = np.full(self.replicates.shape[1], np.nan)
        high = low.copy()
        for j in range(self.replicates.shape[1]):
            if finite[:, j].any():
                low[j], high[j] = np.percentile(self.replicates[finite[:, j], j], [tail, 100.0 - tail])
        return low, high

    def p_above(self, null: float) -> FloatArray:
        """One-sided p-value of each value exceeding ``null``: ``(1 + #{replicate <= null}) / (B + 1)``.

        Parameters
        ----------
        null : float
            The value under the null hypothesis (0.5 for an AUC, 0 for a gain).

        Returns
        -------
        numpy.ndarray
            One p-value per value, over its finite replicates (NaN when none is).
        """
        finite = np.isfinite(self.replicates)
        n = finite.sum(axis=0)
        at_or_below = (np.where(finite, self.replicates, np.inf) <= null).sum(axis=0)
        p_values: FloatArray = np.where(n > 0, (1.0 + at_or_below) / (n + 1.0), np.nan)
        return p_values

    @property
    def n_finite(self) -> FloatArray:
        """Replicates in which each value could be computed."""
        counts: FloatArray = np.isfinite(self.replicates).sum(axis=0).astype(float)
        return counts


def block_rows(block_days: int, step_days: float) -> int:
    """A block of ``block_days`` trading days in rows spaced ``step_days`` apart (at least 1).

    Examples
    --------
    >>> block_rows(126, 5), block_rows(126, 1), block_rows(3, 5)
    (25, 126, 1)
    """
    if block_days < 1:
        raise ConfigError(f"block_days must be at least 1 trading day, got {block_days}")
    return max(1, round(block_days / step_days))


def block_bootstrap(
    records: FloatArray,
    statistic: Callable[[FloatArray], FloatArray],
    *,
    n_boot: int,
    block: int,
    kind: BootstrapKind = "stationary",
    seed: int | np.random.Generator = 0,
) -> BlockBootstrap:
    """Replicates of ``statistic`` over block resamples of the rows of ``records``.

    Parameters
    ----------
    records : numpy.ndarray
        (rows, fields), one row per window end in time order.
    statistic : callable
        Records (rows, fields) -> values (k,); NaN where a value cannot be computed.
    n_boot : int
        Replicates ``B`` (>= 1).
    block : int
        Block length in rows (the mean length for ``stationary``).
    kind : {"stationary", "moving"}
        ``arch.bootstrap.StationaryBootstrap`` or ``MovingBlockBootstrap``.
    seed : int or numpy.random.Generator
        Passed to arch as its ``seed``.

    Returns
    -------
    BlockBootstrap

    Examples
    --------
    The mean of 400 independent standard normal draws: the 95 % interval is close to
    ``mean +- 1.96 / sqrt(400)`` (its exact sampling distribution):

    >>> import numpy as np
    >>> x = np.random.default_rng(3).normal(size=(400, 1))
    >>> boot = block_bootstrap(x, lambda r: r.mean(axis=0), n_boot=2000, block=5, seed=4)
    >>> low, high = boot.interval(0.95)
    >>> bool(abs((high - low)[0] - 2 * 1.96 / 20) < 0.03)
    True
    """
    if n_boot < 1:
        raise ConfigError(f"n_boot must be at least 1 replicate, got {n_boot}")
    if kind not in BOOTSTRAP_KINDS:
        raise ConfigError(f"bootstrap kind must be one of {', '.join(BOOTSTRAP_KINDS)}, got {kind!r}")
    data = np.asarray(records, dtype=float)
    estimate = np.asarray(statistic(data), dtype=float)
    if len(data) < 2:
        replicates = np.full((n_boot, estimate.size), np.nan)
    else:
        size = min(block, len(data))
        resampler = (StationaryBootstrap if kind == "stationary" else MovingBlockBootstrap)(size, data, seed=seed)
        replicates = np.asarray(resampler.apply(statistic, n_boot), dtype=float).reshape(n_boot, -1)
    return BlockBootstrap(estimate=estimate, replicates=replicates, block_rows=block, kind=kind)
