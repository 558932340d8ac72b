"""``riskshape alerts``: list (with review status), show (with the review history), review and export."""

from __future__ import annotations

from collections.abc import Callable
from datetime import datetime
from pathlib import Path

import click

from riskshape import CAUTION
from riskshape.cli.audit import STORE_OPTION
from riskshape.explain import explanation_text
from riskshape.outputs import export_alerts
from riskshape.reviews import ACTIONS, STATUSES, alert_history, list_queue, next_actions, review_alert
from riskshape.selection import Period, pick_alias, to_period
from riskshape.store import KNOWN_AT_FORMAT, AlertRecord, open_store, to_known_at

__all__ = ["alerts", "period_options", "resolve_period", "KNOWN_AT_OPTION", "knowledge_note"]


def _known_at(ctx: click.Context, param: click.Parameter, value: str | None) -> datetime | None:
    return to_known_at(value, "--as-known-at")  # a DataError: one line, exit status 2


KNOWN_AT_OPTION = click.option(
    "--as-known-at",
    "as_known_at",
    default=None,
    metavar="TIMESTAMP",
    callback=_known_at,
    help=f"Show exactly what riskshape showed at that moment ({KNOWN_AT_FORMAT}); default: current knowledge.",
)


def knowledge_note(as_known_at: datetime | None) -> str:
    """The line stating the knowledge a command shows."""
    if as_known_at is None:
        return "knowledge: current"
    return f"knowledge: as known at {as_known_at.isoformat()} (later alerts, reviews and corrections left out)"


@click.group()
def alerts() -> None:
    """Archived alerts: list, show, review, export."""


def period_options(command: Callable[..., None]) -> Callable[..., None]:
    """``--start``/``--end`` (window ends, inclusive) and their deprecated names, hidden from help."""
    for name, help_text in (
        ("--end", "Window end on or before DATE (YYYY-MM-DD)."),
        ("--start", "Window end on or after DATE (YYYY-MM-DD)."),
    ):
        command = click.option(name, default=None, metavar="DATE", help=help_text)(command)
    for old in ("--since", "--until", "--from", "--to"):
        command = click.option(old, f"old_{old[2:]}", default=None, hidden=True)(command)
    return command


def resolve_period(
    start: str | None,
    end: str | None,
    old_since: str | None,
    old_until: str | None,
    old_from: str | None,
    old_to: str | None,
) -> Period:
    """The period from ``--start``/``--end`` or their deprecated names (a note on stderr for those)."""
    for old, value, new in (
        ("since", old_since, "start"),
        ("from", old_from, "start"),
        ("until", old_until, "end"),
        ("to", old_to, "end"),
    ):
        if value is not None:
            click.echo(
                f"riskshape: note: --{old} is deprecated and will be removed in the next release; write --{new}",
                err=True,
            )
    first = pick_alias("start", start, warn=False, since=old_since, **{"from": old_from})
    last = pick_alias("end", end, warn=False, until=old_until, to=old_to)
    return to_period(first, last)


def _cell(text: str | None, width: int) -> str:
    shown = text or "-"
    return shown if len(shown) <= width else shown[: width - 1] + "~"


@alerts.command("list")
@STORE_OPTION
@click.option(
    "--status", multiple=True, help=f"Only alerts of this status ({', '.join(STATUSES)}); repeat or comma-separate."
)
@click.option("--portfolio", multiple=True, help="Only this portfolio; repeat or comma-separate.")
@click.option("--severity", multiple=True, help="info, warning or critical; repeat or comma-separate.")
@click.option("--rule", multiple=True, help="Only this rule; repeat or comma-separate.")
@period_options
@click.option("--limit", type=click.IntRange(min=0), default=50, show_default=True)
@click.option("--offset", type=click.IntRange(min=0), default=0, show_default=True)
@KNOWN_AT_OPTION
def list_alerts(
    store_url: str,
    status: tuple[str, ...],
    portfolio: tuple[str, ...],
    severity: tuple[str, ...],
    rule: tuple[str, ...],
    start: str | None,
    end: str | None,
    old_since: str | None,
    old_until: str | None,
    old_from: str | None,
    old_to: str | None,
    limit: int,
    offset: int,
    as_known_at: datetime | None,
) -> None:
    """List archived alerts with their review status: open first, then newest window first."""
    period = resolve_period(start, end, old_since, old_until, old_from, old_to)
    click.echo(CAUTION)
    with open_store(store_url, create=False) as store:
        page = list_queue(
            store,
            status=status or None,
            portfolio=portfolio or None,
            severity=severity or None,
            rule=rule or None,
            start=period.start,
            end=period.end,
            limit=limit,
            offset=offset,
            as_known_at=as_known_at,
        )
    click.echo(
        f"{'id':>6}  {'window_end':<10}  {'portfolio':<16}  {'rule':<20}  {'severity':<8}  "
        f"{'value':>11}  {'threshold':>11}  {'status':<12}  last reviewer"
    )
    for item in page.items:
        a = item.alert
        click.echo(
            f"{a.id:>6}  {a.window_end.isoformat():<10}  {_cell(a.portfolio, 16):<16}  {_cell(a.rule, 20):<20}  "
            f"{a.severity:<8}  {a.value:>11.4g}  {a.threshold:>11.4g}  {item.status:<12}  {item.last_reviewer or '-'}"
        )
    shown = f"{offset + 1}-{offset + len(page.items)}" if page.items else "none"
    counts = ", ".join(f"{n} {s}" for s, n in page.counts.items())
    click.echo(f"{shown} of {page.total} alert(s); by status: {counts}; {knowledge_note(as_known_at)}")


