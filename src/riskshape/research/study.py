"""Event study: whether a summary (or an alert rule on it) moves before stress events.

Time is counted in trading days of the events' calendar (``DrawdownEvents.calendar``); a
signal is indexed by window ends, which are days of that calendar. For an event starting on day
``s``, with horizon ``H`` and trend lookback ``L``:

* **label** of window end ``t``: 1 when an event starts in ``(t, t + H]``, else 0; unknown (left
  out) when ``t + H`` passes the end of the data without an event, and, by default, when ``t``
  lies inside an event (from its start to its trough, plus ``post_event_days``: neither a
  warning nor calm; dropping the crisis and post-crisis periods is common practice in
  early-warning studies, e.g. Bussiere and Fratzscher 2006, J. Int. Money and Finance 25:953,
  from memory; with rolling windows, ``post_event_days = window`` also drops every window that
  still holds a crisis day);
* **ROC AUC** of the signal against those labels (``sklearn.metrics.roc_auc_score``); 0.5 is
  no information; with ``direction="below"`` the signal is negated first;
* **effect size**: Glass's delta (Glass 1976), the (oriented) mean over positive windows minus
  the mean over negative windows, over the standard deviation (ddof = 1) of the negatives;
  overlapping windows are autocorrelated, so it is a size, not a test;
* **alerts** are window ends (from an alert rule, :func:`riskshape.alerts.rules.evaluate_rule`,
  or given). An alert at ``t`` is *true* when an event starts in ``(t, t + H]``, *in event*
  inside an event, *unknown* when ``t + H`` passes the end of the data, else *false*;
  **precision** = true / (true + false); **recall** = events with an alert in ``[s - H, s)``
  over the events the signal covers (it has a window end at or before ``s - H``); **F1** their
  harmonic mean; **false alarms per year** = false alerts per 252 trading days of signal;
* **hit** and **lead time**: the first alert in ``[s - L, s)`` and ``s`` minus its day, in
  trading days; **hit rate** = hit events over covered events;
* **Kendall tau trend** (Gidea and Katz 2018, Physica A 491:820, who test the trend of the
  L^p norms' variance over the 250 days before a crash; from memory): ``scipy.stats.kendalltau``
  between time and the signal (``trend="level"``) or its rolling variance over
  ``variance_window`` windows (``trend="variance"``) at the window ends in ``[s - L, s)``.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Literal, TypeAlias

import numpy as np
import pandas as pd
from scipy.stats import kendalltau
from sklearn.metrics import roc_auc_score

from riskshape.alerts.model import Firing
from riskshape.alerts.rules import evaluate_rule
from riskshape.config import RuleConfig
from riskshape.errors import ConfigError
from riskshape.research.baselines import TRADING_DAYS_PER_YEAR
from riskshape.research.events import DrawdownEvents
from riskshape.research.labels import event_labels, event_positions, positions
from riskshape.types import Direction, Positions

__all__ = [
    "EventStudy",
    "event_labels",
    "event_study",
    "study_table",
    "default_rule",
    "ALERT_OUTCOMES",
]  # event_labels: from labels

ALERT_OUTCOMES: tuple[str, ...] = ("true", "false", "in_event", "unknown")
Alerts: TypeAlias = RuleConfig | Sequence[Firing] | pd.DatetimeIndex | None


@dataclass(frozen=True)
class EventStudy:
    """Results of one event study of one signal.

    Attributes
    ----------
    signal : str
        Name of the signal studied.
    horizon, lookback : int
        ``H`` and ``L`` in trading days.
    per_event : pandas.DataFrame
        One row per event: ``start``, ``trough``, ``depth``, ``covered``, ``hit``,
        ``first_alert``, ``lead_days``, ``warned`` (alert in ``[s - H, s)``), ``kendall_tau``,
        ``kendall_p``, ``trend_points``.
    alerts : pandas.DataFrame
        One row per alert: ``window_end``, ``outcome`` (one of :data:`ALERT_OUTCOMES`).
    labels : pandas.Series
        The label of each window end (1.0, 0.0, NaN = left out).
    auc : float
        ROC AUC of the (oriented) signal; NaN when one class is absent.
    years : float
        Trading years spanned by the signal.
    score : pandas.Series
        The signal, negated when ``direction`` is ``below`` (so high values warn).
    direction : str
        ``above`` or ``below``.
    """

    signal: str
    horizon: int
    lookback: int
    per_event: pd.DataFrame
    alerts: pd.DataFrame
    labels: pd.Series
    auc: float
    years: float
    score: pd.Series
    direction: Direction

    def _count(self, outcome: str) -> int:
        return int((self.alerts["outcome"] == outcome).sum())

    @property
    def n_covered(self) -> int:
        """Events the signal had the chance to warn of."""
        return int(self.per_event["covered"].sum())

    @property
    def hit_rate(self) -> float:
        """Covered events with an alert in the ``L`` days before their start, over covered events."""
        return _ratio(int((self.per_event["hit"] & self.per_event["covered"]).sum()), self.n_covered)

    @property
    def precision(self) -> float:
        """True alerts over true and false alerts (NaN without any)."""
        return _ratio(self._count("true"), self._count("true") + self._count("false"))

    @property
    def recall(self) -> float:
        """Covered events with an alert in the ``H`` days before their start, over covered events."""
        return _ratio(int((self.per_event["warned"] & self.per_event["covered"]).sum()), self.n_covered)

    @property
    def f1(self) -> float:
        """Harmonic mean of precision and recall (0 when both are 0, NaN when either is NaN)."""
        p, r = self.precision, self.recall
        if np.isnan(p) or np.isnan(r):
            return float("nan")
        return 0.0 if p + r == 0 else 2.0 * p * r / (p + r)

    @property
    def false_alarms_per_year(self) -> float:
        """False alerts per 252 trading days of signal."""
        return _ratio(self._count("false"), self.years)

    @property
    def mean_lead_days(self) -> float:
        """Mean lead time (trading days) of the hit events."""
        leads = self.per_event.loc[self.per_event["hit"], "lead_days"]
        return float(leads.mean()) if len(leads) else float("nan")

    @property
    def effect_size(self) -> float:
        """Glass's delta of the oriented signal, positive windows against negative ones."""
        ok = np.isfinite(self.score) & self.labels.notna()
        pos = self.score[ok & (self.labels == 1)]
        neg = self.score[ok & (self.labels == 0)]
        if len(pos) == 0 or len(neg) < 2:
            return float("nan")
        return _ratio(pos.mean() - neg.mean(), neg.std(ddof=1))

    @property
    def mean_kendall_tau(self) -> float:
        """Mean Kendall tau over the events with a trend computed."""
        return (
            float(self.per_event["kendall_tau"].mean()) if self.per_event["kendall_tau"].notna().any() else float("nan")
        )

    def table(self) -> pd.Series:
        """The study in one row (for :func:`study_table`)."""
        labels = self.labels.dropna()
        return pd.Series(
            {
                "events": len(self.per_event),
                "covered": self.n_covered,
                "alerts": len(self.alerts),
                "hit_rate": self.hit_rate,
                "mean_lead_days": self.mean_lead_days,
                "false_alarms_per_year": self.false_alarms_per_year,
                "precision": self.precision,
                "recall": self.recall,
                "f1": self.f1,
                "auc": self.auc,
                "effect_size": self.effect_size,
                "n_positive": int((labels == 1).sum()),
                "n_negative": int((labels == 0).sum()),
                "mean_kendall_tau": self.mean_kendall_tau,
            },
            name=self.signal,
        )


