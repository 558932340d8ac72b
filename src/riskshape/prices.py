"""The one boundary for market data: read a price table and validate it.

Accepted layouts (CSV or Parquet):

* **wide**: a ``date`` column, then one column per asset;
* **long**: exactly the columns ``date``, ``asset``, ``price``.

Validation rejects, with a message naming the file, the line or date, the column and the fix:
unparseable dates, duplicate dates, non-numeric cells, zero or negative prices, infinite
values, duplicate asset names, fewer than 3 assets, and (given ``min_rows``) fewer rows than
one window needs, asset names longer than 200 characters. Unsorted dates are sorted with a
:class:`~riskshape.errors.DataQualityWarning`.
Empty cells are missing prices, which are normal (late listings, delistings, holidays): the
window policy in :mod:`riskshape.compute.windows` decides who enters each window.

Validation happens once: :func:`validate_prices` (and :func:`read_prices`) return a
:class:`ValidPrices`, a DataFrame whose type says it passed, and what takes prices
(``monitor``, ``MonitorResult.update``, ``Store.append_prices``) does not check it again. Any
operation that makes a new frame (a slice, arithmetic, ``concat``) gives a plain DataFrame,
which is checked again where it enters.
"""

from __future__ import annotations

import hashlib
import io
import os
import unicodedata
import warnings
from collections.abc import Callable
from pathlib import Path
from typing import IO, cast

import numpy as np
import pandas as pd

from riskshape.errors import DataError, DataQualityWarning
from riskshape.price_text import MAX_ASSETS, MAX_ROWS, check_csv_text, decode_price_bytes
from riskshape.types import FloatArray, IntArray

__all__ = [
    "read_prices",
    "validate_prices",
    "ValidPrices",
    "ensure_valid",
    "csv_table",
    "hash_prices",
    "MIN_ASSETS",
    "MAX_NAME",
    "MAX_ASSETS",
    "MAX_ROWS",
]

MIN_ASSETS = 3
MAX_NAME = 200
"""The longest asset name accepted (the archive's column width)."""
_MISSING = {"", "na", "nan", "null", "none", "n/a", "#n/a"}


class ValidPrices(pd.DataFrame):  # type: ignore[misc]  # pandas has no type information here
    """Wide prices that passed :func:`validate_prices`: the type says so.

    A ``DatetimeIndex`` named ``date`` (sorted, unique), one float64 column per asset (names
    unique, non-empty, at most :data:`MAX_NAME` characters), every price positive and finite or
    NaN (missing). It is an ordinary DataFrame in every other respect; treat it as read-only.
    Operations that build a new frame return a plain ``pandas.DataFrame`` (pandas' default for a
    subclass that does not set ``_constructor``), so a changed table is never taken for a
    validated one.

    Examples
    --------
    >>> table = pd.DataFrame({"date": ["2031-01-02", "2031-01-03"], "QA01": [10.0, 10.5],
    ...                       "QA02": [20.0, 19.8], "QA03": [5.0, 5.1]})
    >>> prices = validate_prices(table)
    >>> isinstance(prices, ValidPrices), isinstance(prices.iloc[:1], ValidPrices)
    (True, False)
    """

    @classmethod
    def of_validated_parts(cls, frame: pd.DataFrame) -> ValidPrices:
        """Mark as validated a table assembled only from validated prices (no check is made).

        For tables built inside riskshape from pieces that each passed :func:`validate_prices` (the
        archive's prices and a validated request, say), reindexed or concatenated without changing
        a value. Anything else goes through :func:`validate_prices`.
        """
        return cls(frame)


