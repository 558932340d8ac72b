"""Ingest: archive a portfolio's new prices, compute only the windows they complete, raise alerts.

Policy (what the service's price endpoint and the command line apply):

* **New days** (after the last archived date) are appended; the windows they complete are
  computed with :meth:`riskshape.MonitorResult.update` on the portfolio's result kept in memory
  (rebuilt once with :func:`riskshape.monitor` from the archived prices after a restart, or when
  someone else wrote to the portfolio), then archived with :func:`riskshape.archive.archive_run`,
  which evaluates the alert rules and appends only alerts not yet archived.
* **Idempotent**: a day already archived with the same prices adds nothing; sending the same
  body twice adds no prices, windows, runs or alerts.
* **Revisions**: a price that differs from the archived one for a date already archived (or a
  price for a cell archived as missing) is refused with 409, unless the request says
  ``correction=true``. A correction archives a new revision (the old one stays, and is listed
  as a correction) and supersedes the windows it is in (:mod:`riskshape.daily.corrections`: only
  those windows are recomputed and archived as a new version; earlier versions stay and are read
  with ``as_known_at``). A missing price never replaces an archived one.
* A date **inside** the archived history that is not archived yet is refused (422): windows
  count trading days, so it would shift every later window; rerun the portfolio instead.
* **Assets** are fixed by the portfolio's first prices, in name order (the order the archive reads
  them back in, so a portfolio fed one day at a time and one fed in a single body compute alike;
  a portfolio made by ``riskshape run`` keeps its file's order): an unknown asset is refused (422);
  an asset left out of a new day is missing on that day.
* Until one window of history is archived (``window + 1`` dates) prices are only archived.
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from dataclasses import dataclass
from datetime import date

import numpy as np
import pandas as pd

from riskshape import Config, ConflictError, DataError, MonitorResult, archive_run, monitor
from riskshape.compute import window_end_positions
from riskshape.daily.corrections import CorrectionReport, apply_corrections, revised_cells
from riskshape.prices import ValidPrices
from riskshape.store import AlertRecord, Run, Store

__all__ = ["Ingestor", "IngestReport", "portfolio_config"]


@dataclass(frozen=True)
class IngestReport:
    """What one ingest did."""

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


def _same_prices(a: pd.DataFrame, b: pd.DataFrame) -> bool:
    return (
        list(a.columns) == list(b.columns)
        and a.index.equals(b.index)
        and np.array_equal(a.to_numpy(dtype=float), b.to_numpy(dtype=float), equal_nan=True)
    )


@dataclass(frozen=True)
class _Plan:
    """The request's prices set against the archive."""

    table: pd.DataFrame  # the whole history with the request applied (corrections included)
    fresh: pd.DataFrame  # the request's days after the last archived date
    touched: pd.DataFrame  # the request's days, as they will be archived
    corrections: int
    unchanged: int


def _plan(portfolio: str, incoming: pd.DataFrame, held: pd.DataFrame, correction: bool, source: str) -> _Plan:
    if len(held.columns):
        unknown = [a for a in incoming.columns if a not in held.columns]
        if unknown:
            raise DataError(
                f"{source}: asset {unknown[0]!r} is not one of portfolio {portfolio!r}'s assets "
                f"({', '.join(held.columns)}); a portfolio's assets are fixed by its first prices -- send every "
                "asset from the first day (null where it has no price yet), or create another portfolio"
            )
        incoming = incoming.reindex(columns=held.columns)
    else:  # a new portfolio: its assets in name order, however the first prices came
        incoming = incoming[sorted(incoming.columns)]
    overlap = incoming.index.intersection(held.index)
    sent = incoming.loc[overlap].to_numpy(dtype=float)
    kept = held.loc[overlap, incoming.columns].to_numpy(dtype=float) if len(overlap) else sent.copy()
    differs = ~np.isnan(sent) & ~(sent == kept)
    if differs.any() and not correction:
        i, j = np.argwhere(differs)[0]
        archived = "missing" if np.isnan(kept[i, j]) else f"{kept[i, j]:g}"
        raise ConflictError(
            f"{source}: {int(differs.sum())} price(s) differ from the archive, first on {overlap[i].date()} for "
            f"asset {incoming.columns[j]!r}: archived {archived}, sent {sent[i, j]:g}; send revised prices with "
            "correction=true to archive them as corrections (the archived ones are kept)"
        )
    if len(held.index):
        last = held.index[-1]
        inside = incoming.index[(incoming.index < last) & ~incoming.index.isin(held.index)]
        if len(inside):
            raise DataError(
                f"{source}: date {inside[0].date()} falls inside the archived history (up to {last.date()}) but is "
                "not archived; windows count trading days, so a date cannot be inserted -- only days after "
                f"{last.date()} can be added (rerun the portfolio over the full history to change its calendar)"
            )
    table = held.copy() if len(held.columns) else pd.DataFrame(columns=incoming.columns, dtype=float)
    if differs.any():
        fixed = np.where(differs, sent, kept)
        table.loc[overlap, list(incoming.columns)] = fixed
    fresh = incoming.loc[incoming.index.difference(held.index)]
    if len(fresh):
        table = pd.concat([table, fresh]) if len(table) else fresh.copy()
    table.index.name = "date"
    table.columns.name = "asset"
    touched = table.loc[incoming.index]
    unchanged = int((~np.isnan(sent) & (sent == kept)).sum())
    # every piece passed validation (the request at the edge, the archive's prices on their way in):
    # the tables made of them are marked so, and are not checked again downstream
    return _Plan(
        table=ValidPrices.of_validated_parts(table),
        fresh=ValidPrices.of_validated_parts(fresh),
        touched=ValidPrices.of_validated_parts(touched),
        corrections=int(differs.sum()),
        unchanged=unchanged,
    )


