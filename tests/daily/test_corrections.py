"""Corrections supersede, and nothing is lost.

The reference for every recomputed value is :func:`riskshape.monitor` over the whole corrected
history (the batch path of DESIGN.md, "The computation, per window"): a correction must leave the
archive's current series equal to it, bit for bit, while reads as known before the correction return
exactly what the archive held then.
"""

from __future__ import annotations

from collections.abc import Iterator
from datetime import datetime, timezone

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from riskshape import Config, DataError, monitor
from riskshape.alerts.rules import evaluate_rules
from riskshape.compute import window_end_positions
from riskshape.config import RuleConfig
from riskshape.daily import Ingestor
from riskshape.daily.corrections import affected_windows, with_carried_sums
from riskshape.store import Store, open_store, verify_chain
from tests.kit.archive import walk_prices
from tests.kit.assets import codes
from tests.kit.postgres import fresh_schema_url

PORTFOLIO = "Fund Lantern"
WINDOW = 12


def _config(prices: pd.DataFrame) -> Config:
    """Short windows and rules with thresholds taken from the data itself (nothing hard-coded)."""
    plain = Config(window=WINDOW, step=1, compute={"executor": "serial"})
    features = monitor(prices, plain).features
    rules = [
        RuleConfig(
            name="corr_level",
            summary="mean_correlation",
            kind="level",
            threshold=float(features["mean_correlation"].quantile(0.7)),
            min_history=0,
            cooldown=2,
            severity="warning",
        ),
        RuleConfig(
            name="h0_z", summary="h0_total_persistence", kind="zscore", threshold=1.0, lookback=10, min_history=5
        ),
    ]
    return plain.replace(alerts={"rules": [r.model_dump() for r in rules]})


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def store(request: pytest.FixtureRequest, tmp_path) -> Iterator[Store]:
    if request.param == "sqlite":
        with open_store(f"sqlite:///{tmp_path / 'archive.sqlite'}") as opened:
            yield opened
        return
    with fresh_schema_url("rs_corr") as url, open_store(url) as opened:
        yield opened


@pytest.fixture
def prices() -> pd.DataFrame:
    return walk_prices(np.random.default_rng(41), n_days=60, assets=codes(5))


def _fed(store: Store, prices: pd.DataFrame, config: Config) -> Ingestor:
    store.create_portfolio(PORTFOLIO)
    ingestor = Ingestor(config)
    # the first body makes the portfolio's run with this configuration (as `riskshape run` would)
    from riskshape import archive_run

    archive_run(store, PORTFOLIO, monitor(prices, config), config)
    return ingestor


def _diagrams(store: Store, ends: pd.DatetimeIndex, maxdim: int, **kwargs: object) -> list[bytes]:
    return [store.read_diagram(PORTFOLIO, e, k, **kwargs).bars.tobytes() for e in ends for k in range(maxdim + 1)]


def test_affected_windows_are_those_whose_returns_the_date_enters() -> None:
    # definition (riskshape.compute.returns): the return at row r uses prices r - 1 and r, and a window
    # ending at e holds returns e - window + 1 .. e; brute force over every end against the vectorised form
    ends = window_end_positions(40, 6, 2)
    for row in (0, 1, 5, 17, 39, 40):
        brute = [e for e in ends if any(e - 6 + 1 <= r <= e for r in (row - 1, row) if r >= 0)]
        assert affected_windows(np.array([row]), ends, 6).tolist() == brute


def test_running_sums_carry_a_correction_to_the_next_rebuild_point() -> None:
    # riskshape.compute.moments.is_rebuild_point: the sums are rebuilt at window indexes 0 and 63 mod 64
    ends = window_end_positions(300, 10, 1)
    carried = with_carried_sums(np.array([20, 21]), ends, 10, 1)
    rebuilt = next(e for e in ends if e > 21 and (e - 9) % 64 == 63)
    assert carried.tolist() == list(range(20, rebuilt))


