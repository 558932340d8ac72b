"""The service's settings: read from RISKSHAPE_* environment variables, refused naming the variable's key."""

from __future__ import annotations

import pytest

from riskshape.errors import ConfigError
from riskshape_service.settings import ServiceSettings


def test_service_settings_from_the_environment() -> None:
    settings = ServiceSettings.from_env({"RISKSHAPE_STORE_URL": "sqlite:///x.sqlite", "RISKSHAPE_MAX_PAGE_SIZE": "50"})
    assert settings.store_url == "sqlite:///x.sqlite" and settings.max_page_size == 50
    with pytest.raises(ConfigError, match=r"environment \(RISKSHAPE_\*\): 'max_page_size'.*'abc'"):
        ServiceSettings.from_env({"RISKSHAPE_MAX_PAGE_SIZE": "abc"})


def test_service_settings_built_in_code_raise_our_error() -> None:
    with pytest.raises(
        ConfigError, match=r"ServiceSettings\(\.\.\.\): 'max_body_bytes'.*greater than or equal to 1024"
    ):
        ServiceSettings(max_body_bytes=10)
    assert ServiceSettings(log_level="debug").log_level == "debug"


def test_the_library_configuration_holds_no_service_settings() -> None:
    import riskshape.config

    assert not hasattr(riskshape.config, "ServiceSettings")