def _ratio(num: float, den: float) -> float:
    return float(num) / float(den) if den else float("nan")


def default_rule(summary: str, direction: Direction = "above") -> RuleConfig:
    """The rule :func:`study_table` uses when none is given: the 95 % (or 5 %) trailing quantile.

    Lookback 250 windows, at least 60 windows of history (common practice for a one-year
    trailing band); ``clear`` at the 80 % (20 %) quantile so one episode gives one alert.

    Examples
    --------
    >>> rule = default_rule("h1_landscape_l1", "below")
    >>> rule.name, rule.kind, rule.threshold, rule.clear
    ('h1_landscape_l1.q05', 'quantile', 0.05, 0.2)
    """
    above = direction == "above"
    return RuleConfig(
        name=f"{summary}.{'q95' if above else 'q05'}",
        summary=summary,
        kind="quantile",
        threshold=0.95 if above else 0.05,
        clear=0.80 if above else 0.20,
        direction=direction,
        lookback=250,
        min_history=60,
    )


def _alert_dates(signal: pd.Series, alerts: Alerts, direction: Direction) -> pd.DatetimeIndex:
    if alerts is None:
        alerts = default_rule(str(signal.name), direction)
    if isinstance(alerts, RuleConfig):
        firings = evaluate_rule(signal, alerts)
        return pd.DatetimeIndex([f.window_end for f in firings])
    if isinstance(alerts, pd.DatetimeIndex):
        return alerts
    return pd.DatetimeIndex([f.window_end for f in alerts])


