"""Explanations of alerts: which clusters merged or split (H0), which loops formed (H1).

``explain_alert(result, window_end, summary)`` gives an :class:`Explanation`, archived with the
alert as :meth:`Explanation.to_json` and shown with :func:`render_text`.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from riskshape._lazy import lazy_exports

if TYPE_CHECKING:
    from riskshape.explain.archived import NO_EXPLANATION as NO_EXPLANATION
    from riskshape.explain.archived import explanation_json as explanation_json
    from riskshape.explain.archived import explanation_object as explanation_object
    from riskshape.explain.archived import explanation_text as explanation_text
    from riskshape.explain.attach import explain_alert as explain_alert
    from riskshape.explain.attach import summary_dimension as summary_dimension
    from riskshape.explain.clusters import choose_scale as choose_scale
    from riskshape.explain.clusters import clusters_at as clusters_at
    from riskshape.explain.clusters import explain_clusters as explain_clusters
    from riskshape.explain.clusters import match_clusters as match_clusters
    from riskshape.explain.geometry import WindowGeometry as WindowGeometry
    from riskshape.explain.geometry import window_geometry as window_geometry
    from riskshape.explain.loops import explain_loops as explain_loops
    from riskshape.explain.loops import representative_cycles as representative_cycles
    from riskshape.explain.model import ClusterEvent as ClusterEvent
    from riskshape.explain.model import ClusterExplanation as ClusterExplanation
    from riskshape.explain.model import Explanation as Explanation
    from riskshape.explain.model import Loop as Loop
    from riskshape.explain.model import LoopExplanation as LoopExplanation
    from riskshape.explain.model import PairChange as PairChange
    from riskshape.explain.text import render_text as render_text

_EXPORTS = {
    "NO_EXPLANATION": "riskshape.explain.archived",
    "explanation_json": "riskshape.explain.archived",
    "explanation_object": "riskshape.explain.archived",
    "explanation_text": "riskshape.explain.archived",
    "explain_alert": "riskshape.explain.attach",
    "summary_dimension": "riskshape.explain.attach",
    "choose_scale": "riskshape.explain.clusters",
    "clusters_at": "riskshape.explain.clusters",
    "explain_clusters": "riskshape.explain.clusters",
    "match_clusters": "riskshape.explain.clusters",
    "WindowGeometry": "riskshape.explain.geometry",
    "window_geometry": "riskshape.explain.geometry",
    "explain_loops": "riskshape.explain.loops",
    "representative_cycles": "riskshape.explain.loops",
    "ClusterEvent": "riskshape.explain.model",
    "ClusterExplanation": "riskshape.explain.model",
    "Explanation": "riskshape.explain.model",
    "Loop": "riskshape.explain.model",
    "LoopExplanation": "riskshape.explain.model",
    "PairChange": "riskshape.explain.model",
    "render_text": "riskshape.explain.text",
}

__all__ = list(_EXPORTS)

__getattr__, __dir__ = lazy_exports(__name__, _EXPORTS)
