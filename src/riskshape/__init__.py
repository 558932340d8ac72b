"""riskshape: a portfolio-regime monitor built on rolling persistent homology.

A decision aid for risk monitoring and research, not investment advice.
"""

from riskshape._version import __version__
from riskshape.caution import CAUTION
from riskshape.compute.monitor import MonitorResult, monitor
from riskshape.config import Config
from riskshape.errors import (
    AuditError,
    ConfigError,
    ConflictError,
    DataError,
    DataQualityWarning,
    NotFoundError,
    RiskshapeError,
    StoreError,
)
from riskshape.prices import read_prices

__all__ = [
    "__version__",
    "CAUTION",
    "Config",
    "MonitorResult",
    "monitor",
    "read_prices",
    "RiskshapeError",
    "DataError",
    "ConfigError",
    "StoreError",
    "NotFoundError",
    "ConflictError",
    "AuditError",
    "DataQualityWarning",
]