def event_study(
    signal: pd.Series,
    events: DrawdownEvents,
    *,
    horizon: int = 20,
    lookback: int = 120,
    alerts: Alerts = None,
    direction: Direction = "above",
    trend: Literal["level", "variance"] = "level",
    variance_window: int = 20,
    exclude_in_event: bool = True,
    post_event_days: int = 0,
) -> EventStudy:
    """Event study of one signal (and alerts on it) against drawdown events.

    Parameters
    ----------
    signal : pandas.Series
        A summary column indexed by window end (e.g. ``result.features["h0_total_persistence"]``).
    events : DrawdownEvents
        From :func:`riskshape.research.events.portfolio_drawdown_events` on the same prices.
    horizon : int
        ``H``: the warning horizon, trading days.
    lookback : int
        ``L``: how far before an event alerts count as hits and the trend is measured.
    alerts : RuleConfig, sequence of Firing, DatetimeIndex, optional
        A rule (evaluated causally on ``signal``), firings, or alert dates; default
        :func:`default_rule` in ``direction``.
    direction : {"above", "below"}
        Whether high (``above``) or low values are the warning; orients the AUC and the default rule.
    trend : {"level", "variance"}
        What the Kendall tau is computed on (see the module notes).
    variance_window : int
        Windows of the rolling variance for ``trend="variance"``.
    exclude_in_event, post_event_days
        See :func:`event_labels`.

    Returns
    -------
    EventStudy

    Examples
    --------
    The event of :func:`event_labels`' example (start day 2, trough day 4), a signal and two
    alerts. By hand: the labelled days are 0 and 1 (positive) and 5 (negative), and the signal
    ranks both positives above the negative (AUC 1); the alert on day 1 precedes the start by
    one day (true, a hit with a lead of 1), the one on day 5 is false:

    >>> import pandas as pd
    >>> from riskshape.research.events import drawdown_events
    >>> days = pd.bdate_range("2031-01-06", periods=8)
    >>> wealth = pd.Series([1.0, 1.02, 1.03, 0.95, 0.88, 0.92, 1.05, 1.06], index=days)
    >>> events = drawdown_events(wealth, min_depth=0.1)
    >>> signal = pd.Series([0.5, 0.9, 1.2, 1.1, 0.7, 0.4, 0.3, 0.3], index=days, name="mean_correlation")
    >>> study = event_study(signal, events, horizon=2, lookback=3, alerts=days[[1, 5]])
    >>> study.auc, study.alerts["outcome"].tolist()
    (1.0, ['true', 'false'])
    >>> study.hit_rate, study.precision, study.recall, study.mean_lead_days
    (1.0, 0.5, 1.0, 1.0)
    """
    if lookback < 1:
        raise ConfigError(f"lookback must be at least 1 trading day, got {lookback}")
    name = str(signal.name)
    values = signal.astype(float)
    cal = events.calendar
    pos = positions(pd.DatetimeIndex(values.index), cal, f"signal '{name}'")
    labels = event_labels(
        values.index, events, horizon, exclude_in_event=exclude_in_event, post_event_days=post_event_days
    )
    score = values if direction == "above" else -values
    usable = labels.notna() & np.isfinite(score)
    y = labels[usable].to_numpy()
    auc = float(roc_auc_score(y, score[usable].to_numpy())) if len(np.unique(y)) == 2 else float("nan")

    alert_dates = _alert_dates(values, alerts, direction)
    alert_pos = positions(alert_dates, cal, f"alerts on '{name}'")
    starts, troughs = event_positions(events)
    outcomes = _alert_outcomes(alert_pos, starts, troughs, horizon, len(cal))
    alert_table = pd.DataFrame({"window_end": alert_dates, "outcome": outcomes})

    trend_series = values if trend == "level" else values.rolling(variance_window, min_periods=variance_window).var()
    rows = []
    first_signal = pos.min() if len(pos) else len(cal)
    for k, (s, trough) in enumerate(zip(starts, troughs)):
        before = alert_pos[(alert_pos >= s - lookback) & (alert_pos < s)]
        in_window = (pos >= s - lookback) & (pos < s)
        points = trend_series.iloc[np.flatnonzero(in_window)].dropna()
        tau, p_value = (np.nan, np.nan)
        if len(points) >= 3 and points.nunique() > 1:
            result = kendalltau(np.arange(len(points)), points.to_numpy())
            tau, p_value = float(result.statistic), float(result.pvalue)
        rows.append(
            {
                "start": cal[s],
                "trough": cal[trough],
                "depth": float(events.table["depth"].iloc[k]),
                "covered": bool(first_signal <= s - horizon),
                "hit": bool(len(before)),
                "first_alert": cal[before.min()] if len(before) else pd.NaT,
                "lead_days": float(s - before.min()) if len(before) else np.nan,
                "warned": bool(((alert_pos >= s - horizon) & (alert_pos < s)).any()),
                "kendall_tau": tau,
                "kendall_p": p_value,
                "trend_points": int(len(points)),
            }
        )
    per_event = pd.DataFrame(rows, columns=list(_PER_EVENT_COLUMNS))
    years = float(pos.max() - pos.min() + 1) / TRADING_DAYS_PER_YEAR if len(pos) else float("nan")
    return EventStudy(
        signal=name,
        horizon=horizon,
        lookback=lookback,
        per_event=per_event,
        alerts=alert_table,
        labels=labels,
        auc=auc,
        years=years,
        score=score.rename(name),
        direction=direction,
    )


