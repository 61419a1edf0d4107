"""The alert engine: judges every rule over each batch with numpy and steps only through the transitions.

Pure and deterministic: no I/O and no clock. Time is the sample time of the signals, or the now_s the owner
passes to tick() and to the operator's actions, so a replayed run given the same samples and the same now_s
values raises exactly the alerts it raised live. The engine's time never runs back: a sample older than the
latest time seen counts at that latest time.
"""

from __future__ import annotations

import math
from typing import Sequence

import numpy as np

from monitor.alerts.crossings import DelayCarry, and_changes, delay_changes, latch_changes, monotone_times
from monitor.alerts.judges import Judge, judge_for
from monitor.alerts.rules import SEVERITIES, AlertRule
from monitor.alerts.states import AlertStatus, AlertTransition, RuleState
from monitor.errors import ConfigError, MonitorError
from monitor.signals import Signals

_NONE = (np.empty(0, dtype=np.intp), np.empty(0, dtype=bool))
_GATE, _CONDITION, _EXPIRY = 0, 1, 2  # order of events at the same sample


class _Tracker:
    """One rule's numeric state across batches (hysteresis latch, gate, delays) and its state machine."""

    def __init__(self, rule: AlertRule):
        self.rule = rule
        self.judge: Judge = judge_for(rule)
        self.machine = RuleState(rule)
        self.latched = False  # the undelayed condition (hysteresis latch)
        self.known = False  # the judged quantity has been known once
        self.on = rule.only_while is None  # the only_while signal was last above 0.5
        self.delay = DelayCarry()

    def step(self, t: np.ndarray, q: np.ndarray | None, values: dict[str, np.ndarray]) -> list[AlertTransition]:
        """Advance over one frame of samples (t non-decreasing; q the judged quantity or None)."""
        r, n = self.rule, t.size
        condition = _NONE
        known = _NONE
        latched, known_seed, on_seed = self.latched, self.known, self.on
        if q is not None:
            low, high = (r.threshold - r.deadband, r.threshold) if r.rising else (r.threshold, r.threshold + r.deadband)
            sets, clears = (q > high, q < low) if r.rising else (q < low, q > high)
            condition = latch_changes(sets, clears, latched)
            if condition[1].size:
                self.latched = bool(condition[1][-1])
            if not known_seed:
                finite = np.isfinite(q)
                first = int(np.argmax(finite))
                if finite[first]:
                    known, self.known = (np.array([first]), np.array([True])), True
            last = q[-1]
            if not math.isfinite(last):
                finite_at = np.flatnonzero(np.isfinite(q))
                last = q[finite_at[-1]] if finite_at.size else math.nan
            if math.isfinite(last):
                self.machine.value = float(last)
        gating = _NONE
        g = values.get(r.only_while) if r.only_while is not None else None
        if g is not None:
            gating = latch_changes(g > 0.5, g <= 0.5, on_seed)
            if gating[1].size:
                self.on = bool(gating[1][-1])
        gate = and_changes(known, known_seed, gating, on_seed)
        effective = and_changes(condition, latched, gate, known_seed and on_seed)
        delayed = delay_changes(t, effective, self.delay, r.on_delay_s, r.off_delay_s)
        events = [(int(i), _GATE, bool(v)) for i, v in zip(*gate)]
        events += [(int(i), _CONDITION, bool(v)) for i, v in zip(*delayed)]
        until = self.machine.shelved_until_s
        if until is not None:
            expiry = int(np.searchsorted(t, until, side="left"))
            if expiry < n:
                events.append((expiry, _EXPIRY, True))
        if not events:
            return []
        events.sort()
        out: list[AlertTransition] = []
        m = self.machine
        for i, kind, value in events:
            t_i = float(t[i])
            v = float(q[i]) if q is not None else math.nan
            inputs = tuple((s, float(values[s][i])) for s in self.judge.inputs() if s in values)
            if kind == _GATE:
                out += m.on_gate(t_i, value, v, inputs)
            elif kind == _CONDITION:
                out += m.on_condition(t_i, value, v, inputs)
            else:
                out += m.unshelve(t_i, "shelving_expired", v, inputs)
        return out


