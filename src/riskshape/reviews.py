"""The review workflow: an alert's status, reviewing it, the queue, and signing a period off.

An alert's status follows from its chained reviews alone (it is never stored apart from them)::

    open --acknowledge--> acknowledged --escalate / dismiss / close--> ...
    open --escalate--> escalated --close (by another reviewer)--> closed
    open --dismiss--> dismissed --escalate / close--> ...

Dismissing and escalating need a comment. An escalated alert is closed only by a reviewer other
than the one who escalated it (four eyes). Only the ``reviewer`` and ``admin`` roles review.

Reviews archived before this workflow (any order of acknowledge, dismiss and escalate) read as the
weightiest state they reached, so a later acknowledgement never hides an escalation: ``closed``
once closed, else ``escalated`` once escalated, else ``dismissed``, else ``acknowledged``.

A period is signed off by a chained event of kind ``period_signed_off`` naming the period, the
portfolios, the counts by status, the signer and the chain head at signing; it is refused while an
alert of the period is open or escalated. The statuses are counted and the head read inside the
append's write transaction (``Store.append_event(check=...)``), so a review landing meanwhile
either counts or waits until the sign-off is archived.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from datetime import date, datetime
from typing import cast, get_args

from riskshape.errors import AccessError, ConflictError, DataError
from riskshape.selection import Period, split_names, to_period
from riskshape.store import AlertPage, AlertRecord, Head, ReviewRecord, Store
from riskshape.types import AlertStatus

__all__ = [
    "AlertStatus",
    "STATUSES",
    "ACTIONS",
    "REVIEW_ROLES",
    "SIGN_OFF_KIND",
    "UNSETTLED",
    "AlertHistory",
    "QueueItem",
    "QueuePage",
    "SignOff",
    "status_of",
    "next_actions",
    "review_alert",
    "alert_history",
    "list_queue",
    "sign_off",
    "list_sign_offs",
]

STATUSES: tuple[AlertStatus, ...] = cast(tuple[AlertStatus, ...], get_args(AlertStatus))
"""Every status, in the order of the queue (open first)."""

ACTIONS = ("acknowledge", "escalate", "dismiss", "close")
"""What a reviewer may do with an alert."""

REVIEW_ROLES = ("reviewer", "admin")
"""The roles that may review alerts and sign periods off."""

SIGN_OFF_KIND = "period_signed_off"
"""The kind of the chained event that records a sign-off."""

NEEDS_COMMENT = frozenset({"dismiss", "escalate"})
UNSETTLED: tuple[AlertStatus, ...] = ("open", "escalated")
"""Statuses that stop a period from being signed off."""

_RESULT: dict[str, AlertStatus] = {
    "acknowledge": "acknowledged",
    "escalate": "escalated",
    "dismiss": "dismissed",
    "close": "closed",
}
_WEIGHT: dict[AlertStatus, int] = {"open": 0, "acknowledged": 1, "dismissed": 2, "escalated": 3, "closed": 4}
_ALLOWED: dict[AlertStatus, tuple[str, ...]] = {
    "open": ("acknowledge", "escalate", "dismiss"),
    "acknowledged": ("escalate", "dismiss", "close"),
    "dismissed": ("escalate", "close"),
    "escalated": ("close",),
    "closed": (),
}


@dataclass(frozen=True)
class AlertHistory:
    """An alert, its status and every review of it (oldest first: who, when, action, comment)."""

    alert: AlertRecord
    status: AlertStatus
    reviews: tuple[ReviewRecord, ...]

    @property
    def escalated_by(self) -> tuple[str, ...]:
        """Who escalated the alert (they may not close it)."""
        return tuple(dict.fromkeys(r.reviewer for r in self.reviews if r.action == "escalate"))


@dataclass(frozen=True)
class QueueItem:
    """One alert of the queue with its status and its last review (None if never reviewed)."""

    alert: AlertRecord
    status: AlertStatus
    last_review: ReviewRecord | None
    n_reviews: int

    @property
    def last_reviewer(self) -> str | None:
        """Who reviewed the alert last, or None."""
        return None if self.last_review is None else self.last_review.reviewer


@dataclass(frozen=True)
class QueuePage:
    """One page of the queue (open first), how many alerts match, and their counts by status.

    ``counts`` covers every status (zeros included) of the alerts matching every filter except
    ``status``, so a page filtered to one status still shows how many are in the others.
    """

    items: tuple[QueueItem, ...]
    total: int
    offset: int
    counts: Mapping[AlertStatus, int]


@dataclass(frozen=True)
class SignOff:
    """A period signed off: the chained record of who signed what, and what the archive held then."""

    id: int
    seq: int
    entry_hash: str
    start: date
    end: date
    portfolios: tuple[str, ...]
    counts: Mapping[AlertStatus, int]
    signer: str
    signed_at: datetime
    chain_head: Head
    """The ledger's head just before the sign-off was appended."""


