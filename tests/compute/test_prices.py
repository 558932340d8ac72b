"""Prices in: validation once at the edge, wide and long layouts, sorting.

The bad inputs come from the ``bad_price_file`` fixture and the tables from ``price_files``
(tests/conftest.py): each case of the issue, in CSV and Parquet, with the file name, the line or
row, the column and the fix its message must name. References: pandas' own CSV/Parquet readers
for the values read back.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest

from riskshape import Config, DataError, DataQualityWarning, monitor, read_prices
from riskshape.prices import hash_prices, validate_prices


def test_bad_input_is_rejected_with_a_message_that_says_where_and_how(bad_price_file: Any) -> None:
    with pytest.raises(DataError) as caught:
        read_prices(bad_price_file.path, min_rows=bad_price_file.min_rows)
    message = str(caught.value)
    assert "\n" not in message  # one line
    missing = [f for f in bad_price_file.fragments if f not in message]
    assert not missing, f"{bad_price_file.case}: {missing} not in {message!r}"


@pytest.mark.parametrize("fmt", ["csv", "parquet"])
def test_good_file_reads_to_the_values_pandas_reads(price_files: Any, tmp_path: Path, fmt: str) -> None:
    table = price_files.table()
    table.loc[3, "XQ02"] = ""  # a missing price is normal
    path = price_files.write(table, tmp_path / f"prices.{fmt}")
    prices = read_prices(path)
    assert isinstance(prices.index, pd.DatetimeIndex) and prices.index.is_monotonic_increasing
    assert list(prices.columns) == ["XQ01", "XQ02", "XQ03", "XQ04"]
    if fmt == "csv":
        expected = pd.read_csv(path, index_col="date", parse_dates=["date"])
    else:
        expected = pd.read_parquet(path).set_index("date")
    np.testing.assert_array_equal(prices.to_numpy(), expected.to_numpy(dtype=float))
    assert (prices.index == pd.DatetimeIndex(expected.index)).all()
    assert np.isnan(prices.iloc[3]["XQ02"]) and prices.notna().sum().sum() == prices.size - 1


@pytest.mark.parametrize("fmt", ["csv", "parquet"])
def test_unsorted_dates_warn_and_are_sorted(price_files: Any, tmp_path: Path, fmt: str) -> None:
    table = price_files.table()
    ordered = read_prices(price_files.write(table, tmp_path / f"ordered.{fmt}"))
    shuffled = table.sample(frac=1.0, random_state=np.random.default_rng(3))
    with pytest.warns(DataQualityWarning, match="sorted"):
        sorted_back = read_prices(price_files.write(shuffled, tmp_path / f"shuffled.{fmt}"))
    pd.testing.assert_frame_equal(sorted_back, ordered, check_exact=True)


@pytest.mark.parametrize("fmt", ["csv", "parquet"])
def test_long_layout_equals_wide(price_files: Any, tmp_path: Path, fmt: str) -> None:
    wide_table = price_files.table()
    wide_table.loc[2, "XQ03"] = ""
    wide_table.loc[0:4, "XQ04"] = ""  # lists late
    long_table = wide_table.melt(id_vars="date", var_name="asset", value_name="price")
    long_table = long_table[long_table["price"] != ""]  # a long table simply has no row for a missing price
    long_table = long_table.sample(frac=1.0, random_state=np.random.default_rng(4)).reset_index(drop=True)
    wide = read_prices(price_files.write(wide_table, tmp_path / f"wide.{fmt}"))
    long = read_prices(price_files.write(long_table, tmp_path / f"long.{fmt}"))
    pd.testing.assert_frame_equal(long, wide, check_exact=True)
    assert wide["XQ04"].isna().sum() == 5


def test_long_layout_rejects_a_second_price_for_the_same_day(price_files: Any, tmp_path: Path) -> None:
    long_table = price_files.table().melt(id_vars="date", var_name="asset", value_name="price")
    long_table = pd.concat([long_table, long_table.iloc[[7]].assign(price="55.5")], ignore_index=True)
    path = price_files.write(long_table, tmp_path / "long.csv")
    with pytest.raises(DataError, match=rf"long\.csv: line {len(long_table) + 1}: asset 'XQ01' has a second price"):
        read_prices(path)


def test_missing_file_and_unknown_type(tmp_path: Path) -> None:
    with pytest.raises(DataError, match="nope.csv: no such file"):
        read_prices(tmp_path / "nope.csv")
    odd = tmp_path / "prices.xlsx"
    odd.write_text("x")
    with pytest.raises(DataError, match=r"prices.xlsx: unknown file type '.xlsx'"):
        read_prices(odd)


def test_no_date_column(price_files: Any, tmp_path: Path) -> None:
    path = price_files.write(price_files.table().rename(columns={"date": "day"}), tmp_path / "nodate.csv")
    with pytest.raises(DataError, match="nodate.csv: no 'date' column"):
        read_prices(path)


def _frame(price_files: Any, n_rows: int = 30) -> pd.DataFrame:
    table = price_files.table(n_rows)
    return table.set_index(pd.DatetimeIndex(table.pop("date"))).astype(float)


@pytest.mark.parametrize(
    ("spoil", "fragments"),
    [
        (lambda f: f.iloc[:20], ("20 dates", "at least 21")),
        (lambda f: f[["XQ01", "XQ02"]], ("2 asset column",)),
        (
            lambda f: f.assign(XQ03=f["XQ03"].where(f.index != f.index[5], 0.0)),
            ("date 2031-01-09", "'XQ03'", "not positive"),
        ),
        (
            lambda f: f.assign(XQ01=f["XQ01"].where(f.index != f.index[8], np.inf)),
            ("date 2031-01-14", "'XQ01'", "infinite"),
        ),
    ],
    ids=["too-few-rows", "too-few-assets", "zero-price", "infinite"],
)
def test_monitor_validates_a_dataframe_too(
    price_files: Any, spoil: Callable[[pd.DataFrame], pd.DataFrame], fragments: tuple[str, ...]
) -> None:
    with pytest.raises(DataError) as caught:
        monitor(spoil(_frame(price_files)), Config(window=20, compute={"executor": "serial"}))
    assert all(f in str(caught.value) for f in fragments), str(caught.value)


def test_validate_prices_keeps_a_clean_dataframe_as_it_is(price_files: Any) -> None:
    frame = _frame(price_files)
    valid = validate_prices(frame, source="prices DataFrame")
    np.testing.assert_array_equal(valid.to_numpy(), frame.to_numpy())
    assert valid.index.equals(frame.index)


@pytest.mark.parametrize("unit", ["s", "ms", "us", "ns"])
def test_input_hash_does_not_depend_on_how_the_dates_were_stored(price_files: Any, tmp_path: Path, unit: str) -> None:
    """The same dates, assets and prices give the same hash, however they were read
    (riskshape.prices.hash_prices docstring). A Parquet file may store timestamps in any unit
    (pandas 2 and many writers use nanoseconds); a CSV file reads at pandas' default unit.
    """
    table = price_files.table()
    from_csv = read_prices(price_files.write(table, tmp_path / "prices.csv"))
    typed = table.assign(date=pd.DatetimeIndex(pd.to_datetime(table["date"])).as_unit(unit)).astype(
        {a: float for a in price_files.assets}
    )
    typed.to_parquet(tmp_path / "prices.parquet", index=False)
    from_parquet = read_prices(tmp_path / "prices.parquet")
    pd.testing.assert_frame_equal(from_parquet, from_csv, check_exact=True, check_index_type=False)
    assert hash_prices(from_parquet) == hash_prices(from_csv)
    in_memory = typed.set_index("date")
    assert hash_prices(validate_prices(in_memory)) == hash_prices(from_csv)


def _write_text(path: Path, header: str, n_rows: int = 5) -> Path:
    dates = pd.bdate_range("2031-01-02", periods=n_rows)
    body = "\n".join(f"{d.date()},{100 + i},{50 + i / 2},{70 - i / 10}" for i, d in enumerate(dates))
    path.write_text(header + "\n" + body + "\n")
    return path


def test_csv_header_with_a_repeated_asset_is_rejected(tmp_path: Path) -> None:
    """A repeated asset name must not be renamed behind the user's back (pandas would make it 'XQ01.1')."""
    path = _write_text(tmp_path / "twice.csv", "date,XQ01,XQ01,XQ03")
    with pytest.raises(DataError, match=r"twice\.csv: asset column 'XQ01' appears twice"):
        read_prices(path)


