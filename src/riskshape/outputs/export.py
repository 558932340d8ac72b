"""Alerts exported for review: CSV or JSON Lines, the caution first, every archived field and its hashes.

The CLI (``riskshape alerts export``) and the service (``GET /v1/export/alerts``) both call
:func:`export_alerts`, so a reviewer gets the same file either way.
"""

from __future__ import annotations

import csv
import io
import json
from datetime import date, datetime
from typing import Literal

from riskshape.caution import CAUTION
from riskshape.store import AlertRecord, Store
from riskshape.store.canonical import ALERT_FIELDS

__all__ = ["EXPORT_COLUMNS", "neutralise_cell", "export_rows", "export_alerts"]

EXPORT_COLUMNS = (
    ("id", "window_end")
    + tuple(f for f in ALERT_FIELDS if f not in ("id", "window_end"))
    + ("entry_hash", "reviews", "last_review")
)
"""Columns of an export: id and window end first, then every stored alert field, its hashes and review status."""

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


def export_rows(store: Store, alerts: tuple[AlertRecord, ...]) -> list[dict[str, object]]:
    """One dict per alert, keys in :data:`EXPORT_COLUMNS` order, dates as ISO text."""
    rows = []
    for alert in alerts:
        reviews = store.get_alert(alert.id).reviews
        row = {name: _plain(getattr(alert, name)) for name in EXPORT_COLUMNS if hasattr(alert, name)}
        row["reviews"] = len(reviews)
        row["last_review"] = reviews[-1].action if reviews else ""
        rows.append({name: row[name] for name in EXPORT_COLUMNS})
    return rows


def export_alerts(
    store: Store,
    fmt: Literal["csv", "jsonl"],
    *,
    since: object = None,
    until: object = None,
    portfolio: str | None = None,
) -> str:
    """The export of the alerts whose window ends fall in [since, until], as text.

    Parameters
    ----------
    store : Store
    fmt : {"csv", "jsonl"}
        CSV text cells are neutralised for spreadsheets; JSON Lines keeps every value as archived.
    since, until : date-like, optional
        Bounds on the window end (inclusive).
    portfolio : str, optional
        Only this portfolio.

    Returns
    -------
    str
        The caution line, then (CSV) a header and one row per alert, or (JSON Lines) one object each.

    Raises
    ------
    NotFoundError
        If ``portfolio`` is given and not archived.
    """
    if portfolio is not None:
        store.get_portfolio(portfolio)
    rows = export_rows(store, store.list_alerts(portfolio=portfolio, since=since, until=until, limit=None).items)
    buffer = io.StringIO()
    if fmt == "csv":
        writer = csv.writer(buffer, lineterminator="\n")
        writer.writerow([f"# {CAUTION}"])
        writer.writerow(EXPORT_COLUMNS)
        for row in rows:
            writer.writerow(
                [
                    neutralise_cell(v) if isinstance(v, str) else repr(v) if isinstance(v, float) else v
                    for v in row.values()
                ]
            )
    else:
        buffer.write(json.dumps({"caution": CAUTION}) + "\n")
        for row in rows:
            buffer.write(json.dumps(row, ensure_ascii=False, allow_nan=False) + "\n")
    return buffer.getvalue()
