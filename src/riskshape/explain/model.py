"""The typed explanation of an alert and its canonical JSON (:mod:`~riskshape.explain.text` renders it as text).

An :class:`Explanation` is what gets archived with an alert. :meth:`Explanation.to_json` gives
canonical JSON (sorted keys, no spaces, no NaN, floats rounded to :data:`DECIMALS` places when
the explanation is built, dates as ``YYYY-MM-DD``), so the same explanation always gives the same
bytes and ``Explanation.from_json(e.to_json()) == e``.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from datetime import date
from typing import Any, Literal

from riskshape.errors import DataError

__all__ = [
    "DECIMALS",
    "SCHEMA_VERSION",
    "ClusterEvent",
    "PairChange",
    "ClusterExplanation",
    "Loop",
    "LoopExplanation",
    "Explanation",
]

DECIMALS = 6
"""Decimal places kept for every number in an explanation (distances and correlations)."""

SCHEMA_VERSION = 1
"""Version of the JSON layout written by :meth:`Explanation.to_json`."""

Members = tuple[str, ...]


def rounded(value: float) -> float:
    """``value`` rounded to :data:`DECIMALS` places, as a plain float (``-0.0`` becomes ``0.0``)."""
    return round(float(value), DECIMALS) + 0.0


@dataclass(frozen=True)
class ClusterEvent:
    """Clusters of the previous window that merged, or one that split, at the stated scale.

    Attributes
    ----------
    kind : {"merge", "split"}
        ``merge``: several clusters before, one after. ``split``: one before, several after.
    before : tuple of tuple of str
        The clusters of the previous window involved (members in column order).
    after : tuple of tuple of str
        The clusters of the alert window involved.
    """

    kind: Literal["merge", "split"]
    before: tuple[Members, ...]
    after: tuple[Members, ...]


@dataclass(frozen=True)
class PairChange:
    """The correlation of a pair of assets in the previous window and in the alert window."""

    first: str
    second: str
    before: float
    after: float

    @property
    def change(self) -> float:
        """``after - before``."""
        return rounded(self.after - self.before)


@dataclass(frozen=True)
class ClusterExplanation:
    """Single-linkage clusters of two consecutive windows at one scale, and what changed.

    Attributes
    ----------
    window_end, previous_end : datetime.date
        The alert window and the earlier window it is compared with (``None`` if the alert window
        is the run's first).
    scale : float
        The distance at which the single-linkage tree is cut (same scale for both windows).
    scale_rule : str
        How ``scale`` was chosen (see :func:`riskshape.explain.clusters.choose_scale`).
    clusters_before, clusters_after : tuple of tuple of str
        Every cluster of each window (singletons included), largest first.
    events : tuple of ClusterEvent
        Merges and splits between the two windows, largest first.
    pair_changes : tuple of PairChange
        The pairs whose correlation changed most (by absolute change), largest first.
    entered, left : tuple of str
        Assets admitted only to the alert window, or only to the previous one.
    """

    window_end: date
    previous_end: date | None
    scale: float
    scale_rule: str
    clusters_before: tuple[Members, ...]
    clusters_after: tuple[Members, ...]
    events: tuple[ClusterEvent, ...]
    pair_changes: tuple[PairChange, ...]
    entered: Members
    left: Members

    @property
    def merged(self) -> tuple[ClusterEvent, ...]:
        """The merge events only."""
        return tuple(e for e in self.events if e.kind == "merge")

    @property
    def split(self) -> tuple[ClusterEvent, ...]:
        """The split events only."""
        return tuple(e for e in self.events if e.kind == "split")


@dataclass(frozen=True)
class Loop:
    """One H1 class of the alert window and a representative cycle of assets.

    Attributes
    ----------
    birth, death : float
        The bar, in the window's distance units.
    members : tuple of str
        The assets on the representative cycle, in cycle order (the last one joins the first).
    windows_alive : int
        Consecutive windows, ending with the alert window, in which a matching loop was found.
    first_seen : datetime.date
        The earliest window of that run.
    lookback_exhausted : bool
        True if the run reached the search limit (or the first window), so the loop may be older.
    """

    birth: float
    death: float
    members: Members
    windows_alive: int
    first_seen: date
    lookback_exhausted: bool

    @property
    def persistence(self) -> float:
        """``death - birth``."""
        return rounded(self.death - self.birth)


@dataclass(frozen=True)
class LoopExplanation:
    """The most persistent loops of the alert window (most persistent first)."""

    window_end: date
    loops: tuple[Loop, ...]
    method: str


@dataclass(frozen=True)
class Explanation:
    """Why an alert fired, as archived with it.

    Attributes
    ----------
    summary : str
        The summary the alert watches (decides which parts are present).
    window_end : datetime.date
    clusters : ClusterExplanation or None
        Present for H0 summaries and for summaries of no single dimension.
    loops : LoopExplanation or None
        Present for H1 summaries and for summaries of no single dimension (if H1 is computed).

    Examples
    --------
    The JSON reads back to the same explanation:

    >>> from datetime import date
    >>> from riskshape.explain.loops import METHOD
    >>> loop = Loop(0.61, 0.74, ("XQ01", "XQ02", "XQ03"), 2, date(2031, 2, 28), lookback_exhausted=False)
    >>> loops = LoopExplanation(date(2031, 3, 3), (loop,), METHOD)
    >>> e = Explanation("h1_landscape_l1", date(2031, 3, 3), clusters=None, loops=loops)
    >>> e.to_json()[:60]
    '{"clusters":null,"loops":{"loops":[{"birth":0.61,"death":0.7'
    >>> Explanation.from_json(e.to_json()) == e, loop.persistence
    (True, 0.13)

    Text of another layout is refused with the field named:

    >>> Explanation.from_json('{"version": 1, "summary": "h1_landscape_l1"}')
    Traceback (most recent call last):
    ...
    riskshape.errors.DataError: explanation.clusters: missing
    """

    summary: str
    window_end: date
    clusters: ClusterExplanation | None
    loops: LoopExplanation | None

    def to_json(self) -> str:
        """Canonical JSON: sorted keys, no spaces, UTF-8 text, no NaN; see the module notes."""
        payload = {"version": SCHEMA_VERSION, **_encode(self)}
        return json.dumps(payload, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False)

    @classmethod
    def from_json(cls, text: str | bytes) -> Explanation:
        """Read an explanation written by :meth:`to_json`.

        Raises
        ------
        DataError
            If the text is not JSON of this layout (the message names the field).
        """
        try:
            data = json.loads(text)
        except (ValueError, TypeError) as err:
            raise DataError(f"explanation: not valid JSON ({err})") from None
        reader = _Reader(data, "explanation")
        version = reader.get("version", int)
        if version != SCHEMA_VERSION:
            raise DataError(
                f"explanation: layout version {version} is not supported (this riskshape reads {SCHEMA_VERSION})"
            )
        return _decode_explanation(reader)


# --- encoding -----------------------------------------------------------------------------------


def _encode(value: Any) -> Any:
    if isinstance(value, date):
        return value.isoformat()
    if isinstance(value, tuple):
        return [_encode(v) for v in value]
    if hasattr(value, "__dataclass_fields__"):
        return {name: _encode(getattr(value, name)) for name in value.__dataclass_fields__}
    return value


class _Reader:
    """Typed access to one JSON object, naming the path of any bad field."""

    def __init__(self, data: object, path: str) -> None:
        if not isinstance(data, dict):
            raise DataError(f"{path}: expected an object, got {type(data).__name__}")
        self.data = data
        self.path = path

    def raw(self, key: str) -> object:
        if key not in self.data:
            raise DataError(f"{self.path}.{key}: missing")
        return self.data[key]

    def get(self, key: str, kind: type) -> Any:
        value = self.raw(key)
        if kind is bool:
            ok = isinstance(value, bool)
        elif kind is float:
            ok = isinstance(value, (int, float)) and not isinstance(value, bool)
            value = float(value) if ok else value  # type: ignore[arg-type]
        else:
            ok = isinstance(value, kind) and not isinstance(value, bool)
        if not ok:
            raise DataError(f"{self.path}.{key}: expected {kind.__name__}, got {value!r}")
        return value

    def date(self, key: str, optional: bool = False) -> date | None:
        value = self.raw(key)
        if value is None and optional:
            return None
        try:
            return date.fromisoformat(str(value))
        except ValueError:
            raise DataError(f"{self.path}.{key}: expected a date YYYY-MM-DD, got {value!r}") from None

    def names(self, key: str) -> Members:
        return _names(self.raw(key), f"{self.path}.{key}")

    def groups(self, key: str) -> tuple[Members, ...]:
        value = self.raw(key)
        if not isinstance(value, list):
            raise DataError(f"{self.path}.{key}: expected a list of clusters, got {value!r}")
        return tuple(_names(v, f"{self.path}.{key}[{i}]") for i, v in enumerate(value))

    def objects(self, key: str) -> list[_Reader]:
        value = self.raw(key)
        if not isinstance(value, list):
            raise DataError(f"{self.path}.{key}: expected a list, got {value!r}")
        return [_Reader(v, f"{self.path}.{key}[{i}]") for i, v in enumerate(value)]

    def optional(self, key: str) -> _Reader | None:
        value = self.raw(key)
        return None if value is None else _Reader(value, f"{self.path}.{key}")


def _names(value: object, path: str) -> Members:
    if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
        raise DataError(f"{path}: expected a list of asset names, got {value!r}")
    return tuple(value)


def _decode_explanation(r: _Reader) -> Explanation:
    clusters = r.optional("clusters")
    loops = r.optional("loops")
    return Explanation(
        summary=r.get("summary", str),
        window_end=r.date("window_end"),  # type: ignore[arg-type]
        clusters=None if clusters is None else _decode_clusters(clusters),
        loops=None if loops is None else _decode_loops(loops),
    )


def _decode_clusters(r: _Reader) -> ClusterExplanation:
    events = []
    for e in r.objects("events"):
        kind = e.get("kind", str)
        if kind not in ("merge", "split"):
            raise DataError(f"{e.path}.kind: expected 'merge' or 'split', got {kind!r}")
        events.append(ClusterEvent(kind=kind, before=e.groups("before"), after=e.groups("after")))
    pairs = tuple(
        PairChange(p.get("first", str), p.get("second", str), p.get("before", float), p.get("after", float))
        for p in r.objects("pair_changes")
    )
    return ClusterExplanation(
        window_end=r.date("window_end"),  # type: ignore[arg-type]
        previous_end=r.date("previous_end", optional=True),
        scale=r.get("scale", float),
        scale_rule=r.get("scale_rule", str),
        clusters_before=r.groups("clusters_before"),
        clusters_after=r.groups("clusters_after"),
        events=tuple(events),
        pair_changes=pairs,
        entered=r.names("entered"),
        left=r.names("left"),
    )


def _decode_loops(r: _Reader) -> LoopExplanation:
    loops = tuple(
        Loop(
            birth=o.get("birth", float),
            death=o.get("death", float),
            members=o.names("members"),
            windows_alive=o.get("windows_alive", int),
            first_seen=o.date("first_seen"),  # type: ignore[arg-type]
            lookback_exhausted=o.get("lookback_exhausted", bool),
        )
        for o in r.objects("loops")
    )
    return LoopExplanation(window_end=r.date("window_end"), loops=loops, method=r.get("method", str))  # type: ignore[arg-type]