_PER_EVENT_COLUMNS = (
    "start",
    "trough",
    "depth",
    "covered",
    "hit",
    "first_alert",
    "lead_days",
    "warned",
    "kendall_tau",
    "kendall_p",
    "trend_points",
)


def _alert_outcomes(
    alert_pos: Positions, starts: Positions, troughs: Positions, horizon: int, n_days: int
) -> list[str]:
    outcomes = []
    for a in alert_pos:
        ahead = starts - a
        if ((a >= starts) & (a <= troughs)).any():
            outcomes.append("in_event")
        elif ((ahead > 0) & (ahead <= horizon)).any():
            outcomes.append("true")
        elif a + horizon > n_days - 1:
            outcomes.append("unknown")
        else:
            outcomes.append("false")
    return outcomes


def study_table(
    features: pd.DataFrame,
    events: DrawdownEvents,
    *,
    columns: Sequence[str] | None = None,
    directions: Mapping[str, Direction] | None = None,
    rules: Sequence[RuleConfig] = (),
    horizon: int = 20,
    lookback: int = 120,
    trend: Literal["level", "variance"] = "level",
    post_event_days: int = 0,
) -> pd.DataFrame:
    """The event study of many summary columns, one row each.

    Parameters
    ----------
    features : pandas.DataFrame
        Summaries indexed by window end (monitor features, baselines, or both joined).
    events : DrawdownEvents
    columns : sequence of str, optional
        Columns to study; default every numeric column except ``n_assets``, ``n_left_out``.
    directions : mapping, optional
        ``"above"`` or ``"below"`` per column (default ``"above"``).
    rules : sequence of RuleConfig
        Alert rules; a column without a rule gets :func:`default_rule` in its direction.
    horizon, lookback, trend, post_event_days
        See :func:`event_study`.

    Returns
    -------
    pandas.DataFrame
        One row per column (index ``signal``), the columns of :meth:`EventStudy.table` plus ``direction``.
    """
    chosen = (
        list(columns)
        if columns is not None
        else [
            c
            for c in features.columns
            if c not in ("n_assets", "n_left_out") and pd.api.types.is_numeric_dtype(features[c])
        ]
    )
    missing = [c for c in chosen if c not in features.columns]
    if missing:
        raise ConfigError(
            f"study_table: columns {missing} are not in the features; available: {list(features.columns)}"
        )
    by_summary = {rule.summary: rule for rule in rules}
    rows = []
    for col in chosen:
        direction = (directions or {}).get(col, "above")
        study = event_study(
            features[col].astype(float),
            events,
            horizon=horizon,
            lookback=lookback,
            alerts=by_summary.get(col),
            direction=direction,
            trend=trend,
            post_event_days=post_event_days,
        )
        rows.append(pd.concat([pd.Series({"direction": direction}, name=col), study.table()]))
    table = pd.DataFrame(rows)
    table.index.name = "signal"
    return table
