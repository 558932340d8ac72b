"""The daily loop: days count once complete, closing by hand and by the cut-off rule, delisting,
and the messages of small bodies.

The reference for every computed number is riskshape's own batch, :func:`riskshape.monitor`
over the same prices fed whole (DESIGN.md, "The daily loop": a day fed in pieces must give
exactly what the whole day gives).
"""

from __future__ import annotations

from datetime import date
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from riskshape import Config, ConflictError, DataError, NotFoundError
from riskshape.config import RuleConfig
from riskshape.daily import Ingestor, pending_days
from riskshape.daily.ingest import ASSET_DELISTED, DAY_CLOSED
from riskshape.prices import ValidPrices, validate_prices
from riskshape.store import Store, open_store, verify_chain
from tests.kit.archive import walk_prices
from tests.kit.assets import codes

ASSETS = codes(6)
RULE = RuleConfig(name="calm", summary="mean_correlation", kind="level", threshold=-1.0, min_history=0)


def _config(**daily: object) -> Config:
    return Config(
        window=20,
        maxdim=1,
        compute={"executor": "serial"},
        alerts={"rules": [RULE]},
        daily=daily or {},
    )


def _valid(frame: pd.DataFrame) -> ValidPrices:
    wide = frame.reset_index()
    return validate_prices(wide, source="test body", min_rows=1, min_assets=1)


def _open(tmp_path: Path, name: str = "archive") -> Store:
    store = open_store(f"sqlite:///{tmp_path / (name + '.sqlite')}")
    store.ensure_portfolio("Fund Alder")
    return store


@pytest.fixture
def prices(rng: np.random.Generator) -> pd.DataFrame:
    return walk_prices(rng, n_days=30, assets=ASSETS)


def _archived(store: Store) -> tuple[pd.DataFrame, list[tuple[str, date, float]]]:
    features = store.read_features("Fund Alder").frame
    alerts = [(a.rule, a.window_end, a.value) for a in store.list_alerts(portfolio="Fund Alder", limit=None).items]
    return features, alerts


def test_a_day_in_three_pieces_equals_the_day_whole(tmp_path: Path, prices: pd.DataFrame) -> None:
    whole, pieces = _open(tmp_path, "whole"), _open(tmp_path, "pieces")
    a, b = Ingestor(_config()), Ingestor(_config())
    a.ingest(whole, "Fund Alder", _valid(prices.iloc[:25]))
    b.ingest(pieces, "Fund Alder", _valid(prices.iloc[:25]))
    for day in range(25, 30):
        row = prices.iloc[[day]]
        a.ingest(whole, "Fund Alder", _valid(row))
        first = b.ingest(pieces, "Fund Alder", _valid(row[list(ASSETS[:2])]))
        assert first.windows_added == 0 and [s.day for s in first.pending] == [row.index[0].date()]
        assert first.pending[0].missing == ASSETS[2:]
        second = b.ingest(pieces, "Fund Alder", _valid(row[[ASSETS[2]]]))
        assert second.windows_added == 0 and second.pending[0].missing == ASSETS[3:]
        third = b.ingest(pieces, "Fund Alder", _valid(row[list(ASSETS[3:])]))  # the rest: not a conflict
        assert third.windows_added == 1 and third.pending == () and third.corrections == 0
    got, want = _archived(pieces), _archived(whole)
    pd.testing.assert_frame_equal(got[0], want[0])
    assert got[1] == want[1] and len(want[1]) > 0
    assert verify_chain(pieces).ok
    whole.close()
    pieces.close()


def test_no_window_of_a_pending_day_is_archived(tmp_path: Path, prices: pd.DataFrame) -> None:
    store = _open(tmp_path)
    ingestor = Ingestor(_config())
    ingestor.ingest(store, "Fund Alder", _valid(prices.iloc[:25]))
    ends = store.window_ends("Fund Alder")
    report = ingestor.ingest(store, "Fund Alder", _valid(prices.iloc[[25, 26]][list(ASSETS[:5])]))
    assert report.windows_added == 0 and report.run_id is None
    assert store.window_ends("Fund Alder") == ends
    assert [s.day for s in pending_days(store, "Fund Alder")] == list(prices.index[[25, 26]].date)
    store.close()


def test_closing_a_day_by_hand_counts_it_with_the_absent_asset_missing(tmp_path: Path, prices: pd.DataFrame) -> None:
    store = _open(tmp_path)
    ingestor = Ingestor(_config())
    ingestor.ingest(store, "Fund Alder", _valid(prices.iloc[:25]))
    day = prices.index[25].date()
    ingestor.ingest(store, "Fund Alder", _valid(prices.iloc[[25]][list(ASSETS[:5])]))
    report = ingestor.close_day(store, "Fund Alder", day, "desk analyst")
    assert report.windows_added == 1 and report.last_window == day and report.closed == (day,)
    event = store.list_events(kind=DAY_CLOSED, portfolio="Fund Alder")[-1]
    assert event.subject == day.isoformat() and event.actor == "desk analyst"
    assert event.data == {"who": "desk analyst", "how": "by hand", "missing": [ASSETS[5]]}
    # the reference: the batch over the same history with the absent price missing
    expected = prices.iloc[:26].copy()
    expected.iloc[25, 5] = np.nan
    reference = Ingestor(_config())
    other = _open(tmp_path, "reference")
    reference.ingest(other, "Fund Alder", _valid(expected))
    pd.testing.assert_frame_equal(_archived(store)[0], _archived(other)[0])
    with pytest.raises(ConflictError, match=f"{day}.*already"):
        ingestor.close_day(store, "Fund Alder", day, "desk analyst")
    assert verify_chain(store).ok
    store.close()
    other.close()


