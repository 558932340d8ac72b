"""``riskshape demo``: the fictional scenario through the whole pipeline."""

from __future__ import annotations

from pathlib import Path

import click

from riskshape import CAUTION
from riskshape.cli.progress import progress_bar
from riskshape.demo import run_demo

__all__ = ["demo"]


@click.command()
@click.option(
    "--out",
    "out_dir",
    type=click.Path(path_type=Path),
    default=Path("riskshape-demo"),
    show_default=True,
    help="Folder for the demo's prices, results, plots and store.",
)
@click.option("--seed", type=int, default=7, show_default=True, help="Seed of the fictional scenario.")
def demo(out_dir: Path, seed: int) -> None:
    """Run the whole pipeline on a fictional market whose regimes are known."""
    click.echo("Generating a fictional market (6 invented sectors, 48 invented assets, 5 known regimes)...")
    with progress_bar("windows") as tick:
        report = run_demo(out_dir, seed=seed, progress=tick)
    result, scenario = report.result, report.scenario
    click.echo(
        f"Monitored {len(result.window_ends)} windows of {result.config.window} days "
        f"({result.window_ends[0].date()} to {result.window_ends[-1].date()})."
    )
    click.echo("\nKnown regimes of the scenario:")
    for row in scenario.regimes.itertuples():
        inside = result.features.loc[row.start : row.end]
        click.echo(
            f"  {row.name:<9} {row.start.date()} to {row.end.date()}   "
            f"mean correlation {inside['mean_correlation'].mean():.2f}   "
            f"H0 total persistence {inside['h0_total_persistence'].mean():.1f}   "
            f"H1 landscape L1 {inside['h1_landscape_l1'].mean():.4f}"
        )
    click.echo(f"\n{len(report.firings)} alerts raised by the default rules:")
    changes = scenario.changes
    for firing in report.firings:
        nearest = changes.iloc[(changes - firing.window_end).abs().argmin()]
        gap = (firing.window_end - nearest).days
        click.echo(
            f"  {firing.window_end.date()}  {firing.severity:<8} {firing.rule:<22} "
            f"{firing.summary} = {firing.value:.4g} (threshold {firing.threshold:.4g}); "
            f"{gap:+d} days from the regime change of {nearest.date()}"
        )
    click.echo("\nWritten:")
    click.echo(f"  prices            {report.prices_csv}")
    click.echo(f"  features          {report.files.features_csv}")
    click.echo(f"  diagrams          {report.files.diagrams}")
    click.echo(f"  manifest          {report.files.manifest}")
    click.echo(f"  summaries plot    {report.summaries_plot}")
    click.echo(f"  stress diagram    {report.diagram_plot}  (window ending {report.stress_window.date()})")
    if report.store_url:
        click.echo(f"  archive           {report.store_url}")
        click.echo(f"\nNext: riskshape alerts list --store {report.store_url}")
        click.echo(f"      riskshape audit verify --store {report.store_url}")
    click.echo(f"\n{CAUTION}")
