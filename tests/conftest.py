"""Shared fixtures: a seeded random generator and a small, cheap scenario.

House rule: no global seed; every random draw comes from a ``numpy.random.default_rng`` made
here (or from a seed that hypothesis draws). Fixtures used inside ``@given`` tests must not be
function-scoped, so the scenario fixtures are session-scoped (and read-only by convention:
tests copy before they change anything).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from riskshape import Config
from riskshape.demo.scenario import Scenario, generate_scenario
from tests.kit.assets import ASSETS  # XQ01..XQ04, invented codes


def pytest_configure(config: pytest.Config) -> None:
    """Keep hypothesis's failure reports readable under ``filterwarnings = error``.

    When a hypothesis test fails, its pytest plugin imports libcst (to suggest a patch), and
    libcst subclasses ``mypy_extensions.TypedDict``, which warns. Without this filter the warning
    becomes an INTERNALERROR that hides the falsifying example.
    """
    config.addinivalue_line("filterwarnings", "ignore:mypy_extensions.TypedDict is deprecated:DeprecationWarning")


@pytest.fixture
def rng() -> np.random.Generator:
    """A fresh seeded generator for each test."""
    return np.random.default_rng(20240611)


@pytest.fixture(scope="session")
def small_scenario() -> Scenario:
    """The fictional market, cut small: 18 assets (3 per sector), 160 return days.

    It keeps the scenario's gaps and its late-listing asset (the last column is missing for the
    first 180 rows, i.e. the whole cut), so the coverage policy is exercised.
    """
    return generate_scenario(seed=11, n_days=160, assets_per_sector=3)


@pytest.fixture(scope="session")
def small_prices(small_scenario: Scenario) -> pd.DataFrame:
    """A copy of the small scenario's wide prices."""
    return small_scenario.prices.copy()


@pytest.fixture(scope="session")
def small_config() -> Config:
    """Short windows, serial executor: cheap enough to run many times in a test."""
    return Config(window=20, step=1, compute={"executor": "serial"})


# --- bad price files, shared by tests/compute and tests/cli  -------------------

BAD_INPUT_WINDOW = 20  # the window the bad-input tests ask for (so one window needs 21 prices)


def good_price_table(n_rows: int = 30, seed: int = 5) -> pd.DataFrame:
    """A valid wide price table as text cells (what a CSV holds): ``date`` then one column per asset."""
    rng = np.random.default_rng(seed)
    prices = 100.0 * np.exp(np.cumsum(rng.normal(0.0, 0.01, (n_rows, len(ASSETS))), axis=0))
    table = pd.DataFrame(prices.round(4).astype(str), columns=list(ASSETS))
    table.insert(0, "date", [d.strftime("%Y-%m-%d") for d in pd.bdate_range("2031-01-02", periods=n_rows)])
    return table


@dataclass(frozen=True)
class BadCase:
    """One bad input: how to spoil a good table, and where the message must point.

    ``where`` names the bad row per file format (empty when the problem is the whole table);
    ``fragments`` must appear in the message besides the file name and the row.
    """

    name: str
    spoil: Callable[[pd.DataFrame], pd.DataFrame]
    where: dict[str, str]
    fragments: tuple[str, ...]


def _set(row: int, column: str, value: str) -> Callable[[pd.DataFrame], pd.DataFrame]:
    def spoil(table: pd.DataFrame) -> pd.DataFrame:
        table = table.copy()
        table.loc[row, column] = value
        return table

    return spoil


def _duplicate_date(table: pd.DataFrame) -> pd.DataFrame:
    table = table.copy()
    table.loc[9, "date"] = table.loc[8, "date"]
    return table


def _at(row: int) -> dict[str, str]:
    """How a 0-based data row is named: CSV lines count the header as line 1, Parquet rows start at 1."""
    return {"csv": f"line {row + 2}", "parquet": f"row {row + 1}"}


