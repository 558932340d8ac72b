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
  or given).

**One definition of a hit.** An alert at ``t`` *warns of* an event starting on day ``s`` when
``s - H <= t < s``: the alert comes within the span ``H`` (``horizon``) before the event's start.
Every alert and event measure rests on it:

* an alert is *true* when it warns of an event, *in event* when it falls inside one (start to
  trough), *unknown* when ``t + H`` passes the end of the data, else *false*;
* an event is *hit* when some alert warns of it; its **lead time** is ``s`` minus the first such
  alert, in trading days;
* **hit rate** = **recall** = hit events over the events the signal covers (it has a window end at
  or before ``s - H``): one number under two names;
* **precision** = true / (true + false); **F1** their harmonic mean; **false alarms per year** =
  false alerts per 252 trading days of signal.

So an alert that is true always hits an event, and a hit event always has a true alert: hit rate,
precision, recall and F1 cannot contradict each other.

* **crisis direction**: whether a summary warns when high or when low (:data:`CRISIS_DIRECTIONS`,
  :func:`crisis_direction`): the mean correlation, volatility, absorption ratio and turbulence
  rise in a crisis; the H0 lengths of the correlation distance (total persistence, landscape
  norms) fall as the single-linkage tree shrinks (Onnela et al. 2003, Phys. Rev. E 68:056110,
  from memory); the H0 entropy, which does not depend on the lengths' scale but on how even
  they are, rises as the sectors melt into one cluster; H1 summaries and the distances between
  consecutive diagrams are taken to rise (Gidea and Katz 2018). :func:`study_table` uses it unless told
  otherwise (``directions``).
* **NaN says why**: a measure that cannot be computed (one class of labels for the AUC, no
  covered event for the hit rate, no resolved alert for the precision) is NaN, and
  :meth:`EventStudy.nan_reasons` says why; :func:`event_study` and :func:`study_table` issue a
  :class:`riskshape.errors.ResearchWarning` with the reasons.
