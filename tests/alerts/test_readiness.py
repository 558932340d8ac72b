"""Whether a rule can fire yet: the readiness a RuleState reports agrees with the state machine.

The reference is the rule semantics of riskshape.alerts.rules (points 3, 5 and 8 of its module
notes): a window is judged once its history holds ``min_history`` values, and a rule fires at the
earliest at its ``consecutive``-th judged window. A series that rises every window is beyond any
trailing quantile, so the rule fires at exactly the first window it can: each prefix's
``windows_to_go`` must count the windows up to that firing.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from riskshape import Config, monitor
from riskshape.alerts import evaluate_rule, readiness_lines, rule_state, rule_states
from riskshape.config import RuleConfig
from tests.kit.assets import codes

REPO = Path(__file__).resolve().parents[2]


@pytest.mark.parametrize(
    "kind, min_history, consecutive, gaps",
    [("quantile", 30, 5, False), ("zscore", 0, 3, False), ("quantile", 20, 1, True), ("level", 0, 4, False)],
    ids=["quantile", "zscore-min2", "quantile-gaps", "level"],
)
def test_windows_to_go_counts_to_the_first_firing(kind: str, min_history: int, consecutive: int, gaps: bool) -> None:
    values = np.arange(80, dtype=float) ** 1.5  # rises every window, faster and faster
    if gaps:
        values[[3, 10, 11, 40]] = np.nan
    series = pd.Series(values, index=pd.bdate_range("2031-01-01", periods=len(values)))
    threshold = {"quantile": 0.99, "zscore": 1.0, "level": -1.0}[kind]
    rule = RuleConfig(
        name="r",
        summary="x",
        kind=kind,
        threshold=threshold,
        lookback=60,
        min_history=min_history,
        consecutive=consecutive,
    )
    first = series.index.get_loc(evaluate_rule(series, rule)[0].window_end)
    for n in range(1, len(series) + 1):
        state = rule_state(series.iloc[:n], rule)
        if gaps and np.isnan(values[n - 1 : first + 1]).any():
            continue  # the count assumes values from here on; a gap ahead delays the firing
        if n - 1 < first:
            assert not state.can_fire
            assert state.windows_to_go == first - (n - 1), n
        else:
            assert state.can_fire and state.windows_to_go == 0
    assert rule_state(series, rule).history_needed == max(min_history, {"quantile": 1, "zscore": 2, "level": 0}[kind])


def _jump_prices(seed: int = 4, days: int = 400, jump: int = 200, assets: int = 16) -> pd.DataFrame:
    """A factor market whose correlation jumps from 0.1 to 0.6 on day ``jump``."""
    rng = np.random.default_rng(seed)
    rho = np.where(np.arange(days) < jump, 0.1, 0.6)[:, None]
    returns = np.sqrt(rho) * rng.standard_normal((days, 1)) + np.sqrt(1 - rho) * rng.standard_normal((days, assets))
    levels = 100.0 * np.exp(np.cumsum(0.01 * returns, axis=0))
    return pd.DataFrame(levels, index=pd.bdate_range("2031-01-01", periods=days), columns=codes(assets))


def test_short_history_configuration_can_fire_where_the_defaults_cannot() -> None:
    prices = _jump_prices()
    jump_day = prices.index[200]
    serial = {"executor": "serial"}
    default = monitor(prices, Config(compute=serial))
    short_config = Config.from_toml(REPO / "config" / "short_history.toml").replace(compute=serial)
    short = monitor(prices, short_config)

    before_jump = default.features.loc[:jump_day]
    silent = [s for s in rule_states(before_jump, default.config.alerts.rules) if not s.can_fire]
    assert len(silent) >= 5  # five of six default rules wait for 250 windows of history
    assert all(s.windows_to_go > 0 and s.history < s.history_needed for s in silent)
    lines = readiness_lines(before_jump, default.config.alerts.rules)
    assert sum("cannot fire yet" in line for line in lines) == len(silent)

    ready = rule_states(short.features.loc[:jump_day], short_config.alerts.rules)
    assert all(s.can_fire for s in ready)
    # and the correlation jump is seen within two trading months of it by the mean-correlation rule
    fired = evaluate_rule(short.features["mean_correlation"], short_config.alerts.rules[1])
    after = [f.window_end for f in fired if f.window_end > jump_day]
    assert after and (prices.index.get_loc(after[0]) - 200) <= 40
