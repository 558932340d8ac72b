"""The review workflow: status from the chained reviews, comments, four eyes, roles, queue, sign-off."""

from __future__ import annotations

import threading
from collections.abc import Iterator
from datetime import date

import numpy as np
import pytest

from riskshape.errors import AccessError, ConflictError, DataError, NotFoundError
from riskshape.reviews import (
    STATUSES,
    alert_history,
    list_queue,
    list_sign_offs,
    next_actions,
    review_alert,
    sign_off,
    status_of,
)
from riskshape.store import AlertRecord, Head, Store, chain_head, open_store, verify_chain
from tests.kit.archive import make_alerts, manifest, walk_prices


@pytest.fixture
def store(tmp_path) -> Iterator[Store]:
    with open_store(f"sqlite:///{tmp_path / 'archive.sqlite'}") as opened:
        yield opened


@pytest.fixture
def alerts(store: Store, rng: np.random.Generator) -> tuple[AlertRecord, ...]:
    """Four alerts of 'Fund North' (2030-02-01 to 2030-02-06) and two of 'Fund South' (2030-03-01 on)."""
    added: list[AlertRecord] = []
    for name, n, start, rule in (("Fund North", 4, "2030-02-01", "rule_a"), ("Fund South", 2, "2030-03-01", "rule_b")):
        store.create_portfolio(name)
        run = store.create_run(name, manifest(), walk_prices(rng))
        added.extend(store.append_alerts(make_alerts(rng, n, portfolio=name, rule=rule, start=start), run.id).added)
    return tuple(added)


def test_status_follows_the_reviews(store: Store, alerts: tuple[AlertRecord, ...]) -> None:
    first = alerts[0].id
    assert alert_history(store, first).status == "open"
    review_alert(store, first, "acknowledge", "Reviewer One")
    assert alert_history(store, first).status == "acknowledged"
    review_alert(store, first, "escalate", "Reviewer One", "threshold crossed twice")
    assert alert_history(store, first).status == "escalated"
    review_alert(store, first, "close", "Reviewer Two", "checked with the desk")
    history = alert_history(store, first)
    assert history.status == "closed"
    assert [(r.action, r.reviewer) for r in history.reviews] == [
        ("acknowledge", "Reviewer One"),
        ("escalate", "Reviewer One"),
        ("close", "Reviewer Two"),
    ]
    assert history.reviews[1].comment == "threshold crossed twice"
    assert verify_chain(store).ok


def test_an_escalation_is_not_hidden_by_a_later_acknowledgement(store: Store, alerts: tuple[AlertRecord, ...]) -> None:
    # Reviews archived before the workflow: escalate then acknowledge (the store takes any order).
    store.append_review(alerts[0].id, "escalate", "Reviewer One", "odd")
    store.append_review(alerts[0].id, "acknowledge", "Reviewer Two", "")
    assert alert_history(store, alerts[0].id).status == "escalated"
    assert status_of(store.list_reviews([alerts[0].id])) == "escalated"


@pytest.mark.parametrize("action", ["dismiss", "escalate"])
@pytest.mark.parametrize("comment", ["", "   \n"])
def test_dismiss_and_escalate_need_a_comment(
    store: Store, alerts: tuple[AlertRecord, ...], action: str, comment: str
) -> None:
    head = chain_head(store)
    with pytest.raises(DataError, match="comment"):
        review_alert(store, alerts[0].id, action, "Reviewer One", comment)
    assert chain_head(store) == head  # nothing written


def test_four_eyes_the_escalator_cannot_close(store: Store, alerts: tuple[AlertRecord, ...]) -> None:
    review_alert(store, alerts[0].id, "escalate", "Reviewer One", "looks real")
    head = chain_head(store)
    for same in ("Reviewer One", " reviewer one "):
        with pytest.raises(ConflictError, match="four eyes"):
            review_alert(store, alerts[0].id, "close", same, "done")
    assert chain_head(store) == head
    review_alert(store, alerts[0].id, "close", "Reviewer Two", "agreed")
    assert alert_history(store, alerts[0].id).status == "closed"


def test_actions_that_do_not_apply_are_conflicts(store: Store, alerts: tuple[AlertRecord, ...]) -> None:
    with pytest.raises(ConflictError, match="is open: close does not apply"):
        review_alert(store, alerts[0].id, "close", "Reviewer One")
    review_alert(store, alerts[0].id, "acknowledge", "Reviewer One")
    review_alert(store, alerts[0].id, "close", "Reviewer One")
    with pytest.raises(ConflictError, match="closed"):
        review_alert(store, alerts[0].id, "acknowledge", "Reviewer Two")
    assert next_actions("closed") == ()
    assert set(next_actions("open")) == {"acknowledge", "escalate", "dismiss"}


