"""Explanation records: which parts an alert gets, canonical JSON, reading back, text."""

from __future__ import annotations

import json

import pytest

from riskshape import DataError, monitor
from riskshape.explain import Explanation, explain_alert, render_text, summary_dimension


@pytest.fixture(scope="module")
def run(small_prices, small_config):
    return monitor(small_prices, small_config.replace(step=5))


@pytest.mark.parametrize(
    ("summary", "clusters", "loops"),
    [("h0_total_persistence", True, False), ("h1_landscape_l1", False, True), ("mean_correlation", True, True)],
)
def test_the_summary_decides_the_parts(run, summary: str, clusters: bool, loops: bool) -> None:
    end = run.window_ends[3]
    explanation = explain_alert(run, end, summary)
    assert (explanation.clusters is not None) is clusters
    assert (explanation.loops is not None) is loops
    assert explanation.window_end == end.date()
    assert explanation.summary == summary


def test_without_h1_only_clusters(small_prices, small_config) -> None:
    run = monitor(small_prices, small_config.replace(step=5, maxdim=0))
    explanation = explain_alert(run, run.window_ends[1], "n_assets")
    assert explanation.clusters is not None and explanation.loops is None


def test_first_window_has_nothing_to_compare(run) -> None:
    clusters = explain_alert(run, run.window_ends[0], "h0_entropy").clusters
    assert clusters is not None
    assert clusters.previous_end is None and clusters.events == () and clusters.pair_changes == ()
    assert sum(len(c) for c in clusters.clusters_after) == len(run.assets(run.window_ends[0]))


def test_clusters_cover_each_window_s_assets_once(run) -> None:
    end = run.window_ends[4]
    clusters = explain_alert(run, end, "h0_entropy", compare="adjacent").clusters
    assert clusters.previous_end == run.window_ends[3].date()
    members = [a for c in clusters.clusters_after for a in c]
    assert sorted(members) == sorted(run.assets(end))
    before = [a for c in clusters.clusters_before for a in c]
    assert sorted(before) == sorted(run.assets(run.window_ends[3]))


def test_default_comparison_is_the_latest_window_sharing_no_day(run) -> None:
    # run: window 20, step 5 -> the latest disjoint window is 4 windows back
    end = run.window_ends[7]
    clusters = explain_alert(run, end, "h0_entropy").clusters
    assert clusters.previous_end == run.window_ends[3].date()
    shared = run.window_returns(end).index.intersection(run.window_returns(run.window_ends[3]).index)
    assert len(shared) == 0
    assert len(run.window_returns(end).index.intersection(run.window_returns(run.window_ends[4]).index)) > 0
    # too early for a disjoint window: the first window stands in
    assert explain_alert(run, run.window_ends[2], "h0_entropy").clusters.previous_end == run.window_ends[0].date()


def test_json_round_trips_and_is_canonical(run) -> None:
    explanation = explain_alert(run, run.window_ends[5], "mean_correlation")
    text = explanation.to_json()
    assert Explanation.from_json(text) == explanation
    assert Explanation.from_json(text).to_json() == text
    # canonical form (common practice, as RFC 8785 in spirit): sorted keys, no whitespace, no NaN
    data = json.loads(text)
    assert text == json.dumps(data, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False)
    # recomputing gives the same bytes
    assert explain_alert(run, run.window_ends[5], "mean_correlation").to_json() == text


def test_from_json_names_the_bad_field(run) -> None:
    data = json.loads(explain_alert(run, run.window_ends[5], "h0_entropy").to_json())
    data["clusters"]["scale"] = "wide"
    with pytest.raises(DataError, match=r"explanation\.clusters\.scale: expected float"):
        Explanation.from_json(json.dumps(data))
    del data["window_end"]
    with pytest.raises(DataError, match=r"explanation\.window_end: missing"):
        Explanation.from_json(json.dumps(data))
    with pytest.raises(DataError, match="not valid JSON"):
        Explanation.from_json("{")
    data = json.loads(explain_alert(run, run.window_ends[5], "h0_entropy").to_json())
    data["version"] = 99
    with pytest.raises(DataError, match="version 99"):
        Explanation.from_json(json.dumps(data))


def test_text_names_the_clusters_and_loops(run) -> None:
    explanation = explain_alert(run, run.window_ends[5], "mean_correlation")
    text = render_text(explanation)
    assert str(explanation.window_end) in text
    assert f"{explanation.clusters.scale:.4f}" in text
    for pair in explanation.clusters.pair_changes:
        assert f"{pair.first} ~ {pair.second}" in text
    for loop in explanation.loops.loops:
        assert " -> ".join(loop.members) in text


def test_bad_window_or_arguments_raise_data_error(run) -> None:
    with pytest.raises(DataError, match="no window ends"):
        explain_alert(run, "1999-01-04", "h0_entropy")
    with pytest.raises(DataError, match="cannot read"):
        explain_alert(run, "not a date", "h0_entropy")
    with pytest.raises(DataError, match="min_overlap"):
        explain_alert(run, run.window_ends[1], "h1_entropy", min_overlap=0.0)


def test_point_cloud_loops_are_made_of_days(small_prices, small_config) -> None:
    run = monitor(small_prices, small_config.replace(step=5, embedding="point_cloud"))
    end = run.window_ends[2]
    loops = explain_alert(run, end, "h1_entropy").loops
    days = {d.date().isoformat() for d in run.window_returns(end).index}
    assert loops is not None and loops.loops
    assert all(set(loop.members) <= days for loop in loops.loops)


def test_summary_dimension() -> None:
    assert [summary_dimension(s) for s in ("h0_entropy", "h1_bottleneck", "h2_n_bars", "n_assets")] == [0, 1, 2, None]


def test_archived_forms_round_trip(run) -> None:
    from riskshape.alerts.model import Firing
    from riskshape.explain import NO_EXPLANATION, explanation_json, explanation_object, explanation_text

    end = run.window_ends[5]
    firing = Firing("rule-a", "h1_entropy", "level", end, 1.0, 0.5, "warning")
    stored = explanation_json(run, firing)
    expected = explain_alert(run, end, "h1_entropy")
    assert stored == expected.to_json()
    assert explanation_text(stored) == render_text(expected)
    assert explanation_object(stored) == json.loads(stored)
    assert explanation_text(None) == NO_EXPLANATION and explanation_object(None) is None
    with pytest.raises(DataError):
        explanation_object('{"version": 1}')
