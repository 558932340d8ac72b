"""A new day from the tail alone: the state a day needs kept in the archive, and the run that archives its windows.

The windows of a new day need the tail of the prices and the previous window's diagrams
(:mod:`riskshape.daily.tail`); its alerts need the rules' carry and the ``lookback`` feature rows
before the new windows (:mod:`riskshape.alerts.carry`). What is left is where the series stands:
how many price dates count, through which day. :class:`DayState` holds the three (carry, count,
day) as of one run; it is kept in the archive as a chained ``day_state`` record after every run
of the daily loop, so a restarted service takes the same bounded path as a warm one.

A state is used only when it belongs to the portfolio's latest run (same run id and
configuration hash); any other run (``riskshape run``, a run archived by an older version) makes
the next day rebuild it from the whole history once (:meth:`riskshape.daily.Ingestor.ingest`'s
full path), after which the days are bounded again.

:func:`archive_tail_run` is the one place a tail is archived: a run over the tail's prices (its
manifest's input hash is theirs), the new windows' features and diagrams, the alerts the carry
raises -- the same records a full run over the whole history archives for those windows -- and
the state after them.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from datetime import date, datetime, timezone

import numpy as np
import pandas as pd

from riskshape.alerts.carry import RulesCarry, advance_rules, carry_rules, lookback_needed
from riskshape.alerts.model import Firing
from riskshape.archive import alerts_for
from riskshape.compute import window_end_positions
from riskshape.compute.monitor import MonitorResult
from riskshape.compute.returns import to_returns
from riskshape.config import Config
from riskshape.daily.tail import Tail, read_tail, tail_span, tail_windows
from riskshape.errors import DataError, StoreError
from riskshape.prices import ValidPrices, hash_prices
from riskshape.store import AlertRecord, EventRecord, Run, RunManifest, Store, WriteCount
from riskshape.store.pricebook import INDEX_UNIT
from riskshape.store.series import BAR_DTYPE
from riskshape.store.tails import DAY_STATE_KIND, DayTail, decode_tail, encode_tail, tail_digest

__all__ = [
    "DAY_STATE",
    "DayState",
    "TailRun",
    "read_day_state",
    "save_day_state",
    "state_after_full_run",
    "recarry",
    "kept_tail",
    "archive_tail_run",
    "EXPLAIN_CONTEXT",
]

DAY_STATE = DAY_STATE_KIND
"""Kind of the chained record of a portfolio's state after a run (subject: the last counted day)."""

EXPLAIN_CONTEXT = 61
"""Windows before an alert's window that its explanation reads (:func:`riskshape.explain.explain_alert`
with its defaults looks 60 windows back for loops and ``ceil(window / step)`` for the disjoint window);
with one more, the explanation is the one a full run gives."""


@dataclass(frozen=True)
class DayState:
    """Where a portfolio's series stands after a run: all a new day needs besides the tail.

    Attributes
    ----------
    run_id : int
        The run it was saved after (the state is used only while that run is the latest).
    config_hash : str
        The configuration of the series.
    first_date : datetime.date
        The portfolio's first counted price date.
    counted_through : datetime.date
        The last counted price date (days after it are new or pending).
    n_prices : int
        Counted price dates through ``counted_through``.
    carry : RulesCarry
        The rules' carry after the last archived window.
    tail_digest : str or None
        SHA-256 of the portfolio's day tail row kept with this state (:mod:`riskshape.store.tails`),
        or None when none was kept (the next day reads the archive).
    """

    run_id: int
    config_hash: str
    first_date: date
    counted_through: date
    n_prices: int
    carry: RulesCarry
    tail_digest: str | None = None

    def to_data(self) -> dict[str, object]:
        """Plain JSON data for the chained record.

        Returns
        -------
        dict
        """
        return {
            "run": self.run_id,
            "config_hash": self.config_hash,
            "first_date": self.first_date.isoformat(),
            "counted_through": self.counted_through.isoformat(),
            "n_prices": self.n_prices,
            "carry": self.carry.to_data(),
            **({"tail": self.tail_digest} if self.tail_digest is not None else {}),
        }


