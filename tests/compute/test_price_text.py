"""What is read as it is sent: gzip by its bytes, byte-order marks, UTF-16 with a mark, semicolon and
tab delimiters. Each gives the same validated table as pandas' own reading of the plain CSV (the
reference), whatever the file is called.
"""

from __future__ import annotations

import gzip
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from riskshape import read_prices
from tests.kit.bad_inputs import good_table


def _reference(path: Path) -> pd.DataFrame:
    frame = pd.read_csv(path, index_col="date", parse_dates=["date"])  # pandas, the outside reader
    return frame.astype(float)


@pytest.mark.parametrize(
    ("name", "encode"),
    [
        ("gz.csv", lambda text: gzip.compress(text.encode("utf-8"))),
        ("named.gz", lambda text: gzip.compress(text.encode("utf-8"))),
        ("bom.csv", lambda text: b"\xef\xbb\xbf" + text.encode("utf-8")),
        ("utf16.csv", lambda text: text.encode("utf-16")),  # Python writes the mark first
        ("semicolon.csv", lambda text: text.replace(",", ";").encode("utf-8")),
        ("tab.csv", lambda text: text.replace(",", "\t").encode("utf-8")),
        ("crlf.csv", lambda text: text.replace("\n", "\r\n").encode("utf-8")),
    ],
)
def test_read_as_sent(tmp_path: Path, name: str, encode: object) -> None:
    table = good_table(n_dates=30)
    plain = tmp_path / "plain.csv"
    plain.write_text(table.to_csv())
    path = tmp_path / name
    path.write_bytes(encode(plain.read_text()))  # type: ignore[operator]
    read = read_prices(path)
    reference = _reference(plain)
    assert list(read.columns) == list(reference.columns)
    np.testing.assert_array_equal(read.index.to_numpy(), reference.index.to_numpy())
    np.testing.assert_array_equal(read.to_numpy(), reference.to_numpy())
