"""The features series and the persistence diagrams of each window, as archived.

Both are written idempotently, keyed by (portfolio, configuration hash, window end[, dim]): a
window already archived is left as it is (an archive does not overwrite); the write reports
whether the new values were identical or differed (e.g. after a price correction). With
``supersede`` (a correction's run), a window whose values differ is archived again as a new
version keyed by the run; the earlier version stays. Reads answer with the version in force now,
or at ``as_known_at`` (see :mod:`riskshape.store.knowledge`).
"""

from __future__ import annotations

import json
import math
from collections.abc import Iterable, Sequence
from datetime import date, datetime
from typing import Any

import numpy as np
import pandas as pd
import sqlalchemy as sa
from sqlalchemy.engine import Connection, Engine

from riskshape.errors import NotFoundError, StoreError
from riskshape.store import schema as t
from riskshape.store.catalog import portfolio_id
from riskshape.store.database import read_transaction, write_transaction
from riskshape.store.knowledge import current_version, known_runs
from riskshape.store.ledger import to_date
from riskshape.store.pricebook import INDEX_UNIT
from riskshape.store.records import Diagram, FeaturesPage, WriteCount
from riskshape.store.seals import mark_unsealed
from riskshape.types import Diagram as DiagramArray

__all__ = ["write_features", "read_features", "window_ends", "write_diagrams", "read_diagram", "latest_config_hash"]

BAR_DTYPE = np.dtype("<f4")


def _run_keys(connection: Connection, run_id: int) -> tuple[int, str]:
    row = connection.execute(
        sa.select(t.runs.c.portfolio_id, t.runs.c.config_hash).where(t.runs.c.id == run_id)
    ).first()
    if row is None:
        raise NotFoundError(f"run {run_id} is not in the archive; record the run first (Store.create_run)")
    return int(row.portfolio_id), str(row.config_hash)


def latest_config_hash(connection: Connection, pid: int, known_at: datetime | None = None) -> str | None:
    """Configuration hash of the portfolio's most recent run (recorded by ``known_at``; None if none)."""
    query = sa.select(t.runs.c.config_hash).where(t.runs.c.portfolio_id == pid)
    if known_at is not None:
        query = query.where(t.runs.c.created_at <= known_at)
    return connection.execute(query.order_by(t.runs.c.id.desc()).limit(1)).scalar()


