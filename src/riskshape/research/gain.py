"""The walk-forward gain of adding summaries to a base set, with a block-bootstrap interval and a surrogate null.

:func:`gain_table` runs :func:`riskshape.research.walkforward.walk_forward` on the nested sets
of :func:`riskshape.research.walkforward.nested_feature_sets` (the base set, the base set plus
each added column, the base set plus them all) and, for each larger set, takes its gain: the
pooled out-of-sample AUC of the larger set minus that of the base set, on the test windows both
could score. Its interval resamples those windows in blocks of consecutive windows, the same
resample for both sets (paired; :mod:`riskshape.research.intervals`); ``p_gain`` is the one-sided
bootstrap p-value of a positive gain.

**The surrogate null.** The added columns are replaced by IAAFT surrogates of themselves
(:func:`riskshape.research.surrogates.surrogate`; each column's values and, approximately, its
autocorrelation kept; its alignment with the events and with the base columns lost) and the
walk-forward is run again: ``gain_null_median`` and ``gain_null_q95`` are what the same fit gains
from columns that carry nothing, ``p_gain_null`` the share of surrogates gaining at least as much
as the real columns, ``(1 + #{gain_null >= gain}) / (n + 1)``.
"""

from __future__ import annotations

import warnings
from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

from riskshape.errors import ConfigError, ResearchWarning
from riskshape.research.evidence import rank_auc
from riskshape.research.intervals import BootstrapKind, block_bootstrap, block_rows
from riskshape.research.surrogates import surrogate
from riskshape.research.walkforward import WalkForward, nested_feature_sets, walk_forward
from riskshape.types import FloatArray

__all__ = ["gain_table", "pooled_gain"]

_BASE = "base"


def pooled_gain(wf: WalkForward, base: str, larger: str) -> tuple[FloatArray, float, float]:
    """The test records both models scored, and their pooled AUCs.

    Parameters
    ----------
    wf : WalkForward
    base, larger : str
        Model names in ``wf``.

    Returns
    -------
    tuple
        Records (rows, 3: label, p_base, p_larger) in time order, the base AUC, the larger AUC.
    """
    scored = wf.predictions[["label", f"p_{base}", f"p_{larger}"]].dropna()
    records = scored.to_numpy(dtype=float)
    return records, rank_auc(records[:, 1], records[:, 0]), rank_auc(records[:, 2], records[:, 0])


def _gain(records: FloatArray) -> FloatArray:
    return np.array([rank_auc(records[:, 2], records[:, 0]) - rank_auc(records[:, 1], records[:, 0])])


def _gains(wf: WalkForward, names: Sequence[str]) -> FloatArray:
    return np.array([_gain(pooled_gain(wf, _BASE, name)[0])[0] for name in names])


