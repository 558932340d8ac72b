"""Shared fixtures: a seeded random generator and a small, cheap scenario.

House rule: no global seed; every random draw comes from a ``numpy.random.default_rng`` made
here (or from a seed that hypothesis draws). Fixtures used inside ``@given`` tests must not be
function-scoped, so the scenario fixtures are session-scoped (and read-only by convention:
tests copy before they change anything).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from riskshape import Config
from riskshape.scenario import Scenario, generate_scenario


def pytest_configure(config: pytest.Config) -> None:
    """Keep hypothesis's failure reports readable under ``filterwarnings = error``.

    When a hypothesis test fails, its pytest plugin imports libcst (to suggest a patch), and
    libcst subclasses ``mypy_extensions.TypedDict``, which warns. Without this filter the warning
    becomes an INTERNALERROR that hides the falsifying example.
    """
    config.addinivalue_line("filterwarnings", "ignore:mypy_extensions.TypedDict is deprecated:DeprecationWarning")


@pytest.fixture
def rng() -> np.random.Generator:
    """A fresh seeded generator for each test."""
    return np.random.default_rng(20240611)


@pytest.fixture(scope="session")
def small_scenario() -> Scenario:
    """The fictional market, cut small: 18 assets (3 per sector), 160 return days.

    It keeps the scenario's gaps and its late-listing asset (the last column is missing for the
    first 180 rows, i.e. the whole cut), so the coverage policy is exercised.
    """
    return generate_scenario(seed=11, n_days=160, assets_per_sector=3)


@pytest.fixture(scope="session")
def small_prices(small_scenario: Scenario) -> pd.DataFrame:
    """A copy of the small scenario's wide prices."""
    return small_scenario.prices.copy()


@pytest.fixture(scope="session")
def small_config() -> Config:
    """Short windows, serial executor: cheap enough to run many times in a test."""
    return Config(window=20, step=1, compute={"executor": "serial"})