def test_csv_header_with_a_nameless_asset_is_rejected(tmp_path: Path) -> None:
    """A nameless column must not become an asset called 'Unnamed: 2'."""
    path = _write_text(tmp_path / "nameless.csv", "date,XQ01,,XQ03")
    with pytest.raises(DataError, match=r"nameless\.csv: an asset column has no name"):
        read_prices(path)


def test_unreadable_csv_message_is_one_line(tmp_path: Path) -> None:
    path = tmp_path / "ragged.csv"
    path.write_text("date,XQ01,XQ02,XQ03\n2031-01-02,1,2,3\n2031-01-03,1,2,3,4\n")
    with pytest.raises(DataError) as caught:
        read_prices(path)
    message = str(caught.value)
    assert message.startswith(f"{path}: line 3 has 5 fields, more than the 4 of the header")
    assert "\n" not in message


def test_long_layout_error_names_the_line_of_the_bad_price(price_files: Any, tmp_path: Path) -> None:
    """In a long file each price has its own line: the message must point at it (and the asset)."""
    long_table = price_files.table().melt(id_vars="date", var_name="asset", value_name="price")
    bad_row = int(np.flatnonzero((long_table["asset"] == "XQ03") & (long_table["date"] == "2031-01-09"))[0])
    for value, words in (("abc", "not a number"), ("0", "not positive"), ("inf", "infinite")):
        spoiled = long_table.copy()
        spoiled.loc[bad_row, "price"] = value
        path = price_files.write(spoiled, tmp_path / "long.csv")
        with pytest.raises(DataError) as caught:
            read_prices(path)
        message = str(caught.value)
        assert f"line {bad_row + 2} " in message and "XQ03" in message and words in message, message
