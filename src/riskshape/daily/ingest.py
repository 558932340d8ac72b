"""Ingest: archive a portfolio's new prices, compute only the windows the counted days complete, raise alerts.

Policy (what the service's price endpoints and the command line apply):

* **Days count once complete** (:mod:`riskshape.daily.days`): a day's window is computed, and the
  rules evaluated on it, only once every listed asset has answered for it (a price, or a price
  sent as missing) or the day is closed (by hand with :meth:`Ingestor.close_day`, or by the
  ``[daily] close_share`` cut-off rule); until then its prices are archived and it is *pending*
  (:func:`pending_days`). Sending the rest of a pending day is an ordinary ingest. An asset that
  stopped trading is delisted (:meth:`Ingestor.delist`), so days after its last one do not wait
  for it. Closings and delistings are chained records (``day_closed``, ``asset_delisted``).
* **New days** that count are appended; the windows they complete are computed from the tail
  of the prices alone and archived with the alerts the rules' carry raises
  (:mod:`riskshape.daily.tail_run`: the day state kept after every run, so a restart takes the
  same bounded path). When the latest run has no day state (a run archived another way), the
  whole history is computed once (:meth:`riskshape.MonitorResult.update` on a result kept in
  memory, or :func:`riskshape.monitor` over the archived prices) and archived with
  :func:`riskshape.archive.archive_run`, and the state is saved for the next day.
* **Idempotent**: a day already archived with the same prices adds nothing; sending the same
  body twice adds no prices, windows, runs or alerts.
* **Revisions**: a price that differs from the archived one for a day that counts (or a price
  for a cell archived as missing there) is refused with 409, unless the request says
  ``correction=true``. A correction archives a new revision (the old one stays, and is listed
  as a correction) and supersedes the windows it is in (:mod:`riskshape.daily.corrections`: only
  those windows are recomputed and archived as a new version; earlier versions stay and are read
  with ``as_known_at``). A missing price never replaces an archived one. One price for one asset
  and one date is a valid body.
* A date **inside** the archived history that is not archived is refused (422): it was never a
  trading day of the portfolio, and windows count trading days.
* **Assets** are fixed by the portfolio's first prices (at least three), in name order: an
  unknown asset is refused (422); an asset left out of a day's body leaves the day pending.
* Until one window of history counts (``window + 1`` dates) prices are only archived.
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from dataclasses import dataclass, replace
from datetime import date, datetime

import numpy as np
import pandas as pd

from riskshape import Config, ConflictError, DataError, MonitorResult, NotFoundError, archive_run, monitor
from riskshape.compute import window_end_positions
from riskshape.daily.corrections import CorrectionReport, apply_corrections, revised_cells
from riskshape.daily.days import (
    CLOSED_BY_HAND,
    DayBook,
    DayStatus,
    closes_by_cut_off,
    cut_off_how,
    day_statuses,
    split_counted,
)
from riskshape.daily.tail import Tail, read_tail, tail_from_kept, tail_span
from riskshape.daily.tail_run import (
    DayState,
    archive_tail_run,
    kept_tail,
    read_day_state,
    recarry,
    save_day_state,
    state_after_full_run,
)
from riskshape.prices import MIN_ASSETS, ValidPrices
from riskshape.store import AlertRecord, Run, Store
from riskshape.store.presence import read_cells

__all__ = [
    "Ingestor",
    "IngestReport",
    "portfolio_config",
    "pending_days",
    "read_day_book",
    "DAY_CLOSED",
    "ASSET_DELISTED",
]

DAY_CLOSED = "day_closed"
"""Kind of the chained record of a closed day (subject: the date; data: who, how, missing assets)."""
ASSET_DELISTED = "asset_delisted"
"""Kind of the chained record of a delisting (subject: the asset; data: last trading day, who)."""


@dataclass(frozen=True)
class IngestReport:
    """What one ingest (or closing, or delisting) did.

    ``pending`` lists the days archived that do not count yet (oldest first), ``closed`` the days
    this call closed (by hand, or by the cut-off rule).
    """

    portfolio: str
    prices_added: int
    corrections: int
    unchanged: int
    windows_computed: int
    windows_added: int
    windows_differing: int
    first_window: date | None
    last_window: date | None
    alerts: tuple[AlertRecord, ...]
    run_id: int | None
    note: str
    pending: tuple[DayStatus, ...] = ()
    closed: tuple[date, ...] = ()


def _corrected(portfolio: str, fixed: CorrectionReport, unchanged: int) -> IngestReport:
    """The ingest's answer to a body of corrections only."""
    return IngestReport(
        portfolio=portfolio,
        prices_added=0,
        corrections=fixed.corrections,
        unchanged=unchanged,
        windows_computed=fixed.windows_recomputed,
        windows_added=0,
        windows_differing=fixed.windows_superseded,
        first_window=fixed.first_window,
        last_window=fixed.last_window,
        alerts=fixed.alerts_raised,
        run_id=fixed.run_id,
        note=fixed.note,
    )


