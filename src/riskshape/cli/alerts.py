"""``riskshape alerts``: list, show, review and export archived alerts."""

from __future__ import annotations

from pathlib import Path

import click

from riskshape import CAUTION
from riskshape.cli.audit import STORE_OPTION
from riskshape.explain import explanation_text
from riskshape.outputs import EXPORT_COLUMNS, export_alerts
from riskshape.store import REVIEW_ACTIONS, open_store

__all__ = ["alerts"]


@click.group()
def alerts() -> None:
    """Archived alerts: list, show, review, export."""


@alerts.command("list")
@STORE_OPTION
@click.option("--portfolio", default=None, help="Only this portfolio.")
@click.option("--since", default=None, metavar="DATE", help="Window end on or after DATE (YYYY-MM-DD).")
@click.option("--until", default=None, metavar="DATE", help="Window end on or before DATE (YYYY-MM-DD).")
@click.option("--severity", multiple=True, type=click.Choice(["info", "warning", "critical"]), help="Repeatable.")
@click.option("--rule", default=None, help="Only this rule.")
@click.option("--reviewed/--unreviewed", default=None, help="Only alerts with / without a review.")
@click.option("--limit", type=click.IntRange(min=0), default=50, show_default=True)
@click.option("--offset", type=click.IntRange(min=0), default=0, show_default=True)
def list_alerts(
    store_url: str,
    portfolio: str | None,
    since: str | None,
    until: str | None,
    severity: tuple[str, ...],
    rule: str | None,
    reviewed: bool | None,
    limit: int,
    offset: int,
) -> None:
    """List archived alerts, oldest window first."""
    click.echo(CAUTION)
    with open_store(store_url, create=False) as store:
        page = store.list_alerts(
            portfolio=portfolio,
            since=since,
            until=until,
            severity=severity or None,
            rule=rule,
            reviewed=reviewed,
            limit=limit,
            offset=offset,
        )
        click.echo(
            f"{'id':>6}  {'window_end':<10}  {'portfolio':<16}  {'rule':<24}  {'severity':<8}  "
            f"{'value':>12}  {'threshold':>12}"
        )
        for a in page.items:
            click.echo(
                f"{a.id:>6}  {a.window_end.isoformat():<10}  {a.portfolio[:16]:<16}  {a.rule[:24]:<24}  "
                f"{a.severity:<8}  {a.value:>12.6g}  {a.threshold:>12.6g}"
            )
    shown = f"{offset + 1}-{offset + len(page.items)}" if page.items else "none"
    click.echo(f"{shown} of {page.total} alert(s)")


@alerts.command()
@click.argument("alert_id", type=int)
@STORE_OPTION
def show(alert_id: int, store_url: str) -> None:
    """Show one alert with every archived field and its reviews."""
    click.echo(CAUTION)
    with open_store(store_url, create=False) as store:
        detail = store.get_alert(alert_id)
    for name in EXPORT_COLUMNS[:-2]:
        if name == "explanation":
            continue  # printed as text below
        value = getattr(detail.alert, name)
        click.echo(f"{name:<16} {value.isoformat() if hasattr(value, 'isoformat') else value}")
    click.echo("explanation")
    for line in explanation_text(detail.alert.explanation).splitlines():
        click.echo(f"  {line}")
    if not detail.reviews:
        click.echo("reviews          none")
    for review in detail.reviews:
        comment = f": {review.comment}" if review.comment else ""
        stamp = review.created_at.isoformat()
        click.echo(f"review {review.id:<9} {stamp} {review.action} by {review.reviewer}{comment}")


@alerts.command()
@click.argument("alert_id", type=int)
@STORE_OPTION
@click.option(
    "--action",
    type=click.Choice(REVIEW_ACTIONS),
    required=True,
    help="acknowledge it, dismiss it as noise, or escalate it.",
)
@click.option("--reviewer", required=True, help="Who reviews.")
@click.option("--comment", default="", help="Why.")
def review(alert_id: int, store_url: str, action: str, reviewer: str, comment: str) -> None:
    """Append a review of ALERT_ID (the alert itself never changes)."""
    click.echo(CAUTION)
    with open_store(store_url, create=False) as store:
        record = store.append_review(alert_id, action, reviewer, comment)
    click.echo(
        f"review {record.id} of alert {alert_id} recorded ({record.action}); ledger seq {record.seq}, "
        f"hash {record.entry_hash}"
    )


@alerts.command()
@STORE_OPTION
@click.option("--format", "fmt", type=click.Choice(["csv", "jsonl"]), required=True)
@click.option("--from", "start", default=None, metavar="DATE", help="Window end on or after DATE (YYYY-MM-DD).")
@click.option("--to", "end", default=None, metavar="DATE", help="Window end on or before DATE (YYYY-MM-DD).")
@click.option("--portfolio", default=None, help="Only this portfolio.")
@click.option(
    "--out",
    "out_path",
    type=click.Path(path_type=Path, dir_okay=False),
    default=None,
    help="Write to this file (default: standard output).",
)
def export(
    store_url: str, fmt: str, start: str | None, end: str | None, portfolio: str | None, out_path: Path | None
) -> None:
    """Export alerts for review: the caution line first, then one alert per row with its hashes.

    CSV text cells that a spreadsheet would run as a formula are prefixed with an apostrophe;
    JSON Lines keeps every value exactly as archived.
    """
    with open_store(store_url, create=False) as store:
        text = export_alerts(store, fmt, since=start, until=end, portfolio=portfolio)  # type: ignore[arg-type]
    if out_path is None:
        click.echo(text, nl=False)
        return
    out_path.write_text(text, encoding="utf-8")
    click.echo(CAUTION)
    click.echo(f"alerts for review written to {out_path}")
