"""Evidence with error bars: intervals against arch and known sampling distributions, the measures
against the event study, the multiple-comparison marks against statsmodels/scipy, no look-ahead.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from arch.bootstrap import MovingBlockBootstrap, StationaryBootstrap
from scipy.stats import false_discovery_control
from sklearn.metrics import roc_auc_score

from riskshape import Config, monitor
from riskshape.demo.scenario import generate_scenario
from riskshape.errors import ConfigError, ResearchWarning
from riskshape.research import (
    compare_with_anchor,
    events_from_periods,
    evidence_table,
    features_with_baselines,
    gain_table,
    mark_multiple_tests,
    study_table,
)
from riskshape.research.events import equal_weight_wealth
from riskshape.research.evidence import EVIDENCE_MEASURES, evidence_records, rank_auc
from riskshape.research.intervals import block_bootstrap
from riskshape.research.study import event_study


@pytest.fixture(scope="module")
def demo():
    """The demo market (seed 7) with its known stress regime as the one event."""
    scenario = generate_scenario(seed=7)
    result = monitor(scenario.prices, Config(window=60, step=5, compute={"executor": "serial"}))
    features = features_with_baselines(result)
    stress = scenario.regimes[scenario.regimes["name"] == "stress"]
    events = events_from_periods(stress, equal_weight_wealth(result.prices))
    return features, events


# --- the intervals -------------------------------------------------------------------------


@pytest.mark.parametrize(("kind", "resampler"), [("stationary", StationaryBootstrap), ("moving", MovingBlockBootstrap)])
def test_intervals_are_arch_percentile_intervals_on_the_same_resamples(kind, resampler, rng) -> None:
    # reference: arch.bootstrap's own conf_int(method="percentile"), fed the same seed, so the same resamples
    data = rng.normal(size=(300, 2)) + np.linspace(0, 1, 300)[:, None]
    stat = lambda x: np.array([x[:, 0].mean(), np.median(x[:, 1])])  # noqa: E731
    ours = block_bootstrap(data, stat, n_boot=300, block=12, kind=kind, seed=np.random.default_rng(9))
    theirs = resampler(12, data, seed=np.random.default_rng(9)).conf_int(stat, reps=300, method="percentile")
    low, high = ours.interval(0.95)
    np.testing.assert_allclose(low, theirs[0], rtol=1e-12)
    np.testing.assert_allclose(high, theirs[1], rtol=1e-12)


def test_interval_of_a_mean_matches_its_known_sampling_distribution(rng) -> None:
    # iid N(0, 1): the mean of n draws is N(0, 1/n) (textbook), so the 95 % interval is 2 * 1.96 / sqrt(n) wide
    n = 900
    iid = rng.normal(size=(n, 1))
    boot = block_bootstrap(iid, lambda x: x.mean(axis=0), n_boot=2000, block=5, seed=rng)
    low, high = boot.interval(0.95)
    assert (high - low)[0] == pytest.approx(2 * 1.96 / np.sqrt(n), rel=0.1)
    # AR(1) with phi = 0.6: the mean's variance is about sigma^2 / (n (1 - phi)^2) (the long-run variance,
    # Hamilton 1994 ch. 7, from memory); blocks much longer than the memory recover it, single rows do not
    phi, e = 0.6, rng.normal(size=20 * n)
    x = np.zeros(20 * n)
    for t in range(1, len(x)):
        x[t] = phi * x[t - 1] + e[t]
    ar = x[-n:, None]
    expected = 2 * 1.96 / (np.sqrt(n) * (1 - phi))
    blocks = block_bootstrap(ar, lambda v: v.mean(axis=0), n_boot=2000, block=60, seed=rng).interval(0.95)
    rows = block_bootstrap(ar, lambda v: v.mean(axis=0), n_boot=2000, block=1, seed=rng).interval(0.95)
    assert (blocks[1] - blocks[0])[0] == pytest.approx(expected, rel=0.3)
    assert (rows[1] - rows[0])[0] < 0.7 * expected  # resampling single rows understates the spread


def test_one_sided_p_value_counts_replicates_at_or_below_the_null(rng) -> None:
    data = rng.normal(loc=0.1, size=(200, 1))
    boot = block_bootstrap(data, lambda x: x.mean(axis=0), n_boot=500, block=10, seed=rng)
    by_hand = (1 + (boot.replicates[:, 0] <= 0.0).sum()) / 501  # the definition in riskshape.research.intervals
    assert boot.p_above(0.0)[0] == pytest.approx(by_hand)


def test_rank_auc_is_sklearns_roc_auc(rng) -> None:
    # reference: sklearn.metrics.roc_auc_score, ties included
    score = np.round(rng.normal(size=300), 1)
    label = (rng.random(300) < 0.2).astype(float)
    label[::17] = np.nan
    ok = ~np.isnan(label)
    assert rank_auc(score, label) == pytest.approx(roc_auc_score(label[ok], score[ok]), rel=1e-12)
    assert np.isnan(rank_auc(score, np.zeros(300)))


# --- the evidence table --------------------------------------------------------------------


def test_point_estimates_are_the_event_studys(demo) -> None:
    features, events = demo
    columns = ["mean_correlation", "h0_total_persistence", "h1_landscape_l1", "base_ew_volatility"]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ResearchWarning)
        studied = study_table(features, events, columns=columns, horizon=20, post_event_days=60)
    table = evidence_table(
        features, events, columns=columns, horizon=20, post_event_days=60, n_boot=30, n_surrogates=2, seed=1
    )
    for measure in EVIDENCE_MEASURES:
        np.testing.assert_allclose(table[measure].astype(float), studied[measure].astype(float), rtol=1e-12)
    assert (table["direction"] == studied["direction"]).all()
    finite = table["auc"].notna()
    assert (table.loc[finite, "auc_low"] <= table.loc[finite, "auc_high"]).all()
    assert table["block_rows"].eq(25).all()  # 126 trading days at step 5
    assert table["p_auc_null"].between(1 / 3, 1).all()  # two surrogates: p is 1/3, 2/3 or 1


def test_one_event_gives_no_interval_for_what_rests_on_events(demo) -> None:
    # the demo's stress regime is one event: a resample holds it or not, so a hit rate's interval would be [1, 1]
    features, events = demo
    table = evidence_table(features, events, columns=["h0_entropy"], horizon=60, n_boot=20, n_surrogates=0)
    row = table.loc["h0_entropy"]
    assert row["covered"] == 1 and np.isfinite(row["hit_rate"])
    assert np.isnan([row["hit_rate_low"], row["f1_high"], row["mean_lead_days_low"], row["precision_low"]]).all()
    assert np.isfinite([row["auc_low"], row["false_alarms_per_year_low"]]).all()


def test_alerts_scored_before_a_day_do_not_depend_on_what_follows(demo) -> None:
    # no look-ahead: the alert rules are causal, so changing the signal after day T leaves every alert
    # at or before T, hence every alert record up to T, as it was
    features, events = demo
    signal = features["h1_landscape_l1"]
    cut = signal.index[len(signal) // 2]
    changed = signal.where(signal.index <= cut, signal * 3.0 + 1.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ResearchWarning)
        before = evidence_records(event_study(signal, events, horizon=20), events)
        after = evidence_records(event_study(changed, events, horizon=20), events)
    upto = signal.index <= cut
    alerted = before[upto][:, 2] + before[upto][:, 3]
    np.testing.assert_array_equal(alerted, after[upto][:, 2] + after[upto][:, 3])
    assert not np.array_equal(before[~upto][:, 0], after[~upto][:, 0])  # the change did reach the signal


def test_unknown_column_is_named(demo) -> None:
    features, events = demo
    with pytest.raises(ConfigError, match="h9_nothing"):
        evidence_table(features, events, columns=["h9_nothing"], n_boot=5, n_surrogates=0)


# --- the walk-forward gain -----------------------------------------------------------------


def _three_drawdowns(rng: np.random.Generator) -> tuple[pd.DataFrame, pd.Series]:
    days = pd.bdate_range("2031-01-06", periods=400)
    steps = np.full(400, 0.001)
    stress = np.zeros(400)
    for peak in (120, 230, 330):
        steps[peak + 1 : peak + 6], steps[peak + 6 : peak + 11] = -0.05, 0.05
        stress[peak - 8 : peak + 1] = 1.0
    wealth = pd.Series(np.exp(np.cumsum(steps)), index=days)
    features = pd.DataFrame(
        {"noise": rng.normal(size=400), "stress": stress + 0.3 * rng.normal(size=400), "other": rng.normal(size=400)},
        index=days,
    )
    return features, wealth


def test_gain_is_the_walk_forwards_pooled_auc_difference_and_beats_its_null(rng) -> None:
    from riskshape.research import nested_feature_sets, walk_forward

    features, wealth = _three_drawdowns(rng)
    options = {"min_depth": 0.1, "horizon": 10, "n_folds": 2, "min_train": 180}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ResearchWarning)
        table = gain_table(features, wealth, ["noise"], ["stress", "other"], n_boot=200, n_surrogates=9, **options)
        pooled = walk_forward(features, wealth, nested_feature_sets(["noise"], ["stress", "other"]), **options).table()
    assert list(table.index) == ["base+stress", "base+other", "base+all"]
    for name in table.index:  # every model scores the same rows here, so the pooled AUCs are comparable
        assert table.loc[name, "gain"] == pytest.approx(
            pooled.loc[name, "pooled_auc"] - pooled.loc["base", "pooled_auc"]
        )
    informative = table.loc["base+stress"]
    assert informative["gain"] > informative["gain_null_q95"]
    assert informative["p_gain_null"] == pytest.approx(0.1)  # beats all 9 surrogates: (1 + 0) / 10
    assert informative["gain_low"] > 0


# --- many tests at once ----------------------------------------------------------------------


def test_marks_agree_with_scipy_and_the_definition_of_holms_procedure(rng) -> None:
    p = pd.Series(np.r_[rng.uniform(size=30) ** 3, np.nan], index=[f"c{i}" for i in range(31)])
    marks = mark_multiple_tests(p, alpha=0.05)
    tested = p.dropna()
    assert int(marks["n_tests"].iloc[0]) == 30
    assert not marks.loc["c30", "survives_holm"] and not marks.loc["c30", "survives_bh"]
    # Benjamini-Hochberg adjusted p-values: scipy.stats.false_discovery_control(method="bh")
    np.testing.assert_allclose(marks.loc[tested.index, "p_bh"], false_discovery_control(tested, method="bh"))
    assert (marks.loc[tested.index, "survives_bh"] == (marks.loc[tested.index, "p_bh"] <= 0.05)).all()
    # Holm (1979, Scand. J. Statist. 6:65): reject the k-th smallest while p_(k) <= alpha / (m - k + 1)
    ordered = tested.sort_values()
    m, rejected = len(ordered), set()
    for k, (name, value) in enumerate(ordered.items(), start=1):
        if value > 0.05 / (m - k + 1):
            break
        rejected.add(name)
    assert set(marks.index[marks["survives_holm"]]) == rejected
    assert 0 < len(rejected) < marks["survives_bh"].sum() <= m  # the draw exercises both, BH the more lenient


def test_marks_refuse_what_is_not_a_p_value() -> None:
    with pytest.raises(ConfigError, match="1.5"):
        mark_multiple_tests(pd.Series({"a": 1.5}))


def test_anchor_verdicts_follow_the_intervals() -> None:
    table = pd.DataFrame(
        {
            "f1_low": [0.55, 0.2, np.nan],
            "f1_high": [0.7, 0.45, np.nan],
            "hit_rate_low": [0.5, 0.2, 0.1],
            "hit_rate_high": [0.9, 0.6, 0.4],
            "mean_lead_days_low": [40.0, 20.0, 1.0],
            "mean_lead_days_high": [50.0, 40.0, 5.0],
            "horizon": [60, 60, 20],
        },
        index=["a", "b", "c"],
    )
    verdicts = compare_with_anchor(table)  # anchor: F1 0.50, hit rate 2/4, lead 34 days
    assert verdicts.loc["a"].tolist() == ["better", "cannot tell", "better"]  # 0.5 sits on the interval's end
    assert verdicts.loc["b"].tolist() == ["worse", "cannot tell", "cannot tell"]
    assert verdicts.loc["c"].tolist() == ["no interval", "worse", "out of reach"]