def status_of(reviews: Sequence[ReviewRecord]) -> AlertStatus:
    """The status of an alert from its reviews (in any order; ledger order is used).

    Parameters
    ----------
    reviews : sequence of ReviewRecord
        The alert's reviews.

    Returns
    -------
    AlertStatus
        ``open`` without reviews; otherwise the weightiest state reached (see the module notes).

    Examples
    --------
    >>> status_of([])
    'open'
    """
    status: AlertStatus = "open"
    for review in sorted(reviews, key=lambda r: r.seq):
        reached = _RESULT.get(review.action)
        if reached is not None and _WEIGHT[reached] > _WEIGHT[status]:
            status = reached
    return status


def next_actions(status: AlertStatus) -> tuple[str, ...]:
    """The actions that apply to an alert of this status (four eyes aside).

    Parameters
    ----------
    status : {"open", "acknowledged", "escalated", "dismissed", "closed"}
        The alert's status (:func:`status_of`).

    Returns
    -------
    tuple of str
        The review actions a reviewer may take next, in the order forms offer them.

    Examples
    --------
    >>> next_actions("escalated")
    ('close',)
    """
    return _ALLOWED[status]


def _refusal(alert: AlertRecord, earlier: tuple[ReviewRecord, ...], action: str, reviewer: str) -> str | None:
    """Why ``reviewer`` may not apply ``action`` to the alert now, or None if they may."""
    status = status_of(earlier)
    if action not in _ALLOWED[status]:
        allowed = ", ".join(_ALLOWED[status]) or "nothing (it is closed)"
        return f"alert {alert.id} is {status}: {action} does not apply (allowed: {allowed})"
    escalators = {r.reviewer.strip().casefold() for r in earlier if r.action == "escalate"}
    if action == "close" and status == "escalated" and reviewer.strip().casefold() in escalators:
        return f"alert {alert.id} was escalated by {reviewer}; four eyes: another reviewer must close it"
    return None


def _check_role(role: str) -> None:
    if role not in REVIEW_ROLES:
        raise AccessError(f"role {role!r} may not review alerts; a key of role {' or '.join(REVIEW_ROLES)} may")


def _check_person(name: str, what: str) -> str:
    if not isinstance(name, str) or not name.strip():
        raise DataError(f"{what}: give the name of the person, got {name!r}")
    return name.strip()


def review_alert(
    store: Store, alert_id: int, action: str, reviewer: str, comment: str = "", *, role: str = "reviewer"
) -> ReviewRecord:
    """Review an alert: append a chained review after checking the workflow's rules.

    Parameters
    ----------
    store : Store
    alert_id : int
    action : {"acknowledge", "escalate", "dismiss", "close"}
    reviewer : str
        Who reviews (the owner of the API key, or the person at the command line).
    comment : str
        Why; required (not blank) to dismiss or escalate.
    role : str
        The reviewer's role; only ``reviewer`` and ``admin`` may review.

    Returns
    -------
    ReviewRecord
        The archived review.

    Raises
    ------
    AccessError
        If ``role`` may not review.
    DataError
        If the action is unknown, the reviewer blank, or a dismissal or escalation has no comment.
    NotFoundError
        If the alert is not archived.
    ConflictError
        If the action does not apply to the alert's status, or the reviewer who escalated the
        alert tries to close it (four eyes).
    """
    _check_role(role)
    if action not in ACTIONS:
        raise DataError(f"action: {action!r} is not one of {', '.join(ACTIONS)}")
    who = _check_person(reviewer, "reviewer")
    text = comment if isinstance(comment, str) else ""
    if action in NEEDS_COMMENT and not text.strip():
        raise DataError(f"comment: to {action} an alert, say why in a comment (it was empty)")

    def check(alert: AlertRecord, earlier: tuple[ReviewRecord, ...]) -> None:
        reason = _refusal(alert, earlier, action, who)
        if reason is not None:
            raise ConflictError(reason)

    return store.append_review(alert_id, action, who, text.strip(), check=check)