@pytest.mark.parametrize("role", ["reader", "ingest", ""])
def test_only_reviewers_review(store: Store, alerts: tuple[AlertRecord, ...], role: str) -> None:
    with pytest.raises(AccessError, match="may not review"):
        review_alert(store, alerts[0].id, "acknowledge", "Reader One", role=role)
    assert store.list_reviews() == ()
    assert review_alert(store, alerts[0].id, "acknowledge", "Admin One", role="admin").action == "acknowledge"


def test_unknown_alert_and_action(store: Store, alerts: tuple[AlertRecord, ...]) -> None:
    with pytest.raises(NotFoundError):
        review_alert(store, 999, "acknowledge", "Reviewer One")
    with pytest.raises(DataError, match="approve"):
        review_alert(store, alerts[0].id, "approve", "Reviewer One")


def test_queue_open_first_with_counts_and_filters(store: Store, alerts: tuple[AlertRecord, ...]) -> None:
    north = [a.id for a in alerts if a.portfolio == "Fund North"]
    review_alert(store, north[0], "escalate", "Reviewer One", "why")
    review_alert(store, north[1], "dismiss", "Reviewer Two", "noise")
    page = list_queue(store)
    assert page.total == len(alerts)
    assert [i.status for i in page.items][:4] == ["open"] * 4
    assert page.items[-1].status == "dismissed"
    assert dict(page.counts) == {"open": 4, "acknowledged": 0, "escalated": 1, "dismissed": 1, "closed": 0}
    escalated = list_queue(store, status="escalated")
    assert [(i.alert.id, i.last_reviewer) for i in escalated.items] == [(north[0], "Reviewer One")]
    assert escalated.counts == page.counts  # counts ignore the status filter
    both = list_queue(store, status="escalated,dismissed")
    assert {i.alert.id for i in both.items} == {north[0], north[1]}
    assert list_queue(store, status=["escalated", "dismissed"]).total == 2
    assert list_queue(store, portfolio=["Fund South"]).total == 2
    assert list_queue(store, portfolio="Fund North,Fund South", rule="rule_b").total == 2
    inside = {a.id for a in alerts if date(2030, 2, 2) <= a.window_end <= date(2030, 2, 5)}
    assert inside and {i.alert.id for i in list_queue(store, start="2030-02-02", end="2030-02-05").items} == inside
    assert [i.alert.id for i in list_queue(store, limit=2, offset=1).items] == [i.alert.id for i in page.items[1:3]]
    with pytest.raises(DataError, match="start 2030-03-01 is after end 2030-02-01"):
        list_queue(store, start="2030-03-01", end="2030-02-01")
    with pytest.raises(DataError, match="status: 'pending'"):
        list_queue(store, status="pending")


def test_sign_off_refused_with_the_list_of_open_alerts(store: Store, alerts: tuple[AlertRecord, ...]) -> None:
    north = [a for a in alerts if a.portfolio == "Fund North"]
    review_alert(store, north[0].id, "escalate", "Reviewer One", "why")
    for alert in north[1:]:
        review_alert(store, alert.id, "acknowledge", "Reviewer One")
    head = chain_head(store)
    with pytest.raises(ConflictError) as refused:
        sign_off(store, "2030-02-01", "2030-02-28", ["Fund North"], "Signer One")
    assert f"{north[0].id} (Fund North, rule_a, {north[0].window_end.isoformat()}, escalated)" in str(refused.value)
    assert chain_head(store) == head
    review_alert(store, north[0].id, "close", "Reviewer Two", "settled")
    before = chain_head(store)
    signed = sign_off(store, "2030-02-01", "2030-02-28", "Fund North", "Signer One")
    assert signed.chain_head == before
    assert signed.counts["closed"] == 1 and signed.counts["acknowledged"] == len(north) - 1
    assert sum(signed.counts.values()) == len(north)
    assert signed.portfolios == ("Fund North",)
    assert list_sign_offs(store) == (signed,)
    assert verify_chain(store).ok
    # Fund South's alerts are open, so signing every portfolio over March is refused.
    with pytest.raises(ConflictError, match="2 alert"):
        sign_off(store, "2030-03-01", "2030-03-31", [], "Signer One")


