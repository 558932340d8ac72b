"""Archive records and library results to response models (pure functions)."""

from __future__ import annotations

from riskshape.alerts import RuleState
from riskshape.daily import DayStatus
from riskshape.store import AlertRecord, ReviewRecord
from riskshape_service.schemas import (
    AlertOut,
    PendingDayOut,
    ProvenanceOut,
    ReviewOut,
    RuleStateOut,
    finite_or_none,
)

__all__ = ["alert_out", "pending_out", "provenance_out", "review_out", "rule_state_out"]


def alert_out(alert: AlertRecord) -> AlertOut:
    """The public fields of an archived alert."""
    return AlertOut(
        id=alert.id,
        portfolio=alert.portfolio,
        rule=alert.rule,
        summary=alert.summary,
        kind=alert.kind,
        window_end=alert.window_end,
        value=alert.value,
        threshold=alert.threshold,
        severity=alert.severity,
        raised_at=alert.raised_at,
    )


def provenance_out(alert: AlertRecord) -> ProvenanceOut:
    """Where an alert came from and its place in the hash chain."""
    return ProvenanceOut(
        config_hash=alert.config_hash,
        inputs_hash=alert.inputs_hash,
        package_version=alert.package_version,
        run_id=alert.run_id,
        seq=alert.seq,
        prev_hash=alert.prev_hash,
        entry_hash=alert.entry_hash,
    )


def review_out(review: ReviewRecord) -> ReviewOut:
    """An archived review."""
    return ReviewOut(
        id=review.id,
        alert_id=review.alert_id,
        action=review.action,  # type: ignore[arg-type]
        reviewer=review.reviewer,
        comment=review.comment,
        created_at=review.created_at,
        seq=review.seq,
        entry_hash=review.entry_hash,
    )


def rule_state_out(state: RuleState) -> RuleStateOut:
    """Where one alert rule stands at the last window."""
    return RuleStateOut(
        rule=state.rule,
        summary=state.summary,
        severity=state.severity,
        value=finite_or_none(state.value),
        threshold=finite_or_none(state.threshold),
        clear_level=finite_or_none(state.clear_level),
        active=state.active,
        active_since=None if state.active_since is None else state.active_since.date(),
        last_fired=None if state.last_fired is None else state.last_fired.date(),
        history=state.history,
        history_needed=state.history_needed,
        can_fire=state.can_fire,
        windows_to_go=state.windows_to_go,
    )


def pending_out(status: DayStatus) -> PendingDayOut:
    """A pending day: its date, the listed assets still missing, and how many are priced."""
    return PendingDayOut(date=status.day, missing=list(status.missing), priced=status.priced, listed=len(status.listed))
