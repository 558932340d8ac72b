"""Summaries net of the market, and their changes: optional columns derived from the features table.

Every desk already watches the mean pairwise correlation and the volatility of the equal-weight
portfolio. These columns ask what the topological summaries (the ``h{k}_*`` columns) say beyond
those two numbers, and how fast they move:

* **net of the market** (``{summary}_net``): the residual of the summary at window ``t`` from an
  ordinary least-squares fit of the summary on ``[1, mean_correlation, ew_volatility]`` over the
  ``L`` windows *before* ``t`` (``L`` is ``net_of_market_window``): out of sample, so a break at
  ``t`` is not damped by its own leverage; and **its z-score** (``{summary}_net_z``), the
  residual over its prediction standard error (a studentized residual). See
  :mod:`riskshape.compute.trailing_fit` for the fit, the rows it uses and when it is NaN.
* **changes** (``{summary}_chg_{h}``): the value at ``t`` minus the value ``h`` trading days
  (``h / step`` windows) before. A difference, not a relative change: several summaries are
  zero or near zero in calm markets (H1 persistence without loops, the distances between
  consecutive diagrams), where a ratio is undefined or explodes; a difference stays in the
  summary's units, and a z-score rule on it makes it scale-free. The mean correlation gets change
  columns too, as the yardstick the topological changes are compared with.

Everything is causal: the columns at ``t`` use the features of windows up to ``t`` and the
volatility of windows up to ``t``, so a one-day update gives the same numbers as a batch. A value
that cannot be computed is NaN, and :meth:`DerivedColumns.nan_reasons` says why.

The equal-weight volatility comes from :func:`window_volatility`, the one place that says where it
comes from (today the baselines' :func:`riskshape.research.baselines.portfolio_volatility` on each
window's admitted block).
"""

from __future__ import annotations

import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from riskshape.compute.trailing_fit import describe_fit_codes, trailing_fits
from riskshape.config import Config, DerivedConfig
from riskshape.types import FloatArray, IntArray

__all__ = [
    "DerivedColumns",
    "derive_columns",
    "derived_column_names",
    "derived_source",
    "extend_columns",
    "history_needed",
    "net_of_market",
    "summary_changes",
    "topological_columns",
    "window_volatility",
]

_TOPOLOGICAL = re.compile(r"^h\d+_")
_DERIVED = re.compile(r"^(?P<source>.+?)_(?:(?P<net>net(?:_z)?)|chg_(?P<horizon>\d+))$")


@dataclass(frozen=True)
class DerivedColumns:
    """The derived columns of one features table, and why any of their values is NaN.

    Attributes
    ----------
    frame : pandas.DataFrame
        The new columns only, indexed like the features (empty of columns when none is asked for).
    codes : pandas.DataFrame
        Why each value is NaN, same shape: 0 it is not, 1 too little history, 2 too few complete
        windows in the trailing fit, 3 a value it rests on is missing, 4 an exact trailing fit.
    net_window : int
        The trailing fit's windows (``net_of_market_window``), for the reasons' wording.
    """

    frame: pd.DataFrame
    codes: pd.DataFrame
    net_window: int = 0

    def nan_reasons(self) -> dict[str, str]:
        """Why each column that holds NaN values holds them (column name -> reason); empty when none does.

        Returns
        -------
        dict of str to str
        """
        reasons = {}
        for column in self.codes.columns:
            code = self.codes[column].to_numpy(dtype=np.int64)
            horizon = _DERIVED.match(column)
            if horizon is not None and horizon["horizon"]:
                why = _describe_change_codes(code, int(horizon["horizon"]))
            else:
                why = describe_fit_codes(code, self.net_window)
            if why:
                reasons[column] = why
        return reasons

    def extended(self, tail: DerivedColumns) -> DerivedColumns:
        """These rows followed by the rows of ``tail`` after them (``tail`` computed over a later span).

        Parameters
        ----------
        tail : DerivedColumns
            Derived columns whose index ends after this one's; its rows up to this one's last are dropped.

        Returns
        -------
        DerivedColumns
        """
        later = tail.frame.index > self.frame.index[-1] if len(self.frame) else slice(None)
        return DerivedColumns(
            pd.concat([self.frame, tail.frame.loc[later]]),
            pd.concat([self.codes, tail.codes.loc[later]]),
            self.net_window,
        )


def _empty(index: pd.Index) -> DerivedColumns:
    return DerivedColumns(pd.DataFrame(index=index), pd.DataFrame(index=index))


