"""The public research API: every exported name works, and the event study reads each summary the right way up.

The crisis directions are checked on the demo scenario, whose stress regime is known
(riskshape.demo.scenario): correlations rise in it by construction, and the correlation
distance's H0 lengths (the single-linkage merge heights) shrink as correlations rise
(Mantegna 1999: d = sqrt(2 (1 - rho)) falls as rho rises).
"""

from __future__ import annotations

import warnings

import pytest

import riskshape.research as research
from riskshape import Config, monitor
from riskshape.demo.scenario import generate_scenario
from riskshape.errors import ResearchWarning
from riskshape.research import crisis_direction, events_from_periods, features_with_baselines, study_table
from riskshape.research.events import equal_weight_wealth


@pytest.mark.parametrize("name", research.__all__)
def test_every_exported_name_loads_and_is_documented(name: str) -> None:
    obj = getattr(research, name)
    assert obj.__module__.startswith("riskshape.research.")
    doc = obj.__doc__ or ""
    assert doc.strip(), name
    if callable(obj) and not isinstance(obj, type):
        assert "Returns\n" in doc and "Parameters\n" in doc, name


def test_study_table_reads_each_summary_the_way_it_moves_in_a_crisis() -> None:
    scenario = generate_scenario(seed=7)
    result = monitor(scenario.prices, Config(window=60, step=5, compute={"executor": "serial"}))
    features = features_with_baselines(result)
    stress = scenario.regimes[scenario.regimes["name"] == "stress"]
    events = events_from_periods(stress, equal_weight_wealth(result.prices))
    columns = ["mean_correlation", "h0_total_persistence", "h0_landscape_l1", "base_ew_volatility"]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ResearchWarning)
        table = study_table(features, events, columns=columns, horizon=20, post_event_days=60)
        flipped = study_table(
            features, events, columns=columns, directions={"h0_total_persistence": "above"}, post_event_days=60
        )
    assert table["direction"].tolist() == ["above", "below", "below", "above"]
    assert table["direction"].tolist() == [crisis_direction(c) for c in columns]
    # read the right way up, each of them ranks the windows before the stress above the calm ones
    assert (table["auc"].astype(float) > 0.5).all()
    assert flipped.loc["h0_total_persistence", "direction"] == "above"  # overridable
    assert flipped.loc["h0_total_persistence", "auc"] == pytest.approx(1 - table.loc["h0_total_persistence", "auc"])