def alert_history(store: Store, alert_id: int, *, as_known_at: object = None) -> AlertHistory:
    """An alert with its status and every review (who, when, action, comment), oldest first.

    Parameters
    ----------
    store : Store
        The archive.
    alert_id : int
        The alert's id.
    as_known_at : datetime or str, optional
        As known at that moment (ISO 8601 with a timezone): the reviews made by then only.

    Returns
    -------
    AlertHistory
        The alert, its status derived from its chained reviews, and the reviews.

    Raises
    ------
    NotFoundError
        If the alert is not archived (or was not raised yet at ``as_known_at``).
    """
    detail = store.get_alert(alert_id, as_known_at=as_known_at)
    return AlertHistory(alert=detail.alert, status=status_of(detail.reviews), reviews=detail.reviews)


def _statuses(values: str | Sequence[str] | None) -> tuple[AlertStatus, ...] | None:
    names = split_names(values)
    if names is None:
        return None
    unknown = [n for n in names if n not in STATUSES]
    if unknown:
        raise DataError(f"status: {unknown[0]!r} is not one of {', '.join(STATUSES)}")
    return cast(tuple[AlertStatus, ...], names)


def _matching(
    store: Store,
    portfolios: tuple[str, ...] | None,
    severities: tuple[str, ...] | None,
    rules: tuple[str, ...] | None,
    period: Period,
    as_known_at: object = None,
) -> list[tuple[AlertRecord, tuple[ReviewRecord, ...]]]:
    """Alerts matching the filters (all pages) with their reviews."""
    alerts: list[AlertRecord] = []
    for portfolio in portfolios or (None,):
        page = store.list_alerts(
            portfolio=portfolio,
            since=period.start,
            until=period.end,
            severity=severities,
            limit=None,
            as_known_at=as_known_at,
        )
        alerts.extend(a for a in page.items if rules is None or a.rule in rules)
    by_alert: dict[int, list[ReviewRecord]] = {a.id: [] for a in alerts}
    for review in store.list_reviews([a.id for a in alerts], as_known_at=as_known_at) if alerts else ():
        by_alert[review.alert_id].append(review)
    return [(a, tuple(by_alert[a.id])) for a in alerts]


def _count(statuses: Sequence[AlertStatus]) -> dict[AlertStatus, int]:
    tally = Counter(statuses)
    return {s: tally.get(s, 0) for s in STATUSES}


