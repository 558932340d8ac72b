"""Hand-computed examples of the alert rule semantics (riskshape.alerts.rules module docstring).

Every expected value below is worked out by hand in the comments. Quantiles follow numpy's
default ``method="linear"`` (Hyndman & Fan 1996, definition 7): for sorted values x_0..x_{n-1},
Q(q) = x_j + g (x_{j+1} - x_j) with h = (n - 1) q, j = floor(h), g = h - j. Standard deviations
are sample ones (ddof=1, common practice). The threshold of window t uses the `lookback`
windows before t, never t itself.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from riskshape.alerts.model import Firing
from riskshape.alerts.rules import (
    active_rules,
    evaluate_rule,
    evaluate_rules,
    recheck_firing,
    rule_state,
    rule_states,
)
from riskshape.config import Config, RuleConfig
from riskshape.errors import ConfigError, DataError

NAN = float("nan")


def _series(values: list[float], name: str = "x") -> pd.Series:
    index = pd.date_range("2024-01-01", periods=len(values), freq="B", name="window_end")
    return pd.Series(values, index=index, name=name, dtype=float)


def _rule(**kw: object) -> RuleConfig:
    base: dict[str, object] = {"name": "r", "summary": "x", "kind": "level", "threshold": 0.0, "min_history": 0}
    base.update(kw)
    return RuleConfig(**base)


def _positions(series: pd.Series, rule: RuleConfig) -> list[int]:
    return [series.index.get_loc(f.window_end) for f in evaluate_rule(series, rule)]


# ---------------------------------------------------------------- level


def test_level_fires_then_clears_at_threshold_and_fires_again() -> None:
    # threshold 4, clear defaults to 4.
    # t=0: 1 <= 4 no. t=1: 5 > 4 FIRE (active). t=2: 6 > 4 but active, no.
    # t=3: 2 <= 4 clears. t=4: 7 > 4 FIRE.
    s = _series([1, 5, 6, 2, 7])
    firings = evaluate_rule(s, _rule(threshold=4.0))
    assert [s.index.get_loc(f.window_end) for f in firings] == [1, 4]
    assert [f.value for f in firings] == [5.0, 7.0]
    assert [f.threshold for f in firings] == [4.0, 4.0]
    assert firings[0] == Firing(
        rule="r", summary="x", kind="level", window_end=s.index[1], value=5.0, threshold=4.0, severity="warning"
    )


def test_level_equal_to_threshold_is_not_beyond() -> None:
    # strict comparison: 4 > 4 is false, so nothing fires.
    assert _positions(_series([4, 4, 4]), _rule(threshold=4.0)) == []


def test_level_hysteresis_needs_the_clear_level() -> None:
    # threshold 4, clear 3.
    # t=1: 5 > 4 FIRE. t=2: 3.5 > 3, not cleared. t=3: 6 > 4 but still active, no.
    # t=4: 2.9 <= 3 clears. t=5: 4.5 > 4 FIRE.
    s = _series([1, 5, 3.5, 6, 2.9, 4.5])
    assert _positions(s, _rule(threshold=4.0, clear=3.0)) == [1, 5]
    # Without hysteresis (clear = threshold) t=2 clears (3.5 <= 4) and t=3 fires.
    assert _positions(s, _rule(threshold=4.0)) == [1, 3, 5]


# ---------------------------------------------------------------- quantile


def test_quantile_uses_the_windows_before_t() -> None:
    # lookback 4, q = 0.75, min_history 4.
    # t=0..3: history holds 0, 1, 2, 3 values < 4: not judged.
    # t=4: history [1, 2, 3, 4]; h = 3 * 0.75 = 2.25 -> 3 + 0.25 * (4 - 3) = 3.25; 10 > 3.25 FIRE.
    # t=5: history [2, 3, 4, 10]; h = 2.25 -> 4 + 0.25 * (10 - 4) = 5.5; 3 <= 5.5 clears.
    # t=6: history [3, 4, 10, 3] sorted [3, 3, 4, 10]; -> 4 + 0.25 * 6 = 5.5; 9 > 5.5 FIRE.
    s = _series([1, 2, 3, 4, 10, 3, 9])
    firings = evaluate_rule(s, _rule(kind="quantile", threshold=0.75, lookback=4, min_history=4))
    assert [s.index.get_loc(f.window_end) for f in firings] == [4, 6]
    assert [f.threshold for f in firings] == pytest.approx([3.25, 5.5], abs=1e-12)
    assert [f.value for f in firings] == [10.0, 9.0]


def test_quantile_spike_is_not_compared_with_itself() -> None:
    # lookback 4, q = 0.95. At t=4 the history is [1, 2, 3, 4]: h = 3 * 0.95 = 2.85
    # -> 3 + 0.85 * 1 = 3.85, and 4 > 3.85 FIRES. Had t been in its own history ([2, 3, 4, 4]),
    # the level would be 4 + 0.85 * 0 = 4 and 4 > 4 would not fire.
    s = _series([1, 2, 3, 4, 4])
    firings = evaluate_rule(s, _rule(kind="quantile", threshold=0.95, lookback=4, min_history=4))
    assert [s.index.get_loc(f.window_end) for f in firings] == [4]
    assert firings[0].threshold == pytest.approx(3.85, abs=1e-12)


def test_quantile_clear_is_a_quantile_converted_at_each_window() -> None:
    # lookback 4, threshold q 0.75, clear q 0.25, min_history 4.
    # t=4: history [1, 2, 3, 4] -> T = 3.25; 10 FIRES.
    # t=5: history [2, 3, 4, 10]: clear q 0.25: h = 0.75 -> 2 + 0.75 * 1 = 2.75; 3 > 2.75 stays active.
    # t=6: history [3, 4, 10, 3] sorted [3, 3, 4, 10]: T = 5.5, so 9 would fire, but still active.
    # t=7: history [4, 10, 3, 9] sorted [3, 4, 9, 10]: C = 3 + 0.75 * 1 = 3.75; 3.7 <= 3.75 clears.
    # t=8: history [10, 3, 9, 3.7] sorted [3, 3.7, 9, 10]: T = 9 + 0.25 * 1 = 9.25; 9.3 FIRES.
    s = _series([1, 2, 3, 4, 10, 3, 9, 3.7, 9.3])
    rule = _rule(kind="quantile", threshold=0.75, clear=0.25, lookback=4, min_history=4)
    firings = evaluate_rule(s, rule)
    assert [s.index.get_loc(f.window_end) for f in firings] == [4, 8]
    assert firings[1].threshold == pytest.approx(9.25, abs=1e-12)


# ---------------------------------------------------------------- z-score


def test_zscore_threshold_is_trailing_mean_plus_z_sample_std() -> None:
    # lookback 5, z = 2, min_history 5. History of t=5: [1, 2, 3, 4, 5], mean 3,
    # sample variance (4 + 1 + 0 + 1 + 4) / 4 = 2.5, std sqrt(2.5) = 1.58114;
    # T = 3 + 2 * 1.58114 = 6.16228. 6.0 does not fire; 6.5 does.
    rule = _rule(kind="zscore", threshold=2.0, lookback=5, min_history=5)
    assert _positions(_series([1, 2, 3, 4, 5, 6.0]), rule) == []
    firings = evaluate_rule(_series([1, 2, 3, 4, 5, 6.5]), rule)
    assert len(firings) == 1
    assert firings[0].threshold == pytest.approx(3 + 2 * math.sqrt(2.5), rel=1e-12)


def test_zscore_hysteresis_in_z_units() -> None:
    # lookback 5, z = 2, min_history 5; series [1, 2, 3, 4, 5, 7, 6, 9].
    # t=5: history [1..5] -> T = 6.16228; 7 FIRES.
    # t=6: history [2, 3, 4, 5, 7], mean 4.2, squares 4.84 + 1.44 + 0.04 + 0.64 + 7.84 = 14.8,
    #      var 3.7, std 1.92354; T = 8.04708. With clear z 0.5: C = 4.2 + 0.96177 = 5.16177,
    #      6 > C so it stays active. With clear = threshold: 6 <= 8.04708 clears.
    # t=7: history [3, 4, 5, 7, 6], mean 5, squares 4 + 1 + 0 + 4 + 1 = 10, var 2.5,
    #      std 1.58114; T = 8.16228; 9 > T: fires only if cleared at t=6.
    s = _series([1, 2, 3, 4, 5, 7, 6, 9])
    assert _positions(s, _rule(kind="zscore", threshold=2.0, clear=0.5, lookback=5, min_history=5)) == [5]
    firings = evaluate_rule(s, _rule(kind="zscore", threshold=2.0, lookback=5, min_history=5))
    assert [s.index.get_loc(f.window_end) for f in firings] == [5, 7]
    assert firings[1].threshold == pytest.approx(5 + 2 * math.sqrt(2.5), rel=1e-12)


def test_zscore_needs_two_past_values() -> None:
    # min_history 0, but a sample std needs 2 values: t=0 and t=1 are not judged.
    # t=2: history [0, 1], mean 0.5, std sqrt(0.5) = 0.70711; T = 0.5 + 1 * 0.70711 = 1.20711; 5 FIRES.
    s = _series([0, 1, 5])
    firings = evaluate_rule(s, _rule(kind="zscore", threshold=1.0, lookback=10))
    assert [s.index.get_loc(f.window_end) for f in firings] == [2]
    assert firings[0].threshold == pytest.approx(0.5 + math.sqrt(0.5), rel=1e-12)


# ---------------------------------------------------------------- consecutive, NaN, cool-down


def test_k_consecutive_windows() -> None:
    # threshold 0, k = 3. runs: t0 1, t1 2, t2 0, t3 1, t4 2, t5 3 FIRE; t6 4 (active);
    # t7 -1 clears, run 0; t8 1, t9 2, t10 3 FIRE.
    s = _series([1, 1, -1, 1, 1, 1, 1, -1, 1, 1, 1])
    assert _positions(s, _rule(consecutive=3)) == [5, 10]


def test_nan_breaks_a_run_and_neither_fires_nor_clears() -> None:
    # k = 3: NaN at t=2 resets the run; t3 1, t4 2, t5 3 FIRE.
    assert _positions(_series([1, 1, NAN, 1, 1, 1]), _rule(consecutive=3)) == [5]
    # k = 1: t0 FIRES; NaN at t1 does not clear; t2 is beyond but still active.
    assert _positions(_series([1, NAN, 1]), _rule()) == [0]
    # infinite values count as missing too.
    assert _positions(_series([1, math.inf, -1, 1]), _rule()) == [0, 3]


def test_cooldown_blocks_firing_even_after_clearing() -> None:
    # threshold 0, cooldown 3. t0 FIRES; t1 clears; t2, t3 beyond but within 3 windows of t0;
    # t4 (4 windows after t0) FIRES; t5 clears; t6 is 2 windows after t4: blocked.
    s = _series([1, -1, 1, 1, 1, -1, 1])
    assert _positions(s, _rule(cooldown=3)) == [0, 4]
    # Without cool-down: t0, t2 (after the clear at t1), t6 (after the clear at t5).
    assert _positions(s, _rule()) == [0, 2, 6]


# ---------------------------------------------------------------- direction below


def test_direction_below_mirrors_level() -> None:
    # threshold -1, clear 0, below. t1: -2 < -1 FIRE; t2: -0.5 < 0 not cleared;
    # t3: -3 active; t4: 0.5 >= 0 clears; t5: -1.5 < -1 FIRE.
    s = _series([0, -2, -0.5, -3, 0.5, -1.5])
    assert _positions(s, _rule(threshold=-1.0, clear=0.0, direction="below")) == [1, 5]


def test_direction_below_mirrors_quantile() -> None:
    # The negated series of test_quantile_uses_the_windows_before_t with q = 0.25 below:
    # t=4: history [-1, -2, -3, -4] sorted [-4, -3, -2, -1]; h = 0.75 -> -4 + 0.75 = -3.25; -10 < -3.25 FIRE.
    # t=5: history [-2, -3, -4, -10] sorted [-10, -4, -3, -2]; -> -10 + 0.75 * 6 = -5.5; -3 >= -5.5 clears.
    # t=6: history sorted [-10, -4, -3, -3] -> -5.5; -9 < -5.5 FIRE.
    s = _series([-1, -2, -3, -4, -10, -3, -9])
    firings = evaluate_rule(s, _rule(kind="quantile", threshold=0.25, lookback=4, min_history=4, direction="below"))
    assert [s.index.get_loc(f.window_end) for f in firings] == [4, 6]
    assert [f.threshold for f in firings] == pytest.approx([-3.25, -5.5], abs=1e-12)


def test_direction_below_mirrors_zscore_on_random_series(rng: np.random.Generator) -> None:
    # Negating the series and the z levels swaps above and below: same windows, negated thresholds.
    s = _series(list(np.cumsum(rng.standard_normal(300))))  # a random walk leaves its trailing band often
    common = {"kind": "zscore", "lookback": 40, "min_history": 20, "consecutive": 2, "cooldown": 5}
    above = _rule(threshold=2.0, clear=0.5, **common)
    below = _rule(threshold=-2.0, clear=-0.5, direction="below", **common)
    up, down = evaluate_rule(s, above), evaluate_rule(-s, below)
    assert len(up) > 0
    assert [f.window_end for f in up] == [f.window_end for f in down]
    assert [f.threshold for f in up] == pytest.approx([-f.threshold for f in down], rel=1e-9)


# ---------------------------------------------------------------- min_history


def test_min_history_counts_present_past_values() -> None:
    # min_history 3: history counts at t = 0, 1, 2, 3 are 0, 1, 2, 3 -> first judged (and fired) at t=3.
    assert _positions(_series([5, 5, 5, 5]), _rule(min_history=3, lookback=10)) == [3]
    # a NaN is not history: counts at t = 0..4 are 0, 1, 1, 2, 3 -> fires at t=4.
    assert _positions(_series([5, NAN, 5, 5, 5]), _rule(min_history=3, lookback=10)) == [4]


def test_windows_before_min_history_do_not_count_toward_a_run() -> None:
    # min_history 2, k = 2: t0, t1 not judged; t2 run 1; t3 run 2 FIRE.
    assert _positions(_series([5, 5, 5, 5]), _rule(min_history=2, consecutive=2, lookback=10)) == [3]


def test_min_history_is_counted_within_the_lookback() -> None:
    # lookback 2, min_history 2: t=3 history (t1, t2) = [NaN, 5] holds 1 value: not judged;
    # t=4 history (t2, t3) = [5, 5] holds 2: FIRES.
    assert _positions(_series([5, NAN, 5, 5, 5]), _rule(min_history=2, lookback=2)) == [4]


# ---------------------------------------------------------------- many rules, state, recheck


def _features() -> pd.DataFrame:
    return pd.DataFrame(
        {"a": [1, 5, 3.5, 6, 2.9, 4.5], "b": [0, -2, -0.5, -3, 0.5, 0.2]},
        index=pd.date_range("2024-01-01", periods=6, freq="B", name="window_end"),
        dtype=float,
    )


def test_evaluate_rules_sorted_by_window_then_rule() -> None:
    rules = [
        _rule(name="z_high", summary="a", threshold=4.0, clear=3.0),  # fires at 1 and 5 (see hysteresis test)
        _rule(name="a_low", summary="b", threshold=-1.0, clear=0.0, direction="below"),  # fires at 1 only
    ]
    firings = evaluate_rules(_features(), rules)
    idx = _features().index
    assert [(f.window_end, f.rule) for f in firings] == [(idx[1], "a_low"), (idx[1], "z_high"), (idx[5], "z_high")]


def test_rule_states_at_the_last_window() -> None:
    features = _features()
    rules = [
        _rule(name="high", summary="a", threshold=4.0, clear=3.0, cooldown=3, severity="critical"),
        _rule(name="low", summary="b", threshold=-1.0, clear=0.0, direction="below"),
    ]
    high, low = rule_states(features, rules)
    # "high" fired at t=5 (4.5 > 4): active since then, cool-down 3 windows left.
    assert (high.fired, high.active, high.active_since, high.cooldown_left) == (True, True, features.index[5], 3)
    assert (high.value, high.threshold, high.clear_level, high.run, high.severity) == (4.5, 4.0, 3.0, 1, "critical")
    # "low" fired at t=1 and cleared at t=4 (0.5 >= 0).
    assert (low.fired, low.active, low.active_since, low.last_fired) == (False, False, None, features.index[1])
    assert active_rules(features, rules) == (high,)
    # One window earlier, "high" is no longer active (cleared at t=4), "low" neither.
    assert active_rules(features.iloc[:5], rules) == ()
    assert rule_state(features["a"].iloc[:4], rules[0]).active_since == features.index[1]


def test_recheck_firing_matches_batch_and_returns_none_elsewhere() -> None:
    features = _features()
    rule = _rule(name="high", summary="a", threshold=4.0, clear=3.0)
    batch = {f.window_end: f for f in evaluate_rules(features, [rule])}
    for when in features.index:
        assert recheck_firing(features, rule, when) == batch.get(when)
    assert recheck_firing(features, rule, str(features.index[1].date())) == batch[features.index[1]]


# ---------------------------------------------------------------- errors


def test_unknown_summary_names_rule_and_lists_columns() -> None:
    with pytest.raises(ConfigError, match=r"rule 'nope'.*'h9_x'.*available columns: a, b"):
        evaluate_rules(_features(), [_rule(name="nope", summary="h9_x")])


def test_duplicate_rule_names_are_refused() -> None:
    with pytest.raises(ConfigError, match="'rules.1.name': alerts rule name 'twice' is used twice"):
        evaluate_rules(_features(), [_rule(name="twice", summary="a"), _rule(name="twice", summary="b")])


def test_min_history_above_lookback_is_refused_when_the_rule_is_read() -> None:
    # refused as the rule is built, naming the key: no rule that could never fire reaches evaluation
    with pytest.raises(ConfigError, match=r"'min_history': rule 'r': min_history \(300\) exceeds lookback \(250\)"):
        _rule(kind="quantile", threshold=0.9, min_history=300)


def test_bad_index_and_unknown_window_are_data_errors() -> None:
    with pytest.raises(DataError, match="DatetimeIndex"):
        evaluate_rule(pd.Series([1.0, 2.0]), _rule())
    with pytest.raises(DataError, match="unique and increasing"):
        evaluate_rule(_series([1.0, 2.0]).iloc[::-1], _rule())
    with pytest.raises(DataError, match="2023-01-02 is not one of the 6 windows"):
        recheck_firing(_features(), _rule(summary="a"), "2023-01-02")
    with pytest.raises(DataError, match="no windows"):
        rule_state(_series([]), _rule())


def test_empty_series_has_no_firings() -> None:
    assert evaluate_rule(_series([]), _rule()) == []


def test_config_rules_feed_the_evaluator(tmp_path: object) -> None:
    # Rules read from TOML through Config.from_toml evaluate like rules built in code.
    from pathlib import Path

    path = Path(str(tmp_path)) / "rules.toml"
    path.write_text(
        '[[alerts.rules]]\nname = "high"\nsummary = "mean_correlation"\nkind = "level"\nthreshold = 4.0\n'
        "clear = 3.0\nmin_history = 0\n",
        encoding="utf-8",
    )
    rules = Config.from_toml(path).alerts.rules
    features = _features().rename(columns={"a": "mean_correlation"})
    assert [f.window_end for f in evaluate_rules(features, rules)] == list(features.index[[1, 5]])


@pytest.fixture
def rng() -> np.random.Generator:
    return np.random.default_rng(20240603)
