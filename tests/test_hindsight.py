"""``audit reproduce`` as known then and as known now, around a correction that removes an alert and one
that keeps it.

The reference for "now" is :func:`riskshape.monitor` over the whole corrected history and
:func:`riskshape.alerts.evaluate_rules` over it (the batch path of DESIGN.md), computed here apart
from the archive; "then" must still confirm the alert exactly from the prices its run saw.
"""

from __future__ import annotations

from collections.abc import Iterator

import numpy as np
import pandas as pd
import pytest

from riskshape import Config, monitor, reproduce_alert, reproduce_alert_now
from riskshape.alerts import evaluate_rules
from riskshape.cli import main
from riskshape.store import AlertRecord, Store, open_store
from tests.kit.corrected import archive_portfolio, correct_day, corrected_prices, rules_config
from tests.kit.postgres import fresh_schema_url


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def store(request: pytest.FixtureRequest, tmp_path) -> Iterator[Store]:
    if request.param == "sqlite":
        with open_store(f"sqlite:///{tmp_path / 'archive.sqlite'}") as opened:
            yield opened
        return
    with fresh_schema_url("rs_hind") as url, open_store(url) as opened:
        yield opened


def _fires(prices: pd.DataFrame, config: Config, alert: AlertRecord) -> tuple[bool, float]:
    """Reference: whether a fresh run over ``prices`` fires the alert's rule at its window, and the value."""
    result = monitor(prices, config)
    end = pd.Timestamp(alert.window_end)
    fired = any(
        f.rule == alert.rule and f.window_end == end for f in evaluate_rules(result.features, config.alerts.rules)
    )
    return fired, float(result.features.loc[end, "mean_correlation"])


def _factors(prices: pd.DataFrame, config: Config, alert: AlertRecord, *, keep: bool) -> np.ndarray:
    """The first of a seeded list of corrections of the alert's day that keeps (or removes) the alert."""
    rng = np.random.default_rng(5)
    day = pd.Timestamp(alert.window_end)
    for scale in (1e-4, 1e-3) if keep else (0.3, 0.5, 0.8):
        for _ in range(12):
            factors = 1.0 + rng.normal(0.0, scale, size=prices.shape[1])
            trial = prices.copy()
            trial.loc[day, :] *= factors
            fired, value = _fires(trial, config, alert)
            if fired == keep and value != alert.value:
                return factors
    pytest.fail(f"no correction found that {'keeps' if keep else 'removes'} the alert")  # pragma: no cover


@pytest.mark.parametrize("keep", [True, False], ids=["kept", "removed"])
def test_reproduce_then_confirms_and_now_follows_the_corrected_prices(store: Store, keep: bool) -> None:
    prices = corrected_prices()
    config = rules_config(prices)
    alert = archive_portfolio(store, prices, config)[0]
    factors = _factors(prices, config, alert, keep=keep)
    corrected = correct_day(store, prices, config, pd.Timestamp(alert.window_end), factors)

    then = reproduce_alert(store, alert.id)
    assert then.ok and then.exact, then.failed
    now = reproduce_alert_now(store, alert.id)
    fired, value = _fires(corrected, config, alert)
    assert now.still_fires is fired is keep
    assert now.value == value and now.archived_value == alert.value and now.changed
    assert now.corrections == prices.shape[1]  # every price of the day was revised
    assert now.matches_archive and now.archive_value == value  # the archive's current version, superseded
    assert ("would still fire" if keep else "would no longer fire") in now.verdict


def test_reproduce_now_without_a_correction_is_the_alert_itself(store: Store) -> None:
    prices = corrected_prices()
    config = rules_config(prices)
    alert = archive_portfolio(store, prices, config)[0]
    now = reproduce_alert_now(store, alert.id)
    assert now.still_fires and now.value == alert.value and not now.changed and now.corrections == 0


def test_the_command_prints_then_and_now(tmp_path, capsys: pytest.CaptureFixture[str]) -> None:
    url = f"sqlite:///{tmp_path / 'archive.sqlite'}"
    prices = corrected_prices()
    config = rules_config(prices)
    with open_store(url) as store:
        alert = archive_portfolio(store, prices, config)[0]
        correct_day(store, prices, config, pd.Timestamp(alert.window_end), _factors(prices, config, alert, keep=False))
    try:
        status = main(["audit", "reproduce", str(alert.id), "--store", url])
    except SystemExit as stop:
        status = stop.code
    out = capsys.readouterr().out
    assert status in (None, 0), out
    assert "as known when it was raised:" in out and f"alert {alert.id} reproduced (bit-identical)" in out
    assert "as known now (5 price correction(s) since it was raised):" in out and "would no longer fire" in out