def portfolio_config(store: Store, portfolio: str, default: Config) -> tuple[Config, Run | None]:
    """The configuration of the portfolio's latest run (``default`` before its first run).

    Parameters
    ----------
    store : Store
        The archive.
    portfolio : str
        The portfolio's name (NotFoundError if it is not archived).
    default : Config
        The configuration of a portfolio that has no run yet.

    Returns
    -------
    config, run : Config, Run or None
        The configuration in force, and the run it comes from (None before the first run).
    """
    run = store.latest_run(portfolio)
    if run is None:
        return default, None
    return Config.from_mapping(run.config, where=f"run {run.id} of portfolio {portfolio!r}"), run


def read_day_book(store: Store, portfolio: str, *, as_known_at: datetime | None = None) -> DayBook:
    """The portfolio's closed days and delistings, from their chained records.

    Parameters
    ----------
    store : Store
        The archive.
    portfolio : str
        The portfolio's name.
    as_known_at : datetime.datetime, optional
        Only the records chained at or before this moment (default: all of them).

    Returns
    -------
    DayBook
    """
    closed: dict[date, str] = {}
    for event in store.list_events(kind=DAY_CLOSED, portfolio=portfolio, as_known_at=as_known_at):
        closed[date.fromisoformat(str(event.subject))] = str(event.data.get("how", CLOSED_BY_HAND))
    delisted: dict[str, date] = {}
    for event in store.list_events(kind=ASSET_DELISTED, portfolio=portfolio, as_known_at=as_known_at):
        delisted[str(event.subject)] = date.fromisoformat(str(event.data["last_trading_day"]))
    return DayBook(closed=closed, delisted=delisted)


def _assets(store: Store, portfolio: str, run: Run | None) -> list[str]:
    if run is not None:
        return list(run.assets)
    return list(store.read_prices(portfolio).columns)


def pending_days(store: Store, portfolio: str, *, as_known_at: datetime | None = None) -> tuple[DayStatus, ...]:
    """The portfolio's pending days: archived after its latest run, not counting yet (oldest first).

    Parameters
    ----------
    store : Store
        The archive.
    portfolio : str
        The portfolio's name (NotFoundError if it is not archived).
    as_known_at : datetime.datetime, optional
        The pending days riskshape showed at this moment (timezone-aware): judged from the latest
        run, the prices and the chained day records (closings, delistings) recorded by then. A day
        pending then but complete or closed since is pending in this answer; a day whose first price
        came later is absent. Default: current knowledge.

    Returns
    -------
    tuple of DayStatus
        Each with the listed assets still missing (empty for a complete day waiting on an earlier one).
    """
    run = store.latest_run(portfolio, as_known_at=as_known_at)
    after = None if run is None else run.last_date
    cells = read_cells(store.engine, portfolio, after, as_known_at=as_known_at)
    # before the first run every cell is read: its assets are the archived ones (read_prices' columns)
    assets = list(run.assets) if run is not None else sorted({str(a) for a in cells["asset"]})
    book = read_day_book(store, portfolio, as_known_at=as_known_at)
    return split_counted(day_statuses(cells, assets, book))[1]


def _same_prices(a: pd.DataFrame, b: pd.DataFrame) -> bool:
    return (
        list(a.columns) == list(b.columns)
        and a.index.equals(b.index)
        and np.array_equal(a.to_numpy(dtype=float), b.to_numpy(dtype=float), equal_nan=True)
    )


