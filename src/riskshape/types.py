"""The typed spine: names for the arrays and frames that travel between the steps, and the options.

Shapes and dtypes are written in the names and their notes; numpy's typing cannot check shapes,
so these aliases document them and let mypy check the dtype and the container.

Arrays
------
``ReturnsBlock``
    (days, assets) float64 returns of one window, NaN where missing.
``CorrelationMatrix``
    (assets, assets) float64, symmetric, unit diagonal.
``DistanceMatrix``
    (points, points) float64, symmetric, zero diagonal: the input of the Vietoris-Rips filtration.
``Diagram``
    (bars, 2) float64 finite bars (birth, death) of one homology dimension.
``Diagrams``
    One ``Diagram`` per dimension, H0 first.
``Positions``
    int64 positions (of columns or rows).
``IntArray``
    int64 values that are not positions (counts, labels, sector numbers).
``BoolArray``
    A mask.
``Float32Array``
    float32 values (ripser's arithmetic, kept as it computed them).
``CompactBars``
    Bars of several diagrams stacked in one array, float32 where that is lossless, float64 otherwise.

Frames
------
``PriceFrame``
    Wide prices: a ``DatetimeIndex`` of trading days, one float64 column per asset.
``ReturnsFrame``
    Wide returns, laid out as ``PriceFrame``.

Options
-------
``RipsBackend``, ``Severity``, ``RuleKind``, ``Direction``, ``ReturnsKind``, ``CorrelationEstimator``,
``MatrixEstimator``, ``Embedding``, ``ExecutorKind``: the values a configuration key of that meaning accepts.
``AlertStatus``: where an alert stands in its review (derived from its chained reviews).
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Literal, TypeAlias

if TYPE_CHECKING:  # the aliases are for annotations: importing this module loads neither numpy nor pandas
    import numpy as np
    import numpy.typing as npt
    import pandas as pd

__all__ = [
    "FloatArray",
    "ReturnsBlock",
    "CorrelationMatrix",
    "DistanceMatrix",
    "Diagram",
    "Diagrams",
    "Positions",
    "IntArray",
    "BoolArray",
    "Float32Array",
    "CompactBars",
    "PriceFrame",
    "ReturnsFrame",
    "RipsBackend",
    "ResolvedRipsBackend",
    "Severity",
    "RuleKind",
    "Direction",
    "ReturnsKind",
    "CorrelationEstimator",
    "MatrixEstimator",
    "Embedding",
    "ExecutorKind",
    "AlertStatus",
]

FloatArray: TypeAlias = "npt.NDArray[np.float64]"
ReturnsBlock: TypeAlias = "npt.NDArray[np.float64]"
CorrelationMatrix: TypeAlias = "npt.NDArray[np.float64]"
DistanceMatrix: TypeAlias = "npt.NDArray[np.float64]"
Diagram: TypeAlias = "npt.NDArray[np.float64]"
Diagrams: TypeAlias = tuple[Diagram, ...]
Positions: TypeAlias = "npt.NDArray[np.int64]"
IntArray: TypeAlias = "npt.NDArray[np.int64]"
BoolArray: TypeAlias = "npt.NDArray[np.bool_]"
Float32Array: TypeAlias = "npt.NDArray[np.float32]"
CompactBars: TypeAlias = "npt.NDArray[np.float32] | npt.NDArray[np.float64]"

PriceFrame: TypeAlias = "pd.DataFrame"
ReturnsFrame: TypeAlias = "pd.DataFrame"

RipsBackend: TypeAlias = Literal["auto", "ripser", "giotto"]
ResolvedRipsBackend: TypeAlias = Literal["ripser", "giotto"]
Severity: TypeAlias = Literal["info", "warning", "critical"]
RuleKind: TypeAlias = Literal["level", "quantile", "zscore"]
Direction: TypeAlias = Literal["above", "below"]
ReturnsKind: TypeAlias = Literal["log", "simple"]
CorrelationEstimator: TypeAlias = Literal["pearson", "spearman"]
MatrixEstimator: TypeAlias = Literal["sample", "ledoit_wolf", "clipped", "market_removed", "ewma"]
Embedding: TypeAlias = Literal["correlation", "point_cloud"]
ExecutorKind: TypeAlias = Literal["serial", "process", "dask"]
AlertStatus: TypeAlias = Literal["open", "acknowledged", "escalated", "dismissed", "closed"]
