"""The engine: one listener that turns readings into estimates, alert states, trends and the run log's alert rows.

The same engine serves live data, replay and the post-run review. Everything it does depends only on the
samples and on the times it is advanced to, so a replayed run raises exactly the alerts it raised live:

- Samples drive the estimator and the alert rules in time order.
- Time-based conditions (a channel gone stale, a delay ending while nothing arrives) are judged at the
  points of a fixed grid in run time (every TICK_S seconds) that fall in a silence, i.e. with no sample in
  the SILENCE_S before them (while samples flow, the rules judge staleness from the samples themselves).
  Inside a batch those points are found from the sample times themselves; after
  the newest sample they are judged when the owner calls advance_to(now_s) with the run clock (live) or the
  replay position (replay). A later sample is never older than `now_s`, so both see the same points.
"""

from __future__ import annotations

import math
from collections import deque
from dataclasses import dataclass

import numpy as np

from monitor.alerts import AlertEngine, AlertStatus, AlertTransition, rules_from_rig, write_transitions
from monitor.config import Rig
from monitor.estimators import EstimateState, Estimator
from monitor.physics.gas import cacheable
from monitor.samples import Batch, Quality, SourceReading
from monitor.signals import Signals

TICK_S = 0.1
SILENCE_S = 0.5  # a grid point is judged only after this long without any sample
TIMELINE_KEPT = 2000


class Trends:
    """Bounded history of a few signals, one point per step_s (the newest value in each step), for plots."""

    def __init__(self, names: tuple[str, ...], span_s: float = 600.0, step_s: float = 0.05):
        self.names = names
        self.step_s = step_s
        self.capacity = int(math.ceil(span_s / step_s))
        self._t = np.full(self.capacity, np.nan)
        self._v = np.full((len(names), self.capacity), np.nan)
        self._count = 0
        self._last_bucket = -math.inf

    def add(self, signals: Signals) -> None:
        if not len(signals):
            return
        t = signals.t_s
        bucket = np.floor(t / self.step_s)
        ends = np.flatnonzero(np.append(bucket[1:] != bucket[:-1], True))  # newest sample of each step
        if self._count and bucket[ends[0]] == self._last_bucket:  # the newest stored step goes on: overwrite it
            self._store(np.array([(self._count - 1) % self.capacity]), signals, ends[:1])
            ends = ends[1:]
        ends = ends[bucket[ends] > self._last_bucket][-self.capacity :]
        if ends.size:
            self._store((self._count + np.arange(ends.size)) % self.capacity, signals, ends)
            self._count += ends.size
        self._last_bucket = max(self._last_bucket, float(bucket[-1]))

    def _store(self, slots: np.ndarray, signals: Signals, rows: np.ndarray) -> None:
        self._t[slots] = signals.t_s[rows]
        for row, name in enumerate(self.names):
            column = signals.values.get(name)
            self._v[row, slots] = np.nan if column is None else column[rows]

    def window(self, span_s: float) -> tuple[np.ndarray, dict[str, np.ndarray]]:
        """The points of the last span_s seconds, oldest first: times and one array per signal."""
        n = min(self._count, self.capacity)
        order = (self._count - n + np.arange(n)) % self.capacity
        t = self._t[order]
        if n:
            order = order[t >= t[-1] - span_s]
            t = self._t[order]
        return t, {name: self._v[row, order] for row, name in enumerate(self.names)}


@dataclass(frozen=True)
class EngineState:
    """What the engine knows at one moment (immutable, safe to hand to another thread)."""

    t_s: float
    estimates: EstimateState
    alerts: tuple[AlertStatus, ...]
    top_alarm: AlertStatus | None  # the newest unacknowledged alert of the top severity, if any
    timeline: tuple[AlertTransition, ...]  # transitions so far (the newest TIMELINE_KEPT)