def test_a_correction_supersedes_its_windows_and_keeps_the_old_ones(store: Store, prices: pd.DataFrame) -> None:
    config = _config(prices)
    ingestor = _fed(store, prices, config)
    before = store.read_features(PORTFOLIO).frame
    ends = before.index
    old_diagrams = _diagrams(store, ends, config.maxdim)
    known_before = datetime.now(timezone.utc)

    day, asset = prices.index[30], prices.columns[2]
    corrected = prices.copy()
    corrected.loc[day, asset] *= 1.25
    report = ingestor.ingest(store, PORTFOLIO, corrected.loc[[day], [asset]], correction=True, source="vendor fix")

    # the windows a price at row 30 enters: ends 29 .. 29 + WINDOW - 1 (returns rows), and the next one
    ends_at = window_end_positions(len(prices) - 1, WINDOW, 1)
    rows = with_carried_sums(affected_windows(np.array([30]), ends_at, WINDOW), ends_at, WINDOW, 1)
    assert report.windows_computed == len(rows) + (rows[-1] < ends_at[-1])
    assert report.corrections == 1

    fresh = monitor(corrected, config)  # reference: a fresh run over the corrected history
    now = store.read_features(PORTFOLIO).frame
    pd.testing.assert_frame_equal(now, fresh.features.rename_axis("window_end"), check_exact=True, check_freq=False)
    assert _diagrams(store, ends, config.maxdim) == [
        fresh.diagram(e, k).astype("<f4").tobytes() for e in ends for k in range(config.maxdim + 1)
    ]
    assert not now.equals(before)

    then = store.read_features(PORTFOLIO, as_known_at=known_before).frame
    pd.testing.assert_frame_equal(then, before, check_exact=True)
    assert _diagrams(store, ends, config.maxdim, as_known_at=known_before) == old_diagrams

    superseding = store.list_events(kind="window_superseded", portfolio=PORTFOLIO)
    assert len(superseding) == 1
    data = superseding[0].data
    assert data["run"] == report.run_id
    assert data["corrected"] == [
        {
            "date": str(day.date()),
            "asset": asset,
            "archived": float(prices.loc[day, asset]),
            "corrected": float(corrected.loc[day, asset]),
        }
    ]
    changed = [str(e.date()) for e in ends if not np.array_equal(now.loc[e], before.loc[e], equal_nan=True)]
    assert data["windows"] == changed
    assert verify_chain(store).ok


def _current_firings(store: Store) -> set[tuple[str, object]]:
    """(rule, window end) of every archived alert whose latest supersede record (if any) still fires."""
    marks = {e.subject: e.data for e in store.list_events(kind="alert_superseded", portfolio=PORTFOLIO)}
    alerts = store.list_alerts(portfolio=PORTFOLIO, limit=None).items
    return {(a.rule, a.window_end) for a in alerts if marks.get(str(a.id), {"still_fires": True})["still_fires"]}


def test_the_superseded_alert_is_marked_with_its_new_value(store: Store, prices: pd.DataFrame) -> None:
    config = _config(prices)
    ingestor = _fed(store, prices, config)
    alert = store.list_alerts(portfolio=PORTFOLIO, rule="corr_level", limit=1).items[0]
    day = pd.Timestamp(alert.window_end)
    corrected = prices.copy()
    corrected.loc[day, :] *= np.array([1.3, 0.8, 1.1, 0.7, 1.2])  # a bad print on the alert's own day
    report = ingestor.ingest(store, PORTFOLIO, corrected.loc[[day]], correction=True)

    fresh = monitor(corrected, config)
    marks = store.list_events(kind="alert_superseded", subject=str(alert.id))
    assert len(marks) == 1
    mark = marks[0].data
    assert mark["old_value"] == alert.value
    assert mark["new_value"] == float(fresh.features.loc[day, "mean_correlation"])
    firings = {(f.rule, f.window_end.date()) for f in evaluate_rules(fresh.features, config.alerts.rules)}
    assert mark["still_fires"] == (("corr_level", alert.window_end) in firings)
    assert mark["run"] == report.run_id
    # the archive's alerts that still fire are exactly the fresh run's firings (raised by the correction included)
    assert _current_firings(store) == firings
    for raised in report.alerts:
        assert store.list_events(kind="alert_raised_by_correction", subject=str(raised.id))
    assert verify_chain(store).ok