def read_day_state(store: Store, portfolio: str, run: Run) -> DayState | None:
    """The portfolio's saved state, if it belongs to ``run`` (its latest run); else None.

    Parameters
    ----------
    store : Store
        The archive.
    portfolio : str
        The portfolio.
    run : Run
        Its latest run.

    Returns
    -------
    DayState or None
        None when none was saved after ``run`` (the caller rebuilds it from the whole history).
    """
    event = store.latest_event(DAY_STATE, portfolio)
    if event is None:
        return None
    data = event.data
    try:
        state = DayState(
            run_id=int(str(data["run"])),
            config_hash=str(data["config_hash"]),
            first_date=date.fromisoformat(str(data["first_date"])),
            counted_through=date.fromisoformat(str(data["counted_through"])),
            n_prices=int(str(data["n_prices"])),
            carry=RulesCarry.from_data(data["carry"]),  # type: ignore[arg-type]
            tail_digest=None if data.get("tail") is None else str(data["tail"]),
        )
    except (KeyError, TypeError, ValueError, DataError):
        return None
    if state.run_id != run.id or state.config_hash != run.config_hash:
        return None
    return state


def save_day_state(store: Store, portfolio: str, state: DayState) -> EventRecord:
    """Append the state as a chained ``day_state`` record.

    Parameters
    ----------
    store : Store
        The archive.
    portfolio : str
        The portfolio.
    state : DayState
        After its latest run.

    Returns
    -------
    EventRecord
    """
    return store.append_event(
        DAY_STATE, state.to_data(), portfolio=portfolio, subject=state.counted_through.isoformat(), actor="riskshape"
    )


def state_after_full_run(run: Run, result: MonitorResult, config: Config) -> DayState:
    """The state after a run archived from a whole history (``result`` covers every counted day).

    Parameters
    ----------
    run : Run
        The run that archived ``result``.
    result : MonitorResult
        The whole history's result.
    config : Config
        Its configuration.

    Returns
    -------
    DayState
    """
    return DayState(
        run_id=run.id,
        config_hash=config.hash(),
        first_date=result.prices.index[0].date(),
        counted_through=result.prices.index[-1].date(),
        n_prices=len(result.prices),
        carry=carry_rules(result.features, config.alerts.rules),
    )


def recarry(store: Store, portfolio: str, run: Run, state: DayState, config: Config) -> DayState:
    """The state after a correction's run: the same days, the carry rebuilt from the archived series.

    A correction may change windows anywhere, and the rules' state machine carries their effect
    forward, so the carry is made again from the features series (the windows' summaries, not the
    prices).

    Parameters
    ----------
    store : Store
    portfolio : str
    run : Run
        The correction's run (now the latest).
    state : DayState
        The state before the correction.
    config : Config

    Returns
    -------
    DayState
    """
    watched = sorted({rule.summary for rule in config.alerts.rules})
    series = store.read_features(portfolio, config_hash=config.hash(), columns=watched or None).frame
    return DayState(
        run_id=run.id,
        config_hash=state.config_hash,
        first_date=state.first_date,
        counted_through=state.counted_through,
        n_prices=state.n_prices,
        carry=carry_rules(series, config.alerts.rules),
    )


@dataclass(frozen=True)
class TailRun:
    """What :func:`archive_tail_run` archived."""

    run: Run
    features: WriteCount
    diagrams: WriteCount
    alerts: tuple[AlertRecord, ...]
    windows_computed: int
    window_ends: pd.DatetimeIndex
    state: DayState


def _tail_result(tail: Tail, config: Config) -> MonitorResult:
    """The new windows as a result over the tail's prices (their returns, diagrams and inputs)."""
    ends, windows = tail_windows(tail, config)
    prices = ValidPrices.of_validated_parts(tail.prices)
    return MonitorResult(
        config=config,
        prices=prices,
        returns=to_returns(prices, config.returns),
        window_ends=ends,
        windows=tuple(windows),
    )


