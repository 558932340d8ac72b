"""Price tables from request bodies: JSON (long rows or wide rows) or CSV text.

The tables come out as the CSV reader would see them (dates as ISO text, prices as numbers or
missing), so :func:`riskshape.prices.validate_prices` -- the one boundary for market data --
validates them exactly as it validates a file. One rule is the service's own: dates must arrive
in order (a file may be sorted with a warning; a feed that sends days out of order is refused,
since a later day may already have been computed).
"""

from __future__ import annotations

import pandas as pd

from riskshape import DataError, csv_table, validate_prices
from riskshape_service.schemas import PricesIn

__all__ = ["table_from_json", "table_from_csv", "validated_prices", "JSON_SOURCE", "CSV_SOURCE"]

JSON_SOURCE = "request body"
CSV_SOURCE = "request body (CSV)"


def _check_order(dates: list[str], source: str, label: str, first: int, lines: list[int] | None = None) -> None:
    parsed = pd.to_datetime(pd.Series(dates, dtype=object), errors="coerce", format="ISO8601")
    for i in range(1, len(parsed)):
        before, now = parsed.iloc[i - 1], parsed.iloc[i]
        if pd.notna(before) and pd.notna(now) and now < before:
            where = first + i if lines is None else lines[i]
            raise DataError(
                f"{source}: {label} {where}: date {dates[i]} comes after {dates[i - 1]}; dates out of order are "
                "refused -- send the rows sorted by date, oldest first"
            )


def table_from_json(body: PricesIn) -> tuple[pd.DataFrame, str]:
    """The raw table of a JSON body and its layout (``long`` or ``wide``); rows are numbered from 0.

    Raises
    ------
    DataError
        If dates are out of order or an asset is called ``date``.
    """
    if body.rows is not None:
        dates = [r.date.isoformat() for r in body.rows]
        _check_order(dates, JSON_SOURCE, "rows", 0)
        table = pd.DataFrame(
            {
                "date": dates,
                "asset": [r.asset for r in body.rows],
                "price": [float("nan") if r.price is None else float(r.price) for r in body.rows],
            }
        )
        return table, "long"
    assert body.wide is not None
    dates = [r.date.isoformat() for r in body.wide]
    _check_order(dates, JSON_SOURCE, "wide", 0)
    assets: dict[str, None] = {}
    for row in body.wide:
        for name in row.prices:
            if name.strip().lower() == "date":
                raise DataError(
                    f"{JSON_SOURCE}: an asset may not be called {name!r} (the name of the date field); rename it"
                )
            assets.setdefault(name, None)
    nan = float("nan")
    columns = {name: [nan if (v := r.prices.get(name)) is None else float(v) for r in body.wide] for name in assets}
    return pd.DataFrame({"date": dates, **columns}), "wide"


def table_from_csv(raw: bytes, group: str | None = None, *, max_assets: int, max_rows: int) -> pd.DataFrame:
    """The raw table of a CSV body (wide: ``date`` then one column per asset; or long:
    ``date,asset,price``); line 1 is the header. At most ``max_assets`` asset columns and ``max_rows`` lines.
    With ``group`` (a column, such as ``portfolio``), dates must be in order within each group's rows only.

    Raises
    ------
    DataError
        If the body is not UTF-8 text, is not well-formed CSV, or its dates are out of order.
    """
    table = csv_table(raw, name=CSV_SOURCE, max_assets=max_assets, max_rows=max_rows)
    if table.empty:
        raise DataError(f"{CSV_SOURCE}: a header but no data lines; add one line per date")
    lower = {str(c).strip().lower(): c for c in table.columns}
    if "date" in lower:
        dates = table[lower["date"]].astype(str).str.strip()
        if group is None or group not in lower:
            _check_order(dates.tolist(), CSV_SOURCE, "line", 2)
        else:
            for _, lines in dates.groupby(table[lower[group]].astype(str).str.strip(), sort=False):
                _check_order(lines.tolist(), CSV_SOURCE, "line", 2, [2 + int(i) for i in lines.index])
    return table


def validated_prices(
    table: pd.DataFrame,
    source: str,
    first_line: int,
    row_label: str,
    *,
    max_assets: int,
    max_rows: int,
) -> pd.DataFrame:
    """Validate a raw table through :func:`riskshape.prices.validate_prices` (one date and one asset are
    enough: a new portfolio's first prices need three assets, which the ingest checks).
    """
    return validate_prices(
        table,
        source=source,
        min_rows=1,
        first_line=first_line,
        row_label=row_label,
        min_assets=1,
        max_assets=max_assets,
        max_rows=max_rows,
    )
