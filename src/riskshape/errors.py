"""The exceptions and warnings riskshape raises.

Every public function raises only these. The tree::

    RiskshapeError
    +-- DataError      bad market data (file, row or date, column named in the message)
    +-- ConfigError    bad configuration (the key named in the message)
    +-- StoreError     the archive cannot be opened, read or written
    |   +-- NotFoundError   a record that does not exist
    |   +-- ConflictError   a write that contradicts what is archived
    +-- AuditError     the archive's hash chain does not verify
    +-- AccessError    the caller's role does not allow the action

    DataQualityWarning  repairable data (for example unsorted dates, sorted for you)
    ResearchWarning     a research measure that is NaN or untrustworthy, and why
"""

from __future__ import annotations

__all__ = [
    "RiskshapeError",
    "DataError",
    "ConfigError",
    "StoreError",
    "NotFoundError",
    "ConflictError",
    "AuditError",
    "AccessError",
    "DataQualityWarning",
    "ResearchWarning",
]


class RiskshapeError(Exception):
    """Base class of every error riskshape raises on purpose.

    Examples
    --------
    One ``except`` clause catches every refusal; the subclass says what kind it is:

    >>> from riskshape import Config
    >>> try:
    ...     Config(window=1)
    ... except RiskshapeError as err:
    ...     print(type(err).__name__, isinstance(err, ValueError))
    ConfigError True
    """


class DataError(RiskshapeError, ValueError):
    """Market data that cannot be used as it is; the message says where and how to fix it."""


class ConfigError(RiskshapeError, ValueError):
    """A configuration value that is not allowed; the message names the key."""


class StoreError(RiskshapeError):
    """The archive cannot be opened, read or written."""


class NotFoundError(StoreError, LookupError):
    """A record (portfolio, run, alert, window) that the archive does not hold."""


class ConflictError(StoreError):
    """A write that contradicts what the archive already holds."""


class AuditError(RiskshapeError):
    """The archive's hash chain does not verify; the message names the first bad record."""


class AccessError(RiskshapeError, PermissionError):
    """An action that the caller's role does not allow (for example a reader reviewing an alert)."""


class DataQualityWarning(UserWarning):
    """Data that riskshape repaired (and says how) rather than rejected."""


class ResearchWarning(UserWarning):
    """A research measure that came out NaN or cannot be trusted, and why (too few events, one class, ...)."""
