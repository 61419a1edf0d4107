"""The view model's types: what each part of the monitor screen shows, as strings (and trend arrays)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from monitor.alerts.states import AlertState

COVERAGE_K = 2.0
WINDOWS_S = (10.0, 30.0, 60.0, 120.0, 300.0, 600.0)
MODE_WORDS = {"live": "LIVE", "demo": "DEMO (simulated rig)", "replay": "REPLAY"}
SEVERITY_MARKS = {"critical": ("▲▲▲", "CRIT", "CRITICAL"), "warning": ("▲▲ ", "WARN", "WARNING"),
                  "advisory": ("▲  ", "ADV ", "ADVISORY")}
STATE_WORDS = {
    AlertState.ACTIVE_UNACKNOWLEDGED: ("ON·new", "active, not acknowledged"),
    AlertState.ACTIVE_ACKNOWLEDGED: ("ON", "active, acknowledged"),
    AlertState.CLEARED_UNACKNOWLEDGED: ("off·new", "cleared before it was acknowledged"),
    AlertState.SHELVED: ("shelved", "shelved by the operator"),
}
LISTED_STATES = frozenset(STATE_WORDS)

@dataclass(frozen=True)
class ViewSettings:
    """What the operator chose: the trend window and the selected alert (by rule name)."""

    window_s: float = 30.0
    selected: str | None = None


@dataclass(frozen=True)
class Tile:
    """One big number: label, value (drawn large), unit, its ± line and up to two detail lines."""

    key: str
    label: str
    value: str
    unit: str
    plus_minus: str
    details: tuple[str, ...]


@dataclass(frozen=True, eq=False)
class Trend:
    """One trend: label, unit, the window's points in display units, and the last, lowest and highest value."""

    name: str
    label: str
    unit: str
    t_s: np.ndarray
    values: np.ndarray
    last: str
    low: str
    high: str

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, Trend):
            return NotImplemented
        return ((self.name, self.label, self.unit, self.last, self.low, self.high)
                == (other.name, other.label, other.unit, other.last, other.low, other.high)
                and np.array_equal(self.t_s, other.t_s) and np.array_equal(self.values, other.values, equal_nan=True))

    __hash__ = None  # type: ignore[assignment]


@dataclass(frozen=True)
class AlertRow:
    """One listed alert, as written in the alert list."""

    name: str
    level: str  # severity: the CSS class of its row
    marks: str  # '▲▲▲' (one to three marks: readable without colour)
    severity: str  # 'CRIT', 'WARN', 'ADV '
    state: str  # short state word
    state_long: str
    time: str  # run time it entered the state, or shelving time left
    value: str
    limit: str  # '> 230.0 bar g'
    message: str
    unacknowledged: bool
    selected: bool


@dataclass(frozen=True)
class Banner:
    """The attention banner for a new, unacknowledged top-severity alert."""

    name: str
    level: str
    title: str
    message: str
    facts: str
    hint: str


@dataclass(frozen=True)
class ChannelRow:
    name: str
    rate: str
    age: str
    bad: str
    stale: bool


@dataclass(frozen=True)
class LinkView:
    """Link health and recording."""

    up: bool
    brief: str  # one line for small screens
    summary: str
    stale: tuple[str, ...]
    recording: str
    rows: tuple[ChannelRow, ...]
    events: tuple[str, ...]
    problems: tuple[str, ...]


@dataclass(frozen=True)
class MonitorView:
    """Everything the monitor screen shows for one snapshot."""

    mode: str
    title: str
    status: str
    cautions: tuple[str, ...]  # the caution line, longest form first
    banner: Banner | None
    tiles: tuple[Tile, ...]
    trends: tuple[Trend, ...]
    window_s: float
    alerts: tuple[AlertRow, ...]
    alert_summary: str
    selected: str | None
    link: LinkView
    t_s: float
