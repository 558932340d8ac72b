"""The computation wing: prices -> returns -> windows -> distances -> diagrams -> summaries.

One module per step, in the order the data flow through them:

- :mod:`~riskshape.compute.returns`: log or simple returns;
- :mod:`~riskshape.compute.windows`: causal window ends, their index arithmetic, and the coverage policy;
- :mod:`~riskshape.compute.moments`: running sums that give a sliding window's correlation;
- :mod:`~riskshape.compute.distance`: correlation estimators and d = sqrt(2 (1 - rho));
- :mod:`~riskshape.compute.estimators`: the sample estimate and its cleaned forms (shrinkage, clipping, ...);
- :mod:`~riskshape.compute.persistence`: Vietoris-Rips diagrams (ripser or giotto-ph; single linkage for H0);
- :mod:`~riskshape.compute.matching`: exact Wasserstein and bottleneck matchings between diagrams;
- :mod:`~riskshape.compute.summaries`: per-diagram summaries and the distances to the previous window;
- :mod:`~riskshape.compute.batch`: one window end to end, and a batch of consecutive windows;
- :mod:`~riskshape.compute.executors`: where batches run (serial, a process pool, Dask);
- :mod:`~riskshape.compute.window_view`: one computed window opened up (returns, distances, diagrams);
- :mod:`~riskshape.compute.monitor`: the one orchestrator, ``monitor(prices, config)``;
- :mod:`~riskshape.compute.derived`: optional columns from the features: summaries net of the market, changes;
- :mod:`~riskshape.compute.trailing_fit`: causal trailing least-squares fits, their residuals and z-scores;
- :mod:`~riskshape.compute.stages`: where a run's time goes, by stage (``monitor(..., profile=True)``).

The orchestrator itself is ``riskshape.monitor`` (``riskshape.compute.monitor`` is its module).
The names in ``__all__`` are public; each loads its module on first use.

>>> from riskshape.compute import window_end_positions
>>> window_end_positions(n_returns=6, window=3, step=2).tolist()
[2, 4]
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from riskshape._lazy import lazy_exports

if TYPE_CHECKING:
    from riskshape.compute.derived import DerivedColumns as DerivedColumns
    from riskshape.compute.derived import derive_columns as derive_columns
    from riskshape.compute.derived import derived_column_names as derived_column_names
    from riskshape.compute.derived import net_of_market as net_of_market
    from riskshape.compute.derived import summary_changes as summary_changes
    from riskshape.compute.derived import window_volatility as window_volatility
    from riskshape.compute.distance import correlation_matrix as correlation_matrix
    from riskshape.compute.distance import correlation_to_distance as correlation_to_distance
    from riskshape.compute.estimators import estimate_correlation as estimate_correlation
    from riskshape.compute.executors import DaskExecutor as DaskExecutor
    from riskshape.compute.executors import Executor as Executor
    from riskshape.compute.executors import ProcessExecutor as ProcessExecutor
    from riskshape.compute.executors import SerialExecutor as SerialExecutor
    from riskshape.compute.executors import available_cores as available_cores
    from riskshape.compute.executors import keep_blas_pinned as keep_blas_pinned
    from riskshape.compute.executors import make_executor as make_executor
    from riskshape.compute.monitor import MonitorResult as MonitorResult
    from riskshape.compute.monitor import feature_columns as feature_columns
    from riskshape.compute.persistence import compute_diagrams as compute_diagrams
    from riskshape.compute.persistence import describe_backend as describe_backend
    from riskshape.compute.persistence import resolve_backend as resolve_backend
    from riskshape.compute.returns import to_returns as to_returns
    from riskshape.compute.stages import StageTimes as StageTimes
    from riskshape.compute.summaries import DISTANCE_NAMES as DISTANCE_NAMES
    from riskshape.compute.summaries import SUMMARY_NAMES as SUMMARY_NAMES
    from riskshape.compute.summaries import DiagramSummary as DiagramSummary
    from riskshape.compute.summaries import bottleneck_distance as bottleneck_distance
    from riskshape.compute.summaries import summarize_diagram as summarize_diagram
    from riskshape.compute.summaries import wasserstein_distance as wasserstein_distance
    from riskshape.compute.trailing_fit import trailing_residuals as trailing_residuals
    from riskshape.compute.window_view import Window as Window
    from riskshape.compute.windows import Selection as Selection
    from riskshape.compute.windows import select_assets as select_assets
    from riskshape.compute.windows import window_end_positions as window_end_positions

_EXPORTS = {
    "DerivedColumns": "riskshape.compute.derived",
    "derive_columns": "riskshape.compute.derived",
    "derived_column_names": "riskshape.compute.derived",
    "net_of_market": "riskshape.compute.derived",
    "summary_changes": "riskshape.compute.derived",
    "trailing_residuals": "riskshape.compute.trailing_fit",
    "window_volatility": "riskshape.compute.derived",
    "Window": "riskshape.compute.window_view",
    "MonitorResult": "riskshape.compute.monitor",
    "feature_columns": "riskshape.compute.monitor",
    "to_returns": "riskshape.compute.returns",
    "window_end_positions": "riskshape.compute.windows",
    "select_assets": "riskshape.compute.windows",
    "Selection": "riskshape.compute.windows",
    "correlation_matrix": "riskshape.compute.distance",
    "correlation_to_distance": "riskshape.compute.distance",
    "estimate_correlation": "riskshape.compute.estimators",
    "compute_diagrams": "riskshape.compute.persistence",
    "resolve_backend": "riskshape.compute.persistence",
    "describe_backend": "riskshape.compute.persistence",
    "StageTimes": "riskshape.compute.stages",
    "DiagramSummary": "riskshape.compute.summaries",
    "summarize_diagram": "riskshape.compute.summaries",
    "wasserstein_distance": "riskshape.compute.summaries",
    "bottleneck_distance": "riskshape.compute.summaries",
    "SUMMARY_NAMES": "riskshape.compute.summaries",
    "DISTANCE_NAMES": "riskshape.compute.summaries",
    "Executor": "riskshape.compute.executors",
    "SerialExecutor": "riskshape.compute.executors",
    "ProcessExecutor": "riskshape.compute.executors",
    "DaskExecutor": "riskshape.compute.executors",
    "make_executor": "riskshape.compute.executors",
    "available_cores": "riskshape.compute.executors",
    "keep_blas_pinned": "riskshape.compute.executors",
}

__all__ = list(_EXPORTS)

__getattr__, __dir__ = lazy_exports(__name__, _EXPORTS)
