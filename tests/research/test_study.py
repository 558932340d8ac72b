"""Event study: definitions by hand, AUC against the Mann-Whitney U statistic, and the demo.

The demo scenario (riskshape.demo.scenario) knows its regimes; its stress episode is the ground truth.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from scipy.stats import mannwhitneyu

from riskshape import Config, monitor
from riskshape.alerts.rules import evaluate_rule
from riskshape.compute.returns import to_returns
from riskshape.config import RuleConfig
from riskshape.demo.scenario import generate_scenario
from riskshape.errors import DataError, ResearchWarning
from riskshape.research.events import (
    DrawdownEvents,
    equal_weight_wealth,
    events_from_periods,
    portfolio_drawdown_events,
)
from riskshape.research.study import event_labels, event_study, study_table
from riskshape.research.surrogates import surrogate

CAL = pd.bdate_range("2030-01-01", periods=60)


def _events(starts: list[int], troughs: list[int]) -> DrawdownEvents:
    table = pd.DataFrame(
        {
            "start": CAL[starts],
            "breach": CAL[starts],
            "trough": CAL[troughs],
            "recovery": pd.NaT,
            "depth": 0.2,
        }
    )
    return DrawdownEvents(table=table, wealth=pd.Series(1.0, index=CAL), min_depth=0.2)


def test_labels_by_hand() -> None:
    events = _events([20], [25])
    labels = event_labels(CAL, events, horizon=3, post_event_days=2)
    assert labels.iloc[17:20].tolist() == [1.0, 1.0, 1.0]  # the event starts within (t, t + 3]
    assert labels.iloc[16] == 0.0
    assert labels.iloc[20:28].isna().all()  # start .. trough + 2: inside the event
    assert labels.iloc[28] == 0.0
    assert labels.iloc[57:].isna().all()  # t + 3 passes the last day: not known yet
    assert labels.iloc[56] == 0.0


def test_alert_scores_by_hand() -> None:
    events = _events([20, 45], [22, 47])
    signal = pd.Series(np.arange(60, dtype=float), index=CAL, name="x")
    alerts = CAL[[5, 18, 21, 30, 58]]
    study = event_study(signal, events, horizon=5, lookback=16, alerts=alerts)
    # day 18: event 1 starts within 5 days -> true; day 21: inside event 1; days 5 and 30: false;
    # day 58: 58 + 5 passes the data -> unknown
    assert study.alerts["outcome"].tolist() == ["false", "true", "in_event", "false", "unknown"]
    assert study.precision == pytest.approx(1 / 3)
    # one definition of a hit, an alert in [s - 5, s): event 1 (day 20) has day 18, event 2 (day 45)
    # has none in [40, 45); hit rate and recall are the same number
    assert study.recall == pytest.approx(1 / 2)
    assert study.hit_rate == study.recall
    assert study.f1 == pytest.approx(2 * (1 / 3) * (1 / 2) / (1 / 3 + 1 / 2))
    per = study.per_event.set_index("start")
    assert per.loc[CAL[20], "lead_days"] == 2  # the true alert of day 18: 20 - 18
    assert per.loc[CAL[20], "first_alert"] == CAL[18]
    assert np.isnan(per.loc[CAL[45], "lead_days"]) and not per.loc[CAL[45], "hit"]
    assert study.mean_lead_days == 2
    # every true alert warns of a hit event, and every hit event has a true alert
    assert study._count("true") >= 1 and per["hit"].sum() == 1
    assert study.false_alarms_per_year == pytest.approx(2 / (60 / 252))
    assert per["kendall_tau"].tolist() == pytest.approx([1.0, 1.0])  # a rising signal: tau = 1


def test_auc_is_the_mann_whitney_u_statistic_over_n1_n0(rng: np.random.Generator) -> None:
    events = _events([20, 45], [22, 47])
    signal = pd.Series(rng.standard_normal(60), index=CAL, name="x")
    with pytest.warns(ResearchWarning, match="precision is NaN: no alert could be scored"):
        study = event_study(signal, events, horizon=5, alerts=pd.DatetimeIndex([]))
    labels = study.labels.dropna()
    pos, neg = signal[labels.index[labels == 1]], signal[labels.index[labels == 0]]
    u = mannwhitneyu(pos, neg).statistic  # scipy's U of the first sample (Mann and Whitney 1947)
    assert study.auc == pytest.approx(u / (len(pos) * len(neg)))
    with pytest.warns(ResearchWarning):
        below = event_study(signal, events, horizon=5, alerts=pd.DatetimeIndex([]), direction="below")
    assert below.auc == pytest.approx(1 - study.auc)


def test_signal_off_the_calendar_is_refused() -> None:
    signal = pd.Series([1.0], index=pd.DatetimeIndex(["2031-06-01"]), name="x")
    with pytest.raises(DataError, match="not a trading day"):
        event_study(signal, _events([20], [22]), alerts=pd.DatetimeIndex([]))


# --- the demo scenario -------------------------------------------------------------------------

# Orientation fixed before looking: correlation-distance H0 bars shorten when correlations rise
# (Onnela et al. 2003, Phys. Rev. E 68:056110, the tree shrinks in a crash; from memory), so the
# H0 length summaries warn when low; every other summary is taken to warn when high.
TOPOLOGICAL = {
    "h0_total_persistence": "below",
    "h0_landscape_l1": "below",
    "h0_landscape_l2": "below",
    "h0_entropy": "above",
    "h1_n_bars": "above",
    "h1_total_persistence": "above",
    "h1_entropy": "above",
    "h1_landscape_l1": "above",
    "h1_landscape_l2": "above",
}
DEMO = Config(window=60, step=5, compute={"executor": "serial"})
HORIZON, LOOKBACK = 20, 120


@pytest.fixture(scope="module")
def demo():
    return generate_scenario(seed=7)


def _study(prices: pd.DataFrame, stress: pd.DataFrame, config: Config = DEMO) -> pd.DataFrame:
    result = monitor(prices, config)
    known = events_from_periods(stress, equal_weight_wealth(result.prices))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", ResearchWarning)
        table = study_table(
            result.features,
            known,
            columns=list(TOPOLOGICAL),
            directions=TOPOLOGICAL,
            horizon=HORIZON,
            lookback=LOOKBACK,
            post_event_days=DEMO.window,
        )
    # every NaN measure says why, in the table and in the one warning
    for signal, row in table.iterrows():
        for measure in ("auc", "hit_rate", "precision", "f1", "mean_lead_days"):
            if np.isnan(float(row[measure])):
                assert f"{measure}: " in row["nan_reasons"]
                assert f"{signal}: {measure} is NaN" in str(caught[0].message)
    assert len(caught) <= 1
    return table


def test_drawdown_events_find_the_demo_stress_episode(demo) -> None:
    events = portfolio_drawdown_events(demo.prices, min_depth=0.2, max_duration=126)
    first, last = demo.stress
    inside = events.table[(events.table["breach"] >= first) & (events.table["breach"] <= last)]
    assert len(inside) == 1  # the fall reached 20 % during the stress regime
    assert inside["start"].iloc[0] < first  # and it began before it (end of the build-up)
    assert len(events) == 1  # no other fall of 20 % within 126 days in the whole scenario


def test_best_topological_summary_leads_the_stress_and_shuffles_lose_it(demo) -> None:
    stress = demo.regimes[demo.regimes["name"] == "stress"]
    real = _study(demo.prices, stress)
    best = real["auc"].astype(float).idxmax()
    row = real.loc[best]
    assert row["auc"] >= 0.8
    assert row["hit_rate"] == 1.0 and row["mean_lead_days"] > 0  # first alert before the stress starts
    assert row["effect_size"] > 2.0

    # Independent time shuffles of each asset's returns keep every asset's returns and destroy
    # both the timing and the cross-asset dependence: the same study must find nothing there.
    # A Monte Carlo rank test (Hope 1968, from memory): the real effect must beat every surrogate.
    # (The surrogates run on a process pool: the executor never changes a result.)
    pooled = DEMO.replace(compute={"executor": "process", "workers": 2})
    returns = to_returns(demo.prices).fillna(0.0)
    surrogate_effects = []
    for child in rng_children(5):
        shuffled = surrogate(returns.to_numpy(), "shuffle", child)
        levels = 100.0 * np.exp(np.vstack([np.zeros(returns.shape[1]), np.cumsum(shuffled, axis=0)]))
        prices = pd.DataFrame(levels, index=demo.prices.index, columns=demo.prices.columns)
        assert len(portfolio_drawdown_events(prices, min_depth=0.2, max_duration=126)) == 0
        surrogate_effects.append(float(_study(prices, stress, pooled).loc[best, "effect_size"]))
    assert max(surrogate_effects) < row["effect_size"]
    assert np.mean(np.abs(surrogate_effects)) < 1.5


def rng_children(n: int) -> list[np.random.Generator]:
    return np.random.default_rng(20240611).spawn(n)


def test_rule_alerts_are_the_alert_engines_firings(demo) -> None:
    result = monitor(demo.prices, DEMO)
    rule = RuleConfig(
        name="low_h0",
        summary="h0_total_persistence",
        kind="quantile",
        threshold=0.05,
        clear=0.2,
        direction="below",
        lookback=100,
        min_history=30,
    )
    events = portfolio_drawdown_events(result.prices, 0.2, 126)
    with pytest.warns(ResearchWarning, match="mean_lead_days is NaN: no event was hit"):
        study = event_study(result.features[rule.summary], events, alerts=rule, direction="below")
    fired = [f.window_end for f in evaluate_rule(result.features[rule.summary], rule)]
    assert study.alerts["window_end"].tolist() == fired
