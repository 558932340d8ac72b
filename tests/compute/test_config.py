"""Configuration: every bad key or value is refused once, at the edge, naming the file and the key."""

from __future__ import annotations

from pathlib import Path

import pytest

from riskshape import Config
from riskshape.errors import ConfigError

REPO = Path(__file__).resolve().parents[2]
RULE = "[alerts]\n[[alerts.rules]]\nname = 'q'\nsummary = '{summary}'\nkind = '{kind}'\n"


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
            f"{RULE.format(kind='quantile', summary='mean_correlation')}threshold = 1.5\n",
            ("'alerts.rules.0.threshold'", "rule 'q'", "must lie in (0, 1)", "1.5", "0.99 for the 99th percentile"),
        ),
        (
            f"{RULE.format(kind='quantile', summary='mean_correlation')}threshold = 0.9\nclear = 0.0\n",
            ("'alerts.rules.0.clear'", "must lie in (0, 1)", "got 0.0"),
        ),
        (
            f"{RULE.format(kind='level', summary='h2_entropy')}threshold = 1.0\n",
            ("'alerts.rules.0.summary'", "an H2 summary", "maxdim = 1", "set maxdim = 2"),
        ),
        (
            f"[monitor]\nmaxdim = 0\n{RULE.format(kind='level', summary='h1_wasserstein')}threshold = 1.0\n",
            ("'alerts.rules.0.summary'", "an H1 summary", "maxdim = 0", "set maxdim = 1"),
        ),
        (
            f"{RULE.format(kind='level', summary='h1_entropie')}threshold = 1.0\n",
            (
                "'alerts.rules.0.summary'",
                "'h1_entropie', which is not a summary",
                "use one of: n_assets,",
                "h1_entropy",
            ),
        ),
        (
            f"{RULE.format(kind='zscore', summary='h0_wasserstein')}threshold = 3.0\n"
            "lookback = 100\nmin_history = 120\n",
            ("'alerts.rules.0.min_history'", "min_history (120) exceeds lookback (100)", "lower min_history"),
        ),
        (
            f"{RULE.format(kind='level', summary='n_assets')}threshold = 1.0\n"
            f"{RULE.format(kind='level', summary='mean_correlation').replace('[alerts]', '')}threshold = 0.5\n",
            ("'alerts.rules.1.name'", "'q' is used twice", "give each rule its own name"),
        ),
        (
            "[monitor]\nengine = 'ripser'\nrips_backend = 'giotto'\n",
            ("'monitor.engine'", "old name of 'rips_backend'", "keep only rips_backend"),
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


def test_rules_are_checked_against_the_configured_maxdim_in_keyword_construction() -> None:
    rule = {"name": "loops", "summary": "h1_landscape_l1", "kind": "level", "threshold": 1.0}
    assert Config(maxdim=1, alerts={"rules": [rule]}).alerts.rules[0].summary == "h1_landscape_l1"
    with pytest.raises(ConfigError, match=r"^Config\(\.\.\.\): 'alerts\.rules\.0\.summary': rule 'loops'"):
        Config(maxdim=0, alerts={"rules": [rule]})
    # the shipped rules watch H1 summaries too: written out, they are checked like any other rules ...
    shipped = [rule.model_dump() for rule in Config().alerts.rules]
    with pytest.raises(ConfigError, match="'alerts.rules.3.summary': rule 'loops_emerging' watches h1_landscape_l1"):
        Config(maxdim=0, alerts={"rules": shipped})
    # ... left to their default, they are checked when evaluated (maxdim = 0 without rules is sound)
    assert Config(maxdim=0).maxdim == Config().replace(maxdim=0).maxdim == 0
    assert Config(maxdim=0).replace(window=90).alerts == Config().alerts


def test_the_old_key_engine_is_read_with_a_warning_and_hashes_alike(tmp_path: Path) -> None:
    with pytest.warns(DeprecationWarning, match="'engine' is renamed 'rips_backend'"):
        old = Config(engine="ripser")  # type: ignore[call-arg]  # the old keyword, as callers still write it
    assert old == Config(rips_backend="ripser") and old.rips_backend == "ripser"
    assert old.hash() == Config(rips_backend="ripser").hash() != Config().hash()
    path = tmp_path / "old.toml"
    path.write_text("[monitor]\nengine = 'ripser'\n")
    with pytest.warns(DeprecationWarning, match="rips_backend = 'ripser'"):
        assert Config.from_toml(path) == old
    archived = Config().to_mapping()  # an archived run's configuration JSON, written before the rename
    archived["monitor"]["engine"] = archived["monitor"].pop("rips_backend")
    with pytest.warns(DeprecationWarning):
        assert Config.from_mapping(archived, where="run 1").hash() == DEFAULT_CONFIG_HASH
    assert "engine" not in Config().to_mapping()["monitor"]


def test_window_settings_take_every_result_key_the_windows_use() -> None:
    from dataclasses import fields

    from riskshape.compute.batch import WindowSettings

    # returns are made before the windows, alerts are evaluated after them, compute never changes a
    # result: every other key of Config must reach the workers, so a new key cannot be forgotten
    names = {field.name for field in fields(WindowSettings)} - {"rolling", "baselines"}
    # (daily decides when a day counts, never what a window holds; [checks] warns or refuses before the work;
    # [derived] columns are made from the features table after the windows)
    assert names == set(Config.model_fields) - {"returns", "alerts", "compute", "daily", "checks", "derived"}
    config = Config(
        window=90,
        step=3,
        min_coverage=0.8,
        correlation="spearman",
        maxdim=2,
        order_p=2.0,
        rips_backend="ripser",
        embedding="point_cloud",
        standardize_cloud=False,
        alerts={"rules": []},
    )
    settings = WindowSettings.from_config(config, rolling=False)
    assert {name: getattr(settings, name) for name in names} == {name: getattr(config, name) for name in names}
    assert settings.rolling is False and WindowSettings.from_config(config).rolling is True
