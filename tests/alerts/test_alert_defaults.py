"""The rule set shipped in config/default.toml parses and watches columns the engine produces."""

from __future__ import annotations

from pathlib import Path

from riskshape.compute.monitor import feature_columns
from riskshape.config import Config, RuleConfig

DEFAULT_TOML = Path(__file__).resolve().parents[2] / "config" / "default.toml"


def test_default_rules_parse_and_name_real_columns() -> None:
    config = Config.from_toml(DEFAULT_TOML)
    rules = config.alerts.rules
    assert len(rules) >= 4
    assert len({rule.name for rule in rules}) == len(rules)
    columns = set(feature_columns(config.maxdim))
    assert {rule.summary for rule in rules} <= columns
    for rule in rules:
        assert rule.min_history <= rule.lookback, rule.name


def test_default_rules_document_every_rule_key() -> None:
    text = DEFAULT_TOML.read_text(encoding="utf-8")
    alerts_section = text[text.index("[alerts]") :]
    for key in RuleConfig.model_fields:
        assert f"#   {key}" in alerts_section, key
