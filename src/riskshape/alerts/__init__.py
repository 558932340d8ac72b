"""Alert rules over the summaries series, evaluated causally.

>>> from riskshape.alerts import evaluate_rules
>>> callable(evaluate_rules)
True
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from riskshape._lazy import lazy_exports

if TYPE_CHECKING:
    from riskshape.alerts.carry import RuleCarry as RuleCarry
    from riskshape.alerts.carry import RulesCarry as RulesCarry
    from riskshape.alerts.carry import advance_rules as advance_rules
    from riskshape.alerts.carry import carry_rules as carry_rules
    from riskshape.alerts.carry import lookback_needed as lookback_needed
    from riskshape.alerts.model import Alert as Alert
    from riskshape.alerts.model import Firing as Firing
    from riskshape.alerts.readiness import describe_readiness as describe_readiness
    from riskshape.alerts.readiness import readiness_lines as readiness_lines
    from riskshape.alerts.rules import RuleState as RuleState
    from riskshape.alerts.rules import active_rules as active_rules
    from riskshape.alerts.rules import evaluate_rule as evaluate_rule
    from riskshape.alerts.rules import evaluate_rules as evaluate_rules
    from riskshape.alerts.rules import recheck_firing as recheck_firing
    from riskshape.alerts.rules import rule_state as rule_state
    from riskshape.alerts.rules import rule_states as rule_states
    from riskshape.alerts.rules import windows_until_ready as windows_until_ready
    from riskshape.alerts.thresholds import trailing_levels as trailing_levels

_EXPORTS = {
    "RuleCarry": "riskshape.alerts.carry",
    "RulesCarry": "riskshape.alerts.carry",
    "advance_rules": "riskshape.alerts.carry",
    "carry_rules": "riskshape.alerts.carry",
    "lookback_needed": "riskshape.alerts.carry",
    "trailing_levels": "riskshape.alerts.thresholds",
    "Alert": "riskshape.alerts.model",
    "Firing": "riskshape.alerts.model",
    "describe_readiness": "riskshape.alerts.readiness",
    "readiness_lines": "riskshape.alerts.readiness",
    "RuleState": "riskshape.alerts.rules",
    "active_rules": "riskshape.alerts.rules",
    "evaluate_rule": "riskshape.alerts.rules",
    "evaluate_rules": "riskshape.alerts.rules",
    "recheck_firing": "riskshape.alerts.rules",
    "rule_state": "riskshape.alerts.rules",
    "rule_states": "riskshape.alerts.rules",
    "windows_until_ready": "riskshape.alerts.rules",
}

__all__ = list(_EXPORTS)

__getattr__, __dir__ = lazy_exports(__name__, _EXPORTS)
