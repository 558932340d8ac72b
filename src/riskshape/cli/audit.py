"""``riskshape audit``: verify the archive's hash chain, print its head, reproduce an alert, sign a period off."""

from __future__ import annotations

import click

from riskshape import CAUTION
from riskshape.store import chain_head, open_store, seal_archive, verify_chain
from riskshape.types import ExecutorKind

__all__ = ["audit", "STORE_OPTION"]


def _store_url(ctx: click.Context, param: click.Parameter, value: str | None) -> str:
    if value:
        return value
    from riskshape import store_url_from_env  # the configuration module (pydantic) only when needed

    url = store_url_from_env()
    if not url:
        raise click.UsageError("--store is required (or set RISKSHAPE_STORE_URL)", ctx=ctx)
    return url


STORE_OPTION = click.option(
    "--store",
    "store_url",
    default=None,
    callback=_store_url,
    help="Archive URL: sqlite:///path/to/archive.sqlite or postgresql+psycopg://user@host:5432/db "
    "(default: RISKSHAPE_STORE_URL).",
)


COVERED_TABLES = ("runs", "prices", "features", "diagrams", "portfolios", "api_keys")
COVERED = "runs, prices, features, diagrams, portfolios, API keys"


@click.group()
def audit() -> None:
    """Check that the archive has not been tampered with, and reproduce archived alerts."""


@audit.command()
@STORE_OPTION
@click.option(
    "--expect-head",
    default=None,
    metavar="COUNT:HASH",
    help="A head printed earlier by 'riskshape audit head' (COUNT:HASH, or HASH): also catches a cut tail.",
)
def verify(store_url: str, expect_head: str | None) -> None:
    """Recompute every hash of the ledger and every commitment; exit 1 naming the first record that does not match."""
    click.echo(CAUTION)
    with open_store(store_url, create=False) as store:
        report = verify_chain(store, expect_head=expect_head)
    if report.ok:
        suffix = " and matches the expected head" if expect_head else ""
        click.echo(f"ok: {report.checked} records verified{suffix}; head {report.head}")
        click.echo(f"covered by them and checked: {COVERED}")
        click.echo(f"merkle root (RFC 6962) of the {report.checked} records: {report.merkle_root}")
        return
    click.echo(f"FAILED: first bad record: {report.first_bad}")
    if report.first_bad is not None and report.first_bad.table in COVERED_TABLES:
        click.echo(
            f"the ledger's {report.checked} records verified (head {report.head}); this row breaks what they cover"
        )
        if report.first_bad.seq == 0 and "not covered" in report.first_bad.reason:
            click.echo("an archive written before commitments existed: 'riskshape audit seal' covers it as it is now")
    else:
        click.echo(f"{report.checked} records before it verified (up to head {report.head})")
    raise click.exceptions.Exit(1)


@audit.command()
@STORE_OPTION
def seal(store_url: str) -> None:
    """Commit rows no chained record covers yet (once, for an archive written before commitments existed)."""
    click.echo(CAUTION)
    with open_store(store_url, create=False) as store:
        added = seal_archive(store)
        head = chain_head(store)
    click.echo(f"{added} commitment(s) appended; head {head}")
    if added:
        click.echo("they vouch for the rows as they are now, not for their history before; keep the new head elsewhere")


@audit.command()
@STORE_OPTION
def head(store_url: str) -> None:
    """Print COUNT:HASH of the ledger's last record, to keep somewhere else for 'verify --expect-head'."""
    click.echo(CAUTION)
    with open_store(store_url, create=False) as store:
        click.echo(str(chain_head(store)))


@audit.command()
@click.argument("alert_id", type=int)
@STORE_OPTION
@click.option(
    "--executor",
    type=click.Choice(["serial", "process"]),
    default="serial",
    show_default=True,
    help="Where the windows are recomputed (never changes a result).",
)
def reproduce(alert_id: int, store_url: str, executor: ExecutorKind) -> None:
    """Recompute ALERT_ID as known when it was raised and as known now; exit 1 unless it is confirmed.

    As known then: from the prices and configuration its run saw; every check must pass. As known
    now: from the prices after every later correction; whether it would still fire, with the value now.
    """
    from riskshape import ComputeConfig, reproduce_alert, reproduce_alert_now  # the engine loads only here

    click.echo(CAUTION)
    compute = ComputeConfig(executor=executor)
    with open_store(store_url, create=False) as store:
        report = reproduce_alert(store, alert_id, compute=compute)
        now = reproduce_alert_now(store, alert_id, compute=compute)
    click.echo("as known when it was raised:")
    width = max(len(c.name) for c in report.checks)
    for check in report.checks:
        mark = "ok  " if check.ok else "FAIL"
        same = check.archived == check.recomputed
        detail = check.archived if same else f"archived {check.archived} | recomputed {check.recomputed}"
        click.echo(f"{mark} {check.name:<{width}}  {detail}")
    click.echo(f"as known now ({now.corrections} price correction(s) since it was raised):")
    click.echo(f"  {now.verdict}")
    agrees = "agrees with" if now.matches_archive else "DIFFERS from"
    click.echo(f"  the archive's current window value {now.archive_value!r} {agrees} the recomputation")
    if report.ok:
        how = "bit-identical" if report.exact else "within float32-level tolerance"
        click.echo(f"alert {alert_id} reproduced ({how})")
        return
    click.echo(f"alert {alert_id} NOT reproduced: {', '.join(c.name for c in report.failed)}")
    raise click.exceptions.Exit(1)


@audit.command("sign-off")
@STORE_OPTION
@click.option("--start", required=True, metavar="DATE", help="First window end of the period (YYYY-MM-DD).")
@click.option("--end", required=True, metavar="DATE", help="Last window end of the period (YYYY-MM-DD).")
@click.option("--portfolio", multiple=True, help="A portfolio signed for; repeat or comma-separate (default: all).")
@click.option("--signer", required=True, help="Who signs the period off.")
def sign_off_period(store_url: str, start: str, end: str, portfolio: tuple[str, ...], signer: str) -> None:
    """Sign a period off: a chained record of the period, portfolios, counts by status and the chain head.

    Refused, listing them, while an alert of the period is open or escalated.
    """
    from riskshape.reviews import sign_off

    click.echo(CAUTION)
    with open_store(store_url, create=False) as store:
        signed = sign_off(store, start, end, portfolio, signer)
    counts = ", ".join(f"{n} {s}" for s, n in signed.counts.items())
    click.echo(f"period {signed.start} to {signed.end} signed off by {signed.signer} ({', '.join(signed.portfolios)})")
    click.echo(f"alerts by status: {counts}")
    click.echo(f"chain head at signing {signed.chain_head}; sign-off record seq {signed.seq}, hash {signed.entry_hash}")


@audit.command("sign-offs")
@STORE_OPTION
def list_sign_offs_command(store_url: str) -> None:
    """List every sign-off: period, portfolios, signer, when, counts by status, chain head."""
    from riskshape.reviews import list_sign_offs

    click.echo(CAUTION)
    with open_store(store_url, create=False) as store:
        signed = list_sign_offs(store)
    for s in signed:
        counts = ", ".join(f"{n} {k}" for k, n in s.counts.items())
        click.echo(
            f"{s.start} to {s.end}  {', '.join(s.portfolios)}  by {s.signer} at {s.signed_at.isoformat()}  "
            f"[{counts}]  head {s.chain_head}"
        )
    click.echo(f"{len(signed)} sign-off(s)")
