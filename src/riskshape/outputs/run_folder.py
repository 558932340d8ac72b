"""Writing a run's results to a folder: features (CSV and Parquet), diagrams, left-out assets, manifest.

Everything is first written to a temporary folder beside the target and moved into place only
when complete, so a failure leaves nothing half-written.
"""

from __future__ import annotations

import json
import os
import shutil
import tempfile
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from riskshape.caution import CAUTION
from riskshape.compute.monitor import MonitorResult
from riskshape.compute.persistence import describe_backend, resolve_backend
from riskshape.errors import DataError

__all__ = ["RunFiles", "write_run", "diagrams_table", "run_manifest"]


@dataclass(frozen=True)
class RunFiles:
    """Paths of what :func:`write_run` wrote."""

    folder: Path
    features_csv: Path
    features_parquet: Path
    diagrams: Path
    left_out: Path
    manifest: Path


def diagrams_table(result: MonitorResult) -> pd.DataFrame:
    """Every finite bar of every window in one long table: ``window_end, dim, birth, death``.

    Examples
    --------
    A window of n assets has n - 1 finite H0 bars, the edges of its minimum spanning tree:

    >>> from riskshape import Config, monitor
    >>> from riskshape.demo import generate_scenario
    >>> scenario = generate_scenario(seed=1, n_days=90, assets_per_sector=3)
    >>> run = monitor(scenario.prices, Config(window=20, compute={"executor": "serial"}))
    >>> table = diagrams_table(run)
    >>> list(table.columns), sorted(table["dim"].unique().tolist())
    (['window_end', 'dim', 'birth', 'death'], [0, 1])
    >>> h0_bars = table[table["dim"] == 0].groupby("window_end").size()
    >>> bool((h0_bars == run.features["n_assets"] - 1).all()), len(h0_bars)
    (True, 71)
    """
    parts = []
    for end, window in zip(result.window_ends, result.windows):
        for dim, dgm in enumerate(window.diagrams):
            if len(dgm):
                parts.append(
                    pd.DataFrame(
                        {
                            "window_end": np.repeat(end, len(dgm)),
                            "dim": np.full(len(dgm), dim, dtype=np.int8),
                            "birth": dgm[:, 0].astype(np.float32),
                            "death": dgm[:, 1].astype(np.float32),
                        }
                    )
                )
    if not parts:
        return pd.DataFrame(
            {
                "window_end": pd.Series(dtype="datetime64[ns]"),
                "dim": pd.Series(dtype=np.int8),
                "birth": pd.Series(dtype=np.float32),
                "death": pd.Series(dtype=np.float32),
            }
        )
    return pd.concat(parts, ignore_index=True)


def run_manifest(result: MonitorResult, source: str) -> dict[str, Any]:
    """The run manifest: configuration, its hash, the input-data hash, package version, extent, Rips backend."""
    return {
        "caution": CAUTION,
        "package": "riskshape",
        "package_version": result.package_version,
        "created_at": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "source": source,
        "input_hash": result.input_hash,
        "config_hash": result.config.hash(),
        "config": result.config.to_mapping(),
        "rips_backend": {
            "configured": result.config.rips_backend,
            "ran": resolve_backend(result.config.rips_backend),
            "library": describe_backend(result.config.rips_backend, result.config.maxdim),
        },
        "assets": list(result.prices.columns),
        "first_date": str(result.prices.index[0].date()),
        "last_date": str(result.prices.index[-1].date()),
        "n_windows": len(result.window_ends),
        "first_window_end": str(result.window_ends[0].date()) if len(result.window_ends) else None,
        "last_window_end": str(result.window_ends[-1].date()) if len(result.window_ends) else None,
        "conventions": {
            "distance": "d = sqrt(2 (1 - rho)), clipped to [0, 2]",
            "diagrams": "Vietoris-Rips, finite bars only (the infinite H0 bar is dropped), float32 values",
            "landscape": "exact L1/L2 norms over all layers (Bubenik 2015)",
            "wasserstein": f"order p = {result.config.order_p}, L-infinity ground metric",
            "bottleneck": "L-infinity ground metric",
        },
    }


def write_run(
    result: MonitorResult, out_dir: str | os.PathLike[str], source: str, data_quality: Sequence[str] = ()
) -> RunFiles:
    """Write a run's results into ``out_dir`` (created if needed), all or nothing.

    Parameters
    ----------
    result : MonitorResult
    out_dir : path-like
    source : str
        Where the prices came from (recorded in the manifest).
    data_quality : sequence of str
        Data-quality findings of the prices (:func:`riskshape.check_quality`), recorded in the manifest.

    Returns
    -------
    RunFiles

    Raises
    ------
    DataError
        If ``out_dir`` exists and is not a folder, or cannot be written.

    Examples
    --------
    >>> import json
    >>> import tempfile
    >>> from pathlib import Path
    >>> from riskshape import Config, monitor
    >>> from riskshape.demo import generate_scenario
    >>> scenario = generate_scenario(seed=1, n_days=90, assets_per_sector=3)
    >>> run = monitor(scenario.prices, Config(window=20, compute={"executor": "serial"}))
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     files = write_run(run, Path(folder) / "run", source="generate_scenario(seed=1, n_days=90)")
    ...     names = sorted(p.name for p in files.folder.iterdir())
    ...     manifest = json.loads(files.manifest.read_text())
    >>> names
    ['diagrams.parquet', 'features.csv', 'features.parquet', 'left_out.csv', 'manifest.json']
    >>> manifest["n_windows"] == len(run.window_ends), manifest["config_hash"] == run.config.hash()
    (True, True)
    """
    target = Path(out_dir)
    if target.exists() and not target.is_dir():
        raise DataError(f"--out {target}: exists and is not a folder; give a folder path")
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        staging = Path(tempfile.mkdtemp(prefix=".riskshape-", dir=target.parent))
    except OSError as err:
        raise DataError(f"--out {target}: cannot write there ({err.strerror})") from None
    try:
        result.features.to_csv(staging / "features.csv", float_format="%.9g")
        result.features.to_parquet(staging / "features.parquet")
        diagrams_table(result).to_parquet(staging / "diagrams.parquet", index=False)
        result.left_out.to_csv(staging / "left_out.csv", index=False)
        (staging / "manifest.json").write_text(
            json.dumps({**run_manifest(result, source), "data_quality": list(data_quality)}, indent=2) + "\n"
        )
        target.mkdir(exist_ok=True)
        for item in staging.iterdir():
            os.replace(item, target / item.name)
    except OSError as err:
        raise DataError(f"--out {target}: cannot write there ({err.strerror})") from None
    finally:
        shutil.rmtree(staging, ignore_errors=True)
    return RunFiles(
        folder=target,
        features_csv=target / "features.csv",
        features_parquet=target / "features.parquet",
        diagrams=target / "diagrams.parquet",
        left_out=target / "left_out.csv",
        manifest=target / "manifest.json",
    )