def _past_features(store: Store, portfolio: str, config: Config, state: DayState) -> pd.DataFrame:
    """The feature rows of the last ``lookback`` archived windows (what the carry needs), in one bounded query."""
    need = min(lookback_needed(config.alerts.rules), state.carry.windows)
    watched = sorted({rule.summary for rule in config.alerts.rules})
    if not need or not watched:
        return pd.DataFrame(columns=watched, index=pd.DatetimeIndex([], name="window_end"), dtype=float)
    past = store.last_features(
        portfolio, end=state.counted_through, count=need, columns=watched, config_hash=config.hash()
    )
    if len(past) != need or (state.carry.window_end is not None and past.index[-1].date() != state.carry.window_end):
        raise DataError(
            f"portfolio {portfolio!r}: {len(past)} archived window(s) through {state.counted_through}, {need} "
            "expected before the new ones; the archive's series does not match its saved state"
        )
    return past


def kept_tail(store: Store, portfolio: str, state: DayState) -> DayTail | None:
    """The day tail saved with ``state``, or None (none saved, or its row is not the one the state names).

    Parameters
    ----------
    store : Store
    portfolio : str
    state : DayState
        The portfolio's state (its latest run's).

    Returns
    -------
    DayTail or None
        None sends the day to the archive's rows (which give the same values, more slowly).
    """
    if state.tail_digest is None:
        return None
    stored = store.day_tail(portfolio)
    if stored is None or stored.run_id != state.run_id or stored.digest != state.tail_digest:
        return None
    if tail_digest(stored.payload) != state.tail_digest:  # the row's bytes were changed after it was saved
        return None
    try:
        kept = decode_tail(stored.payload)
    except StoreError:
        return None
    last = kept.prices.index[-1].date() if len(kept.prices) else None
    if last != state.counted_through or kept.first_row + len(kept.prices) != state.n_prices:
        return None
    return kept


def _kept_features(kept: DayTail, config: Config, state: DayState) -> pd.DataFrame | None:
    """The lookback rows before the new windows from the kept tail (None: read the archive)."""
    need = min(lookback_needed(config.alerts.rules), state.carry.windows)
    watched = sorted({rule.summary for rule in config.alerts.rules})
    features = kept.features
    if not need or not watched or list(features.columns) != watched or len(features) < need:
        return None
    if state.carry.window_end is not None and features.index[-1].date() != state.carry.window_end:
        return None
    return features.iloc[len(features) - need :]


def _next_tail(
    tail: Tail, past: pd.DataFrame | None, result: MonitorResult, config: Config, after: DayState
) -> bytes | None:
    """The day tail the next day reads: this tail's prices and the lookback after the new windows.

    None (no row kept; the next day reads the archive) when the day computed no window or a
    watched column is not float64.
    """
    if past is None or not len(result.window_ends):
        return None
    watched = list(past.columns)
    computed = result.features
    if any(str(past[c].dtype) != "float64" or str(computed[c].dtype) != "float64" for c in watched):
        return None
    keep = min(lookback_needed(config.alerts.rules), after.carry.windows)
    ends = past.index.append(pd.DatetimeIndex(result.window_ends).as_unit(INDEX_UNIT))
    columns = {}
    for c in watched:
        new = computed[c].to_numpy(dtype=np.float64)
        new = np.where(np.isfinite(new), new, np.nan)  # the archive keeps a non-finite summary as null: NaN
        columns[c] = np.concatenate([past[c].to_numpy(), new])[len(ends) - keep :]
    features = pd.DataFrame(columns, index=ends[len(ends) - keep :].rename("window_end"))
    last = result.window_ends[-1]
    diagrams = tuple(  # as the archive keeps them (float32 bars), so as a day reading them gets them
        np.asarray(result.diagram(last, k), dtype=float).astype(BAR_DTYPE) for k in range(config.maxdim + 1)
    )
    tail_kept = DayTail(
        first_row=tail.span.first_row, prices=tail.prices, features=features, diagram_end=last.date(), diagrams=diagrams
    )
    return encode_tail(tail_kept)


