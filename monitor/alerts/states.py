"""Alert states and their transitions, after the alarm state model of ANSI/ISA-18.2 and IEC 62682 (from memory).

States, in the standards' general terms: normal; active and unacknowledged; active and acknowledged; cleared
(returned to normal) but unacknowledged; shelved (hidden by the operator for a set time); suppressed by design
(the rule does not apply in the present operating state, or has nothing to judge yet). Every change of state
is an AlertTransition, which the owner writes to the run log as one compact key=value text (log_text).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from enum import Enum

from monitor.alerts.rules import AlertRule


class AlertState(str, Enum):
    """Where a rule's alert stands; the value is the word used in the run log."""

    NORMAL = "normal"
    ACTIVE_UNACKNOWLEDGED = "active_unacknowledged"
    ACTIVE_ACKNOWLEDGED = "active_acknowledged"
    CLEARED_UNACKNOWLEDGED = "cleared_unacknowledged"
    SHELVED = "shelved"
    SUPPRESSED = "suppressed"

    @property
    def unacknowledged(self) -> bool:
        return self in (AlertState.ACTIVE_UNACKNOWLEDGED, AlertState.CLEARED_UNACKNOWLEDGED)


# What moved a rule from one state to another (the log's cause= word).
CAUSES = ("condition_set", "condition_cleared", "acknowledged", "shelved", "unshelved", "shelving_expired",
          "suppressed", "unsuppressed")


@dataclass(frozen=True)
class AlertTransition:
    """One change of a rule's state (or, for a latched alert, of its condition while it stays active).

    Attributes:
        t_s: when: the sample time or now_s at which it happened, s since the run started.
        rule: the rule's name.
        from_state, to_state: the states before and after (equal for a latched alert whose condition
            cleared or came back).
        severity: the rule's severity.
        cause: one of CAUSES.
        value: the judged quantity at that moment, in `unit` (NaN for an operator's action).
        threshold: the rule's threshold, in `unit`.
        unit: SI symbol of value and threshold.
        inputs: (signal, value in SI) pairs of the signals that value came from.
    """

    t_s: float
    rule: str
    from_state: AlertState
    to_state: AlertState
    severity: str
    cause: str
    value: float
    threshold: float
    unit: str = ""
    inputs: tuple[tuple[str, float], ...] = ()

    @property
    def label(self) -> str:
        """The run log's label word for this row: the state entered."""
        return self.to_state.value

    def log_text(self) -> str:
        """key=value pairs separated by single spaces; numbers as Python repr (exact round trip)."""
        parts = [f"rule={self.rule}", f"from={self.from_state.value}", f"to={self.to_state.value}",
                 f"severity={self.severity}", f"cause={self.cause}", f"value={self.value!r}",
                 f"threshold={self.threshold!r}", f"unit={self.unit or '-'}"]
        parts += [f"in.{name}={value!r}" for name, value in self.inputs]
        return " ".join(parts)

    @classmethod
    def from_log(cls, t_s: float, text: str) -> "AlertTransition":
        """Read back a transition from its run-log row (t_s and the text of log_text()).

        Raises:
            ValueError: text is not what log_text() writes.
        """
        fields: dict[str, str] = {}
        inputs: list[tuple[str, float]] = []
        for part in text.split(" "):
            key, sep, value = part.partition("=")
            if not sep or not _LOG_KEY.match(key):
                raise ValueError(f"alert text {text[:80]!r}: {part!r} is not key=value")
            if key.startswith("in."):
                inputs.append((key[3:], float(value)))
            else:
                fields[key] = value
        try:
            return cls(t_s=float(t_s), rule=fields["rule"], from_state=AlertState(fields["from"]),
                       to_state=AlertState(fields["to"]), severity=fields["severity"], cause=fields["cause"],
                       value=float(fields["value"]), threshold=float(fields["threshold"]),
                       unit="" if fields["unit"] == "-" else fields["unit"], inputs=tuple(inputs))
        except KeyError as exc:
            raise ValueError(f"alert text {text[:80]!r}: no {exc.args[0]}=") from None


_LOG_KEY = re.compile(r"^(?:in\.)?[a-z][a-z0-9_]*$")