def topological_columns(columns: Sequence[str]) -> list[str]:
    """The topological summary columns (``h{k}_*``, derived columns left out) of a features table, in table order.

    Parameters
    ----------
    columns : sequence of str
        Column names of ``MonitorResult.features``.

    Returns
    -------
    list of str

    Examples
    --------
    >>> topological_columns(["n_assets", "mean_correlation", "h0_entropy", "h1_landscape_l2", "h0_entropy_net"])
    ['h0_entropy', 'h1_landscape_l2']
    """
    return [c for c in columns if _TOPOLOGICAL.match(c) and not _DERIVED.match(c)]


def _change_sources(columns: Sequence[str]) -> list[str]:
    """The columns that get change columns: the topological summaries and the mean correlation."""
    return [c for c in columns if c == "mean_correlation" or c in topological_columns([c])]


def derived_column_names(columns: Sequence[str], settings: DerivedConfig) -> list[str]:
    """Names of the derived columns a features table with ``columns`` gets under ``settings``.

    Parameters
    ----------
    columns : sequence of str
        The features table's own columns (:func:`riskshape.compute.feature_columns`).
    settings : DerivedConfig
        The configuration's ``[derived]`` section.

    Returns
    -------
    list of str
        ``{s}_net`` and ``{s}_net_z`` per topological summary (with ``net_of_market``), then
        ``{s}_chg_{h}`` per summary and horizon; none clashes with a features column.

    Examples
    --------
    >>> from riskshape.config import DerivedConfig
    >>> settings = DerivedConfig(net_of_market=True, change_horizons=[20])
    >>> derived_column_names(["mean_correlation", "h0_entropy"], settings)
    ['h0_entropy_net', 'h0_entropy_net_z', 'mean_correlation_chg_20', 'h0_entropy_chg_20']
    """
    names: list[str] = []
    if settings.net_of_market:
        for c in topological_columns(columns):
            names += [f"{c}_net", f"{c}_net_z"]
    for c in _change_sources(columns):
        names += [f"{c}_chg_{h}" for h in settings.change_horizons]
    return names


def derived_source(column: str) -> tuple[str, str] | None:
    """The column a derived column is made from, and the setting that makes it; None for other names.

    Parameters
    ----------
    column : str
        A column name, e.g. ``h0_entropy_chg_60``.

    Returns
    -------
    tuple of (str, str) or None
        ``(source column, what to set)``, e.g. ``("h0_entropy", "add 60 to change_horizons")``.

    Examples
    --------
    >>> derived_source("h1_landscape_l2_net_z")
    ('h1_landscape_l2', 'set net_of_market = true')
    >>> derived_source("h0_entropy") is None
    True
    """
    match = _DERIVED.match(column)
    if match is None:
        return None
    if match["net"]:
        return match["source"], "set net_of_market = true"
    return match["source"], f"add {int(match['horizon'])} to change_horizons"


def net_of_market(
    summaries: pd.DataFrame, mean_correlation: pd.Series, volatility: pd.Series, window: int
) -> DerivedColumns:
    """Each summary net of the mean correlation and the equal-weight volatility, and its z-score.

    Parameters
    ----------
    summaries : pandas.DataFrame
        Summary columns indexed by window end.
    mean_correlation, volatility : pandas.Series
        The two regressors on the same index.
    window : int
        Windows of each trailing fit (``net_of_market_window``).

    Returns
    -------
    DerivedColumns
        ``{summary}_net`` and ``{summary}_net_z`` per column (see :func:`trailing_residuals`).

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> days = pd.bdate_range("2031-01-01", periods=30)
    >>> rng = np.random.default_rng(0)
    >>> corr, vol = pd.Series(rng.uniform(0.2, 0.6, 30), days), pd.Series(rng.uniform(0.1, 0.3, 30), days)
    >>> noise = np.r_[np.zeros(25), 0.5, np.zeros(4)]
    >>> h0 = pd.DataFrame({"h0_total_persistence": 4.0 - 3.0 * corr + 2.0 * vol + noise}, index=days)
    >>> net = net_of_market(h0, corr, vol, window=20)
    >>> (net.frame["h0_total_persistence_net"].iloc[24:26].abs() + 0.0).round(9).tolist()  # fits before 26 exact
    [0.0, 0.5]
    """
    design = np.column_stack(
        [np.ones(len(summaries)), mean_correlation.to_numpy(dtype=float), volatility.to_numpy(dtype=float)]
    )
    values = summaries.to_numpy(dtype=float)
    complete = np.isfinite(values) & np.isfinite(design).all(axis=1)[:, None]
    columns: dict[str, FloatArray] = {}
    codes: dict[str, IntArray] = {}
    # the columns complete on the same windows share one fit of the design (most of them: the
    # distances to the previous window lack the first window only, an H1 entropy the windows without loops)
    groups: dict[bytes, list[int]] = {}
    for j in range(values.shape[1]):
        groups.setdefault(np.packbits(complete[:, j]).tobytes(), []).append(j)
    for members in groups.values():
        residual, z, code = trailing_fits(values[:, members], design, complete[:, members[0]], window, None)
        for i, j in enumerate(members):
            name = summaries.columns[j]
            columns[f"{name}_net"], columns[f"{name}_net_z"] = residual[:, i], z[:, i]
            codes[name] = code[:, i]
    ordered = [c for name in summaries.columns for c in (f"{name}_net", f"{name}_net_z")]
    frame = pd.DataFrame({c: columns[c] for c in ordered}, index=summaries.index)
    kinds = {}
    for name in summaries.columns:
        kinds[f"{name}_net"] = np.where(codes[name] == 4, 0, codes[name])  # an exact fit still has its residual
        kinds[f"{name}_net_z"] = codes[name]
    return DerivedColumns(frame, pd.DataFrame(kinds, index=summaries.index, dtype=np.int8), window)