def read_prices(source: str | os.PathLike[str], min_rows: int = 2) -> ValidPrices:
    """Read and validate a price file.

    Parameters
    ----------
    source : path-like
        A ``.csv`` or ``.parquet`` file, wide or long (see the module notes).
    min_rows : int
        The fewest dates accepted (one window of returns needs ``window + 1`` prices).

    Returns
    -------
    ValidPrices
        Wide prices: sorted ``DatetimeIndex`` named ``date``, one float64 column per asset,
        NaN where a price is missing.

    Raises
    ------
    DataError
        If the file cannot be read or fails validation.
    """
    path = Path(source)
    suffix = path.suffix.lower()
    if not path.exists():
        raise DataError(f"{path}: no such file; give the path of a CSV or Parquet price table")
    if path.is_dir():
        raise DataError(f"{path}: a folder, not a file; give the path of a CSV or Parquet price table")
    try:
        if suffix in {".csv", ".txt", ".gz"}:
            raw = csv_table(path.read_bytes(), name=str(path))
            first_line = 2  # line 1 holds the header
        elif suffix in {".parquet", ".pq"}:
            raw = pd.read_parquet(path)
            first_line = 1
        else:
            raise DataError(f"{path}: unknown file type '{suffix}'; use a .csv or .parquet file")
    except DataError:
        raise
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError, OSError, ValueError) as err:
        raise DataError(f"{path}: cannot read it as {suffix[1:]} ({' '.join(str(err).split())})") from None
    label = "line" if suffix != ".parquet" and suffix != ".pq" else "row"
    return validate_prices(raw, source=str(path), min_rows=min_rows, first_line=first_line, row_label=label)


def csv_table(
    source: str | os.PathLike[str] | IO[str] | bytes,
    name: str | None = None,
    max_assets: int = MAX_ASSETS,
    max_rows: int = MAX_ROWS,
) -> pd.DataFrame:
    r"""The cells of a CSV price table as text, its header row taken exactly as written.

    The bytes are decoded and checked first (:mod:`riskshape.price_text`: gzip by its content, a
    byte-order mark, a semicolon or tab delimiter, the size limits, fields per line). pandas would
    rename a repeated column name ("A.1") or a blank one ("Unnamed: 2") and hide both from
    validation, so the header row is read as a data row and applied here.

    Parameters
    ----------
    source : path-like, text stream or bytes
        The CSV file, its text or its bytes.
    name : str, optional
        Name used in messages (default: the path, or "prices").
    max_assets, max_rows : int
        The most asset columns and data lines accepted.

    Returns
    -------
    pandas.DataFrame
        Every cell as a string, columns named by the header row.

    Raises
    ------
    DataError
        If the bytes are not CSV text riskshape reads, or a limit is passed (the message names the
        file, the line and the fix).

    Examples
    --------
    >>> csv_table(b"date;QA01;QA02;QA03\n2031-01-02;1;2;3\n").columns.tolist()
    ['date', 'QA01', 'QA02', 'QA03']
    """
    if isinstance(source, (bytes, bytearray)):
        label = name or "prices"
        text = decode_price_bytes(bytes(source), label)
    elif hasattr(source, "read"):
        label = name or "prices"
        content = source.read()
        text = decode_price_bytes(content, label) if isinstance(content, bytes) else content
    else:
        label = name or str(source)
        try:
            text = decode_price_bytes(Path(source).read_bytes(), label)
        except OSError as err:
            raise DataError(f"{label}: cannot read it ({err.strerror}); check the path and its permissions") from None
    checked = check_csv_text(text, label, max_assets=max_assets, max_rows=max_rows)
    try:
        cells = pd.read_csv(
            io.StringIO(checked.text),
            sep=checked.delimiter,
            dtype=str,
            keep_default_na=False,
            skipinitialspace=True,
            header=None,
        )
    except (pd.errors.ParserError, pd.errors.EmptyDataError, ValueError) as err:
        raise DataError(
            f"{label}: not well-formed CSV ({' '.join(str(err).split())}); use one header line and one field per "
            "column on every line"
        ) from None
    raw = cells.iloc[1:].reset_index(drop=True)
    raw.columns = [str(c).strip() for c in cells.iloc[0]]
    return raw


