"""The console's inline SVG charts: ordering checked against scipy, severity drawn as shapes and words."""

from __future__ import annotations

import re

import numpy as np
import pytest
from scipy.cluster.hierarchy import dendrogram, linkage
from scipy.spatial.distance import squareform

from riskshape_service.console import charts
from tests.kit.assets import codes


@pytest.fixture
def blocks(rng: np.random.Generator) -> tuple[np.ndarray, list[str]]:
    """Correlations of 3 blocks of 4 fictional assets (high within a block, low across), shuffled."""
    labels = list(codes(12))
    factors = rng.normal(size=(250, 3))
    returns = np.repeat(factors, 4, axis=1) + 0.4 * rng.normal(size=(250, 12))
    order = rng.permutation(12)
    return np.corrcoef(returns[:, order], rowvar=False), [labels[i] for i in order]


def test_heatmap_rows_follow_scipys_single_linkage_leaves(blocks: tuple[np.ndarray, list[str]]) -> None:
    corr, labels = blocks
    svg = charts.heatmap(corr, labels, title="test")
    rows = re.findall(r'text-anchor="end" class="tick">([^<]+)</text>', svg)
    distance = np.sqrt(np.clip(2 * (1 - corr), 0, 4))
    # reference: scipy.cluster.hierarchy.dendrogram's leaf order of the same single linkage (Mantegna's distance)
    leaves = dendrogram(linkage(squareform(distance, checks=False), method="single"), no_plot=True)["leaves"]
    assert rows == [labels[i] for i in leaves]
    # and each block of four assets (made from one factor) sits together
    block_of = {name: i // 4 for i, name in enumerate(codes(12))}
    runs = [block_of[name] for name in rows]
    assert sum(1 for a, b in zip(runs, runs[1:]) if a != b) == 2


def test_each_severity_has_its_own_shape_and_the_title_names_them() -> None:
    shapes = {word: charts.severity_shape(word, 10, 10).split(" ", 1)[0] for word in ("info", "warning", "critical")}
    assert len(set(shapes.values())) == 3  # circle, polygon, path
    marks = [charts.Mark(1, "critical", "a"), charts.Mark(3, "warning", "b"), charts.Mark(4, "critical", "c")]
    svg = charts.line_chart([1.0, 2.0, np.nan, 2.5, 3.0], title="h1 test", threshold=[2.0] * 5, marks=marks)
    title = re.search(r"<title>([^<]+)</title>", svg)
    assert title is not None and "2 critical" in title.group(1) and "1 warning" in title.group(1)
    assert 'role="img"' in svg
    line = re.findall(r'<path d="([^"]+)" fill="none"', svg)[-1]
    assert line.count("M") == 2  # the missing value breaks the line instead of bridging it
