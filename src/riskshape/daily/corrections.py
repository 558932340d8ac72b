"""Corrections supersede: recompute only the windows a corrected price is in, archive them as new versions.

A correction to archived prices (one price or many, any archived dates):

1. archives the revised prices (the earlier revision stays) with a new run, the correction's run;
2. recomputes only the windows whose returns a corrected date enters (a price at row ``c`` enters
   the returns at rows ``c - 1`` and ``c``), with the windows whose running sums still carry it
   (:func:`with_carried_sums`: up to the next rebuild point, at most 63 more), and the distances of
   the window after the last of them (Wasserstein and bottleneck to its previous window), reading
   only the prices those windows need;
3. archives the values that changed as a new version of those windows, keyed by the correction's
   run (knowledge time = the run's ``created_at``); earlier versions stay, and reads ``as_known_at``
   an earlier moment return them bit for bit;
4. appends one chained ``window_superseded`` record (the corrected cells, the windows superseded,
   a hash of their new values) to the ledger;
5. re-evaluates the rules over the corrected series from the first changed window on (the rules
   are causal: nothing before it changes): an archived alert whose value or decision changed gets a
   chained ``alert_superseded`` record (old value, new value, threshold, whether the rule still
   fires, the correcting run); a firing the corrected data now raises is raised, with an
   ``alert_raised_by_correction`` record.
"""

from __future__ import annotations

import hashlib
import json
import math
from collections.abc import Callable
from dataclasses import dataclass, replace
from datetime import date

import numpy as np
import pandas as pd

from riskshape.alerts.model import Alert
from riskshape.alerts.rules import evaluate_rules, rule_state
from riskshape.compute.batch import diagram_distances, first_row_needed
from riskshape.compute.derived import derive_columns, history_needed, window_volatility
from riskshape.compute.moments import is_rebuild_point
from riskshape.compute.monitor import MonitorResult, compute_windows_at, settings_of
from riskshape.compute.returns import to_returns
from riskshape.compute.summaries import DISTANCE_NAMES
from riskshape.compute.windows import window_end_positions, window_index
from riskshape.config import Config
from riskshape.errors import DataError
from riskshape.explain.archived import explanation_json
from riskshape.prices import ValidPrices, hash_prices
from riskshape.store import AlertRecord, EventRecord, Run, RunManifest, Store
from riskshape.types import Diagrams, Positions

__all__ = [
    "CorrectionReport",
    "apply_corrections",
    "affected_windows",
    "with_carried_sums",
    "revised_cells",
    "WINDOW_SUPERSEDED",
    "ALERT_SUPERSEDED",
    "ALERT_RAISED_BY_CORRECTION",
]

WINDOW_SUPERSEDED = "window_superseded"
ALERT_SUPERSEDED = "alert_superseded"
ALERT_RAISED_BY_CORRECTION = "alert_raised_by_correction"


@dataclass(frozen=True)
class CorrectionReport:
    """What :func:`apply_corrections` did.

    Attributes
    ----------
    portfolio : str
    corrections : int
        Price cells archived as a new revision.
    run_id : int or None
        The correction's run (None when no window contains a corrected date).
    windows_recomputed : int
        Windows whose inputs contain a corrected date (plus the window after them, for its distances).
    windows_superseded : int
        Of those, the windows whose values changed: archived as a new version.
    first_window, last_window : date or None
        The first and last window superseded.
    alerts_superseded : tuple of EventRecord
        The ``alert_superseded`` records appended.
    alerts_raised : tuple of AlertRecord
        Alerts the corrected data raises.
    """

    portfolio: str
    corrections: int
    run_id: int | None
    windows_recomputed: int
    windows_superseded: int
    first_window: date | None
    last_window: date | None
    alerts_superseded: tuple[EventRecord, ...]
    alerts_raised: tuple[AlertRecord, ...]

    @property
    def note(self) -> str:
        """One line saying what changed."""
        if self.run_id is None:
            return f"{self.corrections} price(s) corrected; no archived window contains them"
        text = (
            f"{self.corrections} price(s) corrected; {self.windows_recomputed} window(s) recomputed, "
            f"{self.windows_superseded} archived as a new version"
        )
        if self.first_window is not None:
            text += f" ({self.first_window} to {self.last_window})"
        return text + (
            f"; {len(self.alerts_superseded)} alert(s) superseded, {len(self.alerts_raised)} raised by the correction"
        )


