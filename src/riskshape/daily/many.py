"""Many portfolios at once: one day file (or request) carrying prices for several portfolios.

:func:`read_feed` splits a table with a ``portfolio`` column (long ``date, asset, price`` or wide
``date, A, B, ...``) into one validated price table per portfolio; a portfolio whose rows fail
validation is kept aside with its message. :func:`ingest_many` feeds each portfolio through
:class:`riskshape.daily.Ingestor`, several at a time, each with its own answer: one portfolio's
bad data never blocks the others, and each answer says what was archived.

Where the work runs: portfolios are fed one at a time, and each portfolio's windows go on the
configured executor (``[compute] executor``: a process pool by default, Dask when configured).
That is where it pays: a portfolio rebuilt from the archive (the first day after a restart)
computes its whole history, spread over the pool; a warm day computes one window, which
:func:`riskshape.compute.make_executor` keeps in-process (a hop to a worker costs more than
the window). Feeding several portfolios at once on threads was measured and is not the
default (``benchmarks/daily.py``'s probe, 4 portfolios of 50 assets and 500 days, 2 cores at
load 10; per portfolio):

=========================  =========  ========
portfolios at once         cold       warm
=========================  =========  ========
process pool, one          1.2 s      0.44 s
process pool, two threads  10.4 s     0.97 s
serial, one                2.0 s      0.69 s
serial, two threads        1.9 s      0.79 s
=========================  =========  ========

Threads nest a process pool per portfolio (started by ``forkserver`` once threads exist,
seconds each) and, for warm days, contend for the GIL and the archive's one writer. ``workers``
still feeds several at once when asked.
"""

from __future__ import annotations

import os
import time
from collections.abc import Mapping
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from riskshape.daily.checks import check_ingest_quality
from riskshape.daily.ingest import Ingestor, IngestReport
from riskshape.errors import DataError, RiskshapeError
from riskshape.prices import ValidPrices, csv_table, validate_prices
from riskshape.store import Store

__all__ = ["Feed", "PortfolioOutcome", "split_feed", "read_feed", "ingest_many"]

PORTFOLIO_COLUMN = "portfolio"


@dataclass(frozen=True)
class Feed:
    """One day file split by portfolio: validated prices, and the portfolios refused at validation."""

    prices: Mapping[str, ValidPrices] = field(default_factory=dict)
    refused: Mapping[str, str] = field(default_factory=dict)

    @property
    def portfolios(self) -> tuple[str, ...]:
        """Every portfolio named, in the order first seen."""
        return tuple(dict.fromkeys([*self.prices, *self.refused]))


@dataclass(frozen=True)
class PortfolioOutcome:
    """One portfolio's answer: its report, or why nothing of it was archived; its data-quality warnings."""

    portfolio: str
    report: IngestReport | None
    error: str | None
    warnings: tuple[str, ...] = ()


def split_feed(table: pd.DataFrame, source: str, portfolio: str | None = None) -> Feed:
    """Split a raw price table by its ``portfolio`` column and validate each part alone.

    Parameters
    ----------
    table : pandas.DataFrame
        Cells as read (``riskshape.prices.csv_table``): ``date``, then wide asset columns or
        ``asset, price``; a ``portfolio`` column when it carries several portfolios.
    source : str
        Name used in messages (the file).
    portfolio : str, optional
        The one portfolio of a table without a ``portfolio`` column.

    Returns
    -------
    Feed

    Raises
    ------
    DataError
        If there is neither a ``portfolio`` column nor ``portfolio``, or both disagree.
    """
    if PORTFOLIO_COLUMN not in table.columns:
        if portfolio is None:
            raise DataError(
                f"{source}: no {PORTFOLIO_COLUMN!r} column; add one (one portfolio per row) or name the portfolio"
            )
        groups = {portfolio: table}
    else:
        names = table[PORTFOLIO_COLUMN].astype(str).str.strip()
        if (names == "").any():
            row = int((names == "").to_numpy().argmax()) + 2
            raise DataError(f"{source}: line {row}, column {PORTFOLIO_COLUMN!r} is empty; name the row's portfolio")
        if portfolio is not None and set(names) != {portfolio}:
            raise DataError(
                f"{source}: the {PORTFOLIO_COLUMN!r} column names {sorted(set(names))[:3]} but portfolio "
                f"{portfolio!r} was given; leave the portfolio out to feed every one of them"
            )
        groups = {str(name): part.drop(columns=PORTFOLIO_COLUMN) for name, part in table.groupby(names, sort=False)}
    prices: dict[str, ValidPrices] = {}
    refused: dict[str, str] = {}
    for name, part in groups.items():
        wide = part.dropna(axis=1, how="all") if "asset" not in part.columns else part
        if "asset" not in part.columns:  # wide: a portfolio's rows leave other portfolios' columns empty
            wide = wide.loc[:, [c for c in wide.columns if c == "date" or (wide[c].astype(str) != "").any()]]
        try:
            prices[name] = validate_prices(
                wide.reset_index(drop=True), source=f"{source} (portfolio {name})", min_rows=1, min_assets=1
            )
        except DataError as err:
            refused[name] = str(err)
    return Feed(prices=prices, refused=refused)


