"""The serial text-line driver: reads a device that prints one line of numbers per sample over a serial link.

Bytes are read in whole chunks (read(in_waiting or 1), never readline), stamped with the injected clock, cut
into lines (drivers.line_framing) and read in batches (drivers.line_parsing). A device that disappears is
reported as a LinkEvent ("lost") and reopened at most every RETRY_INTERVAL_S; read() raises only when the very
first open fails.
"""

from __future__ import annotations

import math
from collections import deque
from typing import TYPE_CHECKING

import numpy as np
import serial

from drivers.base import Driver, LineStatus, RawBatch
from drivers.line_format import LineFormat
from drivers.line_framing import FramedLines, LineSplitter
from drivers.line_parsing import header_names, parse_lines, word_lines
from monitor.clock import Clock
from monitor.errors import ConfigError, SourceError
from monitor.samples import LinkEvent

if TYPE_CHECKING:
    from monitor.config import Rig

_PARITY = {"none": serial.PARITY_NONE, "even": serial.PARITY_EVEN, "odd": serial.PARITY_ODD}
_STOP_BITS = {1.0: serial.STOPBITS_ONE, 1.5: serial.STOPBITS_ONE_POINT_FIVE, 2.0: serial.STOPBITS_TWO}
_LINK_ERRORS = (serial.SerialException, OSError, ValueError)


def _concat(batches: list[RawBatch], fields: tuple[str, ...]) -> RawBatch:
    """Join raw batches with the same fields end to end."""
    if len(batches) == 1:
        return batches[0]

    def cat(get):
        parts = [get(b) for b in batches]
        return None if any(p is None for p in parts) else np.concatenate(parts)

    lines: list[bytes] = []
    for b in batches:
        lines.extend(b.lines)
    return RawBatch(t_s=np.concatenate([b.t_s for b in batches]), lines=lines,
                    status=np.concatenate([b.status for b in batches]).astype(np.uint8), fields=fields,
                    values=np.concatenate([b.values for b in batches]).reshape(-1, len(fields)),
                    device_time_s=cat(lambda b: b.device_time_s), sequence=cat(lambda b: b.sequence),
                    events=[e for b in batches for e in b.events])


class LineParser:
    """Framed lines -> RawBatch for one stream, following header lines when the format has header = true.

    A header is a line whose every field is a name and none a number. The first one fixes the value fields
    when the rig lists no columns; any later one (a device restart, say) is taken only if it names every value
    field and the time and sequence fields, and then just moves them to their new positions. Header lines are
    reported as LinkEvent("header") instead of as rows.
    """

    def __init__(self, fmt: LineFormat):
        self.fmt = fmt
        self.wire_columns = fmt.columns
        self.fields = fmt.fields
        self._told_waiting = False

    def parse(self, framed: FramedLines) -> RawBatch:
        fmt = self.fmt
        if not fmt.header or not len(framed):
            return parse_lines(framed.lines, framed.t_s, fmt, framed.status, self.wire_columns, self.fields)
        events: list[LinkEvent] = []
        segments: list[tuple[int, int, tuple[str, ...] | None]] = []
        begin = 0
        for i in word_lines(framed.lines, fmt.layout).tolist():
            names = header_names(framed.lines[i], fmt) if framed.status[i] == LineStatus.OK else None
            if names is None:
                continue
            need = set(self.fields) | {f for f in (fmt.device_time_field, fmt.sequence_field) if f}
            t_s = float(framed.t_s[i])
            text = framed.lines[i].decode("ascii")
            if not need.issubset(names):
                missing = ", ".join(sorted(need - set(names)))
                events.append(LinkEvent(t_s, "bad_line", f"a line of names without {missing}, not taken as "
                                        f"the header: {text}"))
                continue
            segments.append((begin, i, self.wire_columns))
            begin, self.wire_columns = i + 1, names
            self.fields = self.fields or fmt.value_fields(names)
            events.append(LinkEvent(t_s, "header", text))
        segments.append((begin, len(framed), self.wire_columns))
        batches = []
        for start, stop, wire in segments:
            if stop > start:
                if wire is None and not self._told_waiting:
                    self._told_waiting = True
                    events.append(LinkEvent(float(framed.t_s[start]), "bad_line",
                                            "no header line seen yet: the column names are unknown"))
                batches.append(parse_lines(framed.lines[start:stop], framed.t_s[start:stop], fmt,
                                           framed.status[start:stop], wire, self.fields))
        raw = _concat(batches, self.fields) if batches else RawBatch.empty(self.fields)
        raw.events = events + raw.events
        return raw


