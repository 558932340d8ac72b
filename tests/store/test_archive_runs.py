"""Archiving monitoring runs and reproducing their alerts from the archive alone (both backends)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import sqlalchemy as sa

from riskshape import monitor
from riskshape.archive import archive_run, recompute_run, reproduce_alert, reproduce_alerts
from riskshape.compute.monitor import MonitorResult
from riskshape.store import Store, verify_chain
from tests.kit.archive import around_triggers


def test_archive_then_reproduce_every_alert(store: Store, computed: MonitorResult) -> None:
    report = archive_run(store, "Fund Scenario", computed, source="scenario")
    n_windows = len(computed.window_ends)
    assert report.features.added == n_windows and report.diagrams.added == n_windows * (computed.config.maxdim + 1)
    alerts = report.alerts.added
    assert len(alerts) >= 3 and {a.rule for a in alerts} >= {"corr_level", "h1_z"}
    reports = reproduce_alerts(store, [a.id for a in alerts])
    assert all(r.ok for r in reports), [r.failed for r in reports if not r.ok]
    assert all(r.exact for r in reports)  # same machine, same code: bit-identical
    assert verify_chain(store).ok
    # what was archived reads back as computed
    page = store.read_features("Fund Scenario")
    pd.testing.assert_frame_equal(page.frame, computed.features, check_freq=False, check_names=False)
    end = computed.window_ends[40]
    np.testing.assert_array_equal(
        store.read_diagram("Fund Scenario", end, 1).bars, computed.diagram(end, 1).astype(np.float32)
    )
    run = store.get_run(report.run.id)
    assert run.input_hash == computed.input_hash and run.config_hash == computed.config.hash()


def test_the_same_run_twice_adds_nothing(store: Store, computed: MonitorResult) -> None:
    first = archive_run(store, "Fund Scenario", computed)
    second = archive_run(store, "Fund Scenario", computed)
    assert second.alerts.added == () and second.alerts.existing == len(first.alerts.added)
    assert second.features.added == 0 and second.features.differing == 0
    assert second.diagrams.added == 0 and second.run.prices_added == 0 and second.run.corrections_added == 0
    assert store.list_alerts(limit=None).total == len(first.alerts.added)


def test_new_days_add_only_what_is_new(store: Store, computed: MonitorResult, small_prices: pd.DataFrame) -> None:
    cut = 110
    early = monitor(small_prices.iloc[:cut], computed.config)
    first = archive_run(store, "Fund Scenario", early)
    later = early.update(small_prices.iloc[cut:])
    second = archive_run(store, "Fund Scenario", later)
    new_windows = len(later.window_ends) - len(early.window_ends)
    assert second.features.added == new_windows and second.features.differing == 0
    assert second.run.prices_added == small_prices.iloc[cut:].size and second.run.corrections_added == 0
    assert second.alerts.existing == len(first.alerts.added)
    assert all(a.window_end > early.window_ends[-1].date() for a in second.alerts.added)
    every = {(a.rule, a.window_end) for a in store.list_alerts(limit=None).items}
    assert every == {(a.rule, a.window_end) for a in archive_run(store, "Fund Batch", computed).alerts.added}


def test_a_price_correction_is_kept_beside_the_original(
    store: Store, computed: MonitorResult, small_prices: pd.DataFrame
) -> None:
    first = archive_run(store, "Fund Scenario", computed)
    revised = small_prices.copy()
    day, asset = revised.index[50], revised.columns[2]
    revised.loc[day, asset] *= 1.05
    second = archive_run(store, "Fund Scenario", monitor(revised, computed.config))
    assert (second.run.prices_added, second.run.corrections_added) == (0, 1)
    (correction,) = store.list_corrections("Fund Scenario")
    assert (correction.date, correction.asset) == (day.date(), asset)
    assert (correction.old_price, correction.new_price) == (small_prices.loc[day, asset], revised.loc[day, asset])
    assert second.features.differing > 0  # windows holding that day changed; the archived ones stay
    assert store.read_prices("Fund Scenario", assets=[asset]).loc[day, asset] == revised.loc[day, asset]
    # the first run's alerts still reproduce: they are recomputed from the prices as of their run
    report = reproduce_alert(store, first.alerts.added[0].id)
    assert report.ok, report.failed


def test_reproduce_notices_an_archived_price_changed_behind_its_back(store: Store, computed: MonitorResult) -> None:
    alert = archive_run(store, "Fund Scenario", computed).alerts.added[0]
    with around_triggers(store) as connection:
        connection.execute(sa.text("UPDATE prices SET price = price * 1.001 WHERE id = 7"))
    report = reproduce_alert(store, alert.id)
    assert not report.ok and [c.name for c in report.failed] == ["run prices hash"]


def test_reproduce_notices_a_changed_value(store: Store, computed: MonitorResult) -> None:
    alert = archive_run(store, "Fund Scenario", computed).alerts.added[0]
    with around_triggers(store) as connection:
        connection.execute(sa.text("UPDATE alerts SET value = value + 0.01 WHERE id = :id"), {"id": alert.id})
    report = reproduce_alert(store, alert.id)
    assert not report.ok and [c.name for c in report.failed] == ["value"]
    assert not verify_chain(store).ok


def test_archive_refuses_a_configuration_the_result_was_not_computed_with(
    store: Store, computed: MonitorResult
) -> None:
    from riskshape.errors import ConfigError

    with pytest.raises(ConfigError, match="not the one the result was computed with"):
        archive_run(store, "Fund Scenario", computed, computed.config.replace(window=25))


def test_recompute_run_gives_the_runs_windows_up_to_a_date(store: Store, computed: MonitorResult) -> None:
    run = archive_run(store, "Fund Scenario", computed).run
    end = computed.window_ends[50]
    again = recompute_run(store, store.get_run(run.id), end)
    assert again.consistent and again.failure is None and again.reason == ""
    assert [c.name for c in again.checks] == ["configuration hash", "run prices hash"]
    assert again.result is not None and again.result.window_ends[-1] == end
    # windows are anchored at the first one: the windows up to a date are those of the whole run
    pd.testing.assert_frame_equal(again.result.features, computed.features.loc[:end])


def test_recompute_run_holds_back_on_prices_changed_behind_its_back(store: Store, computed: MonitorResult) -> None:
    run = archive_run(store, "Fund Scenario", computed).run
    with around_triggers(store) as connection:
        connection.execute(sa.text("UPDATE prices SET price = price * 1.001 WHERE id = 7"))
    held = recompute_run(store, store.get_run(run.id), computed.window_ends[-1])
    assert held.result is None and not held.consistent
    assert [c.name for c in held.checks if not c.ok] == ["run prices hash"]
    assert held.reason == held.checks[-1].recomputed  # the hash the archived prices give now
    anyway = recompute_run(store, store.get_run(run.id), computed.window_ends[-1], require_hashes=False)
    assert anyway.result is not None and not anyway.consistent