@alerts.command()
@click.argument("alert_id", type=int)
@STORE_OPTION
@KNOWN_AT_OPTION
def show(alert_id: int, store_url: str, as_known_at: datetime | None) -> None:
    """Show one alert: every archived field, its status and its whole review history."""
    click.echo(CAUTION)
    click.echo(knowledge_note(as_known_at))
    with open_store(store_url, create=False) as store:
        history = alert_history(store, alert_id, as_known_at=as_known_at)
    alert = history.alert
    for name in AlertRecord.__dataclass_fields__:
        if name in ("explanation", "portfolio_id"):
            continue  # the explanation is printed as text below
        value = getattr(alert, name)
        click.echo(f"{name:<16} {value.isoformat() if hasattr(value, 'isoformat') else value}")
    click.echo(f"{'status':<16} {history.status}")
    click.echo("explanation")
    for line in explanation_text(alert.explanation).splitlines():
        click.echo(f"  {line}")
    if not history.reviews:
        click.echo("reviews          none")
    for review in history.reviews:
        comment = f": {review.comment}" if review.comment else ""
        stamp = review.created_at.isoformat()
        click.echo(f"review {review.id:<9} {stamp} {review.action} by {review.reviewer}{comment}")
    allowed = next_actions(history.status)
    click.echo(f"next             {', '.join(allowed) if allowed else 'nothing (closed)'}")


@alerts.command()
@click.argument("alert_id", type=int)
@STORE_OPTION
@click.option(
    "--action",
    type=click.Choice(ACTIONS),
    required=True,
    help="acknowledge it, escalate it, dismiss it as noise, or close it.",
)
@click.option("--reviewer", required=True, help="Who reviews.")
@click.option("--comment", default="", help="Why (required to escalate or dismiss).")
def review(alert_id: int, store_url: str, action: str, reviewer: str, comment: str) -> None:
    """Review ALERT_ID: a chained review record (the alert itself never changes).

    An escalated alert is closed only by a reviewer other than the one who escalated it.
    """
    click.echo(CAUTION)
    with open_store(store_url, create=False) as store:
        record = review_alert(store, alert_id, action, reviewer, comment)
        status = alert_history(store, alert_id).status
    click.echo(
        f"review {record.id} of alert {alert_id} recorded ({record.action}); status {status}; "
        f"ledger seq {record.seq}, hash {record.entry_hash}"
    )


@alerts.command()
@STORE_OPTION
@click.option("--format", "fmt", type=click.Choice(["csv", "jsonl"]), required=True)
@click.option(
    "--what",
    type=click.Choice(["alerts", "reviews"]),
    default="alerts",
    show_default=True,
    help="One row per alert, or one row per review.",
)
@period_options
@click.option("--portfolio", multiple=True, help="Only this portfolio; repeat or comma-separate.")
@click.option("--status", multiple=True, help="Only alerts of this status; repeat or comma-separate.")
@click.option(
    "--out",
    "out_path",
    type=click.Path(path_type=Path, dir_okay=False),
    default=None,
    help="Write to this file (default: standard output).",
)
@KNOWN_AT_OPTION
def export(
    store_url: str,
    fmt: str,
    what: str,
    start: str | None,
    end: str | None,
    old_since: str | None,
    old_until: str | None,
    old_from: str | None,
    old_to: str | None,
    portfolio: tuple[str, ...],
    status: tuple[str, ...],
    out_path: Path | None,
    as_known_at: datetime | None,
) -> None:
    """Export alerts (or their reviews) for programs: a header row first, the caution in a column.

    Each record states the knowledge it shows (``known_at``: ``current``, or the moment of
    ``--as-known-at``). CSV reads with ``pandas.read_csv(path)`` as it is; values are exact; text cells that a
    spreadsheet would run as a formula are prefixed with an apostrophe. JSON Lines: one record per line.
    """
    period = resolve_period(start, end, old_since, old_until, old_from, old_to)
    with open_store(store_url, create=False) as store:
        text = export_alerts(
            store,
            fmt,  # type: ignore[arg-type]
            what=what,  # type: ignore[arg-type]
            start=period.start,
            end=period.end,
            portfolio=portfolio or None,
            status=status or None,
            as_known_at=as_known_at,
        )
    if out_path is None:
        click.echo(text, nl=False)
        return
    out_path.write_text(text, encoding="utf-8")
    click.echo(CAUTION)
    click.echo(f"{what} for review written to {out_path}")
