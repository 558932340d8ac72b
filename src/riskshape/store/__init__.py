"""The tamper-evident archive: SQLite or PostgreSQL behind SQLAlchemy, schema by Alembic migrations.

>>> from riskshape.store import open_store          # doctest: +SKIP
>>> store = open_store("sqlite:///archive.sqlite")  # doctest: +SKIP
>>> verify_chain(store).ok                          # doctest: +SKIP
True
"""

from riskshape.store.markers import ChangeMarker
from riskshape.store.records import (
    GENESIS_HASH,
    REVIEW_ACTIONS,
    AlertAppend,
    AlertDetail,
    AlertPage,
    AlertRecord,
    ApiKey,
    BadRecord,
    Diagram,
    FeaturesPage,
    Head,
    NewApiKey,
    Portfolio,
    PriceCorrection,
    PriceWrite,
    ReviewRecord,
    Run,
    RunManifest,
    VerifyReport,
    WriteCount,
)
from riskshape.store.store import Store, chain_head, change_marker, open_store, verify_chain

__all__ = [
    "open_store",
    "Store",
    "verify_chain",
    "chain_head",
    "change_marker",
    "ChangeMarker",
    "GENESIS_HASH",
    "REVIEW_ACTIONS",
    "AlertAppend",
    "AlertDetail",
    "AlertPage",
    "AlertRecord",
    "ApiKey",
    "BadRecord",
    "Diagram",
    "FeaturesPage",
    "Head",
    "NewApiKey",
    "Portfolio",
    "PriceCorrection",
    "PriceWrite",
    "ReviewRecord",
    "Run",
    "RunManifest",
    "VerifyReport",
    "WriteCount",
]
