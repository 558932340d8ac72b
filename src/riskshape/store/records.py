"""The typed records the archive returns (frozen dataclasses; no dicts of strings).

Dates are :class:`datetime.date` (window ends and price dates are whole days); timestamps are
timezone-aware UTC :class:`datetime.datetime`.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date, datetime
from typing import TYPE_CHECKING

from riskshape.alerts.model import Alert, Firing
from riskshape.types import Float32Array, RuleKind, Severity

if TYPE_CHECKING:
    import pandas as pd

__all__ = [
    "GENESIS_HASH",
    "REVIEW_ACTIONS",
    "Portfolio",
    "RunManifest",
    "Run",
    "PriceWrite",
    "PriceCorrection",
    "WriteCount",
    "FeaturesPage",
    "Diagram",
    "AlertRecord",
    "ReviewRecord",
    "EventRecord",
    "AlertDetail",
    "AlertPage",
    "AlertAppend",
    "ApiKey",
    "NewApiKey",
    "Head",
    "BadRecord",
    "VerifyReport",
]

GENESIS_HASH = "0" * 64
"""``prev_hash`` of the first record of the ledger."""

REVIEW_ACTIONS = ("acknowledge", "dismiss", "escalate", "close")
"""What a reviewer may do with an alert: take note of it, dismiss it as noise, escalate it, or close it
(which actions apply to an alert's current status is the business of :mod:`riskshape.reviews`)."""


@dataclass(frozen=True)
class Portfolio:
    """A named portfolio (its prices, runs, features and alerts hang off it)."""

    id: int
    name: str
    created_at: datetime


@dataclass(frozen=True)
class RunManifest:
    """What a run was computed from, as given to :meth:`Store.create_run`.

    Attributes
    ----------
    config : dict
        ``Config.to_mapping()`` of the configuration in force (stored as JSON).
    config_hash : str
        ``Config.hash()``.
    input_hash : str
        ``MonitorResult.input_hash``: SHA-256 of the validated prices the run saw.
    package_version : str
        ``riskshape.__version__`` that computed the run.
    source : str or None
        Where the prices came from (a file name), for people reading the manifest.
    """

    config: dict[str, object]
    config_hash: str
    input_hash: str
    package_version: str
    source: str | None = None


@dataclass(frozen=True)
class Run:
    """An archived run: its manifest and the extent of the prices it saw.

    ``prices_through_id`` is the highest price row of the portfolio when the run was recorded:
    reading prices "as of the run" keeps only rows up to it, so later corrections do not leak
    into a reproduction.
    """

    id: int
    portfolio: str
    created_at: datetime
    config: dict[str, object]
    config_hash: str
    input_hash: str
    package_version: str
    source: str | None
    first_date: date | None
    last_date: date | None
    n_dates: int
    assets: tuple[str, ...]
    prices_through_id: int
    prices_added: int
    corrections_added: int


@dataclass(frozen=True)
class PriceWrite:
    """What an append of prices stored: first observations and corrections (new revisions)."""

    added: int
    corrections: int
    unchanged: int


@dataclass(frozen=True)
class PriceCorrection:
    """A revised price: the revision that replaced an earlier one (both stay archived).

    ``old_price`` / ``new_price`` are NaN where the price was (or became) missing.
    """

    date: date
    asset: str
    revision: int
    old_price: float
    new_price: float
    recorded_at: datetime


@dataclass(frozen=True)
class WriteCount:
    """Outcome of an idempotent write: rows added, rows already there (identical), rows already there
    with different content (kept as archived, not overwritten).
    """

    added: int
    existing: int
    differing: int


@dataclass(frozen=True)
class FeaturesPage:
    """One page of the features series.

    ``frame`` is indexed by ``window_end`` (DatetimeIndex); ``total`` counts every window matching the
    query, so ``offset + len(frame) < total`` means there is a next page.
    """

    frame: pd.DataFrame
    total: int
    offset: int
    config_hash: str | None


@dataclass(frozen=True)
class Diagram:
    """A persistence diagram of one window and dimension, as archived (float32 bars).

    ``bars`` has shape (n, 2): birth, death (finite bars only).
    """

    portfolio: str
    window_end: date
    dim: int
    config_hash: str
    run_id: int
    bars: Float32Array


@dataclass(frozen=True)
class AlertRecord:
    """An archived alert with its provenance and its place in the ledger."""

    id: int
    seq: int
    prev_hash: str
    entry_hash: str
    portfolio_id: int
    portfolio: str
    rule: str
    summary: str
    kind: RuleKind
    window_end: date
    value: float
    threshold: float
    severity: Severity
    raised_at: datetime
    config_hash: str
    inputs_hash: str
    package_version: str
    run_id: int
    explanation: str | None

    def to_alert(self) -> Alert:
        """The :class:`riskshape.alerts.model.Alert` this record archives."""
        import pandas as pd  # only here: reading records loads no pandas

        firing = Firing(
            rule=self.rule,
            summary=self.summary,
            kind=self.kind,
            window_end=pd.Timestamp(self.window_end),
            value=self.value,
            threshold=self.threshold,
            severity=self.severity,
        )
        return Alert(
            portfolio=self.portfolio,
            firing=firing,
            raised_at=self.raised_at,
            config_hash=self.config_hash,
            inputs_hash=self.inputs_hash,
            package_version=self.package_version,
            explanation=self.explanation,
        )


@dataclass(frozen=True)
class ReviewRecord:
    """A review of an alert (a new record; the alert itself never changes)."""

    id: int
    seq: int
    prev_hash: str
    entry_hash: str
    alert_id: int
    action: str
    reviewer: str
    comment: str
    created_at: datetime


@dataclass(frozen=True)
class EventRecord:
    """A chained record that is neither an alert nor a review (see :mod:`riskshape.store.events`).

    ``payload`` is the canonical JSON text that the hash covers; :attr:`data` reads it.

    Examples
    --------
    >>> from datetime import datetime, timezone
    >>> from riskshape.store.canonical import entry_hash
    >>> fields = dict(
    ...     id=1,
    ...     seq=5,
    ...     prev_hash="0" * 64,
    ...     kind="day_closed",
    ...     portfolio_id=1,
    ...     portfolio="demo",
    ...     subject="2031-03-03",
    ...     payload='{"day":"2031-03-03","rule":"cut-off"}',
    ...     actor="ops-1",
    ...     recorded_at=datetime(2031, 3, 3, 22, tzinfo=timezone.utc),
    ... )
    >>> record = EventRecord(entry_hash=entry_hash("events", fields), **fields)
    >>> record.data
    {'day': '2031-03-03', 'rule': 'cut-off'}
    """

    id: int
    seq: int
    prev_hash: str
    entry_hash: str
    kind: str
    portfolio_id: int | None
    portfolio: str | None
    subject: str | None
    payload: str
    actor: str | None
    recorded_at: datetime

    @property
    def data(self) -> dict[str, object]:
        """The payload as a mapping."""
        import json

        loaded: dict[str, object] = json.loads(self.payload)
        return loaded


@dataclass(frozen=True)
class AlertDetail:
    """One alert with its reviews, oldest first."""

    alert: AlertRecord
    reviews: tuple[ReviewRecord, ...]


@dataclass(frozen=True)
class AlertPage:
    """One page of alerts (oldest window first) and the number matching the filters."""

    items: tuple[AlertRecord, ...]
    total: int
    offset: int


@dataclass(frozen=True)
class AlertAppend:
    """Outcome of :meth:`Store.append_alerts`: the alerts added, and how many were already archived."""

    added: tuple[AlertRecord, ...]
    existing: int


@dataclass(frozen=True)
class ApiKey:
    """An API key of the service, without its secret (only a hash of the secret is stored)."""

    key_id: str
    role: str
    owner: str
    created_at: datetime
    revoked: bool


@dataclass(frozen=True)
class NewApiKey:
    """A freshly created key: ``token`` is shown once and never stored."""

    key: ApiKey
    token: str


@dataclass(frozen=True)
class Head:
    """A commitment to the ledger: record count and the hash of the last record (a tree head).

    ``str(head)`` is ``COUNT:HASH``, the form ``audit verify --expect-head`` reads back.

    Examples
    --------
    >>> str(Head(3, "ab" * 32))  # doctest: +ELLIPSIS
    '3:abab...abab'
    """

    count: int
    head_hash: str

    def __str__(self) -> str:
        return f"{self.count}:{self.head_hash}"


@dataclass(frozen=True)
class BadRecord:
    """The first record that does not verify, and why.

    ``seq`` is the ledger record (an alert, review, event or the commitment covering the row) where the
    problem was found; 0 for a row that no chained record covers.
    """

    seq: int
    table: str
    record_id: int | None
    reason: str

    def __str__(self) -> str:
        ident = f" id {self.record_id}" if self.record_id is not None else ""
        if self.seq == 0:  # a row outside the ledger that no chained record covers
            return f"{self.table}{ident}: {self.reason}"
        return f"seq {self.seq} ({self.table}{ident}): {self.reason}"


@dataclass(frozen=True)
class VerifyReport:
    """Outcome of :func:`riskshape.store.verify_chain`."""

    ok: bool
    checked: int
    head: Head
    first_bad: BadRecord | None
    merkle_root: str
    """RFC 6962 Merkle Tree Hash of the entry hashes of the records checked (see :mod:`riskshape.store.merkle`)."""
