"""``riskshape report``: one self-contained HTML review of a period of the archive."""

from __future__ import annotations

from datetime import datetime
from pathlib import Path

import click

from riskshape import CAUTION
from riskshape.cli.alerts import KNOWN_AT_OPTION, knowledge_note, period_options, resolve_period
from riskshape.cli.audit import STORE_OPTION
from riskshape.outputs import collect_review, write_report
from riskshape.store import open_store

__all__ = ["report"]


@click.command()
@STORE_OPTION
@period_options
@click.option(
    "--out", "out", type=click.Path(path_type=Path, dir_okay=False), required=True, help="HTML file to write."
)
@click.option("--portfolio", default=None, help="Only this portfolio (default: every portfolio).")
@click.option(
    "--pdf",
    "pdf",
    type=click.Path(path_type=Path, dir_okay=False),
    default=None,
    help="Also write the same report as PDF (needs riskshape[pdf]).",
)
@click.option(
    "--recompute/--no-recompute",
    default=True,
    show_default=True,
    help="Recompute explanations the archive does not hold, from the archived prices.",
)
@KNOWN_AT_OPTION
def report(
    store_url: str,
    start: str | None,
    end: str | None,
    old_since: str | None,
    old_until: str | None,
    old_from: str | None,
    old_to: str | None,
    out: Path,
    portfolio: str | None,
    pdf: Path | None,
    recompute: bool,
    as_known_at: datetime | None,
) -> None:
    """Write a self-contained HTML review of the alerts of a period: values, thresholds, explanations,
    provenance, reviews, summaries over time, chain verification and configuration.
    """
    period = resolve_period(start, end, old_since, old_until, old_from, old_to)
    with open_store(store_url) as store:
        review = collect_review(
            store, period.start, period.end, portfolio=portfolio, recompute=recompute, as_known_at=as_known_at
        )
    path = write_report(review, out, pdf)
    status = "verifies" if review.verification.ok else "DOES NOT VERIFY"
    click.echo(
        f"{len(review.alerts)} alerts from {review.period_from} to {review.period_to}; "
        f"chain {status} (head {review.verification.head})"
    )
    click.echo(knowledge_note(as_known_at))
    click.echo(f"report: {path}" + (f"  (PDF: {pdf})" if pdf is not None else ""))
    click.echo(CAUTION)
