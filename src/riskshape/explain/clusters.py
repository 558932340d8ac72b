"""H0 explanation: single-linkage clusters of two consecutive windows and what changed.

The H0 bars of a window of correlation distances are the merge heights of single-linkage
clustering (the minimum spanning tree), so cutting the single-linkage tree at a distance gives the
clusters H0 describes at that scale. Both windows are cut at the **same** scale, chosen on the
previous window, so that a merge means "assets that were apart at this distance are now together".

Scale rules (``scale=``):

- ``"persistent"`` (default): the cut whose number of clusters survives the longest range of
  scales in the previous window, i.e. the midpoint of the largest gap between consecutive merge
  heights. This is the common-practice "largest gap" cut of a dendrogram; in persistence terms, the
  clusters that persist longest.
- ``"median"``: the median merge height (median H0 death) of the previous window.
- a number: that distance.

Matching (our own rule, by membership overlap over the assets present in both windows): a
previous cluster's *successor* is the current cluster holding more than half of its members; a
current cluster's *predecessor* is the previous cluster holding more than half of its members.
Two or more previous clusters with the same successor *merged*; two or more current clusters
with the same predecessor *split* from it. Each cluster has at most one successor / predecessor.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Sequence

import numpy as np
from scipy.cluster.hierarchy import fcluster, linkage
from scipy.spatial.distance import squareform

from riskshape.errors import DataError
from riskshape.explain.geometry import WindowGeometry
from riskshape.explain.model import ClusterEvent, ClusterExplanation, Members, PairChange, rounded
from riskshape.types import CorrelationMatrix, DistanceMatrix, FloatArray

__all__ = [
    "ScaleRule",
    "merge_heights",
    "choose_scale",
    "clusters_at",
    "match_clusters",
    "top_pair_changes",
    "explain_clusters",
]

ScaleRule = str | float


def merge_heights(distance: DistanceMatrix) -> FloatArray:
    """Single-linkage merge heights (the finite H0 deaths, zero-length ones included), ascending."""
    if distance.shape[0] < 2:
        return np.empty(0)
    return np.sort(linkage(squareform(distance, checks=False), method="single")[:, 2])


def choose_scale(distance: DistanceMatrix, rule: ScaleRule = "persistent") -> tuple[float, str]:
    """The cut distance and a sentence stating how it was chosen.

    Parameters
    ----------
    distance : numpy.ndarray
        (n, n) distance matrix of the window the scale is chosen on.
    rule : {"persistent", "median"} or float
        See the module notes.

    Returns
    -------
    (float, str)

    Raises
    ------
    DataError
        For an unknown rule, or a rule that needs more assets than the window has.

    Examples
    --------
    >>> import numpy as np
    >>> d = np.array([[0, 1, 5, 5], [1, 0, 5, 5], [5, 5, 0, 1.2], [5, 5, 1.2, 0]], dtype=float)
    >>> choose_scale(d)[0]
    3.1
    """
    if not isinstance(rule, str):
        value = float(rule)
        if not np.isfinite(value) or value < 0:
            raise DataError(f"cluster scale must be a non-negative number, got {rule!r}")
        return rounded(value), f"fixed distance {rounded(value)}"
    heights = merge_heights(distance)
    if rule == "median":
        if len(heights) == 0:
            raise DataError("cluster scale 'median' needs at least 2 assets in the previous window")
        value = float(np.median(heights))
        return rounded(value), f"median H0 death of the previous window ({rounded(value)})"
    if rule == "persistent":
        if len(heights) < 2:
            raise DataError("cluster scale 'persistent' needs at least 3 assets in the previous window")
        gaps = np.diff(heights)
        k = int(np.argmax(gaps))
        value = (heights[k] + heights[k + 1]) / 2.0
        n_clusters = len(heights) - k
        return rounded(value), (
            f"midpoint of the largest gap between merge heights of the previous window "
            f"({rounded(heights[k])} to {rounded(heights[k + 1])}: {n_clusters} clusters persist longest)"
        )
    raise DataError(f"cluster scale {rule!r} is not known; use 'persistent', 'median' or a distance")


def clusters_at(distance: DistanceMatrix, names: Sequence[str], scale: float) -> tuple[Members, ...]:
    """Single-linkage clusters at ``scale`` (pairs at distance <= scale are linked).

    Returns
    -------
    tuple of tuple of str
        Every cluster, members in the order of ``names``; largest cluster first, then by first member.

    Parameters
    ----------
    distance : numpy.ndarray
        The window's distance matrix.
    names : sequence of str
        Asset names, in the matrix's order.
    scale : float
        The linking distance.
    """
    n = len(names)
    if n == 0:
        return ()
    if n == 1:
        return ((names[0],),)
    labels = fcluster(linkage(squareform(distance, checks=False), method="single"), t=scale, criterion="distance")
    groups: dict[int, list[str]] = defaultdict(list)
    for name, label in zip(names, labels):
        groups[int(label)].append(name)
    order = {name: i for i, name in enumerate(names)}
    return tuple(sorted((tuple(g) for g in groups.values()), key=lambda g: (-len(g), order[g[0]])))


def _grouped_by_target(targets: Sequence[int | None]) -> dict[int, list[int]]:
    """Positions grouped by the target each maps to (positions mapping to None are left out)."""
    groups: dict[int, list[int]] = defaultdict(list)
    for position, target in enumerate(targets):
        if target is not None:
            groups[target].append(position)
    return groups


def _majority(sources: Sequence[set[str]], targets: Sequence[set[str]]) -> list[int | None]:
    """For each source set, the target holding more than half of its members (or None)."""
    found: list[int | None] = []
    for source in sources:
        hit = None
        for j, target in enumerate(targets):
            if source and 2 * len(source & target) > len(source):
                hit = j
        found.append(hit)
    return found


def match_clusters(before: Sequence[Members], after: Sequence[Members]) -> tuple[ClusterEvent, ...]:
    """Merges and splits between two partitions, by majority overlap (see the module notes).

    Only assets present in both partitions count; clusters are reported whole.

    Parameters
    ----------
    before, after : sequence of tuple of str
        The clusters of two windows, as from :func:`clusters_at`.

    Returns
    -------
    tuple of ClusterEvent
        The merges and splits.
    """
    common = {a for c in before for a in c} & {a for c in after for a in c}
    prev_sets = [set(c) & common for c in before]
    next_sets = [set(c) & common for c in after]
    successor = _majority(prev_sets, next_sets)
    predecessor = _majority(next_sets, prev_sets)
    events: list[ClusterEvent] = []
    for j, sources in _grouped_by_target(successor).items():
        if len(sources) > 1:
            events.append(ClusterEvent("merge", tuple(before[i] for i in sources), (after[j],)))
    for i, parts in _grouped_by_target(predecessor).items():
        if len(parts) > 1:
            events.append(ClusterEvent("split", (before[i],), tuple(after[j] for j in parts)))
    events.sort(key=lambda e: (-sum(len(c) for c in e.before + e.after), e.kind))
    return tuple(events)


def top_pair_changes(
    names: Sequence[str], before: CorrelationMatrix, after: CorrelationMatrix, n_pairs: int
) -> tuple[PairChange, ...]:
    """The ``n_pairs`` pairs with the largest absolute change between two correlation matrices.

    Both matrices are over the same ``names``. Ties are broken by the pair's position.
    """
    n = len(names)
    if n < 2 or n_pairs <= 0:
        return ()
    rows, cols = np.triu_indices(n, k=1)
    change = np.abs(after[rows, cols] - before[rows, cols])
    order = np.lexsort((np.arange(len(change)), -change))[:n_pairs]
    return tuple(
        PairChange(names[rows[k]], names[cols[k]], rounded(before[rows[k], cols[k]]), rounded(after[rows[k], cols[k]]))
        for k in order
    )


def explain_clusters(
    current: WindowGeometry,
    previous: WindowGeometry | None,
    scale: ScaleRule = "persistent",
    n_pairs: int = 10,
) -> ClusterExplanation:
    """Clusters of the alert window and the window before it, merges, splits and pair changes.

    Parameters
    ----------
    current : WindowGeometry
        The alert window.
    previous : WindowGeometry or None
        The window before it (None for the first window: the scale is then chosen on ``current``
        and nothing is compared).
    scale : {"persistent", "median"} or float
        How the cut distance is chosen (see the module notes), on the previous window.
    n_pairs : int
        How many pairs of assets to list.

    Returns
    -------
    ClusterExplanation
    """
    reference = previous if previous is not None else current
    value, rule = choose_scale(reference.asset_distance, scale)
    after = clusters_at(current.asset_distance, current.assets, value)
    if previous is None:
        return ClusterExplanation(current.window_end, None, value, rule, (), after, (), (), (), ())
    before = clusters_at(previous.asset_distance, previous.assets, value)
    shared = [a for a in current.assets if a in set(previous.assets)]
    at_prev = {a: i for i, a in enumerate(previous.assets)}
    at_curr = {a: i for i, a in enumerate(current.assets)}
    ip = np.array([at_prev[a] for a in shared], dtype=int)
    ic = np.array([at_curr[a] for a in shared], dtype=int)
    pairs = top_pair_changes(shared, previous.correlation[np.ix_(ip, ip)], current.correlation[np.ix_(ic, ic)], n_pairs)
    return ClusterExplanation(
        window_end=current.window_end,
        previous_end=previous.window_end,
        scale=value,
        scale_rule=rule,
        clusters_before=before,
        clusters_after=after,
        events=match_clusters(before, after),
        pair_changes=pairs,
        entered=tuple(a for a in current.assets if a not in at_prev),
        left=tuple(a for a in previous.assets if a not in at_curr),
    )
