"""Link health: per-channel sample rate, age of the last good sample and staleness; bad-line, gap and link counts."""

from __future__ import annotations

from collections import Counter, deque
from dataclasses import dataclass

import numpy as np

from drivers.base import LineStatus
from monitor.samples import LinkEvent, Quality, SourceReading


@dataclass(frozen=True)
class ChannelHealth:
    """One channel's link figures at one moment."""

    name: str
    rate_hz: float  # good samples per second over the recent window
    age_s: float  # since the last good sample; inf if none yet
    stale: bool  # age beyond the channel's stale_after
    bad_samples: int  # flagged samples (non-finite, out of range, missing) so far


@dataclass(frozen=True)
class HealthSnapshot:
    """The link as a whole at one moment."""

    t_s: float
    channels: tuple[ChannelHealth, ...]
    lines: int
    bad_lines: dict[str, int]  # LineStatus name -> count
    sequence_gaps: int  # lines the device numbered but we never received
    link_up: bool
    link_losses: int
    recent_events: tuple[LinkEvent, ...]
    event_counts: dict[str, int]  # link-event kind -> count (gap, clock_backwards, mostly_garbage, ...)

    @property
    def bad_line_total(self) -> int:
        return sum(self.bad_lines.values())


class LinkHealth:
    """A listener that keeps the link figures; snapshot(now_s) reads them."""

    def __init__(self, channels: tuple, window_s: float = 2.0, default_stale_s: float = 1.0, events_kept: int = 50):
        self.names = tuple(c.name for c in channels)
        self.stale_after_s = {c.name: (getattr(c, "stale_after_s", None) or default_stale_s) for c in channels}
        self.window_s = window_s
        self._last_good = dict.fromkeys(self.names, -np.inf)
        self._bad = dict.fromkeys(self.names, 0)
        self._recent: dict[str, deque] = {n: deque() for n in self.names}  # (first t, last t, count) per batch
        self._first_good: dict[str, float | None] = dict.fromkeys(self.names)
        self.lines = 0
        self.bad_lines: Counter[str] = Counter()
        self.sequence_gaps = 0
        self.link_up = True
        self.link_losses = 0
        self.events: deque[LinkEvent] = deque(maxlen=events_kept)
        self.event_counts: Counter[str] = Counter()
        self._last_sequence: int | None = None

    def on_reading(self, reading: SourceReading) -> None:
        raw, batch = reading.raw, reading.batch
        self.lines += len(raw)
        if len(raw):
            codes, counts = np.unique(np.asarray(raw.status)[~raw.ok], return_counts=True)
            for code, count in zip(codes, counts):
                self.bad_lines[LineStatus(int(code)).name.lower()] += int(count)
        for event in raw.events:
            self.events.append(event)
            self.event_counts[event.kind] += 1
            if event.kind == "lost":
                self.link_up = False
                self.link_losses += 1
            elif event.kind == "connected":
                self.link_up = True
        self._count_gaps(batch.sequence)
        for name in self.names:
            good = Quality.alive(batch.quality[name])  # taring counts as alive, not as bad
            n_good = int(np.count_nonzero(good))
            self._bad[name] += int(good.size - n_good)
            if n_good:
                t_good = batch.t_s[good]
                self._last_good[name] = float(t_good[-1])
                self._recent[name].append((float(t_good[0]), float(t_good[-1]), n_good))
                if self._first_good[name] is None:
                    self._first_good[name] = float(t_good[0])

    def _count_gaps(self, sequence: np.ndarray | None) -> None:
        if sequence is None or sequence.size == 0:
            return
        seq = sequence[sequence >= 0].astype(np.int64)
        if seq.size == 0:
            return
        if self._last_sequence is not None:
            seq = np.concatenate([[self._last_sequence], seq])
        steps = np.diff(seq)
        self.sequence_gaps += int(np.sum(steps[steps > 1] - 1))
        self._last_sequence = int(seq[-1])

    def stop(self) -> None:
        """Nothing to release."""

    def _rate_hz(self, name: str, now_s: float) -> float:
        """Good samples per second over the window; a batch straddling its start counts pro rata."""
        recent, start = self._recent[name], now_s - self.window_s
        while recent and recent[0][1] < start:
            recent.popleft()
        count = 0.0
        for t_first, t_last, n in recent:
            if t_first >= start or t_last <= t_first:
                count += n
            else:
                count += n * (t_last - start) / (t_last - t_first)
        first = self._first_good[name]
        span = self.window_s if first is None else min(self.window_s, max(now_s - first, 1e-9))
        return count / span

    def snapshot(self, now_s: float) -> HealthSnapshot:
        channels = []
        for name in self.names:
            rate = self._rate_hz(name, now_s)
            age = now_s - self._last_good[name]
            channels.append(ChannelHealth(name, rate, age, age > self.stale_after_s[name], self._bad[name]))
        return HealthSnapshot(
            t_s=now_s,
            channels=tuple(channels),
            lines=self.lines,
            bad_lines=dict(self.bad_lines),
            sequence_gaps=self.sequence_gaps,
            link_up=self.link_up,
            link_losses=self.link_losses,
            recent_events=tuple(self.events),
            event_counts=dict(self.event_counts),
        )