def gain_table(
    features: pd.DataFrame,
    wealth: pd.Series,
    base: Sequence[str],
    added: Sequence[str],
    *,
    n_boot: int = 999,
    block_days: int = 126,
    bootstrap: BootstrapKind = "stationary",
    confidence: float = 0.95,
    n_surrogates: int = 19,
    seed: int = 0,
    **walk_forward_options: Any,
) -> pd.DataFrame:
    """The out-of-sample AUC gain of each added column (and of all of them) over the base set.

    Parameters
    ----------
    features : pandas.DataFrame
        Causal features indexed by window end (days of ``wealth``'s index).
    wealth : pandas.Series
        The portfolio's wealth path (events are found in it, as in :func:`walk_forward`).
    base : sequence of str
        The base columns (e.g. the ``base_`` baselines).
    added : sequence of str
        The candidate columns (e.g. the topological summaries).
    n_boot, block_days, bootstrap, confidence
        As for :func:`riskshape.research.evidence.evidence_table`; the block is turned into
        test windows with the median spacing of ``features``' index in ``wealth``'s calendar.
    n_surrogates : int
        Walk-forward runs with the added columns replaced by their IAAFT surrogates (0: none).
    seed : int
        Seeds the bootstrap and the surrogates.
    **walk_forward_options
        Passed to :func:`riskshape.research.walkforward.walk_forward` (``min_depth``,
        ``horizon``, ``n_folds``, ``min_train``, ``penalty``, ...).

    Returns
    -------
    pandas.DataFrame
        One row per larger set (index ``model``: ``base+<column>``, and ``base+all`` when more
        than one is added): ``n_columns``, ``n_scored``, ``auc_base``, ``auc``, ``gain``,
        ``gain_low``, ``gain_high``, ``p_gain``, ``gain_null_median``, ``gain_null_q95``,
        ``p_gain_null``, and the settings ``block_days``, ``block_rows``, ``n_boot``,
        ``n_surrogates``, ``confidence``.

    Raises
    ------
    ConfigError
        As :func:`walk_forward`, and for nothing added.

    Warns
    -----
    ResearchWarning
        Those of the real walk-forward run (too many columns for the events, NaN scores).

    Examples
    --------
    Three invented drawdowns and a column that rises just before each: adding it to a column of
    noise gains AUC, and the paired interval lies above zero:

    >>> import numpy as np, pandas as pd, warnings
    >>> days = pd.bdate_range("2031-01-06", periods=400)
    >>> steps = np.full(400, 0.001)
    >>> for peak in (120, 230, 330):  # five days down 5 %, five days back up
    ...     steps[peak + 1 : peak + 6], steps[peak + 6 : peak + 11] = -0.05, 0.05
    >>> wealth = pd.Series(np.exp(np.cumsum(steps)), index=days)
    >>> rng = np.random.default_rng(5)
    >>> stress = np.zeros(400)
    >>> for peak in (120, 230, 330):
    ...     stress[peak - 8 : peak + 1] = 1.0
    >>> features = pd.DataFrame({"noise": rng.normal(size=400), "stress": stress + 0.3 * rng.normal(size=400)},
    ...                         index=days)
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     table = gain_table(features, wealth, ["noise"], ["stress"], n_boot=200, block_days=40,
    ...                        n_surrogates=0, min_depth=0.1, horizon=10, n_folds=2, min_train=180)
    >>> row = table.loc["base+stress"]
    >>> bool(row["gain"] > 0.3 and row["gain_low"] > 0)
    True
    """
    if not added:
        raise ConfigError("gain_table: give at least one added column")
    if n_surrogates < 0:
        raise ConfigError(f"gain_table: n_surrogates must be 0 or more, got {n_surrogates}")
    sets = nested_feature_sets(base, added, base_name=_BASE)
    larger = [name for name in sets if name != _BASE]
    wf = walk_forward(features, wealth, sets, **walk_forward_options)
    calendar = pd.DatetimeIndex(wealth.index)
    spacing = np.diff(calendar.get_indexer(pd.DatetimeIndex(features.index)))
    block = block_rows(block_days, float(np.median(spacing)) if len(spacing) else 1.0)
    rng = np.random.default_rng(seed)
    null = np.full((n_surrogates, len(larger)), np.nan)
    for b in range(n_surrogates):
        fake = features.copy()
        for column in added:
            values = fake[column].to_numpy(dtype=float, copy=True)
            finite = np.isfinite(values)
            if finite.sum() >= 4:
                values[finite] = surrogate(values[finite][:, None], "iaaft", rng)[:, 0]
                fake[column] = values
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ResearchWarning)  # the real run has said it
            null[b] = _gains(walk_forward(fake, wealth, sets, **walk_forward_options), larger)
    rows = []
    for j, name in enumerate(larger):
        records, auc_base, auc = pooled_gain(wf, _BASE, name)
        boot = block_bootstrap(records, _gain, n_boot=n_boot, block=block, kind=bootstrap, seed=rng)
        low, high = boot.interval(confidence)
        gain = float(boot.estimate[0])
        finite_null = null[:, j][np.isfinite(null[:, j])]
        rows.append(
            pd.Series(
                {
                    "n_columns": len(sets[name]),
                    "n_scored": len(records),
                    "auc_base": auc_base,
                    "auc": auc,
                    "gain": gain,
                    "gain_low": float(low[0]),
                    "gain_high": float(high[0]),
                    "p_gain": float(boot.p_above(0.0)[0]),
                    "gain_null_median": float(np.median(finite_null)) if len(finite_null) else np.nan,
                    "gain_null_q95": float(np.quantile(finite_null, 0.95)) if len(finite_null) else np.nan,
                    "p_gain_null": (
                        float((1 + (finite_null >= gain).sum()) / (len(finite_null) + 1))
                        if len(finite_null) and np.isfinite(gain)
                        else np.nan
                    ),
                    "block_days": block_days,
                    "block_rows": block,
                    "n_boot": n_boot,
                    "n_surrogates": n_surrogates,
                    "confidence": confidence,
                },
                name=name,
            )
        )
    table = pd.DataFrame(rows)
    table.index.name = "model"
    return table