* **Kendall tau trend** (Gidea and Katz 2018, Physica A 491:820, who test the trend of the
  L^p norms' variance over the 250 days before a crash; from memory): ``scipy.stats.kendalltau``
  between time and the signal (``trend="level"``) or its rolling variance over
  ``variance_window`` windows (``trend="variance"``) at the window ends in ``[s - L, s)``; ``L``
  (``lookback``) is the trend's span only, never a hit's.
"""

from __future__ import annotations

import warnings
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
from riskshape.errors import ConfigError, ResearchWarning
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
    "crisis_direction",
    "ALERT_OUTCOMES",
    "CRISIS_DIRECTIONS",
]  # event_labels: from labels

ALERT_OUTCOMES: tuple[str, ...] = ("true", "false", "in_event", "unknown")
Alerts: TypeAlias = RuleConfig | Sequence[Firing] | pd.DatetimeIndex | None

CRISIS_DIRECTIONS: Mapping[str, Direction] = {
    # the baselines (riskshape.research.baselines) and the monitor's correlation level rise
    "mean_correlation": "above",
    "ew_volatility": "above",
    "absorption_ratio": "above",
    "turbulence": "above",
    # H0 of the correlation distance: the merge distances shrink as correlations rise
    "h0_total_persistence": "below",
    "h0_landscape_l1": "below",
    "h0_landscape_l2": "below",
    # H0 entropy is scale-free: it measures how even the merge distances are, and they even out as
    # the sectors melt into one cluster, so it rises (the demo scenario agrees)
    "h0_entropy": "above",
}
"""Whether each summary warns of a crisis when high (``above``) or low (``below``).

Columns not listed (H1 summaries, the diagram distances, anything else) are taken to rise;
a ``base_`` prefix (baselines computed with the features) is read through.
"""


def crisis_direction(column: str, overrides: Mapping[str, Direction] | None = None) -> Direction:
    """The direction in which a summary column warns of a crisis.

    Parameters
    ----------
    column : str
        A features or baselines column.
    overrides : mapping of str to {"above", "below"}, optional
        Directions that take precedence over :data:`CRISIS_DIRECTIONS`.

    Returns
    -------
    {"above", "below"}

    Examples
    --------
    >>> crisis_direction("h0_total_persistence"), crisis_direction("base_ew_volatility")
    ('below', 'above')
    >>> crisis_direction("h0_entropy", {"h0_entropy": "below"})
    'below'
    """
    if overrides and column in overrides:
        return overrides[column]
    name = column.removeprefix("base_")
    return CRISIS_DIRECTIONS.get(name, "above")


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
        One row per event: ``start``, ``trough``, ``depth``, ``covered``, ``hit`` (an alert in
        ``[s - H, s)``), ``first_alert`` (the first such alert), ``lead_days``, ``kendall_tau``,
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
        """Covered events with an alert in the ``H`` days before their start, over covered events."""
        return _ratio(int((self.per_event["hit"] & self.per_event["covered"]).sum()), self.n_covered)

    @property
    def precision(self) -> float:
        """True alerts over true and false alerts (NaN without any)."""
        return _ratio(self._count("true"), self._count("true") + self._count("false"))

    @property
    def recall(self) -> float:
        """The hit rate under its classification name (one definition of a hit)."""
        return self.hit_rate

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

    def nan_reasons(self) -> dict[str, str]:
        """Why each measure that is NaN is NaN (measure name -> reason); empty when none is.

        Returns
        -------
        dict of str to str
        """
        labels = self.labels[self.labels.notna() & np.isfinite(self.score)]
        n_pos, n_neg = int((labels == 1).sum()), int((labels == 0).sum())
        reasons: dict[str, str] = {}
        if np.isnan(self.auc):
            reasons["auc"] = (
                f"needs windows of both labels; got {n_pos} before an event and {n_neg} calm "
                "(too few events in the signal's span, or a shorter horizon)"
            )
        if self.score.dropna().nunique() <= 1:
            reasons["auc"] = "the signal is constant: it cannot rank windows"
        if np.isnan(self.hit_rate):
            reasons["hit_rate"] = (
                f"no event is covered: none of the {len(self.per_event)} events starts at least "
                f"{self.horizon} trading days after the signal's first window"
            )
            reasons["recall"] = reasons["hit_rate"]
        if np.isnan(self.precision):
            reasons["precision"] = (
                f"no alert could be scored: {len(self.alerts)} alerts, none of them true or false "
                "(inside an event, or too close to the end of the data)"
            )
        if np.isnan(self.f1) and ("precision" in reasons or "recall" in reasons):
            reasons["f1"] = "precision or recall is NaN"
        if np.isnan(self.mean_lead_days):
            reasons["mean_lead_days"] = "no event was hit"
        if np.isnan(self.effect_size):
            reasons["effect_size"] = (
                f"needs one window before an event and two calm ones with spread; got {n_pos} and {n_neg}"
            )
        return reasons

    def table(self) -> pd.Series:
        """The study in one row (for :func:`study_table`).

        Returns
        -------
        pandas.Series
            The measures (numbers); :meth:`nan_reasons` says why a NaN one is NaN.
        """
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
        ``H``, trading days: the span of a hit (an alert in ``[s - H, s)`` warns of an event
        starting on ``s``) and of the labels.
    lookback : int
        ``L``: how far before an event the trend is measured (the Kendall tau only).
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

    Warns
    -----
    ResearchWarning
        When a measure is NaN, with the reason (:meth:`EventStudy.nan_reasons`).

    Examples
    --------
    >>> import pandas as pd
    >>> from riskshape.research import events_from_periods
    >>> days = pd.bdate_range("2031-01-01", periods=40)
    >>> wealth = pd.Series(1.0, index=days)
    >>> events = events_from_periods(pd.DataFrame({"start": [days[30]], "end": [days[35]]}), wealth)
    >>> signal = pd.Series(range(40), index=days, name="x", dtype=float)
    >>> study = event_study(signal, events, horizon=5, alerts=days[[10, 27]])
    >>> study.hit_rate, study.precision, int(study.per_event["lead_days"].iloc[0])
    (1.0, 0.5, 3)
    """
    study = _event_study(
        signal,
        events,
        horizon=horizon,
        lookback=lookback,
        alerts=alerts,
        direction=direction,
        trend=trend,
        variance_window=variance_window,
        exclude_in_event=exclude_in_event,
        post_event_days=post_event_days,
    )
    _warn_nan({study.signal: study.nan_reasons()})
    return study


def _warn_nan(reasons: Mapping[str, Mapping[str, str]]) -> None:
    """One ResearchWarning listing, per signal, why its NaN measures are NaN (none when all are numbers)."""
    lines = [f"{signal}: {measure} is NaN: {why}" for signal, r in reasons.items() for measure, why in r.items()]
    if lines:
        warnings.warn("event study: " + "; ".join(lines), ResearchWarning, stacklevel=3)


def _event_study(
    signal: pd.Series,
    events: DrawdownEvents,
    *,
    horizon: int,
    lookback: int,
    alerts: Alerts,
    direction: Direction,
    trend: Literal["level", "variance"],
    variance_window: int,
    exclude_in_event: bool,
    post_event_days: int,
) -> EventStudy:
    """:func:`event_study` without the warning."""
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
        before = alert_pos[(alert_pos >= s - horizon) & (alert_pos < s)]  # the alerts that warn of it
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
        ``"above"`` or ``"below"`` per column, over the crisis directions of
        :data:`CRISIS_DIRECTIONS` (:func:`crisis_direction`: H0 persistence and landscape norms
        warn when low; correlation, volatility, H0 entropy and the rest when high).
    rules : sequence of RuleConfig
        Alert rules; a column without a rule gets :func:`default_rule` in its direction.
    horizon, lookback, trend, post_event_days
        See :func:`event_study`.

    Returns
    -------
    pandas.DataFrame
        One row per column (index ``signal``): ``direction``, the columns of :meth:`EventStudy.table`,
        and ``nan_reasons``, why its NaN measures are NaN ("" when none is).

    Warns
    -----
    ResearchWarning
        One, listing the NaN measures of every column and why.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> from riskshape.config import RuleConfig
    >>> from riskshape.research import events_from_periods
    >>> days = pd.bdate_range("2031-01-01", periods=40)
    >>> events = events_from_periods(
    ...     pd.DataFrame({"start": [days[30]], "end": [days[35]]}), pd.Series(1.0, index=days)
    ... )
    >>> ramp = np.r_[np.tile([0.0, 1.0], 12), np.arange(16.0)]  # rises before the event (day 30)
    >>> features = pd.DataFrame({"mean_correlation": ramp, "h0_total_persistence": -ramp}, index=days)
    >>> rules = [
    ...     RuleConfig(name="up", summary="mean_correlation", kind="level", threshold=3.5, min_history=0),
    ...     RuleConfig(
    ...         name="down", summary="h0_total_persistence", kind="level", threshold=-3.5,
    ...         direction="below", min_history=0,
    ...     ),
    ... ]
    >>> table = study_table(features, events, horizon=5, rules=rules)
    >>> table[["direction", "hit_rate", "precision", "mean_lead_days"]].to_dict("list")
    {'direction': ['above', 'below'], 'hit_rate': [1.0, 1.0], 'precision': [1.0, 1.0], 'mean_lead_days': [2.0, 2.0]}
    >>> table["auc"].round(2).tolist()  # day 25 (ramp 1) is labelled positive: it ties calm days
    [0.82, 0.82]
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
    reasons = {}
    for col in chosen:
        direction = crisis_direction(col, directions)
        study = _event_study(
            features[col].astype(float),
            events,
            horizon=horizon,
            lookback=lookback,
            alerts=by_summary.get(col),
            direction=direction,
            trend=trend,
            variance_window=20,
            exclude_in_event=True,
            post_event_days=post_event_days,
        )
        reasons[col] = study.nan_reasons()
        why = "; ".join(f"{measure}: {reason}" for measure, reason in reasons[col].items())
        rows.append(
            pd.concat(
                [
                    pd.Series({"direction": direction}, name=col),
                    study.table(),
                    pd.Series({"nan_reasons": why}, name=col),
                ]
            )
        )
    table = pd.DataFrame(rows)
    table.index.name = "signal"
    _warn_nan(reasons)
    return table