def validate_prices(
    table: pd.DataFrame,
    source: str = "prices",
    min_rows: int = 2,
    first_line: int = 1,
    row_label: str = "row",
    min_assets: int = MIN_ASSETS,
    max_assets: int = MAX_ASSETS,
    max_rows: int = MAX_ROWS,
) -> ValidPrices:
    """Validate a price table in any accepted layout and return it wide.

    A wide DataFrame that already has a ``DatetimeIndex`` (the notebook case) is accepted as it
    is; otherwise the table needs a ``date`` column (wide) or ``date, asset, price`` (long).

    Parameters
    ----------
    table : pandas.DataFrame
        The prices as read.
    source : str
        Name used in messages (a file name, or "prices DataFrame").
    min_rows : int
        The fewest dates accepted.
    first_line, row_label : int, str
        How rows are numbered in messages (``line 2`` is the first data line of a CSV file).
    min_assets : int
        The fewest asset columns accepted (a day's feed for an existing portfolio may carry one).
    max_assets, max_rows : int
        The most assets and rows accepted (before any price is parsed).

    Returns
    -------
    ValidPrices
        Wide, sorted, float64 prices indexed by ``date``.

    Raises
    ------
    DataError
        On any violation listed in the module notes.
    """
    if len(table) > max_rows:
        raise DataError(f"{source}: {len(table)} {row_label}s, more than the limit of {max_rows}; send fewer at once")
    if table.shape[1] - 1 > max_assets:
        raise DataError(
            f"{source}: {table.shape[1] - 1} asset columns, more than the limit of {max_assets}; split the portfolio"
        )
    frame = _to_wide(table, source, first_line, row_label)
    dates = frame.index
    lines = frame["__line__"].to_numpy()
    frame = frame.drop(columns="__line__")

    if frame.columns.has_duplicates:
        dup = frame.columns[frame.columns.duplicated()][0]
        raise DataError(f"{source}: asset column '{dup}' appears twice; give each asset one column")
    empty = [c for c in frame.columns if not str(c).strip()]
    if empty:
        raise DataError(f"{source}: an asset column has no name; name every column in the header")
    long_names = [str(c) for c in frame.columns if len(str(c)) > MAX_NAME]
    if long_names:
        raise DataError(
            f"{source}: asset name {long_names[0][:40]!r}... is longer than {MAX_NAME} characters; shorten it"
        )
    for name in frame.columns:
        bad = next((ch for ch in str(name) if unicodedata.category(ch) in {"Cc", "Cf", "Zl", "Zp"}), None)
        if bad is not None:
            raise DataError(
                f"{source}: asset name {str(name)[:60]!r} holds a control character ({bad!r}, e.g. a line break or "
                "a tab); a name is one line of printable text, rename it"
            )
    if frame.shape[1] > max_assets:
        raise DataError(f"{source}: {frame.shape[1]} assets, more than the limit of {max_assets}; split the portfolio")
    if frame.shape[1] < min_assets:
        raise DataError(
            f"{source}: {frame.shape[1]} asset column(s) found, at least {min_assets} are needed "
            "to measure the shape of dependence; add assets"
        )

    def where_in(name: str) -> Callable[[int], str]:
        return lambda i: f"{source}: {row_label} {lines[i]} (date {dates[i].date()}), column '{name}'"

    numeric = all(pd.api.types.is_numeric_dtype(t) and not pd.api.types.is_bool_dtype(t) for t in frame.dtypes)
    if numeric:  # checked as one array; a bad column is parsed alone for its message
        values = frame.to_numpy(dtype=float)
        with np.errstate(invalid="ignore"):
            bad = ~np.isnan(values) & ~(np.isfinite(values) & (values > 0))
        for j in np.flatnonzero(bad.any(axis=0))[:1]:
            _parse_prices(frame.iloc[:, j], where_in(str(frame.columns[j])))
    else:
        values = np.empty(frame.shape, dtype=float)
        for j, column in enumerate(frame.columns):
            values[:, j] = _parse_prices(frame[column], where_in(str(column)))

    result = ValidPrices(values, index=pd.DatetimeIndex(dates, name="date"), columns=[str(c) for c in frame.columns])
    result.columns.name = "asset"
    if len(result) < min_rows:
        raise DataError(
            f"{source}: {len(result)} dates, but one window needs at least {min_rows} "
            "(window + 1 prices); give a longer history or a shorter window"
        )
    return result