def summary_changes(summaries: pd.DataFrame, horizons: Sequence[int], step: int = 1) -> DerivedColumns:
    """Each summary's change over each horizon: its value minus its value ``h`` trading days before.

    Parameters
    ----------
    summaries : pandas.DataFrame
        Summary columns indexed by window end, one row per window (windows ``step`` days apart).
    horizons : sequence of int
        Trading days; each a multiple of ``step``.
    step : int
        Trading days between consecutive windows.

    Returns
    -------
    DerivedColumns
        ``{summary}_chg_{h}`` per column and horizon, NaN for the first ``h / step`` windows and
        where either value is missing.

    Examples
    --------
    >>> import pandas as pd
    >>> s = pd.DataFrame({"h1_entropy": [1.0, 2.0, 4.0, 7.0]}, index=pd.bdate_range("2031-01-01", periods=4))
    >>> summary_changes(s, [2]).frame["h1_entropy_chg_2"].tolist()
    [nan, nan, 3.0, 5.0]
    """
    columns: dict[str, FloatArray] = {}
    codes: dict[str, IntArray] = {}
    for name in summaries.columns:
        values = summaries[name].to_numpy(dtype=float)
        for h in horizons:
            lag = h // step
            change = np.full(len(values), np.nan)
            change[lag:] = values[lag:] - values[: len(values) - lag]
            code = np.where(np.isnan(change), 3, 0)
            code[:lag] = 1
            columns[f"{name}_chg_{h}"], codes[f"{name}_chg_{h}"] = change, code
    index = summaries.index
    return DerivedColumns(pd.DataFrame(columns, index=index), pd.DataFrame(codes, index=index, dtype=np.int8))


def _describe_change_codes(code: IntArray, horizon: int) -> str:
    """The reasons of :func:`summary_changes`' NaN values, with how many windows each covers."""
    counts = np.bincount(code, minlength=5)
    parts = [f"{counts[1]} window(s) before {horizon} trading days of history"] if counts[1] else []
    if counts[3]:
        parts.append(f"{counts[3]} window(s) where the summary is missing at the window or {horizon} days before")
    return "; ".join(parts)


def derive_columns(
    features: pd.DataFrame, volatility: pd.Series, settings: DerivedConfig, step: int = 1
) -> DerivedColumns:
    """Every derived column ``settings`` asks for, from a features table and each window's volatility.

    Parameters
    ----------
    features : pandas.DataFrame
        ``MonitorResult``'s summaries: ``mean_correlation`` and the ``h{k}_*`` columns, by window end.
    volatility : pandas.Series
        The equal-weight volatility of each window (:func:`window_volatility`), same index.
    settings : DerivedConfig
        The ``[derived]`` section.
    step : int
        Trading days between windows (the configuration's ``step``).

    Returns
    -------
    DerivedColumns
        The columns of :func:`derived_column_names`, in that order.

    Examples
    --------
    >>> import pandas as pd
    >>> from riskshape.config import DerivedConfig
    >>> days = pd.bdate_range("2031-01-01", periods=3)
    >>> f = pd.DataFrame({"mean_correlation": [0.2, 0.3, 0.5], "h0_entropy": [2.0, 1.5, 1.0]}, index=days)
    >>> out = derive_columns(f, pd.Series(0.1, index=days), DerivedConfig(change_horizons=[1]))
    >>> out.frame["h0_entropy_chg_1"].tolist(), out.nan_reasons()["h0_entropy_chg_1"]
    ([nan, -0.5, -0.5], '1 window(s) before 1 trading days of history')
    """
    parts: list[DerivedColumns] = []
    if settings.net_of_market:
        topo = features[topological_columns(list(features.columns))]
        parts.append(net_of_market(topo, features["mean_correlation"], volatility, settings.net_of_market_window))
    if settings.change_horizons:
        parts.append(summary_changes(features[_change_sources(list(features.columns))], settings.change_horizons, step))
    if not parts:
        return _empty(features.index)
    frame = pd.concat([part.frame for part in parts], axis=1)
    codes = pd.concat([part.codes for part in parts], axis=1)
    return DerivedColumns(frame, codes, settings.net_of_market_window if settings.net_of_market else 0)


