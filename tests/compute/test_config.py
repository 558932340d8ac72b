"""Configuration: every bad key or value is refused once, at the edge, naming the file and the key."""

from __future__ import annotations

from pathlib import Path

import pytest

from riskshape import Config
from riskshape.config import ServiceSettings
from riskshape.errors import ConfigError

REPO = Path(__file__).resolve().parents[2]


def test_the_documented_defaults_are_the_defaults() -> None:
    assert Config.from_toml(REPO / "config" / "default.toml") == Config()
    assert Config.from_mapping(Config().to_mapping()) == Config()


@pytest.mark.parametrize(
    "text, words",
    [
        ("[monitor]\nwindow = 2\n", ("'monitor.window'", "greater than or equal to 5", "(got 2)")),
        ("[monitor]\nwindwo = 60\n", ("unknown key 'monitor.windwo'",)),
        ("[compute]\nexecutor = 'gpu'\n", ("'compute.executor'", "'gpu'")),
        (
            "[alerts]\n[[alerts.rules]]\nname = 'q'\nsummary = 'mean_correlation'\nkind = 'quantile'\nthreshold = 1.5\n",
            ("'alerts.rules.0'", "must lie in (0, 1)", "1.5"),
        ),
        ("[monitors]\nwindow = 60\n", ("unknown section", "monitors")),
        ("[monitor\nwindow = 60\n", ("not valid TOML",)),
    ],
)
def test_bad_files_name_the_file_and_the_key(tmp_path: Path, text: str, words: tuple[str, ...]) -> None:
    path = tmp_path / "mine.toml"
    path.write_text(text)
    with pytest.raises(ConfigError) as caught:
        Config.from_toml(path)
    message = str(caught.value)
    assert str(path) in message
    for word in words:
        assert word in message


def test_keyword_construction_raises_our_error() -> None:
    with pytest.raises(ConfigError, match=r"'maxdim'.*less than or equal to 2"):
        Config(maxdim=3)
    with pytest.raises(ConfigError, match="no such configuration file"):
        Config.from_toml("/nonexistent/riskshape.toml")


def test_changing_a_result_setting_changes_the_hash_and_compute_does_not() -> None:
    base = Config()
    assert base.replace(window=61).hash() != base.hash()
    assert base.replace(compute={"executor": "serial"}).hash() == base.hash()


# Config.hash() of Config(), computed at commit 8dd5e83 (before the Rips backend key was renamed from
# `engine` to `rips_backend`) with `Config().hash()`. Archived runs are looked up by this hash, so a
# change of key names must leave it as it was.
DEFAULT_CONFIG_HASH = "2f40e80623e93a41b6818cf50743cb668b66e964d9e392b2fc26dd7b3155f7ab"


def test_the_default_hash_is_the_one_archived_runs_were_stored_under() -> None:
    assert Config().hash() == DEFAULT_CONFIG_HASH
    assert Config.from_toml(REPO / "config" / "default.toml").hash() == DEFAULT_CONFIG_HASH


def test_service_settings_from_the_environment() -> None:
    settings = ServiceSettings.from_env({"RISKSHAPE_STORE_URL": "sqlite:///x.sqlite", "RISKSHAPE_MAX_PAGE_SIZE": "50"})
    assert settings.store_url == "sqlite:///x.sqlite" and settings.max_page_size == 50
    with pytest.raises(ConfigError, match=r"environment \(RISKSHAPE_\*\): 'max_page_size'.*'abc'"):
        ServiceSettings.from_env({"RISKSHAPE_MAX_PAGE_SIZE": "abc"})