def ensure_valid(prices: pd.DataFrame, source: str = "prices", min_rows: int = 2) -> ValidPrices:
    """Prices as :class:`ValidPrices`: validated once, and not again when they already are.

    Parameters
    ----------
    prices : pandas.DataFrame
        A :class:`ValidPrices` (only its number of dates is checked), or any table
        :func:`validate_prices` accepts.
    source : str
        Name used in messages.
    min_rows : int
        The fewest dates the caller needs.

    Returns
    -------
    ValidPrices

    Raises
    ------
    DataError
        If the table fails validation or has fewer than ``min_rows`` dates.
    """
    if not isinstance(prices, ValidPrices):
        return validate_prices(prices, source=source, min_rows=min_rows)
    if len(prices) < min_rows:
        raise DataError(
            f"{source}: {len(prices)} dates, but one window needs at least {min_rows} "
            "(window + 1 prices); give a longer history or a shorter window"
        )
    return prices


def hash_prices(prices: pd.DataFrame) -> str:
    """SHA-256 (hex) of a validated price table: dates, asset names and float64 values (NaN kept).

    Two tables with the same dates, assets and values give the same hash, however they were read
    (dates are hashed as microseconds, whatever resolution the index was stored at).
    """
    digest = hashlib.sha256()
    digest.update("\x1f".join(prices.columns).encode("utf-8"))
    digest.update(pd.DatetimeIndex(prices.index).as_unit("us").asi8.astype("<i8").tobytes())
    digest.update(np.ascontiguousarray(prices.to_numpy(dtype="<f8")).tobytes())
    return digest.hexdigest()


def _to_wide(table: pd.DataFrame, source: str, first_line: int, row_label: str) -> pd.DataFrame:
    """Bring the table to wide form with a sorted DatetimeIndex and a ``__line__`` column."""
    if isinstance(table.index, pd.DatetimeIndex):
        wide = table.copy()
        wide.columns = [str(c) for c in wide.columns]
        wide["__line__"] = np.arange(first_line, first_line + len(wide))
        dates = pd.DatetimeIndex(wide.index)
        if dates.hasnans:
            pos = int(np.flatnonzero(dates.isna())[0])
            raise DataError(f"{source}: {row_label} {first_line + pos}: the date index has a missing date")
        wide.index = dates.tz_localize(None) if dates.tz is not None else dates
    else:
        lower = {str(c).strip().lower(): c for c in table.columns}
        if "date" not in lower:
            raise DataError(
                f"{source}: no 'date' column; the table needs a 'date' column then one column per asset "
                "(wide), or the columns date, asset, price (long)"
            )
        table = table.rename(columns={lower["date"]: "date"})
        table = table.assign(__line__=np.arange(first_line, first_line + len(table)))
        table["date"] = _parse_dates(table["date"], source, table["__line__"].to_numpy(), row_label)
        if set(lower) == {"date", "asset", "price"}:
            wide = _pivot_long(
                table.rename(columns={lower["asset"]: "asset", lower["price"]: "price"}), source, row_label
            )
        else:
            wide = table.set_index("date")
            wide.columns = [str(c).strip() for c in wide.columns]
    if wide.index.has_duplicates:
        dup = wide.index[wide.index.duplicated()][0]
        rows = wide.loc[[dup], "__line__"].tolist()
        raise DataError(
            f"{source}: date {dup.date()} appears more than once ({row_label}s {', '.join(map(str, rows))}); "
            "keep one row per date"
        )
    if not wide.index.is_monotonic_increasing:
        warnings.warn(f"{source}: dates were not in order; sorted them", DataQualityWarning, stacklevel=3)
        wide = wide.sort_index()
    return wide


