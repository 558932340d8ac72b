"""The alert record: what fired, where, against which threshold, and from which inputs."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime
from typing import TYPE_CHECKING

from riskshape.types import RuleKind, Severity

if TYPE_CHECKING:  # annotations only: reading alerts from the archive loads no pandas
    import pandas as pd

__all__ = ["Firing", "Alert"]


@dataclass(frozen=True)
class Firing:
    """A rule that fired at one window (pure result of rule evaluation, no provenance yet).

    Attributes
    ----------
    rule : str
        Rule name from the configuration.
    summary : str
        Summary column the rule watches (e.g. ``h1_landscape_l1``).
    kind : str
        ``level``, ``quantile`` or ``zscore``.
    window_end : pandas.Timestamp
        Label of the window at which it fired.
    value : float
        The summary's value at that window.
    threshold : float
        The threshold in force at that window, in the summary's own units.
    severity : str
        ``info``, ``warning`` or ``critical``.

    Examples
    --------
    A level rule fires where the summary first rises above its threshold:

    >>> import pandas as pd
    >>> from riskshape.alerts.rules import evaluate_rule
    >>> from riskshape.config import RuleConfig
    >>> values = pd.Series([0.2, 0.9, 0.3], index=pd.bdate_range("2031-01-06", periods=3), name="h1_landscape_l1")
    >>> rule = RuleConfig(name="loops-high", summary="h1_landscape_l1", kind="level", threshold=0.5, min_history=0)
    >>> [firing] = evaluate_rule(values, rule)
    >>> firing.rule, str(firing.window_end.date()), firing.value, firing.threshold, firing.severity
    ('loops-high', '2031-01-07', 0.9, 0.5, 'warning')
    """

    rule: str
    summary: str
    kind: RuleKind
    window_end: pd.Timestamp
    value: float
    threshold: float
    severity: Severity


@dataclass(frozen=True)
class Alert:
    """A firing with its portfolio and provenance, as archived.

    Attributes
    ----------
    portfolio : str
    firing : Firing
    raised_at : datetime
        When it was raised (UTC, timezone-aware).
    config_hash : str
        :meth:`riskshape.Config.hash` of the configuration in force.
    inputs_hash : str
        Hash of the exact returns block of the window (``MonitorResult.window_inputs_hash``).
    package_version : str
        ``riskshape.__version__`` that computed it.
    explanation : str or None
        Canonical JSON of the alert's explanation (:mod:`riskshape.explain`), archived inside the
        alert's hash-chained record; None where none was made.

    Examples
    --------
    >>> from datetime import datetime, timezone
    >>> import pandas as pd
    >>> import riskshape
    >>> firing = Firing("loops-high", "h1_landscape_l1", "level", pd.Timestamp("2031-01-07"), 0.9, 0.5, "warning")
    >>> raised = datetime(2031, 1, 7, 18, tzinfo=timezone.utc)
    >>> alert = Alert("demo", firing, raised, riskshape.Config().hash(), "0" * 64, riskshape.__version__)
    >>> len(alert.config_hash), alert.explanation
    (64, None)
    >>> alert.firing = firing  # archived alerts never change
    Traceback (most recent call last):
    ...
    dataclasses.FrozenInstanceError: cannot assign to field 'firing'
    """

    portfolio: str
    firing: Firing
    raised_at: datetime
    config_hash: str
    inputs_hash: str
    package_version: str
    explanation: str | None = None
