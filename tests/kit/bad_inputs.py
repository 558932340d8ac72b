"""The corpus of bad price files: each case is a file's name, its bytes and the words its refusal says.

Used by ``tests/cli/test_bad_file_corpus.py`` (every file through ``riskshape run``) and by the
reliability page's figure. Every case is made here from a small good table of invented assets, so
the corpus is generated, not stored.
"""

from __future__ import annotations

import bz2
import gzip
import lzma
from dataclasses import dataclass

import numpy as np
import pandas as pd

from tests.kit.assets import codes

__all__ = ["BadFile", "bad_files", "good_table", "WINDOW"]

WINDOW = 5
"""The window of the small configuration the corpus runs with (refusals come before any window)."""


@dataclass(frozen=True)
class BadFile:
    """One bad input: its id, file name, bytes (None: a folder; missing: no file), and expected words."""

    id: str
    name: str
    data: bytes | None
    words: tuple[str, ...]
    config: str = ""
    """Extra TOML lines for the run's configuration ([checks] cases)."""
    missing: bool = False


def good_table(n_dates: int = 12, n_assets: int = 4, seed: int = 5) -> pd.DataFrame:
    """A valid wide table of invented assets (random walk around 50)."""
    rng = np.random.default_rng(seed)
    dates = pd.bdate_range("2031-01-02", periods=n_dates)
    values = 50.0 * np.exp(np.cumsum(rng.normal(0.0, 0.01, (n_dates, n_assets)), axis=0))
    frame = pd.DataFrame(values, index=pd.Index(dates.strftime("%Y-%m-%d"), name="date"), columns=codes(n_assets))
    return frame.round(4)


def _csv(frame: pd.DataFrame, sep: str = ",") -> bytes:
    return frame.to_csv(sep=sep).encode("utf-8")


def _lines(*rows: str) -> bytes:
    return ("\n".join(rows) + "\n").encode("utf-8")