class Ingestor:
    """Ingests prices (see the module notes), keeping each portfolio's latest result in memory.

    Parameters
    ----------
    default_config : Config
        Configuration of a portfolio before its first run.
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

    def _cached(self, portfolio: str) -> MonitorResult | None:
        with self._guard:
            return self._results.get(portfolio)

    def ingest(
        self,
        store: Store,
        portfolio: str,
        prices: pd.DataFrame,
        *,
        correction: bool = False,
        source: str = "request body",
    ) -> IngestReport:
        """Archive ``prices`` (validated wide prices) for ``portfolio`` and compute the new windows.

        Raises
        ------
        NotFoundError
            If the portfolio does not exist.
        ConflictError
            If a price differs from the archived one and ``correction`` is false.
        DataError
            If an asset is unknown or a date falls inside the archived history.
        """
        with self._lock(portfolio):
            store.get_portfolio(portfolio)
            config, run = portfolio_config(store, portfolio, self.default_config)
            held = store.read_prices(portfolio, assets=None if run is None else run.assets)
            plan = _plan(portfolio, prices, held, correction, source)
            n_returns = len(plan.table) - 1
            if n_returns < config.window:
                written = store.append_prices(portfolio, plan.touched, source=source)
                return IngestReport(
                    portfolio,
                    written.added,
                    written.corrections,
                    plan.unchanged,
                    0,
                    0,
                    0,
                    None,
                    None,
                    (),
                    None,
                    f"{len(plan.table)} date(s) archived; the first window needs {config.window + 1}",
                )
            expected = len(window_end_positions(n_returns, config.window, config.step))
            archived = len(store.window_ends(portfolio, config.hash()))
            if not len(plan.fresh) and not plan.corrections and archived >= expected:
                return IngestReport(
                    portfolio,
                    0,
                    0,
                    plan.unchanged,
                    0,
                    0,
                    0,
                    None,
                    None,
                    (),
                    None,
                    "nothing new: every price was already archived with the same value",
                )
            fixed = None
            if plan.corrections and run is not None:  # supersede the windows they touch (daily/corrections.py)
                fixed = apply_corrections(
                    store, portfolio, revised_cells(plan.touched, held), config, run, source=source
                )
                if not len(plan.fresh):
                    return _corrected(portfolio, fixed, plan.unchanged)
            result, computed = self._result(portfolio, plan, held, config)
            report = archive_run(store, portfolio, result, config, source=source)
            self._remember(portfolio, result)
            added = report.features.added
            new_ends = result.window_ends[len(result.window_ends) - added :] if added else result.window_ends[:0]
            note = f"{added} window(s) added"
            if report.features.differing:
                note += (
                    f"; {report.features.differing} archived window(s) would differ under the corrected prices "
                    "and keep their archived values"
                )
            return IngestReport(
                portfolio=portfolio,
                prices_added=report.run.prices_added,
                corrections=report.run.corrections_added + (0 if fixed is None else fixed.corrections),
                unchanged=plan.unchanged,
                windows_computed=computed,
                windows_added=added,
                windows_differing=report.features.differing,
                first_window=new_ends[0].date() if added else None,
                last_window=new_ends[-1].date() if added else None,
                alerts=report.alerts.added,
                run_id=report.run.id,
                note=note if fixed is None else f"{fixed.note}; {note}",
            )

    def _result(self, portfolio: str, plan: _Plan, held: pd.DataFrame, config: Config) -> tuple[MonitorResult, int]:
        """The result over the whole history and how many windows were computed for it."""
        cached = self._cached(portfolio)
        if (
            cached is not None
            and not plan.corrections
            and cached.config.hash() == config.hash()
            and _same_prices(cached.prices, held)
        ):
            if not len(plan.fresh):
                return cached, 0
            result = cached.update(plan.fresh)
            return result, len(result.window_ends) - len(cached.window_ends)
        result = monitor(plan.table, config)
        return result, len(result.window_ends)
