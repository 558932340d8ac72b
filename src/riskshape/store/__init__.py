"""The tamper-evident archive: SQLite or PostgreSQL behind SQLAlchemy, schema by Alembic migrations.

>>> from riskshape.store import open_store          # doctest: +SKIP
>>> store = open_store("sqlite:///archive.sqlite")  # doctest: +SKIP
>>> verify_chain(store).ok                          # doctest: +SKIP
True
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from riskshape._lazy import lazy_exports

if TYPE_CHECKING:
    from riskshape.store.backup import BackupReport as BackupReport
    from riskshape.store.backup import backup_store as backup_store
    from riskshape.store.knowledge import KNOWN_AT_FORMAT as KNOWN_AT_FORMAT
    from riskshape.store.knowledge import to_known_at as to_known_at
    from riskshape.store.markers import ChangeMarker as ChangeMarker
    from riskshape.store.records import GENESIS_HASH as GENESIS_HASH
    from riskshape.store.records import REVIEW_ACTIONS as REVIEW_ACTIONS
    from riskshape.store.records import AlertAppend as AlertAppend
    from riskshape.store.records import AlertDetail as AlertDetail
    from riskshape.store.records import AlertPage as AlertPage
    from riskshape.store.records import AlertRecord as AlertRecord
    from riskshape.store.records import ApiKey as ApiKey
    from riskshape.store.records import BadRecord as BadRecord
    from riskshape.store.records import Diagram as Diagram
    from riskshape.store.records import EventRecord as EventRecord
    from riskshape.store.records import FeaturesPage as FeaturesPage
    from riskshape.store.records import Head as Head
    from riskshape.store.records import NewApiKey as NewApiKey
    from riskshape.store.records import Portfolio as Portfolio
    from riskshape.store.records import PriceCorrection as PriceCorrection
    from riskshape.store.records import PriceWrite as PriceWrite
    from riskshape.store.records import ReviewRecord as ReviewRecord
    from riskshape.store.records import Run as Run
    from riskshape.store.records import RunManifest as RunManifest
    from riskshape.store.records import VerifyReport as VerifyReport
    from riskshape.store.records import WriteCount as WriteCount
    from riskshape.store.store import Store as Store
    from riskshape.store.store import chain_head as chain_head
    from riskshape.store.store import change_marker as change_marker
    from riskshape.store.store import open_store as open_store
    from riskshape.store.store import seal_archive as seal_archive
    from riskshape.store.store import verify_chain as verify_chain

_EXPORTS = {
    "backup_store": "riskshape.store.backup",
    "BackupReport": "riskshape.store.backup",
    "open_store": "riskshape.store.store",
    "Store": "riskshape.store.store",
    "verify_chain": "riskshape.store.store",
    "seal_archive": "riskshape.store.store",
    "chain_head": "riskshape.store.store",
    "change_marker": "riskshape.store.store",
    "ChangeMarker": "riskshape.store.markers",
    "to_known_at": "riskshape.store.knowledge",
    "KNOWN_AT_FORMAT": "riskshape.store.knowledge",
    "GENESIS_HASH": "riskshape.store.records",
    "REVIEW_ACTIONS": "riskshape.store.records",
    "AlertAppend": "riskshape.store.records",
    "AlertDetail": "riskshape.store.records",
    "AlertPage": "riskshape.store.records",
    "AlertRecord": "riskshape.store.records",
    "ApiKey": "riskshape.store.records",
    "BadRecord": "riskshape.store.records",
    "Diagram": "riskshape.store.records",
    "EventRecord": "riskshape.store.records",
    "FeaturesPage": "riskshape.store.records",
    "Head": "riskshape.store.records",
    "NewApiKey": "riskshape.store.records",
    "Portfolio": "riskshape.store.records",
    "PriceCorrection": "riskshape.store.records",
    "PriceWrite": "riskshape.store.records",
    "ReviewRecord": "riskshape.store.records",
    "Run": "riskshape.store.records",
    "RunManifest": "riskshape.store.records",
    "VerifyReport": "riskshape.store.records",
    "WriteCount": "riskshape.store.records",
}

__all__ = list(_EXPORTS)

__getattr__, __dir__ = lazy_exports(__name__, _EXPORTS)