def history_needed(settings: DerivedConfig, step: int = 1) -> int:
    """Windows before a window that its derived columns read: the trailing fit's, or the longest change's.

    Parameters
    ----------
    settings : DerivedConfig
        The ``[derived]`` section.
    step : int
        Trading days between windows.

    Returns
    -------
    int
        0 when no derived column is asked for.

    Examples
    --------
    >>> from riskshape.config import DerivedConfig
    >>> history_needed(DerivedConfig(net_of_market=True, change_horizons=[20, 300]), step=1)
    300
    """
    fit = settings.net_of_market_window if settings.net_of_market else 0
    return max([fit, *(h // step for h in settings.change_horizons)])


def extend_columns(
    held: DerivedColumns,
    features: pd.DataFrame,
    volatility_of: Callable[[pd.DatetimeIndex], pd.Series],
    settings: DerivedConfig,
    step: int = 1,
) -> DerivedColumns:
    """``held`` (the derived columns of the first windows of ``features``) and those of the windows after them.

    Computes only the new windows, from the :func:`history_needed` windows before them: the numbers
    equal :func:`derive_columns` over the whole table (a one-day update costs one window).

    Parameters
    ----------
    held : DerivedColumns
        The derived columns of ``features``' first rows.
    features : pandas.DataFrame
        Every window's summaries (as :func:`derive_columns` takes them).
    volatility_of : callable
        Given window ends, their equal-weight volatility (:func:`window_volatility`).
    settings : DerivedConfig
    step : int

    Returns
    -------
    DerivedColumns
        Equal to ``derive_columns(features, volatility_of(features.index), settings, step)``.
    """
    start = max(0, len(held.frame) - history_needed(settings, step))
    span = features.iloc[start:]
    ends = pd.DatetimeIndex(span.index)
    return held.extended(derive_columns(span, volatility_of(ends), settings, step))


def window_volatility(returns: pd.DataFrame, window_ends: pd.DatetimeIndex, config: Config) -> pd.Series:
    """The equal-weight portfolio's volatility of each window: the one source of the net-of-market regressor.

    Today it is :func:`riskshape.research.baselines.portfolio_volatility` on each window's admitted
    block (:func:`riskshape.compute.windows.select_window`), as the baselines compute it.

    Parameters
    ----------
    returns : pandas.DataFrame
        ``MonitorResult.returns``.
    window_ends : pandas.DatetimeIndex
        ``MonitorResult.window_ends``.
    config : Config
        Uses ``window`` and ``min_coverage``.

    Returns
    -------
    pandas.Series
        ``ew_volatility`` indexed by window end (annualised, as the baselines give it).

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> days = pd.bdate_range("2031-01-01", periods=6)
    >>> r = pd.DataFrame({"XQ01": [0.01, -0.01, 0.02, 0.0, 0.01, -0.02], "XQ02": 0.0}, index=days)
    >>> vol = window_volatility(r, days[4:], Config(window=5))
    >>> vol.index.equals(days[4:]), bool(vol.iloc[0] > 0)
    (True, True)
    """
    # lazy: the research wing loads scipy, which the monitor does not need unless asked for these columns
    from riskshape.compute.windows import select_window
    from riskshape.research.baselines import portfolio_volatility

    values = returns.to_numpy(dtype=float)
    rows = returns.index.get_indexer(window_ends)
    vols = [portfolio_volatility(select_window(values, int(r), config.window, config.min_coverage).block) for r in rows]
    return pd.Series(vols, index=window_ends, name="ew_volatility", dtype=float)
