"""An archived alert as known now: recomputed from the prices after every correction since it was raised.

:func:`riskshape.archive.reproduce_alert` answers "as known when it was raised": it reads the
prices as of the alert's run and must confirm the alert exactly. :func:`reproduce_alert_now`
answers "as known now": it reads the latest revision of every price from the portfolio's first
archived date up to the alert's window, recomputes the windows under the alert's configuration
with :func:`riskshape.monitor`, and re-decides the rule at the alert's window -- whether it would
still fire, with which value and threshold -- and checks the result against the archive's current
version of that window (what reads answer now, after the corrections superseded it).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import pandas as pd

from riskshape.alerts.rules import rule_state
from riskshape.archive import VALUE_ATOL, VALUE_RTOL
from riskshape.compute.monitor import monitor
from riskshape.config import ComputeConfig, Config
from riskshape.errors import ConfigError
from riskshape.store import Store

__all__ = ["AlertNow", "reproduce_alert_now"]


@dataclass(frozen=True)
class AlertNow:
    """An archived alert re-decided over the prices as known now.

    Attributes
    ----------
    alert_id : int
    still_fires : bool
        Whether the rule fires at the alert's window over the current prices.
    value, threshold : float
        The rule's value and threshold at that window now (NaN where undefined).
    archived_value, archived_threshold : float
        As the alert recorded them when it was raised.
    corrections : int
        Price revisions archived after the alert's run, on dates up to its window.
    archive_value : float
        The archive's current version of the window's summary (what the series reads answer now).
    matches_archive : bool
        Whether ``value`` equals ``archive_value`` (within float32-level tolerance): the archive's
        current series agrees with a fresh computation over the current prices.

    Examples
    --------
    >>> now = AlertNow(7, False, 0.41, 0.5, 0.62, 0.5, 1, 0.41, True)
    >>> now.changed, now.verdict
    (True, 'would no longer fire: value 0.41 against threshold 0.5 (was 0.62)')
    """

    alert_id: int
    still_fires: bool
    value: float
    threshold: float
    archived_value: float
    archived_threshold: float
    corrections: int
    archive_value: float
    matches_archive: bool

    @property
    def changed(self) -> bool:
        """Whether the value or threshold differs from what the alert recorded."""
        return not (_same(self.value, self.archived_value) and _same(self.threshold, self.archived_threshold))

    @property
    def verdict(self) -> str:
        """One line: whether it would still fire, with the value now (and the value it was raised with)."""
        fires = "would still fire" if self.still_fires else "would no longer fire"
        was = f" (was {self.archived_value:.6g})" if self.changed else " (unchanged)"
        return f"{fires}: value {self.value:.6g} against threshold {self.threshold:.6g}{was}"


def _same(a: float, b: float) -> bool:
    return a == b or (math.isnan(a) and math.isnan(b))


def _close(a: float, b: float) -> bool:
    return _same(a, b) or math.isclose(a, b, rel_tol=VALUE_RTOL, abs_tol=VALUE_ATOL)


def reproduce_alert_now(store: Store, alert_id: int, compute: ComputeConfig | None = None) -> AlertNow:
    """Re-decide an archived alert over the prices as known now (see the module notes).

    Parameters
    ----------
    store : Store
        The archive.
    alert_id : int
        The alert.
    compute : ComputeConfig, optional
        Where to compute (never changes a result); defaults to the run's own compute settings.

    Returns
    -------
    AlertNow

    Raises
    ------
    NotFoundError
        If the alert or its run is not archived.
    ConfigError
        If the run's configuration no longer reads, or lacks the alert's rule.
    DataError
        If the current prices do not give the alert's window.
    """
    alert = store.get_alert(alert_id).alert
    run = store.get_run(alert.run_id)
    config = Config.from_mapping(run.config, where=f"run {run.id} configuration")
    if compute is not None:
        config = config.replace(compute=compute)
    rule = next((r for r in config.alerts.rules if r.name == alert.rule), None)
    if rule is None:
        raise ConfigError(f"alert {alert_id}: rule {alert.rule!r} is not in run {run.id}'s configuration")
    same_config = [r for r in store.list_runs(alert.portfolio) if r.config_hash == alert.config_hash]
    first = min((r.first_date for r in same_config if r.first_date is not None), default=run.first_date)
    end = pd.Timestamp(alert.window_end)
    prices = store.read_prices(alert.portfolio, start=first, end=end.date(), assets=run.assets)
    features = monitor(prices, config).features
    state = rule_state(features[rule.summary].loc[:end], rule)
    archived = store.read_features(alert.portfolio, start=end, end=end, config_hash=alert.config_hash).frame
    archive_value = float(archived[rule.summary].iloc[0]) if len(archived) else float("nan")
    later = [
        c
        for c in store.list_corrections(alert.portfolio, start=first, end=end.date())
        if c.recorded_at > run.created_at
    ]
    return AlertNow(
        alert_id=alert.id,
        still_fires=bool(state.fired),
        value=float(state.value),
        threshold=float(state.threshold),
        archived_value=alert.value,
        archived_threshold=alert.threshold,
        corrections=len(later),
        archive_value=archive_value,
        matches_archive=_close(float(state.value), archive_value),
    )
