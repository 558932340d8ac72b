"""Request and response bodies of the API (pydantic models; the OpenAPI schema is made from them).

Every response object derives from :class:`Cautioned` and so carries ``caution``. Numbers that
are undefined (a distance at the first window, a threshold before enough history) are ``null``.
"""

from __future__ import annotations

import math
from datetime import date, datetime
from typing import Annotated, Any, Literal

from pydantic import BaseModel, ConfigDict, Field, model_validator

from riskshape import CAUTION
from riskshape.store import REVIEW_ACTIONS
from riskshape.types import AlertStatus

__all__ = [
    "Cautioned",
    "ErrorOut",
    "FieldError",
    "StoreStatus",
    "HealthOut",
    "PortfolioOut",
    "PortfolioList",
    "PortfolioIn",
    "AlertOut",
    "ProvenanceOut",
    "ReviewOut",
    "AlertDetailOut",
    "AlertPageOut",
    "ReviewIn",
    "ReviewCreated",
    "StatusCounts",
    "SignOffIn",
    "SignOffOut",
    "SignOffList",
    "RuleStateOut",
    "LatestOut",
    "SeriesRow",
    "SeriesOut",
    "DiagramOut",
    "LongRow",
    "WideRow",
    "PricesIn",
    "IngestOut",
    "ChainHead",
    "HeadOut",
    "PortfolioCreated",
    "BadRecordOut",
    "VerifyOut",
    "finite_or_none",
]

AssetName = Annotated[str, Field(min_length=1, max_length=200)]
Price = Annotated[float, Field(allow_inf_nan=False, description="a price (> 0), or null where missing")]
Number = Annotated[float | None, Field(description="null where undefined")]
ReviewAction = Literal["acknowledge", "dismiss", "escalate", "close"]
assert set(REVIEW_ACTIONS) == {"acknowledge", "dismiss", "escalate", "close"}


def finite_or_none(value: Any) -> float | None:
    """A float, or None where the value is missing, NaN or infinite (JSON has no NaN)."""
    if value is None:
        return None
    number = float(value)
    return number if math.isfinite(number) else None


class Cautioned(BaseModel):
    """Base of every response object: the not-investment-advice caution travels with the data."""

    caution: str = Field(CAUTION, description="riskshape is a decision aid, not investment advice")


class _Input(BaseModel):
    model_config = ConfigDict(extra="forbid")


# -- errors and health ---------------------------------------------------------------------------
class FieldError(BaseModel):
    """One invalid part of a request: where it is and what is wrong with it."""

    field: str = Field(description="where in the request, e.g. body.rows.3.price or query.limit")
    message: str


class ErrorOut(Cautioned):
    """Every 4xx and 5xx body."""

    detail: str = Field(description="what is wrong and how to fix it")
    request_id: str = Field(description="quote it when reporting a problem; the logs carry it")
    errors: list[FieldError] | None = None


class StoreStatus(BaseModel):
    """Whether the archive can be read, with its database dialect and schema revision."""

    ok: bool
    dialect: str | None = None
    revision: str | None = Field(None, description="schema revision of the archive")
    detail: str | None = None


class HealthOut(Cautioned):
    """The service's health: its version and the archive's status (``degraded`` when unreadable)."""

    status: Literal["ok", "degraded"]
    version: str
    store: StoreStatus


# -- portfolios ----------------------------------------------------------------------------------
class PortfolioOut(BaseModel):
    """A portfolio: its name and when it was created."""

    name: str
    created_at: datetime


class PortfolioList(Cautioned):
    """Every portfolio, by name."""

    items: list[PortfolioOut]


class PortfolioIn(_Input):
    """A new portfolio: only its name; its assets are those of the first prices posted to it."""

    name: str = Field(
        min_length=1,
        max_length=200,
        pattern=r"^[A-Za-z0-9](?:[A-Za-z0-9 ._-]{0,198}[A-Za-z0-9._-])?$",
        description="1 to 200 letters, digits, spaces, '.', '_' or '-'; starts with a letter or digit",
    )


class PortfolioCreated(Cautioned):
    """The portfolio just created."""

    portfolio: PortfolioOut


# -- alerts and reviews --------------------------------------------------------------------------
class AlertOut(BaseModel):
    """An archived alert: which rule fired, on which window, the value and the threshold it crossed."""

    id: int
    portfolio: str
    rule: str
    summary: str = Field(description="the summary column the rule watches")
    kind: str = Field(description="level, quantile or zscore")
    window_end: date
    value: float
    threshold: float = Field(description="threshold in force at that window, in the summary's units")
    severity: str
    raised_at: datetime
    status: AlertStatus | None = Field(
        None, description="open, acknowledged, escalated, dismissed or closed: derived from the chained reviews"
    )
    last_reviewer: str | None = Field(None, description="who reviewed the alert last (null if nobody has)")


class StatusCounts(BaseModel):
    """How many alerts are in each review status."""

    open: int
    acknowledged: int
    escalated: int
    dismissed: int
    closed: int