def read_feed(path: str | os.PathLike[str], portfolio: str | None = None) -> Feed:
    """Read a day file (CSV) and split it by portfolio (see :func:`split_feed`).

    Parameters
    ----------
    path : path-like
        The day file: ``date``, then wide asset columns or ``asset, price``; optionally ``portfolio``.
    portfolio : str, optional
        The one portfolio of a file without a ``portfolio`` column.

    Returns
    -------
    Feed

    Raises
    ------
    DataError
        If the file cannot be read as CSV or names no portfolio.
    """
    file = Path(path)
    try:
        table = csv_table(file)
    except FileNotFoundError:
        raise DataError(f"{file}: no such file; give the day file's path") from None
    except (OSError, ValueError, pd.errors.ParserError, pd.errors.EmptyDataError) as err:
        raise DataError(f"{file}: not a CSV price table ({err})") from None
    return split_feed(table, str(file), portfolio)


BATCH_PORTFOLIOS = 64
"""Portfolios at most whose writes share one transaction (one commit) in :func:`ingest_many`."""
BATCH_SECONDS = 5.0
"""A shared transaction is committed once it has been open this long (the write lock is held meanwhile)."""


def ingest_many(
    store: Store,
    feed: Feed,
    ingestor: Ingestor,
    *,
    correction: bool = False,
    workers: int | None = None,
    batch: int = BATCH_PORTFOLIOS,
) -> tuple[PortfolioOutcome, ...]:
    """Feed every portfolio of ``feed``; each answers for itself.

    One at a time (the default), the portfolios' writes are batched: up to ``batch`` portfolios
    (and at most :data:`BATCH_SECONDS` of work) share one write transaction, each inside its own
    SAVEPOINT, so one commit (one ``fsync``) serves many portfolios while a portfolio refused is
    rolled back alone. Each portfolio still gets its own runs, records and commitment; the archive
    ends as if they had been fed one by one.

    Parameters
    ----------
    store : Store
        The archive (every portfolio must exist).
    feed : Feed
        The split day file.
    ingestor : Ingestor
        The policy (its default configuration's ``[compute]`` section sets the parallelism).
    correction : bool
        As :meth:`Ingestor.ingest`.
    workers : int, optional
        Portfolios fed at once on threads (default 1: each portfolio's windows use the configured
        executor instead; see the module notes for the measurement). On threads each portfolio
        commits alone.
    batch : int
        Portfolios at most per shared transaction (1: each commits alone).

    Returns
    -------
    tuple of PortfolioOutcome
        In the feed's order; a refused portfolio has its message and archived nothing. Each
        portfolio's prices are checked for data quality first (:func:`riskshape.daily.checks.check_ingest_quality`):
        the findings are its ``warnings``, or its refusal when ``[checks] quality = "refuse"``.
    """
    if workers is None:
        workers = 1

    def one(name: str) -> PortfolioOutcome:
        if name in feed.refused:
            return PortfolioOutcome(name, None, feed.refused[name])
        try:  # the quality check first: refused ("[checks] quality = 'refuse'"), nothing is written
            found = _quality(store, feed, ingestor, name)
            report = ingestor.ingest(store, name, feed.prices[name], correction=correction, source="day file")
        except RiskshapeError as err:
            return PortfolioOutcome(name, None, str(err))
        return PortfolioOutcome(name, report, None, found)

    names = feed.portfolios
    if workers > 1 and len(names) > 1:
        with ThreadPoolExecutor(max_workers=workers) as pool:
            return tuple(pool.map(one, names))
    if batch <= 1 or len(names) <= 1:
        return tuple(one(n) for n in names)
    outcomes: dict[str, PortfolioOutcome] = {}
    queue = [n for n in names if n not in feed.refused]
    for name in feed.refused:
        outcomes[name] = one(name)
    while queue:
        queue, busy = _one_batch(store, feed, ingestor, queue, batch, correction, outcomes)
        for name in busy:  # another caller was ingesting them: fed alone, once the batch has committed
            outcomes[name] = one(name)
    return tuple(outcomes[n] for n in names)


def _quality(store: Store, feed: Feed, ingestor: Ingestor, name: str) -> tuple[str, ...]:
    """One portfolio's data-quality findings; raises when ``[checks] quality = "refuse"`` finds any."""
    found = check_ingest_quality(
        store, name, feed.prices[name], ingestor.default_config, f"day file (portfolio {name})"
    )
    return tuple(str(f) for f in found)


def _one_batch(
    store: Store,
    feed: Feed,
    ingestor: Ingestor,
    queue: list[str],
    batch: int,
    correction: bool,
    outcomes: dict[str, PortfolioOutcome],
) -> tuple[list[str], list[str]]:
    """Feed portfolios from the front of ``queue`` in one transaction; returns the rest and the busy ones."""
    done: dict[str, PortfolioOutcome] = {}
    busy: list[str] = []
    taken = 0
    start = time.monotonic()
    try:
        with store.transaction():
            for name in queue:
                if taken >= batch or time.monotonic() - start >= BATCH_SECONDS:
                    break
                taken += 1
                try:
                    found = _quality(store, feed, ingestor, name)  # refused: nothing written
                    with store.savepoint():
                        report = ingestor.try_ingest(
                            store, name, feed.prices[name], correction=correction, source="day file"
                        )
                except RiskshapeError as err:  # its writes are rolled back; the others go on
                    ingestor.forget(name)
                    done[name] = PortfolioOutcome(name, None, str(err))
                    continue
                if report is None:
                    busy.append(name)
                else:
                    done[name] = PortfolioOutcome(name, report, None, found)
    except RiskshapeError as err:  # the commit itself failed: nothing of the batch is archived
        for name in [*done, *busy]:
            ingestor.forget(name)
            done[name] = PortfolioOutcome(name, None, f"nothing archived, the archive's commit failed: {err}")
        busy = []
    outcomes.update(done)
    return queue[taken:], busy
