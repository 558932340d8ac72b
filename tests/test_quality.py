"""Data-quality findings and the cost check, against independent computations.

References: constant assets as pandas' ``nunique() == 1``; one-day moves as pandas' ``pct_change``
beyond the bound; windows with every asset left out as the engine itself finds them
(``monitor``'s ``n_assets`` of 0), so the check before the work agrees with the work.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from riskshape import Config, DataError, check_cost, check_quality, estimate_cost, monitor, validate_prices
from riskshape.quality import find_quality_issues
from tests.kit.assets import codes


def _table(rng: np.random.Generator, n_dates: int = 40, n_assets: int = 5) -> pd.DataFrame:
    dates = pd.bdate_range("2031-01-02", periods=n_dates)
    values = 50.0 * np.exp(np.cumsum(rng.normal(0.0, 0.02, (n_dates, n_assets)), axis=0))
    return pd.DataFrame(values, index=pd.DatetimeIndex(dates, name="date"), columns=codes(n_assets))


@pytest.fixture
def rng() -> np.random.Generator:
    return np.random.default_rng(17)


def test_findings_match_pandas(rng: np.random.Generator) -> None:
    table = _table(rng)
    table.iloc[:, 1] = 42.0  # constant
    table.iloc[12, 3] *= 30.0  # a bad print: up x30, then back down
    table.iloc[20:23, 4] = np.nan  # a gap: the move after it is measured from the last price
    table.iloc[23, 4] = table.iloc[19, 4] * 2.5
    found = find_quality_issues(validate_prices(table), Config(window=10))
    constant = {f.asset for f in found if f.kind == "constant"}
    assert constant == set(table.columns[table.nunique() == 1])  # pandas' reference
    ratio = table.ffill().pct_change(fill_method=None) + 1.0  # pandas' one-day ratios from the last price
    expected = {
        (asset, str(day.date()))
        for asset in table.columns
        for day, r in ratio[asset].items()
        if pd.notna(table.loc[day, asset]) and (r > 2.0 or r < 0.5)
    }
    moves = {(f.asset, f.date) for f in found if f.kind == "large_move"}
    assert moves == expected and len(moves) == 4  # each jump, and each return from it


def test_a_move_from_the_archived_days_before_is_found_and_theirs_are_not_repeated(
    rng: np.random.Generator,
) -> None:
    table = _table(rng, n_dates=30)
    table.iloc[5, 0] *= 5.0  # a bad print among the archived days (and the return from it)
    before, new = validate_prices(table.iloc[:25]), table.iloc[25:].copy()
    new.iloc[:, 2] /= 8.0  # a jump from the last archived price to the first new one
    new.iloc[0, 3] = np.nan  # an asset missing on the first new day: its move is from its last price
    new.iloc[1:, 3] *= 3.0
    config = Config(window=10)
    alone = find_quality_issues(validate_prices(new), config)
    found = find_quality_issues(validate_prices(new), config, before=before)
    assert not [f for f in alone if f.kind == "large_move"]  # the request alone hides both jumps
    # pandas' reference: one-day ratios from each asset's last price, over the archived and new days
    ratio = pd.concat([table.iloc[:25], new]).ffill().pct_change(fill_method=None) + 1.0
    expected = {
        (asset, str(day.date()))
        for asset in table.columns
        for day, r in ratio[asset].iloc[25:].items()
        if pd.notna(new.loc[day, asset]) and (r > 2.0 or r < 0.5)
    }
    assert {(f.asset, f.date) for f in found if f.kind == "large_move"} == expected
    assert expected == {(codes(5)[2], str(new.index[0].date())), (codes(5)[3], str(new.index[1].date()))}


def test_windows_all_left_out_agree_with_the_engine(rng: np.random.Generator) -> None:
    table = _table(rng, n_dates=50)
    table.iloc[15:35, :] = 60.0  # every asset flat for 20 days: windows inside have no asset
    config = Config(window=8, maxdim=0, compute={"executor": "serial"})
    prices = validate_prices(table)
    found = [f for f in find_quality_issues(prices, config) if f.kind == "all_left_out"]
    result = monitor(prices, config)
    empty = result.features.index[result.features["n_assets"] == 0]
    assert len(empty) > 0
    assert found and found[0].date == str(empty[0].date())
    assert f"{len(empty)} of {len(result.window_ends)} windows" in found[0].message


def test_refuse_mode_raises_and_warn_mode_returns(rng: np.random.Generator) -> None:
    table = _table(rng)
    table.iloc[5, 0] = 1e308
    prices = validate_prices(table)
    assert len(check_quality(prices, Config(window=10))) == 2  # up to 1e308 and back down
    with pytest.raises(DataError, match="likely bad print.*refused because"):
        check_quality(prices, Config(window=10, checks={"quality": "refuse"}))


def test_cost_grows_with_assets_and_dimension_and_refusal_names_what_fits() -> None:
    serial = {"executor": "serial"}
    h1 = [estimate_cost(n, 100, Config(compute=serial)).seconds for n in (50, 100, 200, 400)]
    assert h1 == sorted(h1) and h1[-1] / h1[0] > 100
    # the model's anchor: 0.75 s per H1 window at 200 assets (our own measurement, in riskshape.cost)
    assert estimate_cost(200, 1, Config(compute=serial)).seconds == pytest.approx(0.75, rel=0.01)
    config = Config(compute=serial, checks={"budget_seconds": 600.0})
    with pytest.raises(DataError) as refused:
        check_cost(3000, 81, config, source="wide.csv")  # 3000 assets x 80 days with H1
    message = str(refused.value)
    assert message.startswith("wide.csv: 3000 assets x 21 windows with maxdim = 1")
    assert "H0 only (maxdim = 0" in message and "at most " in message and "budget_seconds >=" in message
    fits = int(message.split("at most ")[1].split(" assets")[0])
    assert estimate_cost(fits, 21, config).seconds <= 600.0 < estimate_cost(fits + 1, 21, config).seconds
    assert check_cost(20, 81, config).seconds < 1.0
