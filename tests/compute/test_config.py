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
            "[alerts]\n[[alerts.rules]]\nname = 'q'\nsummary = 'mean_correlation'\n"
            "kind = 'quantile'\nthreshold = 1.5\n",
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


def test_service_settings_from_the_environment() -> None:
    settings = ServiceSettings.from_env({"RISKSHAPE_STORE_URL": "sqlite:///x.sqlite", "RISKSHAPE_MAX_PAGE_SIZE": "50"})
    assert settings.store_url == "sqlite:///x.sqlite" and settings.max_page_size == 50
    with pytest.raises(ConfigError, match=r"environment \(RISKSHAPE_\*\): 'max_page_size'.*'abc'"):
        ServiceSettings.from_env({"RISKSHAPE_MAX_PAGE_SIZE": "abc"})
