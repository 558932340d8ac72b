"""The archive: :func:`open_store` and the :class:`Store` with its typed repository methods.

Every method runs in its own transaction, or inside :meth:`Store.transaction` when one is open (so
several writes commit together); writes hold the archive's write lock (see
:mod:`riskshape.store.database`). Database failures surface as :class:`~riskshape.errors.StoreError`
(a constraint violation as :class:`~riskshape.errors.ConflictError`).
"""

from __future__ import annotations

import functools
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from contextlib import contextmanager
from datetime import date, datetime, timezone
from typing import TYPE_CHECKING, ParamSpec, TypeVar

import sqlalchemy as sa
from sqlalchemy.engine import Engine

from riskshape.alerts.model import Alert
from riskshape.errors import ConflictError, StoreError
from riskshape.store import catalog, events, keys, ledger
from riskshape.store.chain import verify_ledger
from riskshape.store.database import (
    archive_exists,
    create_archive_engine,
    read_transaction,
    savepoint,
    upgrade,
    write_transaction,
)
from riskshape.store.knowledge import to_known_at
from riskshape.store.markers import ChangeMarker, read_change_marker
from riskshape.store.records import (
    AlertAppend,
    AlertDetail,
    AlertPage,
    ApiKey,
    Diagram,
    EventRecord,
    FeaturesPage,
    Head,
    NewApiKey,
    Portfolio,
    PriceCorrection,
    PriceWrite,
    ReviewRecord,
    Run,
    RunManifest,
    VerifyReport,
    WriteCount,
)
from riskshape.types import Diagram as DiagramArray
from riskshape.types import PriceFrame

if TYPE_CHECKING:
    import pandas as pd

    from riskshape.store.tails import StoredTail

# The price book and the series (pandas, numpy) load with the first method that reads or writes
# them, so the commands that read only alerts, reviews and the chain start quickly.

__all__ = ["Store", "open_store", "verify_chain", "chain_head", "change_marker", "seal_archive"]

P = ParamSpec("P")
R = TypeVar("R")


def _one_line(err: BaseException) -> str:
    """The driver's message of a database error on one line."""
    return " ".join(str(getattr(err, "orig", None) or err).split())


@contextmanager
def _translated(operation: str) -> Iterator[None]:
    """Turn SQLAlchemy errors raised inside into riskshape's ConflictError / StoreError, naming ``operation``.

    A refused write (an integrity error) is a ConflictError; any other database error a StoreError.
    The one translation of :func:`_database_errors`, :meth:`Store.transaction` and :meth:`Store.savepoint`.
    """
    try:
        yield
    except sa.exc.IntegrityError as err:
        raise ConflictError(f"{operation}: the archive refused the write ({_one_line(err)})") from None
    except sa.exc.SQLAlchemyError as err:
        raise StoreError(f"{operation}: database error ({_one_line(err)})") from None


def _database_errors(method: Callable[P, R]) -> Callable[P, R]:
    """Turn SQLAlchemy errors into riskshape's StoreError / ConflictError, naming the operation."""

    @functools.wraps(method)
    def wrapper(*args: P.args, **kwargs: P.kwargs) -> R:
        with _translated(method.__name__):
            return method(*args, **kwargs)

    return wrapper


