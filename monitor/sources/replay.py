"""A recorded run played back through the same pipeline as live data: real time, faster, slower or flat out,
with pause, step and seek."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from drivers.base import RawBatch
from monitor.clock import Clock
from monitor.errors import LogFormatError
from monitor.recorder.reader import RunLog
from monitor.samples import Batch, LinkEvent, SourceReading
from monitor.sources.base import SampleSource
from monitor.sources.log_stream import line_rows, table_columns


class Pacer:
    """Maps the injected clock onto the log's time axis at a chosen speed; pausable, seekable.

    position_s() = anchor_log_s + (clock.now() - anchor_clock_s) * speed while playing. speed = inf plays as
    fast as the reader can go. Passing a clock in (instead of calling time.sleep) lets tests run instantly.
    """

    def __init__(self, clock: Clock, speed: float = 1.0, start_s: float = 0.0):
        if not speed > 0.0:
            raise ValueError(f"replay speed must be positive, got {speed!r}")
        self.clock = clock
        self.speed = float(speed)
        self.paused = False
        self._anchor_log_s = start_s
        self._anchor_clock_s = clock.now()

    def position_s(self) -> float:
        if self.paused:
            return self._anchor_log_s
        if math.isinf(self.speed):
            return math.inf
        return self._anchor_log_s + (self.clock.now() - self._anchor_clock_s) * self.speed

    def _reanchor(self, log_s: float) -> None:
        self._anchor_log_s = log_s
        self._anchor_clock_s = self.clock.now()

    def pause(self) -> None:
        if not self.paused:
            position = self.position_s()
            self._reanchor(position if math.isfinite(position) else self._anchor_log_s)
            self.paused = True

    def resume(self) -> None:
        if self.paused:
            self.paused = False
            self._anchor_clock_s = self.clock.now()

    def set_speed(self, speed: float) -> None:
        if not speed > 0.0:
            raise ValueError(f"replay speed must be positive, got {speed!r}")
        position = self.position_s()
        self._reanchor(position if math.isfinite(position) else self._anchor_log_s)
        self.speed = float(speed)

    def seek(self, log_s: float) -> None:
        self._reanchor(log_s)

    def wait_until(self, log_s: float, timeout_s: float) -> None:
        """Sleep until the log time log_s is due, but never longer than timeout_s."""
        if self.paused or math.isinf(self.speed):
            if self.paused:
                self.clock.sleep(timeout_s)
            return
        ahead_s = (log_s - self.position_s()) / self.speed
        self.clock.sleep(min(max(ahead_s, 0.0), timeout_s))


@dataclass
class _Rows:
    """The log's line rows ('s' and 'b') as columns, and its link events."""

    t_s: np.ndarray
    status: np.ndarray
    is_sample: np.ndarray
    sample_index: np.ndarray  # for each line row, the index of its sample (or -1)
    samples: Batch
    events: list[LinkEvent]
    event_t_s: np.ndarray


