"""Appending to and reading the ledger: alerts and reviews, one hash chain.

Every append runs in :func:`~riskshape.store.database.write_transaction`, which holds the write lock
before the head is read, so two writers can never both extend the same head.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable, Sequence
from datetime import date, datetime, timezone
from typing import Any, cast

import sqlalchemy as sa
from sqlalchemy.engine import Connection, Engine

from riskshape.alerts.model import Alert
from riskshape.errors import NotFoundError, StoreError
from riskshape.store import schema as t
from riskshape.store.canonical import entry_hash
from riskshape.store.database import read_transaction, write_transaction
from riskshape.store.knowledge import known_runs
from riskshape.store.records import (
    GENESIS_HASH,
    REVIEW_ACTIONS,
    AlertAppend,
    AlertDetail,
    AlertPage,
    AlertRecord,
    ReviewRecord,
)

__all__ = [
    "append_alerts",
    "append_review",
    "list_alerts",
    "list_reviews",
    "get_alert",
    "alert_from_row",
    "review_from_row",
    "ledger_head",
    "to_date",
]

_HEX64 = re.compile(r"^[0-9a-f]{64}$")
MAX_COMMENT = 10_000


def to_date(value: object, what: str) -> date:
    """A whole day from a date, a datetime-like at midnight, or an ISO string."""
    if isinstance(value, date) and not isinstance(value, datetime):
        return value
    if isinstance(value, str) and len(value) == 10:  # YYYY-MM-DD: the common case, without pandas
        try:
            return date.fromisoformat(value)
        except ValueError:
            pass
    import pandas as pd  # other date-likes (timestamps, numpy dates, other spellings)

    try:
        stamp = pd.Timestamp(value)
    except (ValueError, TypeError):
        raise StoreError(f"{what}: cannot read {value!r} as a date; write it as YYYY-MM-DD") from None
    if stamp is pd.NaT or stamp != stamp.normalize():
        raise StoreError(f"{what}: {value!r} is not a whole day; give a date (YYYY-MM-DD)")
    return cast(date, stamp.date())


def ledger_head(connection: Connection) -> tuple[int, str]:
    """(seq, entry_hash) of the last ledger record, or (0, GENESIS_HASH) for an empty ledger."""
    row = connection.execute(
        sa.select(t.ledger.c.seq, t.ledger.c.entry_hash).order_by(t.ledger.c.seq.desc()).limit(1)
    ).first()
    return (0, GENESIS_HASH) if row is None else (int(row.seq), str(row.entry_hash))


def _next_id(connection: Connection, table: sa.Table) -> int:
    return int(connection.execute(sa.select(sa.func.coalesce(sa.func.max(table.c.id), 0))).scalar_one()) + 1


def _check_alert(alert: Alert, n: int) -> None:
    where = f"alert {n} ({alert.firing.rule} at {alert.firing.window_end})"
    f = alert.firing
    for name, number in (("value", f.value), ("threshold", f.threshold)):
        if not isinstance(number, (int, float)) or not math.isfinite(float(number)):
            raise StoreError(f"{where}: {name} must be a finite number, got {number!r}")
    for name, text, limit in (
        ("rule", f.rule, 80),
        ("summary", f.summary, 80),
        ("kind", f.kind, 16),
        ("severity", f.severity, 16),
        ("portfolio", alert.portfolio, 200),
        ("package_version", alert.package_version, 64),
    ):
        if not isinstance(text, str) or not text or len(text) > limit:
            raise StoreError(f"{where}: {name} must be a non-empty string of at most {limit} characters, got {text!r}")
    for name, digest in (("config_hash", alert.config_hash), ("inputs_hash", alert.inputs_hash)):
        if not isinstance(digest, str) or not _HEX64.match(digest):
            raise StoreError(f"{where}: {name} must be 64 lowercase hex digits (SHA-256), got {digest!r}")
    if not isinstance(alert.raised_at, datetime) or alert.raised_at.tzinfo is None:
        raise StoreError(f"{where}: raised_at must be a timezone-aware datetime, got {alert.raised_at!r}")


def append_alerts(engine: Engine, alerts: Sequence[Alert], run_id: int) -> AlertAppend:
    """Append alerts of one run; an alert already archived (same portfolio, rule, window end and
    configuration hash) adds nothing. See :meth:`riskshape.store.Store.append_alerts`.
    """
    for n, alert in enumerate(alerts):
        _check_alert(alert, n)
    import pandas as pd  # writing alerts: the writer has loaded pandas already

    ordered = sorted(alerts, key=lambda a: (pd.Timestamp(a.firing.window_end), a.firing.rule))
    with write_transaction(engine) as connection:
        run = connection.execute(
            sa.select(t.runs.c.id, t.portfolios.c.id.label("pid"), t.portfolios.c.name)
            .join(t.portfolios, t.portfolios.c.id == t.runs.c.portfolio_id)
            .where(t.runs.c.id == run_id)
        ).first()
        if run is None:
            raise NotFoundError(f"run {run_id} is not in the archive; record the run first (Store.create_run)")
        wrong = [a.portfolio for a in ordered if a.portfolio != run.name]
        if wrong:
            raise StoreError(f"run {run_id} belongs to portfolio {run.name!r}, got an alert for {wrong[0]!r}")
        seen = {
            (r.rule, r.window_end, r.config_hash)
            for r in connection.execute(
                sa.select(t.alerts.c.rule, t.alerts.c.window_end, t.alerts.c.config_hash).where(
                    t.alerts.c.portfolio_id == run.pid
                )
            )
        }
        seq, prev = ledger_head(connection)
        next_id = _next_id(connection, t.alerts)
        rows: list[dict[str, Any]] = []
        existing = 0
        for alert in ordered:
            f = alert.firing
            key = (f.rule, to_date(f.window_end, f"alert {f.rule}: window_end"), alert.config_hash)
            if key in seen:
                existing += 1
                continue
            seen.add(key)
            seq += 1
            row: dict[str, Any] = {
                "id": next_id,
                "seq": seq,
                "prev_hash": prev,
                "portfolio_id": run.pid,
                "portfolio": run.name,
                "rule": f.rule,
                "summary": f.summary,
                "kind": f.kind,
                "window_end": key[1],
                "value": float(f.value),
                "threshold": float(f.threshold),
                "severity": f.severity,
                "raised_at": alert.raised_at.astimezone(timezone.utc),
                "config_hash": alert.config_hash,
                "inputs_hash": alert.inputs_hash,
                "package_version": alert.package_version,
                "run_id": run_id,
                "explanation": alert.explanation,
            }
            row["entry_hash"] = prev = entry_hash("alerts", row)
            rows.append(row)
            next_id += 1
        if rows:
            connection.execute(
                sa.insert(t.ledger),
                [
                    {"seq": r["seq"], "kind": "alert", "prev_hash": r["prev_hash"], "entry_hash": r["entry_hash"]}
                    for r in rows
                ],
            )
            connection.execute(sa.insert(t.alerts), rows)
    return AlertAppend(added=tuple(AlertRecord(**r) for r in rows), existing=existing)


ReviewCheck = Callable[[AlertRecord, tuple[ReviewRecord, ...]], None]
"""Called with the alert and its reviews so far, inside the write transaction, before a review is
appended; it raises to refuse the review (so a rule over the history holds under concurrency)."""


def append_review(
    engine: Engine,
    alert_id: int,
    action: str,
    reviewer: str,
    comment: str = "",
    now: datetime | None = None,
    check: ReviewCheck | None = None,
) -> ReviewRecord:
    """Append a review of an alert. See :meth:`riskshape.store.Store.append_review`."""
    if action not in REVIEW_ACTIONS:
        raise StoreError(f"review action {action!r} is not one of {', '.join(REVIEW_ACTIONS)}")
    if not isinstance(reviewer, str) or not reviewer.strip() or len(reviewer) > 200:
        raise StoreError(f"reviewer must be a non-empty name of at most 200 characters, got {reviewer!r}")
    if not isinstance(comment, str) or len(comment) > MAX_COMMENT:
        raise StoreError(f"review comment must be text of at most {MAX_COMMENT} characters")
    created = (now or datetime.now(timezone.utc)).astimezone(timezone.utc)
    with write_transaction(engine) as connection:
        found = connection.execute(sa.select(t.alerts).where(t.alerts.c.id == alert_id)).first()
        if found is None:
            raise NotFoundError(f"alert {alert_id} is not in the archive; list alerts to find its id")
        if check is not None:
            earlier = connection.execute(
                sa.select(t.reviews).where(t.reviews.c.alert_id == alert_id).order_by(t.reviews.c.seq)
            )
            check(alert_from_row(found), tuple(review_from_row(r) for r in earlier))
        seq, prev = ledger_head(connection)
        row: dict[str, Any] = {
            "id": _next_id(connection, t.reviews),
            "seq": seq + 1,
            "prev_hash": prev,
            "alert_id": alert_id,
            "action": action,
            "reviewer": reviewer,
            "comment": comment,
            "created_at": created,
        }
        row["entry_hash"] = entry_hash("reviews", row)
        connection.execute(
            sa.insert(t.ledger),
            {"seq": row["seq"], "kind": "review", "prev_hash": prev, "entry_hash": row["entry_hash"]},
        )
        connection.execute(sa.insert(t.reviews), row)
    return ReviewRecord(**row)


_ALERT_FIELDS = tuple(AlertRecord.__dataclass_fields__)


def alert_from_row(row: Any) -> AlertRecord:
    """An :class:`AlertRecord` from a result row of the ``alerts`` table."""
    m = row._mapping
    return AlertRecord(**{name: m[name] for name in AlertRecord.__dataclass_fields__})


def review_from_row(row: Any) -> ReviewRecord:
    """A :class:`ReviewRecord` from a result row of the ``reviews`` table."""
    m = row._mapping
    return ReviewRecord(**{name: m[name] for name in ReviewRecord.__dataclass_fields__})


def _listed(values: str | Sequence[str]) -> list[str]:
    """One value or several, as a list (for an ``IN`` condition)."""
    return [values] if isinstance(values, str) else list(values)


def list_alerts(
    engine: Engine,
    *,
    portfolio: str | Sequence[str] | None = None,
    since: object = None,
    until: object = None,
    severity: str | Sequence[str] | None = None,
    rule: str | Sequence[str] | None = None,
    reviewed: bool | None = None,
    limit: int | None = 100,
    offset: int = 0,
    as_known_at: datetime | None = None,
    newest_first: bool = False,
) -> AlertPage:
    """Alerts matching the filters. See :meth:`riskshape.store.Store.list_alerts`."""
    if limit is not None and limit < 0 or offset < 0:
        raise StoreError(f"paging: limit and offset must not be negative, got limit={limit}, offset={offset}")
    a = t.alerts
    conditions: list[Any] = []
    if portfolio is not None:
        conditions.append(a.c.portfolio.in_(_listed(portfolio)))
    if since is not None:
        conditions.append(a.c.window_end >= to_date(since, "since"))
    if until is not None:
        conditions.append(a.c.window_end <= to_date(until, "until"))
    if severity is not None:
        conditions.append(a.c.severity.in_(_listed(severity)))
    if rule is not None:
        conditions.append(a.c.rule.in_(_listed(rule)))
    if as_known_at is not None:
        conditions.append(a.c.run_id.in_(known_runs(as_known_at)))
    if reviewed is not None:
        has_review = sa.exists().where(t.reviews.c.alert_id == a.c.id)
        if as_known_at is not None:
            has_review = has_review.where(t.reviews.c.created_at <= as_known_at)
        conditions.append(has_review if reviewed else ~has_review)
    where = sa.and_(sa.true(), *conditions)
    with read_transaction(engine) as connection:
        total = int(connection.execute(sa.select(sa.func.count()).select_from(a).where(where)).scalar_one())
        columns = [a.c[name] for name in _ALERT_FIELDS]  # in the record's order: built by position
        newest = a.c.window_end.desc() if newest_first else a.c.window_end
        query = sa.select(*columns).where(where).order_by(newest, a.c.id).offset(offset)
        if limit is not None:
            query = query.limit(limit)
        items = tuple(AlertRecord(*r) for r in connection.execute(query))
    return AlertPage(items=items, total=total, offset=offset)


def list_reviews(
    engine: Engine, alert_ids: Sequence[int] | None = None, as_known_at: datetime | None = None
) -> tuple[ReviewRecord, ...]:
    """Reviews in ledger order, of the given alerts (default every alert), recorded by ``as_known_at``.

    See :meth:`riskshape.store.Store.list_reviews`.
    """
    query = sa.select(t.reviews).order_by(t.reviews.c.seq)
    if as_known_at is not None:
        query = query.where(t.reviews.c.created_at <= as_known_at)
    with read_transaction(engine) as connection:
        if alert_ids is None:
            return tuple(review_from_row(r) for r in connection.execute(query))
        wanted = sorted({int(i) for i in alert_ids})
        found: list[ReviewRecord] = []
        for start in range(0, len(wanted), 500):  # bounded IN lists (SQLite's variable limit)
            chunk = wanted[start : start + 500]
            found.extend(review_from_row(r) for r in connection.execute(query.where(t.reviews.c.alert_id.in_(chunk))))
    return tuple(sorted(found, key=lambda r: r.seq))


def get_alert(engine: Engine, alert_id: int, as_known_at: datetime | None = None) -> AlertDetail:
    """One alert and its reviews (as known at ``as_known_at``). See :meth:`riskshape.store.Store.get_alert`."""
    with read_transaction(engine) as connection:
        query = sa.select(t.alerts).where(t.alerts.c.id == alert_id)
        if as_known_at is not None:
            query = query.where(t.alerts.c.run_id.in_(known_runs(as_known_at)))
        row = connection.execute(query).first()
        if row is None:
            known = "" if as_known_at is None else f" as known at {as_known_at.isoformat()}"
            raise NotFoundError(f"alert {alert_id} is not in the archive{known}; list alerts to find its id")
        asked = sa.select(t.reviews).where(t.reviews.c.alert_id == alert_id)
        if as_known_at is not None:
            asked = asked.where(t.reviews.c.created_at <= as_known_at)
        reviews = connection.execute(asked.order_by(t.reviews.c.seq))
        return AlertDetail(alert=alert_from_row(row), reviews=tuple(review_from_row(r) for r in reviews))