class Store:
    """An open archive. Make one with :func:`open_store`; close it with :meth:`close` (or ``with``)."""

    def __init__(self, engine: Engine, url: str, revision: str) -> None:
        self.engine = engine
        self.url = url
        self.revision = revision

    def __enter__(self) -> Store:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def __repr__(self) -> str:
        return f"Store({self.url!r}, revision={self.revision!r})"

    def close(self) -> None:
        """Release the database connections."""
        self.engine.dispose()

    @contextmanager
    def transaction(self) -> Iterator[Store]:
        """One write transaction around several of this store's writes: all of them commit, or none.

        Holds the archive's write lock from the start; every write method called inside (in the
        same thread) joins it, and reads inside see its writes. Each portfolio written gets one
        commitment (``records_sealed``) just before the commit. An exception rolls everything back.

        Yields
        ------
        Store
            This store.

        Examples
        --------
        >>> with store.transaction():  # doctest: +SKIP
        ...     run = store.create_run("Fund North", manifest, prices)
        ...     store.write_features(run.id, features)
        """
        with _translated("transaction"), write_transaction(self.engine):
            yield self

    @property
    def dialect(self) -> str:
        """``sqlite`` or ``postgresql``."""
        return self.engine.dialect.name

    # -- portfolios ------------------------------------------------------------------------------
    @_database_errors
    def list_portfolios(self) -> tuple[Portfolio, ...]:
        """Every portfolio, by name."""
        return catalog.list_portfolios(self.engine)

    @_database_errors
    def get_portfolio(self, name: str) -> Portfolio:
        """A portfolio by name. Raises :class:`NotFoundError` if absent."""
        return catalog.get_portfolio(self.engine, name)

    @_database_errors
    def create_portfolio(self, name: str) -> Portfolio:
        """Create a portfolio (1-200 printable characters). Raises :class:`ConflictError` if the name is taken."""
        return catalog.create_portfolio(self.engine, name)

    @_database_errors
    def ensure_portfolio(self, name: str) -> Portfolio:
        """The portfolio of that name, created if needed (safe under concurrency)."""
        return catalog.ensure_portfolio(self.engine, name)

    # -- prices and runs -------------------------------------------------------------------------
    @_database_errors
    def append_prices(self, portfolio: str, prices: pd.DataFrame, source: str = "prices") -> PriceWrite:
        """Append prices; a changed price becomes a correction (a new revision), never an overwrite.

        Parameters
        ----------
        portfolio : str
            An existing portfolio.
        prices : pandas.DataFrame
            Wide prices (validated by :func:`riskshape.prices.validate_prices`; raises DataError).
        source : str
            Name used in validation messages.

        Returns
        -------
        PriceWrite
            Cells added, corrections added and cells already archived with the same price.
        """
        from riskshape.store import pricebook  # pandas and numpy load here, not at start

        valid = pricebook.validated(prices, source)
        with write_transaction(self.engine) as connection:
            pid = catalog.portfolio_id(connection, portfolio)
            from riskshape.store import pricebook  # pandas and numpy load here, not at start

            return pricebook.append_prices(connection, pid, valid, datetime.now(timezone.utc))

    @_database_errors
    def read_prices(
        self,
        portfolio: str,
        *,
        start: object = None,
        end: object = None,
        assets: Sequence[str] | None = None,
        as_of_run: int | None = None,
    ) -> pd.DataFrame:
        """Prices as a wide DataFrame (latest revision of every cell).

        Parameters
        ----------
        portfolio : str
        start, end : date-like, optional
            Inclusive date range.
        assets : sequence of str, optional
            Columns, in this order (default: every archived asset, sorted).
        as_of_run : int, optional
            Only what was archived when that run was recorded (later corrections left out).

        Returns
        -------
        pandas.DataFrame
            DatetimeIndex ``date``, float64 columns, NaN where missing.
        """
        first = None if start is None else ledger.to_date(start, "start")
        last = None if end is None else ledger.to_date(end, "end")
        with read_transaction(self.engine) as connection:
            pid = catalog.portfolio_id(connection, portfolio)
            through = None
            if as_of_run is not None:
                run = catalog.get_run(self.engine, as_of_run)
                if run.portfolio != portfolio:
                    raise StoreError(f"run {as_of_run} belongs to portfolio {run.portfolio!r}, not {portfolio!r}")
                through = run.prices_through_id
            columns = None if assets is None else list(assets)
            from riskshape.store import pricebook  # pandas and numpy load here, not at start

            return pricebook.read_prices(connection, pid, first, last, columns, through)

    @_database_errors
    def price_dates(self, portfolio: str) -> tuple[date, ...]:
        """Every date with an archived price of the portfolio (its trading days), ascending."""
        with read_transaction(self.engine) as connection:
            from riskshape.store import pricebook  # pandas and numpy load here, not at start

            return tuple(pricebook.price_dates(connection, catalog.portfolio_id(connection, portfolio)))

    @_database_errors
    def list_corrections(
        self, portfolio: str, *, start: object = None, end: object = None
    ) -> tuple[PriceCorrection, ...]:
        """Every corrected price cell (revision > 0) with the price it replaced, by date and asset."""
        first = None if start is None else ledger.to_date(start, "start")
        last = None if end is None else ledger.to_date(end, "end")
        with read_transaction(self.engine) as connection:
            from riskshape.store import pricebook  # pandas and numpy load here, not at start

            return pricebook.list_corrections(connection, catalog.portfolio_id(connection, portfolio), first, last)

    @_database_errors
    def create_run(
        self, portfolio: str, manifest: RunManifest, prices: PriceFrame | None = None, *, prices_archived: bool = False
    ) -> Run:
        """Record a run: archive its prices (corrections where they differ) and its manifest, atomically.

        The run remembers the extent of the prices (dates, assets, highest price row), so
        :meth:`read_prices` with ``as_of_run`` rebuilds exactly the table it saw. With
        ``prices_archived`` the prices were just read from the archive (the daily loop's tail): only
        their extent is recorded, without comparing them with the archive again.
        """
        return catalog.create_run(self.engine, portfolio, manifest, prices, prices_archived)

    @_database_errors
    def get_run(self, run_id: int) -> Run:
        """A run by id. Raises :class:`NotFoundError` if absent."""
        return catalog.get_run(self.engine, run_id)

    @_database_errors
    def latest_run(self, portfolio: str, *, as_known_at: object = None) -> Run | None:
        """The portfolio's most recent run (recorded by ``as_known_at``, if given), or None.

        Raises :class:`NotFoundError` for an unknown portfolio, :class:`DataError` for a bad ``as_known_at``.
        """
        return catalog.latest_run(self.engine, portfolio, to_known_at(as_known_at))

    @_database_errors
    def list_runs(self, portfolio: str | None = None) -> tuple[Run, ...]:
        """Runs, oldest first (of one portfolio, or all)."""
        return catalog.list_runs(self.engine, portfolio)

    # -- features and diagrams -------------------------------------------------------------------
    @_database_errors
    def write_features(self, run_id: int, features: pd.DataFrame, *, supersede: bool = False) -> WriteCount:
        """Archive ``MonitorResult.features`` for a run; idempotent by (portfolio, window_end, config_hash).

        With ``supersede`` (a correction's run), a window whose values differ from its version in
        force is archived again as a new version of that run (counted in ``added`` and ``differing``);
        without it, it keeps its archived values (counted in ``differing`` only).
        """
        from riskshape.store import series  # pandas and numpy load here, not at start

        return series.write_features(self.engine, run_id, features, supersede)

    @_database_errors
    def window_ends(self, portfolio: str, config_hash: str | None = None) -> tuple[date, ...]:
        """Window ends whose features are archived (for ``config_hash``, default the latest run's), ascending."""
        from riskshape.store import series  # pandas and numpy load here, not at start

        return series.window_ends(self.engine, portfolio, config_hash)

    @_database_errors
    def read_features(
        self,
        portfolio: str,
        *,
        start: object = None,
        end: object = None,
        columns: Sequence[str] | None = None,
        limit: int | None = None,
        offset: int = 0,
        config_hash: str | None = None,
        as_known_at: object = None,
    ) -> FeaturesPage:
        """A page of the features series (window ends ascending).

        ``config_hash`` defaults to that of the portfolio's latest run. ``columns`` selects and orders
        columns (an unknown name raises StoreError listing the archived ones). Each window answers
        with its version in force now, or with ``as_known_at`` (a timezone-aware datetime or ISO 8601
        text; DataError otherwise) exactly as it was known then: the versions of runs recorded by that
        moment, the latest run's configuration then (see :mod:`riskshape.store.knowledge`).
        """
        from riskshape.store import series  # pandas and numpy load here, not at start

        return series.read_features(
            self.engine,
            portfolio,
            start=start,
            end=end,
            columns=columns,
            limit=limit,
            offset=offset,
            config_hash=config_hash,
            as_known_at=to_known_at(as_known_at),
        )

    @contextmanager
    def savepoint(self) -> Iterator[Store]:
        """Inside :meth:`transaction`: a part that, on an exception, is undone alone (a SQL SAVEPOINT).

        What was written inside is rolled back (with its pending commitment) and the exception
        propagates; the transaction goes on, and what was written before and after commits with it.
        Raises StoreError outside :meth:`transaction`.

        Yields
        ------
        Store
            This store.

        Examples
        --------
        >>> with store.transaction():  # doctest: +SKIP
        ...     for name, prices in days.items():
        ...         try:
        ...             with store.savepoint():
        ...                 store.append_prices(name, prices)
        ...         except ConflictError:
        ...             pass  # that portfolio's writes are undone; the others commit together
        """
        with _translated("savepoint"), savepoint(self.engine):
            yield self

    @_database_errors
    def save_day_tail(self, portfolio: str, run_id: int, payload: bytes) -> str:
        """Replace the portfolio's day tail (:mod:`riskshape.store.tails`); returns its digest.

        Parameters
        ----------
        portfolio : str
        run_id : int
            The run of the day that kept it.
        payload : bytes
            From :func:`riskshape.store.tails.encode_tail`.

        Returns
        -------
        str
            SHA-256 of ``payload`` (the chained day state names it).
        """
        from riskshape.store import tails

        return tails.save_tail(self.engine, portfolio, run_id, payload)

    @_database_errors
    def day_tail(self, portfolio: str) -> StoredTail | None:
        """The portfolio's day tail row (run id, digest, bytes), or None. See :mod:`riskshape.store.tails`.

        Returns
        -------
        StoredTail or None
        """
        from riskshape.store import tails

        return tails.read_stored_tail(self.engine, portfolio)

    @_database_errors
    def last_features(
        self, portfolio: str, *, end: object, count: int, config_hash: str, columns: Sequence[str] | None = None
    ) -> pd.DataFrame:
        """The features of the last ``count`` windows ending on or before ``end`` (current versions), ascending.

        One bounded query (the daily loop's rules read the ``lookback`` windows before a new one);
        columns as :meth:`read_features`.
        """
        from riskshape.store import series  # pandas and numpy load here, not at start

        return series.last_features(
            self.engine, portfolio, end=end, count=count, config_hash=config_hash, columns=columns
        )

    @_database_errors
    def write_diagrams(
        self, run_id: int, diagrams: Iterable[tuple[object, int, DiagramArray]], *, supersede: bool = False
    ) -> WriteCount:
        """Archive (window_end, dim, bars) triples of a run as float32; idempotent and versioned like features."""
        from riskshape.store import series  # pandas and numpy load here, not at start

        return series.write_diagrams(self.engine, run_id, diagrams, supersede)

    @_database_errors
    def read_diagram(
        self,
        portfolio: str,
        window_end: object,
        dim: int,
        config_hash: str | None = None,
        *,
        as_known_at: object = None,
    ) -> Diagram:
        """One archived diagram (float32 bars): its version in force now, or as known at ``as_known_at``.

        Raises :class:`NotFoundError` if absent (or not yet archived at ``as_known_at``).
        """
        from riskshape.store import series  # pandas and numpy load here, not at start

        return series.read_diagram(self.engine, portfolio, window_end, dim, config_hash, to_known_at(as_known_at))

    # -- alerts and reviews (the ledger) ---------------------------------------------------------
    @_database_errors
    def append_alerts(self, alerts: Sequence[Alert], run_id: int) -> AlertAppend:
        """Append alerts of a run to the ledger, in (window_end, rule) order.

        Idempotent: an alert with the same portfolio, rule, window end and configuration hash as an
        archived one adds nothing (counted in ``existing``). Values must be finite, timestamps aware.
        """
        return ledger.append_alerts(self.engine, alerts, run_id)

    @_database_errors
    def list_alerts(
        self,
        *,
        portfolio: str | Sequence[str] | None = None,
        since: object = None,
        until: object = None,
        severity: str | Sequence[str] | None = None,
        rule: str | Sequence[str] | None = None,
        reviewed: bool | None = None,
        limit: int | None = 100,
        offset: int = 0,
        as_known_at: object = None,
        newest_first: bool = False,
    ) -> AlertPage:
        """Alerts by window end (then id; ``newest_first``: latest window end first, then id).

        ``portfolio``, ``severity`` and ``rule`` keep alerts with one of the values given;
        ``since``/``until`` bound the window end (inclusive); ``reviewed`` True/False keeps alerts
        with / without any review. With ``as_known_at`` (see :meth:`read_features`), only the alerts
        of runs recorded by then (and reviews made by then). ``limit=0`` counts without reading.
        """
        return ledger.list_alerts(
            self.engine,
            portfolio=portfolio,
            since=since,
            until=until,
            severity=severity,
            rule=rule,
            reviewed=reviewed,
            limit=limit,
            offset=offset,
            as_known_at=to_known_at(as_known_at),
            newest_first=newest_first,
        )

    @_database_errors
    def get_alert(self, alert_id: int, *, as_known_at: object = None) -> AlertDetail:
        """One alert with its reviews (as known at ``as_known_at``: the alert if its run was recorded by
        then, the reviews made by then). Raises :class:`NotFoundError` if absent (or not yet raised then).
        """
        return ledger.get_alert(self.engine, alert_id, to_known_at(as_known_at))

    @_database_errors
    def append_review(
        self, alert_id: int, action: str, reviewer: str, comment: str = "", *, check: ledger.ReviewCheck | None = None
    ) -> ReviewRecord:
        """Append a review (``acknowledge``, ``dismiss`` as noise, ``escalate`` or ``close``) of an alert.

        ``check``, if given, is called with the alert and its earlier reviews inside the write
        transaction and may raise to refuse the review (the workflow of :mod:`riskshape.reviews`
        uses it; prefer :func:`riskshape.reviews.review_alert`, which applies the review rules).
        """
        return ledger.append_review(self.engine, alert_id, action, reviewer, comment, check=check)

    @_database_errors
    def list_reviews(
        self, alert_ids: Sequence[int] | None = None, *, as_known_at: object = None
    ) -> tuple[ReviewRecord, ...]:
        """Reviews in ledger order, of the given alerts (default every alert); made by ``as_known_at`` if given."""
        return ledger.list_reviews(self.engine, alert_ids, to_known_at(as_known_at))

    # -- other chained events ----------------------------------------------------------------------
    @_database_errors
    def append_event(
        self,
        kind: str,
        data: Mapping[str, object],
        *,
        portfolio: str | None = None,
        subject: str | None = None,
        actor: str | None = None,
        check: events.EventCheck | None = None,
    ) -> EventRecord:
        """Append a chained event (neither an alert nor a review) to the ledger.

        Parameters
        ----------
        kind : str
            What happened, as 1 to 32 lowercase letters, digits or underscores (e.g. ``day_closed``).
        data : mapping
            The event's facts; archived as canonical JSON and covered by its hash.
        portfolio : str, optional
            The portfolio it concerns (must exist).
        subject : str, optional
            What it concerns within the portfolio (a date, an alert id, a period).
        actor : str, optional
            Who recorded it (the owner of the API key, or the person at the command line).
        check : callable, optional
            Called with the ledger's :class:`Head` inside the write transaction, while no other
            record can be appended; it raises to refuse the event (nothing is written), or returns
            facts added to ``data`` (what it read under the lock). The store's reads see the
            archive as it is then (the sign-off of :mod:`riskshape.reviews` uses it).

        Returns
        -------
        EventRecord

        Raises
        ------
        StoreError
            If the kind, subject, actor or payload cannot be archived (the message says which).
        NotFoundError
            If ``portfolio`` is not in the archive.
        """
        return events.append_event(
            self.engine, kind, data, portfolio=portfolio, subject=subject, actor=actor, check=check
        )

    @_database_errors
    def list_events(
        self,
        *,
        kind: str | None = None,
        portfolio: str | None = None,
        subject: str | None = None,
        as_known_at: object = None,
    ) -> tuple[EventRecord, ...]:
        """Chained events in ledger order, optionally of one kind, portfolio and subject (recorded by
        ``as_known_at``, if given).
        """
        return events.list_events(
            self.engine, kind=kind, portfolio=portfolio, subject=subject, as_known_at=to_known_at(as_known_at)
        )

    @_database_errors
    def latest_event(self, kind: str, portfolio: str) -> EventRecord | None:
        """The portfolio's latest chained event of ``kind`` (one row read), or None if it has none."""
        return events.latest_event(self.engine, kind=kind, portfolio=portfolio)

    # -- API keys --------------------------------------------------------------------------------
    @_database_errors
    def create_api_key(self, owner: str, role: str) -> NewApiKey:
        """Create an API key; ``token`` in the result is shown once (only its hash is stored)."""
        return keys.create_api_key(self.engine, owner, role)

    @_database_errors
    def lookup_api_key(self, token: str) -> ApiKey | None:
        """The key of a token, or None. A revoked key comes back with ``revoked=True``."""
        return keys.lookup_api_key(self.engine, token)

    @_database_errors
    def revoke_api_key(self, key_id: str) -> ApiKey:
        """Revoke a key. Raises :class:`NotFoundError` if absent."""
        return keys.revoke_api_key(self.engine, key_id)

    @_database_errors
    def list_api_keys(self) -> tuple[ApiKey, ...]:
        """Every API key (without secrets)."""
        return keys.list_api_keys(self.engine)


