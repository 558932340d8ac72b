"""What the alert page shows besides its review history: the rule's recent history as a chart,
the explanation in asset names, and where the alert sits in the chain.
"""

from __future__ import annotations

from dataclasses import dataclass

import riskshape.outputs.palette as palette
from riskshape import RiskshapeError
from riskshape.alerts import trailing_levels
from riskshape.config import Config
from riskshape.explain import explanation_text
from riskshape.store import AlertRecord, Store
from riskshape_service.console import charts

__all__ = ["AlertContext", "alert_context", "HISTORY_WINDOWS"]

HISTORY_WINDOWS = 120
"""Windows of the rule's history drawn before (and including) the alert's window."""


@dataclass(frozen=True)
class AlertContext:
    """The chart of the rule's recent history, the explanation, and a note when either is missing."""

    chart: str | None
    chart_note: str
    explanation: str


def _config_of(store: Store, alert: AlertRecord) -> Config | None:
    try:
        run = store.get_run(alert.run_id)
        return Config.from_mapping(run.config, where=f"run {run.id} configuration")
    except RiskshapeError:
        return None


def alert_context(store: Store, alert: AlertRecord, others: tuple[AlertRecord, ...]) -> AlertContext:
    """The alert page's chart and explanation.

    Parameters
    ----------
    store : Store
    alert : AlertRecord
        The alert shown.
    others : tuple of AlertRecord
        Alerts of the same rule and portfolio (drawn on the chart with their severity's shape).

    Returns
    -------
    AlertContext
    """
    text = explanation_text(alert.explanation) if alert.explanation else "No explanation is archived with this alert."
    try:
        page = store.read_features(
            alert.portfolio, end=alert.window_end, columns=[alert.summary], config_hash=alert.config_hash
        )
    except RiskshapeError as err:
        return AlertContext(None, f"the rule's history could not be read: {err}", text)
    frame = page.frame.iloc[-HISTORY_WINDOWS:]
    if frame.empty:
        return AlertContext(None, "no archived summaries under this alert's configuration", text)
    config = _config_of(store, alert)
    rule = None if config is None else next((r for r in config.alerts.rules if r.name == alert.rule), None)
    series = frame[alert.summary]
    threshold = None if rule is None else [float(v) for v in trailing_levels(series, rule).threshold]
    positions = {stamp.date(): i for i, stamp in enumerate(frame.index)}
    marks = [
        charts.Mark(positions[a.window_end], a.severity, f"{a.severity} alert {a.id} on {a.window_end}")
        for a in (*others, alert)
        if a.window_end in positions and a.rule == alert.rule
    ]
    chart = charts.line_chart(
        [float(v) for v in series],
        title=f"{alert.summary} over the {len(frame)} windows up to the alert, rule {alert.rule}",
        first_label=frame.index[0].date().isoformat(),
        last_label=frame.index[-1].date().isoformat(),
        threshold=threshold,
        marks=marks,
        series_mark=palette.summary_mark(alert.summary),
    )
    note = "dash-dot line: the threshold in force" if threshold is not None else "threshold not available"
    return AlertContext(chart, note, text)
