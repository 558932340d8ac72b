"""Alert rules over the summaries series, evaluated causally."""

from riskshape.alerts.model import Alert, Firing
from riskshape.alerts.rules import (
    RuleState,
    active_rules,
    evaluate_rule,
    evaluate_rules,
    recheck_firing,
    rule_state,
    rule_states,
)

__all__ = [
    "Alert",
    "Firing",
    "RuleState",
    "active_rules",
    "evaluate_rule",
    "evaluate_rules",
    "recheck_firing",
    "rule_state",
    "rule_states",
]