@dataclass(frozen=True)
class _Plan:
    """The request's prices set against the archive."""

    table: pd.DataFrame  # the whole history with the request applied (corrections and fills included)
    sent: pd.DataFrame  # the request's cells, as they will be archived (only the assets it names)
    corrections: int
    unchanged: int


def _names(assets: list[str]) -> str:
    return ", ".join(assets[:8]) + (", ..." if len(assets) > 8 else "")


def _day(stamp: object) -> date:
    plain: date = pd.Timestamp(stamp).date()
    return plain


def _check_assets(portfolio: str, incoming: pd.DataFrame, held: pd.DataFrame, source: str) -> None:
    if len(held.columns):
        unknown = [a for a in incoming.columns if a not in held.columns]
        if unknown:
            j = list(incoming.columns).index(unknown[0])
            sent_on = incoming.index[incoming.iloc[:, j].notna().to_numpy()]
            day = _day(sent_on[0] if len(sent_on) else incoming.index[0])
            raise DataError(
                f"{source}: asset {unknown[0]!r} (date {day}) is not one of portfolio {portfolio!r}'s "
                f"{len(held.columns)} assets ({_names(list(held.columns))}); "
                "a portfolio's assets are fixed by its first prices -- check the asset's code, or create another "
                "portfolio for a new set of assets"
            )
    elif incoming.shape[1] < MIN_ASSETS:
        raise DataError(
            f"{source}: portfolio {portfolio!r} has no prices yet, and its first prices name {incoming.shape[1]} "
            f"asset(s) ({', '.join(incoming.columns)}) from date {_day(incoming.index[0])}; a portfolio's assets are "
            f"fixed by its first prices and at least {MIN_ASSETS} are needed -- send every asset of the portfolio"
        )


def _plan(
    portfolio: str,
    incoming: pd.DataFrame,
    held: pd.DataFrame,
    correction: bool,
    source: str,
    counted_until: date | None,
    book: DayBook,
    first_held: date | None = None,
    last_held: date | None = None,
) -> _Plan:
    _check_assets(portfolio, incoming, held, source)
    if not len(held.columns):  # a new portfolio: its assets in name order, however the first prices came
        incoming = incoming[sorted(incoming.columns)]
    columns = list(held.columns) if len(held.columns) else list(incoming.columns)
    for asset in incoming.columns:
        last = book.delisted.get(asset)
        if last is None:
            continue
        late = incoming.index[(incoming.index > pd.Timestamp(last)) & incoming[asset].notna().to_numpy()]
        if len(late):
            raise DataError(
                f"{source}: asset {asset!r} has a price on {_day(late[0])}, after its last trading day {last} "
                f"(it is delisted from portfolio {portfolio!r}); leave it out of days after {last}"
            )
    if len(held.index) or last_held is not None:
        # held may be only the body's span (the bounded path): then the archive's first and last dates are given
        first = first_held or _day(held.index[0])
        last_day = pd.Timestamp(last_held if last_held is not None else held.index[-1])
        inside = incoming.index[(incoming.index < last_day) & ~incoming.index.isin(held.index)]
        if len(inside):
            raise DataError(
                f"{source}: date {_day(inside[0])} (asset {incoming.columns[0]!r}) was never a trading day of "
                f"portfolio {portfolio!r}: it falls inside the archived history ({first} to "
                f"{_day(last_day)}) but has no prices there, and windows count trading days -- check the date; "
                f"only days after {_day(last_day)} can be added (rerun the portfolio over the full history to "
                "change its calendar)"
            )
    overlap = incoming.index.intersection(held.index)
    sent = incoming.loc[overlap].to_numpy(dtype=float)
    kept = held.loc[overlap, list(incoming.columns)].to_numpy(dtype=float) if len(overlap) else sent.copy()
    counted = (
        np.zeros(len(overlap), dtype=bool)
        if counted_until is None
        else np.asarray(overlap <= pd.Timestamp(counted_until), dtype=bool)
    )
    differs = ~np.isnan(sent) & ~(sent == kept)
    fills = differs & np.isnan(kept) & ~counted[:, None]  # the rest of a pending day: not a revision
    revised = differs & ~fills
    if revised.any() and not correction:
        i, j = np.argwhere(revised)[0]
        archived = "missing" if np.isnan(kept[i, j]) else f"{kept[i, j]:g}"
        raise ConflictError(
            f"{source}: asset {incoming.columns[j]!r} on {_day(overlap[i])}: archived {archived}, sent "
            f"{sent[i, j]:g} ({int(revised.sum())} price(s) differ from the archive); send revised prices with "
            "correction=true to archive them as corrections (the archived ones are kept)"
        )
    table = held.copy() if len(held.columns) else pd.DataFrame(columns=columns, dtype=float)
    if differs.any():
        table.loc[overlap, list(incoming.columns)] = np.where(differs, sent, kept)
    if len(overlap):  # a missing price never replaces an archived one: such a cell is sent as archived
        incoming = incoming.copy()
        incoming.loc[overlap] = np.where(np.isnan(sent) & ~np.isnan(kept), kept, sent)
    fresh = incoming.loc[incoming.index.difference(held.index)].reindex(columns=columns)
    if len(fresh):
        table = pd.concat([table, fresh]) if len(table) else fresh.copy()
    table.index.name = "date"
    table.columns.name = "asset"
    # every piece passed validation (the request at the edge, the archive's prices on their way in):
    # the tables made of them are marked so, and are not checked again downstream
    return _Plan(
        table=ValidPrices.of_validated_parts(table),
        sent=ValidPrices.of_validated_parts(incoming),
        corrections=int(revised.sum()),
        unchanged=int((~np.isnan(sent) & (sent == kept)).sum()),
    )


