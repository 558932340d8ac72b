"""Alerts and reviews exported for programs: CSV or JSON Lines, exact values, one record kind per file.

The CLI (``riskshape alerts export``) and the service (``GET /v1/export/alerts``) both call
:func:`export_alerts`, so a reviewer gets the same file either way.

Layout
------
CSV: the header row first, then one row per record; the caution travels in the ``caution`` column
of every row, so ``pandas.read_csv(path)`` and ``csv.DictReader`` read it with no options. Text
cells that a spreadsheet would run as a formula get a leading apostrophe (:func:`neutralise_cell`);
floats are written exactly (their shortest round-trip text).

Every record states the knowledge it shows in ``known_at``: ``current`` (what the archive knows
now), or the moment asked for with ``as_known_at`` (ISO 8601, UTC), when the export is exactly
what riskshape showed then (alerts raised by then, reviews made by then).

JSON Lines: every line is one record of the same kind (an alert, or a review), with the caution as
a field and the explanation as an object.

``what="alerts"`` gives one record per alert with its status, its last review and the main facts
of its explanation as flat columns (``explanation_*``) next to the whole explanation
(``explanation_json``). ``what="reviews"`` gives one record per review with its alert's key
fields and the status the alert reached with it.
"""

from __future__ import annotations

import csv
import io
import json
from collections.abc import Mapping, Sequence
from datetime import date, datetime, timezone
from typing import Any, Literal

from riskshape.caution import CAUTION
from riskshape.errors import DataError
from riskshape.explain.model import Explanation
from riskshape.reviews import QueueItem, list_queue, status_of
from riskshape.selection import pick_alias, split_names
from riskshape.store import ReviewRecord, Store
from riskshape.store.knowledge import to_known_at

__all__ = [
    "EXPORT_COLUMNS",
    "REVIEW_COLUMNS",
    "EXPLANATION_COLUMNS",
    "neutralise_cell",
    "explanation_facts",
    "export_rows",
    "review_rows",
    "export_alerts",
    "CURRENT_KNOWLEDGE",
    "knowledge_label",
]

CURRENT_KNOWLEDGE = "current"
"""``known_at`` of an export of what the archive knows now."""


def knowledge_label(known_at: datetime | None) -> str:
    """What an export or a report states as its knowledge time: :data:`CURRENT_KNOWLEDGE` or the moment.

    Parameters
    ----------
    known_at : datetime or None
        The moment read as known (aware), or None for the current knowledge.

    Returns
    -------
    str
        ``current``, or the moment in ISO 8601, UTC.

    Examples
    --------
    >>> from datetime import timezone
    >>> knowledge_label(datetime(2026, 3, 2, 17, 30, tzinfo=timezone.utc))
    '2026-03-02T17:30:00+00:00'
    >>> knowledge_label(None)
    'current'
    """
    return CURRENT_KNOWLEDGE if known_at is None else known_at.astimezone(timezone.utc).isoformat()


ExportWhat = Literal["alerts", "reviews"]

EXPLANATION_COLUMNS = (
    "explanation_previous_end",
    "explanation_scale",
    "explanation_clusters_before",
    "explanation_clusters_after",
    "explanation_merges",
    "explanation_splits",
    "explanation_top_pair",
    "explanation_top_pair_change",
    "explanation_entered",
    "explanation_left",
    "explanation_loops",
    "explanation_top_loop",
    "explanation_top_loop_persistence",
)
"""The main facts of an explanation, one column each (empty where the explanation lacks the part)."""

EXPORT_COLUMNS = (
    "caution",
    "known_at",
    "id",
    "portfolio",
    "portfolio_id",
    "window_end",
    "rule",
    "summary",
    "kind",
    "severity",
    "value",
    "threshold",
    "status",
    "reviews",
    "last_action",
    "last_reviewer",
    "last_reviewed_at",
    "raised_at",
    "config_hash",
    "inputs_hash",
    "package_version",
    "run_id",
    "seq",
    "prev_hash",
    "entry_hash",
    *EXPLANATION_COLUMNS,
    "explanation_json",
)
"""Columns of the alerts export (``what="alerts"``), in order."""

REVIEW_COLUMNS = (
    "caution",
    "known_at",
    "review_id",
    "alert_id",
    "portfolio",
    "window_end",
    "rule",
    "severity",
    "action",
    "reviewer",
    "comment",
    "created_at",
    "status_after",
    "seq",
    "prev_hash",
    "entry_hash",
)
"""Columns of the reviews export (``what="reviews"``), in order."""