class Engine:
    """Estimator + alert engine + trends as one pipeline listener.

    Args:
        rig: the rig (tank, nozzle, vehicle, alert tables).
        channels: the source's ChannelSpecs.
        writer: the run log writer that receives alert transitions as 'a' rows (None: not written).
        trend_names: signals kept for plots (default: thrust, flow, pressures, both propellant gauges).
    """

    def __init__(self, rig: Rig, channels: tuple, writer=None, trend_names: tuple[str, ...] | None = None):
        self.rig = rig
        self.channels = tuple(channels)
        with cacheable():  # the rig's setup: kept between runs when a store is installed (monitor.gas_memo)
            self.estimator = Estimator(rig, self.channels)
            self.alerts = AlertEngine(rules_from_rig(rig, self.channels))
        self.writer = writer
        self.timeline: deque[AlertTransition] = deque(maxlen=TIMELINE_KEPT)
        self.transition_count = 0
        self.trends = Trends(trend_names or default_trend_names(self.channels))
        self.last_good_t_s = {c.name: -math.inf for c in self.channels}
        self.latest_sample_s = -math.inf
        self.last_grid = -1  # index k of the last grid point k * TICK_S judged

    # --- listener -------------------------------------------------------------------------------------
    def on_reading(self, reading: SourceReading) -> None:
        batch = reading.batch
        if not len(batch):
            return
        t = np.asarray(batch.t_s, dtype=float)
        previous = np.concatenate([[self.latest_sample_s], t[:-1]])
        first_k, last_k = _silent_grid(previous, t)
        start = 0
        for index in np.flatnonzero(last_k >= np.maximum(first_k, self.last_grid + 1)):
            if index > start:
                self._samples(_slice(batch, start, index))
            self._tick_grid(int(first_k[index]), int(last_k[index]))
            start = int(index)
        self._samples(_slice(batch, start, len(batch)) if start else batch)

    def stop(self) -> None:
        """Nothing to release; the recorder is stopped by its own owner."""

    # --- time and operator actions --------------------------------------------------------------------
    def advance_to(self, now_s: float) -> None:
        """Judge the silent grid points up to now_s (the run clock, or the replay position)."""
        self._tick_until(now_s)

    def acknowledge(self, name: str, now_s: float) -> None:
        self._log(self.alerts.acknowledge(name, max(now_s, self.latest_sample_s)))

    def acknowledge_all(self, now_s: float) -> None:
        self._log(self.alerts.acknowledge_all(max(now_s, self.latest_sample_s)))

    def shelve(self, name: str, duration_s: float, now_s: float) -> None:
        self._log(self.alerts.shelve(name, duration_s, max(now_s, self.latest_sample_s)))

    def unshelve(self, name: str, now_s: float) -> None:
        self._log(self.alerts.unshelve(name, max(now_s, self.latest_sample_s)))

    def state(self) -> EngineState:
        alerts = self.alerts.alerts()
        top = None
        if self.alerts.unacknowledged_top_severity():
            top = next(a for a in alerts if a.state.unacknowledged)
        return EngineState(
            t_s=self.latest_sample_s,
            estimates=self.estimator.state(),
            alerts=alerts,
            top_alarm=top,
            timeline=tuple(self.timeline),
        )

    # --- inside -----------------------------------------------------------------------------------------
    def _samples(self, batch: Batch) -> None:
        signals = self.estimator.update(batch)
        self._log(self.alerts.update(signals, batch.quality))
        self.trends.add(signals)
        for name, quality in batch.quality.items():
            alive = np.flatnonzero(Quality.alive(quality))
            if alive.size:
                self.last_good_t_s[name] = float(batch.t_s[alive[-1]])
        self.latest_sample_s = float(batch.t_s[-1])

    def _tick_until(self, now_s: float) -> None:
        """Judge the silent grid points after the newest sample, up to now_s."""
        if math.isfinite(now_s):
            first_k, _ = _silent_grid(np.array([self.latest_sample_s]), np.array([np.inf]))
            self._tick_grid(int(first_k[0]), math.floor(now_s / TICK_S + _EPS))

    def _tick_grid(self, first_k: int, last_k: int) -> None:
        for k in range(max(first_k, self.last_grid + 1), last_k + 1):
            self._log(self.alerts.tick(k * TICK_S, self.last_good_t_s))
            self.last_grid = k

    def _log(self, transitions: list[AlertTransition]) -> None:
        if not transitions:
            return
        self.timeline.extend(transitions)
        self.transition_count += len(transitions)
        if self.writer is not None:
            write_transitions(self.writer, transitions)


_EPS = 1e-9


def _silent_grid(previous_s: np.ndarray, t_s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """For each sample, the grid indices k with no sample in (k TICK_S - SILENCE_S, k TICK_S] between the
    previous sample and it: previous + SILENCE_S <= k TICK_S < t. Empty ranges have last < first."""
    with np.errstate(invalid="ignore"):
        first = np.where(np.isfinite(previous_s), np.ceil((previous_s + SILENCE_S) / TICK_S - _EPS), 0.0)
        last = np.where(np.isfinite(t_s), np.ceil(t_s / TICK_S - _EPS) - 1.0, np.inf)
    return first, last


def default_trend_names(channels: tuple) -> tuple[str, ...]:
    """Thrust (estimated and measured), filtered flow, tank and feed pressure, both propellant gauges."""
    by_role = {c.role: c.name for c in channels if c.role}
    names = ["thrust_estimated_n", "thrust_measured_n", "mass_flow_filtered_kg_s"]
    names += [by_role[r] for r in ("tank_pressure", "feed_pressure") if r in by_role]
    return tuple(names + ["propellant_flow_gauge_kg", "propellant_pvt_gauge_kg"])


def _slice(batch: Batch, lo: int, hi: int) -> Batch:
    def cut(a):
        return None if a is None else a[lo:hi]

    return Batch(
        t_s=batch.t_s[lo:hi],
        values={k: v[lo:hi] for k, v in batch.values.items()},
        quality={k: q[lo:hi] for k, q in batch.quality.items()},
        device_time_s=cut(batch.device_time_s),
        sequence=cut(batch.sequence),
    )