class StreamWatch:
    """Watches successive RawBatches of one stream for lost lines (sequence gaps), a device clock that runs
    backwards, and a stream that is mostly garbage (a wrong baud rate or line ending); returns LinkEvents."""

    def __init__(self, sequence_modulo: int | None = None, garbage_window_s: float = 1.0,
                 garbage_min_lines: int = 10):
        self.sequence_modulo = sequence_modulo
        self.garbage_window_s = garbage_window_s
        self.garbage_min_lines = garbage_min_lines
        self._last_seq: int | None = None
        self._last_device_s: float | None = None
        self._window: deque[tuple[float, int, int]] = deque()
        self._garbage_reported = False

    def check(self, raw: RawBatch, now_s: float) -> list[LinkEvent]:
        """Events for this batch, read at now_s (s on the source clock)."""
        events: list[LinkEvent] = []
        ok = raw.status == LineStatus.OK
        if raw.sequence is not None:
            events += self._sequence(raw.sequence[ok & (raw.sequence >= 0)], raw.t_s[ok & (raw.sequence >= 0)])
        if raw.device_time_s is not None:
            good = ok & np.isfinite(raw.device_time_s)
            events += self._device_clock(raw.device_time_s[good], raw.t_s[good])
        garbage = int(np.count_nonzero(raw.status == LineStatus.GARBAGE))
        self._window.append((now_s, garbage, len(raw)))
        while self._window and self._window[0][0] < now_s - self.garbage_window_s:
            self._window.popleft()
        garbage_sum = sum(g for _, g, _ in self._window)
        total = sum(n for _, _, n in self._window)
        mostly = total >= self.garbage_min_lines and 2 * garbage_sum > total
        if mostly and not self._garbage_reported:
            events.append(LinkEvent(now_s, "mostly_garbage", f"{garbage_sum} of the last {total} lines are not "
                                    "text or hold no number: check baud, parity and line_ending"))
        self._garbage_reported = mostly
        return events

    def _sequence(self, seq: np.ndarray, t_s: np.ndarray) -> list[LinkEvent]:
        if not seq.size:
            return []
        known = self._last_seq is not None
        steps = np.diff(np.concatenate(([self._last_seq], seq)) if known else seq)
        self._last_seq = int(seq[-1])
        if self.sequence_modulo:
            steps %= self.sequence_modulo
        when = t_s if known else t_s[1:]
        events = []
        jumps = steps > 1
        if jumps.any():
            missing = int(np.sum(steps[jumps] - 1))
            events.append(LinkEvent(float(when[jumps][0]), "gap", f"{missing} lines missing in "
                                    f"{int(np.count_nonzero(jumps))} gaps of the device's sequence numbers"))
        back = steps <= 0
        if back.any():
            events.append(LinkEvent(float(when[back][0]), "sequence_reset", f"the sequence number repeated or "
                                    f"went back {int(np.count_nonzero(back))} times (a device restart?)"))
        return events

    def _device_clock(self, device_s: np.ndarray, t_s: np.ndarray) -> list[LinkEvent]:
        if not device_s.size:
            return []
        known = self._last_device_s is not None
        steps = np.diff(np.concatenate(([self._last_device_s], device_s)) if known else device_s)
        self._last_device_s = float(device_s[-1])
        back = steps < 0
        if not back.any():
            return []
        when = t_s if known else t_s[1:]
        return [LinkEvent(float(when[back][0]), "clock_backwards", f"the device clock went back "
                          f"{int(np.count_nonzero(back))} times, by up to {float(-steps[back].min()):.6g} s")]


