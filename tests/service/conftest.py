"""Fixtures of the service tests: an archive in a temporary SQLite file, one API key per role,
and an app (FastAPI TestClient) over them with a small configuration.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from pathlib import Path

import pandas as pd
import pytest
from fastapi import FastAPI
from fastapi.testclient import TestClient

from riskshape.demo.scenario import generate_scenario
from riskshape.store import open_store
from riskshape_service import create_app
from riskshape_service.settings import ServiceSettings
from tests.kit.service import ROLES, write_config


@pytest.fixture(scope="session")
def scenario_prices() -> pd.DataFrame:
    """24 fictional assets over 60 return days (61 price dates), with the scenario's gaps."""
    return generate_scenario(seed=5, n_days=60, assets_per_sector=4).prices


@pytest.fixture
def store_url(tmp_path: Path) -> str:
    return f"sqlite:///{tmp_path / 'archive.sqlite'}"


@pytest.fixture
def keys(store_url: str) -> dict[str, str]:
    """One fresh API key (token) per role, owned by '<role>-owner'."""
    with open_store(store_url) as store:
        return {role: store.create_api_key(f"{role}-owner", role).token for role in ROLES}


@pytest.fixture
def make_settings(store_url: str, tmp_path: Path) -> Callable[..., ServiceSettings]:
    def make(**overrides: object) -> ServiceSettings:
        values: dict[str, object] = {
            "store_url": store_url,
            "config_path": str(write_config(tmp_path)),
            "rate_limit_per_minute": 100_000,
            "rate_limit_burst": 100_000,
        }
        values.update(overrides)
        return ServiceSettings(**values)

    return make


@pytest.fixture
def app(make_settings: Callable[..., ServiceSettings], keys: dict[str, str]) -> FastAPI:
    return create_app(make_settings())


@pytest.fixture
def client(app: FastAPI) -> Iterator[TestClient]:
    with TestClient(app) as test_client:
        yield test_client


@pytest.fixture
def auth(keys: dict[str, str]) -> Callable[[str], dict[str, str]]:
    """Headers carrying the key of a role."""
    return lambda role: {"X-Riskshape-Key": keys[role]}
