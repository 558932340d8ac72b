"""Explanations of alerts: which clusters merged or split (H0), which loops formed (H1).

``explain_alert(result, window_end, summary)`` gives an :class:`Explanation`, archived with the
alert as :meth:`Explanation.to_json` and shown with :meth:`Explanation.to_text`.
"""

from riskshape.explain.archived import NO_EXPLANATION, explanation_json, explanation_object, explanation_text
from riskshape.explain.attach import explain_alert, summary_dimension
from riskshape.explain.clusters import choose_scale, clusters_at, explain_clusters, match_clusters
from riskshape.explain.geometry import WindowGeometry, window_geometry
from riskshape.explain.loops import explain_loops, representative_cycles
from riskshape.explain.model import (
    ClusterEvent,
    ClusterExplanation,
    Explanation,
    Loop,
    LoopExplanation,
    PairChange,
)

__all__ = [
    "explain_alert",
    "explanation_json",
    "explanation_text",
    "explanation_object",
    "NO_EXPLANATION",
    "summary_dimension",
    "Explanation",
    "ClusterExplanation",
    "ClusterEvent",
    "PairChange",
    "LoopExplanation",
    "Loop",
    "WindowGeometry",
    "window_geometry",
    "choose_scale",
    "clusters_at",
    "match_clusters",
    "explain_clusters",
    "explain_loops",
    "representative_cycles",
]