def _parse_dates(column: pd.Series, source: str, lines: IntArray, row_label: str) -> pd.Series:
    if pd.api.types.is_datetime64_any_dtype(column):
        parsed = pd.to_datetime(column)
        if getattr(parsed.dt, "tz", None) is not None:
            parsed = parsed.dt.tz_localize(None)
    else:
        text = column.astype(str).str.strip()
        parsed = pd.to_datetime(text, errors="coerce", format="ISO8601")
        bad = parsed.isna().to_numpy()
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            raise DataError(
                f"{source}: {row_label} {lines[i]}, column 'date': cannot read {text.iloc[i]!r} as a date; "
                "write dates as YYYY-MM-DD"
            )
    return parsed.dt.normalize()


def _pivot_long(table: pd.DataFrame, source: str, row_label: str) -> pd.DataFrame:
    """Long rows to wide; prices are parsed here, so a bad one is reported at its own line."""
    table = table.assign(asset=table["asset"].astype(str).str.strip())
    dup = table.duplicated(subset=["date", "asset"], keep="first")
    if dup.any():
        row = table[dup].iloc[0]
        raise DataError(
            f"{source}: {row_label} {row['__line__']}: asset '{row['asset']}' has a second price on "
            f"{row['date'].date()}; keep one price per asset and date"
        )
    lines, dates, assets = table["__line__"].to_numpy(), table["date"].to_numpy(), table["asset"].to_numpy()

    def where(i: int) -> str:
        day = pd.Timestamp(dates[i]).date()
        return f"{source}: {row_label} {lines[i]} (date {day}), asset '{assets[i]}', column 'price'"

    table = table.assign(price=_parse_prices(table["price"], where))
    prices = table.pivot(index="date", columns="asset", values="price")
    first_lines = table.groupby("date")["__line__"].min()
    prices["__line__"] = first_lines.reindex(prices.index).to_numpy()
    prices.columns.name = None
    return prices


def _parse_prices(column: pd.Series, where: Callable[[int], str]) -> FloatArray:
    """Parse price cells to float64: empty cells become NaN; text, infinite, zero or negative is an error.

    ``where(i)`` names the place of cell ``i`` (file, line, date, column) for the message.
    """
    if pd.api.types.is_numeric_dtype(column) and not pd.api.types.is_bool_dtype(column):
        numbers = column.to_numpy(dtype=float)
    else:
        text = column.astype(object)
        missing = column.isna().to_numpy() | text.map(lambda v: str(v).strip().lower() in _MISSING).to_numpy()
        numbers = pd.to_numeric(text.where(~missing, None), errors="coerce").to_numpy(dtype=float)
        bad = np.isnan(numbers) & ~missing
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            comma = "; write a decimal point, not a comma" if "," in str(column.iloc[i]) else ""
            raise DataError(
                f"{where(i)}: {column.iloc[i]!r} is not a number; write a price like 101.25 or leave the cell empty"
                + comma
            )
    present = ~np.isnan(numbers)
    infinite = present & ~np.isfinite(numbers)
    if infinite.any():
        i = int(np.flatnonzero(infinite)[0])
        raise DataError(f"{where(i)}: infinite price {numbers[i]}; fix it or leave the cell empty (missing)")
    nonpositive = present & (numbers <= 0)
    if nonpositive.any():
        i = int(np.flatnonzero(nonpositive)[0])
        raise DataError(
            f"{where(i)}: price {numbers[i]:g} is not positive; prices must be > 0 (leave a cell empty if unknown)"
        )
    return cast("FloatArray", numbers)