def test_a_correction_on_an_unknown_date_is_refused_with_its_date(store: Store, prices: pd.DataFrame) -> None:
    from riskshape.daily.corrections import apply_corrections

    config = _config(prices)
    _fed(store, prices, config)
    run = store.latest_run(PORTFOLIO)
    assert run is not None
    outside = pd.DataFrame({prices.columns[0]: [1.0]}, index=pd.DatetimeIndex([pd.Timestamp("2030-01-05")]))
    with pytest.raises(DataError, match="2030-01-05 is not an archived trading day"):
        apply_corrections(store, PORTFOLIO, outside, config, run)


corrections = st.lists(
    st.lists(st.tuples(st.integers(0, 39), st.integers(0, 3), st.floats(0.7, 1.4)), min_size=1, max_size=3),
    min_size=1,
    max_size=3,
)


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(sequence=corrections)
def test_the_current_series_always_equals_a_fresh_run(tmp_path_factory: pytest.TempPathFactory, sequence) -> None:
    prices = walk_prices(np.random.default_rng(3), n_days=40, assets=codes(4))
    config = _config(prices)
    folder = tmp_path_factory.mktemp("corrections")
    with open_store(f"sqlite:///{folder / 'archive.sqlite'}") as store:
        ingestor = _fed(store, prices, config)
        for body in sequence:
            sent = pd.DataFrame(np.nan, index=prices.index, columns=prices.columns)
            current = store.read_prices(PORTFOLIO, assets=list(prices.columns))
            for row, column, factor in body:
                sent.iloc[row, column] = current.iloc[row, column] * factor
            sent = sent.dropna(how="all")
            ingestor.ingest(store, PORTFOLIO, sent, correction=True)
            held = store.read_prices(PORTFOLIO, assets=list(prices.columns))
            fresh = monitor(held, config)
            pd.testing.assert_frame_equal(
                store.read_features(PORTFOLIO).frame,
                fresh.features.rename_axis("window_end"),
                check_exact=True,
                check_freq=False,
            )
            firings = {(f.rule, f.window_end.date()) for f in evaluate_rules(fresh.features, config.alerts.rules)}
            assert _current_firings(store) == firings
        assert verify_chain(store).ok


def test_a_null_beside_a_correction_never_replaces_an_archived_price(tmp_path) -> None:
    prices = walk_prices(np.random.default_rng(5), n_days=40, assets=codes(4))
    config = _config(prices)
    with open_store(f"sqlite:///{tmp_path / 'archive.sqlite'}") as store:
        ingestor = _fed(store, prices, config)
        body = pd.DataFrame(np.nan, index=prices.index[:1], columns=prices.columns)
        body.iloc[0, 0] = prices.iloc[0, 0] * 1.25  # one corrected cell; the other three cells are null
        ingestor.ingest(store, PORTFOLIO, body, correction=True)
        held = store.read_prices(PORTFOLIO, assets=list(prices.columns))
        assert held.iloc[0, 0] == prices.iloc[0, 0] * 1.25
        pd.testing.assert_series_equal(held.iloc[0, 1:], prices.iloc[0, 1:], check_names=False)
        assert [(c.asset, c.new_price) for c in store.list_corrections(PORTFOLIO)] == [
            (prices.columns[0], prices.iloc[0, 0] * 1.25)
        ]


def _derived_config(prices: pd.DataFrame) -> Config:
    """Derived columns on (net of the market, two changes), a rule on one of them with a threshold from the data."""
    plain = Config(
        window=WINDOW,
        step=1,
        compute={"executor": "serial"},
        derived={"net_of_market": True, "net_of_market_window": 10, "change_horizons": [3, 8]},
        alerts={"rules": []},
    )
    features = monitor(prices, plain).features
    rule = RuleConfig(
        name="net_level",
        summary="h0_total_persistence_net",
        kind="level",
        threshold=float(features["h0_total_persistence_net"].quantile(0.8)),
        min_history=0,
    )
    return plain.replace(alerts={"rules": [rule.model_dump()]})


