"""change_study: the event study over each summary's level and its changes.

Its rows must be those of :func:`riskshape.research.study_table` run on the levels and on changes
made independently with pandas' ``Series.diff`` (reference), each change oriented like its summary
(:func:`riskshape.research.crisis_direction`).
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

from riskshape.errors import ConfigError, ResearchWarning
from riskshape.research import change_study, events_from_periods, study_table


@pytest.fixture
def features(rng: np.random.Generator) -> pd.DataFrame:
    days = pd.bdate_range("2031-01-01", periods=600, name="window_end")
    corr = 0.3 + np.cumsum(rng.normal(0, 0.01, 600))
    corr[450:480] += np.linspace(0.0, 0.3, 30)  # correlations climb before the event at 480
    return pd.DataFrame(
        {
            "n_assets": 12,
            "mean_correlation": corr,
            "h0_total_persistence": 5.0 - 4.0 * corr + rng.normal(0, 0.02, 600),  # falls as correlation rises
            "h1_landscape_l1": np.abs(rng.normal(0.1, 0.05, 600)),
        },
        index=days,
    )


def test_rows_equal_study_table_on_pandas_diffs(features: pd.DataFrame) -> None:
    days = features.index
    events = events_from_periods(pd.DataFrame({"start": [days[480]], "end": [days[500]]}), pd.Series(1.0, days))
    step = 2
    sampled = features.iloc[::step]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ResearchWarning)  # NaN measures are reported; the rows are compared here
        table = change_study(sampled, events, horizons=[20, 60], step=step)
        columns = ["mean_correlation", "h0_total_persistence", "h1_landscape_l1"]
        manual = sampled[columns].copy()
        for c in columns:
            for h in (20, 60):
                manual[f"{c}_chg_{h}"] = sampled[c].diff(h // step)  # reference: pandas
        expected = study_table(
            manual,
            events,
            columns=list(table.index),
            directions={c: "below" if c.startswith("h0_total") else "above" for c in table.index},
        )
    assert list(table.index[:3]) == ["mean_correlation", "mean_correlation_chg_20", "mean_correlation_chg_60"]
    assert table.loc["h0_total_persistence_chg_60", "direction"] == "below"  # inherits the summary's direction
    assert table.loc["h1_landscape_l1_chg_20", ["summary", "change_days"]].tolist() == ["h1_landscape_l1", 20]
    pd.testing.assert_frame_equal(table.drop(columns=["summary", "change_days"]), expected)


def test_bad_columns_and_horizons_are_refused(features: pd.DataFrame) -> None:
    days = features.index
    events = events_from_periods(pd.DataFrame({"start": [days[480]], "end": [days[500]]}), pd.Series(1.0, days))
    with pytest.raises(ConfigError, match=r"columns \['h2_entropy'\] are not in the features"):
        change_study(features, events, columns=["h2_entropy"])
    with pytest.raises(ConfigError, match=r"horizons \[22\] are not positive multiples of step = 5"):
        change_study(features, events, horizons=[20, 22], step=5)