_RISKY_FIRST = ("=", "+", "-", "@", "\t", "\r")


def neutralise_cell(text: str) -> str:
    """Make a text cell inert in spreadsheets.

    A cell starting with =, +, -, @, tab or carriage return gets a leading apostrophe (OWASP
    "CSV Injection" guidance).

    Examples
    --------
    >>> neutralise_cell("=HYPERLINK(1)")
    "'=HYPERLINK(1)"
    """
    return "'" + text if text.startswith(_RISKY_FIRST) else text


def _plain(value: object) -> object:
    return value.isoformat() if isinstance(value, (date, datetime)) else value


def explanation_facts(stored: str | None) -> dict[str, object]:
    """The main facts of a stored explanation, keyed by :data:`EXPLANATION_COLUMNS` (None where absent).

    Parameters
    ----------
    stored : str or None
        The explanation's JSON as archived with the alert.

    Returns
    -------
    dict
        Scale, cluster counts, merges and splits, the pair whose correlation changed most
        (``A~B`` and its change), assets that entered or left (space-separated), the number of
        loops and the most persistent loop (assets joined by ``-``) with its persistence.

    Raises
    ------
    DataError
        If ``stored`` is not an explanation (see :meth:`Explanation.from_json`).
    """
    facts: dict[str, object] = dict.fromkeys(EXPLANATION_COLUMNS)
    if not stored:
        return facts
    explanation = Explanation.from_json(stored)
    clusters = explanation.clusters
    if clusters is not None:
        top = clusters.pair_changes[0] if clusters.pair_changes else None
        facts.update(
            explanation_previous_end=_plain(clusters.previous_end),
            explanation_scale=clusters.scale,
            explanation_clusters_before=len(clusters.clusters_before),
            explanation_clusters_after=len(clusters.clusters_after),
            explanation_merges=len(clusters.merged),
            explanation_splits=len(clusters.split),
            explanation_top_pair=None if top is None else f"{top.first}~{top.second}",
            explanation_top_pair_change=None if top is None else top.change,
            explanation_entered=" ".join(clusters.entered),
            explanation_left=" ".join(clusters.left),
        )
    loops = explanation.loops
    if loops is not None:
        strongest = max(loops.loops, key=lambda loop: loop.persistence, default=None)
        facts.update(
            explanation_loops=len(loops.loops),
            explanation_top_loop=None if strongest is None else "-".join(strongest.members),
            explanation_top_loop_persistence=None if strongest is None else strongest.persistence,
        )
    return facts


def _alert_row(item: QueueItem, known_at: str) -> dict[str, object]:
    alert, last = item.alert, item.last_review
    row: dict[str, object] = {"caution": CAUTION, "known_at": known_at}
    for name in EXPORT_COLUMNS:
        if hasattr(alert, name):
            row[name] = _plain(getattr(alert, name))
    row.update(
        status=item.status,
        reviews=item.n_reviews,
        last_action=None if last is None else last.action,
        last_reviewer=None if last is None else last.reviewer,
        last_reviewed_at=None if last is None else last.created_at.isoformat(),
    )
    row.update(explanation_facts(alert.explanation))
    row["explanation_json"] = alert.explanation
    return {name: row.get(name) for name in EXPORT_COLUMNS}


def export_rows(items: Sequence[QueueItem], known_at: str = CURRENT_KNOWLEDGE) -> list[dict[str, object]]:
    """One record per alert, keys in :data:`EXPORT_COLUMNS` order, dates as ISO text, None where empty.

    Parameters
    ----------
    items : sequence of QueueItem
        The alerts with their status.
    known_at : str
        The knowledge the records show (:func:`knowledge_label`).

    Returns
    -------
    list of dict
    """
    return [_alert_row(item, known_at) for item in items]