class Ingestor:
    """Ingests prices (see the module notes), keeping each portfolio's latest result in memory.

    Parameters
    ----------
    default_config : Config
        Configuration of a portfolio before its first run; its ``daily`` section (the cut-off
        rule) applies to every portfolio.
    cache_size : int
        Portfolios whose result is kept in memory (least recently used dropped first; see
        :class:`riskshape_service.settings.ServiceSettings`).
    """

    def __init__(self, default_config: Config, cache_size: int = 128) -> None:
        self.default_config = default_config
        self.cache_size = cache_size
        self._results: OrderedDict[str, MonitorResult] = OrderedDict()
        self._locks: dict[str, threading.Lock] = {}
        self._guard = threading.Lock()

    def _lock(self, portfolio: str) -> threading.Lock:
        with self._guard:
            return self._locks.setdefault(portfolio, threading.Lock())

    def _remember(self, portfolio: str, result: MonitorResult) -> None:
        with self._guard:
            self._results[portfolio] = result
            self._results.move_to_end(portfolio)
            while len(self._results) > self.cache_size:
                self._results.popitem(last=False)

    def _forget(self, portfolio: str) -> None:
        with self._guard:
            self._results.pop(portfolio, None)

    def forget(self, portfolio: str) -> None:
        """Drop what is kept in memory for ``portfolio`` (its writes were rolled back)."""
        self._forget(portfolio)

    def _cached(self, portfolio: str) -> MonitorResult | None:
        with self._guard:
            return self._results.get(portfolio)

    def ingest(
        self,
        store: Store,
        portfolio: str,
        prices: ValidPrices,
        *,
        correction: bool = False,
        source: str = "request body",
    ) -> IngestReport:
        """Archive ``prices`` for ``portfolio`` and compute the windows of the days that count.

        Parameters
        ----------
        store : Store
            The archive.
        portfolio : str
            An existing portfolio.
        prices : ValidPrices
            Validated wide prices (one asset and one date are enough for an existing portfolio).
        correction : bool
            Archive prices that differ from archived ones (on days that count) as corrections.
        source : str
            Where the prices came from, for messages and the run's manifest.

        Returns
        -------
        IngestReport

        Raises
        ------
        NotFoundError
            If the portfolio does not exist.
        ConflictError
            If a price differs from the archived one and ``correction`` is false.
        DataError
            If an asset is unknown or delisted by then, or a date falls inside the archived history.
        """
        with self._lock(portfolio):
            return self._advance(store, portfolio, prices, correction=correction, source=source)

    def try_ingest(
        self,
        store: Store,
        portfolio: str,
        prices: ValidPrices,
        *,
        correction: bool = False,
        source: str = "request body",
    ) -> IngestReport | None:
        """As :meth:`ingest`, but None at once (nothing done) while another caller ingests ``portfolio``.

        For a caller that holds the archive's write transaction across several portfolios
        (:func:`riskshape.daily.ingest_many`): waiting there for a portfolio's lock could wait on a
        caller that itself waits for the write lock.
        """
        lock = self._lock(portfolio)
        if not lock.acquire(blocking=False):
            return None
        try:
            return self._advance(store, portfolio, prices, correction=correction, source=source)
        finally:
            lock.release()

    def close_day(self, store: Store, portfolio: str, day: date, who: str) -> IngestReport:
        """Close a pending day by hand: it counts with the assets still absent missing there.

        Parameters
        ----------
        store : Store
        portfolio : str
        day : datetime.date
            A pending day of the portfolio.
        who : str
            Who closes it (archived in the chained ``day_closed`` record).

        Returns
        -------
        IngestReport
            What closing it computed (``closed`` holds the day).

        Raises
        ------
        NotFoundError
            If the portfolio has no prices on ``day``.
        ConflictError
            If the day counts already (complete, closed, or seen by a run).
        """
        with self._lock(portfolio):
            run = store.latest_run(portfolio)
            after = None if run is None else run.last_date
            book = read_day_book(store, portfolio)
            statuses = day_statuses(read_cells(store.engine, portfolio, after), _assets(store, portfolio, run), book)
            status = next((s for s in statuses if s.day == day), None)
            if status is None:
                if (
                    after is not None
                    and day <= after
                    and day in set(store.read_prices(portfolio, start=day, end=day).index.date)
                ):
                    raise ConflictError(
                        f"day {day} of portfolio {portfolio!r} counts already (its windows are computed); "
                        "nothing to close -- send corrected prices with correction=true to change it"
                    )
                raise NotFoundError(
                    f"portfolio {portfolio!r} has no prices on {day}; send that day's prices first, then close it"
                )
            if status.counts:
                how = "closed " + status.closed if status.closed else "complete"
                raise ConflictError(f"day {day} of portfolio {portfolio!r} is {how} already; nothing to close")
            store.append_event(
                DAY_CLOSED,
                {"who": who, "how": CLOSED_BY_HAND, "missing": list(status.missing)},
                portfolio=portfolio,
                subject=day.isoformat(),
                actor=who,
            )
            report = self._advance(store, portfolio, None, source=f"day {day} closed by {who}")
            return _with_closed(report, (day,))

    def delist(self, store: Store, portfolio: str, asset: str, last_day: date, who: str) -> IngestReport:
        """Mark an asset as no longer trading after ``last_day``: later days do not wait for it.

        Parameters
        ----------
        store : Store
        portfolio : str
        asset : str
            One of the portfolio's assets.
        last_day : datetime.date
            Its last trading day (its prices up to it stay; it is missing after it).
        who : str
            Who delists it (archived in the chained ``asset_delisted`` record).

        Returns
        -------
        IngestReport
            What the days it no longer holds back computed.

        Raises
        ------
        DataError
            If the asset is not the portfolio's, or has a price after ``last_day``.
        ConflictError
            If it is delisted already.
        """
        with self._lock(portfolio):
            run = store.latest_run(portfolio)
            assets = _assets(store, portfolio, run)
            if asset not in assets:
                raise DataError(
                    f"asset {asset!r} (last trading day {last_day}) is not one of portfolio {portfolio!r}'s assets "
                    f"({_names(assets)}); check the asset's code"
                )
            book = read_day_book(store, portfolio)
            if asset in book.delisted:
                raise ConflictError(
                    f"asset {asset!r} of portfolio {portfolio!r} is delisted already (last trading day "
                    f"{book.delisted[asset]}); nothing to do"
                )
            later = store.read_prices(portfolio, start=last_day + pd.Timedelta(days=1), assets=[asset])
            priced = later.index[later[asset].notna().to_numpy()]
            if len(priced):
                raise DataError(
                    f"asset {asset!r} of portfolio {portfolio!r} has a price on {_day(priced[0])}, after the last "
                    f"trading day given ({last_day}); give its real last trading day (on or after {_day(priced[-1])})"
                )
            store.append_event(
                ASSET_DELISTED,
                {"last_trading_day": last_day.isoformat(), "who": who},
                portfolio=portfolio,
                subject=asset,
                actor=who,
            )
            return self._advance(store, portfolio, None, source=f"asset {asset} delisted by {who}")

    def _advance(
        self,
        store: Store,
        portfolio: str,
        prices: pd.DataFrame | None,
        *,
        correction: bool = False,
        source: str = "request body",
    ) -> IngestReport:
        """Archive the prices (if any), close what the cut-off rule closes, compute the days that count."""
        store.get_portfolio(portfolio)
        config, run = portfolio_config(store, portfolio, self.default_config)
        state = None if run is None else read_day_state(store, portfolio, run)
        if run is not None and state is not None:
            with store.transaction():  # the day's prices, run, alerts and state: one commit
                bounded = self._advance_tail(store, portfolio, prices, config, run, state, correction, source)
            if bounded is not None:
                return bounded
        counted_until = None if run is None else run.last_date
        held = store.read_prices(portfolio, assets=None if run is None else run.assets)
        book = read_day_book(store, portfolio)
        added = corrections = unchanged = 0
        table = ValidPrices.of_validated_parts(held)
        fixed: CorrectionReport | None = None
        if prices is not None:
            plan = _plan(portfolio, prices, held, correction, source, counted_until, book)
            if plan.corrections and run is not None:
                fixed, run, state = self._correct(
                    store, portfolio, plan, held, config, run, state, source, counted_until
                )
                held = store.read_prices(portfolio, assets=list(run.assets))
            written = store.append_prices(portfolio, plan.sent, source=source)
            added = written.added + written.corrections - (0 if fixed is not None else plan.corrections)
            corrections, unchanged, table = plan.corrections, plan.unchanged, plan.table
        assets = list(table.columns)
        statuses = day_statuses(read_cells(store.engine, portfolio, counted_until), assets, book)
        closing = closes_by_cut_off(statuses, self.default_config.daily.close_share)
        closed_now: list[date] = []
        if closing:
            how = cut_off_how(float(self.default_config.daily.close_share or 0.0))
            for status in closing:
                store.append_event(
                    DAY_CLOSED,
                    {"who": "riskshape", "how": how, "missing": list(status.missing)},
                    portfolio=portfolio,
                    subject=status.day.isoformat(),
                    actor="riskshape",
                )
                closed_now.append(status.day)
            book = DayBook(closed={**book.closed, **{d: how for d in closed_now}}, delisted=book.delisted)
            statuses = day_statuses(read_cells(store.engine, portfolio, counted_until), assets, book)
        counted, pending = split_counted(statuses)
        through = counted[-1].day if counted else counted_until
        base = dict(
            portfolio=portfolio,
            prices_added=added,
            corrections=corrections,
            unchanged=unchanged,
            pending=pending,
            closed=tuple(closed_now),
        )
        usable = table.loc[: pd.Timestamp(through)] if through is not None else table.iloc[:0]
        n_returns = len(usable) - 1
        waiting = f"; {len(pending)} day(s) pending, from {pending[0].day}" if pending else ""
        if n_returns < config.window:
            note = f"{len(table)} date(s) archived; the first window needs {config.window + 1} that count{waiting}"
            return IngestReport(**base, **_no_windows(note))  # type: ignore[arg-type]
        expected = len(window_end_positions(n_returns, config.window, config.step))
        archived = len(store.window_ends(portfolio, config.hash()))
        if fixed is not None and (through is None or counted_until is None or through <= counted_until):
            return replace(_corrected(portfolio, fixed, unchanged), pending=pending, closed=tuple(closed_now))
        if (
            (not corrections or fixed is not None)
            and archived >= expected
            and (counted_until is not None and through is not None and through <= counted_until)
        ):
            note = "nothing new: every price was already archived with the same value" if not pending else ""
            note = note or f"prices archived; no day counts yet{waiting}"
            return IngestReport(**base, **_no_windows(note))  # type: ignore[arg-type]
        held_counted = held.loc[: pd.Timestamp(counted_until)] if counted_until is not None else held.iloc[:0]
        result, computed = self._result(
            portfolio,
            ValidPrices.of_validated_parts(usable),
            held_counted,
            0 if fixed is not None else corrections,
            config,
        )
        report = archive_run(  # the day state in the run's transaction: a crash leaves both or neither
            store,
            portfolio,
            result,
            config,
            source=source,
            with_run=lambda run: save_day_state(store, portfolio, state_after_full_run(run, result, config)),
        )
        self._remember(portfolio, result)
        n_added = report.features.added
        new_ends = result.window_ends[len(result.window_ends) - n_added :] if n_added else result.window_ends[:0]
        note = f"{n_added} window(s) added"
        if report.features.differing:
            note += (
                f"; {report.features.differing} archived window(s) would differ under the corrected prices "
                "and keep their archived values"
            )
        return IngestReport(
            **base,  # type: ignore[arg-type]
            windows_computed=computed,
            windows_added=n_added,
            windows_differing=report.features.differing,
            first_window=new_ends[0].date() if n_added else None,
            last_window=new_ends[-1].date() if n_added else None,
            alerts=report.alerts.added if fixed is None else fixed.alerts_raised + report.alerts.added,
            run_id=report.run.id,
            note=(note if fixed is None else f"{fixed.note}; {note}") + waiting,
        )

    def _correct(
        self,
        store: Store,
        portfolio: str,
        plan: _Plan,
        held: pd.DataFrame,
        config: Config,
        run: Run,
        state: DayState | None,
        source: str,
        counted_through: date | None,
    ) -> tuple[CorrectionReport, Run, DayState | None]:
        """The one path of a body's corrections, whichever path computes its new days.

        The corrections supersede the windows they touch, alone (:mod:`riskshape.daily.corrections`);
        the result kept in memory rests on the old prices, so it is dropped; the day state (when the
        portfolio keeps one) gets the rules' carry made again over the corrected series.

        Returns
        -------
        fixed, run, state : CorrectionReport, Run, DayState or None
            What the correction did, the portfolio's latest run after it, and its day state.
        """
        kept: list[DayState] = []

        def with_state(new_run: Run) -> None:  # committed with the correction, in its transaction
            if state is not None:
                kept.append(recarry(store, portfolio, new_run, state, config))
                save_day_state(store, portfolio, kept[0])

        fixed = apply_corrections(
            store,
            portfolio,
            revised_cells(plan.sent, held),
            config,
            run,
            source=source,
            counted_through=counted_through,
            also=with_state,
        )
        if fixed.run_id is not None:
            run = store.get_run(fixed.run_id)
            state = kept[0] if kept else state
        self._forget(portfolio)
        return fixed, run, state

    def _advance_tail(
        self,
        store: Store,
        portfolio: str,
        prices: pd.DataFrame | None,
        config: Config,
        run: Run,
        state: DayState,
        correction: bool,
        source: str,
    ) -> IngestReport | None:
        """The bounded path (:mod:`riskshape.daily.tail_run`): what the new days need, read from the tail.

        None (having written nothing) when the full path must run instead: the archived series does
        not match the saved state.
        """
        assets = list(run.assets)
        counted_until = state.counted_through
        book = read_day_book(store, portfolio)
        added = corrections = unchanged = 0
        fixed: CorrectionReport | None = None
        if prices is not None:
            pending_cells = read_cells(store.engine, portfolio, counted_until)
            last = max([counted_until, *pending_cells["date"]])
            held = store.read_prices(portfolio, start=prices.index.min(), end=prices.index.max(), assets=assets)
            plan = _plan(
                portfolio,
                prices,
                held,
                correction,
                source,
                counted_until,
                book,
                first_held=state.first_date,
                last_held=last,
            )
            if plan.corrections:
                fixed, run, kept = self._correct(
                    store, portfolio, plan, held, config, run, state, source, counted_until
                )
                state = kept if kept is not None else state
            written = store.append_prices(portfolio, plan.sent, source=source)
            added = written.added + written.corrections - (0 if fixed is not None else plan.corrections)
            corrections, unchanged = plan.corrections, plan.unchanged
        statuses = day_statuses(read_cells(store.engine, portfolio, counted_until), assets, book)
        closed_now = self._close_by_cut_off(store, portfolio, statuses)
        if closed_now:
            book = DayBook(closed={**book.closed, **closed_now}, delisted=book.delisted)
            statuses = day_statuses(read_cells(store.engine, portfolio, counted_until), assets, book)
        counted, pending = split_counted(statuses)
        base = dict(
            portfolio=portfolio,
            prices_added=added,
            corrections=corrections,
            unchanged=unchanged,
            pending=pending,
            closed=tuple(closed_now),
        )
        waiting = f"; {len(pending)} day(s) pending, from {pending[0].day}" if pending else ""
        if not counted:
            if fixed is not None:
                return replace(_corrected(portfolio, fixed, unchanged), pending=pending, closed=tuple(closed_now))
            note = "nothing new: every price was already archived with the same value" if not pending else ""
            note = note or f"prices archived; no day counts yet{waiting}"
            return IngestReport(**base, **_no_windows(note))  # type: ignore[arg-type]
        through = counted[-1].day
        span = tail_span(state.n_prices, state.n_prices + len(counted), config)
        if span.windows_before != state.carry.windows:  # not the state of this series: the full path rebuilds it
            return None
        day_tail = kept_tail(store, portfolio, state) if len(span.new_ends) else None
        if len(span.new_ends):
            from_kept = (
                tail_from_kept(store, portfolio, assets, span, day_tail, (counted[0].day, through), config)
                if day_tail is not None
                else None
            )
            tail = from_kept or read_tail(store, portfolio, assets, span, through, config)
        else:
            days = store.read_prices(portfolio, start=counted[0].day, end=through, assets=assets)
            tail = Tail(span=span, prices=days, previous=None)
        self._forget(portfolio)  # the result kept in memory (full path) is behind now
        try:
            done = archive_tail_run(store, portfolio, tail, config, state, through, source=source, kept=day_tail)
        except DataError:  # the archived series does not match the state (nothing written): the full path
            return None
        n_added = done.features.added
        note = f"{n_added} window(s) added"
        return IngestReport(
            **base,  # type: ignore[arg-type]
            windows_computed=done.windows_computed,
            windows_added=n_added,
            windows_differing=done.features.differing,
            first_window=done.window_ends[0].date() if len(done.window_ends) else None,
            last_window=done.window_ends[-1].date() if len(done.window_ends) else None,
            alerts=done.alerts if fixed is None else fixed.alerts_raised + done.alerts,
            run_id=done.run.id,
            note=(note if fixed is None else f"{fixed.note}; {note}") + waiting,
        )

    def _close_by_cut_off(self, store: Store, portfolio: str, statuses: tuple[DayStatus, ...]) -> dict[date, str]:
        """Close (chained ``day_closed`` records) the days the ``[daily] close_share`` rule closes now."""
        closing = closes_by_cut_off(statuses, self.default_config.daily.close_share)
        if not closing:
            return {}
        how = cut_off_how(float(self.default_config.daily.close_share or 0.0))
        for status in closing:
            store.append_event(
                DAY_CLOSED,
                {"who": "riskshape", "how": how, "missing": list(status.missing)},
                portfolio=portfolio,
                subject=status.day.isoformat(),
                actor="riskshape",
            )
        return {status.day: how for status in closing}

    def _result(
        self, portfolio: str, table: ValidPrices, held: pd.DataFrame, corrections: int, config: Config
    ) -> tuple[MonitorResult, int]:
        """The result over the counted history and how many windows were computed for it."""
        cached = self._cached(portfolio)
        if (
            cached is not None
            and not corrections
            and cached.config.hash() == config.hash()
            and _same_prices(cached.prices, held)
        ):
            fresh = table.loc[table.index > cached.prices.index[-1]]
            if not len(fresh):
                return cached, 0
            result = cached.update(ValidPrices.of_validated_parts(fresh))
            return result, len(result.window_ends) - len(cached.window_ends)
        result = monitor(table, config)
        return result, len(result.window_ends)


def _no_windows(note: str) -> dict[str, object]:
    return dict(
        windows_computed=0,
        windows_added=0,
        windows_differing=0,
        first_window=None,
        last_window=None,
        alerts=(),
        run_id=None,
        note=note,
    )


def _with_closed(report: IngestReport, days: tuple[date, ...]) -> IngestReport:
    from dataclasses import replace

    return replace(report, closed=tuple(sorted(set(report.closed) | set(days))))