class ProvenanceOut(BaseModel):
    """Where an alert came from (configuration, inputs, package version, run) and its place in
    the hash chain.
    """

    config_hash: str
    inputs_hash: str = Field(description="SHA-256 of the exact returns the window used")
    package_version: str
    run_id: int
    seq: int = Field(description="place in the ledger (hash chain)")
    prev_hash: str
    entry_hash: str


class ReviewOut(BaseModel):
    """An archived review of an alert: the action, who took it, the comment and its place in the
    hash chain.
    """

    id: int
    alert_id: int
    action: ReviewAction
    reviewer: str = Field(description="owner of the API key that posted the review")
    comment: str
    created_at: datetime
    seq: int
    entry_hash: str


class AlertDetailOut(Cautioned):
    """One alert in full: the alert, its provenance, why it fired, and its reviews."""

    alert: AlertOut
    provenance: ProvenanceOut
    explanation: dict[str, Any] | None = Field(
        None,
        description="why it fired: clusters that merged or split (H0), loops and their assets (H1); "
        "archived inside the alert's hash-chained record (null where none was archived)",
    )
    explanation_text: str = Field(description="the explanation as plain text")
    status: AlertStatus = Field("open", description="derived from the chained reviews")
    reviews: list[ReviewOut] = Field(description="every review, oldest first: who, when, action, comment")


class AlertPageOut(Cautioned):
    """One page of archived alerts matching the filters, with the total and the next page's offset."""

    items: list[AlertOut]
    total: int = Field(description="alerts matching the filters")
    offset: int
    limit: int
    next_offset: int | None = Field(description="offset of the next page, null on the last one")
    counts: StatusCounts | None = Field(
        None, description="alerts matching every filter but status, by status (open first in the list)"
    )


class ReviewIn(_Input):
    """A review; the reviewer is the owner of the key that sends it, never a field of the body."""

    action: ReviewAction
    comment: str = Field("", max_length=5000)


class ReviewCreated(Cautioned):
    """The review just archived."""

    review: ReviewOut
    status: AlertStatus | None = Field(None, description="the alert's status after this review")


class SignOffIn(_Input):
    """A period to sign off; the signer is the owner of the key that sends it."""

    start: date = Field(description="first window end of the period")
    end: date = Field(description="last window end of the period")
    portfolios: list[Annotated[str, Field(min_length=1, max_length=200)]] = Field(
        default_factory=list, max_length=1000, description="portfolios signed for (empty: every portfolio)"
    )

    @model_validator(mode="after")
    def _ordered(self) -> SignOffIn:
        if self.start > self.end:
            raise ValueError(f"start {self.start} is after end {self.end}; give start on or before end")
        return self


class SignOffOut(Cautioned):
    """A period signed off: the chained record of the period, portfolios, counts, signer and head."""

    id: int
    seq: int = Field(description="place of the sign-off record in the ledger")
    entry_hash: str
    start: date
    end: date
    portfolios: list[str]
    counts: StatusCounts
    signer: str
    signed_at: datetime
    chain_head: str = Field(description="COUNT:HASH of the ledger just before the sign-off")


class SignOffList(Cautioned):
    """Every sign-off, in ledger order."""

    items: list[SignOffOut]
    total: int


# -- series, latest state, diagrams --------------------------------------------------------------
class RuleStateOut(BaseModel):
    """Where one alert rule stands at the last window: value, threshold, clear level and whether
    it is active.
    """

    rule: str
    summary: str
    severity: str
    value: Number
    threshold: Number
    clear_level: Number
    active: bool = Field(description="fired and not yet cleared")
    active_since: date | None
    last_fired: date | None
    history: int = Field(
        0, description="values of history the last window held (non-missing, in the lookback before it)"
    )
    history_needed: int = Field(0, description="values of history a window needs before the rule judges it")
    can_fire: bool = Field(True, description="whether the rule has enough history to fire; silent until then")
    windows_to_go: int = Field(
        0, description="windows still needed before it can first fire (times step: trading days)"
    )


class PendingDayOut(BaseModel):
    """A day archived that does not count yet: the listed assets still missing (none when it waits on an
    earlier pending day).
    """

    date: date
    missing: list[str] = Field(description="listed assets without a price (or a missing mark) that day")
    priced: int = Field(description="listed assets with a price that day")
    listed: int = Field(description="assets listed that day (the portfolio's, less those delisted before it)")


class LatestOut(Cautioned):
    """A portfolio's latest state: the last window's summaries, the alert rules' states and the
    alerts still active.
    """

    portfolio: str
    config_hash: str | None = Field(description="configuration of the latest run; null before the first window")
    n_windows: int
    window_end: date | None = Field(description="the last window; null before the first window")
    values: dict[str, Number] = Field(description="the summaries of the last window")
    rules: list[RuleStateOut]
    active_alerts: list[AlertOut] = Field(description="archived alerts whose rule is still active")
    pending: list[PendingDayOut] = Field(
        default_factory=list, description="days archived that do not count yet (no window, no rule), oldest first"
    )


class SeriesRow(BaseModel):
    """One window of the series: its last date and one value per column."""

    window_end: date
    values: list[Number] = Field(description="one value per entry of `columns`")