class SerialLinesDriver(Driver):
    """Lines of numbers from a serial port or any pyserial URL (loop://, socket://host:port, ...).

    Args:
        fmt: the [source] format (LineFormat.from_source_table).
        clock: stamps every chunk with clock.now() and paces reconnection.
        url: a device path or pyserial URL that overrides fmt.port (a command-line choice, say).

    Raises:
        ConfigError: neither url nor fmt.port names a port.
    """

    RETRY_INTERVAL_S = 0.5  # at most one reopen attempt per this interval while the link is lost
    NOTICE_INTERVAL_S = 5.0  # a "reconnecting" event at the first failed attempt, then at most this often
    MAX_READ_BYTES = 1 << 20  # one read() returns after this much even if more is waiting

    def __init__(self, fmt: LineFormat, clock: Clock, url: str | None = None):
        self.url = url or fmt.port
        if not self.url:
            raise ConfigError("source.port", fmt.port, "a device path or pyserial URL, in [source] or given "
                              "on the command line", fmt.source_path)
        self.fmt, self.clock = fmt, clock
        self.fields = fmt.fields
        self.reconnect_attempts = 0
        self._port: serial.SerialBase | None = None
        self._opened = False
        self._splitter = LineSplitter(fmt)
        self._parser = LineParser(fmt)
        self._watch = StreamWatch(fmt.sequence_modulo)
        self._events: list[LinkEvent] = []
        self._timeout_s = 0.05
        self._lost_at_s = self._next_attempt_s = self._next_notice_s = -math.inf

    @classmethod
    def from_rig(cls, rig: Rig, clock: Clock, port: str | None = None) -> "SerialLinesDriver":
        """The driver for the rig's [source] table; `port` (a device path or pyserial URL) overrides source.port.

        Raises:
            ConfigError: the [source] table is wrong for this driver (the message names the key).
        """
        return cls(LineFormat.from_source_table(rig.source, rig.source_path), clock, url=port)

    @property
    def connected(self) -> bool:
        return self._port is not None

    def _connect(self) -> None:
        port = serial.serial_for_url(self.url, do_not_open=True)
        port.baudrate = self.fmt.baud
        port.bytesize = serial.EIGHTBITS
        port.parity = _PARITY[self.fmt.parity]
        port.stopbits = _STOP_BITS[self.fmt.stop_bits]
        port.timeout = self._timeout_s
        port.open()
        self._port = port
        self._splitter.reset(mid_stream=True)

    def _open(self) -> None:
        if self._port is not None:
            return
        try:
            self._connect()
        except _LINK_ERRORS as exc:
            raise SourceError(f"cannot open serial port {self.url!r}: {exc}") from exc
        self._opened = True
        self._events.append(LinkEvent(self.clock.now(), "connected", f"{self.url} at {self.fmt.baud} baud"))

    def _close(self) -> None:
        port, self._port, self._opened = self._port, None, False
        if port is not None:
            try:
                port.close()
            except _LINK_ERRORS:
                pass

    def _read(self, timeout_s: float) -> RawBatch:
        if not self._opened:
            raise SourceError(f"serial port {self.url!r} is not open: call open() (or use the driver in a with)")
        events, self._events = self._events, []
        frames: list[FramedLines] = []
        if self._port is None:
            self._reconnect(timeout_s, events)
        if self._port is not None:
            self._read_chunks(timeout_s, frames, events)
        raw = self._parser.parse(FramedLines.concat(frames))
        self.fields = self._parser.fields
        raw.events = events + raw.events + self._watch.check(raw, self.clock.now())
        return raw

    def _read_chunks(self, timeout_s: float, frames: list[FramedLines], events: list[LinkEvent]) -> None:
        port = self._port
        total = 0
        try:
            if timeout_s != self._timeout_s:
                port.timeout = self._timeout_s = timeout_s
            data = port.read(port.in_waiting or 1)
            while data:
                frames.append(self._splitter.feed(data, self.clock.now()))
                total += len(data)
                waiting = port.in_waiting if total < self.MAX_READ_BYTES else 0
                data = port.read(waiting) if waiting else b""
        except _LINK_ERRORS as exc:
            now = self.clock.now()
            frames.append(self._splitter.flush(now))
            self._port = None
            try:
                port.close()
            except _LINK_ERRORS:
                pass
            self._lost_at_s = now
            self._next_attempt_s = now + self.RETRY_INTERVAL_S
            self._next_notice_s = now
            events.append(LinkEvent(now, "lost", f"{self.url}: {exc}"))

    def _reconnect(self, timeout_s: float, events: list[LinkEvent]) -> None:
        now = self.clock.now()
        if now < self._next_attempt_s:
            self.clock.sleep(min(timeout_s, self._next_attempt_s - now))
            now = self.clock.now()
            if now < self._next_attempt_s:
                return
        self.reconnect_attempts += 1
        try:
            self._connect()
        except _LINK_ERRORS as exc:
            self._next_attempt_s = now + self.RETRY_INTERVAL_S
            if now >= self._next_notice_s:
                self._next_notice_s = now + self.NOTICE_INTERVAL_S
                events.append(LinkEvent(now, "reconnecting", f"{self.url}: lost {now - self._lost_at_s:.1f} s "
                                        f"ago; attempt {self.reconnect_attempts} failed ({exc})"))
            return
        events.append(LinkEvent(now, "connected", f"{self.url} again after {now - self._lost_at_s:.1f} s"))
