"""Geofence rules over whole trajectories, with a probability on every alert.

``kinds`` holds the rule kinds (public: a new kind is one registered class
there, see DEVELOPERS.md); ``evaluate`` finds candidate windows, draws
whole-trajectory samples and turns them into :class:`Alert` records and
``alerts.csv``.
"""

from __future__ import annotations

from harbourwatch.rules.evaluate import Alert, alerts_table, evaluate_rules, write_alerts_csv
from harbourwatch.rules.kinds import RULE_KINDS, RULE_SCHEMAS, RuleKind, register_kind

__all__ = [
    "Alert",
    "alerts_table",
    "evaluate_rules",
    "write_alerts_csv",
    "RULE_KINDS",
    "RULE_SCHEMAS",
    "RuleKind",
    "register_kind",
]
