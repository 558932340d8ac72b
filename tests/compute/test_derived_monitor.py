"""The derived columns through the monitor, the configuration, the rules and the archive.

* Off by default: the features and ``Config.hash()`` are what they were before ``[derived]``.
* On: the columns follow the summaries, equal :func:`derive_columns` of the summaries and the
  baselines' equal-weight volatility (:func:`riskshape.research.baselines.compute_baselines`,
  computed independently here), use nothing after their window (hypothesis, like
  tests/compute/test_invariance_causality.py), and a one-day update equals the batch.
* A rule can watch a derived column; the configuration refuses one it does not compute, naming
  the key and the fix; the archive stores and returns the columns like any other.
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from riskshape import Config, MonitorResult, archive_run, monitor
from riskshape.alerts import evaluate_rules
from riskshape.compute.derived import derive_columns, derived_column_names
from riskshape.demo.scenario import Scenario
from riskshape.errors import ConfigError
from riskshape.research import compute_baselines
from riskshape.store import Store, open_store
from tests.kit.postgres import fresh_schema_url

DERIVED = {"net_of_market": True, "net_of_market_window": 30, "change_horizons": [4, 10]}
CONFIG = Config(window=20, step=2, maxdim=0, compute={"executor": "serial"}, alerts={"rules": []}, derived=DERIVED)


def _prices(scenario: Scenario) -> pd.DataFrame:
    """Ten assets over 140 days, one of them missing for a stretch (the coverage policy at work)."""
    prices = scenario.prices.iloc[:140, :10].copy()
    prices.iloc[60:75, 4] = np.nan
    return prices


@pytest.fixture(scope="module")
def base(small_scenario: Scenario) -> MonitorResult:
    return monitor(_prices(small_scenario), CONFIG)


def test_the_columns_follow_the_summaries_and_equal_the_parts(base: MonitorResult) -> None:
    plain = monitor(base.prices, CONFIG.replace(derived={}))
    summaries = plain.features
    names = derived_column_names(list(summaries.columns), CONFIG.derived)
    assert list(base.features.columns) == list(summaries.columns) + names
    pd.testing.assert_frame_equal(base.features[summaries.columns], summaries, check_exact=True)
    # the volatility computed independently, by the baselines on the same windows
    vol = compute_baselines(base.prices, CONFIG)["ew_volatility"]
    expected = derive_columns(summaries, vol, CONFIG.derived, CONFIG.step).frame
    pd.testing.assert_frame_equal(base.features[names], expected, check_exact=True)
    assert base.features["h0_total_persistence_net"].notna().sum() > 10  # not NaN throughout
    assert base.derived.nan_reasons()["h0_total_persistence_net"].startswith("30 window(s) before the trailing fit")


def test_off_by_default_the_features_and_the_hash_are_unchanged(base: MonitorResult) -> None:
    plain = CONFIG.replace(derived={"net_of_market": False, "net_of_market_window": 99, "change_horizons": []})
    assert plain.hash() == CONFIG.replace(derived={}).hash() != CONFIG.hash()
    assert CONFIG.replace(derived={"change_horizons": [4]}).hash() != CONFIG.replace(derived={}).hash()
    assert not plain.derived.active
    assert monitor(base.prices.iloc[:40], plain).derived.frame.empty


@settings(max_examples=10, deadline=None)
@given(cut=st.integers(min_value=60, max_value=130), seed=st.integers(0, 2**32 - 1))
def test_prices_after_t_change_no_derived_value_by_t(base: MonitorResult, cut: int, seed: int) -> None:
    prices = base.prices
    t = prices.index[cut]
    changed = prices.copy()
    later = changed.index > t
    changed.loc[later] = changed.loc[later] * np.random.default_rng(seed).uniform(0.5, 2.0, changed.loc[later].shape)
    after = monitor(changed, CONFIG)
    done = base.window_ends[base.window_ends <= t]
    names = list(base.derived.frame.columns)
    pd.testing.assert_frame_equal(base.features.loc[done, names], after.features.loc[done, names], check_exact=True)
    if len(done) < len(base.window_ends):  # positive control: the next window's change sees the new prices
        first_after = base.window_ends[len(done)]
        assert base.features.loc[first_after, "h0_total_persistence_chg_4"] != pytest.approx(
            after.features.loc[first_after, "h0_total_persistence_chg_4"], rel=1e-12
        )


def test_a_one_day_update_equals_the_batch(base: MonitorResult) -> None:
    prices = base.prices
    held = monitor(prices.iloc[:101], CONFIG)
    updated = held.update(prices.iloc[101:102]).update(prices.iloc[102:])
    pd.testing.assert_frame_equal(updated.features, base.features, check_exact=True)


def test_a_rule_watches_a_net_column(base: MonitorResult) -> None:
    column = "h0_total_persistence_net_z"
    values = base.features[column]
    threshold = float(values.quantile(0.8))
    rule = {"name": "net_high", "summary": column, "kind": "level", "threshold": threshold, "min_history": 0}
    config = CONFIG.replace(alerts={"rules": [rule]})
    firings = evaluate_rules(base.features, config.alerts.rules)
    assert firings
    # a level rule without hysteresis fires first where the column first exceeds the threshold
    assert pd.Timestamp(firings[0].window_end) == values.index[(values > threshold).to_numpy()][0]
    for firing in firings:
        assert values.loc[pd.Timestamp(firing.window_end)] > threshold


def test_the_configuration_refuses_a_rule_on_a_derived_column_it_does_not_compute() -> None:
    rule = {"name": "chg", "summary": "h0_entropy_chg_60", "kind": "level", "threshold": 1.0, "min_history": 0}
    with pytest.raises(ConfigError, match=r"alerts\.rules\.0\.summary.*add 60 to change_horizons \(in \[derived\]\)"):
        Config(maxdim=0, alerts={"rules": [rule]})
    assert Config(maxdim=0, alerts={"rules": [rule]}, derived={"change_horizons": [60]}).alerts.rules[0].summary
    with pytest.raises(ConfigError, match=r"derived\.change_horizons.*not multiples of step = 3"):
        Config(step=3, derived={"change_horizons": [60, 100]})
    with pytest.raises(ConfigError, match=r"derived\.change_horizons.*at least 1, listed once"):
        Config(derived={"change_horizons": [20, 20]})
    with pytest.raises(ConfigError, match=r"derived\.net_of_market_window"):
        Config(derived={"net_of_market_window": 3})


def test_the_section_is_read_from_a_file_and_round_trips(tmp_path: Path) -> None:
    path = tmp_path / "derived.toml"
    path.write_text("[monitor]\nwindow = 40\n[derived]\nnet_of_market = true\nchange_horizons = [20, 60, 100]\n")
    config = Config.from_toml(path)
    assert config.derived.net_of_market and config.derived.change_horizons == (20, 60, 100)
    assert Config.from_mapping(config.to_mapping()) == config
    path.write_text("[derived]\nnet_of_market = true\nwindow = 3\n")
    with pytest.raises(ConfigError, match=r"unknown key 'derived\.window'"):
        Config.from_toml(path)


@pytest.fixture(params=["sqlite", "postgresql"])
def store(request: pytest.FixtureRequest, tmp_path: Path) -> Iterator[Store]:
    if request.param == "sqlite":
        with open_store(f"sqlite:///{tmp_path / 'archive.sqlite'}") as opened:
            yield opened
        return
    with fresh_schema_url("rs_derived") as url, open_store(url) as opened:
        yield opened


def test_the_archive_stores_the_derived_columns_and_alerts_on_them(base: MonitorResult, store: Store) -> None:
    rule = {"name": "net_jump", "summary": "h0_total_persistence_net_z", "kind": "level", "threshold": 1.0}
    config = CONFIG.replace(alerts={"rules": [{**rule, "min_history": 0}]})
    result = monitor(base.prices, config)
    report = archive_run(store, "derived", result, explain=False)
    archived = store.read_features("derived").frame
    names = list(result.derived.frame.columns)
    pd.testing.assert_frame_equal(
        archived[names], result.features[names], check_exact=False, rtol=1e-15, check_freq=False, check_names=False
    )
    assert len(report.alerts.added) == len(evaluate_rules(result.features, config.alerts.rules)) > 0


def test_a_correction_leaves_the_derived_columns_of_a_fresh_run(base: MonitorResult, tmp_path: Path) -> None:
    # reference: riskshape.monitor over the corrected prices with the same [derived] section (step 2,
    # one asset missing for a stretch); the derived columns of windows after the recomputed ones move too
    from riskshape.daily.corrections import apply_corrections

    with open_store(f"sqlite:///{tmp_path / 'archive.sqlite'}") as store:
        archive_run(store, "derived", base, explain=False)
        before = store.read_features("derived").frame
        day = base.prices.index[50]
        revised = base.prices.loc[[day], base.prices.columns[:2]] * 1.05
        run = store.latest_run("derived")
        assert run is not None
        report = apply_corrections(store, "derived", revised, CONFIG, run)
        corrected = base.prices.copy()
        corrected.loc[[day], revised.columns] = revised
        fresh = monitor(corrected, CONFIG)
        now = store.read_features("derived").frame
        pd.testing.assert_frame_equal(now, fresh.features.rename_axis("window_end"), check_exact=True, check_freq=False)
        net = "h0_total_persistence_net"
        moved = now.index[~np.isclose(now[net], before[net], equal_nan=True)]
        # the last window whose returns hold the price of row 50 ends at returns row 50 + 19 (price row 70)
        assert report.run_id is not None and moved[-1] > base.prices.index[70]
        assert len(store.list_runs("derived")) == 2
