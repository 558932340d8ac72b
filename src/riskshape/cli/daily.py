"""``riskshape ingest``, ``riskshape days`` and ``riskshape assets``: the daily loop at the command line.

``ingest`` feeds a day's prices (one portfolio, or many with a ``portfolio`` column) through
:class:`riskshape.daily.Ingestor`, the same policy the service applies; ``days list`` shows the
pending days, ``days close`` closes one by hand; ``assets delist`` marks an asset that stopped
trading. Every change is a chained record in the archive.
"""

from __future__ import annotations

import getpass
from datetime import date, datetime
from pathlib import Path

import click

from riskshape import CAUTION, Config, DataError
from riskshape.cli.alerts import KNOWN_AT_OPTION
from riskshape.cli.audit import STORE_OPTION

__all__ = ["ingest", "days", "assets"]


def _who(who: str | None) -> str:
    return who or getpass.getuser() or "command line"


def _report_lines(report: object) -> list[str]:
    from riskshape.daily import IngestReport

    assert isinstance(report, IngestReport)
    lines = [
        f"{report.portfolio}: {report.prices_added} price(s) added, {report.corrections} correction(s), "
        f"{report.windows_added} window(s) added, {len(report.alerts)} alert(s); {report.note}"
    ]
    for day in report.closed:
        lines.append(f"  closed {day}")
    for status in report.pending:
        missing = ", ".join(status.missing) if status.missing else "none (waits for an earlier day)"
        lines.append(f"  pending {status.day}: missing {missing}")
    for alert in report.alerts:
        lines.append(f"  alert {alert.id}: {alert.window_end} {alert.rule} ({alert.severity}) {alert.summary}")
    return lines


def _days_knowledge(as_known_at: datetime | None) -> str:
    """The line stating the knowledge ``days list`` shows."""
    if as_known_at is None:
        return "knowledge: current"
    return f"knowledge: as known at {as_known_at.isoformat()} (later prices, closings and delistings left out)"


def _config(path: Path | None) -> Config:
    return Config.from_toml(path) if path is not None else Config()


@click.command()
@click.option("--prices", "prices_path", required=True, type=click.Path(path_type=Path), help="Day file (CSV).")
@STORE_OPTION
@click.option("--portfolio", default=None, help="The portfolio (omit when the file has a portfolio column).")
@click.option("--correction", is_flag=True, help="Archive prices that differ from archived ones as corrections.")
@click.option("--config", "config_path", default=None, type=click.Path(path_type=Path), help="Configuration TOML.")
def ingest(
    prices_path: Path, store_url: str, portfolio: str | None, correction: bool, config_path: Path | None
) -> None:
    """Feed a day's prices (wide or long CSV; with a portfolio column, for many portfolios)."""
    from riskshape.daily import Ingestor, ingest_many, read_feed
    from riskshape.store import open_store

    click.echo(CAUTION)
    config = _config(config_path)
    feeds = read_feed(prices_path, portfolio)
    with open_store(store_url) as store:
        for name in feeds.portfolios:
            store.ensure_portfolio(name)
        outcomes = ingest_many(store, feeds, Ingestor(config), correction=correction)
    failed = 0
    for outcome in outcomes:
        if outcome.error is not None:
            failed += 1
            click.echo(f"{outcome.portfolio}: refused, nothing archived: {outcome.error}")
        else:
            for line in _report_lines(outcome.report):
                click.echo(line)
            for warning in outcome.warnings:
                click.echo(f"  warning: {warning}")
    if failed:
        raise DataError(
            f"{failed} of {len(outcomes)} portfolio(s) refused (listed above; nothing of them archived); "
            "fix their rows and feed the file again (what was archived is not added twice)"
        )


@click.group()
def days() -> None:
    """Pending days: list them, close one by hand."""


@days.command("list")
@STORE_OPTION
@click.option("--portfolio", required=True)
@KNOWN_AT_OPTION
def list_days(store_url: str, portfolio: str, as_known_at: datetime | None) -> None:
    """List the portfolio's pending days and the assets each still waits for (as known at a moment, if given)."""
    from riskshape.daily import pending_days
    from riskshape.store import open_store

    click.echo(CAUTION)
    click.echo(_days_knowledge(as_known_at))
    with open_store(store_url, create=False) as store:
        pending = pending_days(store, portfolio, as_known_at=as_known_at)
    if not pending:
        click.echo(f"{portfolio}: no pending day")
    for status in pending:
        missing = ", ".join(status.missing) if status.missing else "none (waits for an earlier day)"
        click.echo(f"{status.day}  {status.priced}/{len(status.listed)} priced  missing: {missing}")


@days.command("close")
@STORE_OPTION
@click.option("--portfolio", required=True)
@click.option("--date", "day", required=True, type=click.DateTime(formats=["%Y-%m-%d"]), help="YYYY-MM-DD")
@click.option("--who", default=None, help="Who closes it (default: the login name).")
@click.option("--config", "config_path", default=None, type=click.Path(path_type=Path), help="Configuration TOML.")
def close_day(store_url: str, portfolio: str, day: object, who: str | None, config_path: Path | None) -> None:
    """Close a pending day: it counts, with the assets still absent missing there."""
    from riskshape.daily import Ingestor
    from riskshape.store import open_store

    click.echo(CAUTION)
    plain: date = day.date()  # type: ignore[attr-defined]
    with open_store(store_url, create=False) as store:
        report = Ingestor(_config(config_path)).close_day(store, portfolio, plain, _who(who))
    for line in _report_lines(report):
        click.echo(line)


@click.group()
def assets() -> None:
    """A portfolio's assets: delist one that stopped trading."""


@assets.command("delist")
@STORE_OPTION
@click.option("--portfolio", required=True)
@click.option("--asset", required=True)
@click.option("--last-day", required=True, type=click.DateTime(formats=["%Y-%m-%d"]), help="Last trading day.")
@click.option("--who", default=None, help="Who delists it (default: the login name).")
@click.option("--config", "config_path", default=None, type=click.Path(path_type=Path), help="Configuration TOML.")
def delist(
    store_url: str, portfolio: str, asset: str, last_day: object, who: str | None, config_path: Path | None
) -> None:
    """Mark an asset as no longer trading after its last day; later days do not wait for it."""
    from riskshape.daily import Ingestor
    from riskshape.store import open_store

    click.echo(CAUTION)
    plain: date = last_day.date()  # type: ignore[attr-defined]
    with open_store(store_url, create=False) as store:
        report = Ingestor(_config(config_path)).delist(store, portfolio, asset, plain, _who(who))
    for line in _report_lines(report):
        click.echo(line)
