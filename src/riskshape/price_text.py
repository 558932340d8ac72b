"""The text of a CSV price file: bytes in, checked lines out, before anything is parsed.

What is read as it is sent: gzip (known by its first bytes, whatever the file is called), a
byte-order mark (UTF-8, or UTF-16 which is decoded), a semicolon or tab delimiter (when the header
line holds no comma). What is refused, in one line naming the file, the line and the fix: other
compression formats and ZIP or Parquet bytes under a CSV name, binary data, text that is not UTF-8,
an empty file, a header longer than :data:`MAX_HEADER_CHARS`, more than :data:`MAX_ASSETS` asset
columns or :data:`MAX_ROWS` lines, and lines with more or fewer fields than the header. The size
limits are checked before a cell is parsed, so an oversized input costs a scan, not a parse.
"""

from __future__ import annotations

import csv
import gzip
import io
import zlib
from dataclasses import dataclass

from riskshape.errors import DataError

__all__ = [
    "MAX_ASSETS",
    "MAX_ROWS",
    "MAX_HEADER_CHARS",
    "MAX_TEXT_BYTES",
    "CsvText",
    "decode_price_bytes",
    "check_csv_text",
]

MAX_ASSETS = 5000
"""The most asset columns a price file or request may hold."""
MAX_ROWS = 200_000
"""The most data lines (dates, or long rows) a price file or request may hold (about 800 years of days)."""
MAX_HEADER_CHARS = 1_100_000
"""The longest header line read: :data:`MAX_ASSETS` names of up to 200 characters and their commas."""
MAX_TEXT_BYTES = 512 * 1024 * 1024
"""The most bytes of text read from one file (after gzip is undone)."""

_OTHER_FORMATS: tuple[tuple[bytes, str, str], ...] = (
    (b"PK\x03\x04", "a ZIP archive (or a spreadsheet such as .xlsx)", "unzip it, or export the sheet as CSV"),
    (b"PAR1", "a Parquet file", "name it .parquet"),
    (b"BZh", "bzip2-compressed", "decompress it (bunzip2) or compress it with gzip"),
    (b"\xfd7zXZ\x00", "xz-compressed", "decompress it (unxz) or compress it with gzip"),
    (b"\x28\xb5\x2f\xfd", "zstd-compressed", "decompress it (unzstd) or compress it with gzip"),
    (b"\xd0\xcf\x11\xe0", "an old Excel (.xls) workbook", "export the sheet as CSV (UTF-8)"),
)


@dataclass(frozen=True)
class CsvText:
    r"""A price file's text, checked line by line and ready for the CSV parser.

    Attributes
    ----------
    text : str
        The decoded text.
    delimiter : str
        ``","``, ``";"`` or ``"\t"``, as found in the header line.
    n_columns : int
        Fields in the header line.
    """

    text: str
    delimiter: str
    n_columns: int


def decode_price_bytes(raw: bytes, source: str) -> str:
    r"""The text of a price file's bytes: gzip undone, byte-order mark dropped, UTF-8 (or UTF-16 with a mark).

    Parameters
    ----------
    raw : bytes
        The file's bytes as stored or sent.
    source : str
        Name used in messages (a file name, or "request body (CSV)").

    Returns
    -------
    str
        The text.

    Raises
    ------
    DataError
        For damaged gzip, other compression or container formats, binary data or text that is not UTF-8.

    Examples
    --------
    >>> decode_price_bytes(gzip.compress(b"\xef\xbb\xbfdate,QA01\n"), "f.csv")
    'date,QA01\n'
    """
    if raw[:2] == b"\x1f\x8b":
        raw = _gunzip(raw, source)
    for magic, what, fix in _OTHER_FORMATS:
        if raw.startswith(magic):
            raise DataError(f"{source}: this is {what}, not CSV text; {fix}")
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        try:
            return raw.decode("utf-16")
        except UnicodeDecodeError:
            raise DataError(f"{source}: starts with a UTF-16 mark but is not UTF-16 text; save it as UTF-8") from None
    nul = raw.find(b"\x00")
    if nul >= 0:
        line = raw.count(b"\n", 0, nul) + 1
        raise DataError(
            f"{source}: line {line}: binary data (a NUL byte at byte {nul}), not CSV text; "
            "export the prices as a CSV file (UTF-8 text)"
        )
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as err:
        line = raw.count(b"\n", 0, err.start) + 1
        raise DataError(
            f"{source}: line {line}: byte 0x{raw[err.start]:02x} at byte {err.start} is not UTF-8 text (a Latin-1 or "
            "Windows-1252 file, or not text at all); save it as UTF-8 ('CSV UTF-8' in a spreadsheet) or convert it, "
            "e.g. iconv -f latin1 -t utf-8"
        ) from None
    if not text.strip():
        raise DataError(f"{source}: empty; give a header line (date, then one column per asset) and one line per date")
    return text


