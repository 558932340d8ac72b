"""What a reader selects: a period of window ends and lists of names, in one vocabulary.

A period is ``start``/``end`` (inclusive window ends, as the features series names them) everywhere:
library, CLI, API, export and report. The older names (``since``/``until``, ``from``/``to``) are
accepted as deprecated aliases for one release. A list (portfolios, severities, rules, statuses,
summaries) may be given as repeats, as comma-separated text, or both.
"""

from __future__ import annotations

import warnings
from collections.abc import Iterable
from dataclasses import dataclass
from datetime import date, datetime

from riskshape.errors import DataError

__all__ = ["Period", "to_period", "pick_alias", "split_names"]

DEPRECATED_ALIASES = {"since": "start", "from": "start", "until": "end", "to": "end"}
"""Old names of the period's bounds and the name that replaces each (accepted for one release)."""


@dataclass(frozen=True)
class Period:
    """An inclusive range of window ends; ``None`` leaves that side open."""

    start: date | None = None
    end: date | None = None

    def contains(self, day: date) -> bool:
        """Whether ``day`` lies in the period (bounds included)."""
        return (self.start is None or day >= self.start) and (self.end is None or day <= self.end)

    def __str__(self) -> str:
        first = "..." if self.start is None else self.start.isoformat()
        last = "..." if self.end is None else self.end.isoformat()
        return f"{first} to {last}"


def _to_day(value: object, name: str) -> date | None:
    if value is None or value == "":
        return None
    if isinstance(value, date) and not isinstance(value, datetime):
        return value
    if isinstance(value, str) and len(value) == 10:  # YYYY-MM-DD: the common case, without pandas
        try:
            return date.fromisoformat(value)
        except ValueError:
            pass
    import pandas as pd  # other date-likes (timestamps, numpy dates, other spellings)

    try:
        stamp = pd.Timestamp(value)
    except (ValueError, TypeError):
        stamp = pd.NaT
    if stamp is pd.NaT or stamp != stamp.normalize():
        raise DataError(f"{name}: cannot read {value!r} as a day; write it as YYYY-MM-DD")
    day: date = stamp.date()
    return day


def to_period(start: object = None, end: object = None) -> Period:
    """A :class:`Period` from two date-likes, refusing a start after the end.

    Parameters
    ----------
    start, end : date, ISO text or None
        First and last window end (inclusive); None leaves that side open.

    Returns
    -------
    Period

    Raises
    ------
    DataError
        If a bound is not a day, or ``start`` is after ``end`` (the message shows both).

    Examples
    --------
    >>> str(to_period("2031-01-05", "2031-02-01"))
    '2031-01-05 to 2031-02-01'
    """
    first, last = _to_day(start, "start"), _to_day(end, "end")
    if first is not None and last is not None and first > last:
        raise DataError(f"start {first.isoformat()} is after end {last.isoformat()}; give start on or before end")
    return Period(first, last)


def pick_alias(name: str, value: object, *, warn: bool = True, **aliases: object) -> object:
    """The value of a parameter given under its name or one deprecated alias, warning on the alias.

    Parameters
    ----------
    name : str
        The parameter's name (``start`` or ``end``).
    value : object
        What was given under ``name`` (None if nothing).
    warn : bool
        Whether a value given under an old name raises a :class:`DeprecationWarning` (the service
        says so in a response header instead).
    **aliases : object
        What was given under each old name (None if nothing).

    Returns
    -------
    object
        The one value given, or None.

    Raises
    ------
    DataError
        If the parameter is given under two names.

    Examples
    --------
    >>> import warnings
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     pick_alias("start", None, since="2031-01-05")
    '2031-01-05'
    """
    given = [(old, v) for old, v in aliases.items() if v is not None and v != ""]
    if value is not None and value != "":
        given.insert(0, (name, value))
    if len(given) > 1:
        names = " and ".join(n for n, _ in given)
        raise DataError(f"{names} name the same bound; give only {name}")
    if not given:
        return None
    used, found = given[0]
    if used != name and warn:
        warnings.warn(
            f"{used!r} is deprecated and will be removed in the next release; write {name!r}",
            DeprecationWarning,
            stacklevel=2,
        )
    return found


def split_names(values: str | Iterable[str] | None) -> tuple[str, ...] | None:
    """Names given as repeats, as comma-separated text, or both; None if none were given.

    Blank entries are dropped and the first occurrence of each name kept, in order.

    Parameters
    ----------
    values : str, iterable of str, or None
        What a query parameter or command-line option received.

    Returns
    -------
    tuple of str or None
        The names, or None when none were given.

    Examples
    --------
    >>> split_names(["a,b", "c", "a"])
    ('a', 'b', 'c')
    >>> split_names(None) is None
    True
    """
    if values is None:
        return None
    items = [values] if isinstance(values, str) else list(values)
    names: list[str] = []
    for item in items:
        for part in str(item).split(","):
            part = part.strip()
            if part and part not in names:
                names.append(part)
    return tuple(names) or None