def list_queue(
    store: Store,
    *,
    status: str | Sequence[str] | None = None,
    portfolio: str | Sequence[str] | None = None,
    severity: str | Sequence[str] | None = None,
    rule: str | Sequence[str] | None = None,
    start: object = None,
    end: object = None,
    limit: int | None = 100,
    offset: int = 0,
    as_known_at: object = None,
) -> QueuePage:
    """The review queue: alerts with their status and last reviewer, open first.

    Parameters
    ----------
    store : Store
    status, portfolio, severity, rule : str or sequence of str, optional
        Keep alerts with one of these values (repeats or comma-separated text).
    start, end : date-like, optional
        Window ends, inclusive.
    limit : int or None
        Items per page (None: all).
    offset : int
        Items skipped.
    as_known_at : datetime or str, optional
        The queue as it stood at that moment (ISO 8601 with a timezone): alerts raised by then,
        statuses from the reviews made by then.

    Returns
    -------
    QueuePage
        Ordered by status (open, acknowledged, escalated, dismissed, closed), then newest window
        first, then id; ``counts`` by status ignore the ``status`` filter.

    Raises
    ------
    DataError
        If a status is unknown, a date or moment unreadable, ``start`` after ``end``, or paging negative.

    Notes
    -----
    Only the reviewed alerts are read in full (their statuses come from their reviews through
    :func:`status_of`); the alerts without reviews, open by the same definition, are counted and
    paged in the archive, so a page costs about the same on 100 alerts or 100,000.
    """
    if (limit is not None and limit < 0) or offset < 0:
        raise DataError(f"paging: limit and offset must not be negative, got limit={limit}, offset={offset}")
    wanted = _statuses(status) or STATUSES
    period = to_period(start, end)
    query = _QueueQuery(store, split_names(portfolio), split_names(severity), split_names(rule), period, as_known_at)
    # Only reviewed alerts are read in full: an alert without reviews is open (status_of of no
    # reviews), so the unreviewed ones are counted and paged in the archive.
    reviewed = query.reviewed_items()
    n_unreviewed = query.count_unreviewed()
    counts = _count([i.status for i in reviewed])
    counts[status_of(())] += n_unreviewed
    shown = sorted((i for i in reviewed if i.status in wanted), key=_queue_order)
    reviewed_open = [i for i in shown if i.status == "open"]
    rest = shown[len(reviewed_open) :]  # open sorts first
    n_open = n_unreviewed + len(reviewed_open) if "open" in wanted else 0
    total = n_open + len(rest)
    stop = total if limit is None else min(total, offset + limit)
    page: list[QueueItem] = []
    if offset < n_open:
        page.extend(query.open_slice(reviewed_open, offset, min(stop, n_open)))
    page.extend(rest[max(0, offset - n_open) : max(0, stop - n_open)])
    return QueuePage(items=tuple(page), total=total, offset=offset, counts=counts)


_RANK: dict[AlertStatus, int] = {s: n for n, s in enumerate(STATUSES)}


def _queue_order(item: QueueItem) -> tuple[int, int, int]:
    """The queue's order: by status (open first), then newest window first, then id."""
    return (_RANK[item.status], -item.alert.window_end.toordinal(), item.alert.id)


@dataclass(frozen=True)
class _QueueQuery:
    """The queue's filters, and the archive reads that page it."""

    store: Store
    portfolios: tuple[str, ...] | None
    severities: tuple[str, ...] | None
    rules: tuple[str, ...] | None
    period: Period
    as_known_at: object

    def _alerts(self, reviewed: bool, limit: int | None, offset: int = 0) -> AlertPage:
        return self.store.list_alerts(
            portfolio=self.portfolios,
            since=self.period.start,
            until=self.period.end,
            severity=self.severities,
            rule=self.rules,
            reviewed=reviewed,
            limit=limit,
            offset=offset,
            as_known_at=self.as_known_at,
            newest_first=True,
        )

    def reviewed_items(self) -> list[QueueItem]:
        """Every matching alert with a review (by ``as_known_at``), its status from its reviews."""
        alerts = self._alerts(True, None).items
        by_alert: dict[int, list[ReviewRecord]] = {a.id: [] for a in alerts}
        for review in self.store.list_reviews(list(by_alert), as_known_at=self.as_known_at) if alerts else ():
            by_alert[review.alert_id].append(review)
        return [
            QueueItem(alert=a, status=status_of(rs), last_review=rs[-1] if rs else None, n_reviews=len(rs))
            for a in alerts
            for rs in (by_alert[a.id],)
        ]

    def count_unreviewed(self) -> int:
        """How many matching alerts have no review (by ``as_known_at``)."""
        return self._alerts(False, 0).total

    def open_slice(self, reviewed_open: Sequence[QueueItem], low: int, high: int) -> list[QueueItem]:
        """Items ``low`` to ``high`` (exclusive) of the open part of the queue.

        The open part is the unreviewed alerts (read from the archive in the queue's order) merged
        with the reviewed alerts whose reviews leave them open (``reviewed_open``, sorted).
        """
        skip = low if not reviewed_open else 0  # merged with others, the page's start is not known in advance
        page = self._alerts(False, high - skip, skip).items
        unreviewed = [QueueItem(alert=a, status=status_of(()), last_review=None, n_reviews=0) for a in page]
        merged = sorted([*unreviewed, *reviewed_open], key=_queue_order)
        return merged[low - skip : high - skip]