def _gunzip(raw: bytes, source: str) -> bytes:
    try:
        with gzip.GzipFile(fileobj=io.BytesIO(raw)) as stream:
            data = stream.read(MAX_TEXT_BYTES + 1)
    except (OSError, EOFError, zlib.error):
        raise DataError(f"{source}: gzip data that is damaged or cut short; compress the file again") from None
    if len(data) > MAX_TEXT_BYTES:
        raise DataError(
            f"{source}: more than {MAX_TEXT_BYTES} bytes once decompressed (the limit); split the prices into files"
        )
    return data


def check_csv_text(text: str, source: str, max_assets: int = MAX_ASSETS, max_rows: int = MAX_ROWS) -> CsvText:
    r"""Check a price file's text before it is parsed: header length, delimiter, sizes, fields per line.

    Parameters
    ----------
    text : str
        The decoded text (:func:`decode_price_bytes`).
    source : str
        Name used in messages.
    max_assets, max_rows : int
        The most asset columns and data lines accepted.

    Returns
    -------
    CsvText

    Raises
    ------
    DataError
        If a limit is passed or a line has another number of fields than the header.

    Examples
    --------
    >>> check_csv_text("date;QA01;QA02\n2031-01-02;1;2\n", "f.csv").delimiter
    ';'
    """
    end = text.find("\n", 0, MAX_HEADER_CHARS + 1)
    if end < 0 and len(text) > MAX_HEADER_CHARS:
        raise DataError(
            f"{source}: line 1 (the header) is longer than {MAX_HEADER_CHARS} characters, the limit "
            f"({max_assets} asset names); split the portfolio into files"
        )
    header = text[: end if end >= 0 else len(text)].rstrip("\r")
    _check_quotes(header, 1, source)
    delimiter = ","
    if "," not in header:
        delimiter = ";" if ";" in header else ("\t" if "\t" in header else ",")
    n_columns = _fields(header, delimiter)
    if n_columns - 1 > max_assets:
        raise DataError(
            f"{source}: line 1 (the header) has {n_columns - 1} asset columns, more than the limit of {max_assets}; "
            "split the portfolio into files of fewer assets"
        )
    lines = [line.rstrip("\r") for line in text.split("\n")]  # the lines the CSV parser sees
    data_lines = sum(1 for line in lines[1:] if line.strip())
    if data_lines > max_rows:
        raise DataError(
            f"{source}: {data_lines} data lines, more than the limit of {max_rows}; split the history into files"
        )
    for number, line in enumerate(lines[1:], start=2):
        if not line.strip():
            continue
        _check_quotes(line, number, source)
        found = line.count(delimiter) + 1 if '"' not in line else _fields(line, delimiter)
        if found != n_columns:
            more = "more" if found > n_columns else "fewer"
            raise DataError(
                f"{source}: line {number} has {found} fields, {more} than the {n_columns} of the header; give every "
                f"line one field per column (date, then one per asset; an empty field for a missing price, "
                f"names with a '{delimiter}' in quotes)"
            )
    return CsvText(text=text, delimiter=delimiter, n_columns=n_columns)


def _check_quotes(line: str, number: int, source: str) -> None:
    if line.count('"') % 2:
        raise DataError(
            f"{source}: line {number}: a quoted field runs over a line break (or a quote is not closed); keep every "
            "name and cell on one line and close each quote"
        )


def _fields(line: str, delimiter: str) -> int:
    """Fields of one line, quotes honoured (a quoted field may hold the delimiter)."""
    if '"' not in line:
        return line.count(delimiter) + 1
    row = next(csv.reader([line], delimiter=delimiter), [])
    return max(len(row), 1)
