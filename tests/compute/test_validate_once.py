"""Prices are validated once: the validated type travels, and what takes it does not check again."""

from __future__ import annotations

import pandas as pd
import pytest

import riskshape.prices as prices_module
from riskshape import Config, monitor
from riskshape.errors import DataError
from riskshape.prices import ValidPrices, ensure_valid, validate_prices
from riskshape.store import open_store
from tests.kit.assets import codes


def _table(n_days: int = 30) -> pd.DataFrame:
    dates = pd.bdate_range("2031-01-02", periods=n_days)
    names = codes(4)
    data = {code: [100.0 + (i * (k + 1)) % 7 for i in range(n_days)] for k, code in enumerate(names)}
    return pd.DataFrame(data, index=pd.DatetimeIndex(dates, name="date"))


def test_validation_returns_the_validated_type_and_changes_drop_it() -> None:
    valid = validate_prices(_table())
    assert isinstance(valid, ValidPrices)
    assert not isinstance(valid.iloc[:5], ValidPrices)
    assert not isinstance(valid * 2, ValidPrices)
    assert not isinstance(pd.concat([valid, valid]), ValidPrices)


def test_monitor_and_the_archive_do_not_validate_again(monkeypatch: pytest.MonkeyPatch, tmp_path) -> None:
    valid = validate_prices(_table())
    calls: list[str] = []
    original = prices_module.validate_prices

    def counting(table: pd.DataFrame, source: str = "prices", **kwargs: object) -> ValidPrices:
        calls.append(source)
        return original(table, source, **kwargs)  # type: ignore[arg-type]

    monkeypatch.setattr(prices_module, "validate_prices", counting)
    result = monitor(valid, Config(window=10, compute={"executor": "serial"}))
    result.update(ValidPrices.of_validated_parts(valid.iloc[-1:]))  # a day already held, unchanged
    with open_store(f"sqlite:///{tmp_path / 'a.sqlite'}") as store:
        store.create_portfolio("Fund")
        store.append_prices("Fund", valid)
    assert calls == []
    # a plain table is still checked where it enters
    monitor(_table(), Config(window=10, compute={"executor": "serial"}))
    assert calls == ["prices"]


def test_the_row_count_a_caller_needs_is_still_checked() -> None:
    valid = validate_prices(_table(8))
    with pytest.raises(DataError, match="8 dates, but one window needs at least 11"):
        ensure_valid(valid, min_rows=11)
    with pytest.raises(DataError, match="8 dates, but one window needs at least 11"):
        monitor(valid, Config(window=10, compute={"executor": "serial"}))


def test_long_asset_names_are_refused_before_any_work() -> None:
    table = _table()
    table.columns = [*table.columns[:3], "X" * 201]
    with pytest.raises(DataError, match="longer than 200 characters; shorten it"):
        validate_prices(table)