class SeriesOut(Cautioned):
    """One page of a portfolio's per-window summaries, oldest window first, as columns and rows."""

    portfolio: str
    config_hash: str | None
    columns: list[str]
    rows: list[SeriesRow]
    total: int = Field(description="windows in the date range")
    offset: int
    limit: int
    next_offset: int | None
    pending: list[PendingDayOut] = Field(
        default_factory=list, description="days archived that do not count yet (no window, no rule), oldest first"
    )


class DiagramOut(Cautioned):
    """One window's persistence diagram in one homology dimension: its finite bars."""

    portfolio: str
    window_end: date
    dim: int
    config_hash: str
    run_id: int
    n_bars: int
    bars: list[tuple[float, float]] = Field(description="finite (birth, death) pairs; float32 values")


# -- ingest --------------------------------------------------------------------------------------
class LongRow(_Input):
    """One price in the long layout: a date, an asset and its price (null where missing)."""

    date: date
    asset: AssetName
    price: Price | None


class WideRow(_Input):
    """One date in the wide layout: the date and each asset's price on it (null where missing)."""

    date: date
    prices: dict[AssetName, Price | None] = Field(description="asset -> price on that date")


class PricesIn(_Input):
    """Prices for one portfolio: give ``rows`` (long: date, asset, price) or ``wide`` (one object per date)."""

    rows: list[LongRow] | None = Field(None, min_length=1)
    wide: list[WideRow] | None = Field(None, min_length=1)

    @model_validator(mode="after")
    def _one_layout(self) -> PricesIn:
        if (self.rows is None) == (self.wide is None):
            raise ValueError("give exactly one of 'rows' (long: date, asset, price) or 'wide' (date, prices)")
        return self


class IngestOut(Cautioned):
    """What posting prices did: prices archived, corrections, windows computed and alerts raised."""

    portfolio: str
    prices_added: int = Field(description="price cells archived for the first time")
    corrections: int = Field(description="price cells archived as corrections (new revisions)")
    unchanged: int = Field(description="price cells already archived with the same price")
    windows_added: int = Field(description="windows computed and archived by this request")
    windows_differing: int = Field(
        description="archived windows that corrected prices would change (they keep their archived values)"
    )
    first_window: date | None
    last_window: date | None
    alerts: list[AlertOut] = Field(description="alerts raised by this request")
    run_id: int | None = Field(description="the run recorded for this request (null when nothing was new)")
    note: str = Field(description="what happened, in words")
    warnings: list[str] = Field(
        default_factory=list,
        description="data-quality findings of the prices sent (constant assets, windows with every asset left "
        "out, one-day moves beyond [checks] max_day_ratio), each naming the asset and date",
    )
    pending: list[PendingDayOut] = Field(
        default_factory=list, description="days archived that do not count yet (no window, no rule), oldest first"
    )
    closed: list[date] = Field(default_factory=list, description="days this request closed (by hand or by cut-off)")


class PendingDaysOut(Cautioned):
    """A portfolio's pending days: archived, not counting yet, oldest first."""

    portfolio: str
    items: list[PendingDayOut]
    count: int


class DelistIn(_Input):
    """A delisting: the asset's last trading day (its prices up to it stay; later days do not wait for it)."""

    last_trading_day: date


class FeedRow(_Input):
    """One price of a many-portfolio day: the portfolio, a date, an asset and its price (null where missing)."""

    portfolio: Annotated[str, Field(min_length=1, max_length=200)]
    date: date
    asset: AssetName
    price: Price | None


class FeedIn(_Input):
    """Prices for several portfolios: long rows, each naming its portfolio."""

    rows: list[FeedRow] = Field(min_length=1)


class FeedItemOut(BaseModel):
    """One portfolio's answer: what its prices did, or why none of them was archived."""

    portfolio: str
    archived: bool = Field(description="whether this portfolio's prices were taken (false: nothing archived)")
    result: IngestOut | None = Field(description="what ingesting them did (null when refused)")
    error: str | None = Field(description="why they were refused (null when archived)")


class FeedOut(Cautioned):
    """The answers of a many-portfolio day, one per portfolio in the order first named."""

    items: list[FeedItemOut]
    count: int
    refused: int = Field(description="portfolios whose prices were refused (the others were taken)")


# -- audit ---------------------------------------------------------------------------------------
class ChainHead(BaseModel):
    """The hash chain's head: the number of records and the hash of the last one."""

    count: int = Field(description="records in the ledger")
    head_hash: str
    head: str = Field(description="COUNT:HASH, the form verify's expect_head reads back")


class HeadOut(Cautioned, ChainHead):
    """The ledger's head, to keep somewhere else and check against later."""


class BadRecordOut(BaseModel):
    """The first record of the chain that does not verify: its place, table, id and why."""

    seq: int
    table: str
    record_id: int | None
    reason: str


class VerifyOut(Cautioned):
    """The outcome of verifying the hash chain: whether every record verifies (and the expected head,
    if given, is found), records checked, the head, and the first bad record (null when ``ok``).
    """

    ok: bool
    checked: int
    head: ChainHead
    first_bad: BadRecordOut | None
