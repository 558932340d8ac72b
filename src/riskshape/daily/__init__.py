"""Daily operation: what a desk runs every day over the archive.

:class:`Ingestor` takes a portfolio's new prices (or corrections), archives them, computes only
the windows they complete and raises the alerts they bring (:class:`IngestReport` says what it
did). The service's price endpoint and the command line both go through it.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from riskshape._lazy import lazy_exports

if TYPE_CHECKING:
    from riskshape.daily.ingest import Ingestor as Ingestor
    from riskshape.daily.ingest import IngestReport as IngestReport
    from riskshape.daily.ingest import portfolio_config as portfolio_config

_EXPORTS = {
    "Ingestor": "riskshape.daily.ingest",
    "IngestReport": "riskshape.daily.ingest",
    "portfolio_config": "riskshape.daily.ingest",
}

__all__ = list(_EXPORTS)

__getattr__, __dir__ = lazy_exports(__name__, _EXPORTS)
