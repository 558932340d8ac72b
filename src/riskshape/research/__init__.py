"""Research tools: baselines, stress events, event studies (of levels and changes), walk-forward comparisons,
surrogates, sweeps, evidence with error bars.

The names in ``__all__`` load their module on first use; the event study, walk-forward and
surrogate tools load scikit-learn and arch, which the monitor itself does not need.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from riskshape._lazy import lazy_exports

if TYPE_CHECKING:
    from riskshape.research.anchor import PUBLISHED_ANCHOR as PUBLISHED_ANCHOR
    from riskshape.research.anchor import PublishedAnchor as PublishedAnchor
    from riskshape.research.anchor import compare_with_anchor as compare_with_anchor
    from riskshape.research.baselines import absorption_ratio as absorption_ratio
    from riskshape.research.baselines import compute_baselines as compute_baselines
    from riskshape.research.baselines import features_with_baselines as features_with_baselines
    from riskshape.research.baselines import mean_pairwise_correlation as mean_pairwise_correlation
    from riskshape.research.baselines import portfolio_volatility as portfolio_volatility
    from riskshape.research.baselines import turbulence as turbulence
    from riskshape.research.baselines import window_baselines as window_baselines
    from riskshape.research.changes import change_study as change_study
    from riskshape.research.events import DrawdownEvents as DrawdownEvents
    from riskshape.research.events import drawdown_events as drawdown_events
    from riskshape.research.events import events_from_periods as events_from_periods
    from riskshape.research.events import portfolio_drawdown_events as portfolio_drawdown_events
    from riskshape.research.evidence import evidence_table as evidence_table
    from riskshape.research.gain import gain_table as gain_table
    from riskshape.research.multitest import mark_multiple_tests as mark_multiple_tests
    from riskshape.research.study import EventStudy as EventStudy
    from riskshape.research.study import crisis_direction as crisis_direction
    from riskshape.research.study import event_study as event_study
    from riskshape.research.study import study_table as study_table
    from riskshape.research.surrogates import SurrogateTest as SurrogateTest
    from riskshape.research.surrogates import rolling_surrogate_zscores as rolling_surrogate_zscores
    from riskshape.research.surrogates import surrogate as surrogate
    from riskshape.research.surrogates import surrogate_zscores as surrogate_zscores
    from riskshape.research.sweeps import SweepResult as SweepResult
    from riskshape.research.sweeps import sweep as sweep
    from riskshape.research.walkforward import WalkForward as WalkForward
    from riskshape.research.walkforward import nested_feature_sets as nested_feature_sets
    from riskshape.research.walkforward import walk_forward as walk_forward

_EXPORTS = {
    "compute_baselines": "riskshape.research.baselines",
    "features_with_baselines": "riskshape.research.baselines",
    "window_baselines": "riskshape.research.baselines",
    "portfolio_volatility": "riskshape.research.baselines",
    "mean_pairwise_correlation": "riskshape.research.baselines",
    "absorption_ratio": "riskshape.research.baselines",
    "turbulence": "riskshape.research.baselines",
    "DrawdownEvents": "riskshape.research.events",
    "drawdown_events": "riskshape.research.events",
    "portfolio_drawdown_events": "riskshape.research.events",
    "events_from_periods": "riskshape.research.events",
    "evidence_table": "riskshape.research.evidence",
    "gain_table": "riskshape.research.gain",
    "mark_multiple_tests": "riskshape.research.multitest",
    "compare_with_anchor": "riskshape.research.anchor",
    "PublishedAnchor": "riskshape.research.anchor",
    "PUBLISHED_ANCHOR": "riskshape.research.anchor",
    "EventStudy": "riskshape.research.study",
    "event_study": "riskshape.research.study",
    "study_table": "riskshape.research.study",
    "crisis_direction": "riskshape.research.study",
    "change_study": "riskshape.research.changes",
    "WalkForward": "riskshape.research.walkforward",
    "walk_forward": "riskshape.research.walkforward",
    "nested_feature_sets": "riskshape.research.walkforward",
    "SurrogateTest": "riskshape.research.surrogates",
    "surrogate": "riskshape.research.surrogates",
    "surrogate_zscores": "riskshape.research.surrogates",
    "rolling_surrogate_zscores": "riskshape.research.surrogates",
    "SweepResult": "riskshape.research.sweeps",
    "sweep": "riskshape.research.sweeps",
}

__all__ = list(_EXPORTS)

__getattr__, __dir__ = lazy_exports(__name__, _EXPORTS)
