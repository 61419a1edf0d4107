"""Alerts: rules from the rig file, a state model after ANSI/ISA-18.2 / IEC 62682, and the vectorised engine.

Typical use (docs/alerts.md):

    rules = rules_from_rig(rig, channels)
    engine = AlertEngine(rules)
    for tr in engine.update(signals, batch.quality) + engine.tick(now_s, last_good_t_s):
        writer.write_alert(tr.t_s, tr.log_text(), tr.label)
"""

from monitor.alerts.defaults import MEOP_RULE, default_rules, rules_from_rig
from monitor.alerts.engine import AlertEngine, write_transitions
from monitor.alerts.rules import CONDITIONS, ESTIMATE_KINDS, SEVERITIES, AlertRule
from monitor.alerts.states import CAUSES, AlertState, AlertStatus, AlertTransition

__all__ = [
    "CAUSES",
    "CONDITIONS",
    "ESTIMATE_KINDS",
    "MEOP_RULE",
    "SEVERITIES",
    "AlertEngine",
    "AlertRule",
    "AlertState",
    "AlertStatus",
    "AlertTransition",
    "default_rules",
    "rules_from_rig",
    "write_transitions",
]
