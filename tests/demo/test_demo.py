"""The demo end to end, as the README's first command runs it.

The scenario's regimes are known (riskshape.demo.scenario), so the checks below compare what the
pipeline reports with that ground truth, which the pipeline never sees.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from matplotlib.image import imread

from riskshape.caution import CAUTION


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, subprocess.CompletedProcess[str]]:
    out = tmp_path_factory.mktemp("demo")
    done = subprocess.run(
        [sys.executable, "-m", "riskshape", "demo", "--out", str(out)],
        capture_output=True,
        text=True,
        timeout=300,
        check=False,
    )
    return out, done


def test_demo_exits_cleanly_and_prints_the_caution(demo_run: tuple[Path, subprocess.CompletedProcess[str]]) -> None:
    out, done = demo_run
    assert done.returncode == 0, done.stderr
    assert CAUTION in done.stdout
    assert "Traceback" not in done.stderr
    for name in (
        "prices.csv",
        "run/features.csv",
        "run/features.parquet",
        "run/diagrams.parquet",
        "run/manifest.json",
        "summaries.png",
        "summaries.svg",
        "stress_diagram.png",
    ):
        assert (out / name).is_file(), name


def test_demo_plots_are_drawn(demo_run: tuple[Path, subprocess.CompletedProcess[str]]) -> None:
    out, _ = demo_run
    for name in ("summaries.png", "stress_diagram.png"):
        pixels = imread(out / name)
        assert pixels.shape[0] > 300 and pixels.shape[1] > 300
        assert pixels[..., :3].std() > 0.05  # not a blank canvas
    assert "not investment advice" in (out / "summaries.svg").read_text()


def test_demo_summaries_follow_the_known_regimes(demo_run: tuple[Path, subprocess.CompletedProcess[str]]) -> None:
    # Ground truth: the scenario's stress regime loads every asset on one common factor, so windows
    # inside it must show higher mean correlation and shorter H0 bars (clusters merged) than calm ones.
    from riskshape.demo.scenario import generate_scenario

    out, _ = demo_run
    regimes = generate_scenario(seed=7).regimes.set_index("name")
    features = pd.read_parquet(out / "run" / "features.parquet")
    calm = features.loc[regimes.loc["calm", "start"] : regimes.loc["calm", "end"]]
    stress_end = regimes.loc["stress", "end"]
    stress = features.loc[stress_end - pd.Timedelta(days=30) : stress_end]
    assert stress["mean_correlation"].mean() > calm["mean_correlation"].mean() + 0.3
    assert stress["h0_total_persistence"].mean() < 0.8 * calm["h0_total_persistence"].mean()
    manifest = json.loads((out / "run" / "manifest.json").read_text())
    assert manifest["n_windows"] == len(features)


def test_demo_alerts_near_the_stress_episode(demo_run: tuple[Path, subprocess.CompletedProcess[str]]) -> None:
    # At least one alert in the 60 days before the stress regime starts or its first 20 days.
    from riskshape.demo.scenario import generate_scenario

    _, done = demo_run
    start = generate_scenario(seed=7).stress[0]
    dates = pd.to_datetime([line.split()[0] for line in done.stdout.splitlines() if line.startswith("  20")])
    gaps = (dates - start).days
    assert np.any((gaps >= -60) & (gaps <= 20)), done.stdout


def test_every_demo_alert_reproduces_from_the_archive(demo_run: tuple[Path, subprocess.CompletedProcess[str]]) -> None:
    # The archive keeps the prices and the configuration: each alert is recomputed from them alone.
    from riskshape.archive import reproduce_alerts
    from riskshape.store import open_store, verify_chain

    out, _ = demo_run
    with open_store(f"sqlite:///{out / 'riskshape.sqlite'}", create=False) as store:
        ids = [a.id for a in store.list_alerts(limit=None).items]
        assert ids
        reports = reproduce_alerts(store, ids)
        assert verify_chain(store).ok
    assert len(reports) == len(ids)
    assert all(report.ok for report in reports), [c for r in reports for c in r.failed]