class AlertEngine:
    """Evaluates alert rules over batches of signals and keeps each rule's alert state.

    Args:
        rules: the rules, e.g. from rules_from_rig(rig, channels); names must be unique.

    Raises:
        ConfigError: two rules share a name.
    """

    def __init__(self, rules: Sequence[AlertRule]):
        self._trackers: dict[str, _Tracker] = {}
        for rule in rules:
            if rule.name in self._trackers:
                raise ConfigError("alert name", rule.name, "a name used by one rule only")
            self._trackers[rule.name] = _Tracker(rule)
        self._order = {name: k for k, name in enumerate(self._trackers)}
        self._latest_s = -math.inf

    @property
    def rules(self) -> tuple[AlertRule, ...]:
        return tuple(tr.rule for tr in self._trackers.values())

    def update(self, signals: Signals, quality: dict[str, np.ndarray] | None = None) -> list[AlertTransition]:
        """Judge every rule over the batch's samples in time order (delays count in sample time).

        Args:
            signals: channel values and estimates on one time axis, SI units, NaN where unknown.
            quality: optional channel name -> Quality bits per sample (out_of_range and stale rules use them).

        Returns:
            The transitions the batch caused, in time order (rules in engine order at equal times).

        Raises:
            MonitorError: a signal or quality array is not as long as signals.t_s.
        """
        n = len(signals)
        if n == 0:
            return []
        for name, arrays in (("signal", signals.values), ("quality", quality or {})):
            for key, array in arrays.items():
                if np.shape(array) != (n,):
                    raise MonitorError(f"alert engine: {name} {key!r} has shape {np.shape(array)}; expected ({n},)")
        t = monotone_times(signals.t_s, self._latest_s)
        self._latest_s = float(t[-1])
        out: list[tuple[float, int, AlertTransition]] = []
        for name, tracker in self._trackers.items():
            q = tracker.judge.quantity(t, signals.values, quality)
            out += [(tr.t_s, self._order[name], tr) for tr in tracker.step(t, q, signals.values)]
        return _in_order(out)

    def tick(self, now_s: float, last_good_t_s: dict[str, float] | None = None) -> list[AlertTransition]:
        """Judge the time-based conditions when no samples arrive: staleness, delays ending, shelving ending.

        Args:
            now_s: the run clock now, s since the run started.
            last_good_t_s: channel name -> time of its newest good sample as link health knows it, s.

        Returns:
            The transitions, in engine order; all at max(now_s, the latest time seen).
        """
        now = max(float(now_s), self._latest_s)
        self._latest_s = now
        t = np.array([now])
        out: list[tuple[float, int, AlertTransition]] = []
        for name, tracker in self._trackers.items():
            q = tracker.judge.at_time(now, last_good_t_s or {})
            out += [(tr.t_s, self._order[name], tr)
                    for tr in tracker.step(t, None if math.isnan(q) else np.array([q]), {})]
        return _in_order(out)

    def acknowledge(self, name: str, now_s: float) -> list[AlertTransition]:
        """The operator acknowledges one alert: unacknowledged -> acknowledged, or -> normal if its condition
        has gone (cleared, or latched and cleared). No transition when there is nothing to acknowledge."""
        return self._tracker(name).machine.acknowledge(self._now(now_s))

    def acknowledge_all(self, now_s: float) -> list[AlertTransition]:
        """Acknowledge every alert; the transitions in engine order."""
        now = self._now(now_s)
        return [tr for tracker in self._trackers.values() for tr in tracker.machine.acknowledge(now)]

    def shelve(self, name: str, duration_s: float, now_s: float) -> list[AlertTransition]:
        """Shelve an alert for duration_s: hidden whatever its condition, then judged afresh.

        Raises:
            ConfigError: no such rule, a duration that is not a positive finite time, or a rule that may not be
                shelved (the MEOP rule is always on).
        """
        tracker = self._tracker(name)
        rule = tracker.rule
        if not rule.shelvable:
            why = "it is always on" if rule.always_on else "its rule says shelvable = false"
            raise ConfigError("shelve", name, f"an alert that may be shelved; {name} may not: {why}")
        if not (isinstance(duration_s, (int, float)) and math.isfinite(duration_s) and duration_s > 0.0):
            raise ConfigError("shelve duration_s", duration_s, "a time above 0 s")
        now = self._now(now_s)
        return tracker.machine.shelve(now, now + float(duration_s))

    def unshelve(self, name: str, now_s: float) -> list[AlertTransition]:
        """End an alert's shelving now; it is judged afresh (active and unacknowledged if its condition holds)."""
        tracker = self._tracker(name)
        return tracker.machine.unshelve(self._now(now_s), "unshelved", tracker.machine.value)

    def status(self, name: str) -> AlertStatus:
        """One rule's alert as it stands."""
        m = self._tracker(name).machine
        r = m.rule
        return AlertStatus(r.name, r.severity, m.state, m.since_s, m.value, r.message, r.unit, r.threshold,
                           m.condition, m.shelved_until_s)

    def alerts(self) -> tuple[AlertStatus, ...]:
        """Every rule's alert: most severe first, then the latest change first, then by name."""
        rows = [self.status(name) for name in self._trackers]
        return tuple(sorted(rows, key=lambda a: (SEVERITIES.index(a.severity),
                                                 -(a.since_s if a.since_s is not None else -math.inf), a.name)))

    def unacknowledged_top_severity(self) -> bool:
        """True while an alert of the top severity (critical) awaits acknowledgement."""
        return any(tr.rule.severity == SEVERITIES[0] and tr.machine.state.unacknowledged
                   for tr in self._trackers.values())

    def _tracker(self, name: str) -> _Tracker:
        if name not in self._trackers:
            raise ConfigError("alert", name, "the name of one of the engine's rules: " + ", ".join(self._trackers))
        return self._trackers[name]

    def _now(self, now_s: float) -> float:
        self._latest_s = max(self._latest_s, float(now_s))
        return self._latest_s


def _in_order(rows: list[tuple[float, int, AlertTransition]]) -> list[AlertTransition]:
    rows.sort(key=lambda row: (row[0], row[1]))  # stable: a rule's own transitions keep their order
    return [row[2] for row in rows]


def write_transitions(writer: object, transitions: Sequence[AlertTransition]) -> None:
    """Write transitions to a run log: writer.write_alert(t_s, log_text, label) for each (RunLogWriter)."""
    for tr in transitions:
        writer.write_alert(tr.t_s, tr.log_text(), tr.label)  # type: ignore[attr-defined]