BAD_CASES: tuple[BadCase, ...] = (
    BadCase("unparseable-date", _set(6, "date", "2031-02-30"), _at(6), ("'date'", "YYYY-MM-DD")),
    BadCase("unreadable-date", _set(3, "date", "soon"), _at(3), ("'date'", "'soon'", "YYYY-MM-DD")),
    BadCase(
        "duplicate-date",
        _duplicate_date,
        {"csv": "lines 10, 11", "parquet": "rows 9, 10"},
        ("date 2031-01-14", "one row per date"),
    ),
    BadCase(
        "non-numeric",
        _set(4, "XQ02", "12,5x"),
        _at(4),
        ("'XQ02'", "2031-01-08", "not a number", "leave the cell empty"),
    ),
    BadCase("zero-price", _set(5, "XQ03", "0"), _at(5), ("'XQ03'", "2031-01-09", "not positive", "> 0")),
    BadCase("negative-price", _set(7, "XQ04", "-3.5"), _at(7), ("'XQ04'", "-3.5", "not positive", "> 0")),
    BadCase(
        "infinite-price", _set(10, "XQ01", "inf"), _at(10), ("'XQ01'", "2031-01-16", "infinite", "leave the cell empty")
    ),
    BadCase(
        "too-few-assets", lambda t: t.drop(columns=["XQ03", "XQ04"]), {}, ("2 asset column", "at least 3", "add assets")
    ),
    BadCase(
        "too-few-rows",
        lambda t: t.iloc[:BAD_INPUT_WINDOW],
        {},
        (f"{BAD_INPUT_WINDOW} dates", f"at least {BAD_INPUT_WINDOW + 1}", "longer history or a shorter window"),
    ),
)


@dataclass(frozen=True)
class BadFile:
    """A spoiled price file on disk and what its error message must contain."""

    case: str
    path: Path
    fragments: tuple[str, ...]
    min_rows: int = BAD_INPUT_WINDOW + 1


def write_table(table: pd.DataFrame, path: Path) -> Path:
    """Write a text table as CSV, or as Parquet with typed columns where the cells allow it
    (dates as timestamps, prices as float64 with nulls for empty cells; a column with a bad cell
    stays text, as a spreadsheet export would leave it).
    """
    if path.suffix == ".csv":
        table.to_csv(path, index=False)
        return path
    typed = table.copy()
    for column in typed.columns:
        if column == "date":
            parsed = pd.to_datetime(typed[column], errors="coerce", format="%Y-%m-%d")
            typed[column] = parsed if not parsed.isna().any() else typed[column]
        else:
            empty = typed[column].astype(str).str.strip() == ""  # an empty cell is a null in Parquet
            numbers = pd.to_numeric(typed[column].where(~empty, None), errors="coerce")
            typed[column] = numbers if not (numbers.isna() & ~empty).any() else typed[column]
    typed.to_parquet(path, index=False)
    return path


@pytest.fixture(params=[(c, fmt) for c in BAD_CASES for fmt in ("csv", "parquet")], ids=lambda p: f"{p[0].name}-{p[1]}")
def bad_price_file(request: pytest.FixtureRequest, tmp_path: Path) -> BadFile:
    """Each bad price input, as CSV (lines counted from the header, line 1) and Parquet (rows from 1)."""
    case, fmt = request.param
    path = write_table(case.spoil(good_price_table()), tmp_path / f"spoiled_{case.name}.{fmt}")
    where = (case.where[fmt],) if fmt in case.where else ()
    return BadFile(case=case.name, path=path, fragments=(path.name, *where, *case.fragments))


@dataclass(frozen=True)
class PriceFiles:
    """Helpers for tests that write price files (handed out by the ``price_files`` fixture)."""

    assets: tuple[str, ...] = ASSETS
    bad_input_window: int = BAD_INPUT_WINDOW

    @staticmethod
    def table(n_rows: int = 30, seed: int = 5) -> pd.DataFrame:
        """See :func:`good_price_table`."""
        return good_price_table(n_rows, seed)

    @staticmethod
    def write(table: pd.DataFrame, path: Path) -> Path:
        """See :func:`write_table`."""
        return write_table(table, path)


@pytest.fixture(scope="session")
def price_files() -> PriceFiles:
    """Make and write small price tables (so test modules need not import this conftest)."""
    return PriceFiles()
