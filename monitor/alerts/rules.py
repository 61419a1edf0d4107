"""Alert rules: what an alert watches, when it sets and clears, how urgent it is.

A rule judges one quantity per sample (a signal's value, its rate of change, the difference of two signals, a
channel's age or its out-of-range flag) against a threshold in SI units. Rig-file [[alerts]] tables become
rules in monitor.alerts.tables; the format is documented in docs/alerts.md.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

from monitor.errors import ConfigError
from monitor.recorder.format import SI_COLUMNS

CONDITIONS = ("above", "below", "rate_above", "rate_below", "disagree", "stale", "out_of_range")
SEVERITIES = ("critical", "warning", "advisory")  # most urgent first
# Conditions that set when the judged quantity rises above the threshold (the others: when it falls below).
RISING = frozenset({"above", "rate_above", "disagree", "stale", "out_of_range"})
# The estimate signals of docs/alerts.md (named in the engine's shared design) and the kind of each.
ESTIMATE_KINDS: dict[str, str] = {
    "thrust_estimated_n": "force", "thrust_measured_n": "force", "isp_delivered_s": "time",
    "thrust_ratio": "dimensionless", "mass_flow_filtered_kg_s": "mass_flow", "mass_flow_nozzle_kg_s": "mass_flow",
    "discharge_coefficient_apparent": "dimensionless", "propellant_flow_gauge_kg": "mass",
    "propellant_pvt_gauge_kg": "mass", "gauge_difference_kg": "mass", "leak_rate_kg_s": "mass_flow",
    "leak_suspected": "dimensionless", "usable_propellant_kg": "mass", "usable_propellant_fraction": "dimensionless",
    "regulator_headroom_pa": "pressure", "time_left_s": "time", "delta_v_left_m_s": "velocity",
    "delta_v_left_conservative_m_s": "velocity", "hover_endurance_left_s": "time",
    "hover_endurance_left_conservative_s": "time", "total_impulse_n_s": "impulse", "propellant_used_kg": "mass",
    "burn_time_s": "time", "mean_isp_s": "time",
}
# Estimates that are differences: their thresholds are written without 'gauge' / 'abs'.
DIFFERENCE_SIGNALS = frozenset({"regulator_headroom_pa"})
RULE_NAME = re.compile(r"^[a-z][a-z0-9_]*$")


@dataclass(frozen=True)
class AlertRule:
    """One checked alert rule, SI units.

    Attributes:
        name: snake_case, unique in an engine.
        condition: one of CONDITIONS.
        signal: the channel or estimate judged (disagree: the first of the two).
        threshold: set level of the judged quantity, in `unit`: a value (above/below), a rate per second
            (rate_*), a tolerance (disagree; a fraction when relative), an age in s (stale), 0.5 (out_of_range).
        severity: one of SEVERITIES.
        deadband: how far back past the threshold the quantity must go before the condition clears, in `unit`.
        on_delay_s, off_delay_s: how long, in sample time, a set / cleared condition must last to count, s.
        latch: stays active after the condition clears, until acknowledged.
        message: shown to the operator with the alert.
        other: disagree only: the second signal.
        relative: disagree only: the tolerance is a fraction of the larger magnitude of the two signals.
        rate_window_s: rate_* only: the look-back of the slope, s.
        only_while: a signal; the rule applies only while it is above 0.5 (e.g. a valve command), and is
            suppressed by design otherwise.
        shelvable: the operator may shelve it.
        always_on: may not be disabled, shelved, gated, lowered in severity or loosened (the MEOP rule).
        unit: SI unit symbol of the judged quantity, for display and the run log.
    """

    name: str
    condition: str
    signal: str
    threshold: float
    severity: str = "warning"
    deadband: float = 0.0
    on_delay_s: float = 0.0
    off_delay_s: float = 0.0
    latch: bool = False
    message: str = ""
    other: str | None = None
    relative: bool = False
    rate_window_s: float = 1.0
    only_while: str | None = None
    shelvable: bool = True
    always_on: bool = False
    unit: str = ""

    def __post_init__(self) -> None:
        def bad(field: str, expected: str) -> ConfigError:
            return ConfigError(f"alert {self.name}.{field}", getattr(self, field), expected)
        if not isinstance(self.name, str) or not RULE_NAME.match(self.name):
            raise ConfigError("alert name", self.name, "a snake_case name such as 'tank_pressure_high'")
        if self.condition not in CONDITIONS:
            raise bad("condition", "one of " + ", ".join(CONDITIONS))
        if self.severity not in SEVERITIES:
            raise bad("severity", "one of " + ", ".join(SEVERITIES))
        if not math.isfinite(self.threshold):
            raise bad("threshold", "a finite number")
        for field in ("deadband", "on_delay_s", "off_delay_s"):
            value = getattr(self, field)
            if not (math.isfinite(value) and value >= 0.0):
                raise bad(field, "a finite number of 0 or more")
        if not (math.isfinite(self.rate_window_s) and self.rate_window_s > 0.0):
            raise bad("rate_window_s", "a time above 0 s")
        if (self.condition == "disagree") != (self.other is not None):
            raise bad("other", "a second signal for condition 'disagree', and only for it")
        if self.always_on and (self.shelvable or self.only_while is not None):
            raise bad("always_on", "a rule that is neither shelvable nor gated by only_while")

    @property
    def rising(self) -> bool:
        """True when the condition sets above the threshold, False when it sets below it."""
        return self.condition in RISING


def unit_of(condition: str, kind: str, relative: bool = False) -> str:
    """SI symbol of the quantity a rule of this condition judges on a signal of this kind."""
    if condition == "stale":
        return "s"
    if condition == "out_of_range" or relative:
        return "1"
    symbol = SI_COLUMNS[kind][0]
    return f"{symbol}/s" if condition.startswith("rate_") else symbol