@dataclass(frozen=True)
class AlertStatus:
    """A rule's alert as it stands, for the screen.

    Attributes:
        name, severity, message, unit, threshold: from the rule.
        state: the present state.
        since_s: when it entered that state, s (None: since the engine started).
        value: the judged quantity at the last sample or tick, in unit (NaN: unknown).
        condition: the condition (after its delays) holds now; a latched alert can be active without it.
        shelved_until_s: end of the shelving, s, when shelved.
    """

    name: str
    severity: str
    state: AlertState
    since_s: float | None
    value: float
    message: str
    unit: str
    threshold: float
    condition: bool
    shelved_until_s: float | None = None


class RuleState:
    """The state machine of one rule; the engine feeds it events in time order and collects transitions."""

    def __init__(self, rule: AlertRule):
        self.rule = rule
        self.state = AlertState.SUPPRESSED
        self.since_s: float | None = None
        self.applies = False  # the gate: the rule has something to judge and its only_while holds
        self.condition = False  # after delays
        self.shelved_until_s: float | None = None
        self.value = math.nan

    def _move(self, t_s: float, to: AlertState, cause: str, value: float,
              inputs: tuple[tuple[str, float], ...]) -> AlertTransition:
        r = self.rule
        record = AlertTransition(t_s, r.name, self.state, to, r.severity, cause, value, r.threshold, r.unit, inputs)
        if to != self.state:
            self.state, self.since_s = to, t_s
        return record

    def _settled(self) -> AlertState:
        """The state a rule returns to when nothing holds it: suppressed, active or normal."""
        if not self.applies:
            return AlertState.SUPPRESSED
        return AlertState.ACTIVE_UNACKNOWLEDGED if self.condition else AlertState.NORMAL

    def on_gate(self, t_s: float, applies: bool, value: float, inputs) -> list[AlertTransition]:
        """The rule starts or stops applying (suppression by design)."""
        self.applies = applies
        if self.state == AlertState.SHELVED:
            return []
        if not applies and self.state != AlertState.SUPPRESSED:
            return [self._move(t_s, AlertState.SUPPRESSED, "suppressed", value, inputs)]
        if applies and self.state == AlertState.SUPPRESSED:
            return [self._move(t_s, self._settled(), "unsuppressed", value, inputs)]
        return []

    def on_condition(self, t_s: float, present: bool, value: float, inputs) -> list[AlertTransition]:
        """The delayed condition sets (present) or clears."""
        self.condition = present
        s, latch = self.state, self.rule.latch
        if s in (AlertState.SHELVED, AlertState.SUPPRESSED):
            return []
        if present:
            if s in (AlertState.NORMAL, AlertState.CLEARED_UNACKNOWLEDGED):
                return [self._move(t_s, AlertState.ACTIVE_UNACKNOWLEDGED, "condition_set", value, inputs)]
            return [self._move(t_s, s, "condition_set", value, inputs)] if latch else []
        if latch:  # stays active until acknowledged; the log still learns the condition has gone
            return [self._move(t_s, s, "condition_cleared", value, inputs)] if s != AlertState.NORMAL else []
        if s == AlertState.ACTIVE_UNACKNOWLEDGED:
            return [self._move(t_s, AlertState.CLEARED_UNACKNOWLEDGED, "condition_cleared", value, inputs)]
        if s == AlertState.ACTIVE_ACKNOWLEDGED:
            return [self._move(t_s, AlertState.NORMAL, "condition_cleared", value, inputs)]
        return []

    def acknowledge(self, t_s: float) -> list[AlertTransition]:
        """The operator acknowledges; a latched alert whose condition has gone returns to normal."""
        s = self.state
        if s == AlertState.CLEARED_UNACKNOWLEDGED or (s.value.startswith("active") and not self.condition):
            return [self._move(t_s, AlertState.NORMAL, "acknowledged", math.nan, ())]
        if s == AlertState.ACTIVE_UNACKNOWLEDGED:
            return [self._move(t_s, AlertState.ACTIVE_ACKNOWLEDGED, "acknowledged", math.nan, ())]
        return []

    def shelve(self, t_s: float, until_s: float) -> list[AlertTransition]:
        """The operator shelves the alert until until_s (a new shelve while shelved moves the end)."""
        self.shelved_until_s = until_s
        if self.state == AlertState.SHELVED:
            return []
        return [self._move(t_s, AlertState.SHELVED, "shelved", math.nan, ())]

    def unshelve(self, t_s: float, cause: str, value: float = math.nan, inputs=()) -> list[AlertTransition]:
        """Shelving ends (by the operator or its time): the alert is judged afresh."""
        self.shelved_until_s = None
        if self.state != AlertState.SHELVED:
            return []
        return [self._move(t_s, self._settled(), cause, value, inputs)]
