"""Daily operation: what a desk runs every day over the archive.

:class:`Ingestor` takes a portfolio's new prices (or corrections), archives them, computes only
the windows they complete and raises the alerts they bring (:class:`IngestReport` says what it
did). The service's price endpoint and the command line both go through it.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from riskshape._lazy import lazy_exports

if TYPE_CHECKING:
    from riskshape.daily.checks import check_ingest_quality as check_ingest_quality
    from riskshape.daily.days import DayStatus as DayStatus
    from riskshape.daily.ingest import Ingestor as Ingestor
    from riskshape.daily.ingest import IngestReport as IngestReport
    from riskshape.daily.ingest import pending_days as pending_days
    from riskshape.daily.ingest import portfolio_config as portfolio_config
    from riskshape.daily.ingest import read_day_book as read_day_book
    from riskshape.daily.many import PortfolioOutcome as PortfolioOutcome
    from riskshape.daily.many import ingest_many as ingest_many
    from riskshape.daily.many import read_feed as read_feed
    from riskshape.daily.many import split_feed as split_feed

_EXPORTS = {
    "check_ingest_quality": "riskshape.daily.checks",
    "DayStatus": "riskshape.daily.days",
    "Ingestor": "riskshape.daily.ingest",
    "IngestReport": "riskshape.daily.ingest",
    "portfolio_config": "riskshape.daily.ingest",
    "pending_days": "riskshape.daily.ingest",
    "read_day_book": "riskshape.daily.ingest",
    "PortfolioOutcome": "riskshape.daily.many",
    "ingest_many": "riskshape.daily.many",
    "read_feed": "riskshape.daily.many",
    "split_feed": "riskshape.daily.many",
}

__all__ = list(_EXPORTS)

__getattr__, __dir__ = lazy_exports(__name__, _EXPORTS)
