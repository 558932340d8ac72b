"""The alert record: what fired, where, against which threshold, and from which inputs."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime

import pandas as pd

from riskshape.types import RuleKind, Severity

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
    """

    portfolio: str
    firing: Firing
    raised_at: datetime
    config_hash: str
    inputs_hash: str
    package_version: str
    explanation: str | None = None