def bad_files() -> list[BadFile]:
    """Every case of the corpus (at least 50 files)."""
    good = good_table()
    good_bytes = _csv(good)
    text = good_bytes.decode()
    header, first, second = text.splitlines()[:3]
    a, b, c, d = codes(4)
    cases = [
        BadFile("empty", "p.csv", b"", ("empty",)),
        BadFile("blank-lines", "p.csv", b"\n \n\n", ("empty",)),
        BadFile("bom-only", "p.csv", b"\xef\xbb\xbf", ("empty",)),
        BadFile("header-only", "p.csv", _lines(header), ("0 dates",)),
        BadFile("no-date-column", "p.csv", text.replace("date,", "day,", 1).encode(), ("no 'date' column",)),
        BadFile("no-header", "p.csv", _lines(first, second), ("no 'date' column",)),
        BadFile("duplicate-date", "p.csv", _lines(header, first, first), ("appears more than once",)),
        BadFile("duplicate-column", "p.csv", text.replace(b, a, 1).encode(), (f"'{a}' appears twice",)),
        BadFile("blank-column-name", "p.csv", text.replace(f",{b}", ",", 1).encode(), ("no name",)),
        BadFile("text-price", "p.csv", _lines(header, first, "2031-01-04,abc,1,2,3"), ("'abc' is not a number",)),
        BadFile("bool-price", "p.csv", _lines(header, first, "2031-01-04,true,1,2,3"), ("is not a number",)),
        BadFile("zero-price", "p.csv", _lines(header, first, "2031-01-04,0,1,2,3"), ("is not positive",)),
        BadFile("negative-price", "p.csv", _lines(header, first, "2031-01-04,-3,1,2,3"), ("is not positive",)),
        BadFile("infinite-price", "p.csv", _lines(header, first, "2031-01-04,inf,1,2,3"), ("infinite price",)),
        BadFile("overflow-price", "p.csv", _lines(header, first, "2031-01-04,1e309,1,2,3"), ("infinite price",)),
        BadFile("bad-date", "p.csv", _lines(header, first, "2031-13-45,1,1,2,3"), ("cannot read '2031-13-45'",)),
        BadFile("slash-date", "p.csv", _lines(header, first, "04/01/2031,1,1,2,3"), ("write dates as YYYY-MM-DD",)),
        BadFile("empty-date", "p.csv", _lines(header, first, ",1,1,2,3"), ("column 'date'",)),
        BadFile("gzip-cut", "p.csv", gzip.compress(good_bytes)[:40], ("gzip data that is damaged",)),
        BadFile("gzip-latin1", "p.csv", gzip.compress(_csv(good).replace(b"date", b"d\xe9te")), ("not UTF-8",)),
        BadFile("zip", "p.csv", b"PK\x03\x04" + good_bytes, ("ZIP archive",)),
        BadFile("parquet-named-csv", "p.csv", b"PAR1" + good_bytes, ("Parquet file", "name it .parquet")),
        BadFile("bzip2", "p.csv", bz2.compress(good_bytes), ("bzip2",)),
        BadFile("xz", "p.csv", lzma.compress(good_bytes), ("xz-compressed",)),
        BadFile("zstd", "p.csv", b"\x28\xb5\x2f\xfd" + good_bytes, ("zstd-compressed",)),
        BadFile("xls", "p.csv", b"\xd0\xcf\x11\xe0" + good_bytes, ("old Excel",)),
        BadFile("latin1", "p.csv", text.replace(a, "XQ\xe901", 1).encode("latin-1"), ("line 1", "not UTF-8")),
        BadFile("nul-bytes", "p.csv", good_bytes[:30] + b"\x00\x00" + good_bytes[30:], ("binary data",)),
        BadFile("random-bytes", "p.csv", np.random.default_rng(5).bytes(400), ("not CSV text",)),
        BadFile("utf16-broken", "p.csv", b"\xff\xfe" + b"d\x00a", ("not UTF-16 text",)),
        BadFile("ragged-long", "p.csv", _lines(header, first, second + ",7,8"), ("line 3 has 7 fields, more",)),
        BadFile("ragged-short", "p.csv", _lines(header, first, "2031-01-04,1,2"), ("line 3 has 3 fields, fewer",)),
        BadFile("open-quote", "p.csv", _lines(header, first, '2031-01-04,"1,2,3,4'), ("quote is not closed",)),
        BadFile("newline-in-name", "p.csv", _lines(f'date,"X\nQ01",{b},{c},{d}', first), ("line break",)),
        BadFile("tab-in-name", "p.csv", _lines(f'date,"XQ\t01",{b},{c},{d}', first), ("control character",)),
        BadFile("escape-in-name", "p.csv", _lines(f"date,XQ\x1b01,{b},{c},{d}", first), ("control character",)),
        BadFile("form-feed-in-name", "p.csv", _lines(f"date,XQ\x0c01,{b},{c},{d}", first), ("control character",)),
        BadFile("zero-width-in-name", "p.csv", _lines(f"date,XQ\u200b01,{b},{c},{d}", first), ("control character",)),
        BadFile("name-too-long", "p.csv", text.replace(a, "X" * 201, 1).encode(), ("longer than 200 characters",)),
        BadFile("two-assets", "p.csv", _csv(good.iloc[:, :2]), ("2 asset column(s) found",)),
        BadFile("one-asset", "p.csv", _csv(good.iloc[:, :1]), ("1 asset column(s) found",)),
        BadFile("too-few-dates", "p.csv", _csv(good.iloc[:4]), ("4 dates, but one window needs at least 6",)),
        BadFile(
            "header-too-long",
            "p.csv",
            ("date," + ",".join(f"XQ{i:07d}" for i in range(110_000)) + "\n").encode(),
            ("line 1 (the header) is longer than",),
        ),
        BadFile(
            "too-many-assets",
            "p.csv",
            _lines("date," + ",".join(f"X{i}" for i in range(5001)), "2031-01-02" + ",1" * 5001),
            ("5001 asset columns, more than the limit of 5000",),
        ),
        BadFile(
            "too-many-rows",
            "p.csv",
            (header + "\n" + "2031-01-02,1,2,3,4\n" * 200_001).encode(),
            ("200001 data lines, more than the limit of 200000",),
        ),
        BadFile(
            "decimal-commas",
            "p.csv",
            _lines(f"date;{a};{b};{c}", "2031-01-02;1,5;2,5;3,5"),
            ("decimal point, not a comma",),
        ),
        BadFile("tab-ragged", "p.csv", _lines(f"date\t{a}\t{b}\t{c}", "2031-01-02\t1\t2"), ("fewer than the 4",)),
        BadFile(
            "long-duplicate",
            "p.csv",
            _lines("date,asset,price", f"2031-01-02,{a},1", f"2031-01-02,{a},2"),
            ("second price",),
        ),
        BadFile("long-text-price", "p.csv", _lines("date,asset,price", f"2031-01-02,{a},x"), ("'x' is not a number",)),
        BadFile(
            "long-control-name",
            "p.csv",
            _lines("date,asset,price", "2031-01-02,XQ\x0701,1", f"2031-01-02,{b},2", f"2031-01-02,{c},3"),
            ("control character",),
        ),
        BadFile("unknown-type", "p.xlsx", good_bytes, ("unknown file type '.xlsx'",)),
        BadFile("folder", "p.csv", None, ("a folder, not a file",)),
        BadFile("missing", "p.csv", b"", ("no such file",), missing=True),
        BadFile("parquet-damaged", "p.parquet", b"PAR1 not really", ("cannot read it as parquet",)),
        BadFile(
            "quality-constant",
            "p.csv",
            _csv(good.assign(**{a: 50.0})),
            (f"asset '{a}' has the same price", "refused because [checks] quality = 'refuse'"),
            config='[checks]\nquality = "refuse"\n',
        ),
        BadFile(
            "quality-bad-print",
            "p.csv",
            _csv(good.assign(**{b: good[b].where(good.index != good.index[6], 1e308)})),
            (f"asset '{b}' on {good.index[6]}", "likely bad print", "refused because"),
            config='[checks]\nquality = "refuse"\n',
        ),
        BadFile(
            "quality-all-left-out",
            "p.csv",
            _csv(good.assign(**{k: 50.0 for k in (a, b, c, d)})),
            ("have every asset left out", "refused because"),
            config='[checks]\nquality = "refuse"\n',
        ),
        BadFile(
            "cost-over-budget",
            "p.csv",
            good_bytes,
            # the estimate of riskshape.cost's model (serial): 7 windows x 6.0e-7 s with H1, x 4.8e-7 s for H0 only
            ("beyond the budget", "options that fit", "H0 only"),
            config="[checks]\nbudget_seconds = 3.8e-6\n",
        ),
    ]
    return cases