def affected_windows(corrected_rows: Positions, ends: Positions, window: int) -> Positions:
    """Window ends (rows of the returns table) whose returns a corrected price enters.

    Parameters
    ----------
    corrected_rows : numpy.ndarray
        Rows of the price table (its trading days) holding a corrected price.
    ends : numpy.ndarray
        Every window end, as :func:`riskshape.compute.window_end_positions` gives them.
    window : int
        Window length in returns.

    Returns
    -------
    numpy.ndarray
        The ends ``e`` with a returns row ``c - 1`` or ``c`` in ``e - window + 1 .. e``.

    Examples
    --------
    >>> affected_windows(np.array([5]), np.arange(3, 10), 4).tolist()
    [4, 5, 6, 7, 8]
    """
    rows = np.unique(np.concatenate([np.asarray(corrected_rows) - 1, np.asarray(corrected_rows)]))
    rows = rows[rows >= 0]
    ends = np.asarray(ends, dtype=np.int64)
    if not len(rows) or not len(ends):
        return ends[:0]
    # the first changed returns row at or after each window's first row, compared with its end
    first = np.searchsorted(rows, ends - window + 1)
    inside = first < len(rows)
    inside[inside] = rows[first[inside]] <= ends[inside]
    return ends[inside]


def with_carried_sums(touched: Positions, ends: Positions, window: int, step: int) -> Positions:
    """The windows from the first to the last of ``touched``, and after them up to the next rebuild point.

    The windows are computed as one run of consecutive windows (each slides from the one before).

    With running sums (:mod:`riskshape.compute.moments`) a window's correlations are the sums of
    the windows before it, back to the last rebuild point, with rows added and taken away: a
    corrected row leaves its trace in their last bits until the sums are rebuilt. Those windows are
    recomputed too, so the archive stays equal, bit for bit, to a fresh run.

    Examples
    --------
    >>> with_carried_sums(np.array([3, 4]), np.arange(3, 200), 4, 1).tolist()[-1]  # rebuilt at index 63
    65
    """
    if not len(touched):
        return touched
    ends = np.asarray(ends, dtype=np.int64)
    touched = ends[(ends >= touched[0]) & (ends <= touched[-1])]  # one run of consecutive windows
    last = window_index(int(touched[-1]), window, step)
    after = ends[ends > touched[-1]]
    indexes = np.array([window_index(int(e), window, step) for e in after], dtype=np.int64)
    stop = next((k for k, i in enumerate(indexes) if i > last and is_rebuild_point(int(i))), len(after))
    return np.concatenate([np.asarray(touched, dtype=np.int64), after[:stop]])


def _distance_columns(maxdim: int) -> list[str]:
    return [f"h{k}_{name}" for k in range(maxdim + 1) for name in DISTANCE_NAMES]


def _archived_diagrams(store: Store, portfolio: str, end: pd.Timestamp, config: Config) -> Diagrams:
    return tuple(
        np.asarray(store.read_diagram(portfolio, end, k, config.hash()).bars, dtype=float)
        for k in range(config.maxdim + 1)
    )


@dataclass(frozen=True)
class _Slice:
    """The windows recomputed over the prices they need."""

    prices: pd.DataFrame
    result: MonitorResult  # the recomputed windows only (their returns and diagrams)


