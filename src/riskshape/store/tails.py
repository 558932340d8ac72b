"""A portfolio's day tail: one compact, replaceable row with what its next day reads.

A bounded day (:mod:`riskshape.daily.tail_run`) needs the last price rows of the history and the
rules' lookback of feature rows. Read from the archive, that is one row per price cell and one
JSON row per window, most of a day's cost. After each bounded day the same values are kept here
as one row per portfolio: the price rows (float64), their dates and assets, and the watched
feature columns with their window ends, as a short canonical JSON header and little-endian bytes.
They are copies of archived values, so a day that reads them computes exactly what it would from
the archive.

The row is replaced by every bounded day, inside that day's transaction; the chained
``day_state`` record saved with it names the row's SHA-256 (:func:`tail_digest`), so the hash
chain covers the row: a row whose digest is not the one the latest state names is not used (the
day reads the archive instead, and writes a fresh row), and ``audit verify`` reports it.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass
from datetime import date

import numpy as np
import pandas as pd
import sqlalchemy as sa
from sqlalchemy.engine import Connection, Engine

from riskshape.errors import StoreError
from riskshape.store import schema as t
from riskshape.store.catalog import portfolio_id
from riskshape.store.database import read_transaction, write_transaction
from riskshape.store.pricebook import INDEX_UNIT
from riskshape.store.records import BadRecord
from riskshape.store.series import BAR_DTYPE

DAY_STATE_KIND = "day_state"
"""Kind of the chained record that names a tail's digest (:data:`riskshape.daily.tail_run.DAY_STATE`)."""

__all__ = [
    "DayTail",
    "StoredTail",
    "encode_tail",
    "decode_tail",
    "tail_digest",
    "save_tail",
    "read_stored_tail",
    "check_tails",
]

_FORMAT = 1
_DTYPES = {"float64": "<f8", "int64": "<i8"}


@dataclass(frozen=True)
class DayTail:
    """The values a portfolio's next day reads.

    Attributes
    ----------
    first_row : int
        Absolute position (0 = the first counted price date) of the first row of ``prices``.
    prices : pandas.DataFrame
        Price rows through the last counted day, as :func:`riskshape.store.pricebook.read_prices` gives them.
    features : pandas.DataFrame
        The last archived windows' watched feature columns, indexed by ``window_end``, as
        :meth:`riskshape.store.Store.last_features` gives them.
    diagram_end : datetime.date or None
        The last archived window, whose diagrams ``diagrams`` are.
    diagrams : tuple of numpy.ndarray
        Its bars by dimension as archived (float32, ``(n, 2)``), as
        :meth:`riskshape.store.Store.read_diagram` gives them.
    """

    first_row: int
    prices: pd.DataFrame
    features: pd.DataFrame
    diagram_end: date | None = None
    diagrams: tuple[np.ndarray, ...] = ()


@dataclass(frozen=True)
class StoredTail:
    """A row of ``day_tails``: the run it was saved with, its digest and its bytes."""

    run_id: int
    digest: str
    payload: bytes


def tail_digest(payload: bytes) -> str:
    """SHA-256 of a tail's bytes, hex (what the chained ``day_state`` record names).

    Parameters
    ----------
    payload : bytes

    Returns
    -------
    str
    """
    return hashlib.sha256(payload).hexdigest()


def _days(index: pd.Index) -> list[str]:
    """ISO dates of a DatetimeIndex of midnights."""
    return [str(d) for d in np.datetime_as_string(np.asarray(index, dtype="datetime64[us]"), unit="D")]


def _index(days: list[str], name: str) -> pd.DatetimeIndex:
    """ISO dates as the archive's readers index them (midnights, unit ``us``)."""
    return pd.DatetimeIndex(np.array(days, dtype="datetime64[D]").astype(f"datetime64[{INDEX_UNIT}]"), name=name)


def encode_tail(tail: DayTail) -> bytes:
    """The tail as bytes: an 8-byte header length, a canonical JSON header, then the arrays.

    Parameters
    ----------
    tail : DayTail

    Returns
    -------
    bytes
        The same tail always gives the same bytes.

    Raises
    ------
    StoreError
        If a feature column is neither float64 nor int64.
    """
    dtypes = []
    for column in tail.features.columns:
        kind = str(tail.features[column].dtype)
        if kind not in _DTYPES:
            raise StoreError(f"day tail: feature column {column!r} has dtype {kind}; float64 or int64 expected")
        dtypes.append(kind)
    header = {
        "format": _FORMAT,
        "first_row": int(tail.first_row),
        "dates": _days(tail.prices.index),
        "assets": [str(a) for a in tail.prices.columns],
        "ends": _days(tail.features.index),
        "columns": [str(c) for c in tail.features.columns],
        "dtypes": dtypes,
        "diagram_end": None if tail.diagram_end is None else tail.diagram_end.isoformat(),
        "bars": [len(b) for b in tail.diagrams],
    }
    text = json.dumps(header, sort_keys=True, separators=(",", ":")).encode("utf-8")
    parts = [len(text).to_bytes(8, "little"), text, np.ascontiguousarray(tail.prices.to_numpy(), "<f8").tobytes()]
    parts += [
        np.ascontiguousarray(tail.features[c].to_numpy(), _DTYPES[k]).tobytes()
        for c, k in zip(tail.features.columns, dtypes, strict=True)
    ]
    parts += [np.ascontiguousarray(b, BAR_DTYPE).tobytes() for b in tail.diagrams]
    return b"".join(parts)


