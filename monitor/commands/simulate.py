"""Play a simulated rig's sensor lines on a pseudo-terminal, in real time, for the serial driver (or you) to read.

The first line on stdout is the device path (e.g. /dev/pts/7): point a rig with driver = "serial_lines" at it
(`port = "/dev/pts/7"`, or a command's port option). Status goes to stderr. Ctrl-C (or SIGTERM) stops it
cleanly with exit status 0. When nothing reads the terminal its buffer (about 16 kB) fills; lines that cannot
be written for a second are dropped, and the stale unread lines are flushed, so a reader that connects late
starts with fresh lines; the drops are counted in the closing summary.
"""

from __future__ import annotations

import argparse
import math
import sys

# A backlog that could not be written for this long means nobody is reading (or too slowly): drop it.
STALL_S = 1.0
# At the end of the run, wait at most this long for a reader to take the lines still in the terminal.
DRAIN_S = 2.0
WRITE_PERIOD_S = 0.005
_TERMINATORS = {"lf": b"\n", "crlf": b"\r\n", "cr": b"\r"}


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("rig", nargs="?", default=None, help="rig file, or a bundled demo rig's name (default: the bench demo)")
    parser.add_argument("--scenario", default=None, help="a scenario of the rig's [simulation.scenarios] (faults, "
                        "another valve schedule); default: the rig's own")
    parser.add_argument("--speed", type=float, default=1.0, help="simulated seconds per real second (default 1)")
    parser.add_argument("--duration", type=float, default=None, help="seconds of simulated time to play (default: "
                        "the scenario's duration; 'inf' to run until stopped)")


def run(args: argparse.Namespace) -> int:
    from monitor.errors import ConfigError

    try:
        if not (math.isfinite(args.speed) and args.speed > 0.0):
            raise ConfigError("--speed", args.speed, "a positive, finite number of simulated seconds per second")
        if args.duration is not None and not args.duration >= 0.0:
            raise ConfigError("--duration", args.duration, "a duration of zero or more seconds (or inf)")
        from drivers.simulated import RigSimulator
        from monitor.config import load_rig
        from monitor.rigs import resolve_rig

        sim = RigSimulator(load_rig(resolve_rig(args.rig)), args.scenario)
        duration = sim.scenario.duration_s if args.duration is None else args.duration
        writer = PtyWriter(sim, args.speed, duration)
    except KeyboardInterrupt:
        return 0
    return writer.run()


class PtyWriter:
    """Owns the pseudo-terminal: paces the simulator's lines onto it on the monotonic clock."""

    def __init__(self, sim, speed: float, duration_s: float):
        from monitor.clock import MonotonicClock

        self.sim, self.speed, self.duration_s = sim, speed, duration_s
        self.clock = MonotonicClock()
        self.term = _TERMINATORS[sim.format.line_ending]
        self.written = self.dropped = self.flushed_bytes = 0
        self._lines: list[bytes] = []
        self._due_s: list[float] = []
        self._backlog = b""
        self._stalled_since: float | None = None

    def run(self) -> int:
        import os
        import signal
        import tty

        master, slave = os.openpty()
        previous = signal.signal(signal.SIGTERM, _interrupt)
        try:
            tty.setraw(slave)  # no echo, no newline translation until a reader sets its own modes
            os.set_blocking(master, False)
            self.master, self.slave = master, slave
            _say_path(os.ttyname(slave))
            s = self.sim.scenario
            _status(f"{self.sim.rig.name}: {s.name or 'base scenario'} ({s.description or 'no description'}), "
                    f"{s.sample_rate_hz:g} lines/s x{self.speed:g} for {self.duration_s:g} s; Ctrl-C stops")
            if self.sim.format.header:
                self._backlog = self.sim.sensors.header() + self.term
            self._play()
            self._drain()
        except KeyboardInterrupt:
            pass
        finally:
            signal.signal(signal.SIGTERM, previous)
            os.close(master)
            os.close(slave)
            _status(f"sent {self.written} lines, dropped {self.dropped} that no reader took"
                    + (f" (and flushed {self.flushed_bytes} unread bytes)" if self.flushed_bytes else ""))
        return 0

    def _play(self) -> None:
        sim, clock = self.sim, self.clock
        end = int(round(self.duration_s * sim.sample_rate_hz)) if math.isfinite(self.duration_s) else None
        t0 = clock.now()
        taken = 0
        while True:
            device_s = (clock.now() - t0) * self.speed
            while (end is None or sim.next_sample < end) and sim.time_s <= device_s + 0.1:
                block = sim.next_block(None if end is None else end - sim.next_sample)
                self._lines.extend(block.lines)
                self._due_s.extend(block.t_s.tolist())
            due = _count_due(self._due_s, taken, device_s)
            if due > taken or self._backlog:
                self._write(self._lines[taken:due])
                taken = due
            if taken > 100_000:
                del self._lines[:taken], self._due_s[:taken]
                taken = 0
            if end is not None and sim.next_sample >= end and taken == len(self._lines) and not self._backlog:
                return
            clock.sleep(WRITE_PERIOD_S)

    def _write(self, lines: list[bytes]) -> None:
        import os

        if lines:
            self._backlog += self.term.join(lines) + self.term
        try:
            while self._backlog:
                n = os.write(self.master, self._backlog)
                self.written += self._backlog.count(self.term[-1:], 0, n)
                self._backlog = self._backlog[n:]
        except BlockingIOError:
            now = self.clock.now()
            if self._stalled_since is None:
                self._stalled_since = now
            elif now - self._stalled_since > STALL_S:
                self._drop()
            return
        self._stalled_since = None

    def _drop(self) -> None:
        """Nobody has read for STALL_S: drop the backlog and the terminal's unread lines (a partial one too)."""
        import termios

        self.dropped += self._backlog.count(self.term[-1:])
        self.flushed_bytes += _unread(self.slave)
        termios.tcflush(self.slave, termios.TCIFLUSH)
        self._backlog = b""
        self._stalled_since = None

    def _drain(self) -> None:
        """Give a reader up to DRAIN_S to take what is still in the terminal before it closes.

        The terminal moves written bytes to its reader's side a little later, so "nothing unread" must hold
        for several checks in a row before the last line can be taken as read.
        """
        start, quiet = self.clock.now(), 0
        while quiet < 5 and self.clock.now() - start < DRAIN_S:
            self.clock.sleep(0.02)
            quiet = quiet + 1 if _unread(self.slave) == 0 else 0


def _count_due(due_s: list[float], start: int, device_s: float) -> int:
    import bisect

    return bisect.bisect_right(due_s, device_s, lo=start)


def _unread(fd: int) -> int:
    """Bytes written to the terminal that no reader has taken yet (FIONREAD on its device side)."""
    import fcntl
    import struct
    import termios

    try:
        return struct.unpack("i", fcntl.ioctl(fd, termios.FIONREAD, b"\0\0\0\0"))[0]
    except OSError:
        return 0


def _interrupt(signum, frame) -> None:
    raise KeyboardInterrupt


def _say_path(path: str) -> None:
    try:
        print(path, flush=True)
    except BrokenPipeError:
        pass


def _status(text: str) -> None:
    print(f"ejecta simulate: {text}", file=sys.stderr, flush=True)