def open_store(url: str, *, create: bool = True) -> Store:
    """Open (creating or upgrading its schema) the archive at ``url``.

    Parameters
    ----------
    url : str
        ``sqlite:///path/to/archive.sqlite`` or ``postgresql+psycopg://user@host:5432/database``
        (a ``?options=-csearch_path%3Dschema`` query selects a PostgreSQL schema).
    create : bool
        With False, a missing archive (no SQLite file, or a database without the archive's
        schema) is an error instead of being created: for commands that only read.

    Returns
    -------
    Store

    Raises
    ------
    StoreError
        If the URL is not supported or the database cannot be reached or migrated.
    """
    engine = create_archive_engine(url)
    shown = engine.url.render_as_string(hide_password=True)
    try:
        if not create and not archive_exists(engine):
            engine.dispose()
            raise StoreError(f"no archive at {shown}; check the URL (an archive is created by writing a run into it)")
        revision = upgrade(engine)
    except sa.exc.SQLAlchemyError as err:
        engine.dispose()
        raise StoreError(f"cannot open the archive {shown}: {_one_line(err)}") from None
    return Store(engine, shown, revision)


@_database_errors
def verify_chain(store: Store, expect_head: str | None = None) -> VerifyReport:
    """Recompute the ledger's hash chain and name the first record that does not verify.

    Parameters
    ----------
    store : Store
    expect_head : str, optional
        ``COUNT:HASH`` (or ``HASH``) kept from ``chain_head`` earlier: also catches a cut tail.

    Returns
    -------
    VerifyReport
        ``ok``, records checked, the head, and the first bad record (None when ok).
    """
    with read_transaction(store.engine) as connection:
        return verify_ledger(connection, expect_head)


