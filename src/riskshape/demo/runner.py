"""The demo: the fictional scenario through the whole pipeline, with plots and the archive.

``run_demo(out_dir)`` generates :func:`riskshape.demo.scenario.generate_scenario`, writes its prices,
monitors them with the default configuration (``config/default.toml``'s values, which are
``Config()``'s defaults, plus its alert rules), evaluates the rules, archives the run in the
embedded SQLite store, and draws the summaries with the known regime changes marked and the
diagram of the stress window where the common factor dominates most.
"""

from __future__ import annotations

import os
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from riskshape.alerts import Firing, evaluate_rules
from riskshape.compute.monitor import MonitorResult, monitor
from riskshape.config import Config
from riskshape.demo.scenario import Scenario, generate_scenario
from riskshape.outputs.run_folder import RunFiles, write_run

__all__ = ["DemoReport", "run_demo", "DEMO_SUMMARIES", "stress_window_end"]

DEMO_SUMMARIES: tuple[str, ...] = (
    "mean_correlation",
    "h0_total_persistence",
    "h0_wasserstein",
    "h1_landscape_l1",
)


@dataclass(frozen=True)
class DemoReport:
    """What the demo produced and where it put it."""

    scenario: Scenario
    result: MonitorResult
    firings: tuple[Firing, ...]
    files: RunFiles
    prices_csv: Path
    summaries_plot: Path
    diagram_plot: Path
    stress_window: pd.Timestamp
    store_url: str | None


def stress_window_end(result: MonitorResult, scenario: Scenario) -> pd.Timestamp:
    """The window end inside the stress episode where mean correlation peaks.

    Examples
    --------
    >>> from riskshape import Config, monitor
    >>> scenario = generate_scenario(seed=1, assets_per_sector=4)
    >>> run = monitor(scenario.prices, Config(window=60, step=20, compute={"executor": "serial"}))
    >>> end = stress_window_end(run, scenario)
    >>> start, stop = scenario.stress
    >>> correlation = run.features["mean_correlation"]
    >>> bool(start <= end <= stop), bool(correlation[end] > correlation.quantile(0.9))
    (True, True)
    """
    start, end = scenario.stress
    inside = result.features.loc[start:end, "mean_correlation"]
    return pd.Timestamp(inside.idxmax())


def run_demo(
    out_dir: str | os.PathLike[str],
    seed: int = 7,
    config: Config | None = None,
    progress: Callable[[int, int], None] | None = None,
    archive: bool = True,
) -> DemoReport:
    """Run the demo scenario end to end.

    Parameters
    ----------
    out_dir : path-like
        Folder for the prices, the run's files, the plots and the store.
    seed : int
        Scenario seed.
    config : Config, optional
        Defaults to ``Config()``, which is ``config/default.toml``'s content.
    progress : callable, optional
        ``progress(done, total)`` as windows complete.
    archive : bool
        Also write the run into the embedded SQLite store ``out_dir/riskshape.sqlite``.

    Returns
    -------
    DemoReport
    """
    from matplotlib.figure import Figure

    from riskshape.outputs import plots

    out = Path(out_dir)
    config = config or Config()
    scenario = generate_scenario(seed=seed)
    result = monitor(scenario.prices, config, progress=progress)
    files = write_run(result, out / "run", source=f"generate_scenario(seed={seed})")
    prices_csv = out / "prices.csv"
    scenario.prices.to_csv(prices_csv)
    firings = tuple(evaluate_rules(result.features, config.alerts.rules))

    stress_end = stress_window_end(result, scenario)
    by_summary = {name: [f for f in firings if f.summary == name] for name in DEMO_SUMMARIES}
    summaries_fig = plots.plot_summaries(result.features, DEMO_SUMMARIES, alerts=by_summary, regimes=scenario.regimes)
    summaries_plot, _ = plots.save_figure(summaries_fig, out / "summaries")
    diagram_ax = plots.plot_diagram([result.diagram(stress_end, d) for d in range(config.maxdim + 1)])
    diagram_ax.set_title(f"Vietoris-Rips diagram, window ending {stress_end.date()} (stress)", fontsize=9)
    diagram_fig = diagram_ax.figure
    assert isinstance(diagram_fig, Figure), "plot_diagram without ax draws on a new top-level Figure"
    diagram_plot, _ = plots.save_figure(diagram_fig, out / "stress_diagram")
    store_url = None
    if archive:
        from riskshape.archive import archive_run
        from riskshape.store import open_store

        store_url = f"sqlite:///{(out / 'riskshape.sqlite').resolve()}"
        with open_store(store_url) as store:
            archive_run(store, "demo", result, config, source=f"generate_scenario(seed={seed})")
    return DemoReport(
        scenario=scenario,
        result=result,
        firings=firings,
        files=files,
        prices_csv=prices_csv,
        summaries_plot=summaries_plot,
        diagram_plot=diagram_plot,
        stress_window=stress_end,
        store_url=store_url,
    )