@pytest.mark.parametrize("row", [5, 30, 58], ids=["early", "middle", "last-days"])
def test_a_correction_recomputes_the_derived_columns_it_reaches(store: Store, row: int) -> None:
    # reference: riskshape.monitor over the corrected history with [derived] on (a fresh run); the
    # trailing fit reaches 10 windows and the longest change 8 windows past the recomputed windows
    prices = walk_prices(np.random.default_rng(43), n_days=70, assets=codes(5))
    config = _derived_config(prices)
    ingestor = _fed(store, prices, config)
    before = store.read_features(PORTFOLIO).frame
    assert {"h0_total_persistence_net", "h0_total_persistence_net_z", "mean_correlation_chg_8"} <= set(before.columns)
    known_before = datetime.now(timezone.utc)

    day, asset = prices.index[row], prices.columns[1]
    corrected = prices.copy()
    corrected.loc[day, asset] *= 1.3
    report = ingestor.ingest(store, PORTFOLIO, corrected.loc[[day], [asset]], correction=True)
    assert report.run_id is not None

    fresh = monitor(corrected, config).features
    now = store.read_features(PORTFOLIO).frame
    pd.testing.assert_frame_equal(now, fresh.rename_axis("window_end"), check_exact=True, check_freq=False)
    # the derived columns changed past the windows whose returns hold the corrected price
    ends_at = window_end_positions(len(prices) - 1, WINDOW, 1)
    holding = prices.index[affected_windows(np.array([row]), ends_at, WINDOW) + 1]
    net_changed = [
        e
        for e in now.index
        if not np.array_equal(
            now.loc[e, ["h0_total_persistence_net_z"]].to_numpy(float),
            before.loc[e, ["h0_total_persistence_net_z"]].to_numpy(float),
            equal_nan=True,
        )
    ]
    if holding[-1] < now.index[-1]:
        assert max(net_changed) > holding[-1]
    pd.testing.assert_frame_equal(
        store.read_features(PORTFOLIO, as_known_at=known_before).frame, before, check_exact=True
    )
    firings = {(f.rule, f.window_end.date()) for f in evaluate_rules(fresh, config.alerts.rules)}
    assert _current_firings(store) == firings
    assert verify_chain(store).ok


@settings(max_examples=8, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(sequence=corrections)
def test_with_derived_columns_the_current_series_always_equals_a_fresh_run(
    tmp_path_factory: pytest.TempPathFactory, sequence
) -> None:
    prices = walk_prices(np.random.default_rng(3), n_days=40, assets=codes(4))
    config = _derived_config(prices)
    folder = tmp_path_factory.mktemp("derived-corrections")
    with open_store(f"sqlite:///{folder / 'archive.sqlite'}") as store:
        ingestor = _fed(store, prices, config)
        for body in sequence:
            sent = pd.DataFrame(np.nan, index=prices.index, columns=prices.columns)
            current = store.read_prices(PORTFOLIO, assets=list(prices.columns))
            for row, column, factor in body:
                sent.iloc[row, column] = current.iloc[row, column] * factor
            ingestor.ingest(store, PORTFOLIO, sent.dropna(how="all"), correction=True)
            fresh = monitor(store.read_prices(PORTFOLIO, assets=list(prices.columns)), config)
            pd.testing.assert_frame_equal(
                store.read_features(PORTFOLIO).frame,
                fresh.features.rename_axis("window_end"),
                check_exact=True,
                check_freq=False,
            )
            firings = {(f.rule, f.window_end.date()) for f in evaluate_rules(fresh.features, config.alerts.rules)}
            assert _current_firings(store) == firings
        assert verify_chain(store).ok