def _cell(value: Any) -> int | float | None:
    if isinstance(value, (bool, np.bool_)):
        return int(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    number = float(value)
    return number if math.isfinite(number) else None


def _row_json(row: dict[Any, Any]) -> str:
    return json.dumps({str(k): _cell(v) for k, v in row.items()}, separators=(",", ":"), allow_nan=False)


def write_features(engine: Engine, run_id: int, features: pd.DataFrame, supersede: bool = False) -> WriteCount:
    """Archive a run's features (one row per window end). See :meth:`riskshape.store.Store.write_features`."""
    if not isinstance(features.index, pd.DatetimeIndex):
        raise StoreError("features: the index must be a DatetimeIndex of window ends (MonitorResult.features)")
    bad = [c for c in features.columns if not pd.api.types.is_numeric_dtype(features[c])]
    if bad:
        raise StoreError(f"features: column {bad[0]!r} is not numeric; only summary columns can be archived")
    ends = [to_date(e, "features: window_end") for e in features.index]
    texts = [_row_json(row) for row in features.to_dict(orient="records")]
    with write_transaction(engine) as connection:
        pid, config_hash = _run_keys(connection, run_id)
        f = t.features
        where = [f.c.portfolio_id == pid, f.c.config_hash == config_hash, current_version(f, None)]
        if ends:
            where += [f.c.window_end >= min(ends), f.c.window_end <= max(ends)]
        held = dict(connection.execute(sa.select(f.c.window_end, f.c.values_json).where(*where)).all())
        differs = {e for e, text in zip(ends, texts) if e in held and held[e] != text}
        rows = [
            {"portfolio_id": pid, "config_hash": config_hash, "window_end": e, "run_id": run_id, "values_json": text}
            for e, text in zip(ends, texts)
            if e not in held or (supersede and e in differs)
        ]
        if rows:
            connection.execute(sa.insert(f), rows)
            mark_unsealed(connection, pid)
    fresh = len(rows) - (len(differs) if supersede else 0)
    return WriteCount(added=len(rows), existing=len(ends) - fresh - len(differs), differing=len(differs))


def window_ends(engine: Engine, portfolio: str, config_hash: str | None = None) -> tuple[date, ...]:
    """Window ends with archived features, ascending. See :meth:`riskshape.store.Store.window_ends`."""
    f = t.features
    with read_transaction(engine) as connection:
        pid = portfolio_id(connection, portfolio)
        chosen = config_hash or latest_config_hash(connection, pid)
        query = sa.select(f.c.window_end).where(f.c.portfolio_id == pid, f.c.config_hash == chosen)
        return tuple(connection.execute(query.distinct().order_by(f.c.window_end)).scalars())


def _features_frame(texts: Sequence[str], ends: Sequence[object], columns: Sequence[str] | None) -> pd.DataFrame:
    """Archived feature rows (their JSON text and window ends) as a table indexed by ``window_end``."""
    records = [json.loads(text) for text in texts]
    known = list(records[0]) if records else []
    if columns is not None:
        missing = [c for c in columns if records and c not in records[0]]
        if missing:
            raise StoreError(f"features: no column {missing[0]!r}; archived columns are {', '.join(known)}")
        known = list(columns)
    frame = pd.DataFrame.from_records(records, columns=known) if records else pd.DataFrame(columns=known)
    for column in frame.columns:
        values = frame[column].tolist()
        is_int = bool(values) and all(isinstance(v, int) and not isinstance(v, bool) for v in values)
        frame[column] = frame[column].astype("int64" if is_int else "float64")
    frame.index = pd.DatetimeIndex(pd.to_datetime(list(ends)), name="window_end").as_unit(INDEX_UNIT)
    return frame


def last_features(
    engine: Engine, portfolio: str, *, end: object, count: int, config_hash: str, columns: Sequence[str] | None = None
) -> pd.DataFrame:
    """The last ``count`` windows (current versions) ending on or before ``end``, ascending.

    See :meth:`riskshape.store.Store.last_features`.
    """
    f = t.features
    with read_transaction(engine) as connection:
        pid = portfolio_id(connection, portfolio)
        query = (
            sa.select(f.c.window_end, f.c.values_json)
            .where(
                f.c.portfolio_id == pid,
                f.c.config_hash == config_hash,
                f.c.window_end <= to_date(end, "end"),
                current_version(f, None),
            )
            .order_by(f.c.window_end.desc())
            .limit(count)
        )
        rows = connection.execute(query).all()[::-1]
    return _features_frame([r.values_json for r in rows], [r.window_end for r in rows], columns)


def read_features(
    engine: Engine,
    portfolio: str,
    *,
    start: object = None,
    end: object = None,
    columns: Sequence[str] | None = None,
    limit: int | None = None,
    offset: int = 0,
    config_hash: str | None = None,
    as_known_at: datetime | None = None,
) -> FeaturesPage:
    """A page of the features series. See :meth:`riskshape.store.Store.read_features`."""
    if (limit is not None and limit < 0) or offset < 0:
        raise StoreError(f"paging: limit and offset must not be negative, got limit={limit}, offset={offset}")
    f = t.features
    with read_transaction(engine) as connection:
        pid = portfolio_id(connection, portfolio)
        chosen = config_hash or latest_config_hash(connection, pid, as_known_at)
        where = [f.c.portfolio_id == pid, f.c.config_hash == chosen, current_version(f, as_known_at)]
        if start is not None:
            where.append(f.c.window_end >= to_date(start, "start"))
        if end is not None:
            where.append(f.c.window_end <= to_date(end, "end"))
        total = int(connection.execute(sa.select(sa.func.count()).select_from(f).where(*where)).scalar_one())
        query = sa.select(f.c.window_end, f.c.values_json).where(*where).order_by(f.c.window_end).offset(offset)
        if limit is not None:
            query = query.limit(limit)
        rows = connection.execute(query).all()
    frame = _features_frame([r.values_json for r in rows], [r.window_end for r in rows], columns)
    return FeaturesPage(frame=frame, total=total, offset=offset, config_hash=chosen)


def write_diagrams(
    engine: Engine, run_id: int, diagrams: Iterable[tuple[object, int, DiagramArray]], supersede: bool = False
) -> WriteCount:
    """Archive diagrams of a run as float32 bars. See :meth:`riskshape.store.Store.write_diagrams`."""
    prepared: list[tuple[date, int, int, bytes]] = []
    for window_end, dim, bars in diagrams:
        array = np.asarray(bars, dtype=float)
        if array.ndim != 2 or array.shape[1] != 2 or not np.isfinite(array).all():
            raise StoreError(
                f"diagram {window_end} dim {dim}: bars must be an (n, 2) array of finite (birth, death), "
                f"got shape {array.shape}"
            )
        prepared.append(
            (
                to_date(window_end, "diagram window_end"),
                int(dim),
                len(array),
                np.ascontiguousarray(array, dtype=BAR_DTYPE).tobytes(),
            )
        )
    with write_transaction(engine) as connection:
        pid, config_hash = _run_keys(connection, run_id)
        d = t.diagrams
        where = [d.c.portfolio_id == pid, d.c.config_hash == config_hash, current_version(d, None, by_dim=True)]
        if prepared:
            where += [d.c.window_end >= min(p[0] for p in prepared), d.c.window_end <= max(p[0] for p in prepared)]
        held = {
            (r.window_end, int(r.dim)): bytes(r.bars)
            for r in connection.execute(sa.select(d.c.window_end, d.c.dim, d.c.bars).where(*where))
        }
        differs = {(e, k) for e, k, _, blob in prepared if (e, k) in held and held[(e, k)] != blob}
        rows = [
            {
                "portfolio_id": pid,
                "config_hash": config_hash,
                "window_end": e,
                "dim": k,
                "run_id": run_id,
                "n_bars": n,
                "bars": blob,
            }
            for e, k, n, blob in prepared
            if (e, k) not in held or (supersede and (e, k) in differs)
        ]
        if rows:
            connection.execute(sa.insert(d), rows)
            mark_unsealed(connection, pid)
    fresh = len(rows) - (len(differs) if supersede else 0)
    return WriteCount(added=len(rows), existing=len(prepared) - fresh - len(differs), differing=len(differs))


def read_diagram(
    engine: Engine,
    portfolio: str,
    window_end: object,
    dim: int,
    config_hash: str | None = None,
    as_known_at: datetime | None = None,
) -> Diagram:
    """One archived diagram. See :meth:`riskshape.store.Store.read_diagram`."""
    day = to_date(window_end, "window_end")
    d = t.diagrams
    with read_transaction(engine) as connection:
        pid = portfolio_id(connection, portfolio)
        chosen = config_hash or latest_config_hash(connection, pid, as_known_at)
        query = sa.select(d.c.bars, d.c.n_bars, d.c.run_id, d.c.config_hash).where(
            d.c.portfolio_id == pid, d.c.config_hash == chosen, d.c.window_end == day, d.c.dim == dim
        )
        if as_known_at is not None:
            query = query.where(d.c.run_id.in_(known_runs(as_known_at)))
        row = connection.execute(query.order_by(d.c.run_id.desc()).limit(1)).first()
    if row is None:
        known = "" if as_known_at is None else f" as known at {as_known_at.isoformat()}"
        raise NotFoundError(
            f"no diagram of portfolio {portfolio!r} for window {day} dim {dim} (configuration {chosen}){known}; "
            "check the date (a window end), the dimension (0..maxdim) and the moment asked for"
        )
    bars = np.frombuffer(bytes(row.bars), dtype=BAR_DTYPE).reshape(int(row.n_bars), 2).copy()
    bars.setflags(write=False)
    return Diagram(
        portfolio=portfolio, window_end=day, dim=dim, config_hash=row.config_hash, run_id=int(row.run_id), bars=bars
    )
