"""``riskshape run``: prices file in, features, diagrams and a manifest out."""

from __future__ import annotations

import time
from dataclasses import replace
from pathlib import Path

import click

from riskshape import CAUTION, Config, DataError, archive_run, check_cost, check_quality, monitor, read_prices
from riskshape.alerts import readiness_lines
from riskshape.cli.progress import progress_bar
from riskshape.compute import StageTimes, describe_backend
from riskshape.outputs import write_run
from riskshape.store import open_store
from riskshape.types import ExecutorKind

__all__ = ["run", "load_config", "format_stage_times"]

SHOWN_FINDINGS = 10
"""Data-quality findings printed; the manifest lists every one."""


def load_config(path: Path | None) -> Config:
    """The configuration file given, or the defaults."""
    return Config.from_toml(path) if path is not None else Config()


@click.command()
@click.option(
    "--prices",
    "prices_path",
    type=click.Path(path_type=Path),
    required=True,
    help="Price table: CSV or Parquet, wide (date + one column per asset) or long (date, asset, price).",
)
@click.option(
    "--config",
    "config_path",
    type=click.Path(path_type=Path),
    default=None,
    help="TOML configuration (see config/default.toml); defaults apply without it.",
)
@click.option("--out", "out_dir", type=click.Path(path_type=Path), required=True, help="Folder for the results.")
@click.option(
    "--executor",
    type=click.Choice(["serial", "process", "dask"]),
    default=None,
    help="Where windows are computed (overrides [compute] executor).",
)
@click.option("--scheduler", default=None, help="Dask scheduler address, with --executor dask.")
@click.option(
    "--store",
    "store_url",
    default=None,
    help="Archive URL (sqlite:///FILE or postgresql+psycopg://...); default: OUT/riskshape.sqlite.",
)
@click.option("--portfolio", default=None, help="Portfolio name in the archive; default: the prices file's stem.")
@click.option(
    "--profile",
    is_flag=True,
    default=False,
    help="Print where the run's time went, by stage (persistence, distances, summaries, hand-off, writing).",
)
def run(
    prices_path: Path,
    config_path: Path | None,
    out_dir: Path,
    executor: ExecutorKind | None,
    scheduler: str | None,
    store_url: str | None,
    portfolio: str | None,
    profile: bool,
) -> None:
    """Compute rolling persistence summaries of a price table, archive them and raise alerts."""
    config = load_config(config_path)
    if executor or scheduler:
        compute = config.compute.model_dump()
        compute.update({k: v for k, v in {"executor": executor, "scheduler": scheduler}.items() if v})
        config = config.replace(compute=compute)
    prices = read_prices(prices_path, min_rows=config.window + 1)
    if out_dir.exists() and not out_dir.is_dir():
        raise DataError(f"--out {out_dir}: exists and is not a folder; give a folder path")
    check_cost(prices.shape[1], len(prices), config, source=str(prices_path))
    findings = check_quality(prices, config, source=str(prices_path))
    # resolved before the run: a backend that is not installed is refused before any work
    backend = describe_backend(config.rips_backend, config.maxdim)
    with progress_bar("windows") as tick:
        result = monitor(prices, config, progress=tick, profile=profile)
    writing_started = time.perf_counter()
    files = write_run(result, out_dir, source=str(prices_path), data_quality=[str(f) for f in findings])
    # the archive is written once the run folder is complete
    store_url = store_url or f"sqlite:///{(out_dir / 'riskshape.sqlite').resolve()}"
    with open_store(store_url) as store:
        archived = archive_run(store, portfolio or prices_path.stem, result, source=str(prices_path))
    writing = time.perf_counter() - writing_started
    click.echo(
        f"{len(result.window_ends)} windows of {prices.shape[1]} assets "
        f"({result.window_ends[0].date()} to {result.window_ends[-1].date()})"
    )
    for finding in findings[:SHOWN_FINDINGS]:
        click.echo(f"warning:   {finding}")
    if len(findings) > SHOWN_FINDINGS:
        click.echo(f"warning:   ... and {len(findings) - SHOWN_FINDINGS} more data-quality finding(s), in the manifest")
    click.echo(f"diagrams by: {backend} (rips_backend = {config.rips_backend!r})")
    click.echo(f"features:  {files.features_csv}  ({files.features_parquet.name})")
    click.echo(f"diagrams:  {files.diagrams}")
    click.echo(f"left out:  {files.left_out}")
    click.echo(f"manifest:  {files.manifest}")
    click.echo(
        f"archive:   {store_url} (portfolio '{archived.run.portfolio}', run {archived.run.id}): "
        f"{len(archived.alerts.added)} new alert(s), {archived.alerts.existing} already archived"
    )
    if result.stage_times is not None:
        click.echo(format_stage_times(replace(result.stage_times, writing=writing)))
    for line in readiness_lines(result.features, config.alerts.rules, config.step):
        click.echo(f"rule {line}")
    click.echo(CAUTION)


def format_stage_times(times: StageTimes) -> str:
    """The table ``riskshape run --profile`` prints: seconds and share of each stage.

    Parameters
    ----------
    times : StageTimes
        Seconds by stage, summed over windows and workers.

    Returns
    -------
    str
        One line per stage, then the total.

    Examples
    --------
    >>> print(format_stage_times(StageTimes(persistence=3.0, writing=1.0)).splitlines()[0])
    time by stage (seconds, summed over workers):
    """
    lines = ["time by stage (seconds, summed over workers):"]
    labels = {"handoff": "hand-off to workers", "distance_matrix": "distance matrix"}
    for name, seconds, share in times.rows():
        lines.append(f"  {labels.get(name, name):<20} {seconds:9.3f} s  {100 * share:5.1f}%")
    lines.append(f"  {'total':<20} {times.total:9.3f} s")
    return "\n".join(lines)