def test_the_cut_off_rule_closes_a_day_once_its_share_has_arrived(tmp_path: Path, prices: pd.DataFrame) -> None:
    store = _open(tmp_path)
    ingestor = Ingestor(_config(close_share=0.8))
    ingestor.ingest(store, "Fund Alder", _valid(prices.iloc[:25]))
    row = prices.iloc[[25]]
    below = ingestor.ingest(store, "Fund Alder", _valid(row[list(ASSETS[:4])]))  # 4/6 < 0.8
    assert below.windows_added == 0 and below.closed == ()
    reached = ingestor.ingest(store, "Fund Alder", _valid(row[[ASSETS[4]]]))  # 5/6 >= 0.8
    assert reached.closed == (row.index[0].date(),) and reached.windows_added == 1
    event = store.list_events(kind=DAY_CLOSED, portfolio="Fund Alder")[-1]
    assert event.data["how"] == "cut-off share 0.8" and event.data["missing"] == [ASSETS[5]]
    store.close()


def test_the_cut_off_rule_is_off_by_default() -> None:
    assert Config().daily.close_share is None
    assert Config.from_toml(Path(__file__).parents[2] / "config" / "default.toml").daily.close_share is None


def test_a_delisted_asset_no_longer_holds_days_back(tmp_path: Path, prices: pd.DataFrame) -> None:
    store = _open(tmp_path)
    ingestor = Ingestor(_config())
    ingestor.ingest(store, "Fund Alder", _valid(prices.iloc[:25]))
    ingestor.ingest(store, "Fund Alder", _valid(prices.iloc[[25, 26]][list(ASSETS[:5])]))
    last = prices.index[24].date()
    report = ingestor.delist(store, "Fund Alder", ASSETS[5], last, "desk analyst")
    assert report.windows_added == 2 and report.pending == ()
    event = store.list_events(kind=ASSET_DELISTED, portfolio="Fund Alder")[-1]
    assert event.subject == ASSETS[5] and event.data == {"last_trading_day": last.isoformat(), "who": "desk analyst"}
    with pytest.raises(DataError, match=f"{ASSETS[5]}.*{prices.index[27].date()}.*last trading day"):
        ingestor.ingest(store, "Fund Alder", _valid(prices.iloc[[27]]))
    store.close()


def test_one_price_is_a_valid_ingest_and_a_valid_correction(tmp_path: Path, prices: pd.DataFrame) -> None:
    store = _open(tmp_path)
    ingestor = Ingestor(_config())
    ingestor.ingest(store, "Fund Alder", _valid(prices.iloc[:25]))
    one = ingestor.ingest(store, "Fund Alder", _valid(prices.iloc[[25]][[ASSETS[0]]]))
    assert one.prices_added == 1
    revised = prices.iloc[[10]][[ASSETS[1]]] * 1.01
    fixed = ingestor.ingest(store, "Fund Alder", _valid(revised), correction=True)
    assert fixed.corrections == 1
    store.close()


def test_each_refusal_names_the_asset_the_date_and_the_fix(tmp_path: Path, prices: pd.DataFrame) -> None:
    store = _open(tmp_path)
    ingestor = Ingestor(_config())
    ingestor.ingest(store, "Fund Alder", _valid(prices.iloc[:25]))
    stranger = prices.iloc[[25]][[ASSETS[0]]].rename(columns={ASSETS[0]: "XZ99"})
    with pytest.raises(DataError, match=r"asset 'XZ99' \(date 2030-02-05\).*check the asset's code"):
        ingestor.ingest(store, "Fund Alder", _valid(stranger))
    holiday = pd.DataFrame({ASSETS[0]: [100.0]}, index=pd.DatetimeIndex(["2030-01-05"], name="date"))  # a Saturday
    with pytest.raises(DataError, match=rf"date 2030-01-05 \(asset '{ASSETS[0]}'\) was never a trading day.*check"):
        ingestor.ingest(store, "Fund Alder", _valid(holiday))
    changed = prices.iloc[[10]][[ASSETS[1]]] * 1.01
    with pytest.raises(ConflictError, match=rf"asset '{ASSETS[1]}' on 2030-01-15.*correction=true"):
        ingestor.ingest(store, "Fund Alder", _valid(changed))
    with pytest.raises(NotFoundError, match="no prices on 2030-03-01; send that day's prices first"):
        ingestor.close_day(store, "Fund Alder", date(2030, 3, 1), "desk analyst")
    with pytest.raises(DataError, match="XZ99.*check the asset's code"):
        ingestor.delist(store, "Fund Alder", "XZ99", date(2030, 1, 31), "desk analyst")
    store.ensure_portfolio("Fund Birch")
    with pytest.raises(DataError, match="first prices name 1 asset.*at least 3"):
        ingestor.ingest(store, "Fund Birch", _valid(prices.iloc[:3][[ASSETS[0]]]))
    store.close()