class ReplaySource(SampleSource):
    """Plays a run log back. Readings carry the recorded samples, the line statuses and the link events.

    The raw bytes of each line stay in the log (RunLog.raw_lines()); a replayed RawBatch carries empty bytes
    in their place, since nothing downstream of a replay re-parses them.

    Args:
        path: the run log.
        clock: drives the pacing (a FakeClock in tests).
        speed: 1 = as recorded, 10 = ten times faster, math.inf = as fast as possible.
        max_gap_s: recorded silences longer than this (in log time) are skipped; None keeps them.
        max_rows: the most line rows one read returns, so a fast replay keeps a screen responsive.
    """

    live = False

    def __init__(self, path, clock: Clock, speed: float = 1.0, max_gap_s: float | None = None, max_rows: int = 20_000):
        self.log = RunLog.open(path)
        self.header = self.log.header
        self.rig_text = self.header.rig_text
        self.channels = self.header.channels
        self.max_gap_s = max_gap_s
        self.max_rows = max_rows
        self._rows = self._load()
        times = np.concatenate([self._rows.t_s[:1], self._rows.t_s[-1:], self._rows.event_t_s])
        self.start_s = float(times.min()) if times.size else 0.0
        self.end_s = float(times.max()) if times.size else 0.0
        self.delivered_s = -np.inf  # log time through which every row and event has been handed out
        self.pacer = Pacer(clock, speed, start_s=self.start_s)
        self._cursor = 0
        self._event_cursor = 0

    def _load(self) -> _Rows:
        rows = line_rows(self.log.table(columns=table_columns(self.log)), self.header.channels)
        sample_index = np.where(rows.is_sample, np.cumsum(rows.is_sample) - 1, -1)
        events = self.log.events()
        return _Rows(
            t_s=rows.t_s,
            status=rows.status,
            is_sample=rows.is_sample,
            sample_index=sample_index,
            samples=rows.samples,
            events=events,
            event_t_s=np.array([e.t_s for e in events], dtype=np.float64),
        )

    @property
    def position_s(self) -> float:
        """The log time the replay has reached (s, on the log's own axis)."""
        return min(self.pacer.position_s(), self.end_s)

    @property
    def finished(self) -> bool:
        return self._cursor >= self._rows.t_s.size and self._event_cursor >= len(self._rows.events)

    def seek(self, log_s: float) -> None:
        """Jump to log time log_s; what lies between is not replayed (a seek backwards replays again)."""
        log_s = min(max(log_s, self.start_s), self.end_s)
        self._cursor = int(np.searchsorted(self._rows.t_s, log_s, side="left"))
        self._event_cursor = int(np.searchsorted(self._rows.event_t_s, log_s, side="left"))
        self.delivered_s = log_s
        self.pacer.seek(log_s)

    def step(self, rows: int = 1) -> SourceReading | None:
        """Hand out the next `rows` line rows regardless of the pace (for stepping while paused)."""
        if self.finished:
            return None
        hi = min(self._cursor + rows, self._rows.t_s.size)
        until = self._rows.t_s[hi - 1] if hi > self._cursor else self.end_s
        reading = self._reading(self._cursor, hi, until)
        self.pacer.seek(float(until))
        return reading

    def read(self, timeout_s: float = 0.05) -> SourceReading | None:
        if self.finished:
            return None
        rows = self._rows
        next_t = rows.t_s[self._cursor] if self._cursor < rows.t_s.size else rows.event_t_s[self._event_cursor]
        if self.max_gap_s is not None and next_t - self.pacer.position_s() > self.max_gap_s:
            self.pacer.seek(float(next_t))
        self.pacer.wait_until(float(next_t), timeout_s)
        position = self.pacer.position_s() + 1e-9  # a rounding margin, so a row the pacer waited for is due
        hi = int(np.searchsorted(rows.t_s, position, side="right"))
        hi = min(max(hi, self._cursor), self._cursor + self.max_rows)
        until = position if hi < self._cursor + self.max_rows else rows.t_s[hi - 1]
        return self._reading(self._cursor, hi, until)

    def _reading(self, lo: int, hi: int, until: float) -> SourceReading:
        rows = self._rows
        until = min(float(until), self.end_s)
        self.delivered_s = max(self.delivered_s, until)
        e_hi = int(np.searchsorted(rows.event_t_s, until, side="right"))
        events = rows.events[self._event_cursor : max(e_hi, self._event_cursor)]
        self._cursor, self._event_cursor = hi, max(e_hi, self._event_cursor)
        picked = rows.sample_index[lo:hi]
        picked = picked[picked >= 0]
        s_lo, s_hi = (int(picked[0]), int(picked[-1]) + 1) if picked.size else (0, 0)
        b = rows.samples
        batch = Batch(
            t_s=b.t_s[s_lo:s_hi],
            values={k: v[s_lo:s_hi] for k, v in b.values.items()},
            quality={k: q[s_lo:s_hi] for k, q in b.quality.items()},
            device_time_s=None if b.device_time_s is None else b.device_time_s[s_lo:s_hi],
            sequence=None if b.sequence is None else b.sequence[s_lo:s_hi],
        )
        raw = RawBatch(
            t_s=rows.t_s[lo:hi],
            lines=[b""] * (hi - lo),
            status=rows.status[lo:hi],
            fields=(),
            values=np.empty((hi - lo, 0)),
            events=list(events),
        )
        return SourceReading(raw=raw, batch=batch)


def rig_channel_specs(rig, columns, path) -> tuple:
    """The rig file's channel specs for a log's channels, in the log's order.

    A run log stores each channel's name and quantity; the estimators also need its role and accuracy, which
    come from the rig file in the log's header.

    Raises:
        LogFormatError: a channel of the log that the rig file lacks, or of another quantity.
    """
    from monitor.calibration import parse_channels

    specs = {s.name: s for s in parse_channels(rig)}
    out = []
    for column in columns:
        spec = specs.get(column.name)
        if spec is None or spec.quantity != column.quantity:
            raise LogFormatError(
                f"{path}: channel {column.name!r} ({column.quantity}) is not a channel of the rig file in the log's header"
            )
        out.append(spec)
    return tuple(out)
