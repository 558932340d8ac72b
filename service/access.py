"""The read side of the service: one function per question, each over the archive's public API.

Routes stay thin and call these; where the archive lacks a method, the stand-in lives here (and
says so) so that pointing at the archive later changes one function.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date, datetime

import pandas as pd

from riskshape import Config
from riskshape.alerts import RuleState, rule_states
from riskshape.daily import DayStatus, pending_days
from riskshape.store import AlertRecord, ChangeMarker, FeaturesPage, Head, Store, chain_head
from riskshape_service.snapshots import Snapshot, Snapshots

__all__ = [
    "LatestState",
    "latest_state",
    "latest_state_known_at",
    "series_page",
    "store_status",
    "pending",
    "snapshot_known_at",
]


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


def latest_state(store: Store, portfolio: str, snapshots: Snapshots, marker: ChangeMarker) -> LatestState:
    """The latest state of ``portfolio`` (its last archived window under its latest configuration).

    Active alerts are the archived alerts whose rule is still active -- fired and not cleared --
    at the last window (:func:`riskshape.alerts.rules.rule_states` over the archived series).
    ``marker`` is the portfolio's change marker, read when the request arrived.

    Raises
    ------
    NotFoundError
        If the portfolio does not exist.
    """
    snapshot = snapshots.get(store, portfolio, marker)
    head = (marker.ledger_count, marker.ledger_hash)
    held = snapshot.latest.get(head)
    if isinstance(held, LatestState):
        return held
    made = _state_of(store, portfolio, snapshot, None)
    snapshot.latest = {head: made}
    return made


def snapshot_known_at(store: Store, portfolio: str, known_at: datetime, default_config: Config) -> Snapshot:
    """The portfolio's series as riskshape showed it at ``known_at`` (not kept: read for one request).

    Raises
    ------
    NotFoundError
        If the portfolio does not exist.
    """
    run = store.latest_run(portfolio, as_known_at=known_at)
    if run is None:
        return Snapshot(None, default_config, pd.DataFrame(index=pd.DatetimeIndex([], name="window_end")))
    config = Config.from_mapping(run.config, where=f"run {run.id} of portfolio {portfolio!r}")
    frame = store.read_features(portfolio, config_hash=run.config_hash, as_known_at=known_at).frame
    return Snapshot(run, config, frame)


def _state_of(store: Store, portfolio: str, snapshot: Snapshot, known_at: datetime | None) -> LatestState:
    """The latest state of a snapshot's series, with the alerts archived (by ``known_at``, if given)."""
    run, frame = snapshot.run, snapshot.frame
    if run is None or frame.empty:
        return LatestState(portfolio, None if run is None else run.config_hash, 0, None, {}, (), ())
    rules = tuple(r for r in snapshot.config.alerts.rules if r.summary in frame.columns)
    states = rule_states(frame, rules) if rules else ()
    active: list[AlertRecord] = []
    for state in states:
        if state.active and state.active_since is not None:
            day = state.active_since.date()
            found = store.list_alerts(
                portfolio=portfolio, rule=state.rule, since=day, until=day, limit=None, as_known_at=known_at
            ).items
            active.extend(a for a in found if a.config_hash == run.config_hash)
    last = frame.iloc[-1]
    return LatestState(
        portfolio=portfolio,
        config_hash=run.config_hash,
        n_windows=len(frame),
        window_end=frame.index[-1].date(),
        values={str(k): float(v) for k, v in last.items()},
        rules=states,
        active_alerts=tuple(active),
    )


def latest_state_known_at(store: Store, portfolio: str, known_at: datetime, default_config: Config) -> LatestState:
    """The latest state of ``portfolio`` exactly as riskshape showed it at ``known_at``.

    Raises
    ------
    NotFoundError
        If the portfolio does not exist.
    """
    return _state_of(store, portfolio, snapshot_known_at(store, portfolio, known_at, default_config), known_at)


def series_page(
    store: Store,
    portfolio: str,
    snapshots: Snapshots,
    marker: ChangeMarker,
    *,
    start: date | None,
    end: date | None,
    columns: list[str] | None,
    limit: int,
    offset: int,
) -> FeaturesPage:
    """A page of the summaries series; an unknown summary name is a DataError naming the known ones."""
    return snapshots.get(store, portfolio, marker).page(
        start=start, end=end, columns=columns, limit=limit, offset=offset
    )


def store_status(store: Store) -> Head:
    """A cheap round trip to the archive (its ledger head); raises StoreError when it cannot be read."""
    return chain_head(store)


def pending(store: Store, portfolio: str, known_at: datetime | None = None) -> tuple[DayStatus, ...]:
    """The portfolio's pending days (archived, not counting yet), oldest first.

    With ``known_at``, those riskshape showed at that moment (see :func:`riskshape.daily.pending_days`).

    Raises
    ------
    NotFoundError
        If the portfolio does not exist.
    """
    return pending_days(store, portfolio, as_known_at=known_at)
