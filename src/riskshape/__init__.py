"""riskshape: a portfolio-regime monitor built on rolling persistent homology.

A decision aid for risk monitoring and research, not investment advice.

The public API is the names in ``__all__`` here and in the ``__all__`` of the packages
:mod:`riskshape.compute`, :mod:`riskshape.alerts`, :mod:`riskshape.explain`,
:mod:`riskshape.store`, :mod:`riskshape.outputs`, :mod:`riskshape.demo` and
:mod:`riskshape.research`; every other module is internal and may change. Names load on first
use, so ``import riskshape`` stays cheap.

>>> import riskshape
>>> riskshape.Config().window > 0
True
"""

from __future__ import annotations

import sys as _sys
from typing import TYPE_CHECKING

from riskshape import _moved
from riskshape._lazy import lazy_exports
from riskshape._version import __version__

if TYPE_CHECKING:
    from riskshape.archive import archive_run as archive_run
    from riskshape.archive import reproduce_alert as reproduce_alert
    from riskshape.caution import CAUTION as CAUTION
    from riskshape.compute.monitor import MonitorResult as MonitorResult
    from riskshape.compute.monitor import monitor as monitor
    from riskshape.config import ComputeConfig as ComputeConfig
    from riskshape.config import Config as Config
    from riskshape.config import store_url_from_env as store_url_from_env
    from riskshape.cost import CostEstimate as CostEstimate
    from riskshape.cost import check_cost as check_cost
    from riskshape.cost import estimate_cost as estimate_cost
    from riskshape.errors import AccessError as AccessError
    from riskshape.errors import AuditError as AuditError
    from riskshape.errors import ConfigError as ConfigError
    from riskshape.errors import ConflictError as ConflictError
    from riskshape.errors import DataError as DataError
    from riskshape.errors import DataQualityWarning as DataQualityWarning
    from riskshape.errors import NotFoundError as NotFoundError
    from riskshape.errors import RiskshapeError as RiskshapeError
    from riskshape.errors import StoreError as StoreError
    from riskshape.hindsight import AlertNow as AlertNow
    from riskshape.hindsight import reproduce_alert_now as reproduce_alert_now
    from riskshape.prices import csv_table as csv_table
    from riskshape.prices import read_prices as read_prices
    from riskshape.prices import validate_prices as validate_prices
    from riskshape.quality import QualityFinding as QualityFinding
    from riskshape.quality import check_quality as check_quality

_EXPORTS = {
    "CAUTION": "riskshape.caution",
    "Config": "riskshape.config",
    "ComputeConfig": "riskshape.config",
    "store_url_from_env": "riskshape.config",
    "MonitorResult": "riskshape.compute.monitor",
    "monitor": "riskshape.compute.monitor",
    "read_prices": "riskshape.prices",
    "validate_prices": "riskshape.prices",
    "csv_table": "riskshape.prices",
    "check_quality": "riskshape.quality",
    "QualityFinding": "riskshape.quality",
    "check_cost": "riskshape.cost",
    "estimate_cost": "riskshape.cost",
    "CostEstimate": "riskshape.cost",
    "archive_run": "riskshape.archive",
    "reproduce_alert": "riskshape.archive",
    "reproduce_alert_now": "riskshape.hindsight",
    "AlertNow": "riskshape.hindsight",
    "RiskshapeError": "riskshape.errors",
    "DataError": "riskshape.errors",
    "ConfigError": "riskshape.errors",
    "StoreError": "riskshape.errors",
    "NotFoundError": "riskshape.errors",
    "ConflictError": "riskshape.errors",
    "AuditError": "riskshape.errors",
    "AccessError": "riskshape.errors",
    "DataQualityWarning": "riskshape.errors",
}

__all__ = [
    "__version__",
    "CAUTION",
    "Config",
    "ComputeConfig",
    "store_url_from_env",
    "MonitorResult",
    "monitor",
    "read_prices",
    "validate_prices",
    "csv_table",
    "check_quality",
    "QualityFinding",
    "check_cost",
    "estimate_cost",
    "CostEstimate",
    "archive_run",
    "reproduce_alert",
    "reproduce_alert_now",
    "AlertNow",
    "RiskshapeError",
    "DataError",
    "ConfigError",
    "StoreError",
    "NotFoundError",
    "ConflictError",
    "AuditError",
    "AccessError",
    "DataQualityWarning",
]

__getattr__, __dir__ = lazy_exports(__name__, _EXPORTS)

_moved.install(_sys.modules[__name__])