def sign_off(
    store: Store, start: object, end: object, portfolios: Sequence[str] | str, signer: str, *, role: str = "reviewer"
) -> SignOff:
    """Sign a period off: a chained record of the period, portfolios, counts by status, signer and head.

    Parameters
    ----------
    store : Store
    start, end : date-like
        The period's first and last window end (inclusive).
    portfolios : sequence of str or str
        The portfolios signed for (comma-separated text accepted); empty means every portfolio.
    signer : str
        Who signs.
    role : str
        The signer's role; only ``reviewer`` and ``admin`` may sign.

    Returns
    -------
    SignOff

    Raises
    ------
    AccessError
        If ``role`` may not sign.
    DataError
        If the period is missing or inverted, or the signer blank.
    NotFoundError
        If a portfolio is not archived.
    ConflictError
        If an alert of the period is open or escalated (the message lists them).
    """
    _check_role(role)
    who = _check_person(signer, "signer")
    period = to_period(start, end)
    if period.start is None or period.end is None:
        raise DataError("period: give both start and end of the period to sign off")
    names = split_names(portfolios) or tuple(p.name for p in store.list_portfolios())
    for name in names:
        store.get_portfolio(name)  # NotFoundError names an unknown portfolio

    def check(head: Head) -> dict[str, object]:
        # Runs under the archive's write lock: no review can land between this count and the append.
        rows = _matching(store, names, None, None, period)
        statuses = [status_of(rs) for _, rs in rows]
        unsettled = [(a, s) for (a, _), s in zip(rows, statuses, strict=True) if s in UNSETTLED]
        if unsettled:
            listed = "; ".join(
                f"{a.id} ({a.portfolio}, {a.rule}, {a.window_end.isoformat()}, {s})" for a, s in unsettled
            )
            raise ConflictError(
                f"cannot sign off {period}: {len(unsettled)} alert(s) still open or escalated: {listed}; "
                "review them first"
            )
        return {"counts": dict(_count(statuses)), "chain_head": {"count": head.count, "hash": head.head_hash}}

    event = store.append_event(
        SIGN_OFF_KIND,
        {
            "start": period.start.isoformat(),
            "end": period.end.isoformat(),
            "portfolios": sorted(names),
            "signer": who,
        },
        subject=f"{period.start.isoformat()}/{period.end.isoformat()}",
        actor=who,
        check=check,
    )
    return _sign_off_from(event.id, event.seq, event.entry_hash, event.data, event.recorded_at)


def _sign_off_from(event_id: int, seq: int, entry_hash: str, data: Mapping[str, object], recorded: datetime) -> SignOff:
    counts = cast(Mapping[str, int], data["counts"])
    head = cast(Mapping[str, object], data["chain_head"])
    return SignOff(
        id=event_id,
        seq=seq,
        entry_hash=entry_hash,
        start=date.fromisoformat(str(data["start"])),
        end=date.fromisoformat(str(data["end"])),
        portfolios=tuple(cast(Sequence[str], data["portfolios"])),
        counts={s: int(counts.get(s, 0)) for s in STATUSES},
        signer=str(data["signer"]),
        signed_at=recorded,
        chain_head=Head(count=int(cast(int, head["count"])), head_hash=str(head["hash"])),
    )


def list_sign_offs(store: Store) -> tuple[SignOff, ...]:
    """Every sign-off, in ledger order.

    Parameters
    ----------
    store : Store
        The archive.

    Returns
    -------
    tuple of SignOff
        Each signed period with its portfolios, counts by status, signer and the chain head at signing.
    """
    return tuple(
        _sign_off_from(e.id, e.seq, e.entry_hash, e.data, e.recorded_at) for e in store.list_events(kind=SIGN_OFF_KIND)
    )