def _recompute(
    store: Store,
    portfolio: str,
    config: Config,
    calendar: pd.DatetimeIndex,
    assets: list[str],
    ends: Positions,
    revised: pd.DataFrame,
    previous: Diagrams | None,
) -> _Slice:
    """Windows ending at ``ends`` over the archived prices with ``revised`` applied, reading only their rows."""
    n_returns = len(calendar) - 1
    lo = first_row_needed(int(ends[0]), settings_of(config))
    hi = int(ends[-1])
    held = store.read_prices(portfolio, start=calendar[lo].date(), end=calendar[hi + 1].date(), assets=assets)
    held = held.reindex(calendar[lo : hi + 2])
    sent = revised.reindex(index=held.index, columns=held.columns)
    prices = ValidPrices.of_validated_parts(held.where(sent.isna(), sent))
    returns = to_returns(prices, config.returns)
    values = np.full((n_returns, len(assets)), np.nan)
    values[lo : hi + 1] = returns.to_numpy()
    windows = compute_windows_at(values, np.asarray(ends), config, previous)
    full_returns = pd.DataFrame(values, index=calendar[1:], columns=held.columns)
    result = MonitorResult(
        config=config,
        prices=prices,
        returns=full_returns,
        window_ends=pd.DatetimeIndex(calendar[np.asarray(ends) + 1], name="window_end"),
        windows=tuple(windows),
    )
    return _Slice(prices=prices, result=result)


def _with_derived(
    store: Store,
    portfolio: str,
    config: Config,
    calendar: pd.DatetimeIndex,
    assets: list[str],
    ends: Positions,
    frame: pd.DataFrame,
    revised: pd.DataFrame,
) -> pd.DataFrame:
    """The recomputed windows' rows, and the rows of the windows whose derived columns rest on them.

    A derived value at window ``t`` reads the summaries of windows ``t - H .. t`` (``H`` from
    :func:`riskshape.compute.derived.history_needed`: the trailing fit's windows, or the longest
    change's) and the equal-weight volatility of the fit's windows; so the derived columns of the
    recomputed windows and of the ``H`` windows after them change. They are derived again over the
    span ``H`` windows either side (the archived summaries, with the recomputed ones put in), each
    window's volatility from the corrected returns of its own rows, and are equal to a fresh run's:
    the trailing fits give the same bits however many rows are computed at once.

    Parameters
    ----------
    frame : pandas.DataFrame
        The summaries (no derived column) of consecutive windows, recomputed.

    Returns
    -------
    pandas.DataFrame
        Those windows and the ``H`` after them (fewer at the end of the series), summaries then
        derived columns, as :attr:`riskshape.MonitorResult.features` orders them.
    """
    history = history_needed(config.derived, config.step)
    dates = calendar[np.asarray(ends, dtype=np.int64) + 1]
    first, last = dates.get_loc(frame.index[0]), dates.get_loc(frame.index[-1])
    lo, hi = max(0, first - history), min(len(ends) - 1, last + history)
    archived = store.read_features(portfolio, start=dates[lo], end=dates[hi], config_hash=config.hash()).frame
    archived = archived[frame.columns].astype(frame.dtypes.to_dict())
    span = pd.concat(
        [archived.loc[archived.index < frame.index[0]], frame, archived.loc[archived.index > frame.index[-1]]]
    )
    if not span.index.equals(pd.DatetimeIndex(dates[lo : hi + 1])):
        raise DataError(
            f"portfolio {portfolio!r}: the archive holds no current version of some windows from {dates[lo].date()} "
            f"to {dates[hi].date()}, whose derived columns a correction recomputes; rerun the portfolio"
        )
    volatility = pd.Series(np.nan, index=span.index, name="ew_volatility", dtype=float)
    if config.derived.net_of_market:
        # each window's volatility from its own corrected returns: the price rows of windows lo .. hi
        start = int(ends[lo]) - config.window + 1
        stop = int(ends[hi]) + 1
        held = store.read_prices(portfolio, start=calendar[start].date(), end=calendar[stop].date(), assets=assets)
        held = held.reindex(calendar[start : stop + 1])
        sent = revised.reindex(index=held.index, columns=held.columns)
        returns = to_returns(ValidPrices.of_validated_parts(held.where(sent.isna(), sent)), config.returns)
        volatility = window_volatility(returns, pd.DatetimeIndex(span.index), config)
    derived = derive_columns(span, volatility, config.derived, config.step)
    whole = span.join(derived.frame)
    return whole.loc[whole.index >= frame.index[0]]


