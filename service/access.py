"""The read side of the service: one function per question, each over the archive's public API.

Routes stay thin and call these; where the archive lacks a method, the stand-in lives here (and
says so) so that pointing at the archive later changes one function.
"""

from __future__ import annotations

import csv
import io
import json
from dataclasses import dataclass
from datetime import date

import pandas as pd

from riskshape.alerts.rules import RuleState, rule_states
from riskshape.caution import CAUTION
from riskshape.cli.alerts import EXPORT_COLUMNS, neutralise_cell
from riskshape.config import Config
from riskshape.errors import DataError
from riskshape.store import AlertRecord, FeaturesPage, Head, Store, chain_head
from service.ingest import portfolio_config

__all__ = ["LatestState", "latest_state", "series_page", "known_columns", "store_status", "export_alerts",
           "frame_rows"]


@dataclass(frozen=True)
class LatestState:
    """A portfolio's last window, its summaries, where each rule stands, and the active alerts."""

    portfolio: str
    config_hash: str | None
    n_windows: int
    window_end: date | None
    values: dict[str, float]
    rules: tuple[RuleState, ...]
    active_alerts: tuple[AlertRecord, ...]


def latest_state(store: Store, portfolio: str, default: Config) -> LatestState:
    """The latest state of ``portfolio`` (its last archived window under its latest configuration).

    Active alerts are the archived alerts whose rule is still active -- fired and not cleared --
    at the last window (:func:`riskshape.alerts.rules.rule_states` over the archived series).

    Raises
    ------
    NotFoundError
        If the portfolio does not exist.
    """
    store.get_portfolio(portfolio)
    config, run = portfolio_config(store, portfolio, default)
    if run is None:
        return LatestState(portfolio, None, 0, None, {}, (), ())
    page = store.read_features(portfolio, config_hash=run.config_hash)
    frame = page.frame
    if frame.empty:
        return LatestState(portfolio, run.config_hash, 0, None, {}, (), ())
    rules = tuple(r for r in config.alerts.rules if r.summary in frame.columns)
    states = rule_states(frame, rules) if rules else ()
    active: list[AlertRecord] = []
    for state in states:
        if state.active and state.active_since is not None:
            found = store.list_alerts(portfolio=portfolio, rule=state.rule, since=state.active_since.date(),
                                      until=state.active_since.date(), limit=None).items
            active.extend(a for a in found if a.config_hash == run.config_hash)
    last = frame.iloc[-1]
    return LatestState(
        portfolio=portfolio, config_hash=run.config_hash, n_windows=page.total,
        window_end=frame.index[-1].date(), values={str(k): float(v) for k, v in last.items()},
        rules=states, active_alerts=tuple(active),
    )  # fmt: skip


def known_columns(store: Store, portfolio: str) -> list[str]:
    """The summary columns archived for the portfolio's latest configuration (empty before its first window)."""
    return list(store.read_features(portfolio, limit=1).frame.columns)


def series_page(store: Store, portfolio: str, *, start: date | None, end: date | None, columns: list[str] | None,
                limit: int, offset: int) -> FeaturesPage:
    """A page of the summaries series; an unknown summary name is a DataError naming the known ones."""
    store.get_portfolio(portfolio)
    if columns:
        known = known_columns(store, portfolio)
        unknown = [c for c in columns if c not in known]
        if unknown and known:
            raise DataError(f"query 'summaries': no summary {unknown[0]!r}; archived summaries are {', '.join(known)}")
        if unknown:
            columns = None
    return store.read_features(portfolio, start=start, end=end, columns=columns, limit=limit, offset=offset)


def store_status(store: Store) -> Head:
    """A cheap round trip to the archive (its ledger head); raises StoreError when it cannot be read."""
    return chain_head(store)


# -- export (stand-in: the CLI renders the same export in riskshape.cli.alerts with a private helper; a
# library function both could call would replace this) ----------------------------------------------
def _export_row(store: Store, alert: AlertRecord) -> dict[str, object]:
    reviews = store.get_alert(alert.id).reviews
    row: dict[str, object] = {}
    for name in EXPORT_COLUMNS:
        if hasattr(alert, name):
            value = getattr(alert, name)
            row[name] = value.isoformat() if isinstance(value, date) else value
    row["reviews"] = len(reviews)
    row["last_review"] = reviews[-1].action if reviews else ""
    return {name: row[name] for name in EXPORT_COLUMNS}


def export_alerts(store: Store, fmt: str, *, since: date | None, until: date | None,
                  portfolio: str | None) -> str:
    """Alerts for review as CSV or JSON Lines, the caution first; CSV text cells neutralised."""
    if portfolio is not None:
        store.get_portfolio(portfolio)
    rows = [_export_row(store, a) for a in store.list_alerts(portfolio=portfolio, since=since, until=until,
                                                              limit=None).items]
    buffer = io.StringIO()
    if fmt == "csv":
        writer = csv.writer(buffer, lineterminator="\n")
        writer.writerow([f"# {CAUTION}"])
        writer.writerow(EXPORT_COLUMNS)
        for row in rows:
            writer.writerow([neutralise_cell(v) if isinstance(v, str) else repr(v) if isinstance(v, float) else v
                             for v in row.values()])
    else:
        buffer.write(json.dumps({"caution": CAUTION}) + "\n")
        for row in rows:
            buffer.write(json.dumps(row, ensure_ascii=False, allow_nan=False) + "\n")
    return buffer.getvalue()


def frame_rows(frame: pd.DataFrame) -> list[tuple[date, list[float]]]:
    """The rows of a features frame as (window end, values)."""
    return [(stamp.date(), [float(v) for v in values]) for stamp, values in zip(frame.index, frame.to_numpy(dtype=float))]