def archive_tail_run(
    store: Store,
    portfolio: str,
    tail: Tail,
    config: Config,
    state: DayState,
    through: date,
    *,
    source: str | None = None,
    raised_at: datetime | None = None,
    explain: bool = True,
    kept: DayTail | None = None,
) -> TailRun:
    """Archive the windows the tail completes, the alerts they raise, and the state after them.

    Parameters
    ----------
    store : Store
        The archive.
    portfolio : str
        The portfolio.
    tail : Tail
        From :func:`riskshape.daily.tail.read_tail` for the new counted days (``first_row +
        n_rows`` of its span is the count of price dates now); when its span has no new window,
        its prices are the new days' (a run still records them).
    config : Config
        The portfolio's configuration (that of ``state``).
    state : DayState
        The state before the new days.
    through : datetime.date
        The last counted day now.
    source : str, optional
        Where the prices came from, kept in the manifest.
    raised_at : datetime, optional
        When the alerts are raised (UTC); defaults to now.
    explain : bool
        Archive each new alert's explanation inside its record.
    kept : DayTail, optional
        The portfolio's day tail saved with ``state`` (:func:`kept_tail`): its feature rows stand
        for the archive's lookback read.

    Returns
    -------
    TailRun
        After the new windows a day tail is kept for the next day (replacing the portfolio's row),
        and the state names its digest.

    Raises
    ------
    DataError
        If the archived series does not match the state (the caller rebuilds from the whole history).
    StoreError
        If the archive refuses a write.
    """
    n_now = tail.span.first_row + tail.span.n_rows
    result = _tail_result(tail, config)
    past = _kept_features(kept, config, state) if kept is not None and len(result.window_ends) else None
    if past is None and len(result.window_ends):
        past = _past_features(store, portfolio, config, state)
    firings, carry = (
        advance_rules(state.carry, past, result.features, config.alerts.rules)
        if past is not None
        else ([], state.carry)
    )
    manifest = RunManifest(
        config=config.to_mapping(),
        config_hash=config.hash(),
        input_hash=hash_prices(result.prices),
        package_version=result.package_version,
        source=source,
    )
    stamp = (raised_at or datetime.now(timezone.utc)).astimezone(timezone.utc)
    context = _context(store, portfolio, config, state, n_now, through, result, firings) if firings else result
    alerts = alerts_for(portfolio, firings, context, manifest.config_hash, stamp, explain=explain)
    # the writes: one transaction (issue 19: a run is seen whole or not at all; one commitment, one commit)
    with store.transaction():
        run = store.create_run(portfolio, manifest, result.prices, prices_archived=True)  # read from the archive
        features = diagrams = WriteCount(0, 0, 0)
        if len(result.window_ends):
            features = store.write_features(run.id, result.features)
            dims = range(config.maxdim + 1)
            diagrams = store.write_diagrams(
                run.id, ((end, k, result.diagram(end, k)) for end in result.window_ends for k in dims)
            )
        appended = store.append_alerts(alerts, run.id) if alerts else None  # no write (and no commit) for none
        after = DayState(
            run_id=run.id,
            config_hash=state.config_hash,
            first_date=state.first_date,
            counted_through=through,
            n_prices=n_now,
            carry=carry,
        )
        whole = features.added == len(result.window_ends) and not features.differing
        payload = _next_tail(tail, past, result, config, after) if whole else None
        if payload is not None:
            after = replace(after, tail_digest=store.save_day_tail(portfolio, run.id, payload))
        save_day_state(store, portfolio, after)
    return TailRun(
        run=run,
        features=features,
        diagrams=diagrams,
        alerts=appended.added if appended is not None else (),
        windows_computed=len(result.window_ends),
        window_ends=result.window_ends,
        state=after,
    )


def _context(
    store: Store,
    portfolio: str,
    config: Config,
    state: DayState,
    n_now: int,
    through: date,
    result: MonitorResult,
    firings: list[Firing],
) -> MonitorResult:
    """A result with :data:`EXPLAIN_CONTEXT` windows before the earliest firing (or every window before it).

    Only a day that raises an alert reads and computes these windows (their explanation looks back).
    """
    first_new = state.carry.windows
    earliest = first_new + int(result.window_ends.get_loc(min(f.window_end for f in firings)))
    context = max(EXPLAIN_CONTEXT, -(-config.window // config.step))
    start = max(0, earliest - context)
    if start >= first_new:
        return result
    ends = window_end_positions(n_now - 1, config.window, config.step)
    before = int(ends[start - 1]) + 2 if start else 0  # price dates whose windows end before window `start`
    span = tail_span(before, n_now, config)
    wider = read_tail(store, portfolio, list(result.prices.columns), span, through, config)
    return _tail_result(wider, config)