def _features_digest(frame: pd.DataFrame) -> str:
    rows = [
        [str(end.date()), *[None if not math.isfinite(float(v)) else float(v) for v in row]]
        for end, row in zip(frame.index, frame.to_numpy(dtype=float))
    ]
    text = json.dumps({"columns": list(frame.columns), "rows": rows}, separators=(",", ":"), allow_nan=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _cells(revised: pd.DataFrame, before: pd.DataFrame) -> list[dict[str, object]]:
    cells: list[dict[str, object]] = []
    for (day, asset), value in revised.stack().dropna().items():
        old = before.at[day, asset] if day in before.index and asset in before.columns else float("nan")
        cells.append(
            {
                "date": pd.Timestamp(day).date().isoformat(),
                "asset": str(asset),
                "archived": None if pd.isna(old) else float(old),
                "corrected": float(value),
            }
        )
    return cells


def apply_corrections(
    store: Store,
    portfolio: str,
    revised: pd.DataFrame,
    config: Config,
    run: Run,
    *,
    source: str = "correction",
    actor: str | None = None,
    explain: bool = True,
    counted_through: date | None = None,
    also: Callable[[Run], None] | None = None,
) -> CorrectionReport:
    """Archive corrected prices and supersede the windows and alerts they change (see the module notes).

    Parameters
    ----------
    store : Store
        The archive.
    portfolio : str
        The portfolio, with at least one run.
    revised : pandas.DataFrame
        Wide prices (validated): the corrected cells, NaN where nothing is corrected; every date
        an archived trading day of the portfolio, every column one of its assets.
    config : Config
        The portfolio's configuration (that of ``run``).
    run : Run
        The portfolio's latest run (its assets give the column order).
    source : str
        Where the corrections came from, kept with the correction's run.
    actor : str, optional
        Who sent them, kept with the chained records.
    explain : bool
        Archive each alert the correction raises with its explanation.
    counted_through : datetime.date, optional
        The portfolio's last counted day: pending days after it have no window, and a correction
        computes none for them (default: every archived date counts).
    also : callable, optional
        The caller's own writes, given the correction's run, committed in the correction's
        transaction (the daily loop's day state); not called when no window is recomputed.

    Returns
    -------
    CorrectionReport

    Raises
    ------
    DataError
        If a date is not an archived trading day of the portfolio or an asset is not one of its assets.
    """
    assets = list(run.assets)
    archived = pd.DatetimeIndex(pd.to_datetime(store.price_dates(portfolio)))
    calendar = archived if counted_through is None else archived[archived <= pd.Timestamp(counted_through)]
    revised = revised.dropna(how="all").dropna(axis=1, how="all")
    unknown = [a for a in revised.columns if a not in assets]
    if unknown:
        raise DataError(
            f"{source}: asset {unknown[0]!r} is not one of portfolio {portfolio!r}'s assets; "
            "correct only prices of its assets"
        )
    outside = revised.index.difference(archived)
    if len(outside):
        raise DataError(
            f"{source}: date {outside[0].date()} is not an archived trading day of portfolio {portfolio!r}; "
            "a correction revises archived prices only (send new days as an ordinary ingest)"
        )
    before = store.read_prices(portfolio, start=revised.index[0].date(), end=revised.index[-1].date(), assets=assets)
    rows = calendar.get_indexer(revised.index)
    rows = rows[rows >= 0]  # a revised price on a pending day enters no window yet
    n_returns = len(calendar) - 1
    ends = window_end_positions(n_returns, config.window, config.step) if n_returns >= config.window else np.array([])
    touched = with_carried_sums(affected_windows(rows, ends, config.window), ends, config.window, config.step)
    if not len(touched):
        written = store.append_prices(portfolio, revised, source=source)
        return CorrectionReport(portfolio, written.corrections, None, 0, 0, None, None, (), ())
    position = int(np.searchsorted(ends, touched[0]))
    previous = _archived_diagrams(store, portfolio, calendar[int(ends[position - 1]) + 1], config) if position else None
    part = _recompute(store, portfolio, config, calendar, assets, touched, revised, previous)
    # the slice's own summaries: its derived columns would rest on the slice alone (see _with_derived)
    frame = replace(part.result, config=config.replace(derived={}, alerts={"rules": []})).features
    after = int(np.searchsorted(ends, touched[-1])) + 1
    if after < len(ends):  # the next window: same diagram, new distance to the window before it
        next_end = calendar[int(ends[after]) + 1]
        row = store.read_features(portfolio, start=next_end, end=next_end, config_hash=config.hash()).frame
        distances = diagram_distances(
            part.result.windows[-1].diagrams, _archived_diagrams(store, portfolio, next_end, config), config.order_p
        )
        row = row.astype({c: "float64" for c in _distance_columns(config.maxdim)})
        row.loc[next_end, _distance_columns(config.maxdim)] = distances.ravel()
        frame = pd.concat([frame, row[frame.columns].astype(frame.dtypes.to_dict())])
    recomputed = len(frame)
    if config.derived.active:
        frame = _with_derived(store, portfolio, config, calendar, assets, ends, frame, revised)
    manifest = RunManifest(
        config=config.to_mapping(),
        config_hash=config.hash(),
        input_hash=hash_prices(part.prices),
        package_version=part.result.package_version,
        source=f"{source} (correction)",
    )
    old = store.read_features(
        portfolio, start=frame.index[0], end=frame.index[-1], config_hash=config.hash(), as_known_at=run.created_at
    ).frame
    changed = [end for end in frame.index if end not in old.index or not _same_row(old.loc[end], frame.loc[end])]
    superseded: tuple[EventRecord, ...] = ()
    raised: tuple[AlertRecord, ...] = ()
    dims = range(config.maxdim + 1)
    # the revision, the new versions, the chained records and the commitment: one commit, or none
    with store.transaction():
        new_run = store.create_run(portfolio, manifest, part.prices)
        features = store.write_features(new_run.id, frame, supersede=True)
        store.write_diagrams(
            new_run.id,
            ((end, k, part.result.diagram(end, k)) for end in part.result.window_ends for k in dims),
            supersede=True,
        )
        store.append_event(
            WINDOW_SUPERSEDED,
            {
                "run": new_run.id,
                "config_hash": config.hash(),
                "corrected": _cells(revised, before),
                "windows": [str(end.date()) for end in changed],
                "recomputed": recomputed,
                "features_hash": _features_digest(frame.loc[changed]),
            },
            portfolio=portfolio,
            subject=str(changed[0].date()) if changed else str(frame.index[0].date()),
            actor=actor,
        )
        if changed:
            superseded, raised = _review_alerts(
                store, portfolio, config, new_run, part, changed[0], revised, actor=actor, explain=explain
            )
        if also is not None:
            also(new_run)
    return CorrectionReport(
        portfolio=portfolio,
        corrections=new_run.corrections_added,
        run_id=new_run.id,
        windows_recomputed=recomputed,
        windows_superseded=features.differing,
        first_window=changed[0].date() if changed else None,
        last_window=changed[-1].date() if changed else None,
        alerts_superseded=superseded,
        alerts_raised=raised,
    )


def _same_row(a: pd.Series, b: pd.Series) -> bool:
    return bool(np.array_equal(a.to_numpy(dtype=float), b.to_numpy(dtype=float), equal_nan=True))


def _last_known(store: Store, alert: AlertRecord, marks: dict[str, EventRecord]) -> tuple[float, bool]:
    """The alert's value and decision as last recorded: its latest supersede record, else as raised."""
    mark = marks.get(str(alert.id))
    if mark is None:
        return alert.value, True
    data = mark.data
    value = data.get("new_value")
    return (float("nan") if value is None else float(str(value))), bool(data.get("still_fires"))


def _review_alerts(
    store: Store,
    portfolio: str,
    config: Config,
    run: Run,
    part: _Slice,
    first_changed: pd.Timestamp,
    revised: pd.DataFrame,
    *,
    actor: str | None,
    explain: bool,
) -> tuple[tuple[EventRecord, ...], tuple[AlertRecord, ...]]:
    """Re-evaluate the rules over the corrected series from ``first_changed`` on (see the module notes)."""
    series = store.read_features(portfolio, config_hash=config.hash()).frame
    rules = {r.name: r for r in config.alerts.rules}
    archived = [
        a
        for a in store.list_alerts(portfolio=portfolio, since=first_changed.date(), limit=None).items
        if a.config_hash == config.hash()
    ]
    marks = {e.subject or "": e for e in store.list_events(kind=ALERT_SUPERSEDED, portfolio=portfolio)}
    superseded: list[EventRecord] = []
    for alert in archived:
        rule = rules.get(alert.rule)
        end = pd.Timestamp(alert.window_end)
        if rule is None or end not in series.index:
            continue
        state = rule_state(series[rule.summary].loc[:end], rule)
        old_value, old_fires = _last_known(store, alert, marks)
        same_value = old_value == state.value or (math.isnan(old_value) and math.isnan(state.value))
        if same_value and old_fires == state.fired:
            continue
        superseded.append(
            store.append_event(
                ALERT_SUPERSEDED,
                {
                    "alert": alert.id,
                    "rule": alert.rule,
                    "window_end": alert.window_end.isoformat(),
                    "old_value": None if math.isnan(old_value) else old_value,
                    "new_value": None if math.isnan(state.value) else state.value,
                    "threshold": None if math.isnan(state.threshold) else state.threshold,
                    "still_fires": state.fired,
                    "run": run.id,
                },
                portfolio=portfolio,
                subject=str(alert.id),
                actor=actor,
            )
        )
    known = {
        (a.rule, a.window_end)
        for a in store.list_alerts(portfolio=portfolio, limit=None).items
        if a.config_hash == config.hash()
    }
    firings = [
        f
        for f in evaluate_rules(series, config.alerts.rules)
        if f.window_end >= first_changed and (f.rule, f.window_end.date()) not in known
    ]
    if not firings:
        return tuple(superseded), ()
    outside = [f.window_end for f in firings if f.window_end not in part.result.window_ends]
    views = {end: part.result for end in part.result.window_ends}
    if outside:  # a later window whose threshold or history moved: its own inputs, read for it alone
        calendar = pd.DatetimeIndex(pd.to_datetime(store.price_dates(portfolio)))
        for end in outside:
            row = np.array([calendar.get_loc(end) - 1])
            views[end] = _recompute(store, portfolio, config, calendar, list(run.assets), row, revised, None).result
    alerts = [
        Alert(
            portfolio=portfolio,
            firing=f,
            raised_at=run.created_at,
            config_hash=config.hash(),
            inputs_hash=views[f.window_end].window_inputs_hash(f.window_end),
            package_version=run.package_version,
            explanation=explanation_json(views[f.window_end], f) if explain else None,
        )
        for f in firings
    ]
    added = store.append_alerts(alerts, run.id).added
    corrected = sorted({pd.Timestamp(d).date().isoformat() for d in revised.index})
    for alert in added:
        store.append_event(
            ALERT_RAISED_BY_CORRECTION,
            {
                "alert": alert.id,
                "run": run.id,
                "corrected_dates": corrected,
                "rule": alert.rule,
                "window_end": alert.window_end.isoformat(),
                "value": alert.value,
                "threshold": alert.threshold,
            },
            portfolio=portfolio,
            subject=str(alert.id),
            actor=actor,
        )
    return tuple(superseded), added


def revised_cells(sent: pd.DataFrame, held: pd.DataFrame) -> pd.DataFrame:
    """The cells of ``sent`` that revise an archived price of ``held`` (NaN elsewhere), without empty rows.

    Examples
    --------
    >>> days = pd.to_datetime(["2024-01-02", "2024-01-03"])
    >>> held = pd.DataFrame({"QA01": [1.0, 2.0], "QA02": [3.0, 4.0]}, index=days)
    >>> sent = pd.DataFrame({"QA01": [1.0, 2.5], "QA02": [3.0, 4.0]}, index=days)
    >>> revised_cells(sent, held).to_dict()
    {'QA01': {Timestamp('2024-01-03 00:00:00'): 2.5}}
    """
    overlap = sent.index.intersection(held.index)
    columns = [c for c in sent.columns if c in held.columns]
    mine = sent.loc[overlap, columns]
    kept = held.loc[overlap, columns]
    return mine.where(mine.notna() & (mine != kept)).dropna(how="all").dropna(axis=1, how="all")