@_database_errors
def seal_archive(store: Store) -> int:
    """Commit every row not yet covered by a commitment (once, after upgrading an archive written
    before commitments existed; riskshape's own writes seal themselves).

    The commitments vouch for the rows as they are now, not for what happened to them before.

    Parameters
    ----------
    store : Store
        An open archive.

    Returns
    -------
    int
        Commitments appended (0 when everything was covered already).
    """
    from riskshape.store.seals import seal_all

    with write_transaction(store.engine) as connection:
        return seal_all(connection)


@_database_errors
def chain_head(store: Store) -> Head:
    """Record count and hash of the last record, as stored (run :func:`verify_chain` to check them).

    Parameters
    ----------
    store : Store
        An open archive.

    Returns
    -------
    Head
        Count and head hash.
    """
    with read_transaction(store.engine) as connection:
        seq, head = ledger.ledger_head(connection)
    return Head(count=seq, head_hash=head)


@_database_errors
def change_marker(store: Store, portfolio: str) -> ChangeMarker:
    """What the portfolio's reads depend on (latest run, windows written, ledger head), in one query.

    Parameters
    ----------
    store : Store
        The archive.
    portfolio : str
        The portfolio's name.

    Returns
    -------
    ChangeMarker
        Equal between two calls exactly when nothing the portfolio's reads show was archived between them.

    Raises
    ------
    NotFoundError
        If the portfolio does not exist.
    """
    return read_change_marker(store.engine, portfolio)
