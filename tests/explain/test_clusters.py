"""Cluster explanation (H0): a market where two invented sectors merge at a known date."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.cluster.hierarchy import fcluster, linkage
from scipy.spatial.distance import squareform

from riskshape import Config, DataError, monitor
from riskshape.explain import explain_alert
from riskshape.explain.clusters import choose_scale, clusters_at, match_clusters, merge_heights, top_pair_changes
from tests.kit.assets import codes

SECTORS = ("XA", "XB", "XC", "XD")  # invented sectors, each named by its asset-code prefix
PER_SECTOR = 6
WINDOW = 80


def merging_market(rng: np.random.Generator, merge_at: int, n_days: int) -> tuple[pd.DataFrame, dict[str, str]]:
    """Four sectors of six assets, each driven by its own factor; from day ``merge_at`` on, XA and
    XB also share a strong common factor (so their assets become correlated across the two sectors).
    """
    names = [name for s in SECTORS for name in codes(PER_SECTOR, prefix=s)]
    sector_of = np.repeat(np.arange(len(SECTORS)), PER_SECTOR)
    factors = rng.standard_normal((n_days, len(SECTORS)))
    shared = rng.standard_normal(n_days)
    noise = rng.standard_normal((n_days, len(names)))
    returns = 0.9 * factors[:, sector_of] + 0.44 * noise
    joined = np.isin(sector_of, [0, 1])
    after = np.arange(n_days) >= merge_at
    # after the merge: 0.85 shared + 0.35 own sector + 0.39 noise (unit variance, as before)
    returns[np.ix_(after, joined)] = (
        0.85 * shared[after, None]
        + 0.35 * factors[np.ix_(after, sector_of[joined])]
        + 0.39 * noise[np.ix_(after, joined)]
    )
    dates = pd.bdate_range("2040-01-02", periods=n_days + 1, name="date")
    prices = 50.0 * np.exp(np.vstack([np.zeros(len(names)), np.cumsum(0.01 * returns, axis=0)]))
    frame = pd.DataFrame(prices, index=dates, columns=pd.Index(names, name="asset"))
    return frame, {a: SECTORS[s] for a, s in zip(names, sector_of)}


@pytest.fixture
def merged_run(rng: np.random.Generator):
    merge_at = 2 * WINDOW  # return row where the shared factor starts
    prices, sectors = merging_market(rng, merge_at, 3 * WINDOW)
    # step == window: consecutive windows do not overlap, so the window before is all "before"
    result = monitor(prices, Config(window=WINDOW, step=WINDOW, maxdim=1, compute={"executor": "serial"}))
    first_after = result.returns.index[merge_at + WINDOW - 1]  # first window wholly after the merge
    return result, sectors, first_after


def test_first_window_after_the_merge_names_exactly_the_two_sectors(merged_run) -> None:
    result, sectors, first_after = merged_run
    assert first_after in result.window_ends
    explanation = explain_alert(result, first_after, "h0_total_persistence")
    assert explanation.loops is None  # an H0 summary gets the cluster explanation only
    clusters = explanation.clusters
    assert clusters is not None
    first = tuple(a for a, s in sectors.items() if s == "XA")
    second = tuple(a for a, s in sectors.items() if s == "XB")
    # ground truth by construction: the only change is XA and XB sharing a factor
    assert len(clusters.events) == 1
    (event,) = clusters.merged
    assert event.kind == "merge"
    assert set(event.before) == {first, second}
    assert event.after == (first + second,)
    # before the merge the four sectors are the clusters at the stated scale
    assert set(clusters.clusters_before) == {tuple(a for a, s in sectors.items() if s == name) for name in SECTORS}
    # the pairs whose correlation changed most are XA-XB pairs, and it rose
    for pair in clusters.pair_changes:
        assert {sectors[pair.first], sectors[pair.second]} == {"XA", "XB"}
        assert pair.after - pair.before > 0.3


def test_window_before_the_merge_reports_no_event(merged_run) -> None:
    result, _, first_after = merged_run
    before = result.window_ends[result.window_ends.get_loc(first_after) - 2]  # both windows before the merge
    clusters = explain_alert(result, before, "h0_entropy").clusters
    assert clusters is not None and clusters.events == ()


def test_clusters_are_the_engine_h0(merged_run) -> None:
    """The tree that is cut is the one whose merge heights are the window's H0 deaths (engine output)."""
    from riskshape.explain.geometry import window_geometry

    result, _, first_after = merged_run
    geometry = window_geometry(result, first_after)
    assert geometry.assets == result.assets(first_after)
    heights = merge_heights(geometry.asset_distance).astype(np.float32).astype(float)
    np.testing.assert_array_equal(heights[heights > 0], result.diagram(first_after, 0)[:, 1])


def test_clusters_at_agrees_with_scipy_fcluster(rng: np.random.Generator) -> None:
    # reference: scipy.cluster.hierarchy.fcluster on the same single-linkage tree (a partition check)
    points = rng.standard_normal((30, 3))
    distance = np.sqrt(((points[:, None] - points[None]) ** 2).sum(-1))
    names = list(codes(30))
    scale = float(np.median(merge_heights(distance)))
    ours = clusters_at(distance, names, scale)
    labels = fcluster(linkage(squareform(distance, checks=False), "single"), scale, "distance")
    theirs = {tuple(n for n, lab in zip(names, labels) if lab == k) for k in set(labels)}
    assert set(ours) == theirs
    assert [len(c) for c in ours] == sorted((len(c) for c in ours), reverse=True)


def test_persistent_scale_is_the_middle_of_the_largest_gap() -> None:
    # two tight pairs far apart: merge heights 1, 1.2, 5 -> the largest gap is 1.2..5 (common practice)
    d = np.array([[0, 1, 5, 5], [1, 0, 5, 5], [5, 5, 0, 1.2], [5, 5, 1.2, 0]], dtype=float)
    value, rule = choose_scale(d, "persistent")
    assert value == pytest.approx(3.1)
    assert "largest gap" in rule
    assert choose_scale(d, "median")[0] == pytest.approx(1.2)
    assert choose_scale(d, 0.5)[0] == 0.5
    with pytest.raises(DataError, match="not known"):
        choose_scale(d, "widest")


def test_match_clusters_finds_merges_and_splits() -> None:
    before = (("a", "b", "c"), ("d", "e"), ("f", "g"), ("h",))
    after = (("a", "b", "c", "d", "e"), ("f",), ("g",), ("h",))
    events = match_clusters(before, after)
    kinds = sorted(e.kind for e in events)
    assert kinds == ["merge", "split"]
    merge = next(e for e in events if e.kind == "merge")
    assert set(merge.before) == {("a", "b", "c"), ("d", "e")}
    split = next(e for e in events if e.kind == "split")
    assert split.before == (("f", "g"),) and set(split.after) == {("f",), ("g",)}
    # the same partition on both sides: nothing happened
    assert match_clusters(before, before) == ()


def test_top_pair_changes_orders_by_absolute_change() -> None:
    before = np.array([[1.0, 0.1, 0.2], [0.1, 1.0, 0.3], [0.2, 0.3, 1.0]])
    after = np.array([[1.0, 0.5, 0.2], [0.5, 1.0, -0.4], [0.2, -0.4, 1.0]])
    pairs = top_pair_changes(["x", "y", "z"], before, after, 2)
    assert [(p.first, p.second) for p in pairs] == [("y", "z"), ("x", "y")]
    assert pairs[0].change == pytest.approx(-0.7)