def test_sign_off_records_the_head_before_it(store: Store, alerts: tuple[AlertRecord, ...]) -> None:
    for alert in alerts:
        review_alert(store, alert.id, "acknowledge", "Reviewer One")
    before = chain_head(store)
    signed = sign_off(store, "2030-01-01", "2030-12-31", [], "Signer One")
    assert signed.chain_head == before
    assert signed.seq == before.count + 1
    assert set(signed.portfolios) == {"Fund North", "Fund South"}
    with pytest.raises(AccessError):
        sign_off(store, "2030-01-01", "2030-12-31", [], "Reader One", role="reader")
    with pytest.raises(DataError, match="start and end"):
        sign_off(store, None, "2030-12-31", [], "Signer One")
    with pytest.raises(NotFoundError):
        sign_off(store, "2030-01-01", "2030-12-31", ["Fund West"], "Signer One")


def test_statuses_are_the_published_set() -> None:
    assert STATUSES == ("open", "acknowledged", "escalated", "dismissed", "closed")


def test_a_review_landing_before_the_append_is_caught(
    store: Store, alerts: tuple[AlertRecord, ...], monkeypatch: pytest.MonkeyPatch
) -> None:
    north = [a for a in alerts if a.portfolio == "Fund North"]
    for alert in north:
        review_alert(store, alert.id, "acknowledge", "Reviewer One")
    real_append = store.append_event

    def append_after_a_late_escalation(*args: object, **kwargs: object) -> object:
        # A review that lands after every read sign_off makes before the append itself.
        review_alert(store, north[0].id, "escalate", "Reviewer Two", "late doubt")
        monkeypatch.setattr(store, "append_event", real_append)
        return real_append(*args, **kwargs)  # type: ignore[arg-type]

    monkeypatch.setattr(store, "append_event", append_after_a_late_escalation)
    head = None
    with pytest.raises(ConflictError, match=rf"{north[0].id} \(Fund North, rule_a, .*escalated\)"):
        head = chain_head(store)
        sign_off(store, "2030-02-01", "2030-02-28", ["Fund North"], "Signer One")
    assert head is not None and chain_head(store).count == head.count + 1  # the escalation only
    assert list_sign_offs(store) == ()
    assert verify_chain(store).ok


def test_a_review_sent_during_the_check_waits_for_the_sign_off(
    store: Store, alerts: tuple[AlertRecord, ...], monkeypatch: pytest.MonkeyPatch
) -> None:
    north = [a for a in alerts if a.portfolio == "Fund North"]
    for alert in north:
        review_alert(store, alert.id, "acknowledge", "Reviewer One")
    real_append = store.append_event
    landed: list[object] = []

    def append_with_a_review_racing(*args: object, check: object = None, **kwargs: object) -> object:
        def racing_check(head: object) -> object:
            worker = threading.Thread(
                target=lambda: landed.append(review_alert(store, north[0].id, "escalate", "Reviewer Two", "racing"))
            )
            worker.start()
            worker.join(timeout=0.5)  # it cannot finish: the sign-off holds the write lock
            assert landed == []
            seen = check(head)  # type: ignore[operator]
            threads.append(worker)
            return seen

        return real_append(*args, check=racing_check, **kwargs)  # type: ignore[arg-type]

    threads: list[threading.Thread] = []
    monkeypatch.setattr(store, "append_event", append_with_a_review_racing)
    signed = sign_off(store, "2030-02-01", "2030-02-28", ["Fund North"], "Signer One")
    threads[0].join(timeout=30)
    assert signed.counts["acknowledged"] == len(north) and signed.counts["escalated"] == 0
    (escalation,) = landed
    assert escalation.seq == signed.seq + 1  # type: ignore[attr-defined]  # appended after the sign-off
    assert verify_chain(store).ok


def test_an_event_check_refuses_or_adds_what_it_saw(store: Store, alerts: tuple[AlertRecord, ...]) -> None:
    before = chain_head(store)
    with pytest.raises(ConflictError, match="refused by its check"):
        store.append_event("test_note", {"a": 1}, check=lambda head: _refuse("refused by its check"))
    assert chain_head(store) == before  # nothing half-written
    seen: list[Head] = []

    def note(head: Head) -> dict[str, object]:
        seen.append(head)
        return {"b": head.count}

    made = store.append_event("test_note", {"a": 1}, check=note)
    assert seen == [before] and made.data == {"a": 1, "b": before.count}
    assert made.prev_hash == before.head_hash and verify_chain(store).ok


def _refuse(message: str) -> None:
    raise ConflictError(message)