def review_rows(
    items: Sequence[QueueItem], reviews: Sequence[ReviewRecord], known_at: str = CURRENT_KNOWLEDGE
) -> list[dict[str, object]]:
    """One record per review (ledger order), keys in :data:`REVIEW_COLUMNS` order.

    Parameters
    ----------
    items : sequence of QueueItem
        The alerts the reviews are of.
    reviews : sequence of ReviewRecord
        The reviews (of other alerts: left out).
    known_at : str
        The knowledge the records show (:func:`knowledge_label`).

    Returns
    -------
    list of dict
    """
    alerts = {item.alert.id: item.alert for item in items}
    so_far: dict[int, list[ReviewRecord]] = {}
    rows = []
    for review in sorted(reviews, key=lambda r: r.seq):
        alert = alerts.get(review.alert_id)
        if alert is None:
            continue
        history = so_far.setdefault(review.alert_id, [])
        history.append(review)
        rows.append(
            {
                "caution": CAUTION,
                "known_at": known_at,
                "review_id": review.id,
                "alert_id": alert.id,
                "portfolio": alert.portfolio,
                "window_end": alert.window_end.isoformat(),
                "rule": alert.rule,
                "severity": alert.severity,
                "action": review.action,
                "reviewer": review.reviewer,
                "comment": review.comment,
                "created_at": review.created_at.isoformat(),
                "status_after": status_of(history),
                "seq": review.seq,
                "prev_hash": review.prev_hash,
                "entry_hash": review.entry_hash,
            }
        )
    return rows


def _csv_cell(value: object) -> object:
    if value is None:
        return ""
    if isinstance(value, str):
        return neutralise_cell(value)
    if isinstance(value, float):
        return repr(value)
    return value


def _to_csv(columns: Sequence[str], rows: Sequence[Mapping[str, object]]) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(columns)
    for row in rows:
        writer.writerow([_csv_cell(row[name]) for name in columns])
    return buffer.getvalue()


def _to_jsonl(rows: Sequence[Mapping[str, object]]) -> str:
    lines = []
    for row in rows:
        record: dict[str, Any] = dict(row)
        if "explanation_json" in record:
            stored = record.pop("explanation_json")
            record["explanation"] = None if not stored else json.loads(str(stored))
        lines.append(json.dumps(record, ensure_ascii=False, allow_nan=False) + "\n")
    return "".join(lines)


def export_alerts(
    store: Store,
    fmt: Literal["csv", "jsonl"],
    *,
    what: ExportWhat = "alerts",
    start: object = None,
    end: object = None,
    portfolio: str | Sequence[str] | None = None,
    status: str | Sequence[str] | None = None,
    since: object = None,
    until: object = None,
    as_known_at: object = None,
) -> str:
    """The export of the alerts (or their reviews) whose window ends fall in [start, end], as text.

    Parameters
    ----------
    store : Store
    fmt : {"csv", "jsonl"}
        CSV (header first, text cells neutralised for spreadsheets, floats exact) or JSON Lines.
    what : {"alerts", "reviews"}
        One record per alert, or one per review.
    start, end : date-like, optional
        Bounds on the window end (inclusive).
    portfolio, status : str or sequence of str, optional
        Only these portfolios / statuses (repeats or comma-separated text).
    since, until : date-like, optional
        Deprecated names of ``start`` and ``end`` (a :class:`DeprecationWarning`).
    as_known_at : datetime or str, optional
        Export exactly what riskshape showed at that moment (ISO 8601 with a timezone); stated in
        every record's ``known_at``.

    Returns
    -------
    str
        See the module notes for the layout.

    Raises
    ------
    DataError
        If ``what`` or ``fmt`` is unknown, a date or ``as_known_at`` unreadable or ``start`` after ``end``.
    NotFoundError
        If a portfolio is given and not archived.
    """
    if what not in ("alerts", "reviews"):
        raise DataError(f"what: {what!r} is not one of alerts, reviews")
    if fmt not in ("csv", "jsonl"):
        raise DataError(f"format: {fmt!r} is not one of csv, jsonl")
    first = pick_alias("start", start, since=since)
    last = pick_alias("end", end, until=until)
    known_at = to_known_at(as_known_at)
    names = split_names(portfolio)
    for name in names or ():
        store.get_portfolio(name)
    page = list_queue(store, status=status, portfolio=names, start=first, end=last, limit=None, as_known_at=known_at)
    items = sorted(page.items, key=lambda i: (i.alert.window_end, i.alert.id))
    label = knowledge_label(known_at)
    columns: Sequence[str]
    if what == "alerts":
        columns, rows = EXPORT_COLUMNS, export_rows(items, label)
    else:
        reviews = store.list_reviews([i.alert.id for i in items], as_known_at=known_at) if items else ()
        columns, rows = REVIEW_COLUMNS, review_rows(items, reviews, label)
    return _to_csv(columns, rows) if fmt == "csv" else _to_jsonl(rows)