def decode_tail(payload: bytes) -> DayTail:
    """The tail :func:`encode_tail` wrote.

    Parameters
    ----------
    payload : bytes

    Returns
    -------
    DayTail

    Raises
    ------
    StoreError
        If the bytes are not a tail of this format.
    """
    try:
        size = int.from_bytes(payload[:8], "little")
        header = json.loads(payload[8 : 8 + size].decode("utf-8"))
        if header.get("format") != _FORMAT:
            raise ValueError(f"format {header.get('format')!r}")
        at = 8 + size
        days = _index(header["dates"], "date")
        assets = [str(a) for a in header["assets"]]
        n = len(days) * len(assets)
        values = np.frombuffer(payload, "<f8", count=n, offset=at).astype(np.float64).reshape(len(days), len(assets))
        at += 8 * n
        prices = pd.DataFrame(values, index=days, columns=assets)
        prices.columns = pd.Index(assets, name="asset")
        ends = _index(header["ends"], "window_end")
        columns: dict[str, np.ndarray] = {}
        for name, kind in zip(header["columns"], header["dtypes"], strict=True):
            columns[str(name)] = np.frombuffer(payload, _DTYPES[kind], count=len(ends), offset=at).astype(kind)
            at += 8 * len(ends)
        diagrams = []
        for n in header["bars"]:
            bars = np.frombuffer(payload, BAR_DTYPE, count=2 * int(n), offset=at).reshape(int(n), 2).copy()
            bars.setflags(write=False)
            diagrams.append(bars)
            at += 8 * int(n)
        end = header["diagram_end"]
        if at != len(payload):
            raise ValueError(f"{len(payload) - at} byte(s) left over")
    except (ValueError, KeyError, TypeError, UnicodeDecodeError) as err:
        raise StoreError(f"day tail: not a readable tail ({err})") from None
    features = pd.DataFrame(columns, columns=list(columns))
    features.index = ends
    return DayTail(
        first_row=int(header["first_row"]),
        prices=prices,
        features=features,
        diagram_end=None if end is None else date.fromisoformat(end),
        diagrams=tuple(diagrams),
    )


def save_tail(engine: Engine, portfolio: str, run_id: int, payload: bytes) -> str:
    """Replace the portfolio's tail row (inside the caller's write transaction, or its own).

    Parameters
    ----------
    engine : sqlalchemy.engine.Engine
    portfolio : str
    run_id : int
        The run the day archived.
    payload : bytes
        From :func:`encode_tail`.

    Returns
    -------
    str
        The row's digest.
    """
    digest = tail_digest(payload)
    with write_transaction(engine) as connection:
        pid = portfolio_id(connection, portfolio)
        connection.execute(sa.delete(t.day_tails).where(t.day_tails.c.portfolio_id == pid))
        connection.execute(
            sa.insert(t.day_tails).values(portfolio_id=pid, run_id=run_id, digest=digest, payload=payload)
        )
    return digest


def read_stored_tail(engine: Engine, portfolio: str) -> StoredTail | None:
    """The portfolio's tail row, or None.

    Parameters
    ----------
    engine : sqlalchemy.engine.Engine
    portfolio : str

    Returns
    -------
    StoredTail or None
    """
    d = t.day_tails
    with read_transaction(engine) as connection:
        pid = portfolio_id(connection, portfolio)
        row = connection.execute(sa.select(d.c.run_id, d.c.digest, d.c.payload).where(d.c.portfolio_id == pid)).first()
    if row is None:
        return None
    return StoredTail(run_id=int(row.run_id), digest=str(row.digest), payload=bytes(row.payload))


def check_tails(connection: Connection) -> BadRecord | None:
    """The first day tail row the chain does not vouch for, or None (part of ``audit verify``).

    A row is vouched for when its bytes hash to its digest and the chained ``day_state`` record of
    its run names that digest.

    Parameters
    ----------
    connection : sqlalchemy.engine.Connection
        Inside the verifying read transaction.

    Returns
    -------
    BadRecord or None
    """
    d, e = t.day_tails, t.events
    rows = connection.execute(
        sa.select(d.c.portfolio_id, d.c.run_id, d.c.digest, d.c.payload).order_by(d.c.portfolio_id)
    )
    for row in rows:
        if tail_digest(bytes(row.payload)) != row.digest:
            return BadRecord(0, "day_tails", int(row.portfolio_id), "the row's bytes do not hash to its digest")
        states = connection.execute(
            sa.select(e.c.seq, e.c.payload)
            .where(e.c.kind == DAY_STATE_KIND, e.c.portfolio_id == row.portfolio_id)
            .order_by(e.c.seq.desc())
        )
        named = next((s for s in states if json.loads(s.payload).get("run") == row.run_id), None)
        if named is None or json.loads(named.payload).get("tail") != row.digest:
            where = f"the day_state record of run {row.run_id}" if named is not None else "no day_state record"
            return BadRecord(
                0 if named is None else int(named.seq),
                "day_tails",
                int(row.portfolio_id),
                f"{where} names another digest than the row's (portfolio id {row.portfolio_id}); "
                "the row was changed after it was saved",
            )
    return None
